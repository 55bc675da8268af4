"""The command line on the shipped demo lines: summaries print, JSON keys carry units."""

from __future__ import annotations

import json
import subprocess
import sys

from relayset.cli import main


def test_params_demo_prints_every_line(capsys):
    assert main(["params", "--demo"]) == 0
    out = capsys.readouterr().out
    for line_id in ("NM-AB-1", "PR-KO-115", "NM-EF-2C", "NM-GI-4"):
        assert line_id in out
    assert "licensed professional engineer" in out


def test_params_json_keys_carry_units(tmp_path, demo_path):
    out = tmp_path / "p.json"
    assert main(["params", str(demo_path("ashcombe_brenwick_132kv.toml")), "--json",
                 str(out)]) == 0
    d = json.loads(out.read_text())
    c = d["parameters"]["circuits"][0]
    assert len(c["z1_ohm_per_km"]) == 2
    assert set(c["k0"]["k0"]) == {"magnitude", "angle_deg"}
    assert "licensed professional engineer" in d["caution"]
    # The archived input reproduces the file's tables.
    assert d["input"]["line"]["length"] == "80 km"
    assert len(d["source_sha256"]) == 64


def test_us_units_summary(capsys, demo_path):
    assert main(["params", "--units", "us", str(demo_path("kessler_oxbow_115kv.toml"))]) == 0
    assert "ohm/mi" in capsys.readouterr().out


def test_list_commands(capsys):
    assert main(["earth-models"]) == 0
    out = capsys.readouterr().out
    assert "carson" in out and "deri" in out and "carson_truncated" in out
    assert main(["conductors"]) == 0
    assert "556.5-26/7-ACSR" in capsys.readouterr().out


def test_help_runs_as_a_program():
    r = subprocess.run([sys.executable, "-m", "relayset.cli", "--help"], capture_output=True,
                       text=True, check=False)
    assert r.returncode == 0 and "params" in r.stdout


def test_no_file_is_an_input_error(capsys):
    assert main(["params"]) == 2
    assert "give at least one study FILE" in capsys.readouterr().err
