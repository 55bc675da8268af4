"""compare: the philosophy applied and the checks are compared; the same revision twice and
two different lines are warned about."""

from __future__ import annotations

import shutil

from relayset.archive.compare import compare, format_table
from relayset.resources import demo_lines_dir

FAST = "kessler_oxbow_115kv.toml"
OTHER = "ashcombe_brenwick_132kv.toml"


def _revision(folder, revision: str, zone2_pct: float | None):
    """kessler as ``revision`` with its own philosophy file (zone 2 reach changed)."""
    import tomllib
    from pathlib import Path

    import relayset
    from relayset.inputs.philosophy import DEFAULT_FILE

    from tomlwrite import dump_toml

    folder.mkdir(parents=True, exist_ok=True)
    phil = (Path(relayset.__file__).parent / "data" / DEFAULT_FILE).read_text("utf-8")
    if zone2_pct is not None:
        ph = tomllib.loads(phil)
        ph["zone2"]["reach_pct"] = zone2_pct
        phil = dump_toml(ph)
    (folder / "phil.toml").write_text(phil, "utf-8")
    data = tomllib.loads((demo_lines_dir() / FAST).read_text("utf-8"))
    data["study"].update(revision=revision, philosophy="phil.toml")
    (folder / "line.toml").write_text(dump_toml(data), "utf-8")
    return folder / "line.toml"


def test_philosophy_and_checks_are_compared(tmp_path):
    import tomllib

    old = _revision(tmp_path / "a", "0", None)
    base = tomllib.loads((tmp_path / "a" / "phil.toml").read_text("utf-8"))
    new_pct = base["zone2"]["reach_pct"] + 60.0  # far enough to change a check
    new = _revision(tmp_path / "b", "1", new_pct)
    c = compare(old, new)
    phil = {ch.name: ch for ch in c.changes if ch.section == "philosophy"}
    assert "zone2.reach_pct" in phil
    assert phil["zone2.reach_pct"].old == base["zone2"]["reach_pct"]
    assert phil["zone2.reach_pct"].new == new_pct
    assert not c.warnings
    assert any(ln.startswith("philosophy") and "zone2.reach_pct" in ln
               for ln in format_table(c).splitlines())


def test_changed_check_results_are_listed():
    from relayset.archive.compare import _check_changes

    def results(passed: bool, result: str):
        return {"settings": {"ends": [{"end": "R", "zones": {"zone2": {"checks": [
            {"check_id": "resistive_load_limit", "passed": passed}]}}}]},
            "verification": {"ends": [{"end": "R", "checks": [
                {"zone": "zone1", "check_id": "covers", "result": result}]}]}}

    ch = _check_changes(results(True, "pass"), results(False, "FAIL"))
    assert [(c.name, c.old, c.new) for c in ch] == [
        ("R zone2 resistive_load_limit (setting rule)", "pass", "FAIL"),
        ("R zone1 covers (verification)", "pass", "FAIL")]
    assert _check_changes(results(True, "pass"), results(True, "pass")) == []


def test_same_revision_and_different_lines_are_warned(tmp_path):
    a = tmp_path / FAST
    shutil.copy(demo_lines_dir() / FAST, a)
    same = compare(a, a)
    assert same.warnings and "both files are revision" in same.warnings[0]
    assert format_table(same).startswith("WARNING: both files are revision")
    b = tmp_path / OTHER
    shutil.copy(demo_lines_dir() / OTHER, b)
    two = compare(a, b)
    assert "different lines" in two.warnings[0]
