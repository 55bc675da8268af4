"""Speed of the verification of one line's settings.

The 230 kV double-circuit demo with the relay at both ends: every fault type, the default
location grid plus the zone 1 points, the resistive targets, three parallel-circuit states,
the study's source cases per end (3 x 3 pairs plus each source alone) and load cases, and
the faults on the parallel circuit. Target: the verification (simulation and checks) under
1 s warm on one core; the whole settings pipeline is timed beside it.

Run on demand, single-threaded BLAS::

    OMP_NUM_THREADS=1 OPENBLAS_NUM_THREADS=1 python tests/benchmarks/bench_verification.py
"""

from __future__ import annotations

import sys
import tempfile
import timeit
import tomllib
from pathlib import Path

from relayset.resources import demo_lines_dir
from relayset.studies import pipeline
from relayset.studies.geometry import build_geometry
from relayset.studies.parameters import compute_parameters
from relayset.studies.relay import resolve_relay
from relayset.studies.verification import settle_and_verify, verify_settings

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))
from tomlwrite import dump_toml

TARGET_S = 1.0


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


def main() -> int:
    from relayset.studies.reach import run_reach_study
    from relayset.studies.settings import study_philosophy

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
        rho = study.system.earth_resistivity

        def verify():
            return verify_settings(study, geo, {rho: params}, by_end, source=src)

        def settle():
            return settle_and_verify(study, geo, params, relay, reach, phil, source=src)

        verify()
        t_verify = min(timeit.repeat(verify, number=1, repeat=5))
        t_settle = min(timeit.repeat(settle, number=1, repeat=3))
        res = verify()
    print(f"verification, both ends, {len(res.parallel_states)} parallel states, "
          f"{res.cases_solved} fault cases: {t_verify * 1e3:.0f} ms "
          f"(target {TARGET_S * 1e3:.0f} ms), {t_verify / res.cases_solved * 1e6:.2f} us/case")
    print(f"settings closed by simulation + verification: {t_settle * 1e3:.0f} ms")
    print(f"verdict: {res.verdict}")
    return 0 if t_verify < TARGET_S else 1


def test_verification_speed():
    assert main() == 0


if __name__ == "__main__":
    sys.exit(main())
