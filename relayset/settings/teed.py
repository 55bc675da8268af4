"""Zone 1 and zone 2 of a relay on a three-terminal (teed) line: the rules, one place each.

Infeed from the third terminal makes a relay see faults beyond the tee further away than
they are (the infeed current raises the voltage drop from the tee on, the relay current
does not carry it). Zone 1 must therefore be set with the infeed out, where it sees the
remote terminals closest; zone 2 with the infeed at its largest, where it sees them
farthest. The reaches are along the relay's line angle, from the apparent impedances the
fault solver gives (:mod:`relayset.physics.teed`, :mod:`relayset.studies.teed`).

Each reach is a target on the line angle; the zone's characteristic (the philosophy's
shape: mho, or quadrilateral with its resistive reach) is formed through it by the
two-ended rules (:func:`relayset.settings.compute.form_zone`), so a teed end's zones are
the same :class:`~relayset.results.settings.ZoneSetting` objects the two-ended settings,
verification, relay profiles and report use.
"""

from __future__ import annotations

import cmath
import math
from collections.abc import Sequence
from dataclasses import replace

import numpy as np

from relayset.inputs.philosophy import Philosophy
from relayset.physics.sequence import residual_compensation, residual_compensation_split
from relayset.physics.zones import secondary_ohm
from relayset.results.parameters import K0
from relayset.results.settings import Check, LoadCheck, SettingsResult
from relayset.settings.inputs import SettingsInputs
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


def blinder_offset_ohm(z_ohm: complex | np.ndarray, line_angle_rad: float) -> np.ndarray:
    r"""Offset on the R axis of a blinder parallel to the line angle θ through ``z_ohm``
    [ohm]: the right blinder of a quadrilateral
    (:class:`~relayset.physics.characteristic.Quadrilateral`,
    :math:`R\sin\theta - X\cos\theta \le R_{reach}\sin\theta`) holds Z exactly when
    its offset is at least

    .. math:: R_{need} = R - X/\tan\theta

    (the verification's closing measures the simulated faults' need the same way). Infeed
    from the third terminal rotates the apparent impedance of a bolted fault beyond the tee
    off the line angle, so a zone 2 blinder set from the arc alone can miss it.
    """
    z = np.asarray(z_ohm, dtype=complex)
    return z.real - z.imag / math.tan(line_angle_rad)


def teed_zone_settings(inputs: SettingsInputs, philosophy: Philosophy,
                       zone1: tuple[complex, str], zone2: tuple[complex, str],
                       zone2_left_need: tuple[float, float] | None = None
                       ) -> SettingsResult:
    """Zone 1 and zone 2 of one relay end of a teed line, characteristics formed.

    The targets come from :func:`teed_zone1_ohm` and :func:`teed_zone2_ohm` (on the line
    angle); each zone's shape is the philosophy's, formed through its target by
    :func:`relayset.settings.compute.form_zone` (mho diameter through the target; a
    quadrilateral's reactance line through it and its blinders from the arc and footing
    resistance, zone 2's widened on both sides to hold the bolted remote-terminal faults as
    the infeed turns them (``inputs.resistive_need_ohm`` right, ``zone2_left_need`` left,
    phase and ground loops [ohm]; common practice, no source), cut at the load limit), with its
    load-encroachment check. Zone 1 is not tilted and no blinder is widened for remote
    infeed into the fault resistance: the two-ended closing by simulation
    (:mod:`relayset.settings.simulated`) is not applied to a teed line; the verification
    judges the zones as set.

    Parameters
    ----------
    inputs : SettingsInputs
        The relay end's data: the relay's Z1 and k0, its CT and VT ratios, load, arc
        lengths, tower footing, and the arc current [SI].
    philosophy : Philosophy
        The setting rules (shape, zone delays, resistive margin, load limits).
    zone1, zone2 : (complex, str)
        Each zone's target [ohm] and the rule that gave it.

    Returns
    -------
    SettingsResult
        The two zones (``zone1``, ``zone2``), k0 in its three forms, the load check, the
        arc current and the warnings.
    """
    from relayset.settings.compute import form_zone, shape_basis
    from relayset.settings.context import RuleContext

    i, ph = inputs, philosophy
    w = RuleContext(i, ph)
    zl = i.z1_line_ohm
    k0 = i.k0 if i.k0 is not None else complex(residual_compensation(zl, i.z0_line_ohm))
    b = shape_basis(i, ph, k0)
    zones = (form_zone(w, b, "zone1", zone1[0], zone1[1], ph.zone1.delay_s, None, []),
             form_zone(w, b, "zone2", zone2[0], zone2[1], ph.zone2.delay_s, None, [],
                       left_need=zone2_left_need))
    kr, kx = residual_compensation_split(zl, zl * (1 + 3 * k0))

    def sec(x):
        return complex(secondary_ohm(x, i.ct_ratio, i.vt_ratio))

    return SettingsResult(
        end=i.end, remote_end=i.remote_end, line_z1_primary_ohm=zl,
        line_z1_secondary_ohm=sec(zl), line_angle_rad=cmath.phase(zl), length_m=i.length_m,
        secondary_factor=i.ct_ratio / i.vt_ratio, zones=zones,
        k0=K0(k0=k0, kr=float(kr), kx=float(kx), z0_over_z1=1 + 3 * k0), k0m=i.k0m,
        load=LoadCheck(z_min_primary_ohm=b.z_load, z_min_secondary_ohm=sec(b.z_load).real,
                       load_angle_max_rad=b.load_angle_max,
                       encroachment_limit_pct=ph.load.encroachment_limit_pct,
                       r_limit_primary_ohm=b.r_limit),
        sources=(), arc_current_a=b.arc_current_a, warnings=tuple(w.warnings))


def zone_checks(st: SettingsResult) -> tuple[tuple[Check, ...], SettingsResult]:
    """The zones' own checks (load encroachment, resistive load limit, relay profile range)
    as checks of the teed end, their ids prefixed by the zone (``zone2_load_encroachment``,
    the teed checks' convention: the zone is the id's first word), and ``st`` without them
    (one place for each check)."""
    checks = tuple(replace(c, check_id=f"{z.zone}_{c.check_id}")
                   for z in st.zones for c in z.checks)
    return checks, replace(st, zones=tuple(replace(z, checks=()) for z in st.zones))
