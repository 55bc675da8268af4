"""The reverse zone: part of the shortest line behind the relay, or of the protected line."""

from __future__ import annotations

from relayset.settings.context import RuleContext, pick_line


def reverse_target(w: RuleContext) -> tuple[complex, str]:
    i, rv = w.inputs, w.ph.reverse
    by_line = -(rv.reach_pct / 100) * i.z1_line_ohm
    text_line = f"{rv.reach_pct:g} % of the protected line, reverse"
    if rv.rule == "line_pct":
        return by_line, text_line
    if not i.reverse_lines:
        w.warn(
            "reverse_no_line_behind",
            f"Reverse zone rule 'behind_pct' needs a line behind the relay; none given, so the "
            f"reverse zone is {rv.reach_pct:g} % of the protected line",
            "give the lines leaving the relay bus behind the relay",
        )
        return by_line, text_line + " (no line behind given)"
    name, zb = pick_line(i.reverse_lines, longest=False)
    return (-(rv.behind_pct / 100) * zb,
            f"{rv.behind_pct:g} % of the shortest line behind the relay '{name}', reverse")
