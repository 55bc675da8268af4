"""Whole-process start-up of the commands, and where the import time goes.

Targets (issue 9): ``relayset params FILE`` under 0.35 s and ``relayset reach FILE`` under
0.5 s as whole processes. Prints the best and median of several runs and, from
``python -X importtime``, the heaviest top-level imports of each command.

Run on demand::

    python tests/benchmarks/bench_startup.py
"""

from __future__ import annotations

import subprocess
import sys
import time

from relayset.resources import demo_lines_dir

DEMO = demo_lines_dir() / "greyholt_ivel_400kv_twin.toml"
HEAVY = ("numpy", "scipy", "scipy.special", "scipy.linalg", "pint", "pydantic", "jinja2",
         "relayset.api", "relayset.inputs.study_file", "relayset.inputs.units")


def whole_process(args: list[str], repeat: int = 7) -> tuple[float, float]:
    runs = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        subprocess.run([sys.executable, "-m", "relayset.cli", *args], check=True,
                       capture_output=True)
        runs.append(time.perf_counter() - t0)
    runs.sort()
    return runs[0], runs[len(runs) // 2]


def import_costs(args: list[str]) -> dict[str, float]:
    """Cumulative import time [s] of the heavy packages a command loads (-X importtime)."""
    err = subprocess.run([sys.executable, "-X", "importtime", "-m", "relayset.cli", *args],
                         capture_output=True, text=True).stderr
    out = {}
    for line in err.splitlines():
        if not line.startswith("import time:") or "|" not in line:
            continue
        _, cum, name = (p.strip() for p in line[len("import time:"):].split("|"))
        if name in HEAVY and cum.isdigit():
            out[name] = int(cum) / 1e6
    return out


def main() -> None:
    for args in (["--help"], ["params", str(DEMO)], ["reach", str(DEMO)]):
        best, median = whole_process(args)
        label = " ".join(a if a.startswith("-") else a.split("/")[-1] for a in args)
        print(f"relayset {label:45s} best {best * 1e3:6.0f} ms, median {median * 1e3:6.0f} ms")
        if args[0] != "--help":
            costs = import_costs(args)
            print("    imports: " + ", ".join(f"{k} {v * 1e3:.0f} ms" for k, v in
                                              sorted(costs.items(), key=lambda x: -x[1])))


if __name__ == "__main__":
    main()
