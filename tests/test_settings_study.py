"""Settings through the whole pipeline: study file + philosophy file -> settings, exports."""

from __future__ import annotations

import csv
import json

import pytest

from relayset.api import study_settings
from relayset.cli import main

DEMO = "ashcombe_brenwick_132kv.toml"


def _run_bad(capsys, tmp_path, path):
    out_json, out_csv = tmp_path / "s.json", tmp_path / "s.csv"
    code = main(["settings", str(path), "--json", str(out_json), "--csv", str(out_csv)])
    err = capsys.readouterr().err.strip()
    assert code == 2
    assert len(err.splitlines()) == 1 and "Traceback" not in err
    assert not out_json.exists() and not out_csv.exists()
    return err


@pytest.mark.parametrize(("edit", "words"), [
    (lambda d: d["relay"].update(ct_ratio="0/1 A"), ["relay.ct_ratio", "greater than zero"]),
    (lambda d: d["relay"].update(vt_ratio="-132000/110 V"), ["relay.vt_ratio"]),
    (lambda d: d["adjacent_lines"][0].pop("z1") and d["adjacent_lines"][0].update(
        study="no_such_line.toml"), ["adjacent_lines[0].study", "does not exist"]),
    (lambda d: d["study"].update(philosophy="missing_philosophy.toml"),
     ["study.philosophy", "does not exist"]),
])
def test_settings_bad_study(capsys, tmp_path, variant, edit, words):
    err = _run_bad(capsys, tmp_path, variant(DEMO, edit))
    for w in words:
        assert w in err, err


@pytest.mark.parametrize(("text", "words"), [
    ("[zone1]\nreach_pct = 85.0\n[zone2]\nrule = \"line_pct\"\nreach_pct = 80.0\n",
     ["zone2.reach_pct", "must be greater than zone1.reach_pct"]),
    ("[zone2]\ndelay_s = -0.1\n", ["zone2.delay_s"]),
    ("[zone2]\nreach_pcnt = 130.0\n", ["zone2.reach_pcnt", "did you mean 'reach_pct'"]),
])
def test_settings_bad_philosophy(capsys, tmp_path, variant, text, words):
    (tmp_path / "phil.toml").write_text(text, "utf-8")
    path = variant(DEMO, lambda d: d["study"].update(philosophy="phil.toml"))
    err = _run_bad(capsys, tmp_path, path)
    assert "phil.toml" in err
    for w in words:
        assert w in err, err


def test_adjacent_line_from_its_study_file(tmp_path, variant, demo_path):
    # An adjacent line given by its own study file takes that study's Z1 (identity).
    other = demo_path("kessler_oxbow_115kv.toml")

    def use_file(d):
        d["adjacent_lines"] = [{"name": "by file", "study": str(other)}]

    res = study_settings(variant(DEMO, use_file))
    z_other = study_settings(other).parameters.circuits[0].z1_ohm
    z2 = res.settings[0].zone("zone2")
    line = res.parameters.circuits[0].z1_ohm
    # zone 2 (max of 120 % and line + 50 % adjacent, infeed 1) is at least line + 0.5 Z_adj
    assert abs(z2.reach_primary_ohm) >= abs(line + 0.5 * z_other) - 1e-9


def test_philosophy_file_changes_zone1_only(tmp_path, variant):
    # 60 % lies below the limit the fault simulation sets on this demo (the maximum load
    # exported through a mho zone 1), so the philosophy governs; the default 80 % does not.
    (tmp_path / "p.toml").write_text("[zone1]\nreach_pct = 60.0\n", "utf-8")
    base = study_settings(variant(DEMO, lambda d: None, "base.toml")).settings[0]
    new = study_settings(variant(DEMO, lambda d: d["study"].update(philosophy="p.toml"),
                                 "p_study.toml")).settings[0]
    assert new.zone("zone1").reach_pct == pytest.approx(60.0)
    assert 60.0 < base.zone("zone1").reach_pct < 80.0
    assert "zone1_limited_by_simulation" in base.warning_ids()
    for z in ("zone2", "zone3", "reverse"):
        assert new.zone(z).reach_primary_ohm == base.zone(z).reach_primary_ohm


def test_settings_exports(tmp_path, demo_path):
    out_json, out_csv = tmp_path / "s.json", tmp_path / "s.csv"
    assert main(["settings", str(demo_path(DEMO)), "--json", str(out_json),
                 "--csv", str(out_csv)]) == 0
    d = json.loads(out_json.read_text())
    assert "settings" in d and "philosophy" in d and "reach_study" in d
    rows = list(csv.reader(out_csv.open(encoding="utf-8-sig", newline="")))
    assert rows[0] == ["line_id", "revision", "end", "setting", "value", "unit"]
    assert {r[2] for r in rows[1:]} == {d["settings"]["ends"][0]["end"]}
    names = [r[3] for r in rows]
    assert "Zone 1 reach, secondary" in names
    # secondary = primary * CT ratio / VT ratio (800 / 1200), identity to 1e-9
    val = {r[3]: r[4] for r in rows[1:]}
    assert float(val["Zone 1 reach, secondary"]) == pytest.approx(
        float(val["Zone 1 reach, primary"]) * 800 / 1200, rel=1e-9)


def test_zone1_follows_reach_study_when_budget_is_large(variant):
    # With a 30 % relay error in the budget (35 % in all) the recommendation is
    # floor2(100 / (1 + (35 + e)/100)) < 80 %, so zone 1 must be reduced to it (flag on).
    res = study_settings(variant(DEMO, lambda d: d.setdefault("error_budget", {}).update(
        relay_pct=30.0)))
    rec = res.reach_study.ends[0].recommended_zone1_pct
    e = res.reach_study.ends[0].arrangement("actual_plan").worst_bolted_overreach_at_remote_bus_pct
    budget = 1.0 + 1.0 + 30.0 + 3.0
    assert rec == pytest.approx(int(100 / (1 + (budget + max(e, 0)) / 100) * 2) / 2)
    # The fault simulation may limit zone 1 further (remote-bus faults with the tolerance on
    # top of the simulated overreach); never beyond the reach study's recommendation.
    assert res.settings[0].zone("zone1").reach_pct <= rec
    assert "zone1_reduced_by_reach_study" in res.settings[0].warning_ids()
    assert res.verification.ends[0].check("zone1", "no_operation_at_remote_bus").passed


def test_settings_error_names_the_study_field(capsys, tmp_path, variant):
    # A load angle of 95 deg breaks the rule 0 <= angle < 90 deg; the message must name the
    # study file's field and speak in degrees.
    err = _run_bad(capsys, tmp_path, variant(DEMO, lambda d: d["load"].update(
        load_angle_max="95 deg")))
    assert "load" in err and "below 90 deg, not 95 deg" in err


def test_settings_input_errors_are_readdressed_to_study_fields():
    from relayset.errors import InputError
    from relayset.studies.settings import _in_study_terms

    exc = _in_study_terms(InputError("must be > 0", field="tower_footing_ohm", value=-1,
                                     source="<settings inputs>"), "line.toml")
    assert str(exc) == ("line.toml: fault_resistance.tower_footing_resistance = -1: "
                        "must be > 0")


def test_min_voltage_accepts_pu_text(variant):
    res = study_settings(variant(DEMO, lambda d: d["load"].update(min_voltage="0.9 pu")))
    # Z_load,min = (0.9 x 132 kV)^2 / 160 MVA = 88.209 ohm (identity)
    assert res.settings[0].load.z_min_primary_ohm == pytest.approx((0.9 * 132e3) ** 2 / 160e6)


def test_an_end_without_a_source_is_warned(variant):
    """A study that gives no source at the remote bus is legitimate (a line fed from one
    end), but every infeed-dependent result changes: the settings warn it, naming the bus.
    With both sources given (the demo as shipped) there is no such warning."""
    assert not [w for w in study_settings(variant(DEMO, lambda d: None)).settings[0].warnings
                if w.rule_id.startswith("no_source_at")]
    res = study_settings(variant(DEMO, lambda d: d["sources"].pop("Brenwick")))
    ids = res.settings[0].warning_ids()
    assert "no_source_at_remote_end" in ids and "no_source_at_relay_end" not in ids
    w = next(w for w in res.settings[0].warnings if w.rule_id == "no_source_at_remote_end")
    assert "Brenwick" in w.message and "[sources.\"Brenwick\"]" in w.consider
