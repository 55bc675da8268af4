"""Benchmark: line parameters of one geometry after import, and command-line start-up.

Run: python tests/benchmarks/bench_params.py
"""

from __future__ import annotations

import subprocess
import sys
import time
import timeit

from relayset.api import load_study
from relayset.resources import demo_lines_dir
from relayset.studies.geometry import build_geometry
from relayset.studies.parameters import compute_parameters


def main() -> None:
    for name in ("ashcombe_brenwick_132kv.toml", "elsford_fallowby_230kv_double.toml",
                 "greyholt_ivel_400kv_twin.toml", "harlow_quay_tessmoor_132kv_towers.toml"):
        path = demo_lines_dir() / name
        study = load_study(path).study
        geo = build_geometry(study, str(path))
        compute_parameters(geo)  # warm up
        n = 20 if "towers" in name else 200  # two-layer earth: an integration per call
        t = timeit.timeit(lambda g=geo: compute_parameters(g), number=n) / n
        t_all = timeit.timeit(lambda s=study, p=path: compute_parameters(build_geometry(s, str(p))),
                              number=n) / n
        print(f"{name:40s} parameters {t * 1e3:7.3f} ms   geometry+parameters "
              f"{t_all * 1e3:7.3f} ms")
    runs = []
    for _ in range(5):
        t0 = time.perf_counter()
        subprocess.run([sys.executable, "-m", "relayset.cli", "--help"], check=True,
                       capture_output=True)
        runs.append(time.perf_counter() - t0)
    print(f"relayset --help: best {min(runs) * 1e3:.0f} ms, median "
          f"{sorted(runs)[2] * 1e3:.0f} ms (whole process)")


if __name__ == "__main__":
    main()
