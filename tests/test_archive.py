"""Verify archived report PDFs (untouched, tampered, not a report) and compare revisions."""

from __future__ import annotations

import cmath
import dataclasses
import io
import math
import re
import tomllib

import pytest
from numpy.testing import assert_allclose

from relayset.archive.compare import (
    DISPLAY_RTOL,
    compare,
    format_table,
    numeric_change,
    shown,
    write_change_sheet,
)
from relayset.archive.verify import verify_report
from relayset.cli import main
from relayset.resources import demo_lines_dir

from tomlwrite import dump_toml

pikepdf = pytest.importorskip("pikepdf", reason="pikepdf edits the PDFs of the tamper tests")

NAME = "kessler_oxbow_115kv.toml"


@pytest.fixture(scope="module")
def archived(tmp_path_factory):
    """One archived report PDF, rendered by the report package from a demo study."""
    from relayset.report.build import make_report
    from relayset.studies import pipeline

    folder = tmp_path_factory.mktemp("archive")
    study = folder / NAME
    study.write_bytes((demo_lines_dir() / NAME).read_bytes())
    pdf = folder / "report.pdf"
    pdf.write_bytes(make_report(pipeline.run(study, settings=True)).pdf)
    return pdf


def _edit_attachment(src, dst, suffix, edit):
    with pikepdf.open(src) as pdf:
        name = next(n for n in pdf.attachments if n.endswith(suffix))
        data = pdf.attachments[name].get_file().read_bytes()
        new = edit(data)
        assert new != data
        pdf.attachments[name] = pikepdf.AttachedFileSpec(pdf, new, filename=name)
        pdf.save(dst)


def test_untouched_report_matches(archived, capsys):
    v = verify_report(archived)
    assert v.passed, [c for c in v.checks if not c.passed]
    assert sum(c.what.startswith("settings: ") for c in v.checks) >= 10  # per quantity
    assert main(["verify", str(archived)]) == 0
    assert "MATCHES" in capsys.readouterr().out


def test_edited_study_attachment_is_detected(archived, tmp_path):
    bad = tmp_path / "edited.pdf"
    _edit_attachment(archived, bad, NAME,
                     lambda b: b.replace(b'ct_ratio = "600/5 A"', b'ct_ratio = "800/5 A"'))
    v = verify_report(bad)
    assert not v.passed
    failed = {c.what for c in v.checks if c.passed is False}
    assert 'study file SHA-256 against the page text ("SHA-256 of the study file")' in failed
    assert "study file SHA-256 against the embedded results JSON (source_sha256)" in failed
    assert any("secondary" in f for f in failed)  # the recomputation moved secondary ohms
    assert main(["verify", str(bad)]) == 1


def test_changed_digit_in_results_is_detected(archived, tmp_path):
    bad = tmp_path / "digit.pdf"

    def one_digit(b: bytes) -> bytes:
        key = b'"delay_s": 0.35'
        assert key in b
        return b.replace(key, b'"delay_s": 0.36', 1)

    _edit_attachment(archived, bad, ".results.json", one_digit)
    v = verify_report(bad)
    failed = {c.what for c in v.checks if c.passed is False}
    assert ('results JSON SHA-256 against the page text ("SHA-256 of the results JSON")'
            in failed)
    assert any(f.startswith("all ") for f in failed)  # the recomputation disagrees too
    assert not any(f.startswith("study file") for f in failed)


def test_hash_references_named_and_a_missing_one_fails(archived):
    """Which hash was checked against what; a reference the report lacks is a failure."""
    import hashlib

    from relayset.archive.pdf import read_archive
    from relayset.archive.verify import Verification, check_hashes, format_verification

    a = read_archive(archived)
    study = a.study_name()
    s_hash = hashlib.sha256(a.attachments[study]).hexdigest()  # hashlib: the reference
    r_hash = hashlib.sha256(a.results_bytes).hexdigest()
    checks = {c.what: c for c in check_hashes(a)}
    page = 'study file SHA-256 against the page text ("SHA-256 of the study file")'
    rec = "study file SHA-256 against the embedded results JSON (source_sha256)"
    res_page = 'results JSON SHA-256 against the page text ("SHA-256 of the results JSON")'
    assert checks[page].passed and checks[rec].passed and checks[res_page].passed
    assert s_hash in checks[f"study file {study}"].detail
    assert r_hash in checks[f"results JSON {a.results_name}"].detail
    # the report stores both SHA-256 in its metadata (keywords): both checked and passed
    assert checks["study file SHA-256 against the PDF metadata"].passed is True
    assert checks["results JSON SHA-256 against the PDF metadata"].passed is True
    text = format_verification(Verification(str(archived), list(checks.values())))
    assert "MATCHES" in text
    # metadata without any SHA-256: said so, neither pass nor fail
    bare = dataclasses.replace(a, metadata={"/Keywords": "no hashes here"})
    got = {c.what: c for c in check_hashes(bare)}
    assert got["PDF metadata"].passed is None
    text = format_verification(Verification(str(archived), list(got.values())))
    assert "PDF metadata: carries no SHA-256" in text

    # the printed results hash missing from the page text (the attachments untouched)
    flat = dataclasses.replace(a, text=a.text.replace(r_hash[:20], ""))
    got = {c.what: c for c in check_hashes(flat)}
    assert got[res_page].passed is False and "missing" in got[res_page].detail
    v = Verification(str(archived), list(got.values()))
    assert not v.passed and "FAIL " + res_page in format_verification(v)

    # metadata that stores SHA-256 values is checked; one that differs fails
    meta = dataclasses.replace(a, metadata={"/Keywords": f"{s_hash} {'0' * 64}"})
    got = {c.what: c for c in check_hashes(meta)}
    assert got["study file SHA-256 against the PDF metadata"].passed is True
    assert got["results JSON SHA-256 against the PDF metadata"].passed is False


def test_not_a_report_one_line_each_and_the_rest_verified(archived, tmp_path, capsys):
    text = tmp_path / "notes.pdf"
    text.write_text("not a pdf")
    blank = tmp_path / "blank.pdf"
    with pikepdf.new() as pdf:
        pdf.add_blank_page()
        pdf.save(blank)
    code = main(["verify", str(text), str(blank), str(archived)])
    cap = capsys.readouterr()
    assert code == 2
    errs = cap.err.strip().splitlines()
    assert len(errs) == 2 and "notes.pdf" in errs[0] and "not a readable PDF" in errs[0]
    assert "blank.pdf" in errs[1] and "no embedded files" in errs[1]
    assert "Traceback" not in cap.err
    assert "MATCHES" in cap.out  # the good report was still verified


def test_compare_two_revisions(tmp_path, capsys):
    c = _two_revisions(tmp_path)
    old, new = c.old_source, c.new_source
    by = {(ch.section, ch.name): ch for ch in c.changes}
    assert by[("inputs", "conductor_types.phase.code")].new == "556.5 ACSR"
    assert by[("inputs", "relay.ct_ratio")].old == "600/5 A"
    z1 = by[("results", "circuit 1 Z1 [ohm]")]
    # Z_sec = Z_pri x CT ratio / VT ratio (definition of secondary ohms, IEEE Std C37.113):
    # the secondary change is the primary change times 160/120.
    prim = by[("settings", "Kessler Junction zone1 reach primary [ohm]")]
    sec = by[("settings", "Kessler Junction zone1 reach secondary [ohm]")]
    assert_allclose(abs(sec.new) / abs(sec.old), abs(prim.new) / abs(prim.old) * 160 / 120,
                    rtol=1e-9, atol=0)
    assert_allclose(z1.pct, (abs(z1.new) / abs(z1.old) - 1) * 100, rtol=1e-12, atol=0)
    assert z1.pct < 0  # a larger conductor: less resistance, lower |Z1|
    table = format_table(c)
    assert "relay.ct_ratio" in table and "%" in table
    paths = write_change_sheet(c, tmp_path / "sheet")
    html = paths[0].read_text("utf-8")
    assert "Approved" in html and "licensed professional engineer" in html
    assert paths[1].read_bytes()[:5] == b"%PDF-"
    assert main(["compare", str(old), str(new)]) == 0
    assert "conductor_types.phase.code" in capsys.readouterr().out


def _two_revisions(tmp_path):
    """Revision 0 of a demo line and revision 1 with a larger conductor and a new CT ratio."""
    data = tomllib.loads((demo_lines_dir() / NAME).read_text("utf-8"))
    old = tmp_path / "rev0.toml"
    old.write_text(dump_toml(data), "utf-8")
    data["study"]["revision"] = "1"
    data["conductor_types"]["phase"]["code"] = "556.5 ACSR"
    data["relay"]["ct_ratio"] = "800/5 A"
    new = tmp_path / "rev1.toml"
    new.write_text(dump_toml(data), "utf-8")
    return compare(old, new)


@pytest.fixture(scope="module")
def revisions(tmp_path_factory):
    return _two_revisions(tmp_path_factory.mktemp("revisions"))


def test_change_rows_drop_round_off_and_show_meaningful_digits():
    # identities: an unchanged value, round-off of a value and of a value that is zero in
    # theory (a remote-bus overreach of 7e-14 %) are not changes
    assert numeric_change("results", "x", 16.9238, 16.9238) is None
    assert numeric_change("results", "x", 16.9238, 16.9238 * (1 + 1e-12)) is None
    assert numeric_change("results", "x", 6.66e-14, 8.88e-14) is None
    assert numeric_change("results", "x", 2.0, 2.0 * (1 + 0.5 * DISPLAY_RTOL)) is None
    # a real change of 0.004 % keeps its digits (hand arithmetic: 1.00004 / 1 - 1 = 4e-5)
    ch = numeric_change("settings", "x", 1.0, 1.00004)
    assert shown(ch) == ("1", "1.00004", "+0.00400 %")
    assert shown(numeric_change("settings", "x", 80.0, 79.5))[2] == "−0.625 %"
    # a real number crossing zero: the signed change (hand arithmetic: (-0.5 - 0.5)/0.5)
    assert shown(numeric_change("results", "x", 0.5, -0.5))[2] == "−200 %"
    # a pure rotation: no magnitude change, the angle change in degrees (hand arithmetic)
    a = cmath.rect(10.0, math.radians(30.0))
    ch = numeric_change("settings", "z", a, cmath.rect(10.0, math.radians(30.01)))
    assert ch.pct is None
    assert_allclose(ch.angle_change_deg, 0.01, rtol=1e-9, atol=0)
    assert shown(ch) == ("10 ∠ 30.000°", "10 ∠ 30.010°", "∠ +0.0100°")


def test_change_sheet_values_are_magnitude_and_angle_as_the_settings_print(revisions):
    """Reaches on the sheet against `relayset settings` rows (report.tables.settings_rows) of
    the same revision: the same magnitude and angle, to the digits shown."""
    from relayset.report.tables import settings_rows
    from relayset.studies import pipeline

    c = revisions
    res = pipeline.run(c.new_source, settings=True)
    rows = {name: value for name, value, _ in settings_rows(res.settings[0])}
    ch = next(ch for ch in c.changes
              if ch.name == "Kessler Junction zone1 reach primary [ohm]")
    m = re.fullmatch(r"([\d.]+) ∠ (−?[\d.]+)°", shown(ch)[1])
    assert m, shown(ch)
    assert_allclose(float(m.group(1)), rows["Zone 1 reach, primary"], rtol=1e-4, atol=0)
    assert_allclose(float(m.group(2).replace("−", "-")), rows["Zone 1 reach angle"],
                    rtol=0, atol=0.005)
    for ch in c.changes:  # no complex number in R + jX form, no "0.00 %" non-change
        old, new, change = shown(ch)
        assert "j" not in old + new, ch
        assert not re.search(r"[+−]0\.0*( %|°)", change), (ch.name, change)
        if isinstance(ch.old, float | complex) and isinstance(ch.new, float | complex):
            assert abs(ch.new - ch.old) > DISPLAY_RTOL * abs(ch.old), ch  # above tolerance
    table = format_table(c)
    assert "1e-06 of its old value" in table  # the tolerance is stated


def _page_texts(pdf_bytes: bytes) -> list[str]:
    from pypdf import PdfReader

    return [p.extract_text() for p in PdfReader(io.BytesIO(pdf_bytes)).pages]


def _padded(c, n):
    """The comparison with n more (repeated) setting rows, to move the sign-off block."""
    base = [ch for ch in c.changes if ch.section == "settings"]
    pad = tuple(dataclasses.replace(base[k % len(base)], name=f"padding row {k}")
                for k in range(n))
    return dataclasses.replace(c, changes=c.changes + pad)


def _sheet_pdf(c) -> bytes:
    import weasyprint

    from relayset.archive.compare import change_sheet_html

    return weasyprint.HTML(string=change_sheet_html(c)).write_pdf()


def test_change_sheet_every_page_has_header_and_caution(revisions):
    pages = _page_texts(_sheet_pdf(_padded(revisions, 40)))
    assert len(pages) >= 3
    for k, text in enumerate(pages, start=1):
        flat = " ".join(text.split())
        assert "PR-KO-115 · change sheet, revision 0 to 1" in flat, k
        assert "Status: Draft" in flat and "NOT APPROVED FOR USE" in flat, k  # as the report
        assert "licensed professional engineer" in flat, k  # the caution (rules)
        assert f"page {k} of {len(pages)}" in flat


def test_change_sheet_keeps_the_sign_off_block_on_one_page(revisions):
    """Push the sign-off block down row by row across a page break: its heading and every
    role stay on one page (the block moves whole)."""
    moved = 0
    for n in range(14, 60, 2):
        pages = _page_texts(_sheet_pdf(_padded(revisions, n)))

        where = {i for i, t in enumerate(pages) for pattern in
                 (r"^Sign-off", r"^Prepared", r"^Checked", r"^Approved")
                 if re.search(pattern, t, re.M)}
        assert len(where) == 1, (n, where)
        moved = max(moved, *where)
        if moved >= 2:  # crossed one page break and sat at the top of the next page
            break
    assert moved >= 2


def _all_values_check(v):
    return next(c for c in v.checks if c.what.startswith("all ") and "values" in c.what)


@pytest.mark.parametrize("version, passes", [(None, False), ("0.0.1", True)])
def test_results_keys_of_another_version(archived, tmp_path, version, passes):
    """An archive lacks a key this version's results carry (an older relayset): the key is
    reported as new and not compared, and the values both give must still agree. A key
    the archive has and the recomputation lacks fails when the versions are equal (the
    same version must give the same results) and is only reported across versions."""
    import re as re_mod

    bad = tmp_path / "keys.pdf"

    def edit(b: bytes) -> bytes:
        text = b.decode("utf-8")
        text, n = re_mod.subn(r'"zone1_allowed_by_errors_pct": [0-9.]+,\s*', "", text)
        assert n >= 1
        text = text.replace('"cases_solved":', '"retired_quantity_pct": 1.5, "cases_solved":', 1)
        if version is not None:
            text = re_mod.sub(r'"relayset_version": "[^"]*"',
                              f'"relayset_version": "{version}"', text, count=1)
        return text.encode("utf-8")

    _edit_attachment(archived, bad, ".results.json", edit)
    c = _all_values_check(verify_report(bad))
    assert c.passed is passes, c.detail
    assert "new in this version's results" in c.detail and "zone1_allowed" in c.detail
    assert "no longer in the results" in c.detail and "retired_quantity_pct" in c.detail
    assert "differ" not in c.detail.split(";")[0]


def _one_byte(old: bytes, new: bytes):
    """An edit of one byte: the first ``old`` (one byte) becomes ``new``."""
    def edit(b: bytes) -> bytes:
        k = b.index(old)
        return b[:k] + new + b[k + 1:]
    return edit


def test_embedded_profile_and_setting_files_are_printed_and_verified(archived):
    """The report prints the SHA-256 of its relay profile and of each setting file; verify
    checks each against the page, the metadata and (profile) the results JSON, (setting
    file) its own study and results SHA-256. Reference: hashlib."""
    import hashlib

    from relayset.archive.pdf import read_archive
    from relayset.archive.verify import check_hashes

    a = read_archive(archived)
    names = sorted(n for n in a.attachments
                   if n.startswith("relay_profile.") or n.endswith("_settings.json"))
    assert len(names) == 2  # the demo's profile and its one relay end's setting file
    checks = {c.what: c for c in check_hashes(a)}
    for n in names:
        h = hashlib.sha256(a.attachments[n]).hexdigest()
        kind = "relay profile" if n.startswith("relay_profile.") else "setting file"
        assert a.printed(f"SHA-256 of the {kind} {n}") == h  # printed on the page
        assert h in a.metadata_hashes()
        mine = [c for w, c in checks.items() if w.startswith(f"{kind} {n}")]
        assert len(mine) >= 4 and all(c.passed is not False for c in mine)
        assert any(c.passed is None and h in c.detail for c in mine)
    assert not any("not checked by hash" in c.detail and (
        "relay_profile." in w or "_settings.json" in w) for w, c in checks.items())


@pytest.mark.parametrize("suffix, edit", [
    # a digit of a value in the setting file (the pages re-rendered from the results stay
    # the same: only the hash tells)
    ("_settings.json", _one_byte(b'"value": 0', b'"value": 1')),
    # a letter of the profile's comment (the settings recomputed stay the same)
    (".toml", _one_byte(b"#", b";")),
], ids=["setting file", "relay profile"])
def test_one_byte_changed_in_an_embedded_file_fails_and_names_it(archived, tmp_path, capsys,
                                                                 suffix, edit):
    bad = tmp_path / "edited.pdf"
    if suffix == ".toml":  # the profile, not the study
        with pikepdf.open(archived) as pdf:
            name = next(n for n in pdf.attachments if n.startswith("relay_profile."))
            data = pdf.attachments[name].get_file().read_bytes()
            pdf.attachments[name] = pikepdf.AttachedFileSpec(pdf, edit(data), filename=name)
            pdf.save(bad)
    else:
        _edit_attachment(archived, bad, suffix, edit)
        with pikepdf.open(bad) as pdf:
            name = next(n for n in pdf.attachments if n.endswith(suffix))
    v = verify_report(bad)
    failed = [c.what for c in v.checks if c.passed is False]
    named = [f for f in failed if name in f and "SHA-256 against the page text" in f]
    assert named, failed
    assert main(["verify", str(bad)]) == 1
    out = capsys.readouterr().out
    assert "DOES NOT MATCH" in out and f"FAIL {named[0]}" in out
