"""Zone 3: the line plus part of the longest adjacent line, or a percentage of the line,
capped at the philosophy's largest reach."""

from __future__ import annotations

from relayset.settings.context import RuleContext, pick_line
from relayset.settings.infeed import infeed


def zone3_target(w: RuleContext) -> tuple[complex, str, complex]:
    """Zone 3's target impedance [ohm], the rule text and the infeed factor used."""
    i, z3 = w.inputs, w.ph.zone3
    zl = i.z1_line_ohm
    text_line = f"{z3.reach_pct:g} % of the line"
    if z3.rule == "line_pct":
        return z3.reach_pct / 100 * zl, text_line, 1.0 + 0j
    if not i.adjacent_lines:
        return z3.reach_pct / 100 * zl, text_line + " (no adjacent line given)", 1.0 + 0j
    k, k_text = infeed(w, "zone3", z3.infeed, z3.infeed_factor)
    name, zadj = pick_line(i.adjacent_lines, longest=True)
    target = zl + k * (z3.adjacent_pct / 100) * zadj
    text = f"line + {z3.adjacent_pct:g} % of the longest adjacent line '{name}', {k_text}"
    asked_pct = 100 * abs(target) / abs(zl)
    if asked_pct > z3.max_reach_pct:
        # Capped along the line angle, so the characteristic still contains its target.
        w.warn(
            "zone3_capped",
            f"Zone 3 capped at {z3.max_reach_pct:g} % of the line: the rule ({text}) asks for "
            f"{asked_pct:.4g} %, so zone 3 does not back up the whole of '{name}' at that "
            "infeed",
            "rely on local backup (breaker-failure protection, a second main protection) for "
            "the far part of the adjacent line, or raise zone3.max_reach_pct after checking "
            "load and the next voltage level",
        )
        return (z3.max_reach_pct / 100 * zl,
                f"{z3.max_reach_pct:g} % of the line (cap; the rule, {text}, asks "
                f"{asked_pct:.4g} %)", k)
    return target, text, k
