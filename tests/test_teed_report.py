"""The calculation report of a three-terminal (teed) line, its archive check, the register.

The report is rendered from the results model (``StudyResults.teed``), so every number it
prints must be the results JSON's at the printed precision (read back from both files
here); `relayset verify` must recompute a teed study and match, and must not match when
the installed rules give other zones. Independent readers: pypdf (PDF text), pikepdf (the
embedded files), the standard library's html and csv modules.
"""

from __future__ import annotations

import csv
import html as html_lib
import io
import json
import re
import shutil
from pathlib import Path

import pytest

from relayset.cli import main
from relayset.report import build
from relayset.resources import demo_lines_dir

pypdf = pytest.importorskip("pypdf")
pikepdf = pytest.importorskip("pikepdf")

DEMO = demo_lines_dir() / "dunmarrow_keswyn_132kv_teed.toml"


@pytest.fixture(scope="module")
def teed_report(tmp_path_factory):
    """The teed demo's report, rendered once and written to a folder."""
    out = tmp_path_factory.mktemp("teed_report")
    r = build.report_for_study(DEMO)
    build.write_reports([r], out)
    return out, r


def _fmt(x: float, digits: int) -> str:
    """The number as printed: fixed decimals, real minus sign (independent of the renderer)."""
    text = f"{x:.{digits}f}"
    if float(text) == 0:
        text = text.lstrip("-")
    return text.replace("-", "\u2212")


def _text(html: str) -> str:
    return " ".join(html_lib.unescape(re.sub(r"<[^>]+>", " ", html)).split())


def _section(html: str, ident: str) -> str:
    return re.search(rf'<section class="chapter" id="{ident}">.*?</section>', html,
                     flags=re.S).group(0)


def test_teed_report_prints_the_results_json(teed_report):
    """Per relay end (all three) zone 1 and zone 2, primary and secondary, the apparent
    impedance of each remote terminal with the infeed in and out, the legs' Z1 and Z0: each
    the results JSON's value at the printed precision (3 decimals of ohm), in the settings,
    reach and parameters sections of the HTML and in the PDF text."""
    out, r = teed_report
    d = json.loads((out / f"{r.stem}.json").read_text("utf-8"))
    t = d["teed"]
    assert [e["end"] for e in t["ends"]] == ["Dunmarrow", "Keswyn Cross", "Sallowfield"]
    settings = _text(_section(r.html, "settings-teed"))
    reach = _text(_section(r.html, "reach"))
    params = _text(_section(r.html, "parameters"))
    pdf = " ".join(" ".join(p.extract_text() or "" for p in
                            pypdf.PdfReader(io.BytesIO(r.pdf)).pages).split())
    for e in t["ends"]:
        block = settings.split(f"Relay at {e['end']}")[1].split("Checks of the setting")[0]
        for z in ("zone1", "zone2"):
            pri = abs(complex(*e[f"{z}_ohm"]))
            sec = abs(complex(*e[f"{z}_secondary_ohm"]))
            label = "Zone 1" if z == "zone1" else "Zone 2"
            row = f"{label} (forward, mho) {_fmt(pri, 3)} {_fmt(sec, 3)}"
            assert row in block, (e["end"], row, block)
            assert f"{_fmt(pri, 3)} {_fmt(sec, 3)}" in pdf
        rblock = reach.split(f"Relay at {e['end']}")[1].split("Relay at")[0]
        for a in e["apparent"]:
            assert (f"{a['remote']} {'in' if a['infeed'] else 'out'} {_fmt(a['min_ohm'], 3)}"
                    in rblock), (e["end"], a)
            assert _fmt(a["max_ohm"], 3) in rblock
        assert {a["remote"] for a in e["apparent"]} == set(t["buses"]) - {e["end"]}
        assert {a["infeed"] for a in e["apparent"]} == {True, False}
    for leg in t["legs"]:
        z1, z0 = leg["z1_ohm"], leg["z0_ohm"]
        assert (f"{leg['bus']} – tee {_fmt(leg['length_m'] / 1e3, 2)} {_fmt(z1[0], 3)} + "
                f"j{_fmt(z1[1], 3)} {_fmt(z0[0], 3)} + j{_fmt(z0[1], 3)}") in params, leg
    assert f"{_fmt(t['tee_distance_m'] / 1e3, 2)} km from Dunmarrow" in params
    assert "Sallowfield, which has a source" in params


def test_teed_secondary_reaches_follow_each_ends_ratios():
    """Secondary ohms = primary x CT ratio / VT ratio (the definition of secondary
    impedance, IEEE Std C37.113-2015 sec. 5): 800/1 A and 132000/110 V at Dunmarrow and
    Keswyn Cross, 400/1 A at Sallowfield ([relay.at.Sallowfield])."""
    from relayset.api import study_settings

    t = study_settings(DEMO).teed
    ratio = {"Dunmarrow": 800 / 1200, "Keswyn Cross": 800 / 1200, "Sallowfield": 400 / 1200}
    for e in t.ends:
        for pri, sec in ((e.zone1_ohm, e.zone1_secondary_ohm),
                         (e.zone2_ohm, e.zone2_secondary_ohm)):
            assert sec == pytest.approx(pri * ratio[e.end], rel=1e-12)


def test_teed_report_verdict_checks_and_failed_count(teed_report):
    """The cover, the summary and the verification section give the verdict and the one
    count of failed checks; every check of the JSON (setting rules and fault simulation) is
    printed with its result, the simulation's with its governing case. The demo is a hard
    case on purpose: zone 2 over the next line's zone 1 at Dunmarrow and Sallowfield."""
    _, r = teed_report
    d = json.loads(r.json)
    t = d["teed"]
    failed = [(e["end"], c["check_id"]) for e in t["ends"]
              for c in e["checks"] + e["verification_checks"] if not c["passed"]]
    assert t["verification"] == "failed checks" and r.n_failed == len(failed) == 4
    cover = _text(re.search(r'<section class="cover".*?</section>', r.html, re.S).group(0))
    assert re.search(rf"Verification failed checks ?; {len(failed)} failed check\(s\)", cover)
    assert "Relay location Dunmarrow, Keswyn Cross, Sallowfield" in cover
    assert "NOT APPROVED FOR USE" in r.html
    ver = _text(_section(r.html, "verification"))
    for e in t["ends"]:
        for c in e["verification_checks"]:
            mark = ("not judged" if c.get("judged") is False
                    else "pass" if c["passed"] else "FAIL")
            row = f"{e['end']} {mark} {c['check_id']}"
            assert row in ver, row
        assert "at Sallowfield" in ver or "at Dunmarrow" in ver  # governing cases named
    settings = _text(_section(r.html, "settings-teed"))
    for e in t["ends"]:  # the setting rules' checks, in this end's block
        block = settings.split(f"Relay at {e['end']}")[1].split("Relay at")[0]
        for c in e["checks"]:
            mark = ("not judged" if c.get("judged") is False
                    else "pass" if c["passed"] else "FAIL")
            assert f"{mark} {c['check_id']}" in block, c
    assert "Keswyn Cross - Orla Ford 132 kV" in ver


def test_teed_report_embeds_the_inputs_and_the_results(teed_report):
    out, r = teed_report
    with pikepdf.open(io.BytesIO(r.pdf)) as pdf:
        att = pdf.attachments
        assert att[DEMO.name].get_file().read_bytes() == DEMO.read_bytes()
        assert att[f"{r.stem}.results.json"].get_file().read_bytes() == \
            (out / f"{r.stem}.json").read_bytes()
        # the philosophy the zones were set with (the shipped default)
        assert att["philosophy_default.toml"].get_file().read_bytes() == (
            Path(build.__file__).parents[1] / "data" / "philosophy_default.toml").read_bytes()
    assert r.pdf.startswith(b"%PDF-")


def test_verify_recomputes_a_teed_report(teed_report, tmp_path, capsys, monkeypatch):
    """`relayset verify` recomputes the teed study from the embedded files: the untouched
    report matches (exit 0); with other installed zone rules (zone 1 at 70 % instead of
    the philosophy's) the recomputation differs and verify names the zones (exit 1)."""
    out, r = teed_report
    pdf = tmp_path / "report.pdf"
    shutil.copy(out / f"{r.stem}.pdf", pdf)
    assert main(["verify", str(pdf)]) == 0
    text = capsys.readouterr().out
    assert "MATCHES" in text and "settings: Sallowfield zone2 reach secondary [ohm]" in text
    import relayset.studies.teed as teed_study

    monkeypatch.setattr(teed_study, "teed_zone1_pct", lambda *a: 70.0)
    assert main(["verify", str(pdf)]) == 1
    text = capsys.readouterr().out
    assert "DOES NOT MATCH" in text
    assert re.search(r"FAIL settings: Dunmarrow zone1 reach primary \[ohm\]", text), text


def test_hostile_substation_name_is_escaped(tmp_path):
    """A third substation named with HTML is printed as text in every teed part of the
    report (autoescaping), never as markup."""
    from relayset.report.build import make_report
    from relayset.studies import pipeline
    from tests.test_teed_study import TEED_TOML

    evil = '<img src=x onerror="alert(1)">Oak&rest'
    text = TEED_TOML.replace('substation = "Oakrest"', f"substation = '{evil}'").replace(
        "[sources.Oakrest]", f"[sources.'{evil}']")
    path = tmp_path / "evil.toml"
    path.write_text(text, encoding="utf-8")
    res = pipeline.run(path, settings=True)
    assert res.teed.buses[2] == evil
    r = make_report(res, pdf_renderer=lambda html, files, when: b"%PDF-stub")
    assert "<img" not in r.html and "onerror=\"alert" not in r.html
    for ident in ("settings-teed", "reach", "parameters", "verification"):
        sec = _section(r.html, ident)
        # the name is text (the standard library's unescape gives it back), not markup
        assert evil in html_lib.unescape(sec) and evil not in sec, ident


def test_settings_csv_of_a_teed_line_is_its_zones(tmp_path, capsys):
    """`relayset settings --csv` of a teed line: per relay end zone 1 and zone 2, primary
    and secondary, the results JSON's magnitudes (12 significant digits, io.csv_bytes)."""
    out_json, out_csv = tmp_path / "r.json", tmp_path / "r.csv"
    assert main(["settings", str(DEMO), "--json", str(out_json), "--csv", str(out_csv)]) == 3
    assert "Verdict: failed checks" in capsys.readouterr().out
    t = json.loads(out_json.read_text("utf-8"))["teed"]
    rows = list(csv.DictReader(io.StringIO(out_csv.read_text("utf-8-sig"))))
    for e in t["ends"]:
        got = {r["setting"]: r["value"] for r in rows if r["end"] == e["end"]}
        assert float(got["Zone 1 reach, primary"]) == pytest.approx(
            abs(complex(*e["zone1_ohm"])), rel=1e-11)
        assert float(got["Zone 2 reach, secondary"]) == pytest.approx(
            abs(complex(*e["zone2_secondary_ohm"])), rel=1e-11)


def test_batch_registers_each_end_of_a_teed_line(tmp_path):
    """A fleet batch with the teed demo: one register row per relay end (all three), zone 1
    and zone 2 from its results JSON, the verdict and the report's count of failed checks."""
    import io as io_mod

    from relayset.fleet.batch import run_batch

    src = tmp_path / "lines"
    src.mkdir()
    shutil.copy(DEMO, src / DEMO.name)
    out = tmp_path / "out"
    s = run_batch(src, out, workers=1, report=False, stream=io_mod.StringIO())
    assert not s.failures and s.computed == 1
    rows = list(csv.DictReader(io.StringIO((out / "register.csv").read_text("utf-8-sig"))))
    t = json.loads(next(out.glob("*.json")).read_text("utf-8"))["teed"]
    assert [r["end"] for r in rows] == [e["end"] for e in t["ends"]]
    for row, e in zip(rows, t["ends"], strict=True):
        assert float(row["zone1_primary_ohm"]) == pytest.approx(
            abs(complex(*e["zone1_ohm"])), rel=1e-11)
        assert float(row["zone2_secondary_ohm"]) == pytest.approx(
            abs(complex(*e["zone2_secondary_ohm"])), rel=1e-11)
        n = sum(not c["passed"] for c in e["checks"] + e["verification_checks"])
        assert int(row["failed_checks"]) == n
        assert row["verification"] == "failed checks"
    assert (out / "index.html").is_file() and (out / "register.xlsx").is_file()


def test_teed_results_json_validates_against_the_results_schema(teed_report):
    """The report's results JSON of a teed line is a `relayset schema results` document
    (jsonschema, a registry validator): the teed part with every relay end's zones and
    both kinds of checks; a teed part without the fault simulation's checks is refused."""
    jsonschema = pytest.importorskip("jsonschema")
    from relayset.export.schemas import SCHEMAS

    _, r = teed_report
    schema = SCHEMAS["results"]()
    d = json.loads(r.json)
    jsonschema.Draft202012Validator(schema).validate(d)
    del d["teed"]["ends"][0]["verification_checks"]
    with pytest.raises(jsonschema.ValidationError):
        jsonschema.Draft202012Validator(schema).validate(d)


def test_checks_not_carried_out_are_not_judged_never_pass(teed_report, capsys):
    # A check that was not carried out (no adjacent line given, not simulated) or that only
    # states a value (zone 1's coverage) is "not judged": never printed as pass, never failed.
    _out, r = teed_report
    html = r.html
    d = json.loads(r.json)["teed"]
    unjudged = [(e["end"], c) for e in d["ends"]
                for c in e["checks"] + e["verification_checks"] if c.get("judged") is False]
    ids = {c["check_id"] for _e, c in unjudged}
    assert {"zone1_coverage", "zone2_short_of_next_zone1",
            "zone2_stays_short_of_next_zone1"} <= ids
    assert all(c["passed"] for _e, c in unjudged)  # not counted as failed
    text = _text(html)
    for _end, c in unjudged:
        assert f"not judged {c['check_id']}" in text
        assert f"pass {c['check_id']}" not in text or any(
            c2["check_id"] == c["check_id"] and c2.get("judged", True)
            for e in d["ends"] for c2 in e["checks"] + e["verification_checks"])
    assert main(["settings", str(DEMO)]) == 3
    out = capsys.readouterr().out
    assert "[n/j ] zone1_coverage" in out
    assert "[pass] zone1_coverage" not in out
    assert "[pass] zone2_short_of_next_zone1: no adjacent line given" not in out
