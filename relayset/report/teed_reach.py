"""The console summary of a three-terminal (teed) line's reach study (``relayset reach``),
rendered from templates/teed_reach.txt.j2; substation names and cases are printed as the
study gives them, made visible (:func:`relayset.io.visible_text`)."""

from __future__ import annotations

from relayset.io import visible_text
from relayset.report.text import _context, render


def teed_reach_summary(results, unit_system: str = "si") -> str:
    """The reach-study tables of a teed line (``results.teed_reach``)."""
    return render("teed_reach.txt.j2", **_context(results, unit_system), vt=visible_text)
