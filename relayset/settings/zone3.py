"""Zone 3: the line plus part of the longest adjacent line, or a percentage of the line."""

from __future__ import annotations

from relayset.settings.context import RuleContext, pick_line
from relayset.settings.infeed import infeed


def zone3_target(w: RuleContext) -> tuple[complex, str, complex]:
    i, z3 = w.inputs, w.ph.zone3
    zl = i.z1_line_ohm
    text_line = f"{z3.reach_pct:g} % of the line"
    if z3.rule == "line_pct":
        return z3.reach_pct / 100 * zl, text_line, 1.0 + 0j
    if not i.adjacent_lines:
        return z3.reach_pct / 100 * zl, text_line + " (no adjacent line given)", 1.0 + 0j
    k, k_text = infeed(w, "zone3", z3.infeed, z3.infeed_factor)
    name, zadj = pick_line(i.adjacent_lines, longest=True)
    return (zl + k * (z3.adjacent_pct / 100) * zadj,
            f"line + {z3.adjacent_pct:g} % of the longest adjacent line '{name}', {k_text}", k)
