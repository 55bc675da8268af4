"""Benchmark: settings with verification for one line written as more and more sections.

Run: OMP_NUM_THREADS=1 OPENBLAS_NUM_THREADS=1 python tests/benchmarks/bench_sections.py

Two lines, each run as a whole process (`relayset settings FILE`, which closes the settings
by the fault simulation and verifies them), CPU time of the child (user + system):

- the 132 kV overhead demo (ashcombe_brenwick_132kv.toml) on [towers] tables, written as 1,
  10, 25 and 50 equal sections of one phase order (the same line every time: see the
  identity tests in tests/test_towers.py);
- the cable demo (brackenholt_saltmarsh_street_132kv_cable.toml: lattice, compact poles and
  a 4 km cable), its 5 sections each cut into equal parts to give 5, 10, 25 and 50 sections.

Issue 21 asks for no quadratic growth in the number of sections: the script prints the time
per run and the added time per added section between neighbouring runs; with linear growth
the latter stays about constant, with quadratic growth it grows with the count.
"""

from __future__ import annotations

import os
import resource
import subprocess
import sys
import tempfile
import time
import tomllib
from pathlib import Path

from relayset.resources import demo_lines_dir

HERE = Path(__file__).resolve()
sys.path.insert(0, str(HERE.parents[1]))
from tomlwrite import dump_toml  # noqa: E402

MEASURE = r"""
import resource, subprocess, sys
r = subprocess.run(sys.argv[1:], stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
u = resource.getrusage(resource.RUSAGE_CHILDREN)
print(r.returncode, u.ru_utime + u.ru_stime, u.ru_maxrss / 1024)
"""
RUN = "import sys; from relayset.cli import main; sys.exit(main(['settings', sys.argv[1]]))"


def overhead(n: int) -> dict:
    data = tomllib.loads((demo_lines_dir() / "ashcombe_brenwick_132kv.toml").read_text("utf-8"))
    positions = data["circuits"][0].pop("positions")
    data["towers"] = {"lattice": {"positions": {"1": positions},
                                  "shield_wires": data.pop("shield_wires")}}
    data["line"]["sections"] = [{"length": f"{80 / n!r} km", "order": ["A", "B", "C"],
                                 "tower": "lattice"} for _ in range(n)]
    return data


def cable(n: int) -> dict:
    name = "brackenholt_saltmarsh_street_132kv_cable.toml"
    data = tomllib.loads((demo_lines_dir() / name).read_text("utf-8"))
    secs = data["line"]["sections"]
    parts = [n // len(secs) + (1 if k < n % len(secs) else 0) for k in range(len(secs))]
    out = []
    for sec, p in zip(secs, parts, strict=True):
        km = float(sec["length"].split()[0])
        out += [dict(sec, length=f"{km / p!r} km") for _ in range(p)]
    data["line"]["sections"] = out
    return data


def measure(path: Path) -> tuple[float, float, float]:
    env = dict(os.environ)
    for k in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
        env.setdefault(k, "1")
    t0 = time.perf_counter()
    out = subprocess.run([sys.executable, "-c", MEASURE, sys.executable, "-c", RUN, str(path)],
                         capture_output=True, text=True, env=env, check=True)
    wall = time.perf_counter() - t0
    rc, cpu, peak = out.stdout.split()
    if int(rc) not in (0, 3):  # 3: failed checks (the verdict), still a full run
        raise SystemExit(f"{path}: exit {rc}")
    return float(cpu), wall, float(peak)


def main() -> None:
    assert resource  # the helper process uses it
    with tempfile.TemporaryDirectory() as tmp:
        for label, build, counts in (("132 kV overhead, one tower", overhead, (1, 10, 25, 50)),
                                     ("132 kV with a cable section", cable, (5, 10, 25, 50))):
            print(f"{label}: settings with verification, whole process")
            print(f"  {'sections':>8} {'CPU [s]':>8} {'wall [s]':>8} {'peak [MB]':>9} "
                  f"{'added CPU per added section [ms]':>34}")
            prev = None
            for n in counts:
                path = Path(tmp) / f"{build.__name__}_{n}.toml"
                path.write_text(dump_toml(build(n)), "utf-8")
                cpu, wall, peak = measure(path)
                per = "" if prev is None else f"{1e3 * (cpu - prev[1]) / (n - prev[0]):34.1f}"
                print(f"  {n:8d} {cpu:8.2f} {wall:8.2f} {peak:9.0f} {per}")
                prev = (n, cpu)


if __name__ == "__main__":
    main()
