"""``relayset export`` of a three-terminal (teed) line (relayset.export.teed).

Independent sources:

- the setting files and test points against their JSON Schemas (``relayset schema``) by
  the `jsonschema` package; the zone values against the teed results they are read from;
- the COMTRADE files read back by the `comtrade` package from PyPI (an IEEE Std C37.111
  parser, not ours); fundamental phasors by a one-cycle-multiple DFT at the end of the
  record, where the DC offset (tau = X/(omega R), IEEE Std C37.113-2015) has decayed;
- the governing cases' phasors against the per-case nodal solution of tests/test_teed.py
  (nodal admittances of uniform segments from tests/reference_solver.py, modified nodal
  analysis for the fault), for the case's remote terminal, infeed state, fault type and
  source case: within 0.5 % of each channel (of the largest of its kind where near zero);
- the governing loop's impedance from the read-back phasors by the loop equations
  (IEEE Std C37.113-2015) against the apparent impedance the teed results report, 1 %.

The study is the invented one of tests/test_teed_study.py, with a relay profile.
"""

from __future__ import annotations

import cmath
import csv
import hashlib
import io
import json
import math
from fractions import Fraction

import numpy as np
import pytest
from test_teed_study import TEED_TOML

from relayset.cli import main
from relayset.export import comtrade as ours
from relayset.export import schemas
from relayset.physics.measurement import LOOP_PHASES, LOOPS
from relayset.physics.network import Source
from relayset.physics.teed import ENDS
from relayset.studies import pipeline

jsonschema = pytest.importorskip("jsonschema")
comtrade = pytest.importorskip("comtrade")

PROFILED = TEED_TOML.replace('ct_ratio = "600/1 A"',
                             'ct_ratio = "600/5 A"\nprofile = "generic_mho_5a"')


@pytest.fixture(scope="module")
def exported(tmp_path_factory):
    folder = tmp_path_factory.mktemp("teed")
    path = folder / "teed.toml"
    path.write_text(PROFILED, encoding="utf-8")
    out = folder / "out"
    code = main(["export", str(path), "-o", str(out)])
    res = pipeline.run_loaded(pipeline.load(path), settings=True)
    return code, out, res


def test_setting_files_per_end_validate_and_carry_the_teed_zones(exported):
    code, out, res = exported
    assert code == 0  # the teed study verifies
    results = out / "WV-TEE-1_revA.json"
    digest = hashlib.sha256(results.read_bytes()).hexdigest()
    assert json.loads(results.read_text())["teed"]["verification"] == "verified"
    schema = schemas.settings_file_schema()
    for e in res.teed.ends:
        doc = json.loads((out / f"WV-TEE-1_revA_{e.end}_settings.json").read_text())
        jsonschema.Draft202012Validator(schema).validate(doc)
        assert doc["relay_end"] == e.end and doc["results_sha256"] == digest
        # the verdict is the teed verification's, judged on the settable values
        assert e.settings is not None and e.settings.settable is not None
        assert doc["verdict"] == res.teed.verification == "verified"
        assert doc["ct_ratio"] == 120.0 and doc["vt_ratio"] == 1200.0
        vals = {r["id"]: r for r in doc["settings"]}
        # read from the results, not set again: their own settable values
        assert doc["settings"] == [{**v.to_dict(), "value": v.settable,
                                    "secondary": v.settable}
                                   for v in e.settings.settable.values]
        # the settable reach on the profile's step, on the safe side of the ideal
        assert vals["zone1.reach"]["settable"] <= vals["zone1.reach"]["ideal"]
        assert vals["zone2.reach"]["settable"] >= vals["zone2.reach"]["ideal"]
        rows = list(csv.DictReader(io.StringIO(
            (out / f"WV-TEE-1_revA_{e.end}_settings.csv").read_text("utf-8-sig"))))
        assert [r["id"] for r in rows] == [r["id"] for r in doc["settings"]]
        assert all(r["relay_end"] == e.end for r in rows)


def test_test_points_validate_and_name_the_governing_cases(exported):
    _code, out, res = exported
    schema = schemas.test_points_schema()
    for n, e in enumerate(res.teed.ends):
        doc = json.loads((out / f"WV-TEE-1_revA-end{n + 1}-{e.end}-test-points.json")
                         .read_text())
        jsonschema.Draft202012Validator(schema).validate(doc)
        gov = [c for c in doc["comtrade"]["cases"] if c["kind"] == "governing case"]
        assert [c["verification_case"]["zone"] for c in gov] == ["zone1", "zone2"]
        z1, z2 = (c["verification_case"] for c in gov)
        assert z1["infeed"] is False and z2["infeed"] is True
        # zone 1 is set from the nearest remote terminal without infeed, zone 2 from the
        # farthest with it: the cases measure what the results report for them
        assert z1["along_line_angle_ohm"] == pytest.approx(
            min(a.min_ohm for a in e.apparent if not a.infeed), rel=1e-9)
        assert z2["along_line_angle_ohm"] == pytest.approx(
            max(a.max_ohm for a in e.apparent if a.infeed), rel=1e-9)
        shots = doc["shots"]
        assert {s["zone"] for s in shots} == {"zone1", "zone2"} and len(shots) >= 72


def _phasors(cfg, f: float) -> np.ndarray:
    """Fundamental phasors of every channel, referred to the inception angle."""
    rec = comtrade.load(str(cfg), str(cfg.with_suffix(".dat")))
    fs = rec.cfg.sample_rates[0][0]
    x = np.asarray(rec.analog, dtype=float)
    n = Fraction(fs / f).limit_denominator(1000).numerator  # whole cycles, whole samples
    t = np.asarray(rec.time, dtype=float)[-n:] - rec.trigger_time
    w = 2 * math.pi * f
    return math.sqrt(2) / n * (x[:, -n:] * np.exp(-1j * (w * t + ours.INCEPTION_ANGLE_RAD))
                               ).sum(axis=1)


def _reference(res, end: str, case: dict):
    """The case solved by the nodal reference: secondary phasors at the relay, prefault
    and fault, referred to phase A's prefault voltage."""
    from test_teed import nodal

    from relayset.inputs.study_file import parse_study
    from relayset.physics.teed import GroundedTransformer
    from relayset.studies.geometry import build_geometry
    from relayset.studies.parameters import compute_parameters
    from relayset.studies.teed import teed_line, teed_source_cases, teed_terminals

    study = parse_study(res.input, source="teed.toml")
    geo = build_geometry(study, "")
    line = teed_line(study, geo, compute_parameters(geo), False, "")
    terms = list(teed_terminals(study, ""))
    buses = res.teed.buses
    scales, names = teed_source_cases(study, buses, tuple(
        isinstance(t, Source) and not isinstance(t, GroundedTransformer) for t in terms))
    x, y = buses.index(end), buses.index(case["remote"])
    if not case["infeed"]:
        terms[3 - x - y] = None
    k = names.index(case["source_case"])
    terms = [Source(t.z1_ohm * scales[k, b], t.z0_ohm * scales[k, b])
             if isinstance(t, Source) else t for b, t in enumerate(terms)]
    emf = [132e3 / math.sqrt(3)] * 3
    ft = case["fault_type"].replace("-", "")  # the study's labels are A, B, C
    flt, _ = nodal(line, terms, emf, ENDS[y], 0.0, ft, 0.0, 0.0)
    pre, _ = nodal(line, terms, emf, None, 0.0, "AG", 0.0, 0.0)
    ct, vt = study.relay.ratios(end)
    vp, ip = pre[ENDS[x]]
    v, i = flt[ENDS[x]]
    ref = np.exp(-1j * np.angle(vp[0]))
    return (np.concatenate([vp / vt, ip / ct]) * ref, np.concatenate([v / vt, i / ct]) * ref)


def test_governing_case_files_carry_the_network_phasors(exported):
    _code, out, res = exported
    labels = {"A-G": "AG", "B-G": "BG", "C-G": "CG", "A-B": "AB", "B-C": "BC", "C-A": "CA"}
    seen = 0
    for n, e in enumerate(res.teed.ends):
        stem = f"WV-TEE-1_revA-end{n + 1}-{e.end}"
        doc = json.loads((out / f"{stem}-test-points.json").read_text())
        k0 = complex(*doc["k0"])
        for c in doc["comtrade"]["cases"]:
            if c["kind"] != "governing case":
                continue
            case = c["verification_case"]
            want_pre, want = _reference(res, e.end, case)
            got = _phasors(out / "comtrade" / stem / f"{c['id']}.cfg", 50.0)
            big = np.concatenate([np.full(3, np.abs(want[:3]).max()),
                                  np.full(3, np.abs(want[3:]).max())])
            tol = 0.005 * np.maximum(np.abs(want), 0.01 * big)
            assert np.all(np.abs(got - want) <= tol), (c["id"], got, want)
            # the prefault in the manifest: nominal voltages, no load current
            pv = doc_phasors(c["phasors_secondary"]["prefault_v"])
            assert np.allclose(pv, want_pre[:3], rtol=1e-9, atol=1e-9)
            # the governing loop from the read-back phasors: the reported apparent impedance
            loop = labels[case["loop"]]
            ph = LOOP_PHASES[loop]
            v, i = got[:3], got[3:]
            z_sec = (v[ph[0]] / (i[ph[0]] + k0 * i.sum()) if len(ph) == 1
                     else (v[ph[0]] - v[ph[1]]) / (i[ph[0]] - i[ph[1]]))
            z_pri = z_sec / doc["secondary_factor"]
            want_z = complex(*case["z_apparent_primary_ohm"])
            assert abs(z_pri - want_z) <= 0.01 * abs(want_z)
            theta = cmath.phase(res.teed.z1_set_ohm)
            assert (want_z * cmath.rect(1, -theta)).real == pytest.approx(
                case["along_line_angle_ohm"], rel=1e-12)
            assert loop in LOOPS
            seen += 1
    assert seen == 6


def doc_phasors(d: dict) -> np.ndarray:
    return np.array([cmath.rect(m, math.radians(a)) for m, a in d.values()])


# --- A tee on a double-circuit line (circuit 1 tapped, circuit 2 running through) ---------

@pytest.fixture(scope="module")
def exported_dc(tmp_path_factory):
    from test_teed_lines import _double_study_text

    folder = tmp_path_factory.mktemp("teed_dc")
    path = folder / "dc.toml"
    path.write_text(_double_study_text().replace(
        'ct_ratio = "600/1 A"', 'ct_ratio = "600/5 A"\nprofile = "generic_mho_5a"'),
        encoding="utf-8")
    out = folder / "out"
    code = main(["export", str(path), "-o", str(out)])
    res = pipeline.run_loaded(pipeline.load(path), settings=True)
    return code, out, res


def test_double_circuit_governing_cases_name_the_state_and_carry_the_network_phasors(
        exported_dc):
    """The governing cases of a teed double circuit are found over the parallel circuit's
    states, with k0m where the relays use it, as the teed settings take them: each measures
    what the results report and names its state; its phasors, read back by the `comtrade`
    package, against tests/reference_solver.solve_teed_single (modified nodal analysis:
    no chain matrix, terminal equation or superposition of the teed solver) in that state,
    the parallel circuit's residual current (the seventh channel at the double circuit's
    ends) included; the governing loop from the read-back phasors by the relay equation
    (k0m too where the case is measured with it)."""
    from test_teed_lines import _legs_of

    from relayset.inputs.study_file import parse_study
    from relayset.studies.geometry import build_geometry
    from relayset.studies.parameters import compute_parameters
    from relayset.studies.teed import teed_line, teed_source_cases, teed_terminals

    from reference_solver import solve_teed_single

    code, out, res = exported_dc
    assert code in (0, 3)  # written (3: the study's own verification fails checks), no
    # internal error (1: a governing case not reproduced) nor refusal (2)
    study = parse_study(res.input, source="dc.toml")
    geo = build_geometry(study, "")
    line = teed_line(study, geo, compute_parameters(geo), False, "")
    buses = res.teed.buses
    terms0 = teed_terminals(study, "")
    scales, names = teed_source_cases(study, buses)
    k0m = complex(res.relay.k0m_set)
    labels = {"A": 0, "B": 1, "C": 2}
    seen, states = 0, set()
    for n, e in enumerate(res.teed.ends):
        stem = f"WV-TEE-1_revA-end{n + 1}-{e.end}"
        doc = json.loads((out / f"{stem}-test-points.json").read_text())
        jsonschema.Draft202012Validator(schemas.test_points_schema()).validate(doc)
        at_dc_end = e.end != buses[2]
        assert ("IN parallel" in doc["comtrade"]["channels"]) is at_dc_end
        k0 = complex(res.teed.k0_set)  # what the apparent impedances are measured with
        for c in doc["comtrade"]["cases"]:
            if c["kind"] != "governing case":
                continue
            case = c["verification_case"]
            state, mutual = case["parallel_circuit"], case["mutual_compensation"]
            states.add(state)
            assert state.replace("_", " ") in c["description"]
            assert not mutual or (at_dc_end and state == "in_service")
            # what the results report for the zone it sets
            told = [(a.max_ohm if case["infeed"] else a.min_ohm) for a in e.apparent
                    if a.infeed == case["infeed"]]
            want_along = max(told) if case["infeed"] else min(told)
            assert case["along_line_angle_ohm"] == pytest.approx(want_along, rel=1e-9)
            # the nodal reference in the case's state
            x, y = buses.index(e.end), buses.index(case["remote"])
            terms = list(terms0)
            if not case["infeed"]:
                terms[3 - x - y] = None
            k = names.index(case["source_case"])
            terms = [Source(t.z1_ohm * scales[k, b], t.z0_ohm * scales[k, b])
                     if isinstance(t, Source) else t for b, t in enumerate(terms)]
            ref = solve_teed_single(_legs_of(line), tuple(terms), (132e3 / math.sqrt(3),) * 3,
                                    fault_leg=ENDS[y], m=0.0,
                                    fault_type=case["fault_type"].replace("-", ""),
                                    r_fault_ohm=0.0, parallel_state=state)
            ct, vt = study.relay.ratios(e.end)
            # series-only, no load: the prefault is the EMFs (phase A at 0 deg), no current
            pv = doc_phasors(c["phasors_secondary"]["prefault_v"])
            assert np.allclose(pv, 132e3 / math.sqrt(3) / vt
                               * np.exp(-2j * np.pi / 3 * np.arange(3)), rtol=1e-9, atol=1e-9)
            want = np.concatenate([ref.v[ENDS[x]] / vt, ref.i[ENDS[x]] / ct])
            got = _phasors(out / "comtrade" / stem / f"{c['id']}.cfg", 50.0)
            big = np.concatenate([np.full(3, np.abs(want[:3]).max()),
                                  np.full(3, np.abs(want[3:]).max())])
            tol = 0.005 * np.maximum(np.abs(want), 0.01 * big)
            assert np.all(np.abs(got[:6] - want) <= tol), (c["id"], got, want)
            if at_dc_end:
                i_par = ref.i_parallel[ENDS[x]].sum() / ct
                assert abs(got[6] - i_par) <= 0.005 * max(abs(i_par), 0.01 * big[3])
            else:
                assert got.size == 6
            # the governing loop from the read-back phasors: the reported impedance
            a, b = case["loop"].split("-")
            v, i = got[:3], got[3:6]
            if b == "G":
                den = i[labels[a]] + k0 * i.sum() + (k0m * got[6] if mutual else 0)
                z_sec = v[labels[a]] / den
            else:
                z_sec = (v[labels[a]] - v[labels[b]]) / (i[labels[a]] - i[labels[b]])
            want_z = complex(*case["z_apparent_primary_ohm"])
            assert abs(z_sec / doc["secondary_factor"] - want_z) <= 0.01 * abs(want_z)
            seen += 1
    assert seen == 6
    assert len(states) >= 2  # the cases come from more than one state of circuit 2
