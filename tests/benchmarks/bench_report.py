"""Benchmark: the calculation report, whole process (start-up, compute, HTML, PDF/A, write).

Run: OMP_NUM_THREADS=1 OPENBLAS_NUM_THREADS=1 python tests/benchmarks/bench_report.py
Targets (issue 11): one report < 2 s; a 10-line batch < 12 s.
"""

from __future__ import annotations

import subprocess
import sys
import tempfile
import time
import tomllib
from pathlib import Path

from relayset.resources import demo_lines_dir, demo_studies

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
from tomlwrite import dump_toml


def _run(args: list[str]) -> float:
    t0 = time.perf_counter()
    subprocess.run([sys.executable, "-m", "relayset.cli", "report", *args], check=True,
                   capture_output=True)
    return time.perf_counter() - t0


def _ten_lines(folder: Path) -> list[str]:
    """Ten studies: the demo lines under new line IDs (same physics, distinct reports)."""
    paths = []
    demos = demo_studies()
    for k in range(10):
        src = demos[k % len(demos)]
        data = tomllib.loads(src.read_text("utf-8"))
        data["study"]["line_id"] += f"-{k}"
        phil = data["study"].get("philosophy", "default")
        if phil != "default":
            data["study"]["philosophy"] = str(demo_lines_dir() / phil)
        out = folder / f"line{k}.toml"
        out.write_text(dump_toml(data), "utf-8")
        paths.append(str(out))
    return paths


def main() -> None:
    with tempfile.TemporaryDirectory() as tmp:
        tmp_p = Path(tmp)
        for src in demo_studies():
            runs = [_run([str(src), "-o", str(tmp_p / "one")]) for _ in range(3)]
            print(f"{src.name:40s} one report: best {min(runs):5.2f} s, "
                  f"median {sorted(runs)[1]:5.2f} s (whole process)")
        batch = _ten_lines(tmp_p)
        runs = [_run([*batch, "-o", str(tmp_p / "batch")]) for _ in range(2)]
        print(f"10-line batch: best {min(runs):5.2f} s (whole process, "
              f"{len(list((tmp_p / 'batch').glob('*.pdf')))} PDFs)")


if __name__ == "__main__":
    main()
