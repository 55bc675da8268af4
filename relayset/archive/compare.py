"""Compare two revisions of a line (study files or archived report PDFs): what changed in the
inputs, the results and the settings, with the percent change of each number."""

from __future__ import annotations

import cmath
import math
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from relayset.archive.quantities import (
    STUDY_KEYS,
    close,
    numeric_leaves,
    pct_change,
    results_quantities,
)

#: Display tolerance: a number is listed as changed only when it moved by more than
#: ``DISPLAY_ATOL + DISPLAY_RTOL * |old|`` (complex values: the length of the vector
#: difference). One part in a million is below every digit a setting or result is printed
#: with; the absolute part keeps values that are zero in theory (round-off of 1e-14) off the
#: sheet. The sheet states both.
DISPLAY_RTOL = 1e-6
DISPLAY_ATOL = 1e-9  #: in the quantity's own unit
#: Significant digits of a percent change or an angle change.
CHANGE_DIGITS = 3
#: Significant digits of an old or new value (more when needed to tell them apart).
VALUE_DIGITS = 5
#: Longest file stem of a change sheet [characters] (line id and revisions come from the
#: compared files, an archived report's among them).
MAX_STEM = 120


@dataclass(frozen=True)
class Change:
    section: str  #: inputs / results / settings
    name: str
    old: Any
    new: Any
    pct: float | None  #: percent change of the magnitude [%] (None: not shown)
    angle_change_deg: float | None = None  #: change of the angle of a complex value [deg]


@dataclass(frozen=True)
class Comparison:
    old: dict[str, Any]  #: results JSON of the old revision
    new: dict[str, Any]
    old_source: str
    new_source: str
    changes: tuple[Change, ...]
    warnings: tuple[str, ...] = ()  #: the same revision twice, two different lines

#: The sections of a comparison, in print order.
SECTIONS = ("inputs", "philosophy", "results", "settings", "checks")


def _tol(old: Any) -> float:
    return DISPLAY_ATOL + DISPLAY_RTOL * abs(old)


def numeric_change(section: str, name: str, old: Any, new: Any) -> Change | None:
    """The change of one quantity, or None when it is within the display tolerance.

    A real number gets its signed percent change. A complex one gets the percent change of
    its magnitude when the magnitude moved by more than the tolerance, and the change of its
    angle when the rotation moved it by more than the tolerance (|Δθ| |old| > tolerance). A
    value appearing, disappearing or starting from zero has no percent change.
    """
    if old is None or new is None:
        return None if old is new else Change(section, name, old, new, None)
    if close(new, old, DISPLAY_RTOL, DISPLAY_ATOL):
        return None
    pct = dangle = None
    if abs(old) > DISPLAY_ATOL:
        moved = abs(abs(new) - abs(old))  # along the value
        turned = 0.0  # across it, by rotation
        d = 0.0
        if isinstance(old, complex) and isinstance(new, complex) and abs(new) > DISPLAY_ATOL:
            d = cmath.phase(new / old)  # in (-pi, pi]: the shorter way round
            turned = abs(d) * abs(old)
        # each part when it alone exceeds the tolerance; the larger one when only together
        # they do (the vector difference is about the root sum of their squares)
        either = moved <= _tol(old) and turned <= _tol(old)
        if not isinstance(old, complex) and not isinstance(new, complex):
            # a real number: the signed change, so that +0.5 -> -0.5 reads -200 %, not 0 %
            pct = (new - old) / abs(old) * 100.0
        elif moved > _tol(old) or (either and moved >= turned):
            pct = pct_change(old, new)
        if turned > _tol(old) or (either and turned > moved):
            dangle = math.degrees(d)
    return Change(section, name, old, new, pct, dangle)


def load_results(path: str | Path) -> dict[str, Any]:
    """The results JSON of a study file (computed now) or of an archived report (embedded)."""
    import json

    p = Path(path)
    if p.suffix.lower() == ".pdf":
        from relayset.archive.pdf import read_archive

        return read_archive(p, text=False).results()
    from relayset.io import to_json
    from relayset.studies import pipeline

    return json.loads(to_json(pipeline.run(p, settings=True).to_dict()))


def compare(old: str | Path, new: str | Path) -> Comparison:
    """Every changed input, result and setting between two revisions."""
    a, b = load_results(old), load_results(new)
    changes: list[Change] = []
    ia, ib = numeric_leaves(a.get("input", {})), numeric_leaves(b.get("input", {}))
    for k in sorted(ia.keys() | ib.keys()):
        va, vb = ia.get(k), ib.get(k)
        if va != vb:  # inputs are the user's text (quantities with units): changed or not
            changes.append(Change("inputs", k, va, vb, None))
    qa = {(s, n): v for s, n, v in results_quantities(a)}
    qb = {(s, n): v for s, n, v in results_quantities(b)}
    for key in list(qa) + [k for k in qb if k not in qa]:
        ch = numeric_change(key[0], key[1], qa.get(key), qb.get(key))
        if ch is not None:
            changes.append(ch)
    changes += _philosophy_changes(a.get("philosophy"), b.get("philosophy"))
    changes += _check_changes(a, b)
    order = {s: i for i, s in enumerate(SECTIONS)}
    changes.sort(key=lambda ch: order.get(ch.section, len(SECTIONS)))  # stable within one
    return Comparison(a, b, str(old), str(new), tuple(changes), _warnings(a, b))


def _warnings(a: dict[str, Any], b: dict[str, Any]) -> tuple[str, ...]:
    """What makes the comparison suspect: two different lines, or one revision twice."""
    ia, ib = a.get("study") or {}, b.get("study") or {}
    out = []
    if ia.get("line_id") != ib.get("line_id"):
        out.append(f"the two files are different lines ({ia.get('line_id')} and "
                   f"{ib.get('line_id')}): the changes compare two lines, not two revisions")
    elif ia.get("revision") == ib.get("revision"):
        same = a.get("source_sha256") == b.get("source_sha256")
        out.append(f"both files are revision {ia.get('revision')} of {ia.get('line_id')}"
                   + (" from the same study file" if same else
                      " but from different study files: a revision changed without a new "
                      "revision name"))
    return tuple(_printable(w) for w in out)


def _philosophy_changes(pa: Any, pb: Any) -> list[Change]:
    """The setting philosophy applied (every value, defaults filled in), key by key:
    numbers within the display tolerance are not changes, other values as written."""
    la = numeric_leaves(pa) if isinstance(pa, dict) else {}
    lb = numeric_leaves(pb) if isinstance(pb, dict) else {}
    out = []
    for k in sorted(la.keys() | lb.keys()):
        va, vb = la.get(k), lb.get(k)
        if isinstance(va, int | float | complex) and isinstance(vb, int | float | complex) \
                and not isinstance(va, bool) and not isinstance(vb, bool):
            ch = numeric_change("philosophy", k, va, vb)
            if ch is not None:
                out.append(ch)
        elif va != vb:
            out.append(Change("philosophy", k, va, vb, None))
    if not (isinstance(pa, dict) and isinstance(pb, dict)) and pa != pb:
        return out or [Change("philosophy", "philosophy", "none" if pa is None else "given",
                              "none" if pb is None else "given", None)]
    return out


def _check_results(d: dict[str, Any]) -> dict[str, str]:
    """Every check of a results JSON and its result ("pass", "FAIL", "reported")."""
    out: dict[str, str] = {}
    for end in (d.get("settings") or {}).get("ends", []) or []:
        for zone, z in (end.get("zones") or {}).items():
            for c in z.get("checks", []) or []:
                key = f"{end.get('end')} {zone} {c.get('check_id')} (setting rule)"
                out[key] = "pass" if c.get("passed") else "FAIL"
    for end in (d.get("verification") or {}).get("ends", []) or []:
        for c in end.get("checks", []) or []:
            key = f"{end.get('end')} {c.get('zone')} {c.get('check_id')} (verification)"
            out[key] = str(c.get("result"))
    return out


def _check_changes(a: dict[str, Any], b: dict[str, Any]) -> list[Change]:
    """Checks whose result changed, appeared or went away."""
    ca, cb = _check_results(a), _check_results(b)
    return [Change("checks", k, ca.get(k, "–"), cb.get(k, "–"), None)
            for k in list(ca) + [k for k in cb if k not in ca] if ca.get(k) != cb.get(k)]


def _digits(old: Any, new: Any) -> int:
    """Significant digits that tell ``old`` and ``new`` apart (at least VALUE_DIGITS)."""
    try:
        rel = abs(abs(new) - abs(old)) / max(abs(old), abs(new))
    except (TypeError, ZeroDivisionError):
        return VALUE_DIGITS
    if rel <= 0:
        return VALUE_DIGITS
    return max(VALUE_DIGITS, min(12, math.ceil(-math.log10(rel)) + 2))


def _signed(x: float, digits: int = CHANGE_DIGITS) -> str:
    """``x`` with its sign and ``digits`` significant digits, never in exponent form."""
    if x == 0:
        return "0"
    decimals = max(0, digits - 1 - math.floor(math.log10(abs(x))))
    return f"{x:+.{decimals}f}".replace("-", "−")


def show(v: Any, digits: int = VALUE_DIGITS, angle_decimals: int = 2) -> str:
    """A value as the change sheet prints it: a complex value as magnitude ∠ angle (as
    ``relayset settings`` prints reaches), a real one with ``digits`` significant digits."""
    if v is None:
        return "–"
    if isinstance(v, complex):
        ang = f"{math.degrees(cmath.phase(v)):.{angle_decimals}f}".replace("-", "−")
        return f"{abs(v):.{digits}g} ∠ {ang}°"
    if isinstance(v, float):
        return f"{v:.{digits}g}".replace("-", "−")
    return str(v)


def shown(ch: Change) -> tuple[str, str, str]:
    """Old value, new value and change of one row, as printed."""
    n = _digits(ch.old, ch.new) if ch.pct is not None else VALUE_DIGITS
    a = 2
    if ch.angle_change_deg is not None:
        a = max(2, min(10, math.ceil(-math.log10(abs(ch.angle_change_deg))) + 1))
    parts = []
    if ch.pct is not None:
        parts.append(f"{_signed(ch.pct)} %")
    if ch.angle_change_deg is not None:
        parts.append(f"∠ {_signed(ch.angle_change_deg)}°")
    return show(ch.old, n, a), show(ch.new, n, a), ", ".join(parts)


def tolerance_text() -> str:
    """How the sheet chooses and shows its rows (printed on the sheet and under the table)."""
    return (f"A number is listed when it moved by more than {DISPLAY_RTOL:g} of its old "
            f"value plus {DISPLAY_ATOL:g} in its own unit (complex values: the vector "
            f"difference); smaller differences are round-off, below every printed digit. "
            f"Change is the percent change of the magnitude and, for complex values "
            f"(magnitude ∠ angle), the change of angle, to {CHANGE_DIGITS} significant "
            f"digits; inputs, text values of the philosophy and check results are compared "
            f"as written.")


def format_table(c: Comparison) -> str:
    """The change table as text."""
    ida, idb = c.old.get("study", {}), c.new.get("study", {})
    head = _printable(f"{ida.get('line_id')} rev {ida.get('revision')} -> "
                      f"{idb.get('line_id')} rev {idb.get('revision')}: "
                      f"{len(c.changes)} change(s)") + "\n"
    rows = [("section", "quantity", "old", "new", "change")]
    rows += [(ch.section, ch.name, *shown(ch)) for ch in c.changes]
    w = [min(max(len(r[i]) for r in rows), 60) for i in range(5)]
    rows = [tuple(_printable(str(x)) for x in r) for r in rows]  # text of the files: no
    # control character reaches the terminal
    lines = ["  ".join(str(r[i])[:60].ljust(w[i]) if i < 4 else str(r[i]).rjust(w[i])
                       for i in range(5)).rstrip() for r in rows]
    lines.insert(1, "  ".join("-" * x for x in w))
    warn = "".join(f"WARNING: {w}\n" for w in c.warnings)
    return warn + head + "\n".join(lines) + "\n" + tolerance_text() + "\n"


def _printable(text: str) -> str:
    return "".join(ch if ch.isprintable() else "?" for ch in text)


def _identity(d: dict[str, Any]) -> dict[str, Any]:
    """The study identity of a results JSON, every key the sheet prints present."""
    return dict.fromkeys(STUDY_KEYS, "") | dict(d.get("study") or {})


def change_sheet_html(c: Comparison) -> str:
    """The revision change sheet as self-contained HTML (template ``fleet/changes.html.j2``)."""
    import jinja2

    from relayset.report.context import NOT_VERIFIED, STATUS_TEXT
    from relayset.resources import templates_dir
    from relayset.results.study import CAUTION

    env = jinja2.Environment(loader=jinja2.FileSystemLoader(str(templates_dir())),
                             autoescape=True, undefined=jinja2.StrictUndefined)
    sections = {s: [(ch.name, *shown(ch)) for ch in c.changes if ch.section == s]
                for s in SECTIONS}
    old, new = _identity(c.old), _identity(c.new)
    verdict = (c.new.get("verification") or {}).get("verdict") or NOT_VERIFIED
    # as on the report: only an approved revision without failed checks is for use
    not_for_use = new.get("status") != "approved" or verdict == "failed checks"
    return env.get_template("fleet/changes.html.j2").render(
        old=old, new=new, old_source=c.old_source,
        new_source=c.new_source, old_sha=c.old.get("source_sha256"),
        new_sha=c.new.get("source_sha256"), sections=sections, caution=CAUTION,
        count=len(c.changes), tolerance=tolerance_text(), verdict=verdict,
        warnings=c.warnings,
        old_verdict=(c.old.get("verification") or {}).get("verdict") or NOT_VERIFIED,
        status_text=STATUS_TEXT.get(new.get("status"), str(new.get("status"))),
        not_for_use=not_for_use)


def write_change_sheet(c: Comparison, out_dir: str | Path) -> list[Path]:
    """Write ``<line_id>_rev<old>_to_rev<new>_changes.html`` and ``.pdf`` (atomically)."""
    import datetime as dt
    import os

    from relayset.io import write_atomic
    from relayset.report.context import document_date, safe_stem
    from relayset.report.pdf import html_to_pdf

    html = change_sheet_html(c)
    when = document_date(_identity(c.new), dict(os.environ)).when
    pdf = html_to_pdf(html, [], when if isinstance(when, dt.datetime) else dt.datetime.now(dt.UTC))
    old, new = _identity(c.old), _identity(c.new)
    stem = (safe_stem(str(old.get("line_id")), str(old.get("revision")))
            + "_to_rev" + safe_stem("x", str(new.get("revision"))).split("_rev", 1)[1]
            )[:MAX_STEM] + "_changes"
    out = Path(out_dir)
    write_atomic(out / f"{stem}.html", html)
    write_atomic(out / f"{stem}.pdf", pdf)
    return [out / f"{stem}.html", out / f"{stem}.pdf"]
