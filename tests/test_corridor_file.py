"""A neighbouring line given by its own study file (``study`` in ``[[neighbours]]``): the same
results as the neighbour written out in the protected line's file (identity), the offset of
its own towers, and that file treated as hostile until read (limits, one-line messages
naming THAT file and its field, no recursion, nothing written on bad input)."""

from __future__ import annotations

import tomllib
from pathlib import Path

import numpy as np
import pytest

from relayset.errors import InputError
from relayset.inputs.limits import MAX_DEPTH, MAX_FILE_BYTES
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


def quick(data: dict) -> dict:
    data["reach_study"] = {"location_step_pct": 5.0, "fault_resistances": ["0 ohm", "10 ohm"]}
    return data


def wendlow(x0: float = 0.0) -> dict:
    """The demo's neighbour as a study file of its own (invented): Wendlow - Brenwick
    132 kV, its positions from its own tower centre line ``x0`` metres from the protected
    line's, the conductor types under names of its own (the same wires as the demo's)."""
    demo = tables()
    nb = demo["neighbours"][0]
    ph = {"wphase": demo["conductor_types"]["phase"], "wearth": demo["conductor_types"]["earth"]}

    def moved(p, cond):
        x = float(p["x"].split()[0]) - x0
        return dict(p, x=f"{x:g} m", conductor=cond)

    return {
        "schema": "relayset-study/1",
        "study": {"line_id": "NM-WB-1", "title": "Wendlow - Brenwick 132 kV",
                  "from_substation": "Wendlow", "to_substation": "Brenwick",
                  "revision": "A", "revision_date": demo["study"]["revision_date"],
                  "status": "draft", "prepared_by": "T. Varga", "checked_by": "",
                  "approved_by": "", "philosophy": "default"},
        "system": dict(demo["system"]),
        "conductor_types": ph,
        "circuits": [{"name": "W", "phase_labels": ["A", "B", "C"],
                      "positions": [moved(p, "wphase") for p in nb["positions"]]}],
        "shield_wires": [moved(w, "wearth") for w in nb["shield_wires"]],
        "line": {"length": "70 km"},
        "sources": {"Wendlow": dict(nb["sources"]["Wendlow"])},
    }


def by_file(tmp_path: Path, other: dict | str | bytes, **keys) -> Path:
    """The demo with its neighbour given by a study file ``other`` (tables, text or bytes)
    written next to it; returns the main study's path."""
    data = quick(tables())
    data["study"]["philosophy"] = "default"
    nb = data["neighbours"][0]
    data["neighbours"] = [{"name": nb["name"], "study": "wendlow.toml",
                           "sections": nb["sections"], "route_lengths": nb["route_lengths"],
                           **keys}]
    o = tmp_path / "wendlow.toml"
    if isinstance(other, dict):
        o.write_text(dump_toml(other))
    elif isinstance(other, str):
        o.write_text(other)
    else:
        o.write_bytes(other)
    main = tmp_path / "main.toml"
    main.write_text(dump_toml(data))
    return main


def reach_of(path: Path):
    src = str(path)
    study = parse_study(tomllib.loads(path.read_text()), src)
    geo = build_geometry(study, src)
    params = compute_parameters(geo)
    relay = resolve_relay(study, params)
    return params, run_reach_study(study, geo, params, relay, study_philosophy(study, src),
                                   source=src), geo


@pytest.mark.parametrize("x0", [0.0, -30.0])
def test_neighbour_from_its_own_file_is_the_neighbour_written_out(tmp_path, x0):
    # Identity: the same wires, buses and sources read from the neighbour's own file (its
    # positions on the shared towers, or on its own towers with the offset) give the
    # parameters and reach study of the demo, where they are written in the main file.
    # Tolerance: 1e-12 relative on the matrices, 1e-9 points of reach (rounding).
    inline = tmp_path / "inline.toml"
    data = quick(tables())
    data["study"]["philosophy"] = "default"
    inline.write_text(dump_toml(data))
    p_a, r_a, _ = reach_of(inline)
    keys = {"offset": f"{x0:g} m"} if x0 else {}
    p_b, r_b, geo = reach_of(by_file(tmp_path, wendlow(x0), **keys))
    for za, zb in zip(p_a.neighbour.z_by_position_ohm_per_m, p_b.neighbour.z_by_position_ohm_per_m,
                      strict=True):
        np.testing.assert_allclose(zb, za, rtol=1e-12, atol=0)
    assert p_b.neighbour.buses == ("Wendlow", "Brenwick")
    for e_a, e_b in zip(r_a.ends, r_b.ends, strict=True):
        for a, b in zip(e_a.arrangements, e_b.arrangements, strict=True):
            np.testing.assert_allclose(b.envelope_max_pct, a.envelope_max_pct, rtol=0,
                                       atol=1e-9)
    note = next(a for a in geo.assumptions if "read from wendlow.toml" in a)
    import hashlib

    assert hashlib.sha256((tmp_path / "wendlow.toml").read_bytes()).hexdigest() in note


def _bad_cases():
    good = wendlow()
    deep = "x = " + "[" * (MAX_DEPTH + 5) + "]" * (MAX_DEPTH + 5) + "\n"

    def changed(**kw):
        d = wendlow()
        for k, v in kw.items():
            d[k] = v
        return d

    nb_table = dict(tables()["neighbours"][0])
    return [
        # (other file, keys in [[neighbours]], file the message names, text in it)
        (b"x" * (MAX_FILE_BYTES + 1), {}, "wendlow.toml", "larger"),
        (deep, {}, "wendlow.toml", "nest"),
        ("schema = [unclosed\n", {}, "wendlow.toml", ""),
        # named from this study, the field the user wrote (outside-check finding: the
        # message named the other file's table, without the value)
        (changed(neighbours=[nb_table]), {}, "main.toml",
         'neighbours[0].study = "wendlow.toml": names a study file that lists neighbouring '
         "lines of its own"),
        (changed(system=dict(good["system"], nominal_voltage="275 kV")), {}, "wendlow.toml",
         'system.nominal_voltage = "275 kV": differs from the protected line\'s'),
        (changed(conductor_types={"wphase": {"code": "NO-SUCH-CODE"},
                                  "wearth": good["conductor_types"]["wearth"]}),
         {}, "wendlow.toml", "conductor_types.wphase.code"),
        (changed(sources={}), {}, "wendlow.toml", "sources: has no [sources.Wendlow]"),
        (changed(line={"length": "-70 km"}), {}, "wendlow.toml", 'line.length = "-70 km"'),
        (changed(circuits=[good["circuits"][0], dict(
            good["circuits"][0], name="W2",
            positions=[dict(p, x=f"{float(p['x'].split()[0]) + 60:g} m")
                       for p in good["circuits"][0]["positions"]])]), {}, "wendlow.toml",
         "circuits: a neighbour's study file describes a single-circuit line"),
        (good, {"buses": ["Kestle", "Brenwick"]}, "main.toml",
         'neighbours[0].buses[0] = "Kestle": is not a substation of'),
        (good, {"positions": nb_table["positions"]}, "main.toml",
         "neighbours[0].positions"),
        (good, {"offset": "35 m"}, "main.toml",
         'neighbours[0].offset = "35 m": its circuits[0].positions[0] coincides with the '
         "protected line's conductor at"),
        (good, {"study": "main.toml"}, "main.toml",
         'neighbours[0].study = "main.toml": names this study file itself'),
        (good, {"study": "missing.toml"}, "main.toml",
         'neighbours[0].study = "missing.toml": neighbour study file does not exist'),
    ]


@pytest.mark.parametrize(("other", "keys", "names", "text"), _bad_cases())
def test_hostile_neighbour_file_is_one_line_naming_that_file(tmp_path, other, keys, names,
                                                              text):
    main = by_file(tmp_path, other, **keys)
    with pytest.raises(InputError) as exc:
        src = str(main)
        study = parse_study(tomllib.loads(main.read_text()), src)
        build_geometry(study, src)
    msg = str(exc.value)
    assert "\n" not in msg and "Traceback" not in msg
    assert msg.startswith(str(tmp_path / names) + ": "), msg
    assert text in msg, msg


@pytest.mark.parametrize("case", [0, 3, 5])
def test_hostile_neighbour_file_on_the_command_line(tmp_path, capsys, case):
    # The real command line: exit 2, one line naming that file, nothing written.
    from relayset.cli import main as cli_main

    other, keys, names, text = _bad_cases()[case]
    main = by_file(tmp_path, other, **keys)
    out = tmp_path / "out"
    code = cli_main(["report", str(main), "-o", str(out)])
    err = capsys.readouterr().err.strip()
    assert code == 2
    assert len(err.splitlines()) == 1 and "Traceback" not in err
    assert f"error: {tmp_path / names}: " in err and text in err, err
    assert not out.exists() or not any(out.iterdir())


def test_study_schema_takes_a_neighbour_file(tmp_path):
    # Checked with the registry's jsonschema (Draft 2020-12): a neighbour by its own study
    # file validates; one with neither positions nor study does not.
    import json

    import jsonschema

    from relayset.export.schemas import study_schema

    main = by_file(tmp_path, wendlow(-30.0), offset="-30 m")
    data = json.loads(json.dumps(tomllib.loads(main.read_text()), default=str))
    v = jsonschema.Draft202012Validator(study_schema())
    v.validate(data)
    del data["neighbours"][0]["study"]
    with pytest.raises(jsonschema.ValidationError):
        v.validate(data)
