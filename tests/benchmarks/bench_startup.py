"""Whole-process start-up of the commands, and where the import time goes.

Targets (issue 9): ``relayset params FILE`` under 0.35 s and ``relayset reach FILE`` under
0.5 s as whole processes (400 kV demo). Prints, per command, the best and median wall time
and CPU time (user + sys) of several runs and, from ``python -X importtime`` (best of a few
runs per module), the heaviest imports. ``--baseline DIR`` runs another source tree (for
example ``git archive main | tar -x -C DIR``) interleaved with this one, so that both see
the same machine load: on a shared machine only figures taken in one run compare.

Run on demand::

    python tests/benchmarks/bench_startup.py [--repeat 15] [--baseline DIR]

Figures (2 cores; other engineers' work loading the machine, load average 1.7-2.4; the
400 kV demo; both trees with their bytecode compiled; the template cache warm). Instructions
from ``valgrind --tool=callgrind`` do not depend on the load; wall times are hyperfine's
(30 runs) and this script's (20 interleaved runs):

==========================  ==============  ===============  ======================
relayset ...                instructions    wall mean (min)  median wall, user+sys
==========================  ==============  ===============  ======================
params, before (main)       1.438e9         425 ms (352)     389 ms, 392 ms
params, after               1.173e9 (-18%)  370 ms (318)     364 ms, 364 ms
reach, before (main)        1.677e9         469 ms (373)     447 ms, 442 ms
reach, after                1.483e9 (-12%)  422 ms (351)     410 ms, 418 ms
--help / earth-models       -               -                64 -> 32 ms
==========================  ==============  ===============  ======================

At that point the libraries ``params`` could not do without (numpy, pydantic, jinja2, and
importlib.metadata, which pydantic's plugin discovery imports) cost 0.874e9 instructions, 343 ms
mean wall in the same hyperfine run. Of that floor, jinja2 was 0.126e9 and importlib.metadata
0.098e9. Without bytecode (``PYTHONDONTWRITEBYTECODE=1`` and an
editable checkout with no ``__pycache__``) compiling relayset's own modules adds 0.26e9
instructions (about 20-70 ms) to every run; a wheel install compiles them once. In that
condition (as in these worktrees, hyperfine, 25 runs): ``params`` 1.793e9 -> 1.434e9
instructions, 473 -> 368 ms mean (352 -> 295 ms min); ``reach`` 513 -> 478 ms mean.

Before: every ``params`` imported the reach study, settings, verification and their results
types and physics (the pipeline and ``relayset.results`` imported them at the top), read the
version through ``importlib.metadata`` and compiled its Jinja2 template (20-40 ms); every
``reach`` also loaded numpy.ma through ``np.unique``.
After: each command imports what it runs; the version comes from ``relayset/_version.py``;
compiled console templates are cached in the user's cache folder; the study-file and
philosophy models are built from real annotations (pydantic no longer compiles each from text).

Later the input layer dropped pydantic for its own validation (``relayset/inputs/schema.py``,
frozen dataclasses): ``python -c "import relayset.inputs.study_file"`` 0.684e9 -> 0.275e9
instructions (of which about 0.11e9 is dataclasses building the ~25 table classes), and
importlib.metadata is no longer loaded. Whole processes, both trees run from source with their
bytecode compiled (cachegrind instructions; hyperfine, 40 runs interleaved, load about 1):
``params`` (132 kV demo) 1.195e9 -> 0.825e9 instructions, 324 -> 243 ms mean (215 -> 172 ms
min), through the installed script 210 ms mean; ``params`` (400 kV demo) 1.188e9 -> 0.818e9;
``reach`` (400 kV demo) 1.893e9 -> 1.305e9.
"""

from __future__ import annotations

import argparse
import os
import resource
import statistics
import subprocess
import sys
import time
from pathlib import Path

REPO = Path(__file__).resolve().parents[2]
DEMO = REPO / "demo_lines" / "greyholt_ivel_400kv_twin.toml"
COMMANDS = (["--help"], ["earth-models"], ["params", str(DEMO)], ["reach", str(DEMO)])
HEAVY = ("numpy", "scipy", "pint", "pydantic", "jinja2", "importlib.metadata", "numpy.ma",
         "relayset.inputs.schema", "relayset.inputs.study_file", "relayset.inputs.philosophy",
         "relayset.studies.reach")


def one_run(tree: Path, args: list[str]) -> tuple[float, float]:
    """Wall time and CPU time (user + sys) [s] of one whole ``relayset`` process."""
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    t0 = time.perf_counter()
    subprocess.run([sys.executable, "-m", "relayset.cli", *args], cwd=tree, check=True,
                   stdout=subprocess.DEVNULL)
    wall = time.perf_counter() - t0
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    return wall, (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)


def import_costs(tree: Path, args: list[str], repeat: int = 5) -> dict[str, float]:
    """Best cumulative import time [s] of the heavy modules a command loads."""
    best: dict[str, float] = {}
    for _ in range(repeat):
        err = subprocess.run([sys.executable, "-X", "importtime", "-m", "relayset.cli", *args],
                             cwd=tree, capture_output=True, text=True).stderr
        for line in err.splitlines():
            if not line.startswith("import time:") or "|" not in line:
                continue
            _, cum, name = (p.strip() for p in line[len("import time:"):].split("|"))
            if name in HEAVY and cum.isdigit():
                best[name] = min(best.get(name, 1e9), int(cum) / 1e6)
    return best


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=15)
    ap.add_argument("--baseline", type=Path, default=None,
                   help="another source tree to run interleaved with this one")
    opts = ap.parse_args()
    trees = {"this": REPO}
    if opts.baseline is not None:
        trees["baseline"] = opts.baseline.resolve()
    print(f"load average {os.getloadavg()[0]:.1f} on {os.cpu_count()} cores, "
          f"best / median of {opts.repeat} runs")
    runs: dict[tuple[str, int], list[tuple[float, float]]] = {}
    for k in range(opts.repeat + 1):  # the first round warms the caches
        for name, tree in trees.items():
            for i, args in enumerate(COMMANDS):
                r = one_run(tree, args)
                if k:
                    runs.setdefault((name, i), []).append(r)
    for i, args in enumerate(COMMANDS):
        label = " ".join(a if a.startswith("-") or "/" not in a else Path(a).name
                         for a in args)
        for name, tree in trees.items():
            wall = [w for w, _ in runs[name, i]]
            cpu = [c for _, c in runs[name, i]]
            print(f"{name:8s} relayset {label:38s} wall {min(wall) * 1e3:5.0f} / "
                  f"{statistics.median(wall) * 1e3:5.0f} ms, user+sys {min(cpu) * 1e3:5.0f} / "
                  f"{statistics.median(cpu) * 1e3:5.0f} ms")
            if args[0] in ("params", "reach"):
                costs = import_costs(tree, args)
                print("         imports: " + ", ".join(
                    f"{k} {v * 1e3:.0f}" for k, v in sorted(costs.items(), key=lambda x: -x[1]))
                    + " ms")


if __name__ == "__main__":
    main()
