"""Reading an archived report PDF: its embedded files, its page text and its metadata.

Every PDF is hostile until read. Nothing here writes a file: the embedded files are read into
memory, and their names are only labels (a name that is not a plain file name makes the PDF
not a relayset report). What a report may make us read is bounded by the limits below.
"""

from __future__ import annotations

import json
import math
import re
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, TypeVar

from relayset.archive.quantities import ShapeError, check_results_shape, nesting_depth
from relayset.errors import InputError

T = TypeVar("T")
RESULTS_SUFFIX = ".results.json"
HEX64 = re.compile(r"[0-9a-f]{64}")

# Limits on what one archived report may make verify and compare read. A real report is
# 0.3-1 MB on disk with three embedded files (study ~2-10 kB, results JSON ~0.1-0.5 MB,
# philosophy ~4 kB), 10-30 pages, a few hundred PDF objects and a results JSON nested 11
# deep; each limit leaves a margin of 30x or more, and a file beyond one is refused with one
# line (exit 2) before it can cost gigabytes of memory or minutes.
#: The PDF file itself [bytes].
MAX_FILE_BYTES = 64_000_000
#: One stream after decompression [bytes]: handed to the PDF library's own limits (FlateDecode,
#: LZW, run-length, JBIG2, Brotli, declared /Length), so that a compression bomb stops there.
MAX_STREAM_BYTES = 32_000_000
#: All embedded files together, decompressed [bytes].
MAX_EMBEDDED_BYTES = 64_000_000
#: Embedded files (a report has 2 or 3).
MAX_EMBEDDED_FILES = 64
#: Pages whose text is read for the printed SHA-256.
MAX_PAGES = 1_000
#: Page text of all pages together [characters].
MAX_TEXT_CHARS = 10_000_000
#: Objects in the PDF's cross-reference tables.
MAX_OBJECTS = 200_000
#: Arrays and dictionaries inside each other: in every PDF object read, in the embedded
#: results JSON and in the embedded TOML files (a real report: 11 in the JSON, fewer in the
#: PDF). Deeper PDF objects than the library's parser can follow are refused by it (its
#: error, or Python's recursion limit, becomes the one-line message).
MAX_NESTING = 64
#: Digits of an integer in the results JSON (relayset writes counts and years).
MAX_INT_DIGITS = 18
#: Magnitude of a number in the results JSON: relayset writes strict JSON (no NaN or
#: infinity) and physical quantities far below this; the bound keeps every difference,
#: percent change and complex magnitude of verify and compare finite.
MAX_NUMBER = 1e100

#: The PDF library's limits (pypdf >= 6.18 ``pypdf.Configuration``), set from the above.
_PYPDF_LIMITS = {
    "maximum_declared_stream_length": MAX_STREAM_BYTES,
    "array_based_stream_maximum_output_length": MAX_STREAM_BYTES,
    "zlib_maximum_output_length": MAX_STREAM_BYTES,
    "lzw_maximum_output_length": MAX_STREAM_BYTES,
    "run_length_maximum_output_length": MAX_STREAM_BYTES,
    "jbig2_maximum_output_length": MAX_STREAM_BYTES,
    "brotli_maximum_output_length": MAX_STREAM_BYTES,
    "image_maximum_buffer_size": MAX_STREAM_BYTES,
    "stream_decoding_work_maximum_length": 4 * MAX_STREAM_BYTES,
    "jbig2dec_binary": None,  # never start an outside program for a hostile image
}


@dataclass(frozen=True)
class Archive:
    """What an archived report carries."""

    source: str  #: the PDF's path
    attachments: dict[str, bytes]  #: embedded file name -> bytes
    text: str  #: the page text
    metadata: dict[str, str]  #: document information (title, keywords ...) and XMP
    parsed: dict[str, Any] = field(default_factory=dict, repr=False)  #: the results, read
    pages: tuple[str, ...] = ()  #: the text of each page (with ``text``)
    annotations: tuple[tuple[int, str, str], ...] = ()  #: (page, kind, text) of each one
    data: bytes = field(default=b"", repr=False)  #: the PDF file's bytes
    created: Any = None  #: the document information's creation date (datetime), if any
    media_box: tuple[float, float] | None = None  #: the first page's width, height [pt]

    @property
    def results_name(self) -> str:
        return next(n for n in self.attachments if n.endswith(RESULTS_SUFFIX))

    @property
    def results_bytes(self) -> bytes:
        return self.attachments[self.results_name]

    def results(self) -> dict[str, Any]:
        """The embedded results JSON, parsed (and checked when the PDF was read)."""
        return self.parsed or parse_results(self.results_bytes, self.results_name, self.source)

    def study_name(self) -> str | None:
        """The embedded study file's name (the results name it as their source file)."""
        name = Path(str(self.results().get("source_file", ""))).name
        if name in self.attachments and name != self.results_name:
            return name
        tomls = [n for n in self.attachments if n.endswith(".toml")
                 and not n.startswith(("philosophy", "relay_profile."))]  # nor the profile
        return tomls[0] if len(tomls) == 1 else None

    def printed(self, label: str) -> str | None:
        """The SHA-256 printed after ``label`` in the page text (spaces ignored)."""
        flat = re.sub(r"\s+", "", self.text)
        m = re.search(re.escape(re.sub(r"\s+", "", label)) + r"([0-9a-f]{64})", flat)
        return m.group(1) if m else None

    def metadata_hashes(self) -> set[str]:
        """Every SHA-256 stored in the document metadata."""
        return {h for v in self.metadata.values() for h in HEX64.findall(v)}


def _strict_number(text: str) -> float:
    x = float(text)
    if not math.isfinite(x) or abs(x) > MAX_NUMBER:
        raise ValueError(f"a number beyond {MAX_NUMBER:g}")
    return x


def _strict_int(text: str) -> int:
    if len(text.lstrip("-")) > MAX_INT_DIGITS:
        raise ValueError(f"an integer of more than {MAX_INT_DIGITS} digits")
    return int(text)


def _no_constant(text: str) -> None:
    raise ValueError(f"{text} (relayset writes strict JSON)")


def parse_results(data: bytes, name: str, source: str) -> dict[str, Any]:
    """The results JSON ``name`` embedded in ``source``, parsed and checked for the shape
    verify and compare read (an InputError naming the PDF otherwise)."""
    def bad(rule: str, where: str = "") -> InputError:
        return InputError(f"{rule}: not a relayset results file", field=where or name,
                          source=source)

    try:
        obj = json.loads(data.decode("utf-8"), parse_float=_strict_number,
                         parse_int=_strict_int, parse_constant=_no_constant)
    except RecursionError:
        raise bad(f"is nested more than {MAX_NESTING} deep") from None
    except ValueError as exc:  # also UnicodeDecodeError and json.JSONDecodeError
        raise bad(f"cannot be read ({_printable(str(exc))})") from None
    if nesting_depth(obj) > MAX_NESTING:
        raise bad(f"is nested more than {MAX_NESTING} deep")
    if not isinstance(obj, dict):
        raise bad(f"is a JSON {_json_kind(obj)}, not an object")
    try:
        check_results_shape(obj)
    except ShapeError as exc:
        raise bad(exc.rule, f"{name} {exc.where}") from None
    return obj


def _json_kind(obj: Any) -> str:
    return {list: "array", str: "string", bool: "boolean", type(None): "null"}.get(
        type(obj), "number")


def _printable(text: str) -> str:
    """``text`` with control characters shown as '?', so a message stays one line."""
    return "".join(c if c.isprintable() else "?" for c in text)


def _plain_name(name: Any) -> bool:
    """A plain file name, as relayset embeds them: no folder part, no control character."""
    return (isinstance(name, str) and 0 < len(name) <= 255 and name not in (".", "..")
            and name.isprintable() and not any(c in name for c in "/\\:"))


def _pdf_limits():
    """The PDF library's limits set to ours while reading (pypdf >= 6.18; older versions keep
    their own fixed per-stream limits, and the totals below still apply)."""
    import contextlib
    import dataclasses

    import pypdf

    apply = getattr(pypdf, "apply_configuration", None)
    if apply is None:
        return contextlib.nullcontext()
    known = {f.name for f in dataclasses.fields(pypdf.Configuration)}
    return apply(**{k: v for k, v in _PYPDF_LIMITS.items() if k in known})


def _lib(call: Callable[[], T], src: str) -> T:
    """``call()``, a call into the PDF library: whatever it raises on a malformed or hostile
    file (its own errors, its limits, Python's recursion limit, a bad token) is one line."""
    try:
        return call()
    except Exception as exc:  # the library's, not ours: only library calls come here
        why = _printable(str(exc)) or type(exc).__name__
        raise InputError(f"is not a readable PDF ({why})", source=src) from None


def _read_pdf(data: bytes, src: str, *, text: bool
              ) -> tuple[dict[str, bytes], list[str], dict[str, str], dict[str, Any],
                         dict[str, Any]]:
    """Embedded files, results, page text and metadata (the last two with ``text``) within
    the limits. Each call into the PDF library goes through :func:`_lib`; the checks
    between them are ours and raise nothing but InputError."""
    import io

    from pypdf import PdfReader

    reader = _lib(lambda: PdfReader(io.BytesIO(data)), src)
    objects = _lib(lambda: sum(len(v) for v in reader.xref.values())
                   + len(reader.xref_objStm), src)
    if objects > MAX_OBJECTS:
        raise InputError(f"has {objects} objects, more than the {MAX_OBJECTS} an archived "
                         "report may have", source=src)
    names = _lib(lambda: list(reader.attachments), src)
    if len(names) > MAX_EMBEDDED_FILES:
        raise InputError(f"has {len(names)} embedded files, more than the "
                         f"{MAX_EMBEDDED_FILES} an archived report may have", source=src)
    for name in names:
        if not _plain_name(name):
            raise InputError("an embedded file is named " + _printable(str(name))[:80]
                             + ", not a plain file name: not a relayset report (nothing "
                             "was written)", source=src)
    attachments: dict[str, bytes] = {}
    total = 0
    for name in names:
        contents = _lib(lambda n=name: list(reader.attachments[n]), src)
        if len(contents) != 1 or not isinstance(contents[0], bytes):
            raise InputError(f"{len(contents)} embedded files are named {name}: not a "
                             "relayset report", source=src)
        total += len(contents[0])
        if total > MAX_EMBEDDED_BYTES:
            raise InputError(f"its embedded files hold more than {MAX_EMBEDDED_BYTES} bytes "
                             "decompressed, more than an archived report may", source=src)
        attachments[name] = contents[0]
    results = _results(attachments, src)
    texts: list[str] = []
    meta: dict[str, str] = {}
    extra: dict[str, Any] = {}
    if text:
        pages = _lib(lambda: list(reader.pages), src)
        if len(pages) > MAX_PAGES:
            raise InputError(f"has {len(pages)} pages, more than the {MAX_PAGES} an "
                             "archived report may have", source=src)
        for page in pages:
            texts.append(_lib(lambda p=page: str(p.extract_text() or ""), src))
            if sum(map(len, texts)) > MAX_TEXT_CHARS:
                raise InputError(f"its pages hold more than {MAX_TEXT_CHARS} characters of "
                                 "text, more than an archived report may", source=src)
        meta = _lib(lambda: _metadata(reader), src)
        extra["annotations"] = tuple(_lib(lambda: _annotations(pages), src))
        extra["created"] = _lib(lambda: (reader.metadata or {}) and
                                reader.metadata.creation_date, src) or None
        if pages:
            box = _lib(lambda: pages[0].mediabox, src)
            extra["media_box"] = (float(box.width), float(box.height))
    _check_nesting(_lib(lambda: [*reader.resolved_objects.values(), reader.trailer],
                        src), src)
    return attachments, texts, meta, results, extra


def _annotations(pages: list[Any]) -> list[tuple[int, str, str]]:
    """(page number from 1, kind, text) of every annotation: its subtype, and for a form
    field its field type ("Widget Sig" is a signature field); the text is what it says."""
    out = []
    for k, page in enumerate(pages, start=1):
        annots = page.get("/Annots")
        for ref in (annots.get_object() if annots is not None else None) or []:
            a = ref.get_object()
            kind = str(a.get("/Subtype", "?")).lstrip("/")
            ft, parent = a.get("/FT"), a.get("/Parent")
            if ft is None and parent is not None:
                ft = parent.get_object().get("/FT")
            if ft is not None:
                kind += " " + str(ft).lstrip("/")
            said = " ".join(str(a.get(key, "")) for key in ("/T", "/Contents")).strip()
            out.append((k, kind, _printable(said)[:120]))
    return out


def _metadata(reader: Any) -> dict[str, str]:
    """Document information and XMP as text (library calls only)."""
    meta = {str(k): str(v) for k, v in (reader.metadata or {}).items()}
    xmp = reader.xmp_metadata
    if xmp is not None:
        meta["xmp"] = xmp.stream.get_data().decode("utf-8", "replace")
    return meta


def _check_nesting(objects: list[Any], src: str) -> None:
    """Every PDF object read nested at most MAX_NESTING deep (a parsed dictionary or array
    is a dict or list; a reference to another object ends the walk)."""
    for obj in objects:
        if nesting_depth(obj) > MAX_NESTING:
            raise InputError(f"holds objects nested more than {MAX_NESTING} deep, more than "
                             "an archived report may", source=src)


def _results(attachments: dict[str, bytes], src: str) -> dict[str, Any]:
    """The one embedded results JSON, parsed and checked."""
    if not attachments:
        raise InputError("the PDF has no embedded files: not an archived relayset report",
                         source=src)
    names = [n for n in attachments if n.endswith(RESULTS_SUFFIX)]
    if not names:
        raise InputError("no embedded results JSON (*.results.json): not a relayset report",
                         source=src)
    if len(names) > 1:
        raise InputError(f"{len(names)} embedded results JSON (*.results.json): not a "
                         "relayset report", source=src)
    return parse_results(attachments[names[0]], names[0], src)


def read_archive(path: str | Path, *, text: bool = True) -> Archive:
    """Open an archived relayset report (in memory; nothing is written).

    ``text`` False skips the page text and the metadata (compare needs the results only).

    Raises
    ------
    InputError
        Not a PDF, a malformed PDF, one beyond the limits above, or one that is not a
        relayset report (no embedded results JSON, or one of another shape).
    """
    import logging

    src = str(path)
    p = Path(path)
    if not p.is_file():
        raise InputError("file does not exist", source=src)
    try:
        size = p.stat().st_size
        if size > MAX_FILE_BYTES:
            raise InputError(f"is {size} bytes, more than the {MAX_FILE_BYTES} an archived "
                             "report may have", source=src)
        data = p.read_bytes()
    except OSError as exc:
        raise InputError(f"cannot be read ({exc.strerror or exc})", source=src) from None
    if data[:5] != b"%PDF-":
        raise InputError("is not a readable PDF (no %PDF- header)", source=src)
    logging.getLogger("pypdf").setLevel(logging.ERROR)
    with _pdf_limits():
        attachments, pages, meta, results, extra = _read_pdf(data, src, text=text)
    return Archive(src, attachments, "\n".join(pages), meta, results, pages=tuple(pages),
                   data=data, **extra)
