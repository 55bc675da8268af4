"""Verify archived report PDFs (untouched, tampered, not a report) and compare revisions."""

from __future__ import annotations

import tomllib

import pytest
from numpy.testing import assert_allclose

from relayset.archive.compare import compare, format_table, write_change_sheet
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
    failed = {c.what for c in v.checks if not c.passed}
    assert "study file SHA-256 printed in the report" in failed
    assert "study file SHA-256 recorded in the results" in failed
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
    failed = {c.what for c in v.checks if not c.passed}
    assert "results JSON SHA-256 printed in the report" in failed
    assert any(f.startswith("all ") for f in failed)  # the recomputation disagrees too
    assert "study file SHA-256 printed in the report" not in failed


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
    data = tomllib.loads((demo_lines_dir() / NAME).read_text("utf-8"))
    old = tmp_path / "rev0.toml"
    old.write_text(dump_toml(data), "utf-8")
    data["study"]["revision"] = "1"
    data["conductor_types"]["phase"]["code"] = "556.5 ACSR"
    data["relay"]["ct_ratio"] = "800/5 A"
    new = tmp_path / "rev1.toml"
    new.write_text(dump_toml(data), "utf-8")
    c = compare(old, new)
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
