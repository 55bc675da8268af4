"""Zone 2: the line plus part of the shortest adjacent line, or a percentage of the line."""

from __future__ import annotations

from relayset.settings.context import RuleContext, pick_line
from relayset.settings.infeed import infeed


def zone2_target(w: RuleContext) -> tuple[complex, str, complex]:
    i, z2 = w.inputs, w.ph.zone2
    zl = i.z1_line_ohm
    by_line = z2.reach_pct / 100 * zl
    text_line = f"{z2.reach_pct:g} % of the line"
    if z2.rule == "line_pct":
        return by_line, text_line, 1.0 + 0j
    if not i.adjacent_lines:
        return by_line, text_line + " (no adjacent line given)", 1.0 + 0j
    k, k_text = infeed(w, "zone2", z2.infeed, z2.infeed_factor)
    name, zadj = pick_line(i.adjacent_lines, longest=False)
    by_adj = zl + k * (z2.adjacent_pct / 100) * zadj
    text_adj = f"line + {z2.adjacent_pct:g} % of the shortest adjacent line '{name}', {k_text}"
    if z2.rule == "line_plus_adjacent" or abs(by_adj) >= abs(by_line):
        suffix = f" (longer than {text_line})" if z2.rule == "max_of_both" else ""
        return by_adj, text_adj + suffix, k
    return by_line, f"{text_line} (longer than {text_adj})", 1.0 + 0j
