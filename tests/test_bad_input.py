"""Every rule a real study file can break: one line naming file, field, value and rule; exit 2.

These run the real command line in-process (relayset.cli.main) and check that no traceback
appears and that no output file is left behind.
"""

from __future__ import annotations

import pytest

from relayset.cli import main

DEMO_1C = "ashcombe_brenwick_132kv.toml"
DEMO_2C = "elsford_fallowby_230kv_double.toml"
DEMO_TW = "harlow_quay_tessmoor_132kv_towers.toml"


def run_bad(capsys, path, tmp_path, *extra):
    out_json = tmp_path / "out.json"
    code = main(["params", str(path), "--json", str(out_json), *extra])
    err = capsys.readouterr().err.strip()
    assert code == 2
    assert len(err.splitlines()) == 1, err
    assert "Traceback" not in err
    assert str(path) in err
    assert not out_json.exists(), "no partial output on bad input"
    return err


def _pos(data, k=0):
    return data["circuits"][0]["positions"][k]


def _double_then_single(d):
    """The double-circuit demo on [towers]: its towers, then single-circuit towers carrying
    circuit 1 only for the last 20 km."""
    pos = {c["name"]: c.pop("positions") for c in d["circuits"]}
    d["towers"] = {"double": {"positions": pos, "shield_wires": d.pop("shield_wires")},
                   "single": {"positions": {"1": pos["1"]}}}
    d["line"]["sections"] = [
        {"length": "44 km", "order": {"1": ["A", "B", "C"], "2": ["C", "B", "A"]},
         "tower": "double"},
        {"length": "20 km", "order": {"1": ["A", "B", "C"], "2": ["C", "B", "A"]},
         "tower": "single"}]


CASES = [
    # (id, demo file, edit, words the message must contain)
    ("below ground", DEMO_1C,
     lambda d: (_pos(d).pop("sag"), _pos(d).pop("height"), _pos(d).update(
         average_height="5 mm")), ["circuits[0].positions[0]", "below ground"]),
    ("sag reaches the ground", DEMO_1C,
     lambda d: _pos(d).update(height="18 m", sag="18 m"),
     ["circuits[0].positions[0].sag = \"18 m\"", "less than the attachment height (18 m)"]),
    ("overlap", DEMO_1C, lambda d: _pos(d, 1).update(x="-5.005 m"), ["overlaps"]),
    ("zero length", DEMO_1C, lambda d: d["line"].update(length="0 km"),
     ["line.length", "greater than 0"]),
    ("negative length", DEMO_1C, lambda d: d["line"].update(length="-80 km"),
     ["line.length"]),
    ("sections do not add up", DEMO_1C,
     lambda d: d["line"]["sections"][2].update(length="30 km"),
     ["line.sections", "add up to 78 km", "80 km"]),
    ("phase missing", DEMO_1C,
     lambda d: d["line"]["sections"][1].update(order=["C", "A", "A"]),
     ["line.sections[1].order", "'B' is missing"]),
    ("unknown code", DEMO_1C, lambda d: d["conductor_types"]["phase"].update(code="243-AL1/39"),
     ["conductor_types.phase.code", "unknown conductor code", "did you mean"]),
    ("wrong unit", DEMO_1C, lambda d: d["line"].update(length="80 kV"),
     ["line.length", "'kV' is not a unit of length"]),
    ("nan", DEMO_1C, lambda d: _pos(d).update(x="nan m"), ["finite"]),
    ("infinite", DEMO_1C, lambda d: d["system"].update(earth_resistivity="inf ohm*m"),
     ["system.earth_resistivity", "finite"]),
    ("no unit", DEMO_1C, lambda d: d["line"].update(length=80), ["needs a unit of length"]),
    ("unknown earth model", DEMO_1C, lambda d: d["system"].update(earth_model="karson"),
     ["earth_model", "did you mean 'carson'"]),
    ("two-layer earth without its lower resistivity", DEMO_1C,
     lambda d: d["system"].update(earth_model="two_layer", earth_layer_thickness="20 m"),
     ["system.earth_lower_resistivity", "needed with earth_model \"two_layer\""]),
    ("layer thickness with homogeneous earth", DEMO_1C,
     lambda d: d["system"].update(earth_layer_thickness="20 m"),
     ["system.earth_layer_thickness = \"20 m\"", "only with earth_model \"two_layer\""]),
    ("negative layer thickness", DEMO_1C,
     lambda d: d["system"].update(earth_model="two_layer", earth_layer_thickness="-3 m",
                                  earth_lower_resistivity="800 ohm*m"),
     ["system.earth_layer_thickness = \"-3 m\"", "greater than 0 m"]),
    ("implausible lower resistivity", DEMO_1C,
     lambda d: d["system"].update(earth_model="two_layer", earth_layer_thickness="3 m",
                                  earth_lower_resistivity="1e6 ohm*m"),
     ["system.earth_lower_resistivity = \"1e6 ohm*m\"", "plausible range"]),
    ("section names an unknown tower", DEMO_TW,
     lambda d: d["line"]["sections"][2].update(tower="latice"),
     ["line.sections[2].tower = \"latice\"", "names no tower", "did you mean 'lattice'"]),
    ("section without its tower", DEMO_TW, lambda d: d["line"]["sections"][1].pop("tower"),
     ["line.sections[1].tower", "is required", "compact_pole, lattice"]),
    ("tower without sections", DEMO_TW, lambda d: d["line"].pop("sections"),
     ["line.sections", "each with its tower"]),
    ("positions on the circuit and on towers", DEMO_TW,
     lambda d: d["circuits"][0].update(
         positions=d["towers"]["lattice"]["positions"]["1"]),
     ["circuits[0].positions", "on the towers"]),
    ("shield wires outside the towers", DEMO_TW,
     lambda d: d.update(shield_wires=d["towers"]["lattice"]["shield_wires"]),
     ["shield_wires", "on the towers"]),
    ("tower lacks a circuit", DEMO_TW,
     lambda d: d["towers"]["lattice"]["positions"].update({"2": d["towers"]["lattice"][
         "positions"].pop("1")}),
     ["towers.lattice.positions.2", "names no circuit"]),
    ("parallel circuit on part of the route", DEMO_2C, _double_then_single,
     ["towers.single.positions", "carries no circuit '2'", "[[neighbours]]"]),
    ("fault level in MW", DEMO_TW,
     lambda d: d["sources"]["Harlow Quay"].update(fault_level_3ph="4000 MW"),
     ['sources."Harlow Quay".fault_level_3ph = "4000 MW"', "apparent power"]),
    ("tower with two positions", DEMO_TW,
     lambda d: d["towers"]["lattice"]["positions"]["1"].pop(),
     ["towers.lattice.positions.1", "exactly three positions"]),
    ("tower conductors overlap", DEMO_TW,
     lambda d: d["towers"]["compact_pole"]["positions"]["1"][1].update(height="26 m"),
     ["towers.compact_pole.positions.1[0]", "overlaps"]),
    ("tower sag reaches the ground", DEMO_TW,
     lambda d: d["towers"]["lattice"]["shield_wires"][0].update(sag="30 m"),
     ["towers.lattice.shield_wires[0].sag = \"30 m\"", "less than the attachment height"]),
    ("tower named without towers", DEMO_1C,
     lambda d: d["line"]["sections"][0].update(tower="lattice"),
     ["line.sections[0].tower = \"lattice\"", "no [towers.NAME] tables"]),
    ("circuit without positions", DEMO_1C, lambda d: d["circuits"][0].pop("positions"),
     ["circuits[0].positions", "is required"]),
    ("unknown key", DEMO_1C, lambda d: d["system"].update(earth_resistivty="100 ohm*m"),
     ["system.earth_resistivty", "unknown key", "earth_resistivity"]),
    ("frequency", DEMO_1C, lambda d: d["system"].update(frequency="55 Hz"),
     ["50 Hz or 60 Hz"]),
    ("missing conductor type", DEMO_1C, lambda d: _pos(d).update(conductor="phse"),
     ["circuits[0].positions[0].conductor", "did you mean 'phase'"]),
    ("double circuit order per circuit", DEMO_2C,
     lambda d: d["line"]["sections"][0].update(order=["A", "B", "C"]),
     ["line.sections[0].order", "order per circuit"]),
    ("negative sag", DEMO_1C, lambda d: _pos(d).update(sag="-1 m"), ["sag", "at least 0"]),
    ("bundle too tight", DEMO_1C,
     lambda d: _pos(d).update(bundle={"count": 2, "spacing": "10 mm"}), ["bundle.spacing"]),
    ("missing field", DEMO_1C, lambda d: d["system"].pop("frequency"),
     ["system.frequency", "required"]),
    ("adjacent z0 not an impedance", DEMO_1C,
     lambda d: d["adjacent_lines"][0].update(z0="40 km"), ["adjacent_lines[0].z0", "40 km"]),
    ("adjacent z0 with a study file", DEMO_1C,
     lambda d: d["adjacent_lines"][0].update(z0="18 + 50j ohm", study="other.toml",
                                             z1=None) or d["adjacent_lines"][0].pop("z1"),
     ["adjacent_lines[0].z0", "only with z1"]),
    ("line behind z0 negative resistance", DEMO_1C,
     lambda d: d.update(lines_behind=[{"name": "x", "z1": "2 + 10j ohm",
                                       "z0": "-6 + 30j ohm"}]), ["lines_behind[0].z0"]),
]


@pytest.mark.parametrize(("name", "demo", "edit", "words"), CASES, ids=[c[0] for c in CASES])
def test_bad_study_gives_one_line(capsys, tmp_path, variant, name, demo, edit, words):
    path = variant(demo, edit)
    err = run_bad(capsys, path, tmp_path)
    for w in words:
        assert w in err, f"{w!r} not in {err!r}"


def test_missing_file(capsys, tmp_path):
    err = run_bad(capsys, tmp_path / "nope.toml", tmp_path)
    assert "does not exist" in err


def test_bad_toml(capsys, tmp_path):
    p = tmp_path / "broken.toml"
    p.write_text("[study\nline_id = 1\n", "utf-8")
    err = run_bad(capsys, p, tmp_path)
    assert "not valid TOML" in err
