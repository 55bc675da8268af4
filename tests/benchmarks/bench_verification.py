"""Speed and memory of the verification of a line's settings.

1. The 230 kV double-circuit demo with the relay at both ends, over the full envelope:
   every fault type, the default location grid plus the zone 1 points, the resistance
   grids, three parallel-circuit states, the study's source cases per end (3 x 3 pairs
   plus each source alone), the load cases, every earth resistivity of the sweep, the
   faults on the parallel circuit (also with one of its breakers open), and the faults
   along the adjacent lines. Target: the verification (simulation, measurement and
   checks) within 1.5 s of CPU, warm, on one core.
2. The settings closed by simulation plus their verification (the same call the CLI makes),
   warm, beside it.
3. The whole ``relayset settings`` process on the 230 kV demo (CPU of the child process):
   target 2 s; and the peak memory (maximum resident set) of ``relayset settings`` for every
   demo: target under 500 MB.

CPU time, not wall time, is the measure: the machine may be shared. Run on demand,
single-threaded BLAS::

    OMP_NUM_THREADS=1 OPENBLAS_NUM_THREADS=1 python tests/benchmarks/bench_verification.py
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
from relayset.studies import pipeline
from relayset.studies.geometry import build_geometry
from relayset.studies.parameters import compute_parameters
from relayset.studies.relay import resolve_relay
from relayset.studies.verification import settle_and_verify, verify_settings
from relayset.studies.verification.closing import params_by_resistivity

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))
from tomlwrite import dump_toml

TARGET_VERIFY_S = 1.5
TARGET_PROCESS_S = 2.0
TARGET_PEAK_MB = 500.0


def _study_both_ends(tmp: Path) -> Path:
    demo = demo_lines_dir() / "elsford_fallowby_230kv_double.toml"
    d = tomllib.loads(demo.read_text("utf-8"))
    d["study"]["philosophy"] = str(demo_lines_dir() / d["study"]["philosophy"])
    d["relay"]["end"] = "both"
    names = (d["study"]["from_substation"], d["study"]["to_substation"])
    d["adjacent_lines"] = [dict(line, bus=names[1]) for line in d["adjacent_lines"]]
    out = tmp / "both.toml"
    out.write_text(dump_toml(d), "utf-8")
    return out


def _cpu(fn, repeat: int) -> float:
    """Smallest CPU time of ``repeat`` calls [s]."""
    best = float("inf")
    for _ in range(repeat):
        t = time.process_time()
        fn()
        best = min(best, time.process_time() - t)
    return best


def _process(path: Path) -> tuple[float, float]:
    """CPU [s] and peak resident memory [MB] of one ``relayset settings`` process, measured
    by GNU time around it (its own footprint is small, so the peak is the process's)."""
    with tempfile.NamedTemporaryFile("r", suffix=".txt") as rep:
        subprocess.run(["/usr/bin/time", "-f", "%U %S %M", "-o", rep.name, sys.executable,
                        "-c", "import sys; from relayset.cli import main; sys.exit(main())",
                        "settings", str(path)], stdout=subprocess.DEVNULL,
                       env={**os.environ, "OMP_NUM_THREADS": "1",
                            "OPENBLAS_NUM_THREADS": "1"}, check=False)
        user, system, kib = rep.read().split()[-3:]
    return float(user) + float(system), int(kib) / 1024


def main() -> int:
    from relayset.studies.reach import run_reach_study
    from relayset.studies.settings import study_philosophy

    ok = True
    with tempfile.TemporaryDirectory() as tmp:
        path = _study_both_ends(Path(tmp))
        loaded = pipeline.load(path)
        study, src = loaded.study, loaded.source
        geo = build_geometry(study, src)
        params = compute_parameters(geo)
        relay = resolve_relay(study, params)
        phil = study_philosophy(study, src)
        reach = run_reach_study(study, geo, params, relay, phil, source=src)
        settings, _ver = settle_and_verify(study, geo, params, relay, reach, phil, source=src)
        by_end = {s.end: s for s in settings}
        by_rho = params_by_resistivity(study, geo, params, src)

        def verify():
            return verify_settings(study, geo, by_rho, by_end, source=src)

        def settle():
            return settle_and_verify(study, geo, params, relay, reach, phil, source=src)

        res = verify()
        t_verify = _cpu(verify, 3)
        t_settle = _cpu(settle, 2)
    print(f"verification, both ends, {len(res.parallel_states)} parallel states, "
          f"{len(res.earth_resistivities_ohm_m)} earth resistivities, {res.cases_solved:,} "
          f"fault cases: {t_verify * 1e3:.0f} ms CPU (target {TARGET_VERIFY_S * 1e3:.0f} ms), "
          f"{t_verify / res.cases_solved * 1e6:.2f} us/case; verdict: {res.verdict}")
    print(f"settings closed by simulation + verification: {t_settle * 1e3:.0f} ms CPU")
    ok &= t_verify < TARGET_VERIFY_S
    for demo in sorted(demo_lines_dir().glob("*.toml")):
        cpu, peak = _process(demo)
        line = f"relayset settings {demo.name}: {cpu:.2f} s CPU, peak {peak:.0f} MB"
        if demo.name.startswith("elsford"):
            line += f" (targets {TARGET_PROCESS_S:g} s, {TARGET_PEAK_MB:g} MB)"
            ok &= cpu < TARGET_PROCESS_S
        print(line)
        ok &= peak < TARGET_PEAK_MB
    return 0 if ok else 1


if __name__ == "__main__":
    sys.exit(main())
