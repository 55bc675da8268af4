r"""Distance-zone settings from line data and a setting philosophy.

:func:`compute_settings` turns :class:`SettingsInputs` (line impedances, instrument
transformer ratios, load, neighbouring lines, sources) and a
:class:`relayset.inputs.philosophy.Philosophy` into a frozen :class:`SettingsResult`: reaches of
zones 1, 2, 3 and reverse in primary and secondary ohms, the characteristic parameters, k0
in three forms, the load check, SIR and line class, and warnings.

Conventions
-----------
- Impedances are per phase in the positive-sequence plane [ohm]; percentages of the line
  are of :math:`|Z_{1,line}|`.
- Each zone rule gives a *target* impedance :math:`Z_t` the zone must just reach. A mho
  zone's diameter at the characteristic angle θ passes through it,
  :math:`D = |Z_t|/\cos(\arg Z_t - θ)`; a quadrilateral's reactive reach is
  :math:`X = \mathrm{Im}\,Z_t`.
- Infeed: targets beyond the remote bus are :math:`Z_L + K\,m\,Z_{adj}` (see
  :func:`relayset.physics.zones.infeed_factor`). The zone 2 check against the adjacent
  line's zone 1 is made without infeed (K = 1): when the remote source is out of service,
  zone 2 reaches furthest.
- Resistive reach (quadrilateral), in the same per-phase plane: phase loops see half the
  phase-to-phase arc resistance, :math:`R_{ph} = (1+m)\,R_{arc}/2`; ground loops with
  residual compensation see :math:`R_f/(1+k_0)`, taken by magnitude,
  :math:`R_g = (1+m)\,(R_{arc} + R_{tower})/|1+k_0|` (single-end feed; remote infeed into
  the fault resistance is not included). The arc current is ``arc_current_a`` if given,
  otherwise the smallest phase-to-phase fault current at the remote bus fed from the relay
  end alone, :math:`I = V_{LL}/|2(Z_S + Z_L)|` (smallest current, largest arc resistance);
  the same current is used for the ground arc since the zero-sequence source is unknown.
- Load: :math:`|Z_{load,min}| = (v_{min} V_n)^2/S_{max}` at angles within
  ±``load_angle_max_rad`` of 0 (export) and of π (import).
"""

from __future__ import annotations

import cmath
import math
from dataclasses import dataclass, replace
from typing import Any

import numpy as np

from relayset.errors import InputError
from relayset.inputs.philosophy import Philosophy, default_philosophy
from relayset.physics import zones as zp
from relayset.physics.characteristic import Characteristic, Mho
from relayset.physics.sequence import residual_compensation, residual_compensation_split
from relayset.results.parameters import K0
from relayset.results.settings import Check, LoadCheck, SettingsResult, SourceEnd, ZoneSetting
from relayset.settings.checks import SIR_SHORT_MIN, line_class
from relayset.settings.context import ZONE_LABELS, RuleContext, pick_line
from relayset.settings.inputs import _SOURCE, SettingsInputs
from relayset.settings.resistive import arc_current, load_rays
from relayset.settings.reverse import reverse_target
from relayset.settings.zone1 import tilted_x_reach, zone1_target
from relayset.settings.zone2 import zone2_target
from relayset.settings.zone3 import zone3_target

#: A quadrilateral's directional line lies this far below the R axis, into the fourth
#: quadrant [deg] (common practice, no source): close-in resistive faults fed from the
#: remote end under load appear a few degrees below the R axis, and the directional
#: element of the relay model, not this line, tells forward from reverse.
DIRECTIONAL_LINE_BELOW_R_DEG = 30.0


def _reach_over_load(char: Characteristic, phi_max: float) -> np.ndarray:
    """Reach [ohm] along the load ranges' rays, plus the rays through the shape's farthest
    points (mho diameter, quadrilateral corners) that fall inside them."""
    extra = [char.angle_rad] if isinstance(char, Mho) else np.angle(char.outline())
    return char.reach_along(load_rays(phi_max, extra))


@dataclass(frozen=True)
class ShapeBasis:
    """What every zone's characteristic at one relay end is formed from (SI): the line
    angle, the mho diameter angle, the k0 the relay is set with, the minimum load impedance
    and largest load angle, and for quadrilaterals the resistive limit from load and the arc
    current."""

    theta: float  #: line angle [rad]
    char_angle: float  #: forward mho diameter angle [rad]
    k0: complex  #: residual compensation the relay is set with [1]
    z_load: float  #: minimum load impedance [ohm]
    load_angle_max: float  #: largest load angle [rad]
    quad: bool  #: quadrilateral (True) or mho zones
    r_limit: float | None  #: resistive limit from load [ohm] (quadrilateral), else None
    arc_current_a: float | None  #: current through the fault arc [A], None without one


def shape_basis(i: SettingsInputs, ph: Philosophy, k0: complex) -> ShapeBasis:
    """The :class:`ShapeBasis` of the relay of ``i`` under ``ph`` with residual
    compensation ``k0`` (the module notes give the rules).

    Raises
    ------
    InputError
        Data a quadrilateral needs is missing, or the load angle leaves no room for a
        resistive blinder.
    """
    theta = cmath.phase(i.z1_line_ohm)
    z_load = float(zp.min_load_impedance_ohm(i.v_min_pu * i.v_nominal_ll_v, i.s_max_va))
    phi = i.load_angle_max_rad
    # Quadrilateral data.
    quad = ph.characteristic.shape == "quadrilateral"
    arc_i = arc_current(i)
    r_limit = None
    if quad:
        for name in ("arc_length_phase_m", "arc_length_ground_m"):
            if getattr(i, name) is None:
                raise InputError("is needed for a quadrilateral characteristic", field=name,
                                 source=_SOURCE)
        if arc_i is None:
            raise InputError(
                "is needed for a quadrilateral characteristic (or give source_z1_relay_ohm)",
                field="arc_current_a", source=_SOURCE,
            )
        # Blinder parallel to the line angle through the load point at the largest angle.
        r_limit = ph.resistive.load_limit_pct / 100 * z_load * (
            math.cos(phi) - math.sin(phi) / math.tan(theta)
        )
        if r_limit <= 0:
            raise InputError(
                f"leaves no room for a resistive blinder (the load angle reaches the line angle "
                f"{math.degrees(theta):.4g} deg)",
                field="load_angle_max_rad", value=f"{math.degrees(phi):g} deg", source=_SOURCE,
            )
    if ph.characteristic.mho_angle_deg == "line":
        char_angle = theta
    else:
        char_angle = math.radians(float(ph.characteristic.mho_angle_deg))
    return ShapeBasis(theta, char_angle, k0, z_load, phi, quad, r_limit, arc_i)


def form_zone(w: RuleContext, b: ShapeBasis, zone: str, target: complex, rule: str,
              delay: float, k: complex | None, checks: list[Check],
              left_need: tuple[float, float] | None = None) -> ZoneSetting:
    """One zone's characteristic through its target (the module notes' conventions): a
    mho circle, or a quadrilateral with its resistive reach from the arc (and tower footing)
    resistance, widened where the simulation asks and cut at the load limit; then its
    reach over the load ranges. Appends to ``checks`` and warns through ``w``.

    Parameters
    ----------
    target : complex
        The impedance the zone must just reach [ohm].
    delay : float
        The zone's time delay [s] (the arc's wind stretch lasts as long).
    k : complex, optional
        Infeed factor the target was formed with [1] (reported).
    left_need : (float, float), optional
        Left blinder offsets (phase, ground loops) the zone must hold [ohm] (a teed line's
        infeed turns apparent impedances either way); the left blinder reaches that far
        times the resistive margin, load permitting. None: the arc basis.
    """
    i, ph = w.inputs, w.ph
    theta, char_angle, k0 = b.theta, b.char_angle, b.k0
    z_load, phi, quad, r_limit, arc_i = b.z_load, b.load_angle_max, b.quad, b.r_limit, \
        b.arc_current_a
    enc_pct = ph.load.encroachment_limit_pct

    def sec(x: Any) -> Any:
        z = zp.secondary_ohm(x, i.ct_ratio, i.vt_ratio)
        return complex(z) if isinstance(x, complex) else float(z)

    label = ZONE_LABELS[zone]
    forward = zone != "reverse"
    direction = "forward" if forward else "reverse"
    mho: dict[str, Any] = dict(char_angle_rad=None, mho_diameter_primary_ohm=None,
                               mho_diameter_secondary_ohm=None)
    qd: dict[str, Any] = dict(
        x_reach_primary_ohm=None, x_reach_secondary_ohm=None,
        r_reach_phase_primary_ohm=None, r_reach_phase_secondary_ohm=None,
        r_reach_ground_primary_ohm=None, r_reach_ground_secondary_ohm=None,
        arc_resistance_phase_ohm=None, arc_resistance_ground_ohm=None,
    )
    # The fault resistance a zone must see (Warrington's arc, plus tower footing to
    # ground) is the same for every shape: a quadrilateral's blinders are set from it, a
    # mho zone is only tested against it (its circle decides its resistive coverage).
    rs = ph.resistive
    t_arc = delay if rs.arc_time_s == "zone_delay" else float(rs.arc_time_s)
    ra_ph = ra_g = None  # a mho zone without arc data (no source behind it) has none
    if arc_i is not None and i.arc_length_phase_m is not None:
        ra_ph = float(zp.warrington_arc_resistance_ohm(
            arc_i, i.arc_length_phase_m, rs.wind_speed_m_per_s, t_arc))
    if arc_i is not None and i.arc_length_ground_m is not None:
        ra_g = float(zp.warrington_arc_resistance_ohm(
            arc_i, i.arc_length_ground_m, rs.wind_speed_m_per_s, t_arc))
    if not quad:
        ang = char_angle if forward else math.remainder(char_angle + math.pi, 2 * math.pi)
        d = float(zp.mho_diameter_for_point_ohm(target, ang))
        mho.update(char_angle_rad=ang, mho_diameter_primary_ohm=d,
                   mho_diameter_secondary_ohm=sec(d))
        qd.update(arc_resistance_phase_ohm=ra_ph, arc_resistance_ground_ohm=ra_g)
    else:
        m = 1 + rs.margin_pct / 100
        r_ph = m * ra_ph / 2
        r_g = m * (ra_g + i.tower_footing_ohm) / abs(1 + k0)
        # The left blinder keeps the arc basis: remote infeed, which the widening below
        # answers, moves the apparent fault resistance to the right only, and a wide
        # left blinder would admit load-like impedances of faults behind the relay.
        left = (min(r_ph, r_limit), min(r_g, r_limit))
        if left_need is not None:
            left = tuple(min(max(a, m * n), r_limit) for a, n in zip(left, left_need,
                                                                      strict=True))
        if i.resistive_need_ohm and zone in i.resistive_need_ohm:
            # Remote infeed into the fault resistance, from the fault simulation.
            need_ph, need_g = i.resistive_need_ohm[zone]
            r_ph, r_g = max(r_ph, m * need_ph), max(r_g, m * need_g)
        tilt, widen = i.zone1_shape if zone == "zone1" else (0.0, 1.0)
        if widen > 1:
            # Widened as far as the simulated remote-bus faults allow, never past load.
            r_ph, r_g = (max(r, min(widen * r, r_limit)) for r in (r_ph, r_g))
            checks.append(Check(
                "resistive_reach_widened_by_simulation", True,
                f"resistive reach {widen:g} × the arc basis (load limit "
                f"{r_limit:.4g} Ω): the widest blinder that leaves the worst simulated "
                "fault at the remote bus where the arc basis had it"))
        cut = max(r_ph, r_g) > r_limit
        checks.append(Check(
            "resistive_load_limit", not cut,
            f"resistive reach needed (arc and footing): phase {r_ph:.4g} Ω, ground "
            f"{r_g:.4g} Ω; set: phase {min(r_ph, r_limit):.4g} Ω, ground "
            f"{min(r_g, r_limit):.4g} Ω; load limit {r_limit:.4g} Ω (primary)",
        ))
        if cut:
            w.warn(
                f"{zone}_resistive_reach_limited_by_load",
                f"{label}: resistive reach cut to {r_limit:.4g} Ω primary "
                f"({ph.resistive.load_limit_pct:g} % of the minimum load resistance); "
                f"the arc and footing resistance needs phase {r_ph:.4g} Ω, ground "
                f"{r_g:.4g} Ω",
                "accept less resistive coverage, or use load-encroachment blocking or a "
                "pilot scheme for high-resistance faults",
            )
            r_ph, r_g = min(r_ph, r_limit), min(r_g, r_limit)
        # Zone 1's reactance line is tilted (chosen from the simulated remote-bus
        # faults) and passes through the target; the other zones' are horizontal.
        if tilt:
            checks.append(Check(
                "reactance_line_tilt_from_simulation", True,
                f"reactance line tilted {math.degrees(tilt):g}° down toward +R: the "
                "smallest tilt that keeps the worst simulated fault at the remote bus "
                "within 0.5 % of the line of its best reach scale"))
        x = tilted_x_reach(target if forward else -target, tilt)
        qd.update(
            r_left_phase_primary_ohm=left[0] if left[0] != r_ph else None,
            r_left_ground_primary_ohm=left[1] if left[1] != r_g else None,
            reactance_tilt_rad=tilt,
            directional_angle_rad=-math.radians(DIRECTIONAL_LINE_BELOW_R_DEG),
            x_reach_primary_ohm=x, x_reach_secondary_ohm=sec(x),
            r_reach_phase_primary_ohm=r_ph, r_reach_phase_secondary_ohm=sec(r_ph),
            r_reach_ground_primary_ohm=r_g, r_reach_ground_secondary_ohm=sec(r_g),
            arc_resistance_phase_ohm=ra_ph, arc_resistance_ground_ohm=ra_g,
        )
    zset = ZoneSetting(
        zone=zone, direction=direction, rule=rule,
        reach_primary_ohm=complex(target), reach_secondary_ohm=sec(complex(target)),
        reach_pct=abs(target) / abs(i.z1_line_ohm) * 100, delay_s=delay,
        shape=ph.characteristic.shape, infeed_factor=k, **mho, **qd,
        load_reach_pct_of_min=math.nan,
    )
    # Largest reach over the load ranges, phase and ground characteristics as set.
    reach_load = np.concatenate([_reach_over_load(zset.characteristic(g, theta), phi)
                                 for g in (False, True)])
    load_pct = float(np.max(reach_load)) / z_load * 100
    # A blinder cut to the load limit lands exactly on it; allow for rounding.
    enc_ok = load_pct <= enc_pct * (1 + 1e-9)
    checks.append(Check(
        "load_encroachment", enc_ok,
        f"reach along the load angles is {load_pct:.4g} % of the minimum load impedance "
        f"(limit {enc_pct:g} %)",
    ))
    if not enc_ok:
        w.warn(
            f"{zone}_load_encroachment",
            f"{label} reaches {load_pct:.4g} % of the minimum load impedance "
            f"{z_load:.4g} Ω along the load angles (limit {enc_pct:g} %)",
            "reduce the reach, use a quadrilateral or a load-encroachment blinder",
        )
    return replace(zset, load_reach_pct_of_min=load_pct, checks=tuple(checks))


def compute_settings(
    inputs: SettingsInputs, philosophy: Philosophy | None = None
) -> SettingsResult:
    """Distance-zone settings for one relay.

    Parameters
    ----------
    inputs : SettingsInputs
        Line, transformer, load, network and reach-study data [SI].
    philosophy : Philosophy, optional
        Setting rules; default :func:`relayset.inputs.philosophy.default_philosophy`.

    Returns
    -------
    SettingsResult

    Raises
    ------
    InputError
        Data the philosophy needs is missing (arc lengths and current for quadrilaterals), or
        the load angle leaves no room for a resistive blinder.
    """
    ph = philosophy if philosophy is not None else default_philosophy()
    i = inputs
    w = RuleContext(i, ph)
    zl = i.z1_line_ohm
    theta = cmath.phase(zl)
    fsec = i.ct_ratio / i.vt_ratio

    def sec(x: Any) -> Any:
        z = zp.secondary_ohm(x, i.ct_ratio, i.vt_ratio)
        return complex(z) if isinstance(x, complex) else float(z)

    # k0 in three forms, all from one k0 (given, or from the line totals).
    # The line's own k0 is the reference a given k0 is compared with; a given Z1 replica
    # does not change it (k0 is a property of the line).
    k0_calc = (i.k0_line if i.k0_line is not None
               else complex(residual_compensation(zl, i.z0_line_ohm)))
    k0 = i.k0 if i.k0 is not None else k0_calc
    z0_eff = zl * (1 + 3 * k0)
    if i.k0 is not None and abs(k0 - k0_calc) > 1e-3 * abs(k0_calc):
        w.warn(
            "k0_differs_from_line",
            f"the given k0 = {abs(k0):.4g}∠{math.degrees(cmath.phase(k0)):.2f}° differs from "
            f"(Z0 − Z1)/(3 Z1) = {abs(k0_calc):.4g}∠{math.degrees(cmath.phase(k0_calc)):.2f}° "
            "of the line totals; the given k0 is used",
            "check which k0 the relay should use (e.g. the reach study's effective value)",
        )
    zc = i.z1_line_computed_ohm
    if zc is not None and abs(zl - zc) > 0.01 * abs(zc):
        w.warn(
            "z1_differs_from_line",
            f"the given Z1 replica {abs(zl):.4g} Ω∠{math.degrees(cmath.phase(zl)):.2f}° differs "
            f"from the computed line Z1 {abs(zc):.4g} Ω∠{math.degrees(cmath.phase(zc)):.2f}° "
            f"by {100 * abs(zl - zc) / abs(zc):.3g} %; every reach follows the given value",
            "check the source of relay.z1_set (measured, or another line model)",
        )
    kr, kx = residual_compensation_split(zl, z0_eff)
    k0_forms = K0(k0=k0, kr=float(kr), kx=float(kx), z0_over_z1=1 + 3 * k0)

    # Load.
    z_load = float(zp.min_load_impedance_ohm(i.v_min_pu * i.v_nominal_ll_v, i.s_max_va))
    phi = i.load_angle_max_rad
    enc_pct = ph.load.encroachment_limit_pct

    # Sources: SIR and line class.
    sources = []
    for role, end, zs in (("relay", i.end, i.source_z1_relay_ohm),
                          ("remote", i.remote_end, i.source_z1_remote_ohm)):
        if zs is not None:
            s = float(zp.sir(zs, zl))
            sources.append(SourceEnd(end, zs, s, str(line_class(s)), role=role))
    if sources and sources[0].role == "relay" and sources[0].line_class == "short":
        w.warn(
            "short_line",
            f"short line by SIR (SIR = {sources[0].sir:.3g} >= {SIR_SHORT_MIN:g} at the relay "
            "end): zone 1 underreach accuracy is poor",
            "consider a pilot scheme or line differential protection, and a shorter zone 1",
        )

    b = shape_basis(i, ph, k0)
    r_limit, arc_i = b.r_limit, b.arc_current_a

    # Zone targets.
    t1, rule1, checks1 = zone1_target(w)
    t2, rule2, k2 = zone2_target(w)
    t3, rule3, k3 = zone3_target(w)
    tr, ruler = reverse_target(w)
    specs = [
        ("zone1", t1, rule1, ph.zone1.delay_s, None, checks1),
        ("zone2", t2, rule2, ph.zone2.delay_s, k2, []),
        ("zone3", t3, rule3, ph.zone3.delay_s, k3, []),
        ("reverse", tr, ruler, ph.reverse.delay_s, None, []),
    ]

    built = [form_zone(w, b, *spec) for spec in specs]

    zs = {z.zone: z for z in built}
    # Zone 2 against the adjacent line's zone 1, without infeed (the furthest zone 2 reaches),
    # series capacitor banks in the path in service (they bring the remote bus nearer).
    z2p = ph.zone2
    if z2p.check_adjacent_zone1 and i.adjacent_lines:
        name, zadj = pick_line(i.adjacent_lines, longest=False)
        point = zl - 1j * i.series_xc_in_path_ohm + z2p.adjacent_zone1_pct / 100 * zadj
        past = bool(zs["zone2"].contains(point, theta))
        banks = ", series capacitors in service" if i.series_xc_in_path_ohm else ""
        _add_check(zs, "zone2", Check(
            "past_adjacent_zone1", not past,
            f"end of zone 1 of '{name}' ({z2p.adjacent_zone1_pct:g} % of it, "
            f"{abs(point):.4g} Ω from the relay{banks}) is "
            f"{'inside' if past else 'outside'} zone 2",
        ))
        if past:
            w.warn(
                "zone2_past_adjacent_zone1",
                f"Zone 2 reaches past zone 1 of the shortest adjacent line '{name}' when there is "
                "no infeed",
                "reduce zone 2, or raise its time delay to grade with the adjacent zone 2",
            )
    # Reaches must grow from zone 1 to zone 3 along the line angle.
    for lo, hi in (("zone1", "zone2"), ("zone2", "zone3")):
        ok = zs[hi].reach_pct > zs[lo].reach_pct
        _add_check(zs, hi, Check(
            f"reach_above_{lo}", ok,
            f"{zs[hi].reach_pct:.4g} % of the line against {zs[lo].reach_pct:.4g} % for {lo}",
        ))
        if not ok:
            w.warn(
                f"{hi}_not_above_{lo}",
                f"{ZONE_LABELS[hi]} ({zs[hi].reach_pct:.4g} %) does not reach beyond "
                f"{ZONE_LABELS[lo]} ({zs[lo].reach_pct:.4g} %)",
                "review the philosophy percentages for this line's neighbours",
            )
    if not i.adjacent_lines:
        w.warn(
            "no_adjacent_line",
            f"no adjacent line given: zone 2 is {zs['zone2'].reach_pct:.4g} % and zone 3 "
            f"{zs['zone3'].reach_pct:.4g} % of the line, and zone 2 was not checked against "
            "the adjacent zone 1",
            "give the lines leaving the remote bus",
        )

    return SettingsResult(
        end=i.end,
        remote_end=i.remote_end,
        line_z1_primary_ohm=zl,
        line_z1_secondary_ohm=sec(zl),
        line_angle_rad=theta,
        length_m=i.length_m,
        secondary_factor=fsec,
        zones=tuple(zs[n] for n in ("zone1", "zone2", "zone3", "reverse")),
        k0=k0_forms,
        k0m=i.k0m,
        load=LoadCheck(
            z_min_primary_ohm=z_load,
            z_min_secondary_ohm=sec(z_load),
            load_angle_max_rad=phi,
            encroachment_limit_pct=enc_pct,
            r_limit_primary_ohm=r_limit,
        ),
        sources=tuple(sources),
        arc_current_a=arc_i,
        warnings=tuple(w.warnings),
    )


def _add_check(zs: dict[str, ZoneSetting], zone: str, check: Check) -> None:
    zs[zone] = replace(zs[zone], checks=(*zs[zone].checks, check))
