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


# --- A tee on a double-circuit line: circuit 1 tapped, circuit 2 running through ----------

def _double_no_load(extra: str = "") -> str:
    from test_teed_lines import _double_study_text

    return _double_study_text().split("[load]")[0] + extra


def _single_no_load(extra: str = "") -> str:
    from test_teed_lines import _single_study_text

    return _single_study_text().split("[load]")[0] + extra


def _ground_loop(v, i, ip, ph: int, k0: complex, k0m: complex | None) -> complex:
    """The compensated ground loop V_p / (I_p + k0 I_res + k0m I_res,parallel), the
    standard relay equation (e.g. Ziegler, Numerical Distance Protection, 4th ed., 2011,
    ch. 3), written out here, not taken from relayset."""
    den = i[ph] + k0 * i.sum() + (0 if k0m is None else k0m * ip.sum())
    return v[ph] / den


def _phase_loop(v, i, a: int, b: int) -> complex:
    return (v[a] - v[b]) / (i[a] - i[b])


PHASES = {"A": 0, "B": 1, "C": 2}


@pytest.mark.parametrize("end, remote, infeed, state, mutual", [
    ("Wrenfold", "Velmar", True, "in_service", True),
    ("Wrenfold", "Oakrest", False, "earthed", False),
    ("Velmar", "Wrenfold", True, "isolated", False),
    ("Velmar", "Oakrest", True, "in_service", False),
    ("Oakrest", "Wrenfold", False, "earthed", False),
])
def test_double_circuit_worst_cases_equal_the_nodal_reference(end, remote, infeed, state,
                                                              mutual):
    """Independent check: the worst cases of a path in one state of the parallel circuit,
    solved again by tests/reference_solver.solve_teed_single (modified nodal analysis, Ho,
    Ruehli and Brennan 1975; segment admittances by eigendecomposition: no chain matrix,
    terminal equation or superposition of the teed solver), the loop by the relay equation
    written out above and the reach error from its definition."""
    from test_teed_lines import _legs_of

    from relayset.studies.geometry import build_geometry
    from relayset.studies.parameters import compute_parameters
    from relayset.studies.relay import resolve_relay
    from relayset.studies.teed import teed_line, teed_terminals

    from reference_solver import solve_teed_single

    text = _double_no_load()
    study = _loaded(text).study
    res = _reach(text).teed_reach
    geo = build_geometry(study, "")
    params = compute_parameters(geo)
    relay = resolve_relay(study, params)
    line = teed_line(study, geo, params, False, "")
    assert [leg.n_conductors for leg in line.legs] == [6, 6, 3]
    terms = list(teed_terminals(study, ""))
    buses = (*study.ends, study.tee.substation)
    x, y = buses.index(end), buses.index(remote)
    if not infeed:
        terms[3 - x - y] = None
    cases = study.reach_study.source_cases
    scales = np.array([[c.scale_at(b) for b in buses] for c in cases])
    names = [c.name for c in cases]
    e = res.end(end)
    p = e.path(remote, infeed, state, mutual)
    assert p.parallel_circuit == state and p.mutual_compensation is mutual
    k0m = relay.k0m_set if mutual else None
    assert (e.k0m_set is not None) == (end != "Oakrest")  # no parallel circuit at T
    l_x, l_y = line.legs[x].total_length_m, line.legs[y].total_length_m
    # circuit 1's Z1 per metre: every section (and the branch, circuit 1's block of the
    # same towers) has the same cross-section, and the diagonal of Z012 does not change
    # with the phase order (Fortescue)
    z1_per_m = relay.z1_set_ohm / 60e3
    theta = cmath.phase(relay.z1_set_ohm)
    emf = (132e3 / math.sqrt(3),) * 3
    suffix = f", parallel circuit {state.replace('_', ' ')}" + (
        ", mutual compensation" if mutual else "")
    checked = 0
    for lp in p.loops:
        for w in (lp.worst_overreach_on_path, lp.worst_underreach_on_path,
                  lp.worst_overreach_at_remote_terminal,
                  lp.worst_untransposition_overreach_on_path):
            if w is None:
                continue
            assert w.source_case.endswith(suffix), w.source_case  # the state, named
            k = names.index(w.source_case[:-len(suffix)])
            t = [_scaled(term, scales[k, b]) for b, term in enumerate(terms)]
            if w.leg == end:
                leg, m = x, w.distance_m / l_x
            else:
                leg, m = y, (l_x + l_y - w.distance_m) / l_y
            ref = solve_teed_single(_legs_of(line), tuple(t), emf, fault_leg=ENDS[leg],
                                    m=float(m), fault_type=w.fault_type.replace("-", ""),
                                    r_fault_ohm=0.0, parallel_state=state)
            v, i, ip = ref.v[ENDS[x]], ref.i[ENDS[x]], ref.i_parallel[ENDS[x]]
            a, b = lp.loop.split("-")  # "A-G" or "A-B" in the study's labels
            zl = (_ground_loop(v, i, ip, PHASES[a], relay.k0_set, k0m) if b == "G"
                  else _phase_loop(v, i, PHASES[a], PHASES[b]))
            assert_allclose(w.apparent_ohm, zl, rtol=1e-7, atol=0)
            if w is not lp.worst_untransposition_overreach_on_path:
                zr = (z1_per_m * w.distance_m * cmath.rect(1, -theta)).real
                err = 100 * (zr - (zl * cmath.rect(1, -theta)).real) / zr
                assert w.error_pct == pytest.approx(err, rel=1e-6, abs=1e-9)
            checked += 1
    assert checked >= 18


def _uncoupled(teed_line):
    """teed_line with the double circuit's coupling between its circuits removed: the
    off-diagonal 3x3 blocks of every section's Z, and of its Maxwell potential
    coefficients (Y = j omega P^-1: an uncoupled circuit has no mutual potential
    coefficient, and circuit 1's capacitance is then that of the line without circuit 2)."""
    from relayset.physics.network import LineCascade
    from relayset.physics.teed import TeedLine

    def cut(m):
        m = m.copy()
        m[..., :3, 3:] = 0
        m[..., 3:, :3] = 0
        return m

    def cut_z(z):
        return z if z.shape[-1] != 6 else cut(z)

    def cut_y(y):
        if y is None or y.shape[-1] != 6:
            return y
        return np.linalg.inv(cut(np.linalg.inv(y)))

    def wrapped(*a, **kw):
        line = teed_line(*a, **kw)
        return TeedLine(tuple(LineCascade(cut_z(leg.z_ohm_per_m), leg.length_m,
                                          cut_y(leg.y_s_per_m), leg.elements)
                              for leg in line.legs))
    return wrapped


@pytest.mark.parametrize("shunt", [False, True])
def test_uncoupled_parallel_circuit_out_is_the_single_circuit_reach_study(monkeypatch, shunt):
    """Identity: a double-circuit teed line whose parallel circuit is not coupled to the
    tapped one and out of service (earthed or isolated) is the single-circuit teed line
    (Kirchhoff: it carries no current into circuit 1's network; Kron reduction keeps
    circuit 1's block whatever other phase wires there are, tests/test_teed_lines.py), so
    its reach study, actual and ideally transposed, is the single circuit's, point by
    point."""
    import relayset.studies.teed_reach as tr

    extra = "[reach_study]\nshunt_capacitance = true\n" if shunt else ""
    single = _reach(_single_no_load(extra)).teed_reach
    monkeypatch.setattr(tr, "teed_line", _uncoupled(tr.teed_line))
    double = _reach(_double_no_load(extra)).teed_reach
    compared = 0
    for es in single.ends:
        ed = double.end(es.end)
        assert_allclose(ed.z1_set_ohm, es.z1_set_ohm, rtol=1e-12, atol=0)
        assert_allclose(ed.k0_set, es.k0_set, rtol=1e-12, atol=0)
        assert_allclose(ed.tee_ohm, es.tee_ohm, rtol=1e-12, atol=0)
        for ps in es.paths:
            assert ps.parallel_circuit is None and not ps.mutual_compensation
            for state in ("earthed", "isolated"):
                pd = ed.path(ps.remote, ps.infeed, state)
                assert_allclose(pd.envelope_location_pct, ps.envelope_location_pct,
                                rtol=0, atol=1e-12)
                for attr in ("envelope_max_pct", "envelope_min_pct",
                             "untransposition_max_pct", "untransposition_min_pct"):
                    a, b = getattr(pd, attr), getattr(ps, attr)
                    assert np.array_equal(np.isfinite(a), np.isfinite(b))
                    ok = np.isfinite(b)
                    assert ok.sum() > 300
                    assert_allclose(a[ok], b[ok], rtol=0, atol=1e-7)  # [% points]
                for attr in ("apparent_max_ohm", "apparent_min_ohm"):
                    a, b = getattr(pd, attr), getattr(ps, attr)
                    ok = np.isfinite(b)  # [ohm]; at the bus zero to rounding
                    assert_allclose(a[ok], b[ok], rtol=0, atol=1e-9 * np.abs(b[ok]).max())
                for ld, ls in zip(pd.loops, ps.loops, strict=True):
                    wd, ws = ld.worst_overreach_at_remote_terminal, \
                        ls.worst_overreach_at_remote_terminal
                    assert wd.error_pct == pytest.approx(ws.error_pct, rel=0, abs=1e-7)
                    # (the source case may differ where the cases tie: infeed out, a
                    # bolted fault measures the line whatever the source)
                    assert wd.source_case.endswith(", parallel circuit " + state)
                compared += 1
    assert compared == 2 * 12


def test_every_parallel_state_is_a_path_of_its_own(tmp_path, capsys, monkeypatch):
    """Every state of the parallel circuit is solved and reported (in service with k0 and
    with k0m at the double circuit's ends, earthed, isolated); the states measure
    differently (a check that they are not the same solve); the JSON keeps to its schema
    and the console names each state."""
    import jsonschema

    import relayset.studies.teed_reach as tr
    from relayset.export.schemas import results_schema

    solved = set()
    real = tr.solve_teed_sweep

    def spy(*a, **kw):
        solved.add((kw.get("parallel_state", "in_service"), kw.get("parallel_currents")))
        return real(*a, **kw)

    monkeypatch.setattr(tr, "solve_teed_sweep", spy)
    path = tmp_path / "dc.toml"
    path.write_text(_double_no_load(), encoding="utf-8")
    out = tmp_path / "r.json"
    assert main(["reach", str(path), "--json", str(out)]) == 0
    text = capsys.readouterr().out
    assert {s for s, _ in solved} == {"in_service", "earthed", "isolated"}
    assert ("in_service", True) in solved  # circuit 2's currents for k0m
    d = json.loads(out.read_text())
    jsonschema.Draft202012Validator(results_schema()).validate(d)
    ends = d["teed_reach"]["ends"]
    assert [e["end"] for e in ends] == ["Wrenfold", "Velmar", "Oakrest"]
    for e in ends:
        ends_of_dc = e["end"] != "Oakrest"
        want = {(r, inf, s, False) for r in {"Wrenfold", "Velmar", "Oakrest"} - {e["end"]}
                for inf in (True, False) for s in ("in_service", "earthed", "isolated")}
        if ends_of_dc:
            want |= {(r, inf, "in_service", True) for r, inf, _s, _m in want}
            assert e["k0m_set"] is not None
        else:
            assert e["k0m_set"] is None  # no parallel circuit at the third terminal
        got = [(p["remote"], p["infeed"], p["parallel_circuit"], p["mutual_compensation"])
               for p in e["paths"]]
        assert len(got) == len(set(got)) and set(got) == want
        for p in e["paths"]:
            label = ", parallel circuit " + p["parallel_circuit"].replace("_", " ") + (
                ", mutual compensation" if p["mutual_compensation"] else "")
            for lp in p["loops"]:
                for key in ("worst_overreach_on_path", "worst_underreach_on_path"):
                    if lp[key] is not None:
                        assert lp[key]["source_case"].endswith(label)
        # the states measure differently at the remote terminal (mutual coupling, the
        # parallel path): not one solve reported three times
        rem = {(p["parallel_circuit"], p["mutual_compensation"]):
               p["apparent_at_remote_terminal_ohm"]["max"] for p in e["paths"]
               if p["infeed"] is False and p["remote"] == ("Velmar" if e["end"] !=
                                                           "Velmar" else "Wrenfold")}
        assert len({round(v, 6) for v in rem.values()}) == len(rem)
    assert "parallel circuit earthed" in text and "parallel circuit isolated" in text
    assert "relay with k0m" in text and "k0m = " in text
    # without mutual compensation the relays measure with k0 alone
    res = _reach(_double_no_load("[reach_study]\nmutual_compensation = false\n")).teed_reach
    assert not any(p.mutual_compensation for e in res.ends for p in e.paths)
    assert all(e.k0m_set is None for e in res.ends)


def test_ideal_double_circuit_is_the_two_ended_ideal_cycle():
    """The ideally transposed legs of the double circuit: every section's matrices are the
    two-ended study's ideal cycle (relayset.studies.parameters, ``ideal_cycle``: the three
    cyclic orders of both circuits in equal parts), whose circuit blocks and mutual block
    are circulant, so their Z012 is diagonal (Fortescue 1918) and Z0M is kept; on the
    branch (one circuit) Z012 reduced to its diagonal."""
    from relayset.physics.sequence import to_sequence
    from relayset.studies.geometry import build_geometry
    from relayset.studies.parameters import compute_parameters
    from relayset.studies.teed import teed_line
    from relayset.studies.teed_reach import ideal_teed_line

    study = _loaded(_double_no_load()).study
    geo = build_geometry(study, "")
    params = compute_parameters(geo)
    line = teed_line(study, geo, params, True, "")
    ideal = ideal_teed_line(line)
    cyc = params.arrangements["ideal_cycle"]
    for leg in ideal.legs[:2]:
        for z in leg.z_ohm_per_m:
            assert_allclose(z, cyc.zabc_ohm_per_m, rtol=1e-12, atol=0)
            for a, b in ((0, 0), (0, 3), (3, 3)):
                seq = to_sequence(z[a:a + 3, b:b + 3])
                off = seq - np.diag(np.diag(seq))
                assert np.abs(off).max() <= 1e-12 * np.abs(seq).max()
        for yy in leg.y_s_per_m:
            assert_allclose(yy, cyc.yabc_s_per_m, rtol=1e-12, atol=0)
    assert abs(cyc.z0m_ohm_per_m) > 0  # the mutual coupling is kept
    for z, zi in zip(line.legs[2].z_ohm_per_m, ideal.legs[2].z_ohm_per_m, strict=True):
        s, si = to_sequence(z), to_sequence(zi)
        assert_allclose(si, np.diag(np.diag(s)), rtol=0, atol=1e-12 * np.abs(s).max())
