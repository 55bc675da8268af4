"""A hostile or unlucky fleet: one bad line never stops the others, register cells are text
(visible, never a formula), pool workers end with the batch, and one batch per output folder.

Cell neutralisation follows the OWASP "CSV Injection" guidance (a leading = + - @, tab or
carriage return is quoted with a single quote); the .xlsx cell types are those of ECMA-376
Part 1, 18.18.11 (ST_CellType: "s" shared string, "n" number), as openpyxl names them.
"""

from __future__ import annotations

import csv
import io
import json
import os
import signal
import socket
import subprocess
import sys
import time
import tomllib
from pathlib import Path

import pytest

from relayset.cli import main
from relayset.fleet.batch import run_batch
from relayset.fleet.lock import LOCK_NAME
from relayset.fleet.register import NAMES, failed_row, register_csv, register_xlsx
from relayset.resources import demo_lines_dir

from tomlwrite import dump_toml

DEMO = demo_lines_dir()
BASE = "kessler_oxbow_115kv.toml"  # the fastest demo line
ON_LINUX = sys.platform.startswith("linux") and Path("/proc/self/stat").is_file()


def _line(folder: Path, name: str, line_id: str, title: str | None = None) -> Path:
    """A copy of the fast demo line with its own line ID; ``title`` is TOML basic-string text
    (so controls can be written as TOML escapes such as \\u0007)."""
    data = tomllib.loads((DEMO / BASE).read_text("utf-8"))
    data["study"]["line_id"] = line_id
    data["study"]["title"] = "@@TITLE@@"
    text = dump_toml(data).replace('"@@TITLE@@"', '"' + (title or line_id) + '"')
    folder.mkdir(parents=True, exist_ok=True)
    path = folder / name
    path.write_text(text, "utf-8")
    return path


def _rows(out: Path) -> list[dict[str, str]]:
    return list(csv.DictReader(io.StringIO((out / "register.csv").read_text("utf-8-sig"))))


def _xlsx(out: Path):
    from openpyxl import load_workbook

    ws = load_workbook(out / "register.xlsx").active
    header = [c.value for c in ws[1]]
    return header, [list(r) for r in ws.iter_rows(min_row=2)]


# ------------------------------------------------------------------ 1. failure isolation
def test_control_character_and_formula_titles_are_text(tmp_path, capsys):
    src, out = tmp_path / "in", tmp_path / "out"
    _line(src, "a.toml", "BELL-1", "bell\\u0007here")
    _line(src, "b.toml", "FORMULA-1", '=HYPERLINK(\\"http://x\\",\\"y\\")')
    _line(src, "c.toml", "PLUS-1", "+1+2")
    _line(src, "d.toml", "TAB-1", "\\t=1")
    _line(src, "e.toml", "GOOD-1")
    code = main(["batch", str(src), "-o", str(out), "--jobs", "1", "--no-report"])
    err = capsys.readouterr().err
    assert code == 0, err
    assert "Traceback" not in err
    titles = {r["line_id"]: r["title"] for r in _rows(out)}
    # controls visible as \xNN (tab included), formula starts quoted
    assert titles == {"BELL-1": "bell\\x07here", "FORMULA-1": "'=HYPERLINK(\"http://x\",\"y\")",
                      "PLUS-1": "'+1+2", "TAB-1": "\\x09=1", "GOOD-1": "GOOD-1"}
    header, rows = _xlsx(out)
    col = header.index("title")
    cells = {r[0].value: r[col] for r in rows}
    f = cells["FORMULA-1"]
    assert f.data_type == "s" and f.value == "'=HYPERLINK(\"http://x\",\"y\")"
    assert cells["BELL-1"].value == "bell\\x07here"
    assert all(c.data_type == "s" for c in cells.values())
    # numbers stay numbers
    z1 = header.index("z1_x_ohm")
    assert all(r[z1].data_type == "n" and isinstance(r[z1].value, float) for r in rows)


def test_xlsx_text_cells_are_strings_even_unquoted(monkeypatch):
    """Second guard: were the quote lost, the .xlsx cell is still a string, not a formula."""
    from openpyxl import load_workbook

    from relayset.fleet import register

    monkeypatch.setattr(register, "spreadsheet_text", lambda text: text)
    row = failed_row("x", "=1+1")
    ws = load_workbook(io.BytesIO(register_xlsx([row]))).active
    cell = ws.cell(row=2, column=NAMES.index("error") + 1)
    assert cell.value == "=1+1" and cell.data_type == "s"


def test_register_cells_numbers_stay_numbers_text_neutralised():
    """The writers themselves: a negative number is a number (no quote), the same text is
    quoted; a NUL, a bidirectional override and a non-UTF-8 file-name byte are visible."""
    from openpyxl import load_workbook

    row = failed_row("x", "-bad\x00line\u202e")
    row.update(line_id="@A1", revision="-1", title="ok", underreach_on_line_pct=-1.5,
               failed_checks=3, study_file="\udcff.toml", z1_r_ohm=float("nan"))
    text = register_csv([row])
    got = next(csv.DictReader(io.StringIO(text)))
    assert got["underreach_on_line_pct"] == "-1.5" and got["failed_checks"] == "3"
    assert got["z1_r_ohm"] == ""
    assert got["line_id"] == "'@A1" and got["revision"] == "'-1"
    assert got["error"] == "'-bad\\x00line\\u202e" and got["study_file"] == "\\xff.toml"
    ws = load_workbook(io.BytesIO(register_xlsx([row]))).active
    cells = dict(zip(NAMES, ws[2], strict=True))
    assert cells["underreach_on_line_pct"].value == -1.5
    assert cells["underreach_on_line_pct"].data_type == "n"
    assert cells["line_id"].value == "'@A1" and cells["line_id"].data_type == "s"
    assert cells["error"].value == "'-bad\\x00line\\u202e"


def test_settings_csv_cells_neutralised(tmp_path):
    """``settings --csv`` shares the neutralisation: a line ID that reads as a formula is
    quoted, the numbers are not."""
    from relayset.io import rows_to_csv

    text = rows_to_csv([("zone 1 reach", -2.5, "ohm"), ("direction", "=cmd", "")],
                       columns={"line_id": "=1+1", "revision": "A"})
    rows = list(csv.reader(io.StringIO(text)))
    assert rows[1] == ["'=1+1", "A", "zone 1 reach", "-2.5", "ohm"]
    assert rows[2] == ["'=1+1", "A", "direction", "'=cmd", ""]


def test_bom_study_with_register_override(tmp_path):
    src = tmp_path / "in"
    bom = _line(src, "bom.toml", "BOM-1")
    bom.write_bytes(b"\xef\xbb\xbf" + bom.read_bytes())
    (src / "plain.toml").write_bytes((DEMO / BASE).read_bytes())  # bare keys, comments
    plain_bom = src / "plain_bom.toml"
    plain_bom.write_bytes(b"\xef\xbb\xbf" + (DEMO / BASE).read_bytes().replace(
        b'line_id = "', b'line_id = "BOM2-'))
    reg = tmp_path / "lines.csv"
    reg.write_text("study,status\nin/bom.toml,for review\nin/plain.toml,\n"
                   "in/plain_bom.toml,for review\n", "utf-8")
    out = tmp_path / "out"
    s = run_batch(reg, out, workers=1, report=False, stream=io.StringIO())
    assert s.ok and s.computed == 3, s.failures
    status = {r["line_id"]: r["status"] for r in _rows(out)}
    assert status["BOM-1"] == "for review" and status["PR-KO-115"] == "draft"
    assert any(k.startswith("BOM2-") and v == "for review" for k, v in status.items())
    eff = (out / "studies" / "BOM-1_rev0.toml").read_bytes()
    assert not eff.startswith(b"\xef\xbb\xbf")
    assert tomllib.loads(eff.decode("utf-8"))["study"]["status"] == "for review"


@pytest.mark.skipif(not ON_LINUX, reason="file names are bytes on Linux")
def test_non_utf8_file_name(tmp_path, capsys):
    src, out = tmp_path / "in", tmp_path / "out"
    good = _line(src, "good.toml", "GOOD-1")
    odd = _line(src, "odd.toml", "ODD-1")
    try:
        os.rename(bytes(odd), bytes(src) + b"/\xff.toml")
    except OSError:
        pytest.skip("this file system refuses non-UTF-8 names")
    code = main(["batch", str(src), "-o", str(out), "--jobs", "1", "--no-report"])
    err = capsys.readouterr().err
    assert code == 0 and "Traceback" not in err
    assert "\\xff.toml done" in err  # the byte shown, not a Python repr
    rows = {r["line_id"]: r for r in _rows(out)}
    assert set(rows) == {"GOOD-1", "ODD-1"} and rows["ODD-1"]["study_file"] == "\\xff.toml"
    assert (out / "ODD-1_rev0.json").is_file() and good.is_file()


def test_hostile_register_cells(tmp_path, capsys):
    _line(tmp_path / "in", "good.toml", "GOOD-1")
    reg = tmp_path / "lines.csv"
    long = "a" * 5000 + ".toml"
    reg.write_text("study,philosophy\n" + f"{long},\n~nosuchuser-relayset/x.toml,\n"
                   "in/good.toml,\nx\x00y.toml,\nin/good.toml,p\x00.toml\n", "utf-8")
    out = tmp_path / "out"
    code = main(["batch", str(reg), "-o", str(out), "--jobs", "1", "--no-report"])
    err = capsys.readouterr().err
    assert code == 2 and "Traceback" not in err
    errors = [ln for ln in err.splitlines() if ln.startswith("relayset: error:")]
    assert len(errors) == 4
    assert "row 2" in errors[0] and "not a usable file name" in errors[0]
    assert "row 3" in errors[1] and "~nosuchuser-relayset/x.toml" in errors[1]
    assert "row 5" in errors[2] and "NUL" in errors[2]
    assert "row 6" in errors[3] and "philosophy" in errors[3] and "NUL" in errors[3]
    assert all(len(e) < 400 for e in errors)  # one short line each, not the 5,000 characters
    rows = _rows(out)
    assert [r["line_id"] for r in rows if not r["error"]] == ["GOOD-1"]
    assert len([r for r in rows if r["error"]]) == 4
    assert (out / "GOOD-1_rev0.json").is_file()


def test_a_row_that_cannot_be_written_is_that_lines_error(tmp_path, monkeypatch):
    """A register row that no format can hold fails its line, not the fleet (the row is
    checked before it joins the register)."""
    from relayset.fleet import register

    class Unprintable:
        def __str__(self):
            raise ValueError("cannot show this")

    real = register.rows_from_results

    def rows(d, **kw):
        out = real(d, **kw)
        if d["study"]["line_id"] == "BAD-1":
            out[0]["title"] = Unprintable()
        return out

    monkeypatch.setattr(register, "rows_from_results", rows)
    src = tmp_path / "in"
    _line(src, "a.toml", "BAD-1")
    _line(src, "b.toml", "GOOD-1")
    s = run_batch(src, tmp_path / "out", workers=1, report=False, stream=io.StringIO())
    assert s.computed == 1 and len(s.failures) == 1
    assert "a.toml" in s.failures[0][1] and "cannot be written" in s.failures[0][1]
    assert "\n" not in s.failures[0][1]
    assert [r["line_id"] for r in _rows(tmp_path / "out") if not r["error"]] == ["GOOD-1"]


def test_a_surprise_while_planning_is_that_lines_error(tmp_path, monkeypatch):
    from relayset.fleet import batch

    real = batch.plan_job

    def plan(job, out):
        if job.path.name == "a.toml":
            raise RuntimeError("surprise\nwith a second line")
        return real(job, out)

    monkeypatch.setattr(batch, "plan_job", plan)
    src = tmp_path / "in"
    _line(src, "a.toml", "A-1")
    _line(src, "b.toml", "B-1")
    s = run_batch(src, tmp_path / "out", workers=1, report=False, stream=io.StringIO())
    assert s.computed == 1 and len(s.failures) == 1
    assert "a.toml: internal error (RuntimeError: surprise with a second line)" \
        in s.failures[0][1]
    assert [r["line_id"] for r in _rows(tmp_path / "out") if not r["error"]] == ["B-1"]


# ------------------------------------------------------------------ 2. workers end with the batch
def _proc_stat(pid: int) -> list[str] | None:
    try:
        return Path(f"/proc/{pid}/stat").read_text().rsplit(")", 1)[1].split()
    except OSError:
        return None


def _children(pid: int) -> list[tuple[int, str]]:
    """(pid, start time) of every process whose parent is ``pid``, from /proc."""
    kids = []
    for d in os.listdir("/proc"):
        if d.isdigit():
            f = _proc_stat(int(d))
            if f is not None and int(f[1]) == pid:
                kids.append((int(d), f[19]))
    return kids


def _alive(pid: int, start: str) -> bool:
    f = _proc_stat(pid)
    return f is not None and f[0] != "Z" and f[19] == start  # same process, not a zombie


def _wait_gone(procs: list[tuple[int, str]], limit_s: float = 30.0) -> list[tuple[int, str]]:
    deadline = time.monotonic() + limit_s
    while time.monotonic() < deadline and any(_alive(*p) for p in procs):
        time.sleep(0.05)
    return [p for p in procs if _alive(*p)]


def _kill_survivors(procs: list[tuple[int, str]]) -> None:
    for pid, start in procs:  # only the processes this test started, by their id
        if _alive(pid, start):
            os.kill(pid, signal.SIGKILL)


@pytest.mark.skipif(not ON_LINUX, reason="reads /proc")
def test_killing_the_batch_ends_its_workers(tmp_path):
    src, out = tmp_path / "in", tmp_path / "out"
    for k in range(12):
        _line(src, f"v{k:02d}.toml", f"VAR-{k:02d}")
    proc = subprocess.Popen([sys.executable, "-m", "relayset.cli", "batch", str(src), "-o",
                             str(out), "--jobs", "2", "--no-report"],
                            stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
                            start_new_session=True)
    kids: list[tuple[int, str]] = []
    try:
        deadline = time.monotonic() + 120
        while time.monotonic() < deadline and not list(out.glob("VAR-*.json")):
            time.sleep(0.02)
        kids = _children(proc.pid)
        assert len(kids) >= 2, "the pool's workers must be running"
        os.kill(proc.pid, signal.SIGKILL)  # the batch process only, not its workers
        proc.wait()
        at_kill = sorted(p.name for p in out.glob("VAR-*.json"))
        assert len(at_kill) < 12, "the batch must be killed mid-run"
        assert _wait_gone(kids) == []  # every worker (and helper) ended with the batch
        time.sleep(1.0)
        assert sorted(p.name for p in out.glob("VAR-*.json")) == at_kill  # nothing new
    finally:
        if proc.poll() is None:
            proc.kill()
            proc.wait()
        _kill_survivors(kids)


@pytest.mark.skipif(not ON_LINUX, reason="reads /proc")
def test_parent_watch_thread_alone_ends_the_worker(tmp_path):
    """Where prctl is missing (not Linux) the watch thread alone ends a worker whose batch
    process is gone; here prctl is skipped by claiming another platform."""
    code = ("import subprocess, sys, time\n"
            "child = subprocess.Popen([sys.executable, '-c', "
            "'import os, sys, time; sys.platform = \"other\"; "
            "from relayset.fleet import worker; worker._end_with_parent(os.getppid()); "
            "print(\"ready\", flush=True); time.sleep(120)'], stdout=sys.stdout)\n"
            "print(child.pid, flush=True)\n"
            "time.sleep(120)\n")
    proc = subprocess.Popen([sys.executable, "-c", code], stdout=subprocess.PIPE, text=True,
                            start_new_session=True)
    kids: list[tuple[int, str]] = []
    try:
        lines = [proc.stdout.readline().strip() for _ in range(2)]
        assert "ready" in lines, lines
        kids = _children(proc.pid)
        assert len(kids) == 1
        os.kill(proc.pid, signal.SIGKILL)
        proc.wait()
        assert _wait_gone(kids) == []
    finally:
        if proc.poll() is None:
            proc.kill()
            proc.wait()
        _kill_survivors(kids)


# ------------------------------------------------------------------ 3. one batch per folder
def test_second_batch_into_a_folder_in_use_is_refused(tmp_path, capsys):
    src, out = tmp_path / "in", tmp_path / "out"
    _line(src, "a.toml", "A-1")
    out.mkdir()
    holder = subprocess.Popen(
        [sys.executable, "-c", "import sys; from pathlib import Path; "
         "from relayset.fleet.lock import lock_folder; lock = lock_folder(Path(sys.argv[1])); "
         "print('locked', flush=True); sys.stdin.read(); lock.release()", str(out)],
        stdin=subprocess.PIPE, stdout=subprocess.PIPE, text=True)
    try:
        assert holder.stdout.readline().strip() == "locked"
        code = main(["batch", str(src), "-o", str(out), "--jobs", "1", "--no-report"])
        err = capsys.readouterr().err.strip()
        assert code == 2 and err.count("\n") == 0, err
        assert "in use by another batch" in err and f"process {holder.pid}" in err
        assert socket.gethostname() in err
        assert [p.name for p in out.iterdir()] == [LOCK_NAME]  # nothing written
    finally:
        holder.communicate("", timeout=30)
    assert not (out / LOCK_NAME).exists()
    assert main(["batch", str(src), "-o", str(out), "--jobs", "1", "--no-report"]) == 0
    assert not (out / LOCK_NAME).exists()  # released at the end


def test_stale_lock_is_taken_over(tmp_path):
    src, out = tmp_path / "in", tmp_path / "out"
    _line(src, "a.toml", "A-1")
    out.mkdir()
    gone = subprocess.run([sys.executable, "-c", "import os; print(os.getpid())"],
                          capture_output=True, text=True, check=True)
    dead_pid = int(gone.stdout)
    (out / LOCK_NAME).write_text(json.dumps({"pid": dead_pid, "host": socket.gethostname(),
                                             "since": "2020-01-01T00:00:00"}), "utf-8")
    stream = io.StringIO()
    s = run_batch(src, out, workers=1, report=False, stream=stream)
    assert s.ok and s.computed == 1
    assert f"locked by process {dead_pid} on {socket.gethostname()}, which is no longer " \
           "running; lock taken over" in stream.getvalue()
    assert not (out / LOCK_NAME).exists()


def test_register_keeps_lines_of_an_earlier_batch(tmp_path):
    """Two sources into one folder, one after the other: the register lists the lines of
    both; a rerun still skips exactly the finished lines of its own source."""
    out = tmp_path / "out"
    _line(tmp_path / "x", "a.toml", "X-1")
    _line(tmp_path / "y", "b.toml", "Y-1")
    (out).mkdir()
    (out / "notes.json").write_text('{"study": {"line_id": "X", "revision": "1"}}', "utf-8")
    assert run_batch(tmp_path / "x", out, workers=1, report=False).computed == 1
    s = run_batch(tmp_path / "y", out, workers=1, report=False, stream=io.StringIO())
    assert (s.computed, s.skipped) == (1, 0)
    assert sorted(r["line_id"] for r in _rows(out)) == ["X-1", "Y-1"]  # not notes.json
    _, rows = _xlsx(out)
    assert sorted(r[0].value for r in rows) == ["X-1", "Y-1"]
    again = run_batch(tmp_path / "y", out, workers=1, report=False, stream=io.StringIO())
    assert (again.computed, again.skipped) == (0, 1)
    assert sorted(r["line_id"] for r in _rows(out)) == ["X-1", "Y-1"]
