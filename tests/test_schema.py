"""The input layer's own validation (relayset.inputs.schema) and the messages built on it.

The rules checked here are the project's own (no outside source): bad input is named by file,
field as the user wrote it, value and rule (issue 10); an unknown key is reported before
anything else, with a close match where there is one.
"""

from __future__ import annotations

import dataclasses
import datetime as dt

import pytest

from relayset.cli import main
from relayset.inputs import schema
from relayset.inputs.schema import ListOf, MapOf, SchemaError, spec, table

DEMO_1C = "ashcombe_brenwick_132kv.toml"
DEMO_US = "kessler_oxbow_115kv.toml"


def _positive(v):
    x = schema.strict_number(v)
    schema.check_bounds(x, gt=0)
    return x


@dataclasses.dataclass(frozen=True, kw_only=True)
class Leg:
    """A small table for the tests."""

    length: float = spec(_positive)
    label: str = spec(schema.text, "")

    def _check(self) -> None:
        if self.label == "bad":
            raise ValueError("label must not be 'bad'")


@dataclasses.dataclass(frozen=True, kw_only=True)
class Trip:
    """Tables nested in lists and in named tables."""

    legs: tuple[Leg, ...] = spec(ListOf(table(Leg)))
    stops: dict[str, Leg] = spec(MapOf(table(Leg)), factory=dict)
    count: int = spec(schema.integer(ge=1, le=8), 1)
    when: dt.date | None = spec(schema.date, None)


def _issue(data) -> schema.Issue:
    with pytest.raises(SchemaError) as e:
        schema.validate(Trip, data)
    return e.value.first()


def test_valid_data_gives_frozen_instances_with_defaults():
    trip = schema.validate(Trip, {"legs": [{"length": 2}], "when": "2024-05-01"})
    assert trip == Trip(legs=(Leg(length=2.0),), when=dt.date(2024, 5, 1))
    assert isinstance(trip.legs[0].length, float) and trip.stops == {} and trip.count == 1
    with pytest.raises(dataclasses.FrozenInstanceError):
        trip.count = 2  # type: ignore[misc]
    assert schema.to_data(trip) == {"legs": ({"length": 2.0, "label": ""},), "stops": {},
                                    "count": 1, "when": dt.date(2024, 5, 1)}


def test_issue_locations_follow_lists_and_named_tables():
    issue = _issue({"legs": [{"length": 1}, {"length": -1}]})
    assert issue.loc == ("legs", 1, "length") and issue.value == -1
    assert issue.rule == "must be greater than 0"
    issue = _issue({"legs": [], "stops": {"Old Mill": {"length": 1, "label": 3}}})
    assert issue.loc == ("stops", "Old Mill", "label")
    assert _issue({"legs": [{"label": "x"}]}).loc == ("legs", 0, "length")
    assert _issue({"legs": [{"label": "x"}]}).kind == "missing"


def test_unknown_key_wins_and_lists_the_tables_keys():
    # A bad value comes first in the data, the misspelt key later and deeper: the misspelling
    # is what the user must fix (it also made "length" missing).
    issue = _issue({"count": 0, "legs": [{"length": 1}], "stops": {"A": {"lenght": 1}}})
    assert issue.kind == "unknown" and issue.loc == ("stops", "A", "lenght")
    assert issue.known == ("length", "label")


def test_table_rule_runs_only_on_valid_fields():
    issue = _issue({"legs": [{"length": 1, "label": "bad"}]})
    assert (issue.loc, issue.rule) == (("legs", 0), "label must not be 'bad'")
    # With a field invalid the table's own rule is not reached: one issue, not two.
    with pytest.raises(SchemaError) as e:
        schema.validate(Trip, {"legs": [{"length": 0, "label": "bad"}]})
    assert [i.loc for i in e.value.issues] == [("legs", 0, "length")]


@pytest.mark.parametrize(("value", "expected"), [(3, 3), (3.0, 3), (" 4 ", 4)])
def test_integer_reads_whole_numbers(value, expected):
    assert schema.integer(ge=1)(value) == expected


@pytest.mark.parametrize("value", [True, 2.5, "2.5", float("nan"), [1], 0, 9])
def test_integer_refuses(value):
    with pytest.raises(ValueError, match=r"^must be "):
        schema.integer(ge=1, le=8)(value)


# -- the study file's messages at depth ------------------------------------------------------

def test_unknown_key_in_a_named_table_gets_a_suggestion(capsys, variant):
    path = variant(DEMO_1C, lambda d: d["conductor_types"]["phase"].update(
        {"operating_temprature": "75 degC"}))
    assert main(["params", str(path)]) == 2
    err = capsys.readouterr().err.strip()
    assert ('conductor_types.phase.operating_temprature = "75 degC": unknown key'
            in err), err
    assert "did you mean 'operating_temperature'" in err, err


def test_quoted_key_and_value_in_the_field_path(capsys, variant):
    path = variant(DEMO_US, lambda d: d["sources"]["Oxbow Flats"].update(x_over_r=1e4))
    assert main(["params", str(path)]) == 2
    err = capsys.readouterr().err.strip()
    assert 'sources."Oxbow Flats".x_over_r = 10000.0: must be at most 500' in err, err


def test_missing_key_named_at_depth(capsys, variant):
    path = variant(DEMO_1C, lambda d: d["circuits"][0]["positions"][2].pop("conductor"))
    assert main(["params", str(path)]) == 2
    err = capsys.readouterr().err.strip()
    assert "circuits[0].positions[2].conductor: is required but missing" in err, err
