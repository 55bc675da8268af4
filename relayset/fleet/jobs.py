"""Which studies a batch computes: every study in a folder, or every row of a line register.

A line register is a CSV or Excel (.xlsx) table with one row per line. Its columns:

``study`` (required)
    path of the study file, relative to the register's folder or absolute;
``philosophy`` (optional)
    a setting-philosophy file that replaces the study's ``study.philosophy``;
``status`` (optional)
    draft / for review / approved, replacing the study's ``study.status``.

A row with an override is computed from an *effective study file*: the study's text with the
overridden keys replaced (comments kept), written beside the outputs, so the archived input is
exactly what was computed and its hash matches.
"""

from __future__ import annotations

import hashlib
import os
import re
import tomllib
from dataclasses import dataclass
from pathlib import Path

from relayset.errors import InputError

REGISTER_SUFFIXES = (".csv", ".xlsx")
REGISTER_COLUMNS = ("study", "philosophy", "status")
STATUSES = ("draft", "for review", "approved")


@dataclass(frozen=True)
class Job:
    """One line of the fleet, as found."""

    label: str  #: how the line is named in messages (the path as written, or the row)
    path: Path  #: the study file
    status: str | None = None  #: status override from the register
    philosophy: Path | None = None  #: philosophy override from the register (absolute)
    error: InputError | None = None  #: why the row is unusable


@dataclass(frozen=True)
class PlannedJob:
    """A job ready to compute: the bytes it will compute from and where its outputs go."""

    job: Job
    study_path: Path  #: the file the pipeline reads (the study, or its effective copy)
    effective: bytes | None  #: the effective study text when the register overrides keys
    sha256: str  #: SHA-256 of the bytes the pipeline will parse
    stem: str  #: output file stem ``<line_id>_rev<revision>``


def safe_stem(line_id: str, revision: str) -> str:
    """The output file stem ``<line_id>_rev<revision>`` (the report's naming rule)."""
    from relayset.report.context import safe_stem as report_stem

    return report_stem(line_id, revision)


# --------------------------------------------------------------------------- finding the jobs
def _is_study(path: Path) -> bool:
    """A TOML file is a study when it names the study schema or has a [study] table.

    Files that parse and are neither (philosophy files) are left out; files that do not parse
    are kept, so that a broken study is reported rather than silently skipped.
    """
    try:
        data = tomllib.loads(path.read_text("utf-8"))
    except (tomllib.TOMLDecodeError, UnicodeDecodeError, OSError):
        return True
    schema = data.get("schema")
    return (isinstance(schema, str) and schema.startswith("relayset-study")) or "study" in data


def find_jobs(path: str | Path) -> list[Job]:
    """The jobs of a batch: a folder (recursively) or a line register (.csv / .xlsx).

    Raises
    ------
    InputError
        The path does not exist, or the register as a whole is unusable (not readable, a
        required column missing). A bad row is a job with ``error`` set instead.
    """
    p = Path(path)
    if p.is_dir():
        files = sorted(f for f in p.rglob("*.toml")
                       if f.is_file() and not any(part.startswith(".")
                                                  for part in f.relative_to(p).parts))
        return [Job(label=str(f), path=f) for f in files if _is_study(f)]
    if not p.exists():
        raise InputError("no such folder or line register", source=str(path))
    if p.suffix.lower() not in REGISTER_SUFFIXES:
        raise InputError("give a folder of study files or a line register (.csv or .xlsx)",
                         source=str(path))
    rows = _read_register(p)
    return [_row_job(p, n, row) for n, row in rows]


def _read_register(path: Path) -> list[tuple[int, dict[str, str]]]:
    """The rows of a register as (row number as a spreadsheet shows it, {column: text})."""
    if path.suffix.lower() == ".csv":
        import csv

        try:
            text = path.read_text("utf-8-sig")
        except UnicodeDecodeError:
            raise InputError("is not UTF-8 text", source=str(path)) from None
        table = list(csv.reader(text.splitlines()))
    else:
        table = _xlsx_table(path)
    if not table:
        raise InputError("the register is empty (a header row with a 'study' column is needed)",
                         source=str(path))
    header = [str(h or "").strip().lower() for h in table[0]]
    if "study" not in header:
        raise InputError("required column is missing (columns: study, and optionally "
                         "philosophy, status)", field="study", source=str(path))
    out = []
    for n, cells in enumerate(table[1:], start=2):
        row = {h: ("" if c is None else str(c)).strip()
               for h, c in zip(header, cells, strict=False) if h}
        if any(row.values()):
            out.append((n, row))
    return out


def _xlsx_table(path: Path) -> list[list[object]]:
    """The first worksheet of an .xlsx file as rows of cell values."""
    import zipfile

    try:
        from openpyxl import load_workbook
    except ImportError:
        raise InputError("reading .xlsx registers needs openpyxl (pip install openpyxl)",
                         source=str(path)) from None
    try:
        wb = load_workbook(path, read_only=True, data_only=True)
    except (zipfile.BadZipFile, KeyError, OSError, ValueError):
        raise InputError("is not a readable .xlsx workbook", source=str(path)) from None
    try:
        ws = wb.worksheets[0]
        return [list(r) for r in ws.iter_rows(values_only=True)]
    finally:
        wb.close()


def _path_problem(text: str, base: Path) -> tuple[Path | None, str | None]:
    """The path a register cell names (relative to the register's folder), or why it names
    none: a cell is hostile text, so every way a path can fail is that row's error."""
    if "\x00" in text:
        return None, "is not a usable file name (it contains a NUL character)"
    try:
        q = Path(text).expanduser()
    except RuntimeError:  # "~someone" with no such user, or no home folder
        return None, "names the home folder of a user that does not exist here"
    q = q if q.is_absolute() else base / q
    try:
        return (q, None) if q.is_file() else (q, "file does not exist")
    except (OSError, ValueError) as exc:  # a name too long for the file system, ...
        return None, f"is not a usable file name ({getattr(exc, 'strerror', None) or exc})"


def _row_job(register: Path, n: int, row: dict[str, str]) -> Job:
    label = f"{register}: row {n}"
    base = register.parent

    study = row.get("study", "")
    if not study:
        return Job(label, register, error=InputError("is empty", field="study",
                                                     source=label))
    path, problem = _path_problem(study, base)
    if problem is not None:
        rule = "study file does not exist" if problem == "file does not exist" else problem
        return Job(label, path or register, error=InputError(rule, field="study", value=study,
                                                             source=label))
    assert path is not None
    status = row.get("status") or None
    if status is not None and status not in STATUSES:
        return Job(label, path, error=InputError(
            "must be one of " + ", ".join(STATUSES), field="status", value=status,
            source=label))
    phil_text = row.get("philosophy") or None
    philosophy = None
    if phil_text is not None:
        phil, problem = _path_problem(phil_text, base)
        if problem is not None or phil is None:
            rule = ("philosophy file does not exist" if problem == "file does not exist"
                    else str(problem))
            return Job(label, path, error=InputError(rule, field="philosophy", value=phil_text,
                                                     source=label))
        philosophy = phil.resolve()
    return Job(label, path, status=status, philosophy=philosophy)


# --------------------------------------------------------------------------- planning a job
def plan_job(job: Job, out_dir: Path) -> PlannedJob:
    """Read the study once, apply the register's overrides, and name the outputs.

    Raises
    ------
    InputError
        The study cannot be read or is not TOML (the pipeline would say the same).
    """
    from relayset.inputs.study_file import loads_toml, read_bytes

    if job.error is not None:
        raise job.error
    src = str(job.path)
    data = read_bytes(job.path)
    tables = loads_toml(data, src)
    info = tables.get("study") if isinstance(tables.get("study"), dict) else {}
    stem = safe_stem(str(info.get("line_id", job.path.stem)), str(info.get("revision", "A")))
    if job.status is None and job.philosophy is None:
        return PlannedJob(job, job.path, None, hashlib.sha256(data).hexdigest(), stem)
    target = out_dir / "studies" / f"{stem}.toml"
    # the same decoding as the study reader: UTF-8 with an optional byte-order mark
    try:
        text = effective_study_text(data.decode("utf-8-sig"), job.path.parent.resolve(),
                                    target.parent, status=job.status,
                                    philosophy=job.philosophy)
    except InputError as exc:
        raise exc.located(source=src) from None
    try:
        eff = text.encode("utf-8")
    except UnicodeEncodeError:  # a folder or file name that is not UTF-8
        raise InputError("a path the register's override writes into the study copy is not "
                         "UTF-8 text (rename the file or folder)", field="philosophy",
                         source=job.label) from None
    return PlannedJob(job, target, eff, hashlib.sha256(eff).hexdigest(), stem)


def _toml_str(value: str) -> str:
    """A TOML basic string (controls written as \\uXXXX escapes, which TOML requires)."""
    body = value.replace("\\", "\\\\").replace('"', '\\"')
    return '"' + re.sub(r"[\x00-\x1f\x7f]", lambda m: f"\\u{ord(m.group(0)):04x}", body) + '"'


def effective_study_text(text: str, study_dir: Path, new_dir: Path, *,
                         status: str | None, philosophy: Path | None) -> str:
    """The study's text with ``study.status`` / ``study.philosophy`` replaced.

    The copy lives in ``new_dir``, so the relative paths it names (the philosophy and adjacent
    line studies) are rewritten relative to it. Comments and layout are kept: the edit is
    textual, and the result is parsed again to prove that only those values changed.
    """
    before = tomllib.loads(text)

    def rel(p: Path) -> str:
        return Path(os.path.relpath(p, new_dir.resolve())).as_posix()

    def moved(value: str) -> str:
        q = Path(value)
        return value if q.is_absolute() else rel(study_dir / q)

    keys: dict[str, str] = {}
    if status is not None:
        keys["status"] = status
    old_phil = (before.get("study") or {}).get("philosophy", "default")
    if philosophy is not None:
        keys["philosophy"] = rel(philosophy)
    elif old_phil != "default":
        keys["philosophy"] = moved(old_phil)

    lines = text.splitlines(keepends=True)
    table = re.compile(r"""\s*\[\s*(study|"study"|'study')\s*\]\s*(#.*)?$""")  # key quoted or not
    head = next((i for i, ln in enumerate(lines) if table.match(ln)), None)
    if head is None:
        lines.append("\n[study]\n")
        head = len(lines) - 1
    end = next((i for i in range(head + 1, len(lines)) if re.match(r"\s*\[", lines[i])),
               len(lines))
    for key, value in keys.items():
        pat = re.compile(rf"""\s*({key}|"{key}"|'{key}')\s*=""")  # bare or quoted key
        hit = next((i for i in range(head + 1, end) if pat.match(lines[i])), None)
        new = f"{key} = {_toml_str(value)}  # set by the line register\n"
        if hit is None:
            lines.insert(head + 1, new)
            end += 1
        else:
            lines[hit] = new
    out = "".join(lines)
    # adjacent / behind line studies named by a relative path
    out = re.sub(r"""((?:\bstudy|"study"|'study')\s*=\s*)"([^"\n]+)(")""",
                 lambda m: m.group(1) + _toml_str(moved(m.group(2))), out)
    prof = (before.get("relay") or {}).get("profile")
    from relayset.inputs.profile import is_shipped_name, with_profile

    if (isinstance(prof, str) and not Path(prof).is_absolute()
            and not is_shipped_name(prof)):  # a relay profile file, too

        try:
            out = with_profile(out, moved(prof))
        except ValueError:
            raise InputError("the register's overrides could not be applied to this "
                             "study's text", field="relay.profile", source=str(study_dir)
                             ) from None
    try:
        after = tomllib.loads(out)
    except tomllib.TOMLDecodeError:  # the textual edit met a layout it does not handle
        after = None
    expect = dict(before.get("study") or {})
    expect.update(keys)
    # the proof: the study table as intended, everything else equal, and every line study
    # still naming the same file from its new folder
    if (after is None or after.get("study") != expect
            or _line_studies_at(after, new_dir) != _line_studies_at(before, study_dir)):
        raise InputError("the register's overrides could not be applied to this study's text",
                         field="study", source=str(study_dir))
    return out


def _line_studies_at(tables: dict, folder: Path) -> dict:
    """``tables`` without [study], with each line study's path made absolute from ``folder``."""
    out = {k: v for k, v in tables.items() if k != "study"}
    relay = out.get("relay")
    if (isinstance(relay, dict) and isinstance(relay.get("profile"), str)
            and relay["profile"].lower().endswith(".toml")):
        out["relay"] = dict(relay, profile=os.path.normpath(folder / relay["profile"]))
    for key in ("adjacent_lines", "lines_behind"):
        entries = out.get(key)
        if isinstance(entries, list):
            out[key] = [dict(e, study=os.path.normpath(folder / e["study"]))
                        if isinstance(e, dict) and isinstance(e.get("study"), str) else e
                        for e in entries]
    return out
