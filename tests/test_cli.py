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


def test_console_that_is_not_utf8_never_stops_a_command(tmp_path, demo_path):
    """A cp1252 or ASCII console (a Windows-style redirect) once crashed `settings` and
    `compare` with UnicodeEncodeError before they wrote their files. What the console
    cannot show is replaced; the files are UTF-8 whatever the console."""
    import os

    study = str(demo_path("ashcombe_brenwick_132kv.toml"))
    other = str(demo_path("kessler_oxbow_115kv.toml"))
    for enc in ("cp1252", "ascii"):
        env = {**os.environ, "PYTHONIOENCODING": enc}
        out = tmp_path / enc
        r = subprocess.run([sys.executable, "-m", "relayset.cli", "settings", study,
                            "--json", str(out / "s.json"), "--csv", str(out / "s.csv")],
                           capture_output=True, env=env, check=False)
        assert r.returncode in (0, 3), r.stderr.decode(enc, "replace")
        assert b"Traceback" not in r.stderr
        assert b"?" in r.stdout  # the ohm sign, replaced on this console
        assert json.loads((out / "s.json").read_bytes().decode("utf-8"))["settings"]
        assert (out / "s.csv").read_bytes().startswith(b"\xef\xbb\xbf")  # UTF-8 with BOM
        r = subprocess.run([sys.executable, "-m", "relayset.cli", "compare", other, study],
                           capture_output=True, env=env, check=False)
        assert r.returncode == 0 and b"Traceback" not in r.stderr


def test_python_dash_m_runs_the_command_line():
    # `python -m relayset` is the same command line as the `relayset` script.
    import subprocess
    import sys

    out = subprocess.run([sys.executable, "-m", "relayset", "--help"], capture_output=True,
                         text=True, check=False)
    assert out.returncode == 0 and out.stdout.startswith("usage: relayset"), out.stderr
