"""The calculation report: every demo renders, numbers match the JSON, PDF/A, attachments,
reproducible bytes, escaping, bad input.

Independent checks: pypdf (text extraction) and pikepdf/qpdf (PDF structure, XMP PDF/A claim,
embedded files) are general-purpose PDF libraries outside relayset.
"""

from __future__ import annotations

import datetime as dt
import hashlib
import io
import json
import shutil
import subprocess
from pathlib import Path

import pytest

from relayset.cli import main
from relayset.report import build
from relayset.resources import demo_studies

pypdf = pytest.importorskip("pypdf")
pikepdf = pytest.importorskip("pikepdf")


@pytest.fixture(scope="module")
def demo_reports(tmp_path_factory):
    """Every demo line's report, rendered once (in parallel) and written to a folder."""
    out = tmp_path_factory.mktemp("reports")
    reports = build.render_reports(demo_studies(), jobs=2)
    build.write_reports(reports, out)
    return out, {Path(r.source).name: r for r in reports}


def _pdf_text(data: bytes) -> list[str]:
    reader = pypdf.PdfReader(io.BytesIO(data))
    return [p.extract_text() or "" for p in reader.pages]


def _fmt(x: float, digits: int) -> str:
    """The number as printed: fixed decimals, real minus sign (independent of the renderer)."""
    text = f"{x:.{digits}f}"
    if float(text) == 0:
        text = text.lstrip("-")
    return text.replace("-", "\u2212")


def test_every_demo_line_renders(demo_reports):
    out, reports = demo_reports
    assert len(reports) == len(demo_studies()) >= 4
    for r in reports.values():
        for ext in ("html", "pdf", "json"):
            assert (out / f"{r.stem}.{ext}").is_file()
        assert r.pdf.startswith(b"%PDF-")
        assert "licensed professional engineer" in r.html
        assert "<svg" in r.html and "<img" not in r.html  # self-contained, inline SVG


def test_pdf_numbers_equal_the_results_json(demo_reports):
    """Key numbers in the PDF text equal the results JSON at the printed precision."""
    for r in demo_reports[1].values():
        d = json.loads(r.json)
        text = " ".join(_pdf_text(r.pdf)).replace("\n", " ")
        c = d["parameters"]["circuits"][0]
        expected = [
            _fmt(c["k0"]["k0"]["magnitude"], 3),
            _fmt(c["k0"]["kr"], 3),
            _fmt(c["k0"]["kx"], 3),
            _fmt(c["z1_ohm"][0], 3),
            _fmt(c["z1_ohm"][1], 3),
            _fmt(c["z0_ohm"][1], 3),
            _fmt(d["reach_study"]["ends"][0]["recommended_zone1_pct"], 1),
        ]
        for end in d["settings"]["ends"]:
            for z in end["zones"].values():
                expected += [_fmt(z["reach_primary_magnitude_ohm"], 3),
                             _fmt(z["reach_secondary_magnitude_ohm"], 3)]
            expected.append(_fmt(end["k0"]["k0"]["magnitude"], 3))
        missing = [x for x in expected if x not in text]
        assert not missing, (r.stem, missing)
        assert d["study"]["line_id"] in text


def test_attachments_are_the_inputs_and_the_results(demo_reports):
    out, reports = demo_reports
    for name, r in reports.items():
        with pikepdf.open(io.BytesIO(r.pdf)) as pdf:
            att = pdf.attachments
            study = Path(r.source)
            assert att[study.name].get_file().read_bytes() == study.read_bytes()
            assert att[f"{r.stem}.results.json"].get_file().read_bytes() == \
                (out / f"{r.stem}.json").read_bytes()
            d = json.loads(r.json)
            ph = d["study"]["philosophy"]
            ph_path = (build.philosophy_path.__globals__["Path"](__file__).parent.parent
                       / "relayset" / "data" / "philosophy_default.toml"
                       if ph == "default" else study.parent / ph)
            assert att[ph_path.name].get_file().read_bytes() == ph_path.read_bytes(), name
            rel = {k: str(v.obj.get("/AFRelationship")) for k, v in att.items()}
            assert rel[study.name] == "/Source" and rel[ph_path.name] == "/Source"
            assert rel[f"{r.stem}.results.json"] == "/Data"
            af = [str(x.objgen) for x in pdf.Root.AF]
            assert len(af) == len(set(af)) == 3  # each associated file listed once


def test_pdfa_claim_metadata_and_structure(demo_reports, tmp_path):
    """PDF/A-3b as far as these machines can check (no veraPDF here; see the README)."""
    for r in demo_reports[1].values():
        d = json.loads(r.json)
        with pikepdf.open(io.BytesIO(r.pdf)) as pdf:
            meta = pdf.open_metadata()
            assert meta.pdfa_status == "3B"
            assert pdf.check_pdf_syntax() == []  # pikepdf/qpdf structural check
            info = pdf.docinfo
            assert d["study"]["line_id"] in str(info["/Title"])
            kw = str(info["/Keywords"])
            assert d["study"]["line_id"] in kw and f"revision {d['study']['revision']}" in kw
            assert "/OutputIntents" in pdf.Root
        if shutil.which("qpdf"):
            f = tmp_path / "r.pdf"
            f.write_bytes(r.pdf)
            res = subprocess.run(["qpdf", "--check", str(f)], capture_output=True, text=True)
            assert res.returncode == 0, res.stdout + res.stderr
        if shutil.which("pdffonts"):
            f = tmp_path / "r.pdf"
            f.write_bytes(r.pdf)
            res = subprocess.run(["pdffonts", str(f)], capture_output=True, text=True)
            rows = res.stdout.splitlines()[2:]
            assert rows and all(" yes " in row for row in rows)  # every font embedded


def test_header_footer_and_not_approved_mark_on_every_page(demo_reports):
    for r in demo_reports[1].values():
        d = json.loads(r.json)
        pages = _pdf_text(r.pdf)
        for k, page in enumerate(pages, 1):
            assert d["study"]["line_id"] in page
            assert f"page {k} of {len(pages)}" in page
            if d["study"]["status"] != "approved":
                assert "NOT APPROVED FOR USE" in page
        # the cover carries the verification verdict (settings studies are verified)
        verdict = (d.get("verification") or {}).get("verdict", "not verified")
        assert verdict in pages[0].lower()


def test_two_runs_give_identical_bytes(demo_path, tmp_path):
    path = demo_path("ashcombe_brenwick_132kv.toml")
    a = build.report_for_study(path)
    b = build.report_for_study(path)
    assert a.html == b.html and a.json == b.json
    assert hashlib.sha256(a.pdf).digest() == hashlib.sha256(b.pdf).digest()


def test_approved_study_without_failed_checks_has_no_mark(variant, tmp_path):
    def edit(d):
        d["study"]["status"] = "approved"
        d["study"]["checked_by"] = "R. Roe"  # approved needs the checker's name too
        d["study"]["approved_by"] = "J. Doe"

    path = variant("kessler_oxbow_115kv.toml", edit)
    from relayset.api import study_settings

    res = study_settings(path)
    rep = build.make_report(res, environ={"SOURCE_DATE_EPOCH": "1790000000"})
    failed = any(not c.passed for s in res.settings for z in s.zones for c in z.checks) or (
        res.verification.verdict == "failed checks")
    text = " ".join(_pdf_text(rep.pdf))
    assert ("NOT APPROVED FOR USE" in text) == failed
    with pikepdf.open(io.BytesIO(rep.pdf)) as pdf:
        # the date SOURCE_DATE_EPOCH names (converted by the standard library)
        when = dt.datetime.fromtimestamp(1790000000, tz=dt.UTC)
        assert str(pdf.docinfo["/CreationDate"]) == when.strftime("D:%Y%m%d%H%M%SZ")


HOSTILE = '<img src="file:///etc/hostname"> <script>alert(1)</script>'


def test_user_text_is_escaped_and_nothing_is_fetched(variant):
    def edit(d):
        d["study"]["title"] = HOSTILE
        d["study"]["prepared_by"] = "<b>x</b> & <style>body{display:none}</style>"
        d["circuits"][0]["positions"][0]["name"] = '<svg onload="alert(2)">'

    path = variant("ashcombe_brenwick_132kv.toml", edit)
    from relayset.api import study_settings
    from relayset.report import pdf as report_pdf

    res = study_settings(path)
    requested: list[str] = []
    real = report_pdf.html_to_pdf

    def spy(html, files, when, requested_=None):
        return real(html, files, when, requested)

    report_pdf.html_to_pdf, saved = spy, report_pdf.html_to_pdf
    try:
        rep = build.make_report(res)
    finally:
        report_pdf.html_to_pdf = saved
    assert requested == []  # nothing was even asked for
    assert "<img" not in rep.html and "<script" not in rep.html
    assert "<b>x</b>" not in rep.html and "<style>body" not in rep.html
    assert 'onload="alert' not in rep.html
    assert "&lt;img src=&#34;file:///etc/hostname&#34;&gt;" in rep.html
    text = " ".join(_pdf_text(rep.pdf))
    assert '<img src="file:///etc/hostname">' in text.replace("\n", " ")
    assert "<script>alert(1)</script>" in text.replace("\n", " ")


def test_fetcher_refuses_file_and_network_urls():
    """Were markup to get through, the PDF renderer still loads nothing."""
    from relayset.report.pdf import html_to_pdf

    for url in ("file:///etc/hostname", "http://127.0.0.1:9/x.png"):
        requested: list[str] = []
        with pytest.raises(BaseException, match="loads no external resource"):
            html_to_pdf(f'<p>x</p><img src="{url}">', [], dt.datetime(2026, 1, 1,
                                                                     tzinfo=dt.UTC), requested)
        assert requested == [url]


def test_letter_paper_and_us_units(demo_path, tmp_path):
    rc = main(["report", str(demo_path("ashcombe_brenwick_132kv.toml")), "-o", str(tmp_path),
               "--paper", "letter", "--units", "us"])
    assert rc == 0
    pdf = next(tmp_path.glob("*.pdf")).read_bytes()
    reader = pypdf.PdfReader(io.BytesIO(pdf))
    box = reader.pages[0].mediabox
    assert (round(float(box.width)), round(float(box.height))) == (612, 792)  # 8.5 x 11 in
    html = next(tmp_path.glob("*.html")).read_text("utf-8")
    assert "Ω/mi" in html and "Ω/km" not in html
    # 132 kV demo: 80 km long; 80 / 1.609344 = 49.71 mi (definition of the mile).
    assert "49.71 mi" in html


def test_bad_input_writes_no_report(variant, tmp_path, capsys):
    def edit(d):
        d["line"]["length"] = "-5 km"

    bad = variant("ashcombe_brenwick_132kv.toml", edit)
    out = tmp_path / "out"
    good = Path(demo_studies()[0])
    rc = main(["report", str(good), str(bad), "-o", str(out)])
    err = capsys.readouterr().err
    assert rc == 2
    assert len(err.strip().splitlines()) == 1 and "line.length" in err
    assert not out.exists() or not any(out.iterdir())


def test_unwritable_output_folder(tmp_path, demo_path, capsys):
    blocker = tmp_path / "file"
    blocker.write_text("x")
    rc = main(["report", str(demo_path("ashcombe_brenwick_132kv.toml")), "-o",
               str(blocker / "sub")])
    err = capsys.readouterr().err
    assert rc == 2
    assert "cannot write the output folder" in err and "file/sub" in err
    assert "Not a directory" in err
