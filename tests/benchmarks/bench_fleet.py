"""Benchmark: a batch of 200 generated line variations, serial against a 2-process pool.

Run: python tests/benchmarks/bench_fleet.py [N_LINES] [--report]
Without --report each line is computed (parameters, reach study, settings, verification) and
its results JSON and register row written; with --report the HTML/PDF report is rendered too.

Both runs use one BLAS thread per process (set here before numpy loads), so the serial run is
the honest single-core baseline of the pool's processes. Each figure is printed with the load
average before and after it: other processes on the machine steal time from both runs, and the
speed-up is only meaningful when the load was low (below about 1.5 on 2 cores). The parent's
CPU time in the pool run shows how much serial work is left in the process that collects the
results and writes the register.
"""

from __future__ import annotations

import os

for _k in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_k, "1")

import sys  # noqa: E402
import tempfile  # noqa: E402
import time  # noqa: E402
import tomllib  # noqa: E402
from pathlib import Path  # noqa: E402

from relayset.fleet.batch import run_batch  # noqa: E402
from relayset.resources import demo_lines_dir  # noqa: E402

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))
from tomlwrite import dump_toml  # noqa: E402


def make_fleet(folder: Path, n: int) -> None:
    """n variations of a demo line: line ID and earth resistivity changed."""
    base = tomllib.loads((demo_lines_dir() / "kessler_oxbow_115kv.toml").read_text("utf-8"))
    for k in range(n):
        d = tomllib.loads(dump_toml(base))
        d["study"]["line_id"] = f"GEN-{k:03d}"
        d["system"]["earth_resistivity"] = f"{50 + 5 * (k % 40)} ohm*m"
        (folder / f"gen_{k:03d}.toml").write_text(dump_toml(d), "utf-8")


def _load() -> str:
    return f"{os.getloadavg()[0]:.2f}"


def main() -> None:
    n = int(next((a for a in sys.argv[1:] if a.isdigit()), "200"))
    report = "--report" in sys.argv
    print(f"{n} lines, {'with' if report else 'without'} reports, {os.cpu_count()} cores")
    with tempfile.TemporaryDirectory() as tmp:
        src = Path(tmp) / "lines"
        src.mkdir()
        make_fleet(src, n)
        times = {}
        for workers in (1, 2):
            load0 = _load()
            c0, t0 = time.process_time(), time.perf_counter()
            with open(os.devnull, "w") as null:
                s = run_batch(src, Path(tmp) / f"out{workers}", workers=workers,
                              report=report, stream=null)
            times[workers] = time.perf_counter() - t0
            cpu = time.process_time() - c0
            assert s.ok and s.computed == n, s.failures[:3]
            print(f"{workers} worker(s): {times[workers]:.1f} s "
                  f"({times[workers] / n * 1e3:.0f} ms per line), CPU of this process "
                  f"{cpu:.1f} s, load average {load0} before, {_load()} after")
        print(f"speed-up on 2 cores: {times[1] / times[2]:.2f}")


if __name__ == "__main__":
    main()
