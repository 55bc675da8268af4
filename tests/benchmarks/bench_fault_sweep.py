"""Speed of the batched fault sweep against the per-case reference solver.

Default sweep: 10 fault types x 101 locations x 4 fault resistances x 3 source cases x
1 load case on a 3-section untransposed single-circuit line (12 120 cases). Target for the
batched sweep: under 50 ms on one core.

Run on demand, single-threaded BLAS::

    OMP_NUM_THREADS=1 OPENBLAS_NUM_THREADS=1 python tests/benchmarks/bench_fault_sweep.py
    OMP_NUM_THREADS=1 OPENBLAS_NUM_THREADS=1 pytest tests/benchmarks/bench_fault_sweep.py

The ``--quick`` option times the reference on every tenth case and scales the figure.
"""

from __future__ import annotations

import itertools
import sys
import timeit
from pathlib import Path

import numpy as np

from relayset.physics.faults import FAULT_TYPES
from relayset.physics.network import LineCascade, Source, solve_fault_sweep

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))  # tests/: reference solver
from reference_solver import solve_fault_single

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


def test_bench_batched_sweep(benchmark):
    sweep = benchmark(run_sweep)
    assert sweep.v_s.shape == (10, 101, 4, 3, 1, 3)


def test_bench_per_case_reference(benchmark):
    n = benchmark.pedantic(run_per_case, kwargs={"step": 10}, rounds=1, iterations=1)
    assert n > 0


def main(argv: list[str]) -> None:
    step = 10 if "--quick" in argv else 1
    run_sweep()  # warm-up (imports, BLAS initialisation)
    t_batch = min(timeit.repeat(run_sweep, number=1, repeat=20))
    t0 = timeit.default_timer()
    n = run_per_case(step)
    t_loop = (timeit.default_timer() - t0) * step
    total = len(FAULT_TYPES) * M.size * R_FAULT.size * SCALE.size * DELTA.size
    print(f"cases: {total}")
    print(f"batched sweep:         {1e3 * t_batch:9.1f} ms (best of 20)")
    print(f"per-case reference:    {1e3 * t_loop:9.1f} ms"
          + (f" (scaled from {n} cases)" if step > 1 else ""))
    print(f"speed-up:              {t_loop / t_batch:9.0f} x")


if __name__ == "__main__":
    main(sys.argv[1:])
