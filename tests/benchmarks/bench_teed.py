"""Speed of a three-terminal (teed) line: the whole process and the growth with sections.

1. The whole ``relayset settings`` process of a teed line (reach study, zone 1/zone 2 and
   their verification by fault simulation over every infeed state, source case, load case
   and earth resistivity) on the invented test study of tests/test_teed_study.py with lines
   beyond each remote bus: CPU of the child process, target 3 s (issue 21); and the whole
   ``relayset report`` process of the teed demo (HTML and PDF/A-3b; CPU of the process
   and its PDF helper, and wall time).
2. ``solve_teed_sweep`` with 1 to 50 sections in each leg (shunt admittance on, every fault
   type, 21 locations, 4 resistances, 3 source cases): CPU per call, warm; it should grow
   no faster than linearly with the sections.

CPU time, not wall time, is the measure: the machine may be shared. Run on demand::

    OMP_NUM_THREADS=1 OPENBLAS_NUM_THREADS=1 python tests/benchmarks/bench_teed.py
"""

from __future__ import annotations

import math
import os
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))
from test_teed_study import TEED_TOML

from relayset.physics.faults import FAULT_TYPES
from relayset.physics.network import LineCascade, Source
from relayset.physics.teed import TeedLine, solve_teed_sweep

TARGET_PROCESS_S = 3.0
ADJACENT = """
[[adjacent_lines]]
name = "Velmar - Tarn 132 kV"
z1 = "9 + 24j ohm"
bus = "Velmar"

[[adjacent_lines]]
name = "Oakrest - Lyle 132 kV"
z1 = "12 + 40j ohm"
bus = "Oakrest"

[[adjacent_lines]]
name = "Wrenfold - Moss 132 kV"
z1 = "6 + 20j ohm"
bus = "Wrenfold"
"""


def whole_process() -> float:
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "teed.toml"
        path.write_text(TEED_TOML + ADJACENT, encoding="utf-8")
        before = resource.getrusage(resource.RUSAGE_CHILDREN)
        subprocess.run([sys.executable, "-c", "import sys; from relayset.cli import main; "
                        "sys.exit(main())", "settings", str(path)], check=False,
                       stdout=subprocess.DEVNULL, env=os.environ.copy())
        after = resource.getrusage(resource.RUSAGE_CHILDREN)
    return (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)


def report_process() -> tuple[float, float]:
    """CPU (the process and its PDF helper) and wall time of ``relayset report`` on the
    teed demo [s]."""
    from relayset.resources import demo_lines_dir

    demo = demo_lines_dir() / "dunmarrow_keswyn_132kv_teed.toml"
    with tempfile.TemporaryDirectory() as tmp:
        before = resource.getrusage(resource.RUSAGE_CHILDREN)
        t = time.perf_counter()
        subprocess.run([sys.executable, "-c", "import sys; from relayset.cli import main; "
                        "sys.exit(main())", "report", str(demo), "-o", tmp], check=False,
                       stdout=subprocess.DEVNULL, env=os.environ.copy())
        wall = time.perf_counter() - t
        after = resource.getrusage(resource.RUSAGE_CHILDREN)
    return (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime), wall


def leg(n_sec: int, length_m: float, rng) -> LineCascade:
    z = (np.diag([0.09, 0.088, 0.092]) + 0.05 + 1j * (np.diag([0.25, 0.245, 0.255]) + 0.15)) / 1e3
    c = (np.diag([10.2, 10.5, 10.2]) - 1.6) * 1e-12
    y = 1j * 2 * math.pi * 50 * c
    perms = [[0, 1, 2], [1, 2, 0], [2, 0, 1]]
    zs = np.stack([z[np.ix_(perms[k % 3], perms[k % 3])] for k in range(n_sec)])
    ys = np.stack([y[np.ix_(perms[k % 3], perms[k % 3])] for k in range(n_sec)])
    return LineCascade(zs, np.full(n_sec, length_m / n_sec) * rng.uniform(0.9, 1.1, n_sec), ys)


def sections() -> list[tuple[int, float]]:
    rng = np.random.default_rng(1)
    src = (Source(1.5 + 12j, 2 + 20j), Source(2.5 + 18j, 3 + 28j), Source(4 + 30j, 5 + 40j))
    out = []
    for n in (1, 5, 10, 20, 50):
        line = TeedLine((leg(n, 25e3, rng), leg(n, 35e3, rng), leg(n, 15e3, rng)))
        kw = dict(v_nominal_v=132e3, fault_leg="R", fault_types=FAULT_TYPES,
                  m=np.linspace(0, 1, 21), r_fault_ohm=[0.0, 5.0, 10.0, 20.0],
                  source_scale=np.array([0.5, 1.0, 2.0]))
        solve_teed_sweep(line, src, **kw)  # warm
        t = time.process_time()
        reps = 5
        for _ in range(reps):
            solve_teed_sweep(line, src, **kw)
        out.append((n, (time.process_time() - t) / reps))
    return out


if __name__ == "__main__":
    cpu = whole_process()
    print(f"relayset settings (teed line), whole process: {cpu:.2f} s CPU (target "
          f"{TARGET_PROCESS_S:g} s) {'ok' if cpu < TARGET_PROCESS_S else 'OVER'}")
    rep_cpu, rep_wall = report_process()
    print(f"relayset report (teed demo), whole process: {rep_cpu:.2f} s CPU, "
          f"{rep_wall:.2f} s wall")
    for n, s in sections():
        print(f"solve_teed_sweep, {n:2d} sections per leg: {1e3 * s:7.2f} ms CPU")
