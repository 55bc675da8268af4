"""Zone 1 and zone 2 of a relay on a three-terminal (teed) line: the rules, one place each.

Infeed from the third terminal makes a relay see faults beyond the tee further away than
they are (the infeed current raises the voltage drop from the tee on, the relay current
does not carry it). Zone 1 must therefore be set with the infeed out, where it sees the
remote terminals closest; zone 2 with the infeed at its largest, where it sees them
farthest. The reaches are along the relay's line angle, from the apparent impedances the
fault solver gives (:mod:`relayset.physics.teed`, :mod:`relayset.studies.teed`).
"""

from __future__ import annotations

from collections.abc import Sequence

from relayset.results.settings import Check
from relayset.settings.zone1 import recommended_zone1_pct


def teed_zone1_pct(error_budget_pct: float, philosophy_pct: float, margin_pct: float
                   ) -> float:
    """Zone 1 reach [% of the apparent impedance of the nearest remote terminal without
    infeed]: the two-ended zone 1 rule (:func:`~relayset.settings.zone1.recommended_zone1_pct`)
    with no overreach of its own, because the apparent impedances it is applied to are the
    meant loops' own measurements (their overreach is in them)."""
    return recommended_zone1_pct(0.0, error_budget_pct, philosophy_pct, margin_pct)


def teed_zone1_ohm(nearest_no_infeed_ohm: float, zone1_pct: float) -> float:
    """Zone 1 reach along the line angle [ohm]: ``zone1_pct`` of the smallest apparent
    impedance (along the line angle) that the meant loops measure for bolted faults at
    either remote terminal with the third terminal's infeed out (its source disconnected).
    Common practice, no source: zone 1 of a three-terminal line stays short of the nearest
    remote terminal in the case where it is seen nearest."""
    return zone1_pct / 100.0 * nearest_no_infeed_ohm


def teed_zone2_ohm(farthest_with_infeed_ohm: float, zone2_pct: float) -> float:
    """Zone 2 reach along the line angle [ohm]: ``zone2_pct`` (the philosophy's zone 2
    percentage, >= 100) of the largest apparent impedance the meant loops measure for bolted
    faults at either remote terminal with the infeed from the third terminal in, over the
    source cases (each bus strong or weak independently: the strongest infeed included,
    :func:`relayset.studies.teed.teed_source_cases`). Common practice, no source."""
    return max(zone2_pct, 100.0) / 100.0 * farthest_with_infeed_ohm


def teed_checks(
    zone1_ohm: float, zone2_ohm: float, tee_ohm: float,
    next_zone1: Sequence[tuple[str, str, float]] | None,
) -> tuple[Check, ...]:
    """Checks of a teed line's zone 1 and zone 2 that say why a rule cannot be met.

    Parameters
    ----------
    zone1_ohm, zone2_ohm : float
        The reaches along the line angle [ohm].
    tee_ohm : float
        Positive-sequence impedance from the relay to the tee along the line angle [ohm].
    next_zone1 : sequence of (bus, line name, limit [ohm])
        Where the zone 1 of each next line ends, seen from this relay without infeed:
        the apparent impedance of that bus plus the next line's zone 1 (empty: no adjacent
        line given; None: zone 2 is time graded, not kept short of the next zone 1).
    """
    checks = [Check(
        "zone1_reaches_tee", zone1_ohm > tee_ohm,
        f"zone 1 reaches {zone1_ohm:.4g} ohm, the tee is {tee_ohm:.4g} ohm away"
        + ("" if zone1_ohm > tee_ohm else ": zone 1 does not reach the tee, so faults on "
           "the other legs are cleared in zone 2 time unless a communication scheme "
           "trips them"))]
    if next_zone1 is None:
        checks.append(Check("zone2_short_of_next_zone1", True,
                            "zone 2 is time graded with the next zone 2: not compared with a "
                            "next zone 1", judged=False))
        return tuple(checks)
    if not next_zone1:
        checks.append(Check("zone2_short_of_next_zone1", True,
                            "no adjacent line given: zone 2 not compared with a next zone 1",
                            judged=False))
    for bus, name, limit in next_zone1:
        ok = zone2_ohm < limit
        checks.append(Check(
            "zone2_short_of_next_zone1", ok,
            f"zone 2 needs {zone2_ohm:.4g} ohm to cover the farthest terminal with infeed; "
            f"the zone 1 of '{name}' at {bus} ends at {limit:.4g} ohm seen without infeed"
            + ("" if ok else ": zone 2 overlaps that zone 1, so it must be time graded "
               "with the next line's zone 2 (or a communication scheme covers the line)")))
    return tuple(checks)
