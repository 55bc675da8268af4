"""The 400 kV demo's reach study with and without BLAS thread limits, on a loaded machine.

Two CPU-bound background processes (pure Python busy loops) load the machine; the whole
``relayset reach`` process and a warm in-process study are timed in the default
environment and with ``OMP_NUM_THREADS=1 OPENBLAS_NUM_THREADS=1``. Target (issue 9): the
two take the same time within noise (no per-matrix library call that wakes a thread pool).

Figures (two busy processes, load 1.3-1.8): the warm study 16.7-17.5 ms with default threads
and 16.6-17.8 ms with limits (equal: no per-matrix call wakes a pool); the whole process
0.24-0.35 s against 0.17-0.21 s while numpy started its idle thread pool at import, and
0.21-0.25 s against 0.22-0.24 s since the command line asks for one BLAS thread unless the
user sets the variables (relayset/cli.py).

Run on demand (about a minute)::

    python tests/benchmarks/bench_reach_threads.py
"""

from __future__ import annotations

import os
import subprocess
import sys
import time

from relayset.resources import demo_lines_dir

DEMO = demo_lines_dir() / "greyholt_ivel_400kv_twin.toml"
LIMITS = {"OMP_NUM_THREADS": "1", "OPENBLAS_NUM_THREADS": "1", "MKL_NUM_THREADS": "1"}
WARM = """
import sys, timeit
from relayset.studies.geometry import build_geometry
from relayset.studies.parameters import compute_parameters
from relayset.studies.pipeline import load
from relayset.studies.reach import run_reach_study
from relayset.studies.relay import resolve_relay
from relayset.studies.settings import study_philosophy
path = sys.argv[1]
study = load(path).study
geo = build_geometry(study, path)
params = compute_parameters(geo)
relay = resolve_relay(study, params)
phil = study_philosophy(study, path)
run = lambda: run_reach_study(study, geo, params, relay, phil, source=path)
run()
print(min(timeit.repeat(run, number=1, repeat=7)))
"""


def _env(limited: bool) -> dict[str, str]:
    env = {k: v for k, v in os.environ.items() if k not in LIMITS}
    if limited:
        env.update(LIMITS)
    return env


def whole_process_s(limited: bool, repeat: int = 3) -> float:
    runs = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        subprocess.run([sys.executable, "-m", "relayset.cli", "reach", str(DEMO)], check=True,
                       capture_output=True, env=_env(limited))
        runs.append(time.perf_counter() - t0)
    return min(runs)


def warm_study_s(limited: bool) -> float:
    out = subprocess.run([sys.executable, "-c", WARM, str(DEMO)], check=True,
                         capture_output=True, text=True, env=_env(limited)).stdout
    return float(out.split()[-1])


def main() -> None:
    burners = [subprocess.Popen([sys.executable, "-c", "while True: pass"])
               for _ in range(2)]
    try:
        time.sleep(1.0)
        print(f"load average with two busy processes: {os.getloadavg()[0]:.1f}")
        for limited in (False, True):
            name = "thread limits   " if limited else "default threads "
            print(f"{name}: relayset reach {whole_process_s(limited):6.2f} s whole process, "
                  f"study {1e3 * warm_study_s(limited):7.1f} ms warm (best of 7)")
    finally:
        for p in burners:
            p.kill()
            p.wait()


if __name__ == "__main__":
    main()
