"""The archival PDF: WeasyPrint, PDF/A-3b, with the inputs and the results embedded.

The HTML is self-contained, so the URL fetcher refuses every URL (file, network, data):
nothing outside the document can reach the PDF. Dates come from the caller (the study's
revision date or SOURCE_DATE_EPOCH), so the same input gives the same bytes.
"""

from __future__ import annotations

import datetime as dt
import mimetypes
import os
import sys
import threading
from collections.abc import Sequence
from contextlib import contextmanager
from dataclasses import dataclass


@dataclass(frozen=True)
class EmbeddedFile:
    """A file carried inside the PDF as an associated file."""

    name: str
    data: bytes
    description: str
    relationship: str  #: "Source" for inputs, "Data" for results


def _loader_cache() -> dict[str, str] | None:
    """Library names known to the dynamic loader's cache (``ldconfig -p``), or None where
    there is no such cache (not Linux, no ldconfig, no output)."""
    import shutil
    import subprocess

    if not sys.platform.startswith("linux"):
        return None
    exe = shutil.which("ldconfig") or next(
        (p for p in ("/sbin/ldconfig", "/usr/sbin/ldconfig") if os.path.exists(p)), None)
    if exe is None:
        return None
    try:
        out = subprocess.run([exe, "-p"], capture_output=True, text=True, timeout=10,
                             env={"LC_ALL": "C", "LANG": "C"}).stdout
    except (OSError, subprocess.SubprocessError):
        return None
    # The loader lists every ABI it knows (32-bit libraries too); keep this interpreter's,
    # named as ctypes.util names them.
    import struct

    machine = f"{os.uname().machine}-{struct.calcsize('l') * 8}"
    abi = {"x86_64-64": "libc6,x86-64", "ppc64-64": "libc6,64bit", "sparc64-64": "libc6,64bit",
           "s390x-64": "libc6,64bit", "ia64-64": "libc6,IA-64"}.get(machine, "libc6")
    names: dict[str, str] = {}
    for line in out.splitlines()[1:]:  # "\tlibfoo.so.1 (libc6,x86-64) => /usr/lib/..."
        soname, _, rest = line.strip().partition(" ")
        if (soname.startswith("lib") and ".so" in soname
                and rest.startswith("(" + abi)):
            names.setdefault(soname[3:soname.index(".so")], soname)
    return names or None


_IMPORT_LOCK = threading.Lock()


def import_weasyprint():
    """Import WeasyPrint, looking its native libraries up in the loader's cache.

    WeasyPrint tries several names per library (Pango, HarfBuzz, fontconfig...); on Linux
    each name that is not the installed one sends ``ctypes.util.find_library`` through a
    compiler and a linker run: some 50 subprocesses and 0.2-0.4 s, a third of the import.
    During the import the lookup answers from one ``ldconfig -p`` instead (the names it
    knows, None for the others). Should the import fail that way (a library outside the
    loader's cache), it is repeated with the standard lookup, which also prints
    WeasyPrint's own advice.
    """
    with _IMPORT_LOCK:  # the lookup and stdout are process-wide: one import at a time
        if "weasyprint" in sys.modules:
            return sys.modules["weasyprint"]
        import contextlib
        import ctypes.util
        import io

        cache = _loader_cache()
        if cache is not None:
            standard = ctypes.util.find_library
            ctypes.util.find_library = cache.get
            try:
                with contextlib.redirect_stdout(io.StringIO()):
                    import weasyprint
                return weasyprint
            except OSError:
                for name in [m for m in sys.modules if m.partition(".")[0] == "weasyprint"]:
                    del sys.modules[name]
            finally:
                ctypes.util.find_library = standard
        import weasyprint

        return weasyprint


def refusing_fetcher(requested: list[str] | None = None):
    """A WeasyPrint URL fetcher that refuses every URL (and notes it in ``requested``)."""
    from weasyprint.urls import FatalURLFetchingError, URLFetcher

    class RefuseAll(URLFetcher):
        """Refuses every URL: the report's HTML is self-contained."""

        def fetch(self, url, headers=None):
            if requested is not None:
                requested.append(url)
            raise FatalURLFetchingError(f"the report loads no external resource: {url}")

    return RefuseAll()


@contextmanager
def _source_date_epoch(when: dt.datetime):
    """fontTools stamps font subsets with the time unless SOURCE_DATE_EPOCH is set."""
    old = os.environ.get("SOURCE_DATE_EPOCH")
    os.environ["SOURCE_DATE_EPOCH"] = str(int(when.timestamp()))
    try:
        yield
    finally:
        if old is None:
            os.environ.pop("SOURCE_DATE_EPOCH", None)
        else:
            os.environ["SOURCE_DATE_EPOCH"] = old


def _dedupe_af(document, pdf) -> None:
    """WeasyPrint 70 lists each associated file twice in the catalog's /AF array."""
    af = pdf.catalog.get("AF")
    if af is None:
        return
    seen, unique = set(), []
    for ref in af:
        key = str(ref)
        if key not in seen:
            seen.add(key)
            unique.append(ref)
    af[:] = unique


#: The signature fields a report carries: the element id of each one's box in the HTML
#: (templates/report/report.html.j2) and the field name (relayset.archive.signatures.FIELDS).
SIGNATURE_BOXES = {"sig-prepared": "relayset_prepared", "sig-checked": "relayset_checked",
                   "sig-approved": "relayset_approved"}
_PT_PER_PX = 0.75  # CSS px (1/96 in) to PDF points (1/72 in)


def _signature_fields(document, pdf) -> None:
    """An empty signature field over each signature box of the pages, so that relayset or a
    PDF reader that signs can fill it. Each widget is printable and has an (empty)
    appearance, as PDF/A asks of an annotation; the form has no /SigFlags until signed."""
    import pydyf

    fields = pydyf.Array()
    kids = pdf.pages["Kids"][::3]
    for number, page in zip(kids, document.pages, strict=False):
        for anchor, name in SIGNATURE_BOXES.items():
            if anchor not in page.anchors:
                continue
            x1, y1, x2, y2 = (v * _PT_PER_PX for v in page.anchors[anchor])
            top = page.height * _PT_PER_PX
            rect = [x1, top - y2, x2, top - y1]
            look = pydyf.Stream([], {"Type": "/XObject", "Subtype": "/Form",
                                     "BBox": pydyf.Array([0, 0, x2 - x1, y2 - y1])})
            pdf.add_object(look)
            widget = pydyf.Dictionary({
                "Type": "/Annot", "Subtype": "/Widget", "FT": "/Sig",
                "T": pydyf.String(name), "TU": pydyf.String(name.split("_")[-1]),
                "Rect": pydyf.Array(rect), "F": 4, "P": f"{number} 0 R".encode(),
                "AP": pydyf.Dictionary({"N": look.reference})})
            pdf.add_object(widget)
            pdf_page = pdf.objects[number]
            if "Annots" not in pdf_page:
                pdf_page["Annots"] = pydyf.Array()
            pdf_page["Annots"].append(widget.reference)
            fields.append(widget.reference)
    if fields:
        pdf.catalog["AcroForm"] = pydyf.Dictionary({"Fields": fields})


def _finish(document, pdf) -> None:
    _dedupe_af(document, pdf)
    _signature_fields(document, pdf)


def html_to_pdf(html: str, files: Sequence[EmbeddedFile], when: dt.datetime,
                requested: list[str] | None = None) -> bytes:
    """PDF/A-3b bytes of the report.

    Parameters
    ----------
    html : str
        The self-contained report HTML (metadata in ``<title>`` and ``<meta>``).
    files : sequence of EmbeddedFile
        Associated files, embedded in name order.
    when : datetime
        Creation and modification date of the embedded files (UTC).
    requested : list, optional
        Receives every URL the document tried to load (loading any is an error).
    """
    import logging

    weasyprint = import_weasyprint()

    # WeasyPrint logs every SVG presentation property of inline SVG as an unknown CSS
    # property (the SVG renderer still applies them); thousands of lines, no information.
    log = logging.getLogger("weasyprint")
    level = log.level
    log.setLevel(logging.ERROR)
    mimetypes.add_type("application/toml", ".toml")  # unknown to Python 3.11
    fetcher = refusing_fetcher(requested)
    with _source_date_epoch(when):
        doc = weasyprint.HTML(string=html, url_fetcher=fetcher, base_url=None)
        attachments = [
            weasyprint.Attachment(string=f.data, name=f.name, description=f.description,
                                  created=when, modified=when, relationship=f.relationship,
                                  url_fetcher=fetcher)
            for f in sorted(files, key=lambda f: f.name)
        ]
        try:
            rendered = doc.render()
            return rendered.write_pdf(pdf_variant="pdf/a-3b", attachments=attachments,
                                      finisher=_finish, uncompressed_pdf=False)
        finally:
            log.setLevel(level)


def warm_up() -> None:
    """Render a tiny page with the report's fonts once, so that font configuration and
    loading are done before the real report (and shared by processes forked after it)."""
    page = ('<p style="font-family: DejaVu Sans">a <b>b</b> <i>c</i></p>'
            '<pre>d</pre>')
    html_to_pdf(page, [], dt.datetime(2000, 1, 1, tzinfo=dt.UTC))
