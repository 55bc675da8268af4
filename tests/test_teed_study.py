"""A study file with a tee (relayset.inputs.teed): reading, the bad-input rules, the schema.

The study is invented (a single-circuit 132 kV line with a branch to a third substation).
Each bad input must give one line naming the file, the field and the value as written and
the rule, exit code 2 and no output (RULES.md).
"""

from __future__ import annotations

import json

import pytest

from relayset.cli import main
from relayset.inputs.study_file import parse_study, read_toml

TEED_TOML = '''
schema = "relayset-study/1"

[study]
line_id = "WV-TEE-1"
title = "Wrenfold - Velmar 132 kV with tee to Oakrest"
from_substation = "Wrenfold"
to_substation = "Velmar"

[system]
nominal_voltage = "132 kV"
frequency = "50 Hz"
earth_resistivity = "100 ohm*m"

[conductor_types.phase]
code = "243-AL1/39-ST1A"
operating_temperature = "75 degC"

[conductor_types.earth]
dc_resistance_20c = "0.43 ohm/km"
outside_diameter = "11.7 mm"
gmr = "4.3 mm"
ac_dc_ratio = 1.0

[[circuits]]
name = "1"
positions = [
  { name = "left",   x = "-5.0 m", height = "21 m", sag = "6 m", conductor = "phase" },
  { name = "middle", x = "0.0 m",  height = "21 m", sag = "6 m", conductor = "phase" },
  { name = "right",  x = "5.0 m",  height = "21 m", sag = "6 m", conductor = "phase" },
]

[[shield_wires]]
x = "0 m"
height = "28 m"
sag = "5 m"
conductor = "earth"

[line]
length = "60 km"
sections = [
  { length = "20 km", order = ["A", "B", "C"] },
  { length = "20 km", order = ["C", "A", "B"] },
  { length = "20 km", order = ["B", "C", "A"] },
]

[tee]
distance = "25 km"
substation = "Oakrest"
sections = [
  { length = "8 km", order = ["A", "B", "C"] },
  { length = "7 km", order = ["B", "C", "A"] },
]

[relay]
end = "all"
ct_ratio = "600/1 A"
vt_ratio = "132000/110 V"

[sources.Wrenfold]
z1 = "1.5 + 12j ohm"
z0 = "2.0 + 20j ohm"

[sources.Velmar]
z1 = "2.5 + 18j ohm"
z0 = "3.0 + 28j ohm"

[sources.Oakrest]
z1 = "4 + 30j ohm"
z0 = "5 + 40j ohm"

[load]
max_apparent_power = "120 MVA"
'''


def write(tmp_path, text: str = TEED_TOML, name: str = "teed.toml"):
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return path


def test_teed_study_reads(tmp_path):
    study = parse_study(read_toml(write(tmp_path)))
    assert study.tee.substation == "Oakrest"
    assert study.tee.distance == pytest.approx(25e3, rel=1e-12)  # "25 km" as written
    assert study.tee.length == pytest.approx(15e3, rel=1e-12)
    assert study.relay_ends == ("Wrenfold", "Velmar", "Oakrest")


BAD = [
    # (id, (old, new) text edit, words the one-line message must hold)
    ("tee at the far end", ('distance = "25 km"', 'distance = "60 km"'),
     ['tee.distance = "60 km"', "inside the line"]),
    ("tee beyond the line", ('distance = "25 km"', 'distance = "61 km"'),
     ['tee.distance = "61 km"', "inside the line"]),
    ("tee at the near end", ('distance = "25 km"', 'distance = "0 km"'),
     ['tee.distance = "0 km"', "greater than 0"]),
    ("tee before the line", ('distance = "25 km"', 'distance = "-3 km"'),
     ['tee.distance = "-3 km"', "greater than 0"]),
    ("branch without sections", ('sections = [\n  { length = "8 km", order = ["A", "B", "C"] },'
                                 '\n  { length = "7 km", order = ["B", "C", "A"] },\n]',
                                 "sections = []"),
     ["tee.sections = []", "must not be empty"]),
    ("source at an unknown bus", ("[sources.Oakrest]", "[sources.Oakrist]"),
     ["sources.Oakrist", "names no substation", "Oakrest"]),
    ("relay at an unknown bus", ('end = "all"', 'end = "Oakrist"'),
     ['relay.end = "Oakrist"', "is not an end", "Oakrest"]),
    ("tee to an end of the line", ('substation = "Oakrest"', 'substation = "Velmar"'),
     ['tee.substation = "Velmar"', "third substation"]),
    ("branch section on an unknown tower",
     ('{ length = "7 km", order = ["B", "C", "A"] }',
      '{ length = "7 km", order = ["B", "C", "A"], tower = "lattice" }'),
     ['tee.sections[1].tower = "lattice"', "names no tower"]),
    ("transformer and source at once", ("[load]", 'grounded_transformer_z0 = "1+12j ohm"\n[load]'),
     ["tee.grounded_transformer_z0", "either"]),
]


@pytest.mark.parametrize("case", BAD, ids=[c[0] for c in BAD])
def test_bad_tee_input_is_one_line_and_exit_2(tmp_path, capsys, case):
    _, (old, new), words = case
    assert old in TEED_TOML  # the edit applies
    text = TEED_TOML.replace(old, new, 1)
    if "grounded_transformer_z0" in new:  # the key belongs in [tee]
        text = TEED_TOML.replace('substation = "Oakrest"\n',
                                 'substation = "Oakrest"\ngrounded_transformer_z0 = '
                                 '"1+12j ohm"\n', 1)
    path = write(tmp_path, text)
    out_json = tmp_path / "out.json"
    code = main(["params", str(path), "--json", str(out_json)])
    err = capsys.readouterr().err.strip()
    assert code == 2
    assert len(err.splitlines()) == 1, err
    assert "Traceback" not in err and str(path) in err
    for w in words:
        assert w in err, err
    assert not out_json.exists()


def test_tee_on_a_double_circuit_is_refused(tmp_path, capsys):
    second = TEED_TOML.replace('[[shield_wires]]', '''[[circuits]]
name = "2"
positions = [
  { name = "l2", x = "-5.0 m", height = "31 m", sag = "6 m", conductor = "phase" },
  { name = "m2", x = "0.0 m",  height = "31 m", sag = "6 m", conductor = "phase" },
  { name = "r2", x = "5.0 m",  height = "31 m", sag = "6 m", conductor = "phase" },
]

[[shield_wires]]''').replace('height = "28 m"', 'height = "38 m"')
    second = second.replace('order = ["A", "B", "C"] }', 'order = { "1" = ["A", "B", "C"], '
                            '"2" = ["A", "B", "C"] } }')
    second = second.replace('order = ["C", "A", "B"] }', 'order = { "1" = ["C", "A", "B"], '
                            '"2" = ["C", "A", "B"] } }')
    second = second.replace('order = ["B", "C", "A"] }', 'order = { "1" = ["B", "C", "A"], '
                            '"2" = ["B", "C", "A"] } }')
    code = main(["params", str(write(tmp_path, second))])
    err = capsys.readouterr().err.strip()
    assert code == 2 and len(err.splitlines()) == 1, err
    assert "tee:" in err and "single-circuit line only" in err


def test_schema_covers_the_tee_table(capsys):
    assert main(["schema", "study"]) == 0
    tee = json.loads(capsys.readouterr().out)["properties"]["tee"]
    assert set(tee["required"]) == {"distance", "substation", "sections"}
    assert "grounded_transformer_z0" in tee["properties"]
