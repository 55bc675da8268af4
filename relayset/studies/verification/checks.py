r"""Verification checks: the zones as set against the simulated envelope.

The settings are derived from line data and rules; this module closes the loop. It solves
the real (untransposed or partly transposed) line in the phase domain with
:func:`relayset.physics.network.solve_fault_sweep` for every fault type, location, fault
resistance, source case, load case and parallel-circuit state, measures the six loops of
the relay at each end as the relay does (its k0 and, where set, k0m), and tests the
measured impedances against each zone's characteristic as set.

Margin
------
Each case is reduced to the *reach scale* s at which it would sit on the boundary if only
the zone's forward reach (mho diameter D, quadrilateral reactive reach X) were scaled, the
resistive blinders and the directional line kept:

.. math:: s_{mho} = \frac{|Z|^2}{D\,\mathrm{Re}(Z e^{-j\theta})},\qquad
          s_{quad} = \frac{\mathrm{Im}\,Z}{X}\ \text{(inside the blinders)}

(s = ∞ where no reach makes the zone operate: behind it or outside its blinders). A zone
that must not operate has margin (s − 1)·100 %; one that must operate (1 − s)·100 %.
Both are in percent of the zone's reach. The verification tolerance t (the study's error
budget) is the margin required of "must not operate" checks and of zone 2's coverage; zone 1
must operate with margin ≥ 0 for faults up to (1 − t) of its reach.

Which loops measure, the directional elements and the release currents are the relay
model's (:mod:`relayset.studies.verification.relay_model`).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, replace

import numpy as np

from relayset.errors import InputError
from relayset.inputs.philosophy import Philosophy, default_philosophy
from relayset.inputs.study_file import Study
from relayset.physics.arrays import unique_sorted
from relayset.results.parameters import LineParameters
from relayset.results.reach import fault_label, loop_label
from relayset.results.settings import SettingsResult, ZoneSetting
from relayset.results.verification import (
    EndVerification,
    InfeedRange,
    VerificationCase,
    VerificationResult,
    ZoneVerification,
)
from relayset.studies.geometry import LineGeometry
from relayset.studies.series_capacitors import x_c_in_path_ohm
from relayset.studies.verification import deviations, equipment, scheme
from relayset.studies.verification.envelope import Envelope, build_envelope
from relayset.studies.verification.relay_model import (
    LOOPS,
    Measure,
    RelayModel,
    View,
    relay_view,
    zone_scale,
)
from relayset.studies.verification.simulation import Simulation, infeed_samples, simulate

#: Fault location step of the verification sweep [% of the line] (common practice, no source).
STEP_PCT = 10.0

MUTUAL_REMEDY = (
    "supervise mutual compensation so that it acts only while the protected circuit's own "
    "residual current is the larger of the two circuits' residual currents (a fault on the "
    "parallel circuit then leaves zone 1 uncompensated), or turn mutual compensation off "
    "for zone 1 and keep it for the overreaching zones"
)


# --------------------------------------------------------------------------- reach scale


def reach_scale(z: np.ndarray, zone: ZoneSetting, ground: bool, line_angle_rad: float
                ) -> np.ndarray:
    """Reach scale s of impedances against a zone (see the module notes); inf: never."""
    return zone.characteristic(ground, line_angle_rad).reach_scale(z)


# --------------------------------------------------------------------------- checks


@dataclass
class _Acc:
    """Accumulates one check over runs: worst margin and its case."""

    must_operate: bool
    n_run: int = 0
    n_fail: int = 0
    n_insensitive: int = 0  #: cases no loop measured for lack of current
    worst: float = math.inf
    case: VerificationCase | None = None

    def add(self, margin: np.ndarray, mask: np.ndarray, required: float, describe,
            insensitive: np.ndarray | None = None) -> None:
        mask = np.broadcast_to(mask, margin.shape)
        if insensitive is not None:
            # Below the release currents the relay does not measure: a sensitivity finding,
            # reported apart, not a trip (nor a failure to trip).
            self.n_insensitive += int(np.count_nonzero(mask & insensitive))
            mask = mask & ~insensitive
        margin = np.where(mask, margin, np.inf)
        self.n_run += int(np.count_nonzero(mask))
        self.n_fail += int(np.count_nonzero(mask & ~(margin >= required - 1e-9)))
        if not np.any(mask):
            return
        idx = np.unravel_index(int(np.argmin(margin)), margin.shape)
        if margin[idx] < self.worst or self.case is None:
            self.worst = float(margin[idx])
            self.case = describe(idx)


def _describe(vw: View, which: np.ndarray, labels, faulted: str, rf_pairs):
    sw, run = vw.run.sweep, vw.run

    def fn(idx):
        f, k_m, k_rf, k_s, k_l = idx
        j = int(which[idx])
        loop = LOOPS[j]
        ang = math.degrees(float(sw.transfer_angle_rad[k_s, k_l]))
        return VerificationCase(
            fault_type=fault_label(sw.fault_types[f], labels), faulted=faulted,
            location_pct=float(100 * vw.m_end[k_m]), r_fault_ohm=float(rf_pairs[k_rf, 0]),
            r_phase_ohm=float(rf_pairs[k_rf, 1]), source_case=run.case_names[k_s],
            transfer_angle_deg=round(ang, 6), parallel_state=run.state,
            earth_resistivity_ohm_m=run.rho_ohm_m, loop=loop_label(loop, labels),
            z_apparent_primary_ohm=vw.loop_at(loop, idx),
            mutual_compensation=bool(np.broadcast_to(vw.mutual, which.shape)[idx]),
            capacitor_state=run.cap_state or None)
    return fn


def _finish(zone: str, check_id: str, requirement: str, acc: _Acc, required: float,
            consider: str) -> ZoneVerification:
    margin = None if not math.isfinite(acc.worst) else acc.worst
    passed = acc.n_fail == 0
    return ZoneVerification(zone, check_id, requirement, acc.n_run, acc.n_fail, margin,
                            required, passed, None if passed and margin is None else acc.case,
                            "" if passed else consider, acc.n_insensitive)


#: Where a fault is declared reverse (current inversion), a longer reach does not help.
_NO_REACH_HELPS = ("; no reach helps where the governing case is declared reverse by the "
                   "directional element (e.g. current inversion at a series capacitor): "
                   "there rely on the pilot scheme or other protection")


def resistive_target(zone: ZoneSetting, tower_ohm: float) -> tuple[float, float]:
    """(R_g, R_ph) a zone must cover [ohm]: its arc plus tower footing to ground and its arc
    between phases, for every shape (a mho zone included: its circle must reach them too);
    bolted (0, 0) for a zone without resistive target (the reverse and zone 3 zones)."""
    if (zone.arc_resistance_ground_ohm is not None and zone.arc_resistance_phase_ohm is not None
            and zone.zone in ("zone1", "zone2")):
        return zone.arc_resistance_ground_ohm + tower_ohm, zone.arc_resistance_phase_ohm
    return 0.0, 0.0


def rf_mask(rf_pairs: np.ndarray, zone: ZoneSetting, tower_ohm: float) -> np.ndarray:
    """Fault resistances a zone must cover (see :func:`resistive_target`)."""
    rg, rp = resistive_target(zone, tower_ohm)
    return (rf_pairs[:, 0] <= rg * (1 + 1e-9)) & (rf_pairs[:, 1] <= rp * (1 + 1e-9))


def resistive_targets(study: Study, settings: Sequence[SettingsResult]
                      ) -> list[tuple[float, float]]:
    """The resistive targets of every quadrilateral zone 1 and zone 2 [ohm], for the
    envelope's resistance grids."""
    tower = study.fault_resistance.tower_footing_resistance
    return [resistive_target(z, tower) for st in settings for z in st.zones
            if z.zone in ("zone1", "zone2") and z.arc_resistance_ground_ohm is not None]


def infeed_range(sim: Simulation, end: str) -> InfeedRange | None:
    """Infeed factor K = I_fault / I_relay for bolted three-phase faults at the remote bus.

    With the fault at the remote bus R the relay at S measures the line, and for a fault a
    further impedance Z_x along a line leaving R it measures Z_L + K Z_x, K the ratio of the
    current into the adjacent line (the fault current at R) to the relay current: the
    classical infeed factor, here from the simulation, so it includes the parallel circuit
    and every source case and parallel-circuit state (phase loop A-B). The relay current is
    the fault's incremental current (total less prefault), so load does not enter K.
    """
    at_s = end == sim.names[0]
    ks, descr = [], []
    for run in sim.runs:
        for k, d in infeed_samples(run, at_s):
            ks.append(k)
            descr.append(d)
    if not ks:
        return None
    mags = np.abs(ks)
    lo, hi = int(np.argmin(mags)), int(np.argmax(mags))
    return InfeedRange(ks[lo], ks[hi], descr[lo], descr[hi])


def zone1_limit_pct(sim: Simulation, end: str, st: SettingsResult, tolerance_pct: float,
                    margin_pct: float, model: RelayModel, worst: float | None = None
                    ) -> float | None:
    """Longest zone 1 [% of line] whose faults at the remote bus keep the tolerance.

    The reach scale of every remote-bus fault (every state, source, load case and fault
    resistance) is inversely proportional to the zone 1 reach, so the limit is the present
    reach times the smallest scale, less the tolerance and the margin; rounded down to 0.5 %.
    ``worst`` is that smallest scale where the caller has it already.
    """
    if worst is None:
        worst = worst_remote_bus_scale(sim, end, st, model)
    if worst is None:
        return None
    lim = st.zone("zone1").reach_pct * worst * (1 - margin_pct / 100) / (1 + tolerance_pct / 100)
    return math.floor(lim * 2 + 1e-9) / 2


def verify_end(sim: Simulation, end: str, st: SettingsResult, *, study: Study,
               tolerance_pct: float, remote: SettingsResult | None, source: str,
               model: RelayModel, zone2_adjacent_zone1_pct: float = 80.0,
               philosophy: Philosophy | None = None) -> EndVerification:
    """Every check of the zones of the relay at ``end`` (the zone 2 grading and the scheme
    checks as ``philosophy`` states them; default: the default philosophy)."""
    ph = _philosophy(philosophy, zone2_adjacent_zone1_pct)
    at_s = end == sim.names[0]
    other = sim.names[1] if at_s else sim.names[0]
    theta = st.line_angle_rad
    zl = abs(st.line_z1_primary_ohm)
    t = tolerance_pct
    k0m = st.k0m if sim.mutual else None
    tower = study.fault_resistance.tower_footing_resistance
    z1, z2, z3 = (st.zone(n) for n in ("zone1", "zone2", "zone3"))
    r1 = z1.reach_pct / 100
    acc = {k: _Acc(mo) for k, mo in (("z1_int", True), ("z2_int", True), ("z1_ext", False),
                                     ("z1_par", False), ("z1_par_nomut", False),
                                     ("z1_seq", False), ("z1_nb", False),
                                     ("fwd_behind", False))}
    labels = sim.labels
    worst_bus = math.inf  # smallest zone 1 reach scale at the remote bus (its limit)
    par_runs = []  # parallel-circuit runs, judged again without mutual compensation
    for run in sim.runs:
        if run.faulted == "branch":  # faults along the lines leaving the buses: .branches
            continue
        sw = run.sweep
        rfp = np.stack([sw.r_fault_ohm, sw.r_phase_ohm], axis=1)
        rf_ax = (None, None, slice(None), None, None)
        if run.faulted == "protected":
            # One view of the run serves every zone; each zone's scales are formed once.
            v = relay_view(run, at_s, st.k0.k0, k0m, model, line_angle=theta)
            m_ax = v.m_end[None, :, None, None, None]
            sc1 = zone_scale(v, z1, theta, zl, model)
            sc2 = zone_scale(v, z2, theta, zl, model)
            s1, ins = sc1.scale, sc1.insensitive
            d1 = _describe(v, sc1.which, labels, "protected line", rfp)
            mask_rf1 = rf_mask(rfp, z1, tower)[rf_ax]
            mask_rf2 = rf_mask(rfp, z2, tower)[rf_ax]
            every = np.ones(s1.shape, dtype=bool)
            # With no source behind the relay it sees no fault current: that is a weak-infeed
            # (pilot scheme) matter, not one of the zone's reach.
            fed = every & run.sources[0 if at_s else 1]
            in1 = (m_ax <= r1 * (1 - t / 100) + 1e-9) & mask_rf1 & fed
            acc["z1_int"].add((1 - sc1.scale_in) * 100, in1, 0.0,
                              _describe(v, sc1.which_in, labels, "protected line", rfp), ins)
            acc["z2_int"].add((1 - sc2.scale_in) * 100, mask_rf2 & fed, t,
                              _describe(v, sc2.which_in, labels, "protected line", rfp),
                              sc2.insensitive)
            at_bus = np.isclose(m_ax, 1.0) & every
            acc["z1_ext"].add((s1 - 1) * 100, at_bus, t, d1, ins)
            if np.any(at_bus):
                worst_bus = min(worst_bus, float(np.min(np.where(at_bus, s1, np.inf))))
            # Faults at the relay's own bus, behind it, every type and resistance; bolted
            # ones with a vanishing loop voltage are the memory polarisation's. Only the
            # own-bus locations are measured.
            vb = relay_view(run, at_s, st.k0.k0, k0m, model, line_angle=theta, behind=True)
            if vb is not None:
                for zone in (z1, z2, z3):
                    sb = zone_scale(vb, zone, theta, zl, model)
                    acc["fwd_behind"].add(
                        (sb.scale - 1) * 100, np.ones(sb.scale.shape, dtype=bool), t,
                        _describe(vb, sb.which, labels, "behind the relay", rfp),
                        sb.insensitive)
        elif run.faulted == "neighbour":
            # A fault on the neighbouring line of a shared corridor: external, as a
            # parallel-circuit fault, but on other buses (no mutual compensation).
            v = relay_view(run, at_s, st.k0.k0, k0m, model, line_angle=theta)
            sc = zone_scale(v, z1, theta, zl, model)
            what = ("neighbouring line" if len(sim.neighbour_names) <= 1 else
                    f"neighbouring line {sim.neighbour_names[run.neighbour]}")
            acc["z1_nb"].add((sc.scale - 1) * 100, np.ones(sc.scale.shape, dtype=bool), t,
                             _describe(v, sc.which, labels, what, rfp), sc.insensitive)
        else:
            # Sequential clearing: the parallel circuit's breaker at one end already open.
            seq = bool(run.open_at)
            what = (f"parallel circuit, its breaker at {run.open_at} open" if seq
                    else "parallel circuit")
            if not seq:  # (sequential clearing is judged as set only)
                par_runs.append((run, "z1_par_nomut", what, rfp))
            v = relay_view(run, at_s, st.k0.k0, k0m, model, line_angle=theta)
            sc = zone_scale(v, z1, theta, zl, model)
            acc["z1_seq" if seq else "z1_par"].add(
                (sc.scale - 1) * 100, np.ones(sc.scale.shape, dtype=bool), t,
                _describe(v, sc.which, labels, what, rfp), sc.insensitive)
    # Without mutual compensation, judged only where it names the remedy: a failure with it.
    for run, key, what, rfp in par_runs:
        if acc[key.replace("_nomut", "")].n_fail == 0:
            continue
        v = relay_view(run, at_s, st.k0.k0, None, model, line_angle=theta)
        sc = zone_scale(v, z1, theta, zl, model)
        acc[key].add((sc.scale - 1) * 100, np.ones(sc.scale.shape, dtype=bool), t,
                     _describe(v, sc.which, labels, what, rfp), sc.insensitive)
    checks = [
        _finish("zone1", "operates_for_internal_faults",
                f"zone 1 operates for every fault up to (1 − {t:g} %) of its reach "
                f"({100 * r1 * (1 - t / 100):.4g} % of the line), fault resistance up to its "
                "resistive target", acc["z1_int"], 0.0,
                "lengthen zone 1's resistive reach (if load allows) or accept the shorter "
                "coverage and rely on a pilot scheme" + _NO_REACH_HELPS),
        _finish("zone1", "no_operation_at_remote_bus",
                f"zone 1 does not operate for any fault at the remote bus {other} (all "
                "parallel-circuit states, sources, loads, fault resistances) with "
                f"{t:g} % margin", acc["z1_ext"], t,
                "shorten zone 1 (the verification's zone 1 limit), or reduce its resistive "
                "reach where resistive faults govern"),
    ]
    if acc["z1_par"].n_run:
        par = acc["z1_par"]
        consider = (MUTUAL_REMEDY if sim.mutual and acc["z1_par_nomut"].n_fail == 0
                    else "shorten zone 1")
        checks.append(_finish(
            "zone1", "no_operation_for_parallel_circuit_faults",
            "zone 1 does not operate for any fault on the parallel circuit "
            f"({'with' if sim.mutual else 'without'} mutual compensation) with {t:g} % margin",
            par, t, consider))
    if acc["z1_nb"].n_run:
        checks.append(_finish(
            "zone1", "no_operation_for_neighbouring_line_faults",
            ("zone 1 does not operate for any fault on the neighbouring line of the shared "
             f"corridor (along the shared stretch, the neighbour in service) with {t:g} % "
             "margin" if len(sim.neighbour_names) <= 1 else
             "zone 1 does not operate for any fault on the neighbouring lines of the shared "
             f"corridors (each along its shared stretch, every line in service) with {t:g} % "
             "margin"), acc["z1_nb"], t,
            "shorten zone 1 (the relay cannot be given the neighbour's residual current)"))
    if acc["z1_seq"].n_run:
        seq = acc["z1_seq"]
        consider = ("shorten zone 1" + ("; or " + MUTUAL_REMEDY if sim.mutual else ""))
        checks.append(_finish(
            "zone1", "no_operation_for_sequential_clearing",
            "zone 1 does not operate for any fault on the parallel circuit while that "
            f"circuit's breaker at {end} (the relay's end), or at {other}, is open "
            f"({'with' if sim.mutual else 'without'} mutual compensation), every source and "
            f"load case, with {t:g} % margin", seq, t, consider))
    checks[0] = _resistive_need(checks[0], z1, theta, st)
    checks.append(_finish(
        "zone2", "covers_whole_line",
        f"zone 2 operates for every fault on the protected line up to {other} with {t:g} % "
        "margin (the error budget), fault resistance up to its resistive target",
        acc["z2_int"], t,
        "lengthen zone 2 until the worst underreach plus the error budget still covers the "
        "remote bus" + _NO_REACH_HELPS))
    checks[-1] = _resistive_need(checks[-1], z2, theta, st)
    checks.append(_finish(
        "forward", "no_operation_behind",
        "zones 1 to 3 do not operate for faults at the relay's own bus (behind it)",
        acc["fwd_behind"], t, "check the directional element and the left blinder"))
    checks += _beyond_bus_checks(sim, end, st, study=study, tolerance_pct=t, source=source,
                                 philosophy=ph)
    from relayset.studies.verification.branches import branch_checks

    checks += branch_checks(sim, end, st, study=study, tolerance_pct=t, model=model,
                            source=source)
    checks += _load_check(st, z3, t)
    checks.append(_targets_inside(st))
    checks += equipment.equipment_checks(sim, end, st, study=study, model=model,
                                         below=acc["z2_int"].n_insensitive)
    checks += scheme.scheme_checks(sim, end, st, remote, philosophy=ph, t=t, tower_ohm=tower,
                                   model=model, remote_model=relay_model_at(study, other),
                                   other=other)
    lim = zone1_limit_pct(sim, end, st, t, 0.0, model,
                          worst=worst_bus if math.isfinite(worst_bus) else None)
    return EndVerification(end, tuple(checks), infeed_range(sim, end), lim)


def _beyond_bus_checks(sim, end, st, *, study, tolerance_pct, source, philosophy):
    """Zone 2 graded as the philosophy says (:mod:`.scheme`); zone 3 coverage at maximum
    infeed."""
    from relayset.studies.settings import _lines_at

    names = sim.names
    remote_bus = names[1] if end == names[0] else names[0]
    lines = _lines_at(study, end, remote=True, source=source)
    inf = infeed_range(sim, end)
    if not lines or inf is None:
        return []
    theta = st.line_angle_rad
    z_l = st.line_z1_primary_ohm
    out = scheme.zone2_grading(st, philosophy.zone2, lines, inf, tolerance_pct, remote_bus,
                               x_c_in_path_ohm(sim.capacitors, end))
    name3, z3l = max(lines, key=lambda nl: abs(nl[1]))
    zone3 = st.zone("zone3")
    # Largest fraction x of the longest adjacent line inside zone 3 at maximum infeed.
    xs = np.linspace(0.0, 3.0, 3001)
    pts = z_l + inf.k_max * xs * z3l
    inside = zone3.reach_scale(pts, theta) <= 1.0
    cov = float(xs[np.argmin(inside)] if not inside.all() else xs[-1]) * 100
    if inside[0] is np.False_ or not inside[0]:
        cov = 0.0
    # Reported, not judged: how much remote backup zone 3 gives is the philosophy's choice.
    out.append(ZoneVerification(
        "zone3", "coverage_of_adjacent_line_at_max_infeed",
        f"zone 3 covers {cov:.4g} % of the longest adjacent line '{name3}' at the maximum "
        f"infeed K = {abs(inf.k_max):.3g} ({inf.case_max}) (reported)",
        1, 0, cov - 100.0, 0.0, True, None,
        "" if cov >= 100 else "beyond that point remote backup rests on the adjacent line's "
        "own protection and on breaker-failure protection"))
    out[-1] = replace(out[-1], required_margin_pct=None)  # reported, not judged
    return out


def _philosophy(ph: Philosophy | None, adjacent_zone1_pct: float) -> Philosophy:
    """The philosophy the checks follow (older callers give only the adjacent zone 1 %)."""
    if ph is not None:
        return ph
    base = default_philosophy()
    if adjacent_zone1_pct == base.zone2.adjacent_zone1_pct:
        return base
    return base.with_changes({"zone2": {"adjacent_zone1_pct": adjacent_zone1_pct}})


def _targets_inside(st: SettingsResult) -> ZoneVerification:
    """Each zone reaches the point its own rule aims at (quadrilateral blinders included)."""
    bad = []
    worst = math.inf
    for z in st.zones:
        s = float(z.reach_scale(np.array([z.reach_primary_ohm]), st.line_angle_rad)[0])
        worst = min(worst, (1 - s) * 100 if math.isfinite(s) else -math.inf)
        if not s <= 1 + 1e-9:
            bad.append(z.zone)
    ok = not bad
    return ZoneVerification(
        "all", "target_inside_own_zone",
        "every zone's characteristic contains the impedance its rule aims at", len(st.zones),
        len(bad), worst if math.isfinite(worst) else None, 0.0, ok, None,
        "" if ok else f"{', '.join(bad)}: the target lies outside the resistive blinders "
        "(its angle differs from the line angle); widen the left blinder or aim the rule "
        "along the line angle")


def _resistive_need(chk: ZoneVerification, zone: ZoneSetting, theta: float,
                    st: SettingsResult) -> ZoneVerification:
    """Add to a failed must-operate check the resistive reach its governing case needs."""
    g = chk.governing_case
    if chk.passed or g is None:
        return chk
    if zone.shape != "quadrilateral":
        # A mho zone's resistive coverage is its circle's: no blinder to widen.
        return replace(chk, consider=(
            f"the governing case goes through {g.r_fault_ohm:.4g} Ω to ground and "
            f"{g.r_phase_ohm:.4g} Ω between phases (arc plus tower footing), which the mho "
            "circle does not reach; cover such faults with a quadrilateral ground "
            "characteristic, or leave them to the line's ground overcurrent protection and "
            "record that as an accepted deviation"))
    z = g.z_apparent_primary_ohm
    need = z.real - z.imag / math.tan(theta)  # blinder offset through the case [ohm]
    ground = g.loop.endswith("-G")
    have = zone.r_reach_ground_primary_ohm if ground else zone.r_reach_phase_primary_ohm
    if need <= have:
        return chk
    limit = st.load.r_limit_primary_ohm
    text = (f"the governing case needs a resistive reach of {need:.4g} Ω for "
            f"{'ground' if ground else 'phase'} loops (set {have:.4g} Ω"
            + (f", load limit {limit:.4g} Ω" if limit is not None else "") + "): remote "
            "infeed raises the apparent fault resistance; ")
    return replace(chk, consider=text + chk.consider)


def _load_check(st: SettingsResult, z3: ZoneSetting, t: float) -> list[ZoneVerification]:
    """Zone 3 stays clear of the minimum load impedance over the load angles, both ways."""
    phi = st.load.load_angle_max_rad
    ang = np.concatenate([np.linspace(-phi, phi, 181), math.pi + np.linspace(-phi, phi, 181)])
    pts = st.load.z_min_primary_ohm * np.exp(1j * ang)
    s = z3.reach_scale(pts, st.line_angle_rad)
    k = int(np.argmin(s))
    margin = (float(s[k]) - 1) * 100 if math.isfinite(s[k]) else None
    ok = margin is None or margin >= t - 1e-9
    return [ZoneVerification(
        "zone3", "clear_of_load",
        f"zone 3 does not reach the minimum load impedance {st.load.z_min_primary_ohm:.4g} Ω "
        f"at load angles within ±{math.degrees(phi):g}° (both directions) with {t:g} % margin",
        ang.size, int(np.count_nonzero(s < 1 + t / 100)), margin, t, ok, None,
        "" if ok else "shorten zone 3 or add load-encroachment blocking")]


# --------------------------------------------------------------------------- entry point


def verification_grid(st_by_end: dict[str, SettingsResult], names, tolerance_pct: float
                      ) -> np.ndarray:
    """Fault locations: the regular grid plus each zone 1 reach and coverage limit."""
    m = list(np.linspace(0.0, 1.0, round(100 / STEP_PCT) + 1))
    for end, st in st_by_end.items():
        r1 = st.zone("zone1").reach_pct / 100
        for x in (r1, r1 * (1 - tolerance_pct / 100)):
            m.append(x if end == names[0] else 1.0 - x)
    return unique_sorted(np.clip(np.array(m), 0.0, 1.0))


def _corridor_notes(geo: LineGeometry, params: LineParameters) -> tuple[str, ...]:
    """What the verification did with the neighbouring lines of shared corridors."""
    if geo.corridor is None:
        return ()
    from relayset.studies.corridor import corridor_notes

    return (corridor_notes(params.corridor, "verification", geo.n_circuits == 2),)


def check_tolerance(tolerance_pct: float, source: str) -> float:
    if not (math.isfinite(tolerance_pct) and 0 <= tolerance_pct < 50):
        raise InputError("the verification tolerance (the error budget's total) must be at "
                         "least 0 % and below 50 %", field="error_budget",
                         value=f"{tolerance_pct:g} %", source=source)
    return tolerance_pct


def remote_bus_views(sim: Simulation, end: str, st: SettingsResult, model: RelayModel):
    """What the relay at ``end`` measures for the simulated faults at its remote bus: one
    view per run of the protected line that has a location there."""
    at_s = end == sim.names[0]
    k0m = st.k0m if sim.mutual else None
    for run in sim.runs:
        if run.faulted != "protected":
            continue
        bus = np.flatnonzero(np.isclose(run.sweep.m, 1.0 if at_s else 0.0))
        if bus.size:
            yield relay_view(run, at_s, st.k0.k0, k0m, model,
                             line_angle=st.line_angle_rad).at_locations(bus)


def worst_remote_bus_scale(sim: Simulation, end: str, st: SettingsResult, model: RelayModel
                           ) -> float | None:
    """Smallest zone 1 reach scale of the simulated faults at the remote bus (None: none)."""
    z1 = st.zone("zone1")
    zl = abs(st.line_z1_primary_ohm)
    worst = math.inf
    for v in remote_bus_views(sim, end, st, model):
        worst = min(worst, float(np.min(zone_scale(v, z1, st.line_angle_rad, zl,
                                                   model).scale)))
    return worst if math.isfinite(worst) else None


def measured_ends(philosophy: Philosophy | None, judged: Sequence[str],
                  names: Sequence[str]) -> tuple[str, ...]:
    """The ends whose relays' views the simulation keeps: the judged ones, and both ends
    where the communication scheme's checks compare the two relays (current reversal,
    zone 1 overlap)."""
    if philosophy is not None and philosophy.scheme.kind != "none":
        return tuple(names)
    return tuple(judged)


def measure_for(study: Study, geo: LineGeometry, settings_by_end: dict[str, SettingsResult],
                judged: Sequence[str] | None = None) -> Measure:
    """What to keep of each solved run: the views of the relays of these settings (their
    k0, k0m, relay model and line angle; the zone reaches play no part) at the ``judged``
    ends (default all), the infeed samples alone at the others."""
    mutual = geo.n_circuits == 2 and study.reach_study.mutual_compensation
    judged = tuple(settings_by_end) if judged is None else tuple(judged)
    return Measure(tuple(
        (end == study.ends[0], st.k0.k0, st.k0m if mutual else None,
         relay_model_at(study, end), st.line_angle_rad)
        for end, st in settings_by_end.items() if end in judged),
        tuple(end == study.ends[0] for end in settings_by_end if end not in judged))


def relay_model_at(study: Study, end: str) -> RelayModel:
    """The relay model of the study's ``[relay]`` at ``end`` (release currents in primary
    amperes through that end's CT ratio)."""
    r = study.relay
    if r is None:
        return RelayModel()
    ct, _ = r.ratios(end)
    return RelayModel(phase_selection=r.phase_selection,
                      min_current_primary_a=r.min_operating_current * ct,
                      ground_release_primary_a=r.ground_release_current * ct,
                      mutual_supervision=r.mutual_compensation_supervision,
                      min_current_secondary_a=r.min_operating_current,
                      ground_release_secondary_a=r.ground_release_current)


def verify_settings(study: Study, geo: LineGeometry, params_by_rho: dict[float, LineParameters],
                    settings_by_end: dict[str, SettingsResult], *, source: str,
                    zone2_adjacent_zone1_pct: float = 80.0,
                    philosophy: Philosophy | None = None,
                    ends: Sequence[str] | None = None,
                    envelope: Envelope | None = None,
                    simulation: Simulation | None = None) -> VerificationResult:
    """Run the verification of the settings of every end over the envelope.

    Parameters
    ----------
    study, geo
        The validated study and its geometry.
    params_by_rho : dict of float to LineParameters
        Line parameters per earth resistivity of the sweep [ohm m] (the relay keeps the
        k0 of its settings; the line's own k0 moves with the resistivity).
    settings_by_end : dict of str to SettingsResult
        The settings of the relay at each end to verify.
    envelope : Envelope, optional
        The operating envelope (default: the study's, with the settings' resistive targets).
    simulation : Simulation, optional
        The simulation of that envelope, already solved (and measured for these relays,
        :func:`measure_for`) by the settings' closing; default: solved here.
    """
    names = study.ends
    t = check_tolerance(study.error_budget.total_pct, source)
    if not settings_by_end:
        return VerificationResult("not verified", "no settings to verify", t, (), (), (), (),
                                  0)
    env = envelope or build_envelope(study, resistive_targets(study, list(
        settings_by_end.values())))
    if simulation is None:
        m = verification_grid(settings_by_end, names, t)
        judged = [e for e in settings_by_end if ends is None or e in ends]
        sim = simulate(study, geo, params_by_rho, env, m=m, source=source,
                       measure=measure_for(study, geo, settings_by_end,
                                           measured_ends(philosophy, judged, names)))
    else:
        sim = simulation
    results = []
    models = {}
    for end, st in settings_by_end.items():
        if ends is not None and end not in ends:
            continue
        other = names[1] if end == names[0] else names[0]
        models[end] = relay_model_at(study, end)
        results.append(verify_end(sim, end, st, study=study, tolerance_pct=t,
                                  remote=settings_by_end.get(other), source=source,
                                  model=models[end],
                                  zone2_adjacent_zone1_pct=zone2_adjacent_zone1_pct,
                                  philosophy=philosophy))
    rule_checks = {end: {f"{z.zone}.{c.check_id}": c.passed for z in st.zones
                         for c in z.checks} for end, st in settings_by_end.items()}
    results, accepted = deviations.apply_deviations(study, results, source, rule_checks)
    verdict, reason = deviations.verdict(results, accepted)
    n_cases = sim.n_cases
    notes = (
        "Zones tested as set (primary ohms) against the phase-domain solution of the real "
        "line; margins are in % of the zone's forward reach.",
        *(f"At {end}: " + mdl.describe(sim.mutual) for end, mdl in models.items()),
        *env.describe(double_circuit=geo.n_circuits == 2),
        *_capacitor_notes(sim),
        f"Envelope: {len(sim.states)} "
        f"{'neighbouring-line' if geo.corridor is not None else 'parallel-circuit'} "
        f"state(s) × {len(sim.case_names)} "
        f"source case(s) × {env.n_load_cases} load case(s) × "
        f"{len(env.resistivities_ohm_m)} earth resistivit(ies), {n_cases:,} fault cases "
        f"solved; largest transfer angle {sim.max_transfer_angle_deg:.1f}°.",
        "Faults behind the relay: every type and fault resistance at its own bus, under "
        "every load case (export and import).",
        *(("With the parallel circuit out of service its CTs carry no current, so mutual "
           "compensation has no input.",) if geo.n_circuits == 2 else ()),
        "Faults beyond the remote bus: the remote-bus fault governs zone 1 (infeed only "
        "moves faults further out); zone 2 and 3 are judged at Z_line + K Z_adjacent with K "
        "from the simulated remote-bus faults, and by the simulated faults along the "
        "adjacent lines.",
        *_branch_notes(study, source),
        *_corridor_notes(geo, next(iter(params_by_rho.values()))),
        f"Verification tolerance {t:g} % (the study's error budget).",
        scheme.describe(_philosophy(philosophy, zone2_adjacent_zone1_pct)),
        *_resistive_basis(study, geo, settings_by_end),
    )
    return VerificationResult(
        verdict=verdict, reason=reason, tolerance_pct=t, ends=tuple(results),
        parallel_states=sim.states, source_cases=sim.case_names,
        earth_resistivities_ohm_m=sim.resistivities, cases_solved=n_cases, notes=notes,
        envelope=env.to_dict(),
        relay_model={end: mdl.to_dict() for end, mdl in models.items()},
        deviations=accepted, capacitor_states=sim.capacitor_states,
        series_capacitors=sim.capacitors)


def _capacitor_notes(sim: Simulation) -> tuple[str, ...]:
    """The series capacitor states as simulated (each multiplies the envelope)."""
    if not sim.capacitor_states:
        return ()
    from relayset.studies.series_capacitors import MODEL_LIMITS, describe_state

    return ("Series capacitor states (every case solved in each): "
            + "; ".join(describe_state(s) for s in sim.capacitor_states) + ". Zone 1's "
            "limit is the compensated line's (every bank in service, the worst case for "
            "its overreach); zone 2 is set on the line's own Z1 (the banks bypassed, the "
            "worst case for its underreach), and its coverage and grading are judged in "
            "every state.", MODEL_LIMITS)


def _branch_notes(study: Study, source: str) -> tuple[str, ...]:
    """The lines behind and beyond as simulated (:mod:`.branches`)."""
    from relayset.studies.verification.branches import branch_lines, describe

    return describe(branch_lines(study, source))


def _resistive_basis(study: Study, geo: LineGeometry, settings_by_end) -> tuple[str, ...]:
    """How the resistive reach was chosen and what the simulation adds, in words."""
    from relayset.settings.compute import DIRECTIONAL_LINE_BELOW_R_DEG
    from relayset.studies.settings import arc_lengths

    if not any(z.shape == "quadrilateral" for st in settings_by_end.values()
               for z in st.zones):
        return ()
    fr = study.fault_resistance
    return (
        "Resistive reach basis, per loop: phase loops R_arc,phase/2 (the arc is shared by "
        "the two phases of the loop); ground loops (R_arc,ground + R_tower)/|1 + k0| "
        "(residual compensation divides the fault resistance); both times (1 + margin), "
        "single-end feed.",
        arc_lengths(study, geo).describe()
        + f"; tower footing {fr.tower_footing_resistance:g} ohm.",
        "Remote infeed into the fault resistance is not in the settings formula; the "
        "verification simulates it for every source case, and resistive faults the zones "
        "then miss are reported under the must-operate checks.",
        "Shape from the simulation: zone 2's right blinder is widened to what the simulated "
        "internal faults need (load permitting); zone 1's reactance line is tilted and its "
        "right blinder widened as far as the worst simulated remote-bus fault allows "
        "(smallest tilt within 0.5 % of the line of the best, widest blinder costing "
        "nothing); left blinders keep the arc basis; every quadrilateral's directional line "
        f"lies {DIRECTIONAL_LINE_BELOW_R_DEG:g}° below the R axis (common practice, no "
        "source).",
    )


