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
from collections.abc import Sequence
from dataclasses import dataclass, field, replace
from typing import Any

import numpy as np

from relayset.errors import InputError
from relayset.inputs.philosophy import Philosophy, default_philosophy
from relayset.physics import zones as zp
from relayset.physics.sequence import residual_compensation, residual_compensation_split
from relayset.results.parameters import K0
from relayset.results.settings import (
    Check,
    LoadCheck,
    SettingsResult,
    SettingWarning,
    SourceEnd,
    ZoneSetting,
)

ZONE_LABELS = {"zone1": "Zone 1", "zone2": "Zone 2", "zone3": "Zone 3", "reverse": "Reverse zone"}
_SOURCE = "<settings inputs>"


# --------------------------------------------------------------------------- inputs


def _real(name: str, value: Any, *, gt: float | None = None, ge: float | None = None,
          lt: float | None = None) -> float:
    if isinstance(value, bool) or not isinstance(value, int | float | np.floating | np.integer):
        raise InputError("must be a number", field=name, value=value, source=_SOURCE)
    x = float(value)
    if not math.isfinite(x):
        raise InputError("must be a finite number", field=name, value=value, source=_SOURCE)
    if gt is not None and not x > gt:
        raise InputError(f"must be greater than {gt:g}", field=name, value=x, source=_SOURCE)
    if ge is not None and not x >= ge:
        raise InputError(f"must be at least {ge:g}", field=name, value=x, source=_SOURCE)
    if lt is not None and not x < lt:
        raise InputError(f"must be less than {lt:g}", field=name, value=x, source=_SOURCE)
    return x


def _cplx(name: str, value: Any, *, inductive: bool = False) -> complex:
    if isinstance(value, bool) or not isinstance(value, int | float | complex | np.number):
        raise InputError("must be a complex number", field=name, value=value, source=_SOURCE)
    z = complex(value)
    if not (math.isfinite(z.real) and math.isfinite(z.imag)):
        raise InputError("must be finite", field=name, value=value, source=_SOURCE)
    if inductive and not (z.real >= 0 and z.imag > 0):
        raise InputError(
            "must have R >= 0 and X > 0 (an inductive line or source impedance)",
            field=name, value=z, source=_SOURCE,
        )
    return z


def _lines(name: str, value: Any) -> tuple[tuple[str, complex], ...]:
    if isinstance(value, str | bytes) or not isinstance(value, Sequence):
        raise InputError("must be a list of (name, z1_ohm) pairs", field=name, value=value,
                         source=_SOURCE)
    out = []
    for i, item in enumerate(value):
        if not (isinstance(item, Sequence) and len(item) == 2 and isinstance(item[0], str)
                and item[0].strip()):
            raise InputError("must be a (name, z1_ohm) pair", field=f"{name}[{i}]", value=item,
                             source=_SOURCE)
        out.append((item[0], _cplx(f"{name}[{i}].z1_ohm", item[1], inductive=True)))
    return tuple(out)


@dataclass(frozen=True)
class SettingsInputs:
    """Line, instrument-transformer, load, network and reach-study data for one relay.

    Parameters
    ----------
    z1_line_ohm, z0_line_ohm : complex
        Positive- and zero-sequence impedance of the whole protected line [ohm].
    length_m : float
        Line length [m].
    ct_ratio, vt_ratio : float
        Instrument-transformer ratios, primary over secondary [1] (e.g. 800/1, 132000/110).
    v_nominal_ll_v : float
        Nominal line-to-line voltage [V].
    s_max_va : float
        Largest three-phase load through the line [VA].
    v_min_pu : float
        Lowest operating voltage at that load [pu of nominal].
    load_angle_max_rad : float
        Largest load (power-factor) angle of the load range [rad], 0 <= angle < π/2.
    k0 : complex, optional
        Residual compensation factor (e.g. from the reach study); default (Z0 − Z1)/(3 Z1).
    k0m : complex, optional
        Mutual compensation factor of a double-circuit line, Z0m/(3 Z1) [1]; reported only.
    adjacent_lines : sequence of (name, z1_ohm)
        Lines leaving the remote bus [ohm].
    reverse_lines : sequence of (name, z1_ohm)
        Lines leaving the relay bus behind the relay [ohm].
    source_z1_relay_ohm, source_z1_remote_ohm : complex, optional
        Positive-sequence source impedance behind the relay and behind the remote bus [ohm].
    arc_current_a : float, optional
        Fault current through the arc [A] (quadrilateral); see the module notes for the default.
    arc_length_phase_m, arc_length_ground_m : float, optional
        Arc lengths for phase faults (phase spacing) and ground faults (insulator flashover
        length) [m]; needed for a quadrilateral characteristic.
    tower_footing_ohm : float
        Tower footing resistance added to ground-fault resistance [ohm].
    recommended_zone1_pct : float, optional
        Zone 1 reach recommended by the untransposition reach study [% of the line].
    worst_overreach_pct : float, optional
        Worst-case zone 1 overreach found by the reach study [% of the zone 1 setting].
    """

    z1_line_ohm: complex
    z0_line_ohm: complex
    length_m: float
    ct_ratio: float
    vt_ratio: float
    v_nominal_ll_v: float
    s_max_va: float
    v_min_pu: float
    load_angle_max_rad: float
    k0: complex | None = None
    k0m: complex | None = None
    adjacent_lines: Sequence[tuple[str, complex]] = ()
    reverse_lines: Sequence[tuple[str, complex]] = ()
    source_z1_relay_ohm: complex | None = None
    source_z1_remote_ohm: complex | None = None
    arc_current_a: float | None = None
    arc_length_phase_m: float | None = None
    arc_length_ground_m: float | None = None
    tower_footing_ohm: float = 0.0
    recommended_zone1_pct: float | None = None
    worst_overreach_pct: float | None = None

    def __post_init__(self) -> None:
        def put(name: str, value: Any) -> None:
            object.__setattr__(self, name, value)

        put("z1_line_ohm", _cplx("z1_line_ohm", self.z1_line_ohm, inductive=True))
        z0 = _cplx("z0_line_ohm", self.z0_line_ohm, inductive=True)
        put("z0_line_ohm", z0)
        put("length_m", _real("length_m", self.length_m, gt=0))
        put("ct_ratio", _real("ct_ratio", self.ct_ratio, gt=0))
        put("vt_ratio", _real("vt_ratio", self.vt_ratio, gt=0))
        put("v_nominal_ll_v", _real("v_nominal_ll_v", self.v_nominal_ll_v, gt=0))
        put("s_max_va", _real("s_max_va", self.s_max_va, gt=0))
        put("v_min_pu", _real("v_min_pu", self.v_min_pu, gt=0, lt=2))
        put("load_angle_max_rad",
            _real("load_angle_max_rad", self.load_angle_max_rad, ge=0, lt=math.pi / 2))
        if self.k0 is not None:
            k0 = _cplx("k0", self.k0)
            if abs(1 + 3 * k0) == 0:
                raise InputError("must not equal -1/3", field="k0", value=k0, source=_SOURCE)
            put("k0", k0)
        if self.k0m is not None:
            put("k0m", _cplx("k0m", self.k0m))
        put("adjacent_lines", _lines("adjacent_lines", self.adjacent_lines))
        put("reverse_lines", _lines("reverse_lines", self.reverse_lines))
        for name in ("source_z1_relay_ohm", "source_z1_remote_ohm"):
            if getattr(self, name) is not None:
                put(name, _cplx(name, getattr(self, name), inductive=True))
        for name in ("arc_current_a", "arc_length_phase_m", "arc_length_ground_m"):
            if getattr(self, name) is not None:
                put(name, _real(name, getattr(self, name), gt=0))
        put("tower_footing_ohm", _real("tower_footing_ohm", self.tower_footing_ohm, ge=0))
        if self.recommended_zone1_pct is not None:
            put("recommended_zone1_pct",
                _real("recommended_zone1_pct", self.recommended_zone1_pct, gt=0, lt=100))
        if self.worst_overreach_pct is not None:
            put("worst_overreach_pct",
                _real("worst_overreach_pct", self.worst_overreach_pct, gt=-100))


# --------------------------------------------------------------------------- results


# --------------------------------------------------------------------------- calculation


@dataclass
class _Work:
    """Mutable scratch state of one calculation."""

    inputs: SettingsInputs
    ph: Philosophy
    warnings: list[SettingWarning] = field(default_factory=list)

    def warn(self, rule_id: str, message: str, consider: str) -> None:
        self.warnings.append(SettingWarning(rule_id, message, consider))


def _infeed(w: _Work, zone: str, mode: str, factor: float) -> tuple[complex, str]:
    i = w.inputs
    if mode == "given":
        return complex(factor), f"infeed factor {factor:g} (given)"
    if i.source_z1_relay_ohm is None or i.source_z1_remote_ohm is None:
        w.warn(
            f"{zone}_infeed_not_computed",
            f"{ZONE_LABELS[zone]}: infeed factor set to 'computed' but the source impedance at "
            "the relay end or the remote end is not given; K = 1 (no infeed) used",
            "give both source impedances, or set the infeed factor in the philosophy",
        )
        return 1.0 + 0j, "infeed factor 1 (sources not given)"
    k = complex(zp.infeed_factor(i.source_z1_relay_ohm, i.z1_line_ohm, i.source_z1_remote_ohm))
    return k, f"infeed factor {abs(k):.3g} (computed from the sources)"


def _zone1_target(w: _Work) -> tuple[complex, str, list[Check]]:
    i, z1 = w.inputs, w.ph.zone1
    pct = z1.reach_pct
    rule = f"{pct:g} % of the line"
    limit = 100.0 - z1.min_margin_pct
    rec, over = i.recommended_zone1_pct, i.worst_overreach_pct
    # The recommendation already carries the error budget: below the setting, it rules.
    exceeds = rec is not None and rec < pct
    if over is not None:
        exceeds = exceeds or pct * (1 + over / 100) > limit
    if exceeds and z1.reduce_to_reach_study and rec is not None and rec < pct:
        w.warn(
            "zone1_reduced_by_reach_study",
            f"Zone 1 reduced from {pct:g} % to the reach study's recommended {rec:g} % of the "
            "line (worst-case overreach plus the error budget exceed the margin)",
            "check the reach study's assumptions (transposition, earth resistivity)",
        )
        rule = f"{rec:g} % of the line (reach study recommendation; philosophy {pct:g} %)"
        pct = rec
    elif exceeds:
        w.warn(
            "zone1_overreach_exceeds_margin",
            f"Zone 1 at {pct:g} % of the line may overreach past the margin of "
            f"{z1.min_margin_pct:g} % short of the remote bus",
            "reduce zone 1 (to the reach study's recommended value if given), or allow the "
            "automatic reduction in the philosophy",
        )
    checks = []
    if over is not None:
        eff = pct * (1 + over / 100)
        checks.append(Check(
            "reach_study_margin", eff <= limit,
            f"worst-case reach {eff:.4g} % of the line against the limit {limit:g} %",
        ))
    return pct / 100 * i.z1_line_ohm, rule, checks


def _adjacent(lines: Sequence[tuple[str, complex]], longest: bool) -> tuple[str, complex]:
    pick = max if longest else min
    return pick(lines, key=lambda nl: abs(nl[1]))


def _zone2_target(w: _Work) -> tuple[complex, str, complex]:
    i, z2 = w.inputs, w.ph.zone2
    zl = i.z1_line_ohm
    by_line = z2.reach_pct / 100 * zl
    text_line = f"{z2.reach_pct:g} % of the line"
    if z2.rule == "line_pct":
        return by_line, text_line, 1.0 + 0j
    if not i.adjacent_lines:
        return by_line, text_line + " (no adjacent line given)", 1.0 + 0j
    k, k_text = _infeed(w, "zone2", z2.infeed, z2.infeed_factor)
    name, zadj = _adjacent(i.adjacent_lines, longest=False)
    by_adj = zl + k * (z2.adjacent_pct / 100) * zadj
    text_adj = f"line + {z2.adjacent_pct:g} % of the shortest adjacent line '{name}', {k_text}"
    if z2.rule == "line_plus_adjacent" or abs(by_adj) >= abs(by_line):
        suffix = f" (longer than {text_line})" if z2.rule == "max_of_both" else ""
        return by_adj, text_adj + suffix, k
    return by_line, f"{text_line} (longer than {text_adj})", 1.0 + 0j


def _zone3_target(w: _Work) -> tuple[complex, str, complex]:
    i, z3 = w.inputs, w.ph.zone3
    zl = i.z1_line_ohm
    text_line = f"{z3.reach_pct:g} % of the line"
    if z3.rule == "line_pct":
        return z3.reach_pct / 100 * zl, text_line, 1.0 + 0j
    if not i.adjacent_lines:
        return z3.reach_pct / 100 * zl, text_line + " (no adjacent line given)", 1.0 + 0j
    k, k_text = _infeed(w, "zone3", z3.infeed, z3.infeed_factor)
    name, zadj = _adjacent(i.adjacent_lines, longest=True)
    return (zl + k * (z3.adjacent_pct / 100) * zadj,
            f"line + {z3.adjacent_pct:g} % of the longest adjacent line '{name}', {k_text}", k)


def _reverse_target(w: _Work) -> tuple[complex, str]:
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
    name, zb = _adjacent(i.reverse_lines, longest=False)
    return (-(rv.behind_pct / 100) * zb,
            f"{rv.behind_pct:g} % of the shortest line behind the relay '{name}', reverse")


def _arc_current(i: SettingsInputs) -> float | None:
    if i.arc_current_a is not None:
        return i.arc_current_a
    if i.source_z1_relay_ohm is None:
        return None
    # Phase-to-phase fault at the remote bus fed from the relay end alone: the smallest
    # current and so the largest arc resistance the zones must cover.
    return i.v_nominal_ll_v / abs(2 * (i.source_z1_relay_ohm + i.z1_line_ohm))


def _load_rays(phi_max: float, extra: Sequence[float] = ()) -> np.ndarray:
    """Ray angles of the load ranges (export around 0, import around π) [rad].

    The distance from the origin to a straight edge is largest at the edge's ends, so a
    dense grid plus the shape's corner (or mho diameter) angles inside the ranges gives the
    largest reach over the range exactly.
    """
    fwd = np.linspace(-phi_max, phi_max, 721)
    rays = [fwd, np.pi + fwd]
    for a in extra:
        for centre in (0.0, np.pi):
            d = math.remainder(a - centre, 2 * math.pi)
            if abs(d) <= phi_max:
                rays.append(np.array([centre + d]))
    return np.concatenate(rays)


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
    w = _Work(i, ph)
    zl = i.z1_line_ohm
    theta = cmath.phase(zl)
    fsec = i.ct_ratio / i.vt_ratio

    def sec(x: Any) -> Any:
        z = zp.secondary_ohm(x, i.ct_ratio, i.vt_ratio)
        return complex(z) if isinstance(x, complex) else float(z)

    # k0 in three forms, all from one k0 (given, or from the line totals).
    k0_calc = complex(residual_compensation(zl, i.z0_line_ohm))
    k0 = i.k0 if i.k0 is not None else k0_calc
    z0_eff = zl * (1 + 3 * k0)
    if i.k0 is not None and abs(z0_eff - i.z0_line_ohm) > 1e-3 * abs(i.z0_line_ohm):
        w.warn(
            "k0_differs_from_line",
            f"the given k0 = {abs(k0):.4g}∠{math.degrees(cmath.phase(k0)):.2f}° differs from "
            f"(Z0 − Z1)/(3 Z1) = {abs(k0_calc):.4g}∠{math.degrees(cmath.phase(k0_calc)):.2f}° "
            "of the line totals; the given k0 is used",
            "check which k0 the relay should use (e.g. the reach study's effective value)",
        )
    kr, kx = residual_compensation_split(zl, z0_eff)
    k0_forms = K0(k0=k0, kr=float(kr), kx=float(kx), z0_over_z1=1 + 3 * k0)

    # Load.
    z_load = float(zp.min_load_impedance_ohm(i.v_min_pu * i.v_nominal_ll_v, i.s_max_va))
    phi = i.load_angle_max_rad
    enc_pct = ph.load.encroachment_limit_pct

    # Sources: SIR and line class.
    sources = []
    for end, zs in (("relay", i.source_z1_relay_ohm), ("remote", i.source_z1_remote_ohm)):
        if zs is not None:
            s = float(zp.sir(zs, zl))
            sources.append(SourceEnd(end, zs, s, str(zp.line_class(s))))
    if sources and sources[0].end == "relay" and sources[0].line_class == "short":
        w.warn(
            "short_line",
            f"short line by SIR (SIR = {sources[0].sir:.3g} >= {zp.SIR_SHORT_MIN:g} at the relay "
            "end): zone 1 underreach accuracy is poor",
            "consider a pilot scheme or line differential protection, and a shorter zone 1",
        )

    # Quadrilateral data.
    quad = ph.characteristic.shape == "quadrilateral"
    arc_i = _arc_current(i)
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
                "leaves no room for a resistive blinder (the load angle reaches the line angle)",
                field="load_angle_max_rad", value=phi, source=_SOURCE,
            )
    if ph.characteristic.mho_angle_deg == "line":
        char_angle = theta
    else:
        char_angle = math.radians(float(ph.characteristic.mho_angle_deg))

    # Zone targets.
    t1, rule1, checks1 = _zone1_target(w)
    t2, rule2, k2 = _zone2_target(w)
    t3, rule3, k3 = _zone3_target(w)
    tr, ruler = _reverse_target(w)
    specs = [
        ("zone1", t1, rule1, ph.zone1.delay_s, None, checks1),
        ("zone2", t2, rule2, ph.zone2.delay_s, k2, []),
        ("zone3", t3, rule3, ph.zone3.delay_s, k3, []),
        ("reverse", tr, ruler, ph.reverse.delay_s, None, []),
    ]

    built: list[ZoneSetting] = []
    for zone, target, rule, delay, k, checks in specs:
        label = ZONE_LABELS[zone]
        forward = zone != "reverse"
        mho: dict[str, Any] = dict(char_angle_rad=None, mho_diameter_primary_ohm=None,
                                   mho_diameter_secondary_ohm=None)
        qd: dict[str, Any] = dict(
            x_reach_primary_ohm=None, x_reach_secondary_ohm=None,
            r_reach_phase_primary_ohm=None, r_reach_phase_secondary_ohm=None,
            r_reach_ground_primary_ohm=None, r_reach_ground_secondary_ohm=None,
            arc_resistance_phase_ohm=None, arc_resistance_ground_ohm=None,
        )
        if not quad:
            ang = char_angle if forward else math.remainder(char_angle + math.pi, 2 * math.pi)
            d = float(zp.mho_diameter_for_point_ohm(target, ang))
            mho.update(char_angle_rad=ang, mho_diameter_primary_ohm=d,
                       mho_diameter_secondary_ohm=sec(d))
            reach_load = zp.mho_reach_along_ohm(d, ang, _load_rays(phi, [ang]))
        else:
            rs = ph.resistive
            t_arc = delay if rs.arc_time_s == "zone_delay" else float(rs.arc_time_s)
            ra_ph = float(zp.warrington_arc_resistance_ohm(
                arc_i, i.arc_length_phase_m, rs.wind_speed_m_per_s, t_arc))
            ra_g = float(zp.warrington_arc_resistance_ohm(
                arc_i, i.arc_length_ground_m, rs.wind_speed_m_per_s, t_arc))
            m = 1 + rs.margin_pct / 100
            r_ph = m * ra_ph / 2
            r_g = m * (ra_g + i.tower_footing_ohm) / abs(1 + k0)
            cut = max(r_ph, r_g) > r_limit
            checks.append(Check(
                "resistive_load_limit", not cut,
                f"resistive reach phase {r_ph:.4g} Ω, ground {r_g:.4g} Ω against the load "
                f"limit {r_limit:.4g} Ω (primary)",
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
            x = float(target.imag if forward else -target.imag)
            qd.update(
                x_reach_primary_ohm=x, x_reach_secondary_ohm=sec(x),
                r_reach_phase_primary_ohm=r_ph, r_reach_phase_secondary_ohm=sec(r_ph),
                r_reach_ground_primary_ohm=r_g, r_reach_ground_secondary_ohm=sec(r_g),
                arc_resistance_phase_ohm=ra_ph, arc_resistance_ground_ohm=ra_g,
            )
            reach_load = np.concatenate([
                zp.quad_reach_along_ohm(
                    x, r, theta,
                    _load_rays(phi, np.angle(zp.quad_vertices_ohm(x, r, theta, forward=forward))),
                    forward=forward)
                for r in (r_ph, r_g)
            ])
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
        built.append(ZoneSetting(
            zone=zone, label=label, direction="forward" if forward else "reverse", rule=rule,
            reach_primary_ohm=complex(target), reach_secondary_ohm=sec(complex(target)),
            reach_pct=abs(target) / abs(zl) * 100, delay_s=delay,
            shape=ph.characteristic.shape, infeed_factor=k, **mho, **qd,
            load_reach_pct_of_min=load_pct, checks=tuple(checks),
        ))

    zs = {z.zone: z for z in built}
    # Zone 2 against the adjacent line's zone 1, without infeed (the furthest zone 2 reaches).
    z2p = ph.zone2
    if z2p.check_adjacent_zone1 and i.adjacent_lines:
        name, zadj = _adjacent(i.adjacent_lines, longest=False)
        point = zl + z2p.adjacent_zone1_pct / 100 * zadj
        past = bool(zs["zone2"].contains(point, theta))
        _add_check(zs, "zone2", Check(
            "past_adjacent_zone1", not past,
            f"end of zone 1 of '{name}' ({z2p.adjacent_zone1_pct:g} % of it, "
            f"{abs(point):.4g} Ω from the relay) is {'inside' if past else 'outside'} zone 2",
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
