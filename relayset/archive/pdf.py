"""Reading an archived report PDF: its embedded files, its page text and its metadata."""

from __future__ import annotations

import json
import re
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from relayset.errors import InputError

RESULTS_SUFFIX = ".results.json"
HEX64 = re.compile(r"[0-9a-f]{64}")


@dataclass(frozen=True)
class Archive:
    """What an archived report carries."""

    source: str  #: the PDF's path
    attachments: dict[str, bytes]  #: embedded file name -> bytes
    text: str  #: the page text
    metadata: dict[str, str]  #: document information (title, keywords ...) and XMP

    @property
    def results_name(self) -> str:
        return next(n for n in self.attachments if n.endswith(RESULTS_SUFFIX))

    @property
    def results_bytes(self) -> bytes:
        return self.attachments[self.results_name]

    def results(self) -> dict[str, Any]:
        """The embedded results JSON, parsed."""
        try:
            return json.loads(self.results_bytes.decode("utf-8"))
        except (UnicodeDecodeError, ValueError):
            raise InputError("the embedded results JSON cannot be read", field=self.results_name,
                             source=self.source) from None

    def study_name(self) -> str | None:
        """The embedded study file's name (the results name it as their source file)."""
        try:
            name = Path(str(self.results().get("source_file", ""))).name
        except InputError:
            name = ""
        if name in self.attachments:
            return name
        tomls = [n for n in self.attachments if n.endswith(".toml")
                 and not n.startswith("philosophy")]
        return tomls[0] if len(tomls) == 1 else None

    def printed(self, label: str) -> str | None:
        """The SHA-256 printed after ``label`` in the page text (spaces ignored)."""
        flat = re.sub(r"\s+", "", self.text)
        m = re.search(re.escape(re.sub(r"\s+", "", label)) + r"([0-9a-f]{64})", flat)
        return m.group(1) if m else None

    def metadata_hashes(self) -> set[str]:
        """Every SHA-256 stored in the document metadata."""
        return {h for v in self.metadata.values() for h in HEX64.findall(v)}


def read_archive(path: str | Path) -> Archive:
    """Open an archived relayset report.

    Raises
    ------
    InputError
        Not a PDF, a PDF with no embedded files, or one that is not a relayset report.
    """
    import logging

    from pypdf import PdfReader
    from pypdf.errors import PdfReadError

    src = str(path)
    p = Path(path)
    if not p.is_file():
        raise InputError("file does not exist", source=src)
    logging.getLogger("pypdf").setLevel(logging.ERROR)
    try:
        if p.read_bytes()[:5] != b"%PDF-":
            raise PdfReadError("no PDF header")
        reader = PdfReader(p)
        attachments = {name: data[0] for name, data in reader.attachments.items()}
        text = "\n".join(page.extract_text() or "" for page in reader.pages)
        meta = {str(k): str(v) for k, v in (reader.metadata or {}).items()}
        xmp = reader.xmp_metadata
        if xmp is not None:
            meta["xmp"] = xmp.stream.get_data().decode("utf-8", "replace")
    except (PdfReadError, OSError, ValueError, KeyError) as exc:
        raise InputError(f"is not a readable PDF ({exc})".replace("\n", " "),
                         source=src) from None
    if not attachments:
        raise InputError("the PDF has no embedded files: not an archived relayset report",
                         source=src)
    if not any(n.endswith(RESULTS_SUFFIX) for n in attachments):
        raise InputError("no embedded results JSON (*.results.json): not a relayset report",
                         source=src)
    return Archive(src, attachments, text, meta)
