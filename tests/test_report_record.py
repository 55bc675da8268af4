"""The signed record's content: the verification's basis, one count of failed checks, needed
and set resistive reach named apart, the generation time apart from the revision date, exit
codes of report and batch, and a batch's up-to-date test over every file a line reads."""

from __future__ import annotations

import datetime as dt
import html as htmlmod
import re
import shutil

import pytest

from relayset.cli import main
from relayset.resources import demo_lines_dir

FAILING = "elsford_fallowby_230kv_double.toml"  # its demo settings fail checks (as shipped)
FAST = "kessler_oxbow_115kv.toml"


def _text(html: str) -> str:
    """The HTML's visible text, one space between words (tags dropped, entities read)."""
    body = re.sub(r"<style.*?</style>|<svg.*?</svg>", " ", html, flags=re.S)
    return " ".join(htmlmod.unescape(re.sub(r"<[^>]+>", " ", body)).split())


@pytest.fixture(scope="module")
def failing(tmp_path_factory):
    """The failing demo's results and its report HTML (no PDF: the HTML is what prints)."""
    from relayset.report.context import build_context
    from relayset.report.html import render_html
    from relayset.studies import pipeline

    path = demo_lines_dir() / FAILING
    res = pipeline.run(path, reach=True, settings=True)
    ctx = build_context(res, environ={"SOURCE_DATE_EPOCH": "1790000000"})
    return res, res.to_dict(), _text(render_html(ctx, path.read_text("utf-8")))


def test_verification_basis_is_in_the_report(failing):
    _res, d, text = failing
    v = d["verification"]
    assert "Basis of the verification" in text
    assert f"Relay model assumed at {v['ends'][0]['end']}" in text
    assert "minimum operating current, primary [A]" in text
    assert "Margin: how much longer" in text  # what margin means
    for note in v["notes"][:3]:  # the envelope and relay model as the results state them
        first = " ".join(note.split()[:6]).replace("ohm", "Ω")
        assert first.split(" Ω")[0] in text, first
    for e in v["ends"]:
        for c in e["checks"]:
            assert c["check_id"] in text
            run = f"{c['cases_run']:,}".replace(",", " ")  # thin space, read as one
            assert run in text, (c["check_id"], run)


def test_one_count_of_failed_checks_everywhere(failing, tmp_path):
    """The cover, the settings summary, the verification section and the register give the
    same number: every setting-rule check and verification check that did not pass, counted
    here straight from the results JSON (independently of relayset.report.failures)."""
    from relayset.fleet.register import rows_from_results

    _res, d, text = failing
    rule = sum(1 for e in d["settings"]["ends"] for z in e["zones"].values()
               for c in z["checks"] if c["passed"] is False)
    sim = sum(1 for e in d["verification"]["ends"] for c in e["checks"]
              if c["result"] == "FAIL")
    n = rule + sim
    assert rule >= 1 and sim >= 1  # both kinds occur in this demo
    assert f"{n} failed check(s) (section" in text  # the cover
    assert f"Failed checks in this report: {n}" in text  # the verification section
    per_end = re.findall(r"warning\(s\), (\d+) failed check\(s\)", text)
    assert sum(map(int, per_end)) == n  # the settings summary, per end
    rows = rows_from_results(d, results_file="x.json", report_file=None)
    assert sum(r["failed_checks"] for r in rows) == n


def test_resistive_check_names_needed_and_set(failing):
    _res, d, _text = failing
    for e in d["settings"]["ends"]:
        for z in e["zones"].values():
            for c in z["checks"]:
                if c["check_id"] != "resistive_load_limit" or c["passed"]:
                    continue
                m = re.search(r"needed \(arc and footing\): phase ([\d.]+) Ω, ground ([\d.]+) Ω;"
                              r" set: phase ([\d.]+) Ω, ground ([\d.]+) Ω; load limit ([\d.]+)",
                              c["detail"])
                assert m, c["detail"]
                need_g, set_g, limit = float(m[2]), float(m[4]), float(m[5])
                assert need_g > limit and set_g == pytest.approx(limit, rel=1e-3)
                # the set value is the one the settings carry (4 significant digits printed)
                assert set_g == pytest.approx(z["r_reach_ground_primary_ohm"], rel=1e-3)
                return
    pytest.fail("no failing resistive check in the demo")


def test_generated_time_and_revision_date_apart(failing):
    _res, d, text = failing
    # SOURCE_DATE_EPOCH 1790000000, read by the standard library
    when = dt.datetime.fromtimestamp(1790000000, tz=dt.UTC).strftime("%Y-%m-%d %H:%M UTC")
    rev = d["study"]["revision_date"]
    assert f"on {when} (revision {d['study']['revision']} of {rev})" in text
    assert f"Generated {when} Revision date {rev}" in text  # the provenance table


def test_generated_time_is_now_without_source_date_epoch(monkeypatch):
    from relayset.report.context import document_date

    monkeypatch.delenv("SOURCE_DATE_EPOCH", raising=False)
    before = dt.datetime.now(dt.UTC).replace(microsecond=0)
    got = document_date({"revision_date": "2001-01-01"}, {}).when
    assert before <= got <= dt.datetime.now(dt.UTC)


def test_report_exits_3_when_checks_fail(tmp_path, capsys):
    study = tmp_path / FAILING
    shutil.copy(demo_lines_dir() / FAILING, study)
    (tmp_path / "philosophies").mkdir()
    shutil.copytree(demo_lines_dir() / "philosophies", tmp_path / "philosophies",
                    dirs_exist_ok=True)
    assert main(["report", str(study), "-o", str(tmp_path / "out")]) == 3
    out = capsys.readouterr().out
    assert "failed check(s))" in out
    assert (tmp_path / "out" / "NM-EF-2C_revA.pdf").is_file()  # written all the same


def _kessler_with_inputs(folder):
    """kessler in ``folder/lines`` with its own philosophy file and an adjacent line given by
    a study file, both in ``folder/shared`` (outside the batch's folder)."""
    import tomllib
    from pathlib import Path

    import relayset
    from relayset.inputs.philosophy import DEFAULT_FILE

    from tomlwrite import dump_toml

    (folder / "lines").mkdir(parents=True)
    (folder / "shared").mkdir()
    data = tomllib.loads((demo_lines_dir() / FAST).read_text("utf-8"))
    data["study"]["philosophy"] = "../shared/phil.toml"
    data["adjacent_lines"] = [{"name": "by file", "study": "../shared/adjacent.toml"}]
    (folder / "lines" / "line.toml").write_text(dump_toml(data), "utf-8")
    shutil.copy(Path(relayset.__file__).parent / "data" / DEFAULT_FILE,
                folder / "shared" / "phil.toml")
    shutil.copy(demo_lines_dir() / FAST, folder / "shared" / "adjacent.toml")
    return folder


def _batch(src, out, capsys):
    code = main(["batch", str(src), "-o", str(out), "--jobs", "1", "--no-report"])
    text = capsys.readouterr().out
    m = re.search(r"(\d+) computed, (\d+) up to date", text)
    return code, int(m[1]), int(m[2]), text


def test_batch_is_stale_when_philosophy_or_adjacent_study_changes(tmp_path, capsys):
    shared = _kessler_with_inputs(tmp_path / "src") / "shared"
    src = tmp_path / "src" / "lines"
    out = tmp_path / "out"
    _code, computed, _, text = _batch(src, out, capsys)
    assert computed == 1, text
    assert "failed check(s) in" in text
    assert _batch(src, out, capsys)[1:3] == (0, 1)  # nothing changed: up to date
    with open(shared / "phil.toml", "a", encoding="utf-8") as f:
        f.write("\n# reviewed\n")
    assert _batch(src, out, capsys)[1:3] == (1, 0)  # the philosophy file changed
    assert _batch(src, out, capsys)[1:3] == (0, 1)
    with open(shared / "adjacent.toml", "a", encoding="utf-8") as f:
        f.write("\n# reviewed\n")
    assert _batch(src, out, capsys)[1:3] == (1, 0)  # the adjacent line's study changed


def test_batch_exit_code_and_summary_count_failed_checks(tmp_path, capsys):
    src = tmp_path / "src"
    src.mkdir()
    shutil.copy(demo_lines_dir() / FAILING, src / FAILING)
    shutil.copytree(demo_lines_dir() / "philosophies", src / "philosophies")
    code, computed, _, text = _batch(src, tmp_path / "out", capsys)
    n = int(re.search(r"(\d+) failed check\(s\) in 1 line\(s\)", text)[1])
    assert code == 3 and computed == 1 and n >= 2
