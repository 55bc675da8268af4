"""Fleet batches: folder and register sources, one bad line, register formats, skipping.

The numbers in the register are checked against the pipeline run directly on the same file
(consistency of the register with the one results model; the physics has its own sources in
the other tests).
"""

from __future__ import annotations

import csv
import io
import shutil
import tomllib
from pathlib import Path

import pytest
from numpy.testing import assert_allclose

from relayset.cli import main
from relayset.errors import InputError
from relayset.fleet.batch import run_batch
from relayset.fleet.jobs import effective_study_text, find_jobs
from relayset.fleet.progress import Progress, fmt_duration
from relayset.fleet.register import NAMES
from relayset.resources import demo_lines_dir
from relayset.studies import pipeline

from tomlwrite import dump_toml

DEMO = demo_lines_dir()
FAST = ("kessler_oxbow_115kv.toml", "elsford_fallowby_230kv_double.toml")


def _fleet(tmp_path: Path, names=FAST) -> Path:
    """A folder with demo studies (and their philosophy folder) in a sub-folder."""
    folder = tmp_path / "fleet"
    (folder / "north").mkdir(parents=True)
    for n in names:
        # without the demo's relay profile (its steps are tested in test_export_settings):
        # the register tests override the philosophy with shapes a profile may not offer
        text = (DEMO / n).read_text("utf-8")
        (folder / "north" / n).write_text("\n".join(
            ln for ln in text.split("\n") if not ln.startswith("profile = ")), "utf-8")
    shutil.copytree(DEMO / "philosophies", folder / "north" / "philosophies")
    return folder


def _broken(folder: Path) -> Path:
    data = tomllib.loads((DEMO / FAST[0]).read_text("utf-8"))
    data["study"]["line_id"] = "BROKEN-1"
    data["system"]["frequency"] = "55 Hz"
    p = folder / "broken.toml"
    p.write_text(dump_toml(data), "utf-8")
    return p


def _csv_rows(path: Path) -> list[dict[str, str]]:
    return list(csv.DictReader(io.StringIO(path.read_text("utf-8-sig"))))  # with a BOM


def test_folder_with_one_broken_study(tmp_path, capsys):
    folder = _fleet(tmp_path)
    _broken(folder)
    out = tmp_path / "out"
    code = main(["batch", str(folder), "-o", str(out), "--jobs", "1", "--no-report"])
    err = capsys.readouterr().err
    assert code == 2
    assert "Traceback" not in err
    # the broken line: its one-line error, naming file, field, value and rule
    bad = [ln for ln in err.splitlines() if ln.startswith("relayset: error:")]
    assert len(bad) == 1 and "broken.toml" in bad[0] and "frequency" in bad[0]
    assert not list(out.glob("BROKEN-1*"))  # nothing written for that line
    rows = _csv_rows(out / "register.csv")
    assert [r["line_id"] for r in rows if not r["error"]] == ["NM-EF-2C", "PR-KO-115"]
    failed = [r for r in rows if r["error"]]
    assert len(failed) == 1 and "55 Hz" in failed[0]["error"]
    # philosophy files in the folder are not studies and are not listed
    assert not any("philosophies" in r["study_file"] for r in rows)
    # register values equal the pipeline's own results for the same file
    res = pipeline.run(folder / "north" / FAST[0], settings=True)
    row = next(r for r in rows if r["line_id"] == "PR-KO-115")
    z1 = res.parameters.circuits[0].z1_ohm
    # The register writes 12 significant digits (README): half a unit of the 12th digit.
    assert_allclose([float(row["z1_r_ohm"]), float(row["z1_x_ohm"])], [z1.real, z1.imag],
                    rtol=5e-12, atol=0)
    s = res.settings[0]
    assert row["end"] == s.end
    assert_allclose(float(row["zone1_primary_ohm"]), abs(s.zone("zone1").reach_primary_ohm),
                    rtol=5e-12, atol=0)
    assert row["input_sha256"] == res.source_sha256
    assert row["verification"] == "not verified" or row["verification"]
    assert (out / "PR-KO-115_rev0.json").is_file()
    html = (out / "index.html").read_text("utf-8")
    assert "licensed professional engineer" in html and "BROKEN" not in html.split("<h2>")[0]


def test_register_csv_and_xlsx_with_overrides_and_missing_file(tmp_path):
    from openpyxl import Workbook, load_workbook

    folder = _fleet(tmp_path)
    phil = folder / "north" / "philosophies" / "northmarch_transmission.toml"
    reg = tmp_path / "lines.xlsx"
    wb = Workbook()
    ws = wb.active
    ws.append(["Study", "philosophy", "status"])
    # "for review" (the demo names its preparer; "approved" would also need the checker's
    # and approver's names, issue 8)
    ws.append(["fleet/north/" + FAST[0], str(phil), "for review"])
    ws.append(["fleet/north/missing.toml", None, None])
    ws.append(["fleet/north/" + FAST[1], None, None])
    wb.save(reg)
    out = tmp_path / "out"
    s = run_batch(reg, out, workers=1, report=False)
    assert s.computed == 2 and len(s.failures) == 1
    assert "row 3" in s.failures[0][1] and "missing.toml" in s.failures[0][1]
    # the override: status and philosophy applied, in an effective study file kept with the
    # outputs (comments kept), and the hash is of that file
    eff = out / "studies" / "PR-KO-115_rev0.toml"
    text = eff.read_text("utf-8")
    assert text.startswith("#") and "set by the line register" in text
    res = pipeline.run(eff, settings=True)
    assert res.study["status"] == "for review"
    assert res.philosophy["zone1"]["reach_pct"] == 85.0  # the Northmarch philosophy's zone 1
    rows = _csv_rows(out / "register.csv")
    row = next(r for r in rows if r["line_id"] == "PR-KO-115")
    assert row["status"] == "for review" and row["input_sha256"] == res.source_sha256
    # the .xlsx register holds the same rows as the CSV
    got = list(load_workbook(out / "register.xlsx").active.iter_rows(values_only=True))
    assert list(got[0]) == list(NAMES)
    assert [r[0] for r in got[1:]] == [r["line_id"] or None for r in rows]
    k = NAMES.index("zone2_primary_ohm")
    # the .xlsx keeps full values; the CSV has 12 significant digits (as settings --csv)
    assert_allclose([g[k] for g in got[1:3]],
                    [float(r["zone2_primary_ohm"]) for r in rows[:2]], rtol=1e-11, atol=0)


def test_register_with_missing_column_writes_nothing(tmp_path, capsys):
    from openpyxl import Workbook

    reg = tmp_path / "lines.xlsx"
    wb = Workbook()
    wb.active.append(["file", "status"])
    wb.active.append([str(DEMO / FAST[0]), "draft"])
    wb.save(reg)
    out = tmp_path / "out"
    assert main(["batch", str(reg), "-o", str(out)]) == 2
    err = capsys.readouterr().err.strip()
    assert err.count("\n") == 0 and "lines.xlsx" in err and "study" in err
    assert not out.exists()


def test_bad_register_rows_csv(tmp_path):
    reg = tmp_path / "lines.csv"
    reg.write_text("study,status\n" + f"{DEMO / FAST[0]},maybe\n" + "nowhere.toml,\n", "utf-8")
    jobs = find_jobs(reg)
    assert 'status = "maybe"' in str(jobs[0].error)
    assert "does not exist" in str(jobs[1].error) and "row 3" in str(jobs[1].error)


def test_rerun_skips_up_to_date_and_force_recomputes(tmp_path):
    folder = _fleet(tmp_path, names=FAST[:1])
    out = tmp_path / "out"
    assert run_batch(folder, out, workers=1, report=False).computed == 1
    again = run_batch(folder, out, workers=1, report=False)
    assert (again.computed, again.skipped) == (0, 1)
    assert len(_csv_rows(out / "register.csv")) == 1  # the skipped line is still registered
    assert run_batch(folder, out, workers=1, report=False, force=True).computed == 1
    study = folder / "north" / FAST[0]
    study.write_text(study.read_text("utf-8") + "\n# edited\n", "utf-8")
    assert run_batch(folder, out, workers=1, report=False).computed == 1  # new hash


def test_process_pool_equals_serial(tmp_path):
    folder = _fleet(tmp_path)
    a = run_batch(folder, tmp_path / "a", workers=1, report=False)
    b = run_batch(folder, tmp_path / "b", workers=2, report=False)
    assert a.ok and b.ok
    assert a.rows == [dict(r, study_file=r["study_file"]) for r in b.rows]
    for name in ("NM-EF-2C_revA.json", "PR-KO-115_rev0.json"):
        assert (tmp_path / "a" / name).read_bytes() == (tmp_path / "b" / name).read_bytes()


def test_html_index_escapes_user_text(tmp_path):
    data = tomllib.loads((DEMO / FAST[0]).read_text("utf-8"))
    data["study"]["title"] = '<script>alert(1)</script><img src="file:///etc/hostname">'
    data["study"]["line_id"] = "X<b>1"
    (tmp_path / "in").mkdir()
    (tmp_path / "in" / "x.toml").write_text(dump_toml(data), "utf-8")
    run_batch(tmp_path / "in", tmp_path / "out", workers=1, report=False)
    html = (tmp_path / "out" / "index.html").read_text("utf-8")
    assert "<script>" not in html and "<b>" not in html and "<img" not in html
    assert "X&lt;b&gt;1" in html


def test_effective_study_keeps_text_and_moves_relative_paths(tmp_path):
    text = (DEMO / FAST[1]).read_text("utf-8")
    text += '\n[[lines_behind]]\nname = "x"\nstudy = "other/line.toml"\n'
    new_dir = tmp_path / "out" / "studies"
    out = effective_study_text(text, DEMO, new_dir, status="approved", philosophy=None)
    data = tomllib.loads(out)
    assert data["study"]["status"] == "approved"
    assert (new_dir / data["study"]["philosophy"]).resolve() == (
        DEMO / "philosophies" / "northmarch_transmission.toml").resolve()
    assert (new_dir / data["lines_behind"][-1]["study"]).resolve() == (
        DEMO / "other" / "line.toml").resolve()
    assert out.count("\n#") >= text.count("\n#")  # comments kept


def test_progress_time_left():
    t = [0.0]
    buf = io.StringIO()
    p = Progress(10, stream=buf, tty=False, clock=lambda: t[0])
    p.skip(2)  # up-to-date lines cost nothing and do not enter the rate
    assert p.time_left_s() is None
    t[0] = 6.0
    p.finished("a")
    p.finished("b", error="b: bad")
    t[0] = 12.0
    p.finished("c")
    # 3 lines computed in 12 s -> 4 s each; 5 left -> 20 s (hand arithmetic)
    assert_allclose(p.time_left_s(), 20.0, rtol=1e-12, atol=0)
    assert "5/10 lines, 1 failed, about 20 s left" in buf.getvalue()
    assert "relayset: error: b: bad" in buf.getvalue()
    assert fmt_duration(3725) == "1 h 02 min" and fmt_duration(65) == "1 min 05 s"


def test_missing_source_and_output_is_a_file(tmp_path):
    with pytest.raises(InputError, match="no such folder"):
        run_batch(tmp_path / "nope", tmp_path / "out")
    f = tmp_path / "file"
    f.write_text("x")
    with pytest.raises(InputError, match="output folder is a file"):
        run_batch(_fleet(tmp_path, names=FAST[:1]), f, workers=1, report=False)


def test_register_reach_errors_and_verification_per_end():
    """Register columns against the results objects of the same study (one results model):
    the reach errors of the actual plan as the relay is set, and the verification of each end.
    """
    from relayset.fleet.register import rows_from_results

    res = pipeline.run(DEMO / FAST[1], settings=True)  # 230 kV double circuit, fails checks
    rows = rows_from_results(res.to_dict(), results_file="x.json", report_file=None)
    assert len(rows) == len(res.settings) >= 1
    for row in rows:
        end = next(e for e in res.reach_study.ends if e.end == row["end"])
        # the relay as set: mutual compensation on (the study's relay uses k0m), the plan's
        # own arrangement, not the comparison run without mutual compensation
        plan = end.arrangement("actual_plan", mutual=end.k0m_set is not None)
        assert_allclose([row["overreach_at_remote_bus_pct"], row["overreach_on_line_pct"],
                         row["underreach_on_line_pct"]],
                        [plan.worst_bolted_overreach_at_remote_bus_pct,
                         plan.worst_bolted_overreach_on_line_pct,
                         plan.worst_bolted_underreach_on_line_pct], rtol=1e-12, atol=0)
        # identities: the remote bus is a point of the line, so the worst overreach along
        # the line is at least the one at the remote bus; underreach never exceeds overreach
        assert row["overreach_on_line_pct"] >= row["overreach_at_remote_bus_pct"]
        assert row["underreach_on_line_pct"] <= row["overreach_on_line_pct"]
        ve = res.verification.end(row["end"])
        s = next(s for s in res.settings if s.end == row["end"])
        # the report's one count: verification checks and setting-rule checks that failed
        assert row["failed_checks"] == (sum(not c.passed for c in ve.checks)
                                        + sum(not c.passed for z in s.zones for c in z.checks))
        assert row["end_verification"] == ("pass" if ve.passed else "FAIL")
        assert row["warnings"] == len(s.warnings)
    # README: the 230 kV demo fails on resistive coverage with strong remote infeed (zone 1
    # and zone 2); mutual compensation is supervised by the relay model
    assert rows[0]["verification"] == "failed checks" and rows[0]["failed_checks"] >= 2
    assert rows[0]["end_verification"] == "FAIL"


def test_pool_workers_write_their_lines_and_return_only_rows(tmp_path):
    """The local pool sends paths and gets back register rows: the worker writes the line's
    files (JSON last), so no output bytes cross the process boundary; a cluster task (no
    output folder) returns the same bytes instead. Identity: same study, same bytes."""
    import pickle

    from relayset.fleet import cluster as runners
    from relayset.fleet.worker import compute_line, write_line

    out = tmp_path / "out"
    out.mkdir()
    stem = "PR-KO-115_rev0"
    tasks = [(0, str(DEMO / FAST[0]), stem, False, str(out))]
    (res,) = list(runners.run_pool(tasks, 1))
    assert res.ok and res.files == {} and res.written == (f"{stem}.json",)
    written = (out / f"{stem}.json").read_bytes()
    assert len(pickle.dumps(res)) < len(written) / 10  # rows only, not the results
    remote = compute_line(0, str(DEMO / FAST[0]), stem, False, None)
    assert remote.written == () and remote.files[f"{stem}.json"] == written
    # a line counts as done when its JSON is in place: the JSON is renamed last
    order = write_line(tmp_path, {"a.json": b"{}", "a.pdf": b"%PDF", "a.html": b"<p>"})
    assert order[-1] == "a.json" and sorted(order) == ["a.html", "a.json", "a.pdf"]
