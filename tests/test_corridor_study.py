"""Shared corridors through the pipeline: the neighbour's parameters, the reach study with
its states, the identities that pin the model down, and the file's rules."""

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
CORRIDOR = DEMO / "ashcombe_brenwick_132kv_corridor.toml"


def tables(path: Path = CORRIDOR) -> dict:
    return tomllib.loads(path.read_text())


def reach(data: dict, shift_m: float = 0.0):
    """Parameters and reach study of a study's tables; ``shift_m`` moves the neighbour's
    wires sideways (beyond what a file may state) before the parameters are computed."""
    src = str(DEMO / "t.toml")  # relative paths (the philosophy) as the demos'
    study = parse_study(tomllib.loads(dump_toml(data)), src)
    geo = build_geometry(study, src)
    if shift_m:
        geo = dataclasses.replace(geo, corridor_wires=tuple(
            dataclasses.replace(w, x_m=w.x_m + shift_m) for w in geo.corridor_wires))
    params = compute_parameters(geo)
    relay = resolve_relay(study, params)
    res = run_reach_study(study, geo, params, relay, study_philosophy(study, src),
                          source=src)
    return params, res


def quick(data: dict) -> dict:
    """A lighter sweep (the identities hold case by case)."""
    data["reach_study"] = {"location_step_pct": 5.0, "fault_resistances": ["0 ohm", "10 ohm"]}
    return data


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


def test_neighbour_far_away_gives_the_single_circuit():
    # Identity (Carson's mutual impedance dies away with distance): a neighbour 10 km
    # away on buses of its own (none of the protected line's: a neighbour ending on a
    # protected line's bus changes the network behind it, coupled or not) leaves the relay
    # measuring what it measures on the line alone, in every state of the neighbour.
    # The residual Carson mutual at 10 km in 100 ohm m earth is 4.4e-4 of the line's Z0
    # per km (checked below); it moves the reach by up to some 1e-4 points (in service,
    # the neighbour carrying fault current): tolerance 1e-3 percentage points of reach.
    data = quick(tables())
    nb = data["neighbours"][0]
    nb["buses"] = ["Wendlow", "Corran Vale"]
    nb["sources"]["Corran Vale"] = {"z1": "2 + 20j ohm", "z0": "3 + 30j ohm"}
    _, alone = reach({k: v for k, v in data.items() if k != "neighbours"})
    params, far = reach(data, shift_m=10_000.0)
    assert abs(params.neighbour.z0m_ohm_per_m) < 1e-3 * abs(params.circuits[0].z0_ohm_per_m)
    base = alone.ends[0].arrangement("actual_plan")
    states = [a for a in far.ends[0].arrangements if a.arrangement == "actual_plan"]
    assert [a.neighbour_state for a in states] == ["in_service", "earthed", "isolated"]
    for a in states:
        same_arrangement(a, base, 1e-3)
    for name in ("untransposed", "ideal_cycle"):
        same_arrangement(far.ends[0].arrangement(name), alone.ends[0].arrangement(name), 1e-3)
    assert far.ends[0].recommended_zone1_pct == alone.ends[0].recommended_zone1_pct


@pytest.mark.parametrize("shunt", [False, True])
def test_neighbour_on_the_same_towers_and_buses_is_the_double_circuit(shunt):
    # Identity: a neighbour on the protected line's towers (the other circuit's
    # positions) over the whole route, both ends on the line's buses, no route outside:
    # the double-circuit line with its parallel circuit in service, with or without shunt
    # capacitance (the same 6x6 matrices). Load cases as transfer angles (a power flow's
    # load flow sees both circuits of a double circuit, the protected one of a corridor).
    # Tolerance 1e-9 percentage points of reach (rounding).
    double = tables(DEMO / "elsford_fallowby_230kv_double.toml")
    double["reach_study"] = {"location_step_pct": 5.0, "fault_resistances": ["0 ohm", "10 ohm"],
                             "mutual_compensation": False, "parallel_circuit": "in_service",
                             "shunt_capacitance": shunt}
    double["line"] = {"length": double["line"]["length"]}  # one section
    double.pop("towers", None)
    load = double.get("load")
    if load:
        load.pop("power_flows", None)
    c1, c2 = double["circuits"]
    single = {k: v for k, v in double.items() if k != "circuits"}
    single["circuits"] = [c1]
    single["reach_study"] = {k: v for k, v in double["reach_study"].items()
                             if k not in ("mutual_compensation", "parallel_circuit")}
    ends = (double["study"]["from_substation"], double["study"]["to_substation"])
    single["neighbours"] = [{"name": "the other circuit", "positions": c2["positions"],
                             "sections": [0], "buses": list(ends)}]
    _, d = reach(double)
    params, n = reach(single)
    assert params.neighbour.shared_length_m == pytest.approx(params.length_m, rel=1e-12)
    for e_d, e_n in zip(d.ends, n.ends, strict=True):
        same_arrangement(e_n.arrangement("actual_plan"), e_d.arrangement("actual_plan", False),
                         1e-9)


def test_neighbour_coupling_changes_the_ground_loops_only():
    # Physics of zero-sequence mutual coupling (G. Ziegler, Numerical Distance Protection,
    # 4th ed., Publicis 2011, sec. on parallel lines: an in-service parallel line carrying
    # residual current the same way makes the ground loop underreach; an earthed one,
    # whose induced current opposes the zero-sequence flux, makes it overreach; the phase
    # loops see next to nothing of it). Checked against the same line alone; the margins
    # (3 and 1 points, 0.1 and 0.5 point for the phase loops) are common practice, no source.
    data = quick(tables())
    _, alone = reach({k: v for k, v in data.items() if k != "neighbours"})
    params, cor = reach(data)
    nb = params.neighbour
    assert nb.shared_length_m == pytest.approx(56e3)
    assert 0.05 < abs(nb.k0m_equivalent) < 0.5
    base = alone.ends[0].arrangement("actual_plan")
    by_state = {a.neighbour_state: a for a in cor.ends[0].arrangements
                if a.arrangement == "actual_plan"}
    for k, lb in enumerate(base.loops):
        ins, ear, iso = (by_state[s].loops[k] for s in ("in_service", "earthed", "isolated"))
        if lb.loop.endswith("G"):
            assert (ins.worst_underreach_on_line.error_pct
                    < lb.worst_underreach_on_line.error_pct - 3), lb.loop
            assert (ear.worst_overreach_at_remote_bus.error_pct
                    > iso.worst_overreach_at_remote_bus.error_pct + 1), lb.loop
        else:
            # (in service it also feeds the remote bus from its own: 0.5 point there)
            for x, tol in ((ins, 0.5), (ear, 0.1), (iso, 0.1)):
                assert abs(x.worst_overreach_at_remote_bus.error_pct
                           - lb.worst_overreach_at_remote_bus.error_pct) < tol, lb.loop
    # The worst state (earthed) governs zone 1.
    worst = max(a.worst_bolted_overreach_at_remote_bus_pct for a in by_state.values())
    assert worst == by_state["earthed"].worst_bolted_overreach_at_remote_bus_pct
    assert cor.ends[0].governing_case.error_pct == pytest.approx(worst)
    d = cor.to_dict()
    assert d["neighbour"]["states"] == ["in_service", "earthed", "isolated"]
    assert params.to_dict()["neighbour"]["relay_given_k0m"] is False


BAD = [
    ({"sections": [1, 3]}, "neighbours[0].sections[1] = 3: names no section of the line"),
    ({"sections": [0, 2]}, "neighbours[0].sections = [0, 2]: must list consecutive"),
    ({"sections": None, "start": "30 km", "length": "60 km"},
     'neighbours[0].length = "60 km": the shared stretch would end 90 km'),
    ({"buses": ["Wendlow", "Kirkby"]},
     'neighbours[0].buses[1] = "Kirkby": names no bus'),
    ({"buses": ["Brenwick", "Wendlow"]},
     'neighbours[0].buses[0] = "Brenwick": is the protected line\'s bus at the other end'),
    ({"positions": [{"name": "a", "x": "-5.0 m", "height": "21 m", "sag": "6 m",
                     "conductor": "phase"}, None, None]},
     'neighbours[0].positions[0].x = "-5.0 m": coincides with the protected line\'s conductor'),
    # Reviewer's finding: a neighbour ending on this line's bus 56 km from the end of the
    # shared stretch cannot get there over a route of 0 km (the model would join it to the
    # bus through a zero impedance); the file must give its route.
    ({"sections": [0]},
     'neighbours[0].route_lengths[1] = "0 km": the shared stretch ends 56 km from '
     "'Brenwick'"),
]


@pytest.mark.parametrize(("change", "message"), BAD)
def test_bad_neighbour_is_one_line(change, message):
    data = tables()
    nb = data["neighbours"][0]
    for k, v in change.items():
        if k == "positions":
            nb["positions"] = [p if p is not None else nb["positions"][i]
                               for i, p in enumerate(v)]
        elif v is None:
            nb.pop(k)
        else:
            nb[k] = v
    with pytest.raises(InputError) as exc:
        parse_study(tomllib.loads(dump_toml(data)), "t.toml")
    text = str(exc.value)
    assert "\n" not in text and text.startswith("t.toml: ")
    assert message in text, text


def test_study_schema_covers_the_neighbour_table():
    # Checked with the registry's jsonschema (Draft 2020-12 validator): the demo with a
    # neighbour validates; a misspelt key in [[neighbours]] and more neighbours than
    # MAX_NEIGHBOURS do not.
    import jsonschema

    from relayset.export.schemas import study_schema

    schema = study_schema()
    jsonschema.Draft202012Validator.check_schema(schema)
    data = json_ready(tables())
    jsonschema.Draft202012Validator(schema).validate(data)
    bad = json_ready(tables())
    bad["neighbours"][0]["route_lenghts"] = ["1 km", "2 km"]
    with pytest.raises(jsonschema.ValidationError):
        jsonschema.Draft202012Validator(schema).validate(bad)
    from relayset.inputs.study_file import MAX_NEIGHBOURS

    many = json_ready(tables())
    many["neighbours"] *= MAX_NEIGHBOURS
    jsonschema.Draft202012Validator(schema).validate(many)
    many["neighbours"] *= 2
    with pytest.raises(jsonschema.ValidationError):
        jsonschema.Draft202012Validator(schema).validate(many)


def json_ready(data):
    """TOML tables as JSON would carry them (dates as text)."""
    import json

    return json.loads(json.dumps(data, default=str))


@pytest.mark.parametrize(("change", "message"), BAD[:4])
def test_bad_neighbour_on_the_command_line(change, message, capsys, tmp_path):
    # The real command line: exit 2, one line naming the file, nothing written.
    from relayset.cli import main

    data = tables()
    nb = data["neighbours"][0]
    for k, v in change.items():
        if v is None:
            nb.pop(k)
        else:
            nb[k] = v
    path = tmp_path / "bad.toml"
    path.write_text(dump_toml(data))
    out = tmp_path / "out"
    code = main(["report", str(path), "-o", str(out)])
    err = capsys.readouterr().err.strip()
    assert code == 2
    assert len(err.splitlines()) == 1 and "Traceback" not in err
    assert f"{path}: " in err and message in err, err
    assert not out.exists() or not any(out.iterdir())


def test_frames_name_the_neighbour_state():
    # The DataFrames read to_dict(): each row of a corridor study says the neighbour's
    # state, so the three solves of the actual plan stay apart.
    data = quick(tables())
    _, res = reach(data)
    worst = res.to_frame()
    assert "neighbour_state" in worst.columns
    assert set(worst["neighbour_state"]) == {"in_service", "earthed", "isolated"}
    from relayset.frames import reach_errors_frame

    env = reach_errors_frame(res)
    n = env.groupby(["arrangement", "neighbour_state"]).size()
    assert len(n) == 5  # three arrangements in service, the actual plan out twice


def test_neighbour_beside_sections_of_different_towers():
    # A neighbour beside part of a line of two tower types: the coincidence rule looks at
    # the towers of the shared stretch only, and the coupled stretch may cut a section.
    data = tables(DEMO / "harlow_quay_tessmoor_132kv_towers.toml")
    ends = (data["study"]["from_substation"], data["study"]["to_substation"])
    pos = [{"name": n, "x": "1.9 m", "height": h, "sag": "3 m", "conductor": "phase"}
           for n, h in (("a", "26 m"), ("b", "33 m"), ("c", "40 m"))]  # a: as the pole's top
    # beside the lattice sections only; its routes reach this line's buses
    data["neighbours"] = [{"name": "N", "positions": pos, "sections": [1, 2],
                           "buses": list(ends), "route_lengths": ["20 km", "20 km"]}]
    data = quick(data)
    params, res = reach(data)
    assert params.neighbour.towers == (1,)
    assert params.neighbour.shared_length_m == pytest.approx(44e3)
    data["neighbours"][0]["sections"] = [0, 1]  # now beside the pole too
    with pytest.raises(InputError, match=r"positions\[0\]\.x.*coincides with the protected "
                       r"line's conductor at towers\.compact_pole"):
        parse_study(tomllib.loads(dump_toml(data)), "t.toml")
    data["neighbours"][0].pop("sections")
    data["neighbours"][0].update(start="10 km", length="30 km")  # cuts sections 1 and 2
    params, res = reach(data)
    assert params.neighbour.shared_length_m == pytest.approx(30e3)
    assert [a.neighbour_state for a in res.ends[0].arrangements].count("earthed") == 1


def test_neighbour_beside_a_cable_section_is_refused():
    # A neighbouring line is coupled with overhead sections only: the corridor's 6x6
    # matrices come from wires in the air (rule of this tool, no source).
    data = tomllib.loads(
        (Path(__file__).parents[1] / "demo_lines"
         / "brackenholt_saltmarsh_street_132kv_cable.toml").read_text())
    nb = tables()["neighbours"][0]
    nb.pop("shield_wires", None)
    nb.update(buses=["Wendlow", "Saltmarsh Street"], sections=[3, 4])
    data["neighbours"] = [nb]
    with pytest.raises(InputError, match=r"neighbours\[0\]\.sections = \[3, 4\]: runs beside "
                       r"line\.sections\[4\], a cable section"):
        parse_study(tomllib.loads(dump_toml(data)), "t.toml")
    # overhead sections only, its route to Saltmarsh Street given: accepted
    nb.update(sections=[0, 1], route_lengths=["14 km", "20 km"])
    parse_study(tomllib.loads(dump_toml(data)), "t.toml")
