"""One named test per class of bad input (issue 10): one clear line, exit 2, nothing written.

The command line runs in-process (relayset.cli.main). The rules checked here are the
project's own (no outside source): what a message must say, not a number.
"""

from __future__ import annotations

import csv
import os
import stat
import warnings

import pytest

from relayset.cli import main
from relayset.inputs.study_file import load_study

DEMO_1C = "ashcombe_brenwick_132kv.toml"
DEMO_US = "kessler_oxbow_115kv.toml"
DEMO_2C = "elsford_fallowby_230kv_double.toml"
DEMO_TWIN = "greyholt_ivel_400kv_twin.toml"


def bad(capsys, tmp_path, path, command="params", *extra):
    """Run a command that must fail: one line of at most 300 characters, no output file."""
    out = tmp_path / "out.json"
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        code = main([command, str(path), "--json", str(out), *extra])
    err = capsys.readouterr().err.strip()
    assert code == 2, err
    assert len(err.splitlines()) == 1 and len(err) <= 300, err
    assert "Traceback" not in err and "tuple[" not in err, err
    assert not out.exists()
    assert not [w for w in caught if issubclass(w.category, RuntimeWarning)]
    return err


def has(err, *words):
    for w in words:
        assert w in err, f"{w!r} not in {err!r}"


def _pos(d, k=0, c=0):
    return d["circuits"][c]["positions"][k]


# -- field paths, unknown keys, encodings --------------------------------------------------

def test_field_paths_as_written(capsys, tmp_path, variant):
    err = bad(capsys, tmp_path, variant(DEMO_1C, lambda d: _pos(d, 1).update(height="tall")))
    has(err, 'circuits[0].positions[1].height = "tall"', "number followed by a unit")


def test_two_positions_is_a_clear_message(capsys, tmp_path, variant):
    err = bad(capsys, tmp_path, variant(DEMO_1C, lambda d: d["circuits"][0]["positions"].pop()))
    has(err, "circuits[0].positions:", "exactly three positions", "found 2")


def test_section_order_path(capsys, tmp_path, variant):
    err = bad(capsys, tmp_path, variant(
        DEMO_1C, lambda d: d["line"]["sections"][0].update(order="ABC")))
    has(err, "line.sections[0].order", "list of phase labels")


def test_three_circuits_refused(capsys, tmp_path, variant):
    err = bad(capsys, tmp_path, variant(
        DEMO_2C, lambda d: d["circuits"].append(dict(d["circuits"][0], name="3"))))
    has(err, "circuits:", "one or two")


def test_misspelt_key_is_unknown_with_suggestion(capsys, tmp_path, variant):
    err = bad(capsys, tmp_path, variant(
        DEMO_1C, lambda d: d["system"].update(frequncy=d["system"].pop("frequency"))))
    has(err, "system.frequncy", "unknown key", "did you mean 'frequency'")


def test_duplicated_key_names_the_field(capsys, tmp_path, demo_path):
    text = demo_path(DEMO_1C).read_text("utf-8").replace(
        'frequency = "50 Hz"', 'frequency = "50 Hz"\nfrequency = "60 Hz"')
    p = tmp_path / "dup.toml"
    p.write_text(text, "utf-8")
    has(bad(capsys, tmp_path, p), "system.frequency", "given twice")


def test_byte_order_mark_accepted(capsys, tmp_path, demo_path):
    p = tmp_path / "bom.toml"
    p.write_bytes(b"\xef\xbb\xbf" + demo_path(DEMO_1C).read_bytes())
    assert main(["params", str(p)]) == 0
    assert "NM-AB-1" in capsys.readouterr().out


def test_decimal_comma_hint(capsys, tmp_path, variant):
    err = bad(capsys, tmp_path, variant(DEMO_1C, lambda d: _pos(d).update(height="21,5 m")))
    has(err, 'circuits[0].positions[0].height = "21,5 m"', "decimal comma", "'21.5 m'")


def test_directory_as_study_file(capsys, tmp_path):
    has(bad(capsys, tmp_path, tmp_path), "is a folder")


# -- magnitudes -----------------------------------------------------------------------------

ABSURD = [
    ("height", lambda d: _pos(d).update(height="1e300 m"), "circuits[0].positions[0].height"),
    ("x", lambda d: _pos(d).update(x="1e18 m"), "circuits[0].positions[0].x"),
    ("spacing", lambda d: _pos(d).update(bundle={"count": 2, "spacing": "1e300 m"}),
     "bundle.spacing"),
    ("resistivity", lambda d: d["system"].update(earth_resistivity="1e18 ohm*m"),
     "system.earth_resistivity"),
    ("voltage", lambda d: d["system"].update(nominal_voltage="1e300 kV"),
     "system.nominal_voltage"),
    ("fault level", lambda d: d["sources"]["Ashcombe"].update(fault_level_3ph="1e300 MVA"),
     "sources.Ashcombe.fault_level_3ph"),
    ("x/r", lambda d: d["sources"]["Ashcombe"].update(x_over_r=1e18),
     "sources.Ashcombe.x_over_r"),
    ("source z1", lambda d: d["sources"]["Brenwick"].update(z1="1e300j ohm"),
     "sources.Brenwick.z1"),
    ("length", lambda d: d["line"].update(length="1e300 km"), "line.length"),
    ("ct ratio", lambda d: d["relay"].update(ct_ratio="1e300/1 A"), "relay.ct_ratio"),
    ("diameter", lambda d: d["conductor_types"]["earth"].update(outside_diameter="1e18 mm"),
     "conductor_types.earth"),
    ("temperature", lambda d: d["conductor_types"]["phase"].update(
        operating_temperature="1e300 degC"), "conductor_types.phase.operating_temperature"),
    ("fault resistance", lambda d: d.setdefault("reach_study", {}).update(
        fault_resistances=["1e300 ohm"]), "reach_study.fault_resistances[0]"),
    ("load", lambda d: d["load"].update(max_apparent_power="1e300 MVA"),
     "load.max_apparent_power"),
]


@pytest.mark.parametrize(("name", "edit", "field"), ABSURD, ids=[a[0] for a in ABSURD])
def test_absurd_magnitudes_refused(capsys, tmp_path, variant, name, edit, field):
    err = bad(capsys, tmp_path, variant(DEMO_1C, edit), "settings")
    has(err, field, "must ")


def test_sag_at_attachment_height(capsys, tmp_path, variant):
    err = bad(capsys, tmp_path, variant(DEMO_US, lambda d: _pos(d).update(sag=_pos(d)["height"])))
    has(err, "circuits[0].positions[0].sag", "touch the ground")


@pytest.mark.parametrize(("edit", "field"), [
    (lambda d: d.setdefault("reach_study", {}).update(source_cases=[]),
     "reach_study.source_cases"),
    (lambda d: d["load"].update(transfer_angles=[]), "load.transfer_angles"),
    (lambda d: d.setdefault("reach_study", {}).update(fault_types=[]), "reach_study.fault_types"),
    (lambda d: d["line"].update(sections=[]), "line.sections"),
])
def test_empty_lists_named_with_their_table(capsys, tmp_path, variant, edit, field):
    has(bad(capsys, tmp_path, variant(DEMO_1C, edit), "reach"), f"{field} = []: must not be empty")


def test_tiny_location_step_refused_before_any_work(capsys, tmp_path, variant):
    err = bad(capsys, tmp_path, variant(DEMO_1C, lambda d: d.setdefault("reach_study", {}).update(
        location_step_pct=0.001)))  # params already refuses it
    has(err, "reach_study.location_step_pct = 0.001", "at least 0.01")


# -- long text -------------------------------------------------------------------------------

LONG = "x" * 100_000


@pytest.mark.parametrize(("edit", "field"), [
    (lambda d: d["circuits"][0].update(phase_labels=[LONG, "B", "C"]),
     "circuits[0].phase_labels"),
    (lambda d: d["system"].update(earth_model=LONG), "system"),
    (lambda d: d["study"].update(from_substation=LONG), "study.from_substation"),
    (lambda d: d["study"].update(philosophy=LONG), "study.philosophy"),
    (lambda d: d["conductor_types"].update({LONG: d["conductor_types"]["phase"]}),
     "conductor_types"),
    (lambda d: d["system"].update({LONG: 1}), "system.xxx"),
])
def test_long_text_shortened_in_messages(capsys, tmp_path, variant, edit, field):
    has(bad(capsys, tmp_path, variant(DEMO_1C, edit), "settings"), field)


def test_long_file_name(capsys, tmp_path):
    err = bad(capsys, tmp_path, tmp_path / ("y" * 5000 + ".toml"))
    has(err, "...", ".toml")


# -- errors against the right file and field -------------------------------------------------

def test_adjacent_study_error_reported_against_that_file(capsys, tmp_path, variant):
    adj = variant(DEMO_US, lambda d: d["line"].update(length="-3 mi"), filename="adj.toml")

    def edit(d):
        d["adjacent_lines"][0].pop("z1")
        d["adjacent_lines"][0]["study"] = str(adj)

    main_file = variant(DEMO_1C, edit)
    err = bad(capsys, tmp_path, main_file, "settings")
    has(err, f'{adj}: line.length = "-3 mi"')
    assert str(main_file) not in err


def test_no_source_at_relay_end(capsys, tmp_path, variant):
    err = bad(capsys, tmp_path, variant(DEMO_1C, lambda d: d["sources"].pop("Ashcombe")),
              "settings")
    has(err, 'relay.end = "Ashcombe"', "no source", "[sources.Ashcombe]")


def test_params_rejects_a_bad_relay_end(capsys, tmp_path, variant):
    err = bad(capsys, tmp_path, variant(DEMO_1C, lambda d: d["relay"].update(end="Ashcomb")))
    has(err, 'relay.end = "Ashcomb"', "not an end", "did you mean 'Ashcombe'")


def test_lengths_echo_the_users_value(capsys, tmp_path, variant):
    err = bad(capsys, tmp_path, variant(
        DEMO_US, lambda d: d["line"]["sections"][0].update(length="10 mi")))
    has(err, 'line.sections = ["10 mi", "9 mi", "9 mi"]', "mi but the line is")
    assert "km" not in err


# -- output paths -----------------------------------------------------------------------------

def _ok_args(demo_path, command="settings"):
    return [command, str(demo_path(DEMO_1C))]


def test_json_under_a_regular_file(capsys, tmp_path, demo_path):
    (tmp_path / "afile").write_text("x")
    assert main([*_ok_args(demo_path, "params"), "--json", str(tmp_path / "afile" / "o.json")]) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1
    has(err, "--json", "is a file, not a folder")


def test_json_at_a_directory(capsys, tmp_path, demo_path):
    (tmp_path / "d").mkdir()
    assert main([*_ok_args(demo_path, "params"), "--json", str(tmp_path / "d")]) == 2
    has(capsys.readouterr().err, "--json", "is a folder")


def test_csv_failure_leaves_no_json(capsys, tmp_path, demo_path):
    (tmp_path / "afile").write_text("x")
    out_json = tmp_path / "s.json"
    assert main([*_ok_args(demo_path), "--json", str(out_json),
                 "--csv", str(tmp_path / "afile" / "s.csv")]) == 2
    has(capsys.readouterr().err, "--csv")
    assert not out_json.exists()
    assert sorted(p.name for p in tmp_path.iterdir()) == ["afile"]  # no temporary file either


@pytest.mark.parametrize("mask", [0o022, 0o077])
def test_outputs_follow_the_umask(tmp_path, demo_path, mask):
    old = os.umask(mask)
    try:
        assert main([*_ok_args(demo_path), "--json", str(tmp_path / "s.json"),
                     "--csv", str(tmp_path / "s.csv")]) == 0
    finally:
        os.umask(old)
    for name in ("s.json", "s.csv"):
        assert stat.S_IMODE((tmp_path / name).stat().st_mode) == 0o666 & ~mask


def test_csv_is_spreadsheet_friendly(tmp_path, demo_path):
    out = tmp_path / "s.csv"
    assert main([*_ok_args(demo_path), "--csv", str(out)]) == 0
    raw = out.read_bytes()
    assert raw.startswith(b"\xef\xbb\xbf")  # UTF-8 byte-order mark
    rows = list(csv.reader(raw.decode("utf-8-sig").splitlines()))
    assert rows[0][:3] == ["line_id", "revision", "end"]
    assert all(r[:3] == ["NM-AB-1", "B", "Ashcombe"] for r in rows[1:]), rows[1]
    assert "Ω" in {r[5] for r in rows}
    for r in rows[1:]:
        digits = r[4].lstrip("-").split("e")[0].replace(".", "").lstrip("0")
        assert len(digits) <= 12, r  # no binary noise like 29.999999999999996


# -- friendly spellings and warnings ---------------------------------------------------------

@pytest.mark.parametrize("unit", ["ohm-m", "ohm.m", "ohm m", "Ω·m", "ohms-m"])
def test_resistivity_spellings(variant, unit):
    p = variant(DEMO_1C, lambda d: d["system"].update(earth_resistivity=f"100 {unit}"))
    assert load_study(p).system.earth_resistivity == 100.0


def test_shield_wire_below_phases_warns(capsys, variant):
    p = variant(DEMO_1C, lambda d: d["shield_wires"][0].update(height="12 m", sag="1 m"))
    assert main(["params", str(p)]) == 0
    has(capsys.readouterr().out, "Warning: shield wire E1", "below the highest phase")


def test_demo_lines_have_no_warning(capsys):
    assert main(["params", "--demo"]) == 0
    assert "Warning:" not in capsys.readouterr().out


@pytest.mark.parametrize(("word", "angle"), [("horizontal", "0 deg"), ("vertical", "90 deg")])
def test_bundle_orientation_words(variant, word, angle):
    def with_orientation(value):
        return load_study(variant(DEMO_TWIN, lambda d: [
            p["bundle"].update(orientation=value) for p in d["circuits"][0]["positions"]],
            filename=f"{value}.toml"))

    by_word = with_orientation(word).circuits[0].positions[0].bundle.orientation
    assert by_word == with_orientation(angle).circuits[0].positions[0].bundle.orientation


@pytest.mark.parametrize(("field", "value", "words"), [
    ("ct_ratio", "1/400 A", "steps down"),
    ("ct_ratio", "400/1 V", "in A, not V"),
    ("vt_ratio", "66000/110 A", "in V, not A"),
    ("vt_ratio", "0.11/132 kV", "steps down"),
])
def test_instrument_transformer_ratio_rules(variant, capsys, field, value, words):
    # A CT or VT steps current or voltage down, and its ratio is in amperes or volts
    # (IEC 61869-2/-3 rated quantities; from memory).
    path = variant(DEMO_1C, lambda d: d["relay"].update({field: value}))
    assert main(["params", str(path)]) == 2
    err = capsys.readouterr().err.strip()
    assert f"relay.{field}" in err and words in err and "\n" not in err


def test_vt_ratio_checked_against_the_line_voltage(variant, capsys):
    # A 132 kV VT ratio (1200) on a 66 kV line gives 55 V on the secondary: outside the
    # 56-250 V of VT secondaries (common practice, no source).
    path = variant(DEMO_1C, lambda d: d["system"].update(nominal_voltage="66 kV"))
    assert main(["params", str(path)]) == 2
    err = capsys.readouterr().err.strip()
    assert "relay.vt_ratio" in err and "55 V on the secondary" in err


def test_apparent_power_is_not_given_in_watts(variant, capsys):
    # VA and W are different quantities (IEC 60050-131, apparent against active power;
    # from memory) although their units have one dimension: "60 MW" is refused, "60 MVA" read.
    path = variant(DEMO_1C, lambda d: d["load"].update(max_apparent_power="60 MW"))
    assert main(["params", str(path)]) == 2
    err = capsys.readouterr().err.strip()
    assert "load.max_apparent_power" in err and "not W" in err and "\n" not in err
    path = variant(DEMO_1C, lambda d: d["load"].update(max_apparent_power="60 MVA"))
    assert main(["params", str(path)]) == 0


# -- the value as the user wrote it (the project's rule: never a Python repr) ---------------

def test_complex_value_shown_as_written(capsys, tmp_path, variant):
    err = bad(capsys, tmp_path, variant(DEMO_1C, lambda d: d["relay"].update(
        z1_set="-4.2+14.5j ohm")))
    has(err, 'relay.z1_set = "-4.2+14.5j ohm": must have R >= 0 and X > 0')
    assert "(-4.2" not in err


def test_number_shown_as_written(capsys, tmp_path, demo_path):
    text = demo_path(DEMO_1C).read_text("utf-8").replace("x_over_r = 10", "x_over_r = 1e3")
    path = tmp_path / "study.toml"
    path.write_text(text, "utf-8")
    has(bad(capsys, tmp_path, path), "sources.Brenwick.x_over_r = 1e3: must be at most 500")


def test_table_rule_names_its_key_and_value(capsys, tmp_path, variant):
    err = bad(capsys, tmp_path, variant(DEMO_1C, lambda d: d["sources"]["Ashcombe"].pop("z0")))
    has(err, 'sources.Ashcombe.z1 = "1.5 + 12j ohm": needs z0 as well')


def test_unknown_key_shows_its_value(capsys, tmp_path, variant):
    err = bad(capsys, tmp_path, variant(DEMO_1C, lambda d: d["system"].update(
        frequncy=d["system"].pop("frequency"))))
    has(err, 'system.frequncy = "50 Hz": unknown key')


def test_duplicated_key_shows_the_value_as_written(capsys, tmp_path, demo_path):
    text = demo_path(DEMO_1C).read_text("utf-8").replace(
        'frequency = "50 Hz"', "frequency = \"50 Hz\"\nfrequency = '60 Hz'")
    path = tmp_path / "study.toml"
    path.write_text(text, "utf-8")
    has(bad(capsys, tmp_path, path), "system.frequency = '60 Hz': is given twice")


def test_choice_in_own_words(capsys, tmp_path, variant):
    err = bad(capsys, tmp_path, variant(DEMO_1C, lambda d: d["study"].update(status="final")))
    has(err, "study.status = \"final\": must be 'draft', 'for review' or 'approved'")
    assert "Input should" not in err


def test_text_with_quotes_shown_in_toml_quoting(capsys, tmp_path, variant):
    err = bad(capsys, tmp_path, variant(DEMO_1C, lambda d: _pos(d, 1).update(height='2"x')))
    has(err, 'circuits[0].positions[1].height = "2\\"x":')
