"""The calculation report: every demo renders, numbers match the JSON, PDF/A, attachments,
reproducible bytes, escaping, bad input.

Independent checks: pypdf (text extraction) and pikepdf/qpdf (PDF structure, XMP PDF/A claim,
embedded files) are general-purpose PDF libraries outside relayset; the figures are read back
with the standard library's XML parser and numpy least squares.
"""

from __future__ import annotations

import datetime as dt
import hashlib
import io
import json
import math
import re
import shutil
import subprocess
import xml.etree.ElementTree as ET
from pathlib import Path

import numpy as np
import pytest
from numpy.testing import assert_allclose

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


def _two_ended(reports: dict) -> dict:
    """The reports of two-ended lines: the three-terminal demo's report has no reach study
    or two-ended settings (tests/test_teed_report.py checks it)."""
    return {k: r for k, r in reports.items() if "teed" not in json.loads(r.json)}


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
    for r in _two_ended(demo_reports[1]).values():
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
            # study, philosophy, results; with a relay profile also the profile and each
            # relay end's setting file
            extra = 0
            if d["input"].get("relay", {}).get("profile"):
                extra = 1 + len(d["settings"]["ends"])
                assert any(k.startswith("relay_profile.") for k in att), name
            assert len(af) == len(set(af)) == 3 + extra  # each associated file listed once


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
        verdict = ((d.get("verification") or {}).get("verdict")  # a teed line's: its own
                   or (d.get("teed") or {}).get("verification") or "not verified")
        assert verdict in pages[0].lower()


def test_two_runs_give_identical_bytes(demo_path, tmp_path, monkeypatch):
    # the generation time is printed: the same bytes need SOURCE_DATE_EPOCH (reproducible
    # builds), else two runs differ by their time
    monkeypatch.setenv("SOURCE_DATE_EPOCH", "1790000000")
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


def test_bad_input_leaves_no_output_folder_behind(variant, tmp_path, capsys):
    # RULES.md: bad input, no partial output; the folders made to probe that -o can be
    # written are removed again (outside-check finding: an empty folder stayed), and a
    # folder that was there stays.
    def edit(d):
        d["line"]["length"] = "-5 km"

    bad = variant("ashcombe_brenwick_132kv.toml", edit)
    out = tmp_path / "new" / "reports"
    assert main(["report", str(bad), "-o", str(out)]) == 2
    assert "line.length" in capsys.readouterr().err
    assert not (tmp_path / "new").exists()
    kept = tmp_path / "kept"
    kept.mkdir()
    assert main(["report", str(bad), "-o", str(kept)]) == 2
    assert kept.is_dir() and not any(kept.iterdir())


def test_unwritable_output_folder(tmp_path, demo_path, capsys):
    blocker = tmp_path / "file"
    blocker.write_text("x")
    rc = main(["report", str(demo_path("ashcombe_brenwick_132kv.toml")), "-o",
               str(blocker / "sub")])
    err = capsys.readouterr().err
    assert rc == 2
    assert "cannot write the output folder" in err and "file/sub" in err
    assert "Not a directory" in err


# ------------------------------------------------------------------- figures (our own SVG)
SVG_NS = "{http://www.w3.org/2000/svg}"


def _svgs(html: str) -> dict[str, ET.Element]:
    """Every inline figure of the report, parsed by the standard library's XML parser."""
    out = {}
    for text in re.findall(r"<svg .*?</svg>", html, flags=re.S):
        root = ET.fromstring(text)  # raises on malformed XML
        out[root.get("aria-label")] = root
    return out


def _role(root: ET.Element, role: str) -> ET.Element:
    found = [e for e in root.iter() if e.get("data-role") == role]
    assert len(found) == 1, role
    return found[0]


def _axis(group: ET.Element, coord: str) -> tuple[float, float]:
    """(offset, scale) of an axis fitted through its tick labels: user = a + k * value."""
    pts = [(float(t.text.replace("\u2212", "-")), float(t.get(coord)))
           for t in group.iter(SVG_NS + "text")]
    assert len(pts) >= 2
    v, u = np.array(pts).T
    k, a = np.polyfit(v, u, 1)
    assert_allclose(a + k * v, u, rtol=0, atol=0.02)  # the labels sit on a linear scale
    return a, k


def _numbers(d: str) -> list[float]:
    return [float(x) for x in re.findall(r"-?\d+(?:\.\d+)?", d)]


def test_figures_are_svg_that_plot_the_results(demo_reports):
    """Each figure is well-formed SVG (xml.etree), without style attributes, and its
    coordinates, read back through its own tick labels, are the results' numbers."""
    outside = 0  # R-X diagrams whose load region lies beyond the zones' frame
    for r in _two_ended(demo_reports[1]).values():
        d = json.loads(r.json)
        figs = _svgs(r.html)
        assert "tower cross-section" in figs
        for root in figs.values():
            assert not any(e.get("style") for e in root.iter())  # presentation attributes
        # R-X diagram: the line replica ends at Z1 of the line (settings, primary ohms).
        for end in d["settings"]["ends"]:
            root = figs[f"R-X diagram, relay at {end['end']}"]
            ar, kr = _axis(_role(root, "ticks-r"), "x")
            ax, kx = _axis(_role(root, "ticks-x"), "y")
            assert_allclose(kr, -kx, rtol=1e-3, atol=0)  # equal scales on R and X
            x0, y0, x1, y1 = _numbers(_role(root, "line-replica").get("d"))
            z1 = end["line"]["z1_primary_ohm"]
            tol = 0.02 / abs(kr)  # 0.02 user units, the rounding of the coordinates
            assert_allclose([(x0 - ar) / kr, (y0 - ax) / kx], [0, 0], rtol=0, atol=tol)
            assert_allclose([(x1 - ar) / kr, (y1 - ax) / kx], z1, rtol=0, atol=tol)
            # Scaled to the zones (issue 18), not to the load region: the legend says when
            # the load region (|Z| >= Zmin within the load angle) lies outside the frame.
            zmin = end["load"]["z_min_primary_ohm"]
            phi = math.radians(end["load"]["load_angle_max_deg"])
            r_edge = max(abs((56 - ar) / kr), abs((632 - ar) / kr))  # the frame's R edges
            legend = " ".join(t.text or "" for t in root.iter(SVG_NS + "text"))
            assert ("(outside this frame)" in legend) == (zmin * math.cos(phi) > r_edge)
            outside += zmin * math.cos(phi) > r_edge
        # Reach error: the drawn largest error of each loop peaks at the results' value.
        for e in d["reach_study"]["ends"]:
            root = figs[f"reach error, relay at {e['end']}"]
            a0, k0 = _axis(_role(root, "yticks-0"), "y")
            env = e["arrangements"][0]["envelope"]
            for i, lp in enumerate(env["loops"]):
                path = next(p for p in root.iter(SVG_NS + "path")
                            if p.get("data-loop") == lp and p.get("data-kind") == "max")
                ys = _numbers(path.get("d"))[1::2]
                drawn = max((y - a0) / k0 for y in ys)
                # the simplification keeps the curve within 0.2 user units
                want = max(v for v in env["bolted_reach_error_max_pct"][i] if v is not None)
                assert_allclose(drawn, want, rtol=0, atol=0.25 / abs(k0))
        # Tower: every conductor drawn where the geometry puts it, one scale for x and h.
        root = figs["tower cross-section"]
        wires = [w for w in d["parameters"]["wires"] if w["role"] == "phase"]
        nums = _numbers(_role(root, "phase-wires").get("d"))
        subpaths = _role(root, "phase-wires").get("d").count("M")
        assert subpaths == len(wires)
        # a circle sub-path starts at (cx - r, cy): "M x y a r r 0 1 0 2r 0 ..."
        starts = [nums[k:k + 4] for k in range(0, len(nums), len(nums) // subpaths)]
        cx = np.array([s[0] + s[2] for s in starts])
        cy = np.array([s[1] for s in starts])
        geo = np.array([[w["x_m"], w["average_height_m"]] for w in wires])
        # cx = a + s x, cy = b - s h: one least-squares fit, residuals at the rounding
        A = np.block([[np.ones((len(wires), 1)), np.zeros((len(wires), 1)), geo[:, :1]],
                      [np.zeros((len(wires), 1)), np.ones((len(wires), 1)), -geo[:, 1:]]])
        sol, *_ = np.linalg.lstsq(A, np.concatenate([cx, cy]), rcond=None)
        assert_allclose(A @ sol, np.concatenate([cx, cy]), rtol=0, atol=0.03)
        shields = [w for w in d["parameters"]["wires"] if w["role"] == "shield"]
        assert _role(root, "shield-wires").get("d").count("M") == len(shields)
    assert outside >= 1  # the zones set the scale, not the load region


def test_rx_diagram_draws_the_zones_as_set(demo_reports):
    """Each zone of the R-X diagram, read back through the tick labels, is the zone's
    region_primary_ohm of the results JSON (the characteristic as set): the corners of a
    quadrilateral per loop kind, the centre and radius of a mho circle."""
    for r in _two_ended(demo_reports[1]).values():
        d = json.loads(r.json)
        figs = _svgs(r.html)
        for end in d["settings"]["ends"]:
            root = figs[f"R-X diagram, relay at {end['end']}"]
            ar, kr = _axis(_role(root, "ticks-r"), "x")
            ax, kx = _axis(_role(root, "ticks-x"), "y")
            tol = 0.015 / abs(kr)  # the 0.01-unit rounding of the coordinates, in ohm
            drawn = [e for e in root.iter() if e.get("data-zone")]
            assert {e.get("data-zone") for e in drawn} == set(end["zones"])
            for e in drawn:
                zone = end["zones"][e.get("data-zone")]
                for loops in e.get("data-loops").split():
                    g = zone["region_primary_ohm"][loops]
                    if g["kind"] == "circle":
                        assert e.tag == SVG_NS + "circle"
                        assert_allclose([(float(e.get("cx")) - ar) / kr,
                                         (float(e.get("cy")) - ax) / kx], g["center"],
                                        rtol=0, atol=tol)
                        assert_allclose(float(e.get("r")) / kr, g["radius"], rtol=0, atol=tol)
                    else:
                        xy = np.array(_numbers(e.get("d"))).reshape(-1, 2)
                        ohm = np.column_stack([(xy[:, 0] - ar) / kr, (xy[:, 1] - ax) / kx])
                        assert_allclose(ohm, g["vertices"], rtol=0, atol=tol)


def test_figures_are_deterministic_and_escaped():
    """Same results, same bytes; a label with markup stays text (xml.etree reads it back)."""
    from relayset.report import plots

    end = {"end": "<b>A&B</b>", "arrangements": [{
        "title": "t", "envelope": {"location_pct": [0.0, 50.0, 100.0], "loops": ["A-G"],
                                   "bolted_reach_error_max_pct": [[1.0, 2.0, 3.0]],
                                   "bolted_reach_error_min_pct": [[-1.0, 0.0, 1.0]]}}]}
    one, two = plots.reach_error_svg(end, 0), plots.reach_error_svg(end, 0)
    assert one == two
    root = ET.fromstring(one)
    assert root.get("aria-label") == "reach error, relay at <b>A&B</b>"
    assert "<b>" not in one


def test_caution_on_every_page_and_at_both_ends(demo_reports):
    for r in demo_reports[1].values():
        pages = [p.replace("\n", " ") for p in _pdf_text(r.pdf)]
        for k, page in enumerate(pages, 1):
            assert "licensed professional engineer" in page, (r.stem, k)
        full = json.loads(r.json)["caution"]
        words = " ".join(full.split()[:8])
        assert words in pages[0] and words in pages[-1]


def test_no_nearly_empty_pages(demo_reports):
    """No forced break leaves a page nearly empty: every page but the last carries at least
    40 % of the median page's text (common practice, no source)."""
    for r in demo_reports[1].values():
        sizes = [len(p) for p in _pdf_text(r.pdf)]
        floor = 0.4 * float(np.median(sizes))
        assert all(s >= floor for s in sizes[:-1]), (r.stem, sizes)


def _section_numbers(html: str) -> dict[str, int]:
    return {m.group(2): int(m.group(1))
            for m in re.finditer(r"<h2>(\d+) ([^<]+)</h2>", html)}


def test_section_and_figure_numbers_follow_the_sections(variant):
    """Two relay ends add a settings chapter: the summary's pointers follow; the zone rule
    names its infeed factor once; mho diagrams are not described as quadrilaterals."""
    def edit(d):
        d["relay"]["end"] = "both"
        for a in d["adjacent_lines"]:
            a["bus"] = d["study"]["to_substation"]
        d["adjacent_lines"].append({**d["adjacent_lines"][0], "name": "Back line",
                                    "bus": d["study"]["from_substation"]})

    from relayset.api import study_settings

    path = variant("kessler_oxbow_115kv.toml", edit)
    rep = build.make_report(study_settings(path))
    html = rep.html
    sec = _section_numbers(html)
    numbers = sorted(sec.values())
    assert numbers == list(range(1, len(numbers) + 1))  # consecutive
    assert sum(1 for t in sec if t.startswith("Settings: relay at")) == 2
    verif = sec["Verification evidence"]
    assert verif == max(numbers)
    assert f"(section {verif}).</p>" in html
    reach = sec["Results: reach study"]
    assert f"Error budget: the defaults, as applied in section {reach}." in html
    figs = [int(n) for n in re.findall(r"<figcaption>Figure (\d+)\.", html)]
    d = json.loads(rep.json)
    n_figs = 1 + len(d["reach_study"]["ends"]) + len(d["settings"]["ends"])
    assert figs == list(range(1, n_figs + 1))
    for cap in re.findall(r"<figcaption>Figure \d+\. R-X diagram[^<]*", html):
        assert "mho circles" in cap and "quadrilateral" not in cap
    for row in re.findall(r"<tr><td>Zone [23][^\n]*?</tr>", html):
        assert row.count("infeed factor") <= 1, row
    assert "smallest at Z1 reach" in html and "under at Z1 reach" not in html


def test_helper_process_gives_the_same_bytes_and_stops(demo_path, monkeypatch):
    """The PDF rendered in the forked helper (single-report command) equals the in-process
    one byte for byte, and the helper is gone afterwards."""
    import multiprocessing as mp

    monkeypatch.setenv("SOURCE_DATE_EPOCH", "1790000000")  # the generation time is printed

    path = demo_path("kessler_oxbow_115kv.toml")
    with build.PdfHelper() as helper:
        via_helper = build.report_for_study(path, pdf_renderer=helper)
        proc = helper._proc
    here = build.report_for_study(path)
    assert via_helper.pdf == here.pdf and via_helper.html == here.html
    assert proc is None or not proc.is_alive()
    assert not [p for p in mp.active_children() if p is proc]


def test_single_bad_file_writes_nothing(variant, tmp_path, capsys):
    """One bad study through the single-report path (with the helper): one line, exit 2."""
    def edit(d):
        d["line"]["length"] = "-5 km"

    bad = variant("kessler_oxbow_115kv.toml", edit)
    out = tmp_path / "out"
    rc = main(["report", str(bad), "-o", str(out)])
    err = capsys.readouterr().err
    assert rc == 2 and len(err.strip().splitlines()) == 1 and "line.length" in err
    assert not out.exists() or not any(out.iterdir())


_LOADED_LIBS = r"""
import ctypes.util, sys
standard = ctypes.util.find_library
import relayset.report.pdf as pdf
asked = []
class Counting(dict):
    def get(self, key, default=None):
        asked.append(key)
        return super().get(key, default)
known = pdf._loader_cache()
pdf._loader_cache = lambda: None if known is None else Counting(known)
{setup}
pdf.import_weasyprint()
maps = open("/proc/self/maps").read().split()
print(sorted({{p.rsplit("/", 1)[-1] for p in maps
              if any(k in p for k in ("libpango", "libharfbuzz", "libfontconfig",
                                      "libgobject"))}}))
print(len(asked) > 0, ctypes.util.find_library is standard)
"""

_PLAIN_IMPORT = r"""
import weasyprint
maps = open("/proc/self/maps").read().split()
print(sorted({p.rsplit("/", 1)[-1] for p in maps
              if any(k in p for k in ("libpango", "libharfbuzz", "libfontconfig",
                                      "libgobject"))}))
"""


@pytest.mark.skipif(not Path("/proc/self/maps").exists(), reason="needs Linux /proc")
@pytest.mark.parametrize("setup", [
    "",  # the loader-cache lookup
    # a library that cannot be opened under the quick lookup (simulated): the import is
    # repeated with the standard lookup, and WeasyPrint's advice of the failed try is not
    # printed
    "import cffi\n"
    "_open = cffi.FFI.dlopen\n"
    "def dlopen(self, name, flags=0):\n"
    "    if isinstance(getattr(ctypes.util.find_library, '__self__', None), dict):\n"
    "        raise OSError('simulated: a library outside the loader cache')\n"
    "    return _open(self, name, flags)\n"
    "cffi.FFI.dlopen = dlopen",
])
def test_quick_library_lookup_loads_the_same_libraries(setup):
    """WeasyPrint imported through the loader-cache lookup maps the same Pango, HarfBuzz,
    fontconfig and GObject files as a plain ``import weasyprint`` (the standard
    ``ctypes.util.find_library``), prints nothing, asked the cache, leaves the standard
    lookup in place afterwards, and falls back when a library cannot be opened that way."""
    import sys

    def run(code):
        out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                             check=True)
        return out.stdout.strip().splitlines()

    plain = run(_PLAIN_IMPORT)
    quick = run(_LOADED_LIBS.format(setup=setup))
    assert len(quick) == 2  # nothing printed besides the two lines
    assert quick[0] == plain[0] and "libpango-1.0.so.0" in quick[0]
    # the cache was asked (unless every open failed first); find_library restored
    assert quick[1] == ("True True" if not setup else "False True")


def test_an_arrangement_that_is_the_same_line_is_said_once(demo_reports):
    """An arrangement the study solved as another (``solved_as``: the untransposed double
    circuit's one-section plan is the untransposed line; the 115 kV plan of three equal
    cyclic sections is the ideal cycle) has that one's results value for value (an identity,
    checked on the JSON), and the report says so once, with the reason, instead of printing
    the same table and plot row twice. Comparison tables give values without their cases;
    the first arrangement (actual plan, compensated as the relay is) gives both. On the
    132 kV line (unequal sections) nothing is folded."""
    def bare(a):
        return json.dumps({k: v for k, v in a.items() if k not in ("arrangement", "solved_as")})

    for name, r in _two_ended(demo_reports[1]).items():
        d = json.loads(r.json)
        e = d["reach_study"]["ends"][0]
        arrs = e["arrangements"]
        same = [i for i, a in enumerate(arrs) if a["solved_as"] is not None]
        for i in same:
            twin = next(b for b in arrs if b["arrangement"] == arrs[i]["solved_as"]
                        and b["mutual_compensation"] == arrs[i]["mutual_compensation"])
            assert bare(twin) == bare(arrs[i]), name
        sec = re.search(r'<section class="chapter" id="reach">.*?</section>', r.html,
                        flags=re.S).group(0)
        assert sec.count("It was solved once") == len(same), name
        shown = len(arrs) - len(same)
        assert sec.count('<table class="grid">') == shown, name
        plot_rows = [g for g in _svgs(r.html)[f"reach error, relay at {e['end']}"].iter()
                     if (g.get("data-role") or "").startswith("yticks-")]
        assert len(plot_rows) == shown, name
        # the cases are given for the first arrangement (the actual plan, compensated as
        # the relay is): six loops x six extremes, one " @ " each
        assert arrs[0]["arrangement"] == "actual_plan" and 0 not in same
        assert sec.count(" @ ") == 36 + (1 if e["governing_case"] else 0), name
        assert sec.count("for comparison") == shown - 1, name
        want = {"elsford_fallowby_230kv_double.toml": ([1], "the plan has one section"),
                "kessler_oxbow_115kv.toml": ([2], "the plan is itself an ideal cycle"),
                "ashcombe_brenwick_132kv.toml": ([], None)}.get(name)
        if want is not None:
            assert same == want[0], name
            assert want[1] is None or want[1] in sec, name


def test_reported_findings_are_printed_in_full(demo_reports):
    """A verification finding without a pass/fail limit (zone 3's coverage of the longest
    adjacent line at the largest simulated infeed) is printed with its sentence, not as a
    bare margin: the JSON's requirement text appears in the verification section."""
    import html as html_lib

    seen = 0
    for name, r in demo_reports[1].items():
        d = json.loads(r.json)
        sec = html_lib.unescape(re.search(r'<section class="chapter" id="verification">.*?'
                                          r'</section>', r.html, flags=re.S).group(0))
        for e in (d.get("verification") or {}).get("ends", []):
            for c in e["checks"]:
                if c["result"] == "reported":
                    seen += 1
                    text = c["requirement"].removesuffix(" (reported)")  # said once
                    assert "reported: " + text in sec and "(reported)" not in sec, name
    assert seen >= 1


def test_reach_section_says_what_governs_and_names_the_load_cases(demo_reports):
    """What the reach section prints follows the results: the philosophy's cap named when
    the errors alone allow more (115 kV), a governing loop otherwise (230 kV); power-flow
    load cases as P + jQ at the relay end, not as transfer angles (115 kV); the swept fault
    types in the study's phase labels (400 kV: L1, L2, L3); zone 1 as set pointed to where
    the settings differ from the recommendation (400 kV: the fault simulation limits it)."""
    import html as html_lib

    for name, r in _two_ended(demo_reports[1]).items():
        d = json.loads(r.json)
        q = d["reach_study"]
        sec = html_lib.unescape(re.search(r'<section class="chapter" id="reach">.*?</section>',
                                          r.html, flags=re.S).group(0))
        sec = re.sub(r"<[^>]+>", "", sec)
        for e in q["ends"]:
            capped = e["zone1_allowed_by_errors_pct"] > e["recommended_zone1_pct"]
            assert ("The philosophy's maximum governs" in sec) is capped, name
            if capped:
                assert f"would allow {e['zone1_allowed_by_errors_pct']:.1f} %" in sec
            elif e["governing_case"]:
                assert f"Governed by loop {e['governing_loop']}" in sec, name
            z1 = next(s for s in d["settings"]["ends"] if s["end"] == e["end"])["zones"]["zone1"]
            assert ("Zone 1 as set: " + z1["rule"] in sec) is (
                z1["reach_pct"] != e["recommended_zone1_pct"]), name
        if q["power_flows"]:
            assert f"P + jQ into the line at {q['ends'][0]['end']}" in sec
            for f in q["power_flows"]:
                assert _fmt(f["active_power_w"] / 1e6, 1) + " MW" in sec, name
            assert "transfer angles" not in sec.split("Notes of the reach study")[0], name
        labels = d["parameters"]["phase_labels"][0]
        first = q["fault_types"][0]  # e.g. "AG"
        assert f"Fault types {labels['ABC'.index(first[0])]}-G" in sec, name
    names = set(demo_reports[1])
    assert {"kessler_oxbow_115kv.toml", "greyholt_ivel_400kv_twin.toml"} <= names


def test_console_names_the_cap_and_the_reported_findings(demo_path, capsys):
    """The console summaries print the same: `reach` names the philosophy's cap where it
    governs (115 kV), `settings` prints a reported finding's sentence (zone 3 coverage)."""
    assert main(["reach", str(demo_path("kessler_oxbow_115kv.toml"))]) == 0
    out = capsys.readouterr().out
    assert "the philosophy's maximum governs, errors alone allow" in out
    assert main(["settings", str(demo_path("ashcombe_brenwick_132kv.toml"))]) == 0
    out = capsys.readouterr().out
    line = next(ln for ln in out.splitlines() if "coverage_of_adjacent_line" in ln)
    assert line.strip().startswith("info")
    assert "zone 3 covers" in out and "remote backup rests on" in out
