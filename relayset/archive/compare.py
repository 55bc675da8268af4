"""Compare two revisions of a line (study files or archived report PDFs): what changed in the
inputs, the results and the settings, with the percent change of each number."""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path
from typing import Any

from relayset.archive.quantities import close, numeric_leaves, pct_change, results_quantities

#: Two values are "unchanged" within this relative tolerance (round-off, not engineering).
RTOL = 1e-9


@dataclass(frozen=True)
class Change:
    section: str  #: inputs / results / settings
    name: str
    old: Any
    new: Any
    pct: float | None  #: percent change of the magnitude [%]


@dataclass(frozen=True)
class Comparison:
    old: dict[str, Any]  #: results JSON of the old revision
    new: dict[str, Any]
    old_source: str
    new_source: str
    changes: tuple[Change, ...]


def load_results(path: str | Path) -> dict[str, Any]:
    """The results JSON of a study file (computed now) or of an archived report (embedded)."""
    import json

    p = Path(path)
    if p.suffix.lower() == ".pdf":
        from relayset.archive.pdf import read_archive

        return read_archive(p).results()
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
        if va != vb:
            changes.append(Change("inputs", k, va, vb, pct_change(va, vb)))
    qa = {(s, n): v for s, n, v in results_quantities(a)}
    qb = {(s, n): v for s, n, v in results_quantities(b)}
    for key in list(qa) + [k for k in qb if k not in qa]:
        va, vb = qa.get(key), qb.get(key)
        if va is None or vb is None or not close(vb, va, RTOL, 0.0):
            changes.append(Change(key[0], key[1], va, vb, pct_change(va, vb)))
    return Comparison(a, b, str(old), str(new), tuple(changes))


def show(v: Any) -> str:
    """A value as the change table prints it."""
    if v is None:
        return "–"
    if isinstance(v, complex):
        return f"{v.real:.4g} {'+' if v.imag >= 0 else '−'} j{abs(v.imag):.4g}"
    if isinstance(v, float):
        return f"{v:.5g}"
    return str(v)


def _pct(p: float | None) -> str:
    return "" if p is None else f"{p:+.2f} %"


def format_table(c: Comparison) -> str:
    """The change table as text."""
    ida, idb = c.old.get("study", {}), c.new.get("study", {})
    head = (f"{ida.get('line_id')} rev {ida.get('revision')} -> {idb.get('line_id')} rev "
            f"{idb.get('revision')}: {len(c.changes)} change(s)\n")
    rows = [("section", "quantity", "old", "new", "change")]
    rows += [(ch.section, ch.name, show(ch.old), show(ch.new), _pct(ch.pct)) for ch in c.changes]
    w = [min(max(len(r[i]) for r in rows), 60) for i in range(5)]
    lines = ["  ".join(str(r[i])[:60].ljust(w[i]) if i < 4 else str(r[i]).rjust(w[i])
                       for i in range(5)).rstrip() for r in rows]
    lines.insert(1, "  ".join("-" * x for x in w))
    return head + "\n".join(lines) + "\n"


def change_sheet_html(c: Comparison) -> str:
    """The revision change sheet as self-contained HTML (template ``fleet/changes.html.j2``)."""
    import jinja2

    from relayset.resources import templates_dir
    from relayset.results.study import CAUTION

    env = jinja2.Environment(loader=jinja2.FileSystemLoader(str(templates_dir())),
                             autoescape=True, undefined=jinja2.StrictUndefined)
    sections = {s: [(ch.name, show(ch.old), show(ch.new), _pct(ch.pct))
                    for ch in c.changes if ch.section == s]
                for s in ("inputs", "results", "settings")}
    return env.get_template("fleet/changes.html.j2").render(
        old=c.old.get("study", {}), new=c.new.get("study", {}), old_source=c.old_source,
        new_source=c.new_source, old_sha=c.old.get("source_sha256"),
        new_sha=c.new.get("source_sha256"), sections=sections, caution=CAUTION,
        count=len(c.changes))


def write_change_sheet(c: Comparison, out_dir: str | Path) -> list[Path]:
    """Write ``<line_id>_rev<old>_to_rev<new>_changes.html`` and ``.pdf`` (atomically)."""
    import datetime as dt
    import os

    from relayset.io import write_atomic
    from relayset.report.context import document_date, safe_stem
    from relayset.report.pdf import html_to_pdf

    html = change_sheet_html(c)
    when = document_date(c.new.get("study", {}), dict(os.environ)).when
    pdf = html_to_pdf(html, [], when if isinstance(when, dt.datetime) else dt.datetime.now(dt.UTC))
    stem = (safe_stem(str(c.old["study"].get("line_id")), str(c.old["study"].get("revision")))
            + "_to_rev" + safe_stem("x", str(c.new["study"].get("revision"))).split("_rev", 1)[1]
            + "_changes")
    out = Path(out_dir)
    write_atomic(out / f"{stem}.html", html)
    write_atomic(out / f"{stem}.pdf", pdf)
    return [out / f"{stem}.html", out / f"{stem}.pdf"]
