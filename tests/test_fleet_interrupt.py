"""Nothing lost: a batch killed mid-run leaves complete files only, a register that lists only
finished lines, and a rerun that skips them and finishes the rest."""

from __future__ import annotations

import csv
import io
import json
import os
import signal
import subprocess
import sys
import time
import tomllib

from relayset.resources import demo_lines_dir

from tomlwrite import dump_toml

N_LINES = 8


def _variants(folder):
    folder.mkdir()
    base = tomllib.loads((demo_lines_dir() / "kessler_oxbow_115kv.toml").read_text("utf-8"))
    for k in range(N_LINES):
        base["study"]["line_id"] = f"VAR-{k:02d}"
        (folder / f"v{k:02d}.toml").write_text(dump_toml(base), "utf-8")


def test_killed_batch_loses_nothing(tmp_path):
    src, out = tmp_path / "lines", tmp_path / "out"
    _variants(src)
    cmd = [sys.executable, "-m", "relayset.cli", "batch", str(src), "-o", str(out),
           "--jobs", "1", "--no-report"]
    proc = subprocess.Popen(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
                            start_new_session=True)
    deadline = time.monotonic() + 120
    while time.monotonic() < deadline and len(list(out.glob("VAR-*.json"))) < 2:
        time.sleep(0.05)
    os.killpg(proc.pid, signal.SIGKILL)  # no chance to clean up
    proc.wait()
    done = sorted(p.name for p in out.glob("VAR-*.json"))
    assert 2 <= len(done) < N_LINES, "the batch must be killed mid-run"
    for p in out.glob("VAR-*.json"):  # every visible result is whole
        d = json.loads(p.read_text("utf-8"))
        assert d["study"]["line_id"] + "_rev0.json" == p.name
    # the register lists finished lines only (the CSV follows every finished line)
    listed = {r["results_file"] for r in csv.DictReader(
        io.StringIO((out / "register.csv").read_text("utf-8-sig")))}
    assert listed <= set(done) and len(listed) >= len(done) - 1

    rerun = subprocess.run(cmd, capture_output=True, text=True, timeout=300)
    assert rerun.returncode == 0, rerun.stderr
    assert f"{len(done)} line(s) up to date" in rerun.stderr
    assert f"{N_LINES - len(done)} computed" in rerun.stdout
    rows = list(csv.DictReader(io.StringIO((out / "register.csv").read_text("utf-8-sig"))))
    assert sorted(r["line_id"] for r in rows) == [f"VAR-{k:02d}" for k in range(N_LINES)]
    assert not [p for p in out.iterdir() if p.name.startswith(".")]  # no temporary left
