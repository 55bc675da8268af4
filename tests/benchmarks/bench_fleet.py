"""Benchmark: a batch of 200 generated line variations, serial against a 2-process pool.

Run: python tests/benchmarks/bench_fleet.py [N_LINES] [--report]
Without --report each line is computed (parameters, reach study, settings) and its results
JSON and register row written; with --report the HTML/PDF report is rendered too.
"""

from __future__ import annotations

import sys
import tempfile
import time
import tomllib
from pathlib import Path

from relayset.fleet.batch import run_batch
from relayset.resources import demo_lines_dir

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))
from tomlwrite import dump_toml


def make_fleet(folder: Path, n: int) -> None:
    """n variations of a demo line: length, earth resistivity and tower height changed."""
    base = tomllib.loads((demo_lines_dir() / "kessler_oxbow_115kv.toml").read_text("utf-8"))
    for k in range(n):
        d = tomllib.loads(dump_toml(base))
        d["study"]["line_id"] = f"GEN-{k:03d}"
        d["system"]["earth_resistivity"] = f"{50 + 5 * (k % 40)} ohm*m"
        (folder / f"gen_{k:03d}.toml").write_text(dump_toml(d), "utf-8")


def main() -> None:
    n = int(next((a for a in sys.argv[1:] if a.isdigit()), "200"))
    report = "--report" in sys.argv
    with tempfile.TemporaryDirectory() as tmp:
        src = Path(tmp) / "lines"
        src.mkdir()
        make_fleet(src, n)
        times = {}
        for workers in (1, 2):
            t0 = time.perf_counter()
            s = run_batch(src, Path(tmp) / f"out{workers}", workers=workers, report=report,
                          stream=open("/dev/null", "w"))
            times[workers] = time.perf_counter() - t0
            assert s.ok and s.computed == n, s.failures[:3]
            print(f"{n} lines, {workers} worker(s): {times[workers]:.1f} s "
                  f"({times[workers] / n * 1e3:.0f} ms per line)")
        print(f"speed-up on 2 cores: {times[1] / times[2]:.2f}")


if __name__ == "__main__":
    main()
