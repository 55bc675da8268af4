"""The printed pages bound to the embedded data: verify makes the report again and compares.

A relayset report is rendered from its results and input files only, so the installed
relayset can render it again from the files an archive embeds (the recomputed results, the
embedded study, philosophy and results JSON, the creation date, units and paper the PDF
records). What this module checks, against that re-rendering:

- the text of every page, page by page: any word printed that the re-rendering does not
  print there is named with its page (printed, expected);
- the report as written (the PDF's first revision) byte for byte: equal on a machine with
  the fonts and libraries that wrote it; otherwise said so, and the page text decides;
- updates appended after the report was written: only signatures may follow
  (:mod:`relayset.archive.signatures` tells them apart);
- annotations: none but the report's own links and its signature fields;
- metadata (document information and XMP): the re-rendering's, key for key.

What it cannot see: a change drawn without text (a white box over a number, a picture of
text) in a file that is no longer byte-identical to a re-rendering; a page whose text
extraction was made to read like the original. The README says so.
"""

from __future__ import annotations

import dataclasses
import difflib
import re
from typing import Any

from relayset.archive.pdf import Archive
from relayset.archive.verify import Check

#: Metadata keys a signature's update may change (pyHanko writes these); every other key
#: must equal the re-rendering's.
SIGNING_MAY_CHANGE = ("/ModDate", "/Producer")
#: How many differences of one page are named (the count is always given).
MAX_NAMED = 8
#: Where a revision of a PDF ends: "startxref <offset> %%EOF" and its end of line.
_REVISION_END = re.compile(rb"startxref\s+\d+\s+%%EOF(\r\n|\r|\n)?")


def revision_ends(data: bytes) -> list[int]:
    """The byte offset where each revision of the PDF ends (the first is the report as
    written, each later one an update appended to it)."""
    return [m.end() for m in _REVISION_END.finditer(data)]


def report_options(a: Archive, study_units: str) -> tuple[str, str]:
    """The units and paper the report was made with, as its keywords record them (the
    paper from the page size and ``study_units``, the study's own, otherwise)."""
    keywords = a.metadata.get("/Keywords", "")
    units = re.search(r"\bunits (si|us)\b", keywords)
    paper = re.search(r"\bpaper (a4|letter)\b", keywords)
    if paper is None:
        width = (a.media_box or (0.0, 0.0))[0]
        paper_name = "letter" if abs(width - 612) < 2 else "a4"
    else:
        paper_name = paper.group(1)
    return (study_units if units is None else units.group(1)), paper_name


def rerender(a: Archive, results, study_name: str, renderer=None) -> bytes:
    """The report made again from the archive's embedded files and ``results`` (the
    recomputation of the embedded study, carrying the archived file name and hash)."""
    from relayset.export.setting_file import PROFILE_PREFIX, is_setting_attachment
    from relayset.report.build import render_report

    results_name = a.results_name
    others = [n for n in a.attachments if n not in (study_name, results_name)
              and not is_setting_attachment(n)]
    philosophy = (others[0], a.attachments[others[0]]) if len(others) == 1 else None
    profile = next(((n, a.attachments[n]) for n in sorted(a.attachments)
                    if n.startswith(PROFILE_PREFIX)), None)
    from relayset.inputs.unit_system import study_unit_system

    units, paper = report_options(a, study_unit_system(getattr(results, _names(results)[1])))
    environ = {}
    if a.created is not None:
        environ["SOURCE_DATE_EPOCH"] = str(int(a.created.timestamp()))
    out = render_report(results, study_name, a.attachments[study_name], philosophy,
                        results_json=a.results_bytes.decode("utf-8"), units=units,
                        paper=paper, environ=environ, pdf_renderer=renderer,
                        profile=profile)
    return out.pdf


def _read_rendered(pdf: bytes) -> Archive:
    """Our own re-rendering, read the way the archive was (same text extraction)."""
    import tempfile
    from pathlib import Path

    from relayset.archive.pdf import read_archive

    with tempfile.TemporaryDirectory(prefix="relayset-verify-") as tmp:
        path = Path(tmp) / "rendered.pdf"
        path.write_bytes(pdf)
        return read_archive(path)


def _page_differences(page: int, printed: str, expected: str) -> list[str]:
    """The words of one page that differ, as '(page N) printed "..." where "..." is
    expected' (a few words either side are enough to find them)."""
    got, want = printed.split(), expected.split()
    out = []
    sm = difflib.SequenceMatcher(None, want, got, autojunk=False)
    for op, i1, i2, j1, j2 in sm.get_opcodes():
        if op == "equal":
            continue
        exp = " ".join(want[i1:i2]) or "(nothing)"
        prn = " ".join(got[j1:j2]) or "(nothing)"
        before = " ".join(want[max(0, i1 - 3):i1])
        where = f' after "{before[-60:]}"' if before else ""
        out.append(f'page {page}{where}: printed "{prn[:120]}", expected "{exp[:120]}"')
    return out


def check_text(a: Archive, r: Archive) -> Check:
    """The text of every page against the re-rendering's, page by page."""
    diffs: list[str] = []
    if len(a.pages) != len(r.pages):
        diffs.append(f"{len(a.pages)} pages, expected {len(r.pages)}")
    for k, (got, want) in enumerate(zip(a.pages, r.pages, strict=False), start=1):
        if got.split() != want.split():
            diffs += _page_differences(k, got, want)
    if not diffs:
        return Check("printed pages", True, f"the text of all {len(a.pages)} pages is the "
                     "text this relayset renders from the embedded files")
    named = "; ".join(diffs[:MAX_NAMED])
    more = f"; and {len(diffs) - MAX_NAMED} more" if len(diffs) > MAX_NAMED else ""
    return Check("printed pages", False, f"{len(diffs)} difference(s) from the pages "
                 f"rendered from the embedded files: {named}{more}")


def check_bytes(a: Archive, rendered: bytes) -> Check:
    """The report as written (first revision) against the re-rendering, byte for byte."""
    ends = revision_ends(a.data)
    first = a.data[:ends[0]] if ends else a.data
    if first == rendered:
        return Check("report as written", True, "byte for byte the PDF this relayset renders "
                     "from the embedded files")
    return Check("report as written", None, "not byte-identical to the re-rendering (other "
                 "fonts or libraries than those that wrote it, or a rewritten file); the "
                 "page text, annotations and metadata decide")


def check_annotations(a: Archive, r: Archive) -> Check:
    """No annotation but the report's own links and signature fields."""
    own = list(r.annotations)
    extra = []
    for ann in a.annotations:
        if ann in own:
            own.remove(ann)
        elif ann[1] != "Widget Sig":
            extra.append(ann)
    if not extra:
        return Check("annotations", True, "none but the report's own links and signature "
                     "fields")
    named = "; ".join(f'page {p}: {kind}{f" ({said})" if said else ""}'
                      for p, kind, said in extra[:MAX_NAMED])
    return Check("annotations", False, f"{len(extra)} added after the report was written: "
                 f"{named}")


def _first_revision_metadata(a: Archive) -> dict[str, str]:
    """Document information and XMP of the report as written (its first revision)."""
    import io

    from pypdf import PdfReader

    from relayset.archive.pdf import _lib, _metadata, _pdf_limits

    ends = revision_ends(a.data)
    with _pdf_limits():
        return _lib(lambda: _metadata(PdfReader(io.BytesIO(a.data[:ends[0]]))), a.source)


def check_metadata(a: Archive, r: Archive, *, signed: bool) -> Check:
    """Document information and XMP against the re-rendering's. A signature's update sets
    the modification date and producer and rewrites the XMP with them: for a signed report
    the document information is checked but for those two keys, and the XMP as the report
    was written (its first revision; later revisions are signatures, checked apart)."""
    keys = sorted(set(a.metadata) | set(r.metadata))
    first = _first_revision_metadata(a) if signed else a.metadata
    differ = []
    for key in keys:
        if signed and key in SIGNING_MAY_CHANGE:
            continue
        got = (first if key == "xmp" else a.metadata).get(key)
        want = r.metadata.get(key)
        if got != want:
            name = "XMP metadata" if key == "xmp" else key.lstrip("/")
            if key == "xmp":
                differ.append(f"{name} differs from the results'")
            else:
                g, w = _around_difference(_short(got), _short(want))
                differ.append(f'{name} is "{g}", the results give "{w}"')
    if not differ:
        return Check("metadata", True, "title, author, subject, keywords, dates and XMP as "
                     "the embedded results give them")
    return Check("metadata", False, "; ".join(differ))


def _short(v: Any) -> str:
    return "(none)" if v is None else str(v)


def _around_difference(a: str, b: str, width: int = 60) -> tuple[str, str]:
    """``a`` and ``b`` cut to where they first differ (with "..." for what was cut)."""
    i = next((k for k, (x, y) in enumerate(zip(a, b, strict=False)) if x != y),
             min(len(a), len(b)))
    start = max(0, i - 20)

    def cut(s: str) -> str:
        return ("..." if start else "") + s[start:start + width] + (
            "..." if len(s) > start + width else "")

    return cut(a), cut(b)


def _names(results) -> tuple[str, str]:
    """The results' fields of the study identity and of the study as read (``study`` and
    ``input`` where the results model names them as the JSON does, else the older names)."""
    fields = {f.name for f in dataclasses.fields(results)}
    return (("study", "input") if "input" in fields else ("identity", "study_input"))


def patched_results(results, study_name: str, study_sha: str, philosophy: Any, *,
                    profile: str | None = None):
    """The recomputed results as the archived report had them: its study file name and
    SHA-256 and the philosophy name it wrote (the recomputation ran on a private copy)."""
    id_name, in_name = _names(results)
    identity = dict(getattr(results, id_name))
    study_input = dict(getattr(results, in_name))
    if "philosophy" in identity:
        identity["philosophy"] = philosophy
    if isinstance(study_input.get("study"), dict) and "philosophy" in study_input["study"]:
        study_input["study"] = {**study_input["study"], "philosophy": philosophy}
    if profile is not None and isinstance(study_input.get("relay"), dict):
        study_input["relay"] = {**study_input["relay"], "profile": profile}
    return dataclasses.replace(results, source_file=study_name, source_sha256=study_sha,
                               **{id_name: identity, in_name: study_input})


def check_pages(a: Archive, results, study_name: str, *, signed: bool,
                renderer=None) -> list[Check]:
    """Every check of the printed pages against the re-rendering (see the module)."""
    rendered = rerender(a, results, study_name, renderer)
    same = check_bytes(a, rendered)
    if same.passed and len(revision_ends(a.data)) == 1 and a.data.rstrip() == rendered.rstrip():
        # the whole file is the re-rendering: its pages, annotations and metadata are too
        n = len(a.pages)
        return [same, Check("printed pages", True, f"all {n} pages are those this relayset "
                            "renders from the embedded files (the file is byte for byte)"),
                Check("annotations", True, "none but the report's own links and signature "
                      "fields (the file is byte for byte the re-rendering)"),
                Check("metadata", True, "as the embedded results give them (the file is "
                      "byte for byte the re-rendering)")]
    r = _read_rendered(rendered)
    return [same, check_text(a, r), check_annotations(a, r),
            check_metadata(a, r, signed=signed)]
