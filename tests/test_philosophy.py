"""Setting philosophy: defaults, partial files and the error for each broken rule."""

from __future__ import annotations

import dataclasses
import tomllib
from importlib import resources

import pytest

from relayset.errors import InputError
from relayset.inputs.philosophy import default_philosophy, load_philosophy, philosophy_from_dict


def _write(tmp_path, text):
    p = tmp_path / "utility.toml"
    p.write_text(text, encoding="utf-8")
    return p


def test_default_philosophy_equals_the_shipped_file():
    # Identity: the model holds exactly the values of relayset/data/philosophy_default.toml.
    text = resources.files("relayset").joinpath("data").joinpath("philosophy_default.toml")
    raw = tomllib.loads(text.read_text("utf-8"))
    ph = default_philosophy()
    assert ph.to_dict() == raw
    # Defaults stated in the brief (common practice, no source).
    assert (ph.zone1.reach_pct, ph.zone2.reach_pct, ph.zone2.adjacent_pct) == (80, 120, 50)
    assert (ph.zone3.adjacent_pct, ph.reverse.reach_pct, ph.zone2.adjacent_zone1_pct) == (
        120, 20, 80)
    assert 0.3 <= ph.zone2.delay_s <= 0.4


def test_partial_file_takes_defaults(tmp_path):
    p = _write(tmp_path, "[zone2]\nreach_pct = 130\n\n[characteristic]\nmho_angle_deg = 75\n")
    ph = load_philosophy(p)
    base = default_philosophy()
    assert ph.zone2.reach_pct == 130.0
    assert ph.characteristic.mho_angle_deg == 75.0
    assert ph.zone1 == base.zone1 and ph.zone3 == base.zone3 and ph.reverse == base.reverse
    assert ph.zone2.delay_s == base.zone2.delay_s


def test_philosophy_is_frozen():
    ph = default_philosophy()
    with pytest.raises(dataclasses.FrozenInstanceError):
        ph.zone1.reach_pct = 70.0  # type: ignore[misc]


def test_unknown_key_suggests_close_match(tmp_path):
    p = _write(tmp_path, "[zone2]\nreach_pcnt = 130\n")
    with pytest.raises(InputError) as e:
        load_philosophy(p)
    assert e.value.source == str(p)
    assert e.value.field == "zone2.reach_pcnt"
    assert e.value.value == 130
    assert "did you mean 'reach_pct'" in str(e.value)


def test_unknown_table_suggests_close_match():
    with pytest.raises(InputError) as e:
        philosophy_from_dict({"zone_2": {"reach_pct": 130}}, source="study.toml")
    assert e.value.field == "zone_2" and "'zone2'" in e.value.rule


@pytest.mark.parametrize(
    ("data", "field"),
    [
        ({"zone2": {"reach_pct": 80.0}}, "zone2.reach_pct"),  # zone 2 <= zone 1
        ({"zone3": {"reach_pct": 110.0}}, "zone3.reach_pct"),  # zone 3 <= zone 2
        ({"zone3": {"adjacent_pct": 40.0}}, "zone3.adjacent_pct"),  # zone 3 adds <= zone 2
        ({"zone3": {"delay_s": -0.1}}, "zone3.delay_s"),  # negative delay
        ({"zone2": {"delay_s": 0.0}}, "zone2.delay_s"),  # not above zone 1
        ({"zone3": {"delay_s": 0.3}}, "zone3.delay_s"),  # not above zone 2
        ({"zone1": {"reach_pct": 100.0}}, "zone1.reach_pct"),  # zone 1 must underreach
        ({"characteristic": {"shape": "circle"}}, "characteristic.shape"),
        ({"characteristic": {"mho_angle_deg": "lin"}}, "characteristic.mho_angle_deg"),
        ({"characteristic": {"mho_angle_deg": 120}}, "characteristic.mho_angle_deg"),
        ({"zone2": {"rule": "line_plus_adjacents"}}, "zone2.rule"),
        ({"zone2": {"infeed": "measured"}}, "zone2.infeed"),
        ({"zone2": {"infeed_factor": 0.0}}, "zone2.infeed_factor"),
        ({"zone1": {"reach_pct": True}}, "zone1.reach_pct"),
        ({"zone1": {"reach_pct": "80 %"}}, "zone1.reach_pct"),
        ({"zone1": 80}, "zone1"),
    ],
)
def test_rule_breaks_raise_input_error(data, field):
    with pytest.raises(InputError) as e:
        philosophy_from_dict(data, source="p.toml")
    assert e.value.field == field
    assert e.value.source == "p.toml"
    assert str(e.value).startswith(f"p.toml: {field}")


def test_non_finite_number_in_file(tmp_path):
    p = _write(tmp_path, "[zone1]\nreach_pct = nan\n")
    with pytest.raises(InputError) as e:
        load_philosophy(p)
    assert e.value.field == "zone1.reach_pct" and "finite" in e.value.rule


def test_missing_file_names_the_file(tmp_path):
    p = tmp_path / "nope.toml"
    with pytest.raises(InputError) as e:
        load_philosophy(p)
    assert e.value.source == str(p) and "not found" in e.value.rule


def test_invalid_toml_names_the_file(tmp_path):
    p = _write(tmp_path, "[zone1\nreach_pct = 80\n")
    with pytest.raises(InputError) as e:
        load_philosophy(p)
    assert e.value.source == str(p) and "not valid TOML" in e.value.rule
    assert "\n" not in str(e.value)


def test_with_changes_validates():
    ph = default_philosophy().with_changes({"zone2": {"reach_pct": 140}})
    assert ph.zone2.reach_pct == 140.0
    with pytest.raises(InputError):
        default_philosophy().with_changes({"zone2": {"reach_pct": 50}})
