"""The reverse zone: part of the shortest line behind the relay, or of the protected line."""

from __future__ import annotations

from relayset.settings.context import RuleContext, pick_line


def reverse_target(w: RuleContext) -> tuple[complex, str]:
    target, text = _rule_target(w)
    cover = w.inputs.reverse_cover_ohm
    if cover is not None and cover > abs(target):
        # A blocking scheme needs the reverse zone to see every fault the remote zone 2 sees
        # behind this bus.
        zl = w.inputs.z1_line_ohm
        return (-cover * zl / abs(zl),
                f"covers the remote end's zone 2 past this bus ({cover:.4g} Ω with the "
                f"tolerance; the rule gives {abs(target):.4g} Ω: {text})")
    return target, text


def _rule_target(w: RuleContext) -> tuple[complex, str]:
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
