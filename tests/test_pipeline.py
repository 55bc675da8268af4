"""The one pipeline: the file read once, the relay resolved once, settings per end, units.

Checks are identities of the pipeline (the same object seen by every step) and SHA-256 from
the standard library's hashlib.
"""

from __future__ import annotations

import hashlib
import json

import pytest

from relayset.api import load_study, study_reach, study_settings
from relayset.cli import main
from relayset.io import to_json

DEMO_132 = "ashcombe_brenwick_132kv.toml"
DEMO_115_US = "kessler_oxbow_115kv.toml"


def test_archived_hash_is_of_the_bytes_parsed(demo_path):
    # Identity: SHA-256 (hashlib, FIPS 180-4) of the file's bytes.
    path = demo_path(DEMO_132)
    loaded = load_study(path)
    assert loaded.sha256 == hashlib.sha256(path.read_bytes()).hexdigest()
    assert loaded.data == path.read_bytes()
    assert study_reach(path).source_sha256 == loaded.sha256


def test_given_z1_keeps_the_line_k0_everywhere_and_warns(variant):
    # With relay.z1_set = 3 + 30j ohm the reach study and the settings must use one k0, the
    # line's own (Z0 - Z1)/(3 Z1) of the transposed line, and the settings say the replica
    # differs from the computed Z1 (|3+30j| = 30.15 ohm against about 35 ohm).
    path = variant(DEMO_132, lambda d: d["relay"].update(z1_set="3+30j ohm"))
    res = study_settings(path)
    k0_line = res.parameters.circuits[0].k0.k0
    assert res.relay.k0_set == k0_line and not res.relay.k0_given and res.relay.z1_given
    assert res.reach_study.ends[0].k0_set == res.relay.k0_set
    assert res.settings[0].k0.k0 == res.relay.k0_set
    assert res.reach_study.ends[0].z1_set_ohm == res.settings[0].line_z1_primary_ohm == 3 + 30j
    assert "z1_differs_from_line" in res.settings[0].warning_ids()
    d = res.to_dict()
    assert d["relay"]["z1_from"] == "study file" and d["relay"]["k0_from"] == "line parameters"


def test_given_k0_reaches_reach_and_settings(variant):
    path = variant(DEMO_132, lambda d: d["relay"].update(k0_set={"magnitude": 0.7,
                                                                 "angle": "-5 deg"}))
    res = study_settings(path)
    k0 = res.relay.k0_set
    assert abs(k0) == pytest.approx(0.7, rel=1e-12)
    assert res.reach_study.ends[0].k0_set == k0 == res.settings[0].k0.k0
    assert "k0_differs_from_line" in res.settings[0].warning_ids()


def _both_ends(d):
    d["relay"]["end"] = "both"
    ends = (d["study"]["from_substation"], d["study"]["to_substation"])
    for line in d.get("adjacent_lines", []):
        line["bus"] = ends[1]
    d["lines_behind"] = [{"name": "behind the from end", "z1": "2 + 20j ohm", "bus": ends[0]}]


def test_both_ends_give_settings_for_each_end_with_their_own_neighbours(variant):
    path = variant(DEMO_132, _both_ends)
    res = study_settings(path)
    ends = tuple(s.end for s in res.settings)
    assert ends == res.relay.ends == (res.study["from_substation"],
                                      res.study["to_substation"])
    s_from, s_to = res.settings
    assert s_from.remote_end == s_to.end and s_to.remote_end == s_from.end
    # From the from end, the adjacent lines (at the to bus) grade zone 2; from the to end they
    # are behind the relay, and the line at the from bus is ahead.
    assert "adjacent" in s_from.zone("zone2").rule
    assert "behind the from end" in s_to.zone("zone2").rule
    assert "behind the from end" in s_to.zone("zone3").rule
    assert "behind the from end" not in s_from.zone("zone3").rule
    d = json.loads(to_json(res.to_dict()))
    assert [e["end"] for e in d["settings"]["ends"]] == list(ends)


def test_both_ends_need_the_bus_of_each_adjacent_line(variant, capsys):
    path = variant(DEMO_132, lambda d: d["relay"].update(end="both"))
    assert main(["settings", str(path)]) == 2
    err = capsys.readouterr().err.strip()
    assert err.count("\n") == 0 and "adjacent_lines[0].bus" in err


def test_units_follow_the_study_file_unless_told(demo_path, capsys):
    # The 115 kV demo is written in feet and miles: its summaries come back per mile.
    for cmd in ("params", "reach", "settings"):
        code = 0
        assert main([cmd, str(demo_path(DEMO_115_US))]) == code
        us = capsys.readouterr().out
        assert main([cmd, str(demo_path(DEMO_115_US)), "--units", "si"]) == code
        si = capsys.readouterr().out
        assert " mi" in us and " km" in si and us != si


def test_version_flag(capsys):
    with pytest.raises(SystemExit) as exc:
        main(["--version"])
    assert exc.value.code == 0
    assert capsys.readouterr().out.startswith("relayset ")


@pytest.mark.parametrize(("demo", "distinct"), [
    ("elsford_fallowby_230kv_double.toml", 2),  # one section: actual plan = untransposed
    (DEMO_132, 3),  # three unequal sections: all three arrangements differ
])
def test_cases_solved_counts_identical_arrangements_once(demo_path, demo, distinct):
    # Identity: cases = fault types x locations x Rf x source cases x load cases, per
    # arrangement actually solved.
    q = study_reach(demo_path(demo)).reach_study
    per = (len(q.fault_types) * len(q.locations_pct) * len(q.fault_resistances_ohm)
           * len(q.source_cases) * q.n_load_cases)
    assert q.cases_solved == per * distinct
