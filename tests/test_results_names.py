"""The results objects use the JSON's names; the old names still read the same value for one
release, with a DeprecationWarning (issue 19)."""

from __future__ import annotations

import pytest

import relayset

#: (object path from StudyResults, old name, new name = the JSON key)
RENAMED = [
    ("", "identity", "study"),
    ("", "study_input", "input"),
    ("", "reach", "reach_study"),
    ("reach_study", "n_cases", "cases_solved"),
    ("reach_study", "source_impedances", "source_impedances_ohm"),
    ("parameters", "resistivity_ohm_m", "earth_resistivity_ohm_m"),
    ("parameters", "position_names", "positions"),
    ("parameters", "z_position_ohm_per_m", "z_by_position_ohm_per_m"),
    ("parameters", "y_position_s_per_m", "y_by_position_s_per_m"),
    ("parameters.circuits.0", "long_line_flag", "long_line_correction_needed"),
    ("parameters.wires.0", "y_m", "average_height_m"),
    *[("reach_study.ends.0.arrangements.0.loops.0", old, new) for old, new in [
        ("over_at_reach", "worst_overreach_at_zone1_reach"),
        ("under_at_reach", "worst_underreach_at_zone1_reach"),
        ("over_line", "worst_overreach_on_line"),
        ("under_line", "worst_underreach_on_line"),
        ("over_at_remote_bus", "worst_overreach_at_remote_bus"),
        ("reactance_over_resistive", "worst_reactance_overreach_at_zone1_reach_resistive"),
    ]],
]


@pytest.fixture(scope="module")
def res():
    from relayset.resources import demo_lines_dir

    return relayset.study_reach(demo_lines_dir() / "ashcombe_brenwick_132kv.toml")


def _at(obj, path):
    for part in filter(None, path.split(".")):
        obj = obj[int(part)] if part.isdigit() else getattr(obj, part)
    return obj


@pytest.mark.parametrize(("path", "old", "new"), RENAMED)
def test_old_name_warns_and_reads_the_new(res, path, old, new):
    obj = _at(res, path)
    with pytest.warns(DeprecationWarning, match=rf"\.{old} is deprecated .* use \.{new}"):
        value = getattr(obj, old)
    assert value is getattr(obj, new)


@pytest.mark.parametrize(("path", "old", "new"), RENAMED)
def test_new_name_is_the_json_key(res, path, old, new):
    """Each new name is the key the JSON writes at the same place (the JSON is the
    vocabulary); the SI-suffixed matrices are the JSON's per-km keys in SI."""
    d = res.to_dict()
    parts = [p for p in path.split(".") if p]
    for p in parts:
        d = d[int(p)] if p.isdigit() else d[p]
    key = {"z_by_position_ohm_per_m": "z_by_position_ohm_per_km",
           "y_by_position_s_per_m": None}.get(new, new)
    if key is not None:
        assert key in d, (path, key)
