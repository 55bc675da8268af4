"""Shared corridors beside a double-circuit line, and more than one neighbouring line, through
the pipeline: the identities that pin the model down (a neighbour 10 km away is no
neighbour; a second neighbour 10 km away leaves the first one's results; a neighbour on the
same towers and buses is one more circuit, the same whichever way the triple circuit is
written), the states solved, the verification with the parallel circuit's and the
neighbours' states, the governing cases solved again, the report and the file's rules."""

from __future__ import annotations

import dataclasses
import tomllib
from pathlib import Path

import numpy as np
import pytest

from relayset.errors import InputError
from relayset.inputs.study_file import parse_study
from relayset.studies.geometry import build_geometry
from relayset.studies.parameters import compute_parameters
from relayset.studies.reach import run_reach_study
from relayset.studies.relay import resolve_relay
from relayset.studies.settings import study_philosophy

from tomlwrite import dump_toml

DEMO = Path(__file__).resolve().parent.parent / "demo_lines"
DOUBLE = DEMO / "elsford_fallowby_230kv_double.toml"
CORRIDOR = DEMO / "ashcombe_brenwick_132kv_corridor.toml"


def tables(path: Path) -> dict:
    return tomllib.loads(path.read_text())


def quick(data: dict, **rs) -> dict:
    """A lighter sweep (the identities hold case by case)."""
    data["reach_study"] = {**data.get("reach_study", {}), "location_step_pct": 5.0,
                           "fault_resistances": ["0 ohm", "10 ohm"], **rs}
    return data


def reach(data: dict, shift_m: dict[int, float] | None = None):
    """Parameters and reach study of a study's tables; ``shift_m`` moves neighbour j's wires
    sideways by that much (beyond what a file may state) before the parameters."""
    src = str(DEMO / "t.toml")  # relative paths (the philosophy) as the demos'
    study = parse_study(tomllib.loads(dump_toml(data)), src)
    geo = build_geometry(study, src)
    if shift_m:
        geo = dataclasses.replace(geo, corridor_wires=tuple(
            dataclasses.replace(w, x_m=w.x_m + next(
                (d for j, d in shift_m.items() if w.field.startswith(f"neighbours[{j}]")), 0.0))
            for w in geo.corridor_wires))
    params = compute_parameters(geo)
    relay = resolve_relay(study, params)
    res = run_reach_study(study, geo, params, relay, study_philosophy(study, src),
                          source=src)
    return params, res


def same_arrangement(a, b, atol_pct: float) -> None:
    np.testing.assert_allclose(a.envelope_max_pct, b.envelope_max_pct, rtol=0, atol=atol_pct)
    np.testing.assert_allclose(a.envelope_min_pct, b.envelope_min_pct, rtol=0, atol=atol_pct)
    for la, lb in zip(a.loops, b.loops, strict=True):
        for f in ("worst_overreach_at_zone1_reach", "worst_overreach_at_remote_bus",
                  "worst_reactance_overreach_at_zone1_reach_resistive"):
            wa, wb = getattr(la, f), getattr(lb, f)
            assert (wa is None) == (wb is None)
            if wa is not None:
                np.testing.assert_allclose(wa.error_pct, wb.error_pct, rtol=0, atol=atol_pct)


def marrow(**change) -> dict:
    """An invented neighbour of the double circuit: on its own towers 25 m to 35 m left of
    the centre line, from 20 km to the Fallowby end, its other end at Marrow 15 km away."""
    nb = {"name": "Marrow - Fallowby 230 kV",
          "positions": [{"name": n, "x": x, "height": "30 m", "sag": "8 m",
                         "conductor": "phase"}
                        for n, x in (("a", "-35 m"), ("b", "-30 m"), ("c", "-25 m"))],
          "shield_wires": [{"name": "M1", "x": "-30 m", "height": "37 m", "sag": "6 m",
                            "conductor": "earth"}],
          "start": "20 km", "length": "44 km", "buses": ["Marrow", "Fallowby"],
          "route_lengths": ["15 km", "0 km"],
          "sources": {"Marrow": {"z1": "2 + 25j ohm", "z0": "3 + 40j ohm"}}}
    nb.update(change)
    return nb


def own_buses(nb: dict) -> dict:
    """The neighbour on buses of its own at both ends (none of the protected line's)."""
    nb = dict(nb, buses=["Marrow", "Kestle"], sources=dict(nb["sources"]))
    nb["sources"]["Kestle"] = {"z1": "1.5 + 18j ohm", "z0": "2.5 + 30j ohm"}
    return nb


# --------------------------------------------------------------------------------------
# Beside a double circuit
# --------------------------------------------------------------------------------------


def test_double_circuit_with_a_far_neighbour_is_the_double_circuit():
    # Identity (Carson's mutual impedance dies away with distance): a neighbour 10 km
    # away on buses of its own leaves the double circuit's reach study as without it, in
    # every state of the neighbour, with and without mutual compensation. Tolerance 1e-3
    # percentage points of reach (the residual Carson mutual at 10 km in this study's
    # 300 ohm m earth is 1.1e-3 of the line's Z0 per km, checked below).
    base = quick(tables(DOUBLE))
    _, alone = reach(base)
    data = quick(tables(DOUBLE))
    data["neighbours"] = [own_buses(marrow())]
    params, far = reach(data, {0: 10_000.0})
    assert abs(params.neighbour.z0m_ohm_per_m) < 2e-3 * abs(params.circuits[0].z0_ohm_per_m)
    for e_f, e_a in zip(far.ends, alone.ends, strict=True):
        states = [a for a in e_f.arrangements if a.arrangement == "actual_plan"
                  and a.mutual_compensation]
        assert [a.neighbour_state for a in states] == ["in_service", "earthed", "isolated"]
        for a in states:
            same_arrangement(a, e_a.arrangement("actual_plan", True), 1e-3)
        for name in ("untransposed", "ideal_cycle"):
            for mutual in (True, False) if name == "actual_plan" else (True,):
                same_arrangement(e_f.arrangement(name, mutual), e_a.arrangement(name, mutual),
                                 1e-3)
        assert e_f.recommended_zone1_pct == e_a.recommended_zone1_pct


def test_neighbour_beside_a_double_circuit_couples_the_ground_loops():
    # Physics of zero-sequence mutual coupling (G. Ziegler, Numerical Distance Protection,
    # 4th ed., Publicis 2011, parallel lines): beside the double circuit, the neighbour
    # out and earthed makes the ground loops overreach more than out and isolated (its
    # induced current opposes the zero-sequence flux); the phase loops barely notice
    # (margins 0.5 and 0.2 point: common practice, no source). Nine conductors: the
    # neighbour's matrices hold circuit 1, the parallel circuit and its own phases.
    data = quick(tables(DOUBLE))
    data["neighbours"] = [marrow()]
    params, res = reach(data)
    nb = params.neighbour
    assert nb.z_by_position_ohm_per_m[0].shape == (9, 9)
    assert nb.shared_length_m == pytest.approx(44e3)
    e = res.ends[0]
    by_state = {a.neighbour_state: a for a in e.arrangements
                if a.arrangement == "actual_plan" and a.mutual_compensation}
    assert list(by_state) == ["in_service", "earthed", "isolated"]
    for k, lp in enumerate(by_state["earthed"].loops):
        iso = by_state["isolated"].loops[k]
        if lp.loop.endswith("G"):
            assert (lp.worst_overreach_at_remote_bus.error_pct
                    > iso.worst_overreach_at_remote_bus.error_pct + 0.5), lp.loop
        else:
            assert abs(lp.worst_overreach_at_remote_bus.error_pct
                       - iso.worst_overreach_at_remote_bus.error_pct) < 0.2, lp.loop
    worst = max(a.worst_bolted_overreach_at_remote_bus_pct for a in by_state.values())
    assert e.governing_case.error_pct == pytest.approx(worst)
    assert res.to_dict()["neighbour"]["states"] == ["in_service", "earthed", "isolated"]


@pytest.mark.parametrize("shunt", [False, True])
def test_triple_circuit_written_both_ways(shunt):
    # Identity: three circuits on one tower over the whole route, all on the line's two
    # buses: the double circuit with a neighbour tied to both buses equals the single
    # circuit with two such neighbours (the parallel circuit given as a neighbour): both
    # are the same triple circuit. Everything in service, no mutual compensation (the
    # relay has none for a neighbour), load as transfer angles (a double circuit's load
    # flow sees both of its circuits, a corridor's the protected line's).
    # Tolerance 1e-9 percentage points of reach (rounding).
    double = quick(tables(DOUBLE), mutual_compensation=False, shunt_capacitance=shunt)
    c1, c2 = double["circuits"]
    ends = [double["study"]["from_substation"], double["study"]["to_substation"]]
    third = {"name": "the third circuit", "sections": [0], "buses": ends,
             "positions": [{"name": n, "x": x, "height": h, "sag": "10 m",
                            "conductor": "phase"}
                           for n, x, h in (("a", "0 m", "38 m"), ("b", "0 m", "31 m"),
                                           ("c", "0 m", "24 m"))]}
    double["neighbours"] = [third]
    single = {k: v for k, v in double.items() if k != "circuits"}
    single["circuits"] = [c1]
    single["reach_study"] = {k: v for k, v in double["reach_study"].items()
                             if k not in ("mutual_compensation", "parallel_circuit")}
    order = double["line"]["sections"][0]["order"]["2"]
    pos2 = {p["name"]: p for p in c2["positions"]}
    # circuit 2's phases A, B, C at the positions its order names
    single["line"] = {"length": double["line"]["length"],
                      "sections": [{"length": double["line"]["sections"][0]["length"],
                                    "order": double["line"]["sections"][0]["order"]["1"]}]}
    names = [p["name"] for p in c2["positions"]]
    as_nb = [dict(pos2[names[order.index(ph)]]) for ph in ("A", "B", "C")]
    single["neighbours"] = [{"name": "circuit 2", "sections": [0], "buses": ends,
                             "positions": as_nb}, third]
    load = double.get("load")
    if load:
        load.pop("power_flows", None)
    _, d = reach(double)
    _, s = reach(single)
    for e_d, e_s in zip(d.ends, s.ends, strict=True):
        same_arrangement(e_s.arrangement("actual_plan"), e_d.arrangement("actual_plan"), 1e-9)
    # not vacuous: the third circuit moves the double circuit's reach
    _, alone = reach({k: v for k, v in double.items() if k != "neighbours"})
    diff = np.abs(d.ends[0].arrangement("actual_plan").envelope_max_pct
                  - alone.ends[0].arrangement("actual_plan").envelope_max_pct)
    assert np.nanmax(diff) > 0.1


# --------------------------------------------------------------------------------------
# More than one neighbour
# --------------------------------------------------------------------------------------


def second(**change) -> dict:
    """An invented second neighbour of the Ashcombe - Brenwick corridor demo, on the other
    side of the line, beside its first 40 km, on buses of its own."""
    nb = {"name": "Selby - Tarn 132 kV",
          "positions": [{"name": n, "x": x, "height": "20 m", "sag": "6 m",
                         "conductor": "phase"}
                        for n, x in (("a", "22 m"), ("b", "27 m"), ("c", "32 m"))],
          "start": "0 km", "length": "40 km", "buses": ["Selby", "Tarn"],
          "route_lengths": ["5 km", "12 km"],
          "sources": {"Selby": {"z1": "2 + 20j ohm", "z0": "3 + 32j ohm"},
                      "Tarn": {"z1": "2.5 + 24j ohm", "z0": "3.5 + 36j ohm"}}}
    nb.update(change)
    return nb


def test_two_neighbours_one_far_is_the_one_neighbour():
    # Identity: a second neighbour 10 km away leaves the first one's reach study as it
    # was, state by state: the states of two neighbours (corridor_states: both in
    # service; each in turn earthed, isolated; both earthed) map onto the one neighbour's
    # (its own state; the far one's state changes nothing). Tolerance 1e-3 points.
    one = quick(tables(CORRIDOR))
    _, res1 = reach(one)
    two = quick(tables(CORRIDOR))
    two["neighbours"].append(second())
    params, res2 = reach(two, {1: 10_000.0})
    assert len(params.corridor.neighbours) == 2
    w, s = "Wendlow - Brenwick 132 kV", "Selby - Tarn 132 kV"
    as_one = {"neighbours in_service": "in_service",
              f"neighbour {w} earthed, the others in_service": "earthed",
              f"neighbour {w} isolated, the others in_service": "isolated",
              f"neighbour {s} earthed, the others in_service": "in_service",
              f"neighbour {s} isolated, the others in_service": "in_service",
              "neighbours earthed": "earthed"}
    for e2, e1 in zip(res2.ends, res1.ends, strict=True):
        got = [a for a in e2.arrangements if a.arrangement == "actual_plan"]
        assert [a.neighbour_state for a in got] == list(as_one)
        ref = {a.neighbour_state: a for a in e1.arrangements if a.arrangement == "actual_plan"}
        for a in got:
            same_arrangement(a, ref[as_one[a.neighbour_state]], 1e-3)
        assert e2.recommended_zone1_pct == e1.recommended_zone1_pct
    d = res2.to_dict()["neighbour"]
    assert [n["name"] for n in d["neighbours"]] == [w, s]
    assert len(d["states"]) == 6  # 2 N + 2, not 3^N = 9


def test_neighbours_couple_with_each_other_where_they_run_together():
    # Where both neighbours run beside the line (here 24 km to 40 km) their own mutual
    # coupling is in the cascade: the piece's matrix has a non-zero block between them;
    # elsewhere the one absent has zero rows and columns (uncoupled connector).
    from relayset.studies.corridor import corridor_cascade

    data = quick(tables(CORRIDOR))
    data["neighbours"].append(second())
    src = str(DEMO / "t.toml")
    study = parse_study(tomllib.loads(dump_toml(data)), src)
    geo = build_geometry(study, src)
    params = compute_parameters(geo)
    line = corridor_cascade(geo, params, "actual_plan", True)
    assert line.n_conductors == 9
    edges = np.concatenate([[0.0], np.cumsum(line.length_m)])
    mids = 0.5 * (edges[:-1] + edges[1:])
    for k, x in enumerate(mids):
        z = line.z_ohm_per_m[k]
        w_here, s_here = 24e3 < x < 80e3, 0 < x < 40e3
        assert (np.abs(z[3:6, 3:6]).max() > 0) == w_here
        assert (np.abs(z[6:9, 6:9]).max() > 0) == s_here
        assert (np.abs(z[3:6, 6:9]).max() > 0) == (w_here and s_here)


BAD = [
    (lambda d: d["neighbours"].append(second(name="Wendlow - Brenwick 132 kV")),
     'neighbours[1].name = "Wendlow - Brenwick 132 kV": is the name of neighbours[0] too'),
    (lambda d: d["neighbours"].append(second(start="20 km", positions=[
        dict(d["neighbours"][0]["positions"][0]), *second()["positions"][1:]])),
     'neighbours[1].positions[0].x = "-35 m": coincides with neighbours[0].positions[0]'),
    (lambda d: d["neighbours"].extend([second(name=f"N{k}") for k in range(4)]),
     "neighbours"),
]


@pytest.mark.parametrize(("change", "message"), BAD)
def test_bad_neighbours_are_one_line(change, message):
    data = tables(CORRIDOR)
    change(data)
    with pytest.raises(InputError) as exc:
        parse_study(tomllib.loads(dump_toml(data)), "t.toml")
    text = str(exc.value)
    assert "\n" not in text and text.startswith("t.toml: ")
    assert message in text, text


def test_neighbours_apart_may_share_a_place_on_the_cross_section():
    # Two neighbours whose stretches do not overlap may use the same cross-section place
    # (one after the other along the route).
    data = tables(CORRIDOR)
    data["neighbours"].append(second(length="20 km", positions=[
        dict(p) for p in data["neighbours"][0]["positions"]]))
    parse_study(tomllib.loads(dump_toml(data)), "t.toml")


# --------------------------------------------------------------------------------------
# Verification, replay, report
# --------------------------------------------------------------------------------------


@pytest.fixture(scope="module")
def double_run(tmp_path_factory):
    from relayset import api

    data = tables(DOUBLE)
    data["study"]["philosophy"] = str(DEMO / data["study"]["philosophy"])
    data["neighbours"] = [marrow()]
    path = tmp_path_factory.mktemp("double") / "double_corridor.toml"
    path.write_text(dump_toml(data))
    return api.study_settings(path)


def test_verification_beside_a_double_circuit(double_run):
    # The states: the parallel circuit's three with the neighbour in service, the
    # neighbour's other two with the parallel circuit in service, both earthed; faults on
    # the neighbour and on the parallel circuit are both judged as external to zone 1.
    ver = double_run.verification.to_dict()
    assert ver["parallel_states"] == [
        "neighbour in_service, parallel in_service", "neighbour in_service, parallel earthed",
        "neighbour in_service, parallel isolated", "neighbour earthed, parallel in_service",
        "neighbour isolated, parallel in_service", "neighbour earthed, parallel earthed"]
    e = next(x for x in ver["ends"] if x["end"] == "Elsford")
    ids = {c["check_id"]: c for c in e["checks"] if c["zone"] == "zone1"}
    for cid in ("no_operation_for_neighbouring_line_faults",
                "no_operation_for_parallel_circuit_faults"):
        assert ids[cid]["cases_run"] > 1000, cid
    assert any("Shared corridor: Marrow - Fallowby 230 kV" in n for n in ver["notes"])


def test_governing_cases_beside_a_double_circuit_are_solved_again(double_run):
    # Identity (as tests/test_export_case_states.py): every governing case, whatever its
    # parallel-circuit and neighbour state, solved again as a batch of one measures the
    # verification's loop impedance (1e-6 relative: rounding).
    from relayset.export import comtrade

    solver = comtrade.case_solver(double_run)
    cases = [(e.end, c.governing_case) for e in double_run.verification.ends
             for c in e.checks if c.governing_case is not None]
    assert len({g.parallel_state for _e, g in cases}) >= 2
    for end, g in cases:
        st = next(s for s in double_run.settings if s.end == end)
        p = solver.phasors(end, st, g)
        np.testing.assert_allclose(p.z_loop_ohm, complex(g.z_apparent_primary_ohm),
                                   rtol=1e-6, atol=0)


def test_report_shows_every_neighbour():
    # The report's corridor part names each neighbour, with its own paragraph and row.
    from relayset.report.context import build_context
    from relayset.report.html import render_html
    from relayset.studies.pipeline import load_bytes, run_loaded

    data = quick(tables(CORRIDOR))
    data["neighbours"].append(second(name="Selby - Tarn <132 kV>"))
    text = dump_toml(data)
    loaded = load_bytes(text.encode(), str(DEMO / "t.toml"))
    res = run_loaded(loaded, reach=True)
    html = render_html(build_context(res, environ={}), text)
    for name in ("Wendlow - Brenwick 132 kV", "Selby - Tarn &lt;132 kV&gt;"):
        assert f"Shared corridor: {name}</h4>" in html
        assert f"<tr><td>{name}</td>" in html
    assert "<132" not in html
    assert "neighbour Wendlow - Brenwick 132 kV earthed, the others in service" in html


def test_verified_settings_with_a_far_neighbour_are_the_double_circuits(tmp_path):
    # Identity through the whole verification: a neighbour 10 km away (its own buses)
    # beside the double circuit leaves the zones and every check's margin as for the
    # double circuit alone, the mutual compensation of the parallel circuit applied as
    # there in each of the neighbour's states. Tolerance 0.01 point (the residual 10 km
    # mutual, see above); the zone reaches as set (rounded) equal.
    from relayset import api
    from relayset.studies.geometry import build_geometry as real_build

    def write(data, name):
        data["study"]["philosophy"] = str(DEMO / data["study"]["philosophy"])
        path = tmp_path / name
        path.write_text(dump_toml(data))
        return path

    alone = api.study_settings(write(tables(DOUBLE), "alone.toml"))
    data = tables(DOUBLE)
    data["neighbours"] = [own_buses(marrow())]
    import relayset.studies.geometry as geometry_mod

    def far(study, source):  # the neighbour moved 10 km away (no file may say so)
        geo = real_build(study, source)
        return dataclasses.replace(geo, corridor_wires=tuple(
            dataclasses.replace(w, x_m=w.x_m - 10_000.0) for w in geo.corridor_wires))

    mp = pytest.MonkeyPatch()
    try:
        for mod in ("relayset.studies.pipeline", "relayset.studies.verification.closing",
                    "relayset.studies.verification.replay"):
            __import__(mod)
        mp.setattr(geometry_mod, "build_geometry", far)
        import relayset.studies.pipeline as pipeline_mod

        if hasattr(pipeline_mod, "build_geometry"):
            mp.setattr(pipeline_mod, "build_geometry", far)
        res = api.study_settings(write(data, "far.toml"))
    finally:
        mp.undo()
    assert res.verification.to_dict()["parallel_states"][0].startswith("neighbour")
    for s_a, s_f in zip(alone.settings, res.settings, strict=True):
        for z in ("zone1", "zone2", "zone3"):
            assert s_f.zone(z).reach_pct == s_a.zone(z).reach_pct, z
    for e_a, e_f in zip(alone.verification.ends, res.verification.ends, strict=True):
        got = {(c.zone, c.check_id): c for c in e_f.checks}
        for c in e_a.checks:
            f = got[c.zone, c.check_id]
            assert f.passed == c.passed, c.check_id
            if c.margin_pct is not None:
                assert f.margin_pct == pytest.approx(c.margin_pct, abs=0.01), c.check_id
