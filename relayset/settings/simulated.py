r"""What the fault simulation feeds back into the settings: one typed summary, the rules here.

The verification's simulation (:mod:`relayset.studies.verification`) measures; this module
decides. :class:`SimulationSummary` is what the simulation found at one relay end (the
worst remote-bus fault for zone 1, the infeed range, the resistive reach the simulated
faults need, how far the other end's zone 2 reaches past this bus); the functions below are
the setting policy that turns it into inputs of the zone rules (:class:`SettingsInputs`):

- **Zone 1 limit.** The worst remote-bus fault sits at reach scale :math:`s_{min}` of a
  zone 1 set at :math:`r` (% of the line), so the zone overreaches by
  :math:`e = 100/(s_{min} r) - 1` of its setting; the verification tolerance t is applied
  on top of it, :math:`b = t\,(1 + \max(0, e))`, and zone 1 is limited by
  :func:`relayset.settings.zone1.recommended_zone1_pct` (e, b, philosophy reach and margin).
- **Resistive widening.** A quadrilateral zone 2's blinders reach at least as far as the
  simulated faults with remote infeed into the fault resistance need (time-graded, load
  permitting). Zone 1's are not widened (:data:`WIDENED_ZONES`): a wider zone 1 blinder
  admits resistive faults at the remote bus and must then be shorter; what it would take
  is reported with the verification instead.
- **Zone 1 shape** (quadrilateral): reactance-line tilt and resistive reach. Under export
  the remote infeed into the fault resistance turns the apparent resistance of a
  remote-bus fault downward, so it looks closer; a reactance line tilted down toward +R by
  τ keeps it out, and a wider blinder lets more of it in. The simulation gives the worst
  remote-bus reach scale :math:`s(\tau, f)` for each tilt of :data:`TILT_GRID_DEG` and
  each widening f of the resistive reach (:data:`BLINDER_FACTORS`, times the arc basis,
  never past the load limit). The blinder is widened as far as it costs the worst case
  nothing (the best scale over the tilts stays within :data:`TILT_SLACK` of the unwidened
  one): resistive coverage as large as load and the remote bus allow. The tilt is the
  smallest whose scale is within :data:`TILT_SLACK` of the best for that blinder (a
  steeper line than needed only costs resistive coverage near the end of zone 1). Zone
  1's limit is then taken with that shape.
- **Infeed range.** Zone 2 graded at the smallest simulated infeed factor, zone 3 sized at
  the largest (where the philosophy asks for computed infeed).
- **Reverse cover.** The reverse zone reaches past this bus as far as the other end's
  zone 2 does, divided by (1 − t) so that it covers it with the tolerance.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from relayset.inputs.philosophy import Philosophy
from relayset.settings.zone1 import recommended_zone1_pct

#: Zones whose resistive reach is widened for the simulated remote infeed (see above).
WIDENED_ZONES = ("zone2",)
#: Reactance-line tilts tried for a quadrilateral zone 1 [deg] (0 to 30°, common practice,
#: no source: relays offer tilts of a few tens of degrees).
TILT_GRID_DEG = tuple(float(d) for d in range(0, 31))
#: Widenings of zone 1's resistive reach tried, times its arc basis [1] (capped at the
#: load limit).
BLINDER_FACTORS = (1.0, 1.25, 1.5, 2.0, 2.5, 3.0, 4.0)
#: A tilt within this of the best worst-case reach scale counts as the best [1] (0.5 % of
#: the line).
TILT_SLACK = 0.005


@dataclass(frozen=True)
class ResistiveNeed:
    """Resistive reach [ohm] one quadrilateral zone needs for the simulated faults."""

    zone: str
    phase_ohm: float
    ground_ohm: float


@dataclass(frozen=True)
class SimulationSummary:
    """What the fault simulation found at one relay end (see the module notes).

    Parameters
    ----------
    tolerance_pct : float
        The verification tolerance t (the study's error budget) [%].
    remote_bus_scale : float, optional
        Smallest zone 1 reach scale of the simulated faults at the remote bus (every
        parallel-circuit state, source and load case, fault resistance) [1].
    zone1_reach_pct : float, optional
        The zone 1 reach that scale was measured at [% of the line].
    infeed_range : (complex, complex), optional
        Smallest and largest simulated infeed factor at the remote bus [1].
    resistive_needs : tuple of ResistiveNeed
        Per quadrilateral zone, the resistive reach the simulated faults need [ohm].
    remote_zone2_overreach_ohm : float, optional
        How far the other end's zone 2 reaches past this bus along the line angle [ohm].
    zone1_shape_scales : tuple of (float, float, float)
        For a quadrilateral zone 1, ``(τ [rad], f, s)``: the worst remote-bus fault's reach
        scale relative to the line for each reactance-line tilt and blinder widening tried.
    """

    tolerance_pct: float
    remote_bus_scale: float | None = None
    zone1_reach_pct: float | None = None
    infeed_range: tuple[complex, complex] | None = None
    resistive_needs: tuple[ResistiveNeed, ...] = ()
    remote_zone2_overreach_ohm: float | None = None
    zone1_shape_scales: tuple[tuple[float, float, float], ...] = ()

    def zone1_overreach_pct(self) -> float | None:
        """Overreach e of the worst remote-bus fault [% of the zone 1 setting]."""
        if self.remote_bus_scale is None or self.zone1_reach_pct is None:
            return None
        return (100 / (self.remote_bus_scale * self.zone1_reach_pct) - 1) * 100


def zone1_limit(summary: SimulationSummary, philosophy: Philosophy
                ) -> tuple[float, float] | None:
    """(Recommended zone 1 reach [% of the line], its overreach with the tolerance [% of
    the setting]) from the worst remote-bus fault; None where nothing limits it."""
    e = summary.zone1_overreach_pct()
    if e is None:
        return None
    t = summary.tolerance_pct
    b = t + t * max(0.0, e) / 100  # tolerance applied on top of the overreach
    z1 = philosophy.zone1
    rec = recommended_zone1_pct(e, b, z1.reach_pct, z1.min_margin_pct)
    return (rec, b + max(0.0, e)) if rec > 0 else None


def zone1_shape(summary: SimulationSummary) -> tuple[float, float]:
    """(Reactance-line tilt [rad], resistive widening [1]) of a quadrilateral zone 1 (see
    the module notes); (0, 1) without simulated remote-bus faults."""
    pts = [(tau, f, s) for tau, f, s in summary.zone1_shape_scales if math.isfinite(s)]
    if not pts:
        return 0.0, 1.0
    best = {}
    for _, f, s in pts:
        best[f] = max(best.get(f, -math.inf), s)
    base = best[min(best)]
    f = max(f for f, s in best.items() if s >= base - TILT_SLACK)
    tau = min(t for t, ff, s in pts if ff == f and s >= best[f] - TILT_SLACK)
    return tau, f


def resistive_widening(summary: SimulationSummary, zones: tuple[str, ...] = WIDENED_ZONES
                       ) -> dict[str, tuple[float, float]] | None:
    """Per zone widened, the (phase, ground) resistive reach it must reach [ohm]."""
    out = {n.zone: (n.phase_ohm, n.ground_ohm) for n in summary.resistive_needs
           if n.zone in zones}
    return out or None


def reverse_cover_ohm(summary: SimulationSummary) -> float | None:
    """How far past this bus the reverse zone must reach [ohm] (None: the other end's
    zone 2 stops short of this bus, or is unknown)."""
    over = summary.remote_zone2_overreach_ohm
    if over is None or over <= 0:
        return None
    return over / (1 - summary.tolerance_pct / 100) * (1 + 1e-6)


def infeed_range(summary: SimulationSummary, philosophy: Philosophy
                 ) -> tuple[complex, complex] | None:
    """The simulated infeed range where the philosophy computes infeed, else None."""
    if "computed" in (philosophy.zone2.infeed, philosophy.zone3.infeed):
        return summary.infeed_range
    return None
