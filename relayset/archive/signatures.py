"""Digital signatures of a report, one per role (prepared, checked, approved), with pyHanko.

pyHanko is a dependency of relayset (imported only here, when a signature is made or
read); where it is missing relayset still makes and verifies reports and says so where a
signature would need it.

A report carries three empty signature fields, one per role (:data:`FIELDS`), so that
relayset or any PDF reader that signs can fill them. A signature is an incremental update
(PAdES baseline, ``/ETSI.CAdES.detached``): the report as written, its PDF/A-3b declaration
and its embedded files stay as they are, byte for byte, in front of it.

How status follows from the signatures (also in the README): a report is *approved* only when
the approved field carries a signature that is intact, whose certificate chains to a trust
anchor given to verify, and after which nothing but later signatures was added. The pages
print the study's status (a draft report says "Not approved for use"); verify prints the
signed status next to it. Signing time is the signer's own clock: no trusted timestamp
(that needs a time-stamping authority, which relayset does not call).
"""

from __future__ import annotations

import io
from dataclasses import dataclass
from pathlib import Path

from relayset.errors import InputError

#: The roles in the order they sign, and the name of each one's field in the PDF.
ROLES = ("prepared", "checked", "approved")
FIELDS = {role: f"relayset_{role}" for role in ROLES}


@dataclass(frozen=True)
class Signature:
    """One signature of a report, as verify found it."""

    field: str
    role: str | None  #: the role its field stands for, None for another field
    signer: str  #: the signer's name from the certificate (common name)
    time: str  #: the signer's own clock, UTC, ISO 8601
    intact: bool  #: the signed bytes are unchanged
    valid: bool  #: the cryptographic signature is valid
    trusted: bool | None  #: chains to a trust anchor (None: no anchor given)
    whole: bool  #: it covers the whole file (nothing follows it)
    later_changes: str  #: what was added after it: "none", "signatures only", or what else
    revision_end: int  #: where the revision it signs ends [byte offset]

    @property
    def ok(self) -> bool:
        return (self.intact and self.valid and self.trusted is not False
                and self.later_changes in ("none", "signatures only"))


def available() -> bool:
    """pyHanko is installed."""
    import importlib.util

    return importlib.util.find_spec("pyhanko") is not None


def _quiet() -> None:
    """pyHanko logs validation warnings with tracebacks: verify prints its own verdict."""
    import logging

    for name in ("pyhanko", "pyhanko_certvalidator", "fontTools"):
        logging.getLogger(name).setLevel(logging.CRITICAL)


def read_signatures(data: bytes, trust: list[Path] | None = None) -> list[Signature]:
    """Every signature of the PDF ``data``, validated (pyHanko must be installed)."""
    _quiet()
    from pyhanko.keys import load_cert_from_pemder
    from pyhanko.pdf_utils.reader import PdfFileReader
    from pyhanko.sign.diff_analysis import ModificationLevel
    from pyhanko.sign.validation import validate_pdf_signature
    from pyhanko.sign.validation.status import SignatureCoverageLevel
    from pyhanko_certvalidator import ValidationContext

    roots = [load_cert_from_pemder(str(p)) for p in trust or []]
    reader = PdfFileReader(io.BytesIO(data), strict=False)
    role_of = {v: k for k, v in FIELDS.items()}
    out = []
    for sig in reader.embedded_signatures:
        ctx = ValidationContext(trust_roots=roots, allow_fetching=False) if roots else None
        try:
            status = validate_pdf_signature(sig, ctx) if ctx else validate_pdf_signature(sig)
        except Exception as exc:  # the library's, on a damaged or hostile signature
            out.append(Signature(
                field=str(sig.field_name), role=role_of.get(sig.field_name),
                signer=f"(unreadable: {str(exc)[:100]})", time="(unknown)", intact=False,
                valid=False, trusted=False if roots else None, whole=False,
                later_changes="(unknown)", revision_end=_revision_end(sig)))
            continue
        level = status.modification_level
        if status.coverage == SignatureCoverageLevel.ENTIRE_FILE:
            later = "none"
        elif level is not None and level <= ModificationLevel.FORM_FILLING:
            later = "signatures only"
        else:
            later = f"other changes ({level.name.lower().replace('_', ' ') if level else '?'})"
        cert = status.signing_cert
        name = cert.subject.native.get("common_name", cert.subject.human_friendly)
        when = status.signer_reported_dt
        out.append(Signature(
            field=sig.field_name, role=role_of.get(sig.field_name), signer=str(name),
            time=when.strftime("%Y-%m-%dT%H:%M:%SZ") if when else "(none given)",
            intact=bool(status.intact), valid=bool(status.valid),
            trusted=bool(status.trusted) if roots else None,
            whole=status.coverage == SignatureCoverageLevel.ENTIRE_FILE,
            later_changes=later, revision_end=_revision_end(sig)))
    return out


def _revision_end(sig) -> int:
    """Where the revision a signature signs ends: the end of its byte range [offset]."""
    try:
        br = sig.sig_object["/ByteRange"]
        return int(br[2]) + int(br[3])
    except Exception:  # a malformed byte range: it ends nowhere a revision ends
        return -1


def signed_status(sigs: list[Signature]) -> str:
    """The status the signatures give: the last role, in order, whose signature holds
    (intact, valid, nothing but signatures after it) and chains to the trust anchor; without
    a trust anchor the status says that it was not checked."""
    held = {s.role for s in sigs if s.role is not None and s.ok}
    status = "not signed"
    for role in ROLES:
        if role in held:
            status = role
    if status != "not signed" and any(s.trusted is None for s in sigs):
        status += " (no trust anchor given: who signed is not established)"
    return status


def _font_file() -> str | None:
    """An OpenType font file to draw the signature's appearance with (fontconfig's DejaVu
    Sans, the report's own font), None when there is none."""
    import shutil
    import subprocess

    if shutil.which("fc-match") is None:
        return None
    try:
        out = subprocess.run(["fc-match", "-f", "%{file}", "DejaVu Sans"], check=True,
                             capture_output=True, text=True, timeout=10).stdout.strip()
    except (OSError, subprocess.SubprocessError):
        return None
    return out if out.lower().endswith((".ttf", ".otf")) and Path(out).is_file() else None


def _stamp(role: str):
    """The visible appearance of a signature: signer and time, in an embedded font (PDF/A
    allows no other)."""
    from pyhanko import stamp
    from pyhanko.pdf_utils.font.opentype import GlyphAccumulatorFactory
    from pyhanko.pdf_utils.text import TextBoxStyle

    font = _font_file()
    if font is None:
        raise InputError("no DejaVu Sans font file found (fontconfig): the signature's "
                         "appearance must embed its font to keep PDF/A", field="sign",
                         source="command line")
    return stamp.TextStampStyle(
        stamp_text=f"{role.capitalize()}: %(signer)s\n%(ts)s", border_width=0,
        text_box_style=TextBoxStyle(font=GlyphAccumulatorFactory(font), font_size=7))


def sign_report(src: Path, out: Path, *, role: str, key: Path, cert: Path,
                chain: list[Path] | None = None, passphrase: bytes | None = None) -> None:
    """Sign the ``role`` field of the report ``src`` into ``out`` (an incremental update)."""
    if role not in FIELDS:
        raise InputError(f"must be one of {', '.join(ROLES)}", field="--role", value=role,
                         source="command line")
    if not available():
        raise InputError("signing needs pyHanko: pip install pyhanko",
                         field="sign", source="command line")
    _quiet()
    from pyhanko.pdf_utils.incremental_writer import IncrementalPdfFileWriter
    from pyhanko.sign import fields, signers

    from relayset import io as rio

    try:
        data = src.read_bytes()
    except OSError as exc:
        raise InputError(f"cannot be read ({exc.strerror})", source=str(src)) from None
    if data[:5] != b"%PDF-":
        raise InputError("is not a PDF", source=str(src))
    if role == "approved":
        # Approval is refused while the report carries failed checks (the report's one
        # count: accepted deviations are not failures): its pages say "not approved for
        # use", and a signature must not say otherwise.
        from relayset.archive.pdf import read_archive
        from relayset.report.failures import failed_checks

        failed = failed_checks(read_archive(src, text=False).parsed)
        if failed:
            f = failed[0]
            raise InputError(
                f"cannot be signed: the report has {len(failed)} failed check(s) (first: "
                f"{f.end} {f.zone} {f.check_id}); resolve them, or record each as an accepted "
                "deviation in the study, and issue a new report", field="--role",
                value=role, source=str(src))
    for what, p in (("--key", key), ("--cert", cert), *(("--chain", c) for c in chain or [])):
        if not Path(p).is_file():
            raise InputError("file does not exist", field=what, value=str(p),
                             source="command line")
    signer = signers.SimpleSigner.load(str(key), str(cert),
                                       ca_chain_files=tuple(str(c) for c in chain or ()),
                                       key_passphrase=passphrase)
    if signer is None:
        raise InputError("the key and certificate could not be read (PEM or DER; a key with "
                         "a passphrase needs --passphrase-file)", field="--key",
                         value=str(key), source="command line")
    try:
        w = IncrementalPdfFileWriter(io.BytesIO(data), strict=False)
    except Exception as exc:  # the library's own errors on a malformed PDF
        raise InputError(f"is not a readable PDF ({exc})", source=str(src)) from None
    name = FIELDS[role]
    existing = {f for f, *_ in fields.enumerate_sig_fields(w)}
    if name not in existing:
        fields.append_signature_field(w, fields.SigFieldSpec(sig_field_name=name, on_page=0))
    meta = signers.PdfSignatureMetadata(
        field_name=name, reason=f"{role} (relayset report)", md_algorithm="sha256",
        subfilter=fields.SigSeedSubFilter.PADES)
    try:
        pdf_signer = signers.PdfSigner(meta, signer=signer, stamp_style=_stamp(role))
        buf = pdf_signer.sign_pdf(w)
    except Exception as exc:  # e.g. the field is signed already
        raise InputError(f"cannot be signed as {role} ({exc})", source=str(src)) from None
    rio.write_atomic(out, buf.getvalue())
