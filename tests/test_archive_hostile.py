"""verify and compare on hostile PDFs: nothing written outside a private folder, one line
and exit code 2 for every malformed report, exit code 1 for a readable one that was changed.

The rules checked are the project's own (RULES.md: every file is hostile until read, names
inside a PDF never decide where we write, bad input is one line with exit code 2); no outside
source. The limits are relayset.archive.pdf's documented constants.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
import tempfile
import zlib

import pytest

from relayset.archive import pdf as archive_pdf
from relayset.cli import main
from relayset.resources import demo_lines_dir

pikepdf = pytest.importorskip("pikepdf", reason="pikepdf builds the hostile PDFs")

NAME = "kessler_oxbow_115kv.toml"


@pytest.fixture(scope="module")
def report(tmp_path_factory):
    """One real archived report PDF (study, results JSON, default philosophy embedded)."""
    from relayset.report.build import make_report
    from relayset.studies import pipeline

    folder = tmp_path_factory.mktemp("hostile")
    study = folder / NAME
    study.write_bytes((demo_lines_dir() / NAME).read_bytes())
    pdf = folder / "report.pdf"
    pdf.write_bytes(make_report(pipeline.run(study, settings=True)).pdf)
    return pdf


@pytest.fixture
def sandbox(tmp_path, monkeypatch):
    """An empty working folder and an empty temporary-files folder, watched by the tests."""
    cwd, tmp, outside = tmp_path / "cwd", tmp_path / "tmp", tmp_path / "outside"
    for d in (cwd, tmp, outside):
        d.mkdir()
    monkeypatch.chdir(cwd)
    monkeypatch.setattr(tempfile, "tempdir", str(tmp))
    return cwd, tmp, outside


def _tree(folder):
    return sorted(str(p.relative_to(folder)) for p in folder.rglob("*"))


def _study_name(pdf):
    return next(n for n in pdf.attachments if n.endswith(".toml")
                and not n.startswith("philosophy"))


def _results_name(pdf):
    return next(n for n in pdf.attachments if n.endswith(".results.json"))


def _edit(src, dst, change):
    """``dst``: ``src`` with ``change(pdf)`` applied (pikepdf)."""
    with pikepdf.open(src) as pdf:
        change(pdf)
        pdf.save(dst, stream_decode_level=pikepdf.StreamDecodeLevel.none)
    return dst


def _attach(pdf, name, data):
    pdf.attachments[name] = pikepdf.AttachedFileSpec(pdf, data, filename=name)


def _rename_study(name):
    """The study attachment embedded again under ``name`` (found by its being the only
    study-like TOML file)."""
    def change(pdf):
        old = _study_name(pdf)
        data = pdf.attachments[old].get_file().read_bytes()
        del pdf.attachments[old]
        _attach(pdf, name, data)
    return change


def _set_results(data: bytes):
    def change(pdf):
        _attach(pdf, _results_name(pdf), data)
    return change


def _edit_results(edit):
    def change(pdf):
        name = _results_name(pdf)
        d = json.loads(pdf.attachments[name].get_file().read_bytes())
        edit(d)
        _attach(pdf, name, json.dumps(d).encode())
    return change


def _one_line_error(code, err, pdf, expected=2):
    assert code == expected, err
    assert "Traceback" not in err
    lines = err.strip().splitlines()
    assert len(lines) == 1 and pdf.name in lines[0], err
    return lines[0]


def _verify(pdf, capsys):
    code = main(["verify", str(pdf)])
    return code, capsys.readouterr()


# --------------------------------------------------------------------------- writing
@pytest.mark.parametrize("kind", ["absolute", "dotdot", "backslash", "nul"])
def test_attachment_names_never_decide_where_verify_writes(report, sandbox, capsys, kind):
    cwd, tmp, outside = sandbox
    sentinel = outside / "sentinel.toml"
    sentinel.write_text("original = true\n")
    name = {"absolute": str(sentinel),  # an existing file: must not be overwritten
            "dotdot": "../../sentinel.toml",  # out of verify's temporary folder
            "backslash": "..\\x.toml",
            "nul": "study\x00.toml"}[kind]
    bad = _edit(report, outside / "bad.pdf", _rename_study(name))
    before = _tree(outside)
    code, cap = _verify(bad, capsys)
    _one_line_error(code, cap.err, bad)
    assert sentinel.read_text() == "original = true\n"
    assert _tree(outside) == before
    assert _tree(cwd) == [] and _tree(tmp) == []  # nothing left, nothing escaped


def test_verify_writes_only_its_own_names_in_a_private_folder(report, sandbox, capsys,
                                                               monkeypatch):
    """A well-formed report: the recomputation reads the embedded files from a folder only
    this user can open, under names verify chose, and removes it."""
    from relayset.studies import pipeline

    seen = []
    run = pipeline.run

    def spy(path, **kw):
        folder = os.path.dirname(path)
        seen.append((os.listdir(folder), os.stat(folder).st_mode & 0o777))
        return run(path, **kw)

    monkeypatch.setattr(pipeline, "run", spy)
    cwd, tmp, _ = sandbox
    code, cap = _verify(report, capsys)
    assert code == 0, cap.out
    # Default philosophy: the installed one; the demo's relay profile under verify's own
    # name (never the name the PDF gives it).
    assert [(sorted(names), mode) for names, mode in seen] == [
        (["profile.toml", "study.toml"], 0o700)]
    assert _tree(cwd) == [] and _tree(tmp) == []


def test_a_philosophy_path_in_the_study_never_decides_what_is_read(report, sandbox, capsys):
    """The embedded study names a philosophy outside (absolute path, different zone 2):
    the recomputation uses the embedded philosophy, so every named quantity still matches;
    the changed study fails its hashes (exit 1)."""
    cwd, tmp, outside = sandbox
    other = outside / "philosophy_default.toml"
    text = (archive_pdf.Path(__file__).parents[1] / "relayset" / "data"
            / "philosophy_default.toml").read_text()
    changed = text.replace("[zone2]", "[zone2]\n# outside copy", 1)
    assert changed != text
    other.write_text(changed.replace("reach_pct = 120.0", "reach_pct = 150.0", 1))
    assert other.read_text() != changed

    def change(pdf):
        name = _study_name(pdf)
        data = pdf.attachments[name].get_file().read_bytes()
        new = data.replace(b'philosophy = "default"', f'philosophy = "{other}"'.encode())
        assert new != data
        _attach(pdf, name, new)

    bad = _edit(report, outside / "phil.pdf", change)
    code, cap = _verify(bad, capsys)
    assert code == 1 and "Traceback" not in cap.err
    quantities = [ln for ln in cap.out.splitlines() if " settings: " in ln]
    assert quantities and not [ln for ln in quantities if "FAIL" in ln], cap.out
    assert _tree(cwd) == [] and _tree(tmp) == []


# --------------------------------------------------------------------------- malformed
def test_removed_study_attachment(report, sandbox, capsys):
    _, _, outside = sandbox

    def change(pdf):
        del pdf.attachments[_study_name(pdf)]

    bad = _edit(report, outside / "nostudy.pdf", change)
    code, cap = _verify(bad, capsys)
    # a report changed after it was written (exit 1), the missing file named on one line
    assert code == 1 and "Traceback" not in cap.err + cap.out
    assert [ln for ln in cap.out.splitlines() if "FAIL" in ln] == [
        next(ln for ln in cap.out.splitlines() if "embedded study file: not among" in ln)]
    # compare reads the results only: it still works, without a traceback
    assert main(["compare", str(bad), str(report)]) == 0
    assert "Traceback" not in capsys.readouterr().err


def _deep(n):
    return "[" * n + "]" * n


RESULTS = {
    "list": _set_results(b"[1, 2]"),
    "string": _set_results(b'"a report"'),
    "number": _set_results(b"5"),
    "not json": _set_results(b"{not json"),
    "nested 500": _edit_results(lambda d: d.update(deep=json.loads(_deep(500)))),
    "nested 1000": _set_results(_deep(1000).encode()),
    "nan": _set_results(b'{"study": {}, "x": NaN}'),
    "huge float": _set_results(b'{"study": {}, "x": 1e400}'),
    "huge int": _set_results(b'{"study": {}, "x": ' + b"9" * 400 + b"}"),
    "settings a string": _edit_results(lambda d: d.update(settings="x")),
    "settings ends a dict": _edit_results(lambda d: d["settings"].update(ends={"a": 1})),
    "reach ends of strings": _edit_results(lambda d: d["reach_study"].update(ends=["a"])),
    "end without name": _edit_results(lambda d: d["settings"]["ends"][0].pop("end")),
    "zone a number": _edit_results(lambda d: d["settings"]["ends"][0]["zones"].update(
        zone1=3)),
    "k0 a string": _edit_results(lambda d: d["parameters"]["circuits"][0].update(k0="x")),
    "circuits a string": _edit_results(lambda d: d["parameters"].update(circuits="x")),
    "study a string": _edit_results(lambda d: d.update(study="x")),
    "revision date garbage": _edit_results(lambda d: d["study"].update(
        revision_date="soon")),
    "verification a list": _edit_results(lambda d: d.update(verification=[1])),
}


@pytest.mark.parametrize("kind", list(RESULTS))
def test_results_json_of_another_shape(report, sandbox, capsys, kind):
    _, _, outside = sandbox
    bad = _edit(report, outside / "results.pdf", RESULTS[kind])
    code, cap = _verify(bad, capsys)
    _one_line_error(code, cap.err, bad)
    code = main(["compare", str(report), str(bad), "-o", str(outside)])
    _one_line_error(code, capsys.readouterr().err, bad)


def test_a_changed_digit_stays_a_mismatch_not_an_error(report, sandbox, capsys):
    """The limits refuse hostile files, not tampered readable ones: those fail (exit 1)."""
    _, _, outside = sandbox

    def edit(d):
        d["settings"]["ends"][0]["zones"]["zone1"]["reach_pct"] += 1.0

    bad = _edit(report, outside / "digit.pdf", _edit_results(edit))
    code, cap = _verify(bad, capsys)
    assert code == 1 and cap.err == "" and "DOES NOT MATCH" in cap.out


@pytest.mark.parametrize("depth", [100, 500])  # 500: beyond what tomllib can parse
def test_embedded_study_nested_too_deep(report, sandbox, capsys, depth):
    _, _, outside = sandbox

    def change(pdf):
        name = _study_name(pdf)
        data = pdf.attachments[name].get_file().read_bytes()
        _attach(pdf, name, b"deep = " + _deep(depth).encode() + b"\n" + data)

    bad = _edit(report, outside / "deeptoml.pdf", change)
    code, cap = _verify(bad, capsys)
    assert "nested more than" in _one_line_error(code, cap.err, bad)


def _bomb(n_mib: int) -> bytes:
    """zlib data that inflates to ``n_mib`` MiB of zeros: one compressed MiB (byte-aligned
    by a full flush, so it can be repeated) n times, then the end and the checksum."""
    c = zlib.compressobj(9)
    chunk = bytes(1 << 20)
    first = c.compress(chunk) + c.flush(zlib.Z_FULL_FLUSH)
    again = c.compress(chunk) + c.flush(zlib.Z_FULL_FLUSH)
    end = c.flush(zlib.Z_FINISH)[:-4]
    n = n_mib << 20
    adler = ((n % 65521) << 16) | 1  # Adler-32 of n zero bytes (RFC 1950): A = 1, B = n
    return first + again * (n_mib - 1) + end + adler.to_bytes(4, "big")


def test_bomb_builder_inflates_as_stated():
    assert zlib.decompress(_bomb(3)) == bytes(3 << 20)


def _attach_bomb(name, n_mib):
    def change(pdf):
        _attach(pdf, name, b"x")
        pdf.attachments[name].obj.EF.F.write(_bomb(n_mib), filter=pikepdf.Name.FlateDecode)
    return change


@pytest.mark.parametrize(("kind", "n_mib"), [
    ("2 GB bomb", 2048),
    # beyond relayset's per-stream limit, within the PDF library's default one (75 MB)
    ("one stream over the limit", archive_pdf.MAX_STREAM_BYTES // (1 << 20) + 8),
])
def test_compression_bomb(report, sandbox, capsys, kind, n_mib):
    _, _, outside = sandbox
    bad = _edit(report, outside / "bomb.pdf", _attach_bomb("bomb.bin", n_mib))
    assert bad.stat().st_size < 5_000_000
    code, cap = _verify(bad, capsys)
    _one_line_error(code, cap.err, bad)
    assert main(["compare", str(bad), str(report)]) == 2


def test_embedded_files_together_over_the_limit(report, sandbox, capsys):
    """Each stream within the per-stream limit, all together beyond the total."""
    _, _, outside = sandbox
    each = archive_pdf.MAX_STREAM_BYTES // (1 << 20) - 2
    count = archive_pdf.MAX_EMBEDDED_BYTES // (each << 20) + 1

    def change(pdf):
        for k in range(count):
            _attach_bomb(f"part{k}.bin", each)(pdf)

    bad = _edit(report, outside / "parts.pdf", change)
    code, cap = _verify(bad, capsys)
    assert "embedded files hold more than" in _one_line_error(code, cap.err, bad)


@pytest.mark.parametrize("where", ["info", "filespec", "page"])
def test_pdf_objects_nested_500_deep(report, sandbox, capsys, where):
    _, _, outside = sandbox

    def change(pdf):
        a = pikepdf.Array([1])
        for k in range(500):
            a = pikepdf.Array([a]) if k % 2 else pikepdf.Dictionary(A=a)
        if where == "info":
            pdf.docinfo["/Keywords"] = a
        elif where == "filespec":
            pdf.attachments[_study_name(pdf)].obj["/Desc"] = a
        else:
            pdf.pages[0].obj["/Resources"]["/Deep"] = a

    bad = _edit(report, outside / "deep.pdf", change)
    code, cap = _verify(bad, capsys)
    _one_line_error(code, cap.err, bad)


def test_not_a_pdf_and_truncated(report, sandbox, capsys):
    _, _, outside = sandbox
    text = outside / "notes.pdf"
    text.write_bytes(b"\x00\xff not a pdf at all")
    cut = outside / "cut.pdf"
    cut.write_bytes(report.read_bytes()[: report.stat().st_size // 2])
    for bad in (text, cut):
        code, cap = _verify(bad, capsys)
        _one_line_error(code, cap.err, bad)
        assert main(["compare", str(bad), str(report)]) == 2
        _one_line_error(2, capsys.readouterr().err, bad)


def test_command_line_process(report, tmp_path):
    """The same through the installed command line in its own process: one line, exit 2,
    nothing written in the working folder, the temporary folder or beside the sentinel."""
    cwd, tmp, outside = (tmp_path / n for n in ("cwd", "tmp", "outside"))
    for d in (cwd, tmp, outside):
        d.mkdir()
    sentinel = outside / "sentinel.toml"
    bad = _edit(report, outside / "bad.pdf", _rename_study(str(sentinel)))
    env = dict(os.environ, TMPDIR=str(tmp))
    done = subprocess.run([sys.executable, "-m", "relayset.cli", "verify", str(bad)],
                          cwd=cwd, env=env, capture_output=True, text=True, timeout=120)
    _one_line_error(done.returncode, done.stderr, bad)
    assert not sentinel.exists() and _tree(cwd) == [] and _tree(tmp) == []


def test_study_naming_its_philosophy_file_is_recomputed_from_the_embedded_one(tmp_path,
                                                                              capsys):
    """A report whose study names its philosophy by a relative path (a demo line): verify
    points the study at the embedded philosophy in its private folder and still matches,
    while a changed embedded philosophy moves the settings (exit 1)."""
    from relayset.report.build import make_report
    from relayset.studies import pipeline

    name = "elsford_fallowby_230kv_double.toml"
    study = tmp_path / "lines" / name
    (tmp_path / "lines" / "philosophies").mkdir(parents=True)
    study.write_bytes((demo_lines_dir() / name).read_bytes())
    for f in (demo_lines_dir() / "philosophies").glob("*.toml"):
        (tmp_path / "lines" / "philosophies" / f.name).write_bytes(f.read_bytes())
    good = tmp_path / "good.pdf"
    good.write_bytes(make_report(pipeline.run(study, settings=True)).pdf)
    code, cap = _verify(good, capsys)
    assert code == 0 and "MATCHES" in cap.out, cap.out

    def change(pdf):
        n = next(n for n in pdf.attachments if n != name and n.endswith(".toml"))
        data = pdf.attachments[n].get_file().read_bytes()
        new = data.replace(b"reach_pct = 120.0", b"reach_pct = 130.0", 1)
        assert new != data
        _attach(pdf, n, new)

    bad = _edit(good, tmp_path / "phil.pdf", change)
    code, cap = _verify(bad, capsys)
    assert code == 1 and "FAIL settings: " in cap.out and cap.err == ""


def test_compare_sheet_from_hostile_identity(report, sandbox, capsys):
    """An identity the sheet cannot print as it is (a 5000-character line id with a terminal
    escape, no title or status): the table shows no control character, the sheet's file
    names stay short, nothing raises."""
    _, _, outside = sandbox

    def edit(d):
        d["study"] = {"line_id": "\x1b[2J" + "L" * 5000, "revision": "B"}

    bad = _edit(report, outside / "ident.pdf", _edit_results(edit))
    out = outside / "sheet"
    out.mkdir()
    assert main(["compare", str(bad), str(report), "-o", str(out)]) == 0
    cap = capsys.readouterr()
    assert "Traceback" not in cap.err and "\x1b" not in cap.out
    names = sorted(p.name for p in out.iterdir())
    assert len(names) == 2 and all(len(n) < 200 for n in names), names
