"""Every rule a real study file can break: one line naming file, field, value and rule; exit 2.

These run the real command line in-process (relayset.cli.main) and check that no traceback
appears and that no output file is left behind.
"""

from __future__ import annotations

import pytest

from relayset.cli import main

DEMO_1C = "ashcombe_brenwick_132kv.toml"
DEMO_2C = "elsford_fallowby_230kv_double.toml"


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
