"""Speed and memory of the fault sweep and of the reach study built on it.

1. The batched solver against the per-case reference solver (the baseline): 10 fault types
   x 101 locations x 4 fault resistances x 3 source cases x 1 load case on a 3-section
   untransposed single-circuit line (12 120 cases).
2. The reach study of the 132 kV demo with one load case (12 120 distinct fault cases per
   arrangement, all three arrangements and condensing included), warm, in process.
   Target (issue 9): under 10 ms on one core.
3. The same study at a 0.12 % location step (100 080 cases per arrangement). Target:
   under 100 ms.
4. Peak memory of a whole ``relayset reach`` process at a 0.01 % step (the smallest the
   study accepts; 3.6 million cases), and with the most cases one location may have.
   Target: under 300 MB.

Run on demand, single-threaded BLAS::

    OMP_NUM_THREADS=1 OPENBLAS_NUM_THREADS=1 python tests/benchmarks/bench_fault_sweep.py
    OMP_NUM_THREADS=1 OPENBLAS_NUM_THREADS=1 pytest tests/benchmarks/bench_fault_sweep.py

``--quick`` times the reference on every tenth case and scales the figure; ``--no-memory``
skips item 4 (about a minute).

Figures (2 cores, idle): item 2 10.3 ms -> 6.9 ms and item 3 72.9 ms -> 64.7 ms when the
condensing took the six loops in one pass (one masked nanargmax per pick instead of one per
loop and pick); items 2 and 3 were 42-64 ms and 291-1046 ms before the modal chain matrices.
Item 4: 82 MB and 168 MB peak.
"""

from __future__ import annotations

import itertools
import os
import subprocess
import sys
import tempfile
import timeit
import tomllib
from pathlib import Path

import numpy as np

from relayset.physics.faults import FAULT_TYPES
from relayset.physics.network import LineCascade, Source, solve_fault_sweep

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))  # tests/: reference solver
from reference_solver import solve_fault_single
from tomlwrite import dump_toml

V_NOM = 132e3
Z_ABC_KM = np.array(
    [
        [0.090 + 0.400j, 0.050 + 0.150j, 0.050 + 0.120j],
        [0.050 + 0.150j, 0.088 + 0.395j, 0.050 + 0.155j],
        [0.050 + 0.120j, 0.050 + 0.155j, 0.092 + 0.405j],
    ]
)
PERMS = [[0, 1, 2], [1, 2, 0], [2, 0, 1]]
LINE = LineCascade(np.stack([Z_ABC_KM[np.ix_(p, p)] / 1e3 for p in PERMS]),
                   np.array([30e3, 45e3, 25e3]))
SRC_S = Source(1.5 + 18j, 2.5 + 24j)
SRC_R = Source(2.0 + 25j, 3.0 + 30j)
M = np.linspace(0.0, 1.0, 101)
R_FAULT = np.array([0.0, 5.0, 10.0, 20.0])
SCALE = np.array([0.5, 1.0, 2.0])
DELTA = np.radians([10.0])
DEMO = "ashcombe_brenwick_132kv.toml"


def run_sweep():
    return solve_fault_sweep(LINE, SRC_S, SRC_R, v_nominal_v=V_NOM, fault_types=FAULT_TYPES,
                             m=M, r_fault_ohm=R_FAULT, r_phase_ohm=0.0, source_scale=SCALE,
                             transfer_angle_rad=DELTA)


def run_per_case(step: int = 1) -> int:
    cases = list(itertools.product(FAULT_TYPES, M, R_FAULT, SCALE, DELTA))[::step]
    for ft, m, rf, sc, d in cases:
        solve_fault_single(LINE, SRC_S, SRC_R, v_nominal_v=V_NOM, fault_type=ft, m=m,
                           r_fault_ohm=rf, source_scale=sc, transfer_angle_rad=d)
    return len(cases)


def demo_variant(folder: Path, step_pct: float) -> Path:
    """The 132 kV demo with one load case and the given location step, written to folder."""
    from relayset.resources import demo_lines_dir

    data = tomllib.loads((demo_lines_dir() / DEMO).read_text("utf-8"))
    phil = data["study"].get("philosophy", "default")
    if phil != "default":
        data["study"]["philosophy"] = str(demo_lines_dir() / phil)
    data["load"]["transfer_angles"] = ["10 deg"]
    data.setdefault("reach_study", {})["location_step_pct"] = step_pct
    path = folder / f"bench_{step_pct:g}.toml"
    path.write_text(dump_toml(data), "utf-8")
    return path


def widest_location_variant(folder: Path) -> Path:
    """The 230 kV double-circuit demo at the most cases one location may have (the smallest
    chunk of the sweep): 10 types x 100 resistances x 100 source cases x 2 loads, relays at
    both ends, shunt capacitance on."""
    from relayset.resources import demo_lines_dir

    name = "elsford_fallowby_230kv_double.toml"
    data = tomllib.loads((demo_lines_dir() / name).read_text("utf-8"))
    phil = data["study"].get("philosophy", "default")
    if phil != "default":
        data["study"]["philosophy"] = str(demo_lines_dir() / phil)
    rs = data.setdefault("reach_study", {})
    rs["fault_resistances"] = [f"{r} ohm" for r in range(100)]
    rs["source_cases"] = [{"name": f"c{k}", "scale": 1.0 + k / 100} for k in range(100)]
    rs["location_step_pct"] = 12.5
    rs["shunt_capacitance"] = True
    data["relay"]["end"] = "both"
    data.setdefault("load", {})["transfer_angles"] = ["0 deg", "10 deg"]
    path = folder / "bench_widest.toml"
    path.write_text(dump_toml(data), "utf-8")
    return path


def reach_study_runner(path: Path):
    """A warm, in-process reach study of a study file (parsing and parameters done once)."""
    from relayset.studies.geometry import build_geometry
    from relayset.studies.parameters import compute_parameters
    from relayset.studies.pipeline import load
    from relayset.studies.reach import run_reach_study
    from relayset.studies.relay import resolve_relay
    from relayset.studies.settings import study_philosophy

    src = str(path)
    study = load(path).study
    geo = build_geometry(study, src)
    params = compute_parameters(geo)
    relay = resolve_relay(study, params)
    philosophy = study_philosophy(study, src)

    def run():
        return run_reach_study(study, geo, params, relay, philosophy, source=src)

    return run


def peak_rss_mb(path: Path) -> float:
    """Peak resident memory of a whole ``relayset reach`` process [MB] (Linux)."""
    code = ("import resource, sys\nfrom relayset.cli import main\n"
            "rc = main(['reach', sys.argv[1]])\n"
            "print(resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024, rc)")
    out = subprocess.run([sys.executable, "-c", code, str(path)], check=True,
                         capture_output=True, text=True, env=os.environ.copy()).stdout
    return float(out.split()[-2])


def test_bench_batched_sweep(benchmark):
    sweep = benchmark(run_sweep)
    assert sweep.v_s.shape == (10, 101, 4, 3, 1, 3)


def test_bench_per_case_reference(benchmark):
    n = benchmark.pedantic(run_per_case, kwargs={"step": 10}, rounds=1, iterations=1)
    assert n > 0


def test_bench_reach_study_default(benchmark, tmp_path):
    res = benchmark(reach_study_runner(demo_variant(tmp_path, 1.0)))
    assert res.cases_solved == 3 * 12120


def main(argv: list[str]) -> None:
    step = 10 if "--quick" in argv else 1
    run_sweep()  # warm-up (imports, BLAS initialisation)
    t_batch = min(timeit.repeat(run_sweep, number=1, repeat=20))
    t0 = timeit.default_timer()
    n = run_per_case(step)
    t_loop = (timeit.default_timer() - t0) * step
    total = len(FAULT_TYPES) * M.size * R_FAULT.size * SCALE.size * DELTA.size
    print(f"solver, cases: {total}")
    print(f"  batched sweep (all results):  {1e3 * t_batch:9.1f} ms (best of 20)")
    print(f"  per-case reference:           {1e3 * t_loop:9.1f} ms"
          + (f" (scaled from {n} cases)" if step > 1 else ""))
    print(f"  speed-up:                     {t_loop / t_batch:9.0f} x")
    with tempfile.TemporaryDirectory() as tmp:
        for pct in (1.0, 0.12):
            run = reach_study_runner(demo_variant(Path(tmp), pct))
            res = run()
            t = min(timeit.repeat(run, number=1, repeat=20 if pct >= 1 else 5))
            per = res.cases_solved // 3
            print(f"reach study, {per} cases per arrangement x 3 arrangements, condensed: "
                  f"{1e3 * t:7.1f} ms (best of {20 if pct >= 1 else 5})")
        if "--no-memory" not in argv:
            path = demo_variant(Path(tmp), 0.01)
            t0 = timeit.default_timer()
            rss = peak_rss_mb(path)
            print(f"relayset reach at 0.01 % step (3 x 1 200 120 cases): peak RSS {rss:.0f} MB,"
                  f" {timeit.default_timer() - t0:.1f} s whole process")
            path = widest_location_variant(Path(tmp))
            t0 = timeit.default_timer()
            rss = peak_rss_mb(path)
            print(f"relayset reach, 230 kV double circuit, both ends, 200 000 cases at each "
                  f"location (6 million cases): peak RSS {rss:.0f} MB, "
                  f"{timeit.default_timer() - t0:.1f} s whole process")


if __name__ == "__main__":
    main(sys.argv[1:])
