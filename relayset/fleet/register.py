"""The register of results: one row per relay end of each line, as CSV, .xlsx and HTML.

Every value is read from a study's results JSON (``StudyResults.to_dict()``), so a line
computed now and a line skipped because its report is up to date give the same row.
"""

from __future__ import annotations

import functools
import math
from pathlib import Path
from typing import Any

from relayset.io import spreadsheet_text, visible_text
from relayset.report.failures import count_at

#: Register columns, in order, with what each holds (the HTML index and README use these).
COLUMNS: tuple[tuple[str, str], ...] = (
    ("line_id", "line ID"),
    ("revision", "revision"),
    ("status", "status (draft / for review / approved)"),
    ("title", "title"),
    ("end", "relay end"),
    ("remote_end", "remote end"),
    ("z1_r_ohm", "line Z1, resistance, primary [ohm]"),
    ("z1_x_ohm", "line Z1, reactance, primary [ohm]"),
    ("z0_r_ohm", "line Z0, resistance, primary [ohm]"),
    ("z0_x_ohm", "line Z0, reactance, primary [ohm]"),
    ("k0_magnitude", "k0 used by the relay, magnitude [-]"),
    ("k0_angle_deg", "k0 used by the relay, angle [deg]"),
    ("zone1_primary_ohm", "zone 1 reach, primary [ohm]"),
    ("zone2_primary_ohm", "zone 2 reach, primary [ohm]"),
    ("zone3_primary_ohm", "zone 3 reach, primary [ohm]"),
    ("reverse_primary_ohm", "reverse zone reach, primary [ohm]"),
    ("zone1_secondary_ohm", "zone 1 reach, secondary [ohm]"),
    ("zone2_secondary_ohm", "zone 2 reach, secondary [ohm]"),
    ("zone3_secondary_ohm", "zone 3 reach, secondary [ohm]"),
    ("reverse_secondary_ohm", "reverse zone reach, secondary [ohm]"),
    ("overreach_at_remote_bus_pct",
     "worst bolted overreach at the remote bus, actual plan, relay as set [%]"),
    ("overreach_on_line_pct", "worst bolted overreach along the line, actual plan [%]"),
    ("underreach_on_line_pct",
     "worst bolted underreach along the line, actual plan [%] (negative: the relay sees "
     "the fault farther away)"),
    ("verification", "verification verdict of the study (all ends)"),
    ("end_verification", "verification of this relay end (pass / FAIL)"),
    ("failed_checks", "failed checks at this end: setting rules and verification, as the "
     "report counts them"),
    ("warnings", "number of setting warnings at this end"),
    ("input_sha256", "SHA-256 of the study file computed"),
    ("relayset_version", "relayset version"),
    ("report_file", "report (PDF)"),
    ("results_file", "results (JSON)"),
    ("study_file", "study file"),
    ("error", "why the line was not computed"),
)
NAMES = tuple(c for c, _ in COLUMNS)
ZONES = ("zone1", "zone2", "zone3", "reverse")
NOT_VERIFIED = "not verified"


def _re_im(z: Any) -> tuple[float | None, float | None]:
    if isinstance(z, list | tuple) and len(z) == 2:
        return float(z[0]), float(z[1])
    return None, None


def actual_plan(reach_end: dict[str, Any]) -> dict[str, Any]:
    """The reach study's actual-plan arrangement of one end, as the relay is set.

    The reach study lists the actual plan first with the relay's own mutual compensation (the
    arrangement its zone 1 recommendation comes from); a double circuit may list it again
    without mutual compensation, for comparison.
    """
    return next((a for a in reach_end.get("arrangements", [])
                 if a.get("arrangement") == "actual_plan"), {})


def rows_from_results(d: dict[str, Any], *, results_file: str,
                      report_file: str | None) -> list[dict[str, Any]]:
    """Register rows of one study (one per relay end) from its results JSON.

    Parameters
    ----------
    d : dict
        ``StudyResults.to_dict()`` of a study computed with settings.
    results_file, report_file : str
        Output file names, relative to the register.
    """
    s = d.get("study", {})
    c = d["parameters"]["circuits"][0]
    z1r, z1x = _re_im(c.get("z1_ohm"))
    z0r, z0x = _re_im(c.get("z0_ohm"))
    k0 = (d.get("relay") or {}).get("k0_set") or {}
    ver = d.get("verification") or {}
    teed = d.get("teed") or {}  # a three-terminal line: its verdict and zones
    verdict = ver.get("verdict") or teed.get("verification") or NOT_VERIFIED
    ver_ends = {e["end"]: e for e in ver.get("ends", [])}
    reach_ends = {e["end"]: e for e in (d.get("reach_study") or {}).get("ends", [])}
    base = {
        "line_id": s.get("line_id"), "revision": s.get("revision"), "status": s.get("status"),
        "title": s.get("title"),
        "z1_r_ohm": z1r, "z1_x_ohm": z1x, "z0_r_ohm": z0r, "z0_x_ohm": z0x,
        "k0_magnitude": k0.get("magnitude"), "k0_angle_deg": k0.get("angle_deg"),
        "verification": verdict, "input_sha256": d.get("source_sha256"),
        "relayset_version": d.get("relayset_version"), "report_file": report_file,
        "results_file": results_file, "study_file": d.get("source_file"), "error": None,
    }
    rows = []
    for end in (d.get("settings") or {}).get("ends", []):
        row = dict(base, end=end["end"], remote_end=end.get("remote_end"),
                   warnings=len(end.get("warnings", [])))
        for z in ZONES:
            zone = end.get("zones", {}).get(z) or {}
            row[f"{z}_primary_ohm"] = zone.get("reach_primary_magnitude_ohm")
            row[f"{z}_secondary_ohm"] = zone.get("reach_secondary_magnitude_ohm")
        plan = actual_plan(reach_ends.get(end["end"]) or {})
        row["overreach_at_remote_bus_pct"] = plan.get("worst_bolted_overreach_at_remote_bus_pct")
        row["overreach_on_line_pct"] = plan.get("worst_bolted_overreach_on_line_pct")
        row["underreach_on_line_pct"] = plan.get("worst_bolted_underreach_on_line_pct")
        ve = ver_ends.get(end["end"])
        row["end_verification"] = NOT_VERIFIED if ve is None else ve.get("result")
        row["failed_checks"] = count_at(d, str(end["end"]))  # the report's count
        rows.append({k: row.get(k) for k in NAMES})
    for end in teed.get("ends", []):  # zone 1 and zone 2 per end; no reach error columns
        n = count_at(d, str(end["end"]))
        row = dict(base, end=end["end"], remote_end=", ".join(
            b for b in teed.get("buses", []) if b != end["end"]), warnings=0,
            end_verification="FAIL" if any(c.get("passed") is False for c in
                                           end.get("verification_checks", [])) else "pass",
            failed_checks=n)
        for z in ("zone1", "zone2"):
            row[f"{z}_primary_ohm"] = abs(complex(*end[f"{z}_ohm"]))
            row[f"{z}_secondary_ohm"] = abs(complex(*end[f"{z}_secondary_ohm"]))
        rows.append({k: row.get(k) for k in NAMES})
    return rows


def failed_row(label: str, error: str, study_file: str | None = None) -> dict[str, Any]:
    """The register row of a line that was not computed."""
    row = dict.fromkeys(NAMES)
    row.update(line_id=None, study_file=study_file or label, error=error)
    return row


#: Longest text in an .xlsx cell [characters] (the file format's limit).
XLSX_CELL_CHARS = 32767


def safe_value(v: Any) -> str | int | float | bool | None:
    """A register value as the register holds it: a finite number, or one line of visible
    text (:func:`relayset.io.visible_text`); anything else (NaN, inf) is empty."""
    if v is None or isinstance(v, bool | int):
        return v
    if isinstance(v, float):
        return v if math.isfinite(v) else None
    return visible_text(v if isinstance(v, str) else str(v))


def safe_rows(rows: list[dict[str, Any]]) -> list[dict[str, Any]]:
    """Every row with only the register's columns, each value passed through :func:`safe_value`."""
    out = []
    for r in rows:
        values = tuple(r.get(k) for k in NAMES)
        try:
            safe = _safe_values(values)
        except TypeError:  # a value that cannot be hashed: convert without the cache
            safe = tuple(safe_value(v) for v in values)
        out.append(dict(zip(NAMES, safe, strict=True)))
    return out


@functools.lru_cache(maxsize=1 << 16)
def _safe_values(values: tuple) -> tuple:
    # the batch rewrites the register after every line: each row is converted once
    return tuple(safe_value(v) for v in values)


def _cell(v: Any) -> str:
    """A CSV cell: numbers with the 12 significant digits of ``settings --csv``
    (:data:`relayset.io.CSV_DIGITS`), text visible and never a formula."""
    from relayset.io import CSV_DIGITS

    v = safe_value(v)
    if v is None:
        return ""
    if isinstance(v, bool | int):
        return repr(v)
    if isinstance(v, float):
        return format(v, f".{CSV_DIGITS}g")
    return spreadsheet_text(v)


def _xlsx_cell(v: Any) -> str | int | float | bool | None:
    """An .xlsx cell value: numbers stay numbers, text is neutralised like the CSV's."""
    v = safe_value(v)
    if isinstance(v, str):
        v = spreadsheet_text(v)
        if len(v) > XLSX_CELL_CHARS:
            from relayset.errors import shorten

            v = shorten(v, XLSX_CELL_CHARS)
    return v


def check_rows(rows: list[dict[str, Any]]) -> None:
    """Raise if a row could not be written in every register format (one line's problem,
    found before the row joins the register)."""
    safe = safe_rows(rows)
    register_csv(safe).encode("utf-8")
    for r in safe:
        for k in NAMES:
            _xlsx_cell(r[k])
            _fmt(r[k]).encode("utf-8")


def register_csv(rows: list[dict[str, Any]]) -> str:
    """The register as CSV text, written like ``settings --csv``: one header row, numbers
    with 12 significant digits, lines ending in CR LF; the file is written with a
    byte-order mark (:func:`relayset.io.csv_bytes`) so that a spreadsheet reads Ω as Ω."""
    import csv
    import io

    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\r\n")
    w.writerow(NAMES)
    for r in rows:
        values = tuple(r.get(k) for k in NAMES)
        try:
            w.writerow(_csv_cells(values))
        except TypeError:  # a value that cannot be hashed: convert without the cache
            w.writerow([_cell(v) for v in values])
    return buf.getvalue()


@functools.lru_cache(maxsize=1 << 16)
def _csv_cells(values: tuple) -> list[str]:
    return [_cell(v) for v in values]


#: Number formats of the .xlsx columns, by the end of the column name (the printed
#: precision of the report: relayset.report.context.PRECISION); counts are whole numbers.
XLSX_FORMATS = (("_ohm", "0.000"), ("_pct", "0.00"), ("_deg", "0.0"), ("k0_magnitude", "0.000"),
                ("failed_checks", "0"), ("warnings", "0"))
#: Widest column of the .xlsx [characters].
XLSX_MAX_WIDTH = 48
#: The time the .xlsx says it was made and changed, and the time of its zip entries: fixed
#: (SOURCE_DATE_EPOCH when set), so that the same rows give the same bytes.
XLSX_EPOCH = "2000-01-01T00:00:00Z"


def _xlsx_format(name: str) -> str | None:
    return next((f for end, f in XLSX_FORMATS if name.endswith(end)), None)


def register_xlsx(rows: list[dict[str, Any]]) -> bytes:
    """The register as an .xlsx workbook: sheet "register", a bold header row with a filter,
    frozen header and first column, column widths from the contents, number formats at the
    report's precision (the cells keep full values), and the same bytes for the same rows.

    Text cells are written with the string data type, so no user text is ever a formula
    (and a leading ``= + - @`` is quoted as in the CSV).
    """
    import io

    from openpyxl import Workbook
    from openpyxl.styles import Alignment, Font
    from openpyxl.utils import get_column_letter

    wb = Workbook()
    ws = wb.active
    ws.title = "register"
    ws.append(list(NAMES))
    widths = [len(k) for k in NAMES]
    formats = [_xlsx_format(k) for k in NAMES]
    for i, r in enumerate(rows, start=2):
        for j, k in enumerate(NAMES, start=1):
            v = _xlsx_cell(r.get(k))
            if v is None:
                continue
            cell = ws.cell(row=i, column=j, value=v)
            if isinstance(v, str):
                cell.data_type = "s"  # openpyxl would take "=..." for a formula
                widths[j - 1] = max(widths[j - 1], len(v))
            elif isinstance(v, int | float) and not isinstance(v, bool):
                if formats[j - 1]:
                    cell.number_format = formats[j - 1]
                widths[j - 1] = max(widths[j - 1], 10)
    for j, cell in enumerate(ws[1], start=1):
        cell.font = Font(bold=True)
        cell.alignment = Alignment(wrap_text=True, vertical="top")
        ws.column_dimensions[get_column_letter(j)].width = min(widths[j - 1] + 2,
                                                               XLSX_MAX_WIDTH)
    ws.freeze_panes = "C2"  # the header and the line id / revision stay in view
    ws.auto_filter.ref = f"A1:{get_column_letter(len(NAMES))}{max(1, len(rows) + 1)}"
    buf = io.BytesIO()
    wb.save(buf)
    return _fixed_times(buf.getvalue())


def _fixed_times(data: bytes) -> bytes:
    """The workbook with its made/changed times and its zip entries' times fixed."""
    import datetime as dt
    import io
    import os
    import re
    import zipfile

    when = XLSX_EPOCH
    sde = os.environ.get("SOURCE_DATE_EPOCH", "").strip()
    if sde.isdigit():
        when = dt.datetime.fromtimestamp(int(sde), tz=dt.UTC).strftime("%Y-%m-%dT%H:%M:%SZ")
    stamp = tuple(int(x) for x in re.findall(r"\d+", when)[:6])
    stamp = (max(1980, stamp[0]), *stamp[1:])  # the zip format starts in 1980
    src = zipfile.ZipFile(io.BytesIO(data))
    out = io.BytesIO()
    with zipfile.ZipFile(out, "w", zipfile.ZIP_DEFLATED) as z:
        for info in src.infolist():
            body = src.read(info.filename)
            if info.filename == "docProps/core.xml":
                body = re.sub(rb"(<dcterms:(created|modified)[^>]*>)[^<]*(</dcterms:)",
                              rb"\g<1>" + when.encode() + rb"\g<3>", body)
            entry = zipfile.ZipInfo(info.filename, date_time=stamp)
            entry.compress_type = zipfile.ZIP_DEFLATED
            entry.external_attr = 0o600 << 16
            z.writestr(entry, body)
    return out.getvalue()


def _fmt(x: Any, digits: int = 3) -> str:
    if x is None:
        return "–"
    if isinstance(x, float):
        return f"{x:.{digits}f}" if math.isfinite(x) else "–"
    return str(x)


def register_html(rows: list[dict[str, Any]], *, title: str, skipped: int = 0) -> str:
    """The HTML index page: every line with its key values and a link to its report."""
    import jinja2

    from relayset.resources import templates_dir
    from relayset.results.study import CAUTION

    env = jinja2.Environment(loader=jinja2.FileSystemLoader(str(templates_dir())),
                             autoescape=True, undefined=jinja2.StrictUndefined)
    env.filters["n"] = _fmt
    done = [r for r in rows if not r.get("error")]
    failed = [r for r in rows if r.get("error")]
    lines = len({(r["line_id"], r["revision"]) for r in done})
    return env.get_template("fleet/index.html.j2").render(
        title=title, rows=done, failed=failed, lines=lines, caution=CAUTION,
        columns=dict(COLUMNS), skipped=skipped)


def write_register(out_dir: Path, rows: list[dict[str, Any]], *, title: str,
                   formats: tuple[str, ...] = ("csv", "xlsx", "html")) -> list[Path]:
    """Write the register beside the reports (atomically) and return the paths written.

    User text is made visible in every format (:func:`safe_value`) and neutralised in the
    spreadsheets (:func:`relayset.io.spreadsheet_text`); the HTML escapes markup.
    """
    from relayset.io import csv_bytes, write_atomic

    rows = sorted(safe_rows(rows),
                  key=lambda r: (r.get("error") is not None, str(r.get("line_id")),
                                 str(r.get("revision")), str(r.get("end")),
                                 str(r.get("study_file"))))
    written = []
    if "csv" in formats:
        write_atomic(out_dir / "register.csv", csv_bytes(register_csv(rows)))
        written.append(out_dir / "register.csv")
    if "xlsx" in formats:
        write_atomic(out_dir / "register.xlsx", register_xlsx(rows))
        written.append(out_dir / "register.xlsx")
    if "html" in formats:
        write_atomic(out_dir / "index.html", register_html(rows, title=visible_text(title)))
        written.append(out_dir / "index.html")
    return written
