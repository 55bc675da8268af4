"""Signatures per role: sign -> verify -> tamper after signing, with a throw-away CA.

The CA and the signers' certificates are made here with `cryptography` (EC P-256, SHA-256)
and live in the test's temporary folder only; nothing of it is shipped.
"""

from __future__ import annotations

import datetime as dt

import pytest

from relayset.cli import main
from relayset.resources import demo_lines_dir

NAME = "kessler_oxbow_115kv.toml"


@pytest.fixture(scope="module")
def report(tmp_path_factory):
    folder = tmp_path_factory.mktemp("sign")
    study = folder / NAME
    study.write_bytes((demo_lines_dir() / NAME).read_bytes())
    assert main(["report", str(study), "-o", str(folder / "out")]) in (0, 3)
    return next((folder / "out").glob("*.pdf"))


def test_report_carries_an_empty_signature_field_per_role(report):
    """Fields any PDF reader that signs can fill (read back with pypdf)."""
    from pypdf import PdfReader

    fields = PdfReader(report).get_fields()
    sig = {name: f for name, f in fields.items() if f.get("/FT") == "/Sig"}
    assert set(sig) == {"relayset_prepared", "relayset_checked", "relayset_approved"}
    assert all("/V" not in f for f in sig.values())  # empty: nobody has signed


# ------------------------------------------------------------------------- with pyHanko
def _ca(folder, cn="Throw-away test CA"):
    """A CA and two signers (checker, approver): PEM files in ``folder``."""
    from cryptography import x509
    from cryptography.hazmat.primitives import hashes, serialization
    from cryptography.hazmat.primitives.asymmetric import ec
    from cryptography.x509.oid import NameOID

    now = dt.datetime.now(dt.UTC)

    def name(text):
        return x509.Name([x509.NameAttribute(NameOID.COMMON_NAME, text)])

    def usage(**on):
        keys = ("digital_signature", "content_commitment", "key_encipherment",
                "data_encipherment", "key_agreement", "key_cert_sign", "crl_sign",
                "encipher_only", "decipher_only")
        return x509.KeyUsage(**{k: on.get(k, False) for k in keys})

    def cert(subject, key, issuer_key, serial, ca):
        b = (x509.CertificateBuilder().subject_name(name(subject)).issuer_name(name(cn))
             .public_key(key.public_key()).serial_number(serial)
             .not_valid_before(now - dt.timedelta(days=1))
             .not_valid_after(now + dt.timedelta(days=30)))
        if ca:
            b = (b.add_extension(x509.BasicConstraints(ca=True, path_length=None), True)
                 .add_extension(usage(key_cert_sign=True, crl_sign=True), True))
        else:
            b = b.add_extension(usage(digital_signature=True, content_commitment=True), True)
        return b.sign(issuer_key, hashes.SHA256())

    folder.mkdir(parents=True, exist_ok=True)
    ca_key = ec.generate_private_key(ec.SECP256R1())
    files = {"ca": folder / "ca.pem"}
    files["ca"].write_bytes(cert(cn, ca_key, ca_key, 1, True).public_bytes(
        serialization.Encoding.PEM))
    for serial, who in enumerate(("Casey Checker", "Avery Approver"), start=2):
        key = ec.generate_private_key(ec.SECP256R1())
        tag = who.split()[1].lower()
        files[f"{tag}.key"] = folder / f"{tag}.key"
        files[f"{tag}.pem"] = folder / f"{tag}.pem"
        files[f"{tag}.key"].write_bytes(key.private_bytes(
            serialization.Encoding.PEM, serialization.PrivateFormat.PKCS8,
            serialization.NoEncryption()))
        files[f"{tag}.pem"].write_bytes(cert(who, key, ca_key, serial, False).public_bytes(
            serialization.Encoding.PEM))
    return files


@pytest.fixture(scope="module")
def signed(report, tmp_path_factory):
    """The report signed as checked, then as approved, with the exact command line."""
    pytest.importorskip("pyhanko", reason="signing needs relayset[sign]")
    pytest.importorskip("cryptography")
    folder = tmp_path_factory.mktemp("signed")
    ca = _ca(folder / "ca")
    one, two = folder / "checked.pdf", folder / "approved.pdf"
    assert main(["sign", str(report), "--role", "checked", "--key", str(ca["checker.key"]),
                 "--cert", str(ca["checker.pem"]), "-o", str(one)]) == 0
    assert main(["sign", str(one), "--role", "approved", "--key", str(ca["approver.key"]),
                 "--cert", str(ca["approver.pem"]), "-o", str(two)]) == 0
    return {"ca": ca, "checked": one, "approved": two, "folder": folder}


def _verify(pdf, capsys, *trust):
    code = main(["verify", str(pdf), *(a for t in trust for a in ("--trust", str(t)))])
    return code, capsys.readouterr().out


def test_signed_twice_verifies_with_roles_signers_and_status(signed, capsys):
    code, out = _verify(signed["approved"], capsys, signed["ca"]["ca"])
    assert code == 0, out
    assert "signed status: approved" in out
    checked = next(ln for ln in out.splitlines() if "signature checked" in ln)
    approved = next(ln for ln in out.splitlines() if "signature approved" in ln)
    assert "ok" in checked and "Casey Checker" in checked
    assert "changes after it: signatures only" in checked  # the later signature is accepted
    assert "ok" in approved and "Avery Approver" in approved
    assert "covers the whole file" in approved and "chains to the trust anchor" in approved
    assert "updates after the report was written: 2, each a signature" in out


def test_signed_file_keeps_pdfa_and_attachments(signed, report):
    pikepdf = pytest.importorskip("pikepdf")
    data = signed["approved"].read_bytes()
    assert data.startswith(report.read_bytes())  # incremental: the report as written in front
    with pikepdf.open(signed["approved"]) as pdf:
        assert pdf.open_metadata().pdfa_status == "3B"
        assert sorted(pdf.attachments) == sorted(pikepdf.open(report).attachments)


def test_checked_only_is_not_approved(signed, capsys):
    code, out = _verify(signed["checked"], capsys, signed["ca"]["ca"])
    assert code == 0 and "signed status: checked" in out


def test_another_trust_anchor_fails(signed, capsys):
    other = _ca(signed["folder"] / "other", cn="Another CA")
    code, out = _verify(signed["approved"], capsys, other["ca"])
    assert code == 1
    assert "does NOT chain to the trust anchor" in out
    assert "signed status: not signed" in out


def test_change_after_signing_is_refused(signed, tmp_path, capsys):
    """An update appended after the signatures (a new page content) is named; the
    signatures themselves stay intact but see 'other changes' after them."""
    from pypdf import PdfWriter
    from pypdf.generic import ArrayObject, DecodedStreamObject, NameObject

    w = PdfWriter(str(signed["approved"]), incremental=True)
    page = w.pages[0]
    s = DecodedStreamObject()
    s.set_data(b"q 1 1 1 rg 50 50 200 30 re f Q")
    old = page["/Contents"]
    page[NameObject("/Contents")] = ArrayObject(
        [*(old.get_object() if isinstance(old.get_object(), list) else [old]),
         w._add_object(s)])
    bad = tmp_path / "after.pdf"
    with open(bad, "wb") as f:
        w.write(f)
    code, out = _verify(bad, capsys, signed["ca"]["ca"])
    assert code == 1
    assert "revision 4" in out and "is not a signature" in out
    approved = next(ln for ln in out.splitlines() if "signature approved" in ln)
    assert "FAIL" in approved and "other changes" in approved


def test_flipped_byte_in_signed_range_is_not_intact(signed, tmp_path, capsys):
    data = bytearray(signed["approved"].read_bytes())
    i = data.index(b"(WeasyPrint")  # the producer of the report as written: signed by both
    data[i + 1] = ord("V")
    bad = tmp_path / "flipped.pdf"
    bad.write_bytes(bytes(data))
    code, out = _verify(bad, capsys, signed["ca"]["ca"])
    assert code == 1
    for role in ("checked", "approved"):
        line = next(ln for ln in out.splitlines() if f"signature {role}" in ln)
        assert "FAIL" in line and "NOT intact" in line


def test_a_report_with_failed_checks_cannot_be_signed_approved(tmp_path, capsys):
    # Rule of this project: a report whose pages say "not approved for use" because checks
    # failed must not carry an approval signature (README, signing). The 230 kV demo fails
    # checks on purpose; "checked" may still be signed (the reviewer records the review).
    pytest.importorskip("pyhanko")
    pytest.importorskip("cryptography")
    demo = "elsford_fallowby_230kv_double.toml"
    folder = tmp_path / "study"
    folder.mkdir()
    (folder / demo).write_bytes((demo_lines_dir() / demo).read_bytes())
    import shutil

    shutil.copytree(demo_lines_dir() / "philosophies", folder / "philosophies")
    assert main(["report", str(folder / demo), "-o", str(tmp_path / "out")]) == 3
    pdf = next((tmp_path / "out").glob("*.pdf"))
    ca = _ca(tmp_path / "ca")
    out = tmp_path / "approved.pdf"
    capsys.readouterr()
    assert main(["sign", str(pdf), "--role", "approved", "--key", str(ca["approver.key"]),
                 "--cert", str(ca["approver.pem"]), "-o", str(out)]) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1 and "failed check" in err and not out.exists()
    assert main(["sign", str(pdf), "--role", "checked", "--key", str(ca["checker.key"]),
                 "--cert", str(ca["checker.pem"]), "-o", str(out)]) == 0
