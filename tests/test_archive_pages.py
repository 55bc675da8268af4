"""verify binds the printed pages to the embedded data: each tamper of issue 18 is named.

The tampers are made the way a person with common PDF tools would: a content-stream edit
(pikepdf), an update appended that paints over a value (pypdf's incremental writer), an
added annotation, a changed title and author, a removed attachment, a truncated file.
"""

from __future__ import annotations

import re

import pytest

from relayset.archive.verify import verify_report
from relayset.cli import main
from relayset.resources import demo_lines_dir

pikepdf = pytest.importorskip("pikepdf", reason="pikepdf edits the PDFs of the tamper tests")

NAME = "kessler_oxbow_115kv.toml"


@pytest.fixture(scope="module")
def archived(tmp_path_factory):
    """One report PDF of a demo line, as `relayset report` writes it."""
    folder = tmp_path_factory.mktemp("pages")
    study = folder / NAME
    study.write_bytes((demo_lines_dir() / NAME).read_bytes())
    assert main(["report", str(study), "-o", str(folder / "out")]) in (0, 3)
    return next((folder / "out").glob("*.pdf"))


def _check(v, what):
    return next(c for c in v.checks if c.what.startswith(what))


def _glyphs(text: str) -> bytes:
    """The glyph codes a report's DejaVu subset shows ``text`` with (the subset keeps the
    font's glyph ids: ASCII code - 29), kerning numbers allowed between them."""
    return rb"[\d.\- ]*".join(re.escape(f"<{ord(c) - 29:04x}>".encode()) for c in text)


def _zone1_reach(pdf) -> str:
    """The zone 1 primary reach as the report prints it (3 decimals), from its JSON."""
    import json

    with pikepdf.open(pdf) as p:
        name = next(n for n in p.attachments if n.endswith(".results.json"))
        res = json.loads(p.attachments[name].get_file().read_bytes())
    z1 = res["settings"]["ends"][0]["zones"]["zone1"]["reach_primary_magnitude_ohm"]
    return f"{z1:.3f}"


def test_untouched_report_binds_every_page(archived, capsys):
    v = verify_report(archived)
    assert v.passed, [c for c in v.checks if c.passed is False]
    assert _check(v, "printed pages").passed
    assert _check(v, "report as written").passed  # same machine: byte for byte
    assert _check(v, "updates after").passed
    assert _check(v, "annotations").passed
    assert _check(v, "metadata").passed
    assert main(["verify", str(archived)]) == 0
    assert "MATCHES" in capsys.readouterr().out


def test_content_stream_edit_is_named_with_page_printed_and_expected(archived, tmp_path,
                                                                     capsys):
    value = _zone1_reach(archived)
    forged = ("3" if value[0] != "3" else "4") + value[1:]
    bad = tmp_path / "edited.pdf"
    with pikepdf.open(archived) as pdf:
        done = False
        for page in pdf.pages:
            streams = page.Contents if isinstance(page.Contents, pikepdf.Array) else [
                page.Contents]
            for cs in streams:
                data = cs.read_bytes()
                m = re.search(_glyphs(value), data)
                if m and not done:
                    new = m.group(0).replace(_glyph(value[0]), _glyph(forged[0]), 1)
                    cs.write(data[:m.start()] + new + data[m.end():])
                    done = True
        assert done, f"{value} not found in any content stream"
        pdf.save(bad)
    v = verify_report(bad)
    c = _check(v, "printed pages")
    assert c.passed is False
    assert re.search(rf'page \d+ .*printed "{re.escape(forged)}", expected '
                     rf'"{re.escape(value)}"', c.detail), c.detail
    assert main(["verify", str(bad)]) == 1
    assert "DOES NOT MATCH" in capsys.readouterr().out


def _glyph(ch: str) -> bytes:
    return f"<{ord(ch) - 29:04x}>".encode()


def test_update_appended_that_paints_over_is_refused(archived, tmp_path):
    from pypdf import PdfWriter
    from pypdf.generic import (
        ArrayObject,
        DecodedStreamObject,
        DictionaryObject,
        NameObject,
    )

    w = PdfWriter(str(archived), incremental=True)
    page = w.pages[0]
    s = DecodedStreamObject()
    s.set_data(b"q 1 1 1 rg 50 50 200 30 re f Q BT /Fx 12 Tf 60 60 Td (38.002) Tj ET")
    contents = page["/Contents"]
    old = contents.get_object()
    page[NameObject("/Contents")] = ArrayObject(
        [*(old if isinstance(old, list) else [contents]), w._add_object(s)])
    font = DictionaryObject({NameObject("/Type"): NameObject("/Font"),
                             NameObject("/Subtype"): NameObject("/Type1"),
                             NameObject("/BaseFont"): NameObject("/Helvetica")})
    page["/Resources"].get_object()["/Font"].get_object()[NameObject("/Fx")] = (
        w._add_object(font))
    bad = tmp_path / "overlay.pdf"
    with open(bad, "wb") as f:
        w.write(f)
    assert bad.read_bytes().startswith(archived.read_bytes())  # an appended update
    v = verify_report(bad)
    assert _check(v, "updates after").passed is False
    text = _check(v, "printed pages")
    assert text.passed is False and 'printed "38.002"' in text.detail
    assert main(["verify", str(bad)]) == 1


def test_added_annotation_is_refused(archived, tmp_path):
    bad = tmp_path / "annotated.pdf"
    with pikepdf.open(archived) as pdf:
        a = pdf.make_indirect(pikepdf.Dictionary(
            Type=pikepdf.Name.Annot, Subtype=pikepdf.Name.FreeText, Rect=[100, 100, 300, 130],
            Contents="APPROVED J. Smith", DA="/Helv 12 Tf 0 g", F=4))
        p = pdf.pages[0]
        if "/Annots" not in p.obj:
            p.obj.Annots = pdf.make_indirect(pikepdf.Array())
        p.obj.Annots.append(a)
        pdf.save(bad)
    v = verify_report(bad)
    c = _check(v, "annotations")
    assert c.passed is False
    assert "page 1: FreeText (APPROVED J. Smith)" in c.detail
    assert _check(v, "printed pages").passed  # the page text itself is unchanged
    assert not v.passed


def test_changed_title_and_author_are_named(archived, tmp_path):
    bad = tmp_path / "meta.pdf"
    with pikepdf.open(archived) as pdf:
        author = str(pdf.docinfo["/Author"])
        pdf.docinfo["/Title"] = "Another line"
        pdf.docinfo["/Author"] = "A. Nother"
        pdf.save(bad)
    v = verify_report(bad)
    c = _check(v, "metadata")
    assert c.passed is False
    assert f'Author is "A. Nother", the results give "{author}"' in c.detail
    assert 'Title is "Another line"' in c.detail
    assert main(["verify", str(bad)]) == 1


def test_removed_study_attachment_is_one_line(archived, tmp_path, capsys):
    bad = tmp_path / "nostudy.pdf"
    with pikepdf.open(archived) as pdf:
        del pdf.attachments[NAME]
        pdf.save(bad)
    assert main(["verify", str(bad)]) == 1
    out, err = capsys.readouterr()
    assert "Traceback" not in out + err
    line = next(ln for ln in out.splitlines() if "embedded study file" in ln)
    assert "FAIL" in line and "not among the embedded files" in line


@pytest.mark.parametrize("how", ["truncated", "not a pdf"])
def test_unreadable_file_exits_2_with_one_line(archived, tmp_path, capsys, how):
    bad = tmp_path / "bad.pdf"
    data = archived.read_bytes()
    bad.write_bytes(data[:len(data) // 2] if how == "truncated" else b"hello")
    assert main(["verify", str(bad)]) == 2
    out, err = capsys.readouterr()
    assert out == "" and len(err.strip().splitlines()) == 1 and str(bad) in err
