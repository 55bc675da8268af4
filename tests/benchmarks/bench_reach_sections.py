"""Benchmark: peak memory and time of `relayset reach` on a line of 1,000 sections.

Run: python tests/benchmarks/bench_reach_sections.py [N_SECTIONS] [--plain]

Builds, from the demo studies, a 230 kV double circuit and a 132 kV single circuit of
N_SECTIONS (default 1,000, the input limit) transposition sections with shunt capacitance
(tests/route_sections.py), at the default location step (1 %) and at 0.1 %, and runs
`relayset reach FILE` on each as a whole process. The peak resident memory is the child's
(getrusage RUSAGE_CHILDREN of a helper process that starts nothing else); the time is the
whole process's. ``--plain`` also runs each with the unchunked chain matrices (every part
of every section for every fault, the computation before issue 22) for comparison.

Target (issue 22): under 300 MB for 1,000 sections at the default step, single and double
circuit, with results identical to the unchunked computation (tests/test_chain_sections.py).
"""

from __future__ import annotations

import os
import subprocess
import sys
import tempfile
import time
import tomllib
from pathlib import Path

from relayset.resources import demo_lines_dir

HERE = Path(__file__).resolve()
sys.path.insert(0, str(HERE.parents[1]))
from route_sections import route_sections  # noqa: E402

from tomlwrite import dump_toml  # noqa: E402

# A helper process: runs the reach command in its one child and prints that child's peak RSS.
MEASURE = r"""
import resource, subprocess, sys
r = subprocess.run(sys.argv[1:], stdout=subprocess.DEVNULL)
print(r.returncode, resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss / 1024)
"""

REACH = r"""
import sys
if sys.argv[1] == "plain":
    from relayset.physics import chain, network
    def plain(z, y, length_m, m):
        left, right = chain.split_lengths(length_m, m)
        return (chain.chain_products(z, y, left, reverse=False),
                chain.chain_products(z, y, right, reverse=True))
    network.fault_chain_products = plain
from relayset.cli import main
sys.exit(main(["reach", sys.argv[2]]))
"""

CASES = (("230 kV double circuit", "elsford_fallowby_230kv_double.toml"),
         ("132 kV single circuit", "ashcombe_brenwick_132kv.toml"))


def study(folder: Path, name: str, n: int, step_pct: float | None) -> Path:
    data = tomllib.loads((demo_lines_dir() / name).read_text("utf-8"))
    phil = data["study"].get("philosophy", "default")
    if phil != "default":
        data["study"]["philosophy"] = str(demo_lines_dir() / phil)
    route_sections(data, n)
    if step_pct is not None:
        data["reach_study"]["location_step_pct"] = step_pct
    path = folder / f"{Path(name).stem}_{n}_{step_pct}.toml"
    path.write_text(dump_toml(data), "utf-8")
    return path


def measure(path: Path, how: str) -> tuple[float, float]:
    env = dict(os.environ)
    for k in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
        env.setdefault(k, "1")
    t0 = time.perf_counter()
    out = subprocess.run([sys.executable, "-c", MEASURE, sys.executable, "-c", REACH, how,
                          str(path)], capture_output=True, text=True, env=env, check=True)
    wall = time.perf_counter() - t0
    rc, peak = out.stdout.split()
    if rc != "0":
        raise SystemExit(f"relayset reach {path} failed ({rc})")
    return float(peak), wall


def main() -> None:
    args = sys.argv[1:]
    n = int(args[0]) if args and args[0].isdigit() else 1000
    hows = ("sections", "plain") if "--plain" in args else ("sections",)
    print(f"relayset reach, {n} sections with shunt capacitance, whole process; load average "
          f"{os.getloadavg()[0]:.2f}")
    with tempfile.TemporaryDirectory() as tmp:
        for label, name in CASES:
            for step in (None, 0.1):
                path = study(Path(tmp), name, n, step)
                for how in hows:
                    peak, wall = measure(path, how)
                    what = "unchunked" if how == "plain" else "bounded  "
                    print(f"  {label}, step {step or 1.0:g} %, {what}: peak {peak:5.0f} MB, "
                          f"{wall:5.1f} s")


if __name__ == "__main__":
    main()
