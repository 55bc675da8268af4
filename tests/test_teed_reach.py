"""The reach study of a three-terminal (teed) line (``relayset reach``;
relayset.studies.teed_reach).

Checks:
- a branch of tiny length without a source (an unloaded stub of no length carries no
  current, Kirchhoff's laws) gives the two-ended reach study of the same line, point by
  point (relayset.studies.reach, itself checked against the nodal reference);
- the worst cases against the independent per-case nodal solution of tests/test_teed.py
  (nodal admittances of uniform segments from tests/reference_solver.py, modified nodal
  analysis for the fault), with the reach error recomputed from its definition;
- on the ideally transposed line every meant loop measures exactly the Z1 of the path to a
  bolted fault (the symmetrical-component result for a balanced line, Fortescue 1918), so
  at the tee it sees its own leg's impedance whatever the infeed, and with the infeed out
  the untransposition error is the whole reach error.
The study is the invented one of tests/test_teed_study.py.
"""

from __future__ import annotations

import cmath
import json
import math

import numpy as np
import pytest
from numpy.testing import assert_allclose
from test_teed_study import TEED_TOML

from relayset.cli import main
from relayset.physics import measurement
from relayset.physics.network import Source
from relayset.physics.teed import ENDS
from relayset.studies import pipeline

NO_LOAD = TEED_TOML.split("[load]")[0]


def _loaded(text: str):
    return pipeline.load_bytes(text.encode(), "teed.toml")


def _reach(text: str = NO_LOAD):
    return pipeline.run_loaded(_loaded(text), reach=True)


def test_tiny_branch_without_source_is_the_two_ended_reach_study():
    two = NO_LOAD.split("[tee]")[0] + "[relay]" + NO_LOAD.split("[relay]")[1]
    two = two.replace('[sources.Oakrest]\nz1 = "4 + 30j ohm"\nz0 = "5 + 40j ohm"\n', "")
    two = two.replace('end = "all"', 'end = "both"')
    teed = NO_LOAD.replace('[sources.Oakrest]\nz1 = "4 + 30j ohm"\nz0 = "5 + 40j ohm"\n', "")
    teed = teed.replace('end = "all"', 'end = "both"').replace(
        '  { length = "7 km", order = ["B", "C", "A"] },\n', "").replace(
        '{ length = "8 km"', '{ length = "1 m"')
    ref = _reach(two).reach_study
    res = _reach(teed).teed_reach
    assert [e.end for e in res.ends] == ["Wrenfold", "Velmar"]
    for e_ref in ref.ends:
        remote = "Velmar" if e_ref.end == "Wrenfold" else "Wrenfold"
        a = e_ref.arrangement("actual_plan")
        for infeed in (True, False):
            p = res.end(e_ref.end).path(remote, infeed)
            assert p.length_m == pytest.approx(60e3, rel=1e-12)
            m_ref = np.round(100 * a.envelope_m, 9)
            m_p = np.round(p.envelope_location_pct, 9)
            common, i_ref, i_p = np.intersect1d(m_ref, m_p, return_indices=True)
            assert common.size >= 100 and 0.0 in common and 100.0 in common
            ok = np.isfinite(a.envelope_max_pct[:, i_ref])
            assert ok.sum() > 500
            assert_allclose(p.envelope_max_pct[:, i_p][ok], a.envelope_max_pct[:, i_ref][ok],
                            rtol=0, atol=1e-8)  # [% points]
            assert_allclose(p.envelope_min_pct[:, i_p][ok], a.envelope_min_pct[:, i_ref][ok],
                            rtol=0, atol=1e-8)
            assert np.array_equal(np.isfinite(p.envelope_max_pct[:, i_p]), ok)
            for lp_ref, lp in zip(a.loops, p.loops, strict=True):
                assert lp.loop == lp_ref.loop
                assert (lp.worst_overreach_at_remote_terminal.error_pct
                        == pytest.approx(lp_ref.worst_overreach_at_remote_bus.error_pct,
                                         rel=0, abs=1e-8))
            assert (p.worst_bolted_overreach_at_remote_terminal_pct == pytest.approx(
                a.worst_bolted_overreach_at_remote_bus_pct, rel=0, abs=1e-8))


def _scaled(term, scale):
    if not isinstance(term, Source):
        return term
    return Source(term.z1_ohm * scale, term.z0_ohm * scale)


@pytest.mark.parametrize("end, remote, infeed", [
    ("Oakrest", "Velmar", True), ("Wrenfold", "Oakrest", True), ("Velmar", "Wrenfold", False)])
def test_worst_cases_equal_the_nodal_reference(end, remote, infeed):
    from test_teed import nodal

    from relayset.studies.geometry import build_geometry
    from relayset.studies.parameters import compute_parameters
    from relayset.studies.relay import resolve_relay
    from relayset.studies.teed import teed_line, teed_terminals

    ld = _loaded(NO_LOAD)
    study = ld.study
    res = _reach().teed_reach
    geo = build_geometry(study, "")
    params = compute_parameters(geo)
    relay = resolve_relay(study, params)
    line = teed_line(study, geo, params, False, "")
    terms = list(teed_terminals(study, ""))
    buses = (*study.ends, study.tee.substation)
    x, y = buses.index(end), buses.index(remote)
    z = 3 - x - y
    if not infeed:
        terms[z] = None
    cases = study.reach_study.source_cases
    scales = np.array([[c.scale_at(b) for b in buses] for c in cases])
    names = [c.name for c in cases]
    p = res.end(end).path(remote, infeed)
    l_x, l_y = line.legs[x].total_length_m, line.legs[y].total_length_m
    # the relay's Z1 per metre: every section has the same towers, and the diagonal of
    # Z012 does not change with the phase order (Fortescue)
    z1_per_m = relay.z1_set_ohm / 60e3
    theta = cmath.phase(relay.z1_set_ohm)
    emf = [132e3 / math.sqrt(3)] * 3
    labels = {"A-G": "AG", "B-G": "BG", "C-G": "CG", "A-B": "AB", "B-C": "BC", "C-A": "CA"}
    checked = 0
    for lp in p.loops:
        for w in (lp.worst_overreach_on_path, lp.worst_underreach_on_path,
                  lp.worst_untransposition_overreach_on_path):
            if w is None:
                continue
            k = names.index(w.source_case)
            t = [_scaled(term, scales[k, b]) for b, term in enumerate(terms)]
            if w.leg == end:
                leg, m = x, w.distance_m / l_x
            else:
                leg, m = y, (l_x + l_y - w.distance_m) / l_y
            out, _ = nodal(line, t, emf, ENDS[leg], m, w.fault_type.replace("-", ""), 0.0,
                           0.0)  # the study's phase labels are A, B, C
            v, i = out[ENDS[x]]
            zl = measurement.loop_impedances(v, i, relay.k0_set)[labels[lp.loop]]
            assert_allclose(w.apparent_ohm, zl, rtol=1e-8, atol=0)
            if w is not lp.worst_untransposition_overreach_on_path:
                ref = (z1_per_m * w.distance_m * cmath.rect(1, -theta)).real
                err = 100 * (ref - (zl * cmath.rect(1, -theta)).real) / ref
                assert w.error_pct == pytest.approx(err, rel=1e-7)
            checked += 1
    assert checked >= 12


def test_ideal_line_sees_the_path_impedance_and_the_tee_at_the_leg():
    from relayset.studies.geometry import build_geometry
    from relayset.studies.parameters import compute_parameters
    from relayset.studies.relay import resolve_relay
    from relayset.studies.teed import teed_line, teed_source_cases, teed_terminals
    from relayset.studies.teed_reach import _loops_along, _z1_from_bus, ideal_teed_line

    study = _loaded(NO_LOAD).study
    geo = build_geometry(study, "")
    params = compute_parameters(geo)
    relay = resolve_relay(study, params)
    ideal = ideal_teed_line(teed_line(study, geo, params, False, ""))
    terms = teed_terminals(study, "")
    buses = (*study.ends, study.tee.substation)
    scales, _ = teed_source_cases(study, buses)
    ftypes = study.reach_study.fault_types
    for x, y in ((0, 1), (2, 0), (1, 2)):
        l_x = ideal.legs[x].total_length_m
        l_p = l_x + ideal.legs[y].total_length_m
        d = np.array([0.3 * l_x, l_x, l_x + 0.5 * (l_p - l_x), l_p])
        zl = _loops_along(ideal, terms, x, y, d, l_x, l_p, ftypes, scales, 132e3,
                          relay.k0_set)[""]
        z_tee = _z1_from_bus(ideal.legs[x], np.array([l_x]))[0]
        for f, ft in enumerate(ftypes):
            for lp in measurement.loops_for_fault(ft):
                # at the tee: the own leg's Z1 whatever the infeed (KVL on a balanced leg)
                assert_allclose(zl[lp][f, 1], z_tee, rtol=1e-9, atol=0)
                assert_allclose(zl[lp][f, 0], 0.3 * z_tee, rtol=1e-9, atol=0)
                # beyond the tee the infeed adds its drop on the remote leg: farther
                assert np.all(abs(zl[lp][f, 3]) > abs(z_tee))
    res = _reach().teed_reach
    for e in res.ends:
        # one kind of tower throughout: the leg's Z1 is the line's per metre times its length
        leg_m = ideal.legs[buses.index(e.end)].total_length_m
        assert_allclose(e.tee_ohm, relay.z1_set_ohm * leg_m / 60e3, rtol=1e-12, atol=0)
        for p in e.paths:
            if p.infeed:
                continue
            # infeed out, series-only: the ideal line's reach error is zero, so the
            # untransposition error is the whole reach error
            ok = np.isfinite(p.envelope_max_pct)
            assert_allclose(p.untransposition_max_pct[ok], p.envelope_max_pct[ok],
                            rtol=0, atol=1e-8)


def test_reach_cli_of_a_teed_line_prints_and_writes_json(tmp_path, capsys):
    import jsonschema

    from relayset.export.schemas import results_schema

    path = tmp_path / "teed.toml"
    path.write_text(NO_LOAD, encoding="utf-8")  # no [load] needed, as for two ends
    out = tmp_path / "r.json"
    assert main(["reach", str(path), "--json", str(out)]) == 0
    text = capsys.readouterr().out
    assert "Three-terminal line Wrenfold - Velmar" in text
    assert "To Oakrest" in text and "Velmar infeed out" in text
    d = json.loads(out.read_text())
    jsonschema.Draft202012Validator(results_schema()).validate(d)
    assert "reach_study" not in d
    ends = d["teed_reach"]["ends"]
    assert [e["end"] for e in ends] == ["Wrenfold", "Velmar", "Oakrest"]
    assert all(len(e["paths"]) == 4 for e in ends)
    p = ends[0]["paths"][0]
    assert p["remote"] == "Velmar" and p["third"] == "Oakrest" and p["infeed"] is True
    assert len(p["envelope"]["bolted_reach_error_max_pct"]) == 6
