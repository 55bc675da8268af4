r"""Verification: the zones as set, tested by fault simulation of the real line.

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

Loops: only the loops meant for a fault type are judged (the relay's phase selection is
assumed to block the others); close-in bolted faults whose loop voltage vanishes
(\|Z\| below 0.1 % of the line) rely on the relay's memory polarization and are not judged
in the impedance plane.
"""

from __future__ import annotations

import cmath
import itertools
import math
from collections.abc import Sequence
from dataclasses import dataclass, replace

import numpy as np

from relayset.errors import InputError
from relayset.inputs.study_file import Study
from relayset.physics import measurement, network
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
from relayset.studies.reach import _cascade, _emfs_for_power_flows, build_source

#: Fault location step of the verification sweep [% of the line] (common practice, no source).
STEP_PCT = 10.0
#: Below this fraction of |Z_line| a loop impedance is left to memory polarization [1].
_Z_SMALL = 1e-3
LOOPS = measurement.LOOPS
_GROUND = measurement.GROUND_LOOPS

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


# --------------------------------------------------------------------------- simulation


@dataclass(frozen=True, eq=False)
class _Run:
    """One batched solve and how to read it."""

    sweep: network.FaultSweep
    faulted: str  # "protected" or "parallel"
    state: str  # parallel-circuit state, "none" for a single circuit
    case_names: tuple[str, ...]  # per source-case index
    rho_ohm_m: float
    sources: tuple[bool, bool]  # source in service at S, at R


@dataclass(frozen=True, eq=False)
class Simulation:
    """Every solve a verification needs, independent of the zone settings."""

    names: tuple[str, str]
    labels: tuple[str, str, str]
    runs: tuple[_Run, ...]
    n_circuits: int
    mutual: bool
    case_names: tuple[str, ...]
    states: tuple[str, ...]
    resistivities: tuple[float, ...]

    @property
    def n_cases(self) -> int:
        return sum(int(r.sweep.v_s.size // 3) for r in self.runs)


def _source_configs(study: Study, names, src, source: str):
    """(label prefix, source S, source R, scales (K, 2), case names, with load)."""
    cases = study.reach_study.source_cases
    out = []
    if src[names[0]] is not None and src[names[1]] is not None:
        # Each end strong or weak independently: every pair of the uniform cases, plus the
        # cases the study gives per end as they are.
        uniform = [c for c in cases if not c.at]
        pairs = [(a.scale, b.scale, a.name if a is b
                  else f"{names[0]} {a.name}, {names[1]} {b.name}")
                 for a, b in itertools.product(uniform, uniform)]
        pairs += [(c.scale_at(names[0]), c.scale_at(names[1]), c.name) for c in cases if c.at]
        scales = np.array([p[:2] for p in pairs])
        labels = tuple(p[2] for p in pairs)
        out.append((src[names[0]], src[names[1]], scales, labels, True))
    for k, n in enumerate(names):
        other = names[1 - k]
        if src[n] is None:
            continue
        scales = np.array([[c.scale_at(n), c.scale_at(n)] for c in cases])
        labels = tuple(f"{n} {c.name}, {other} out of service" for c in cases)
        s_s, s_r = (src[n], None) if k == 0 else (None, src[n])
        out.append((s_s, s_r, scales, labels, False))
    return out


def _swap_circuits(line: network.LineCascade) -> network.LineCascade:
    """The same line with circuit 2 first, so that the solver faults the parallel circuit."""
    p = [3, 4, 5, 0, 1, 2]
    z = line.z_ohm_per_m[:, p][:, :, p]
    y = None if line.y_s_per_m is None else line.y_s_per_m[:, p][:, :, p]
    return network.LineCascade(z, line.length_m, y)


def simulate(study: Study, geo: LineGeometry, params_by_rho: dict[float, LineParameters], *,
             m: np.ndarray, rf_pairs: np.ndarray, source: str,
             protected: bool = True, parallel: bool = True) -> Simulation:
    """Solve the fault cases of a verification (no settings needed).

    Parameters
    ----------
    study, geo
        The validated study and its geometry.
    params_by_rho : dict
        Line parameters per earth resistivity [ohm m] of the sweep.
    m : (M,) array
        Fault locations from the from-substation [1].
    rf_pairs : (Rf, 2) array
        Pairs (resistance to ground, resistance between phases) [ohm].
    """
    names = (study.study.from_substation, study.study.to_substation)
    src = {n: build_source(study, n, source) for n in names}
    if src[names[0]] is None and src[names[1]] is None:
        raise InputError(f"give a source for {names[0]!r} or {names[1]!r} (or both)",
                         field="sources", source=source)
    rs = study.reach_study
    n_c = geo.n_circuits
    states = network.PARALLEL_STATES if n_c == 2 else ("in_service",)
    mutual = n_c == 2 and rs.mutual_compensation
    lengths = np.array(geo.section_lengths_m)
    orders = [list(o) for o in geo.section_orders]
    relay_end = study.relay.end if study.relay and study.relay.end in names else names[0]
    angles = np.array(study.load.transfer_angles if study.load else (0.0,))
    configs = _source_configs(study, names, src, source)
    runs = []
    all_names: list[str] = []
    for rho, params in params_by_rho.items():
        for state in states:
            line = _cascade(params.z_position_ohm_per_m, params.y_position_s_per_m, orders,
                            lengths, rs.shunt_capacitance)
            jobs = []
            if protected:
                jobs.append(("protected", line))
            if parallel and n_c == 2 and state == "in_service":
                jobs.append(("parallel", _swap_circuits(line)))
            for faulted, ln in jobs:
                for s_s, s_r, scales, labels, loaded in configs:
                    emf = None
                    ang = angles if loaded else np.zeros(1)
                    if loaded and study.load and study.load.power_flows:
                        emf = _emfs_for_power_flows(study, ln, src, names, relay_end, scales,
                                                    state, geo.v_nominal_v)
                    try:
                        sw = network.solve_fault_sweep(
                            ln, s_s, s_r, v_nominal_v=geo.v_nominal_v,
                            fault_types=network.FAULT_TYPES, m=m,
                            r_fault_ohm=rf_pairs[:, 0], r_phase_ohm=rf_pairs[:, 1],
                            source_scale=scales, transfer_angle_rad=ang,
                            parallel_state=state, emf_v=emf)
                    except InputError as exc:
                        raise exc.located(source=source) from None
                    runs.append(_Run(sw, faulted, state if n_c == 2 else "none", labels,
                                     rho, (s_s is not None, s_r is not None)))
                    all_names += [n for n in labels if n not in all_names]
    return Simulation(names, geo.phase_labels[0], tuple(runs), n_c, mutual,
                      tuple(all_names), tuple(states) if n_c == 2 else ("none",),
                      tuple(sorted(params_by_rho)))


# --------------------------------------------------------------------------- measurement


@dataclass(frozen=True, eq=False)
class _View:
    """The relay at one end looking at one run: loop impedances and location from the end."""

    run: _Run
    loops: dict[str, np.ndarray]  # (F, M, Rf, K, L)
    m_end: np.ndarray  # (M,)
    mutual: bool
    forward: np.ndarray  # (F, M, Rf, K, L) negative-sequence directional decision


def _view(run: _Run, at_s: bool, k0: complex, k0m: complex | None, *, behind: bool = False,
          line_angle: float = math.radians(80.0)) -> _View:
    sw = run.sweep
    if run.faulted == "parallel":
        # The protected circuit is circuit 2 of the swapped line; its parallel is the faulted.
        v, i, ip = ((sw.v_s, sw.i_s_parallel, sw.i_s) if at_s
                    else (sw.v_r, sw.i_r_parallel, sw.i_r))
    elif behind:
        # A fault at the relay's own bus: the relay current is what arrives from the line.
        v, i, ip = ((sw.v_s, -sw.i_f_from_r, sw.i_s_parallel) if at_s
                    else (sw.v_r, -sw.i_f_from_s, sw.i_r_parallel))
    else:
        v, i, ip = ((sw.v_s, sw.i_s, sw.i_s_parallel) if at_s
                    else (sw.v_r, sw.i_r, sw.i_r_parallel))
    # Out of service the parallel circuit's CTs carry nothing (isolated from the bus).
    use_m = k0m is not None and run.state == "in_service"
    loops = measurement.loop_impedances(v, i, k0, i_parallel=ip if use_m else None,
                                        k0m=k0m if use_m else 0)
    return _View(run, loops, sw.m if at_s else 1.0 - sw.m, use_m, _forward(v, i, line_angle))


def _forward(v: np.ndarray, i: np.ndarray, line_angle_rad: float) -> np.ndarray:
    r"""Negative-sequence directional element: forward where :math:`V_2/I_2` lies behind.

    For a fault in front of the relay :math:`V_2 = -Z_{2,behind} I_2`, so
    :math:`\mathrm{Re}(V_2 \bar I_2 e^{-j\theta}) < 0`; for one behind it, > 0 [1]_.
    Balanced cases (negative-sequence current below 2 % of the largest phase current) are
    left to the impedance characteristic.

    .. [1] IEEE Std C37.113-2015, directional supervision of distance elements.
    """
    a = cmath.exp(2j * math.pi / 3)
    v2 = (v[..., 0] + a * a * v[..., 1] + a * v[..., 2]) / 3
    i2 = (i[..., 0] + a * a * i[..., 1] + a * i[..., 2]) / 3
    small = np.abs(i2) < 0.02 * np.max(np.abs(i), axis=-1)
    torque = (v2 * np.conj(i2) * cmath.exp(-1j * line_angle_rad)).real
    return small | (torque < 0)


def _scale(view: _View, zone: ZoneSetting, theta: float, z_line: float, ftypes,
           close_in: float = math.inf) -> tuple[np.ndarray, np.ndarray]:
    """Smallest reach scale over the meant loops per case, and which loop gives it.

    ``close_in`` is the scale given to loops whose impedance vanishes (memory polarization
    decides them): 0 where the zone must operate, inf where it must not.
    """
    shape = view.loops["AG"].shape
    best = np.full(shape, np.inf)
    which = np.zeros(shape, dtype=int)
    for j, loop in enumerate(LOOPS):
        # Only the fault types this loop is meant for (a third of the work).
        idx = [f for f, ft in enumerate(ftypes) if loop in measurement.loops_for_fault(ft)]
        if not idx:
            continue
        z = view.loops[loop][idx]
        s = reach_scale(z, zone, loop in _GROUND, theta)
        s = np.where(np.abs(z) >= _Z_SMALL * z_line, s, close_in)
        fwd = view.forward[idx]
        s = np.where(fwd if zone.direction == "forward" else ~fwd, s, np.inf)
        sub = best[idx]
        better = s < sub
        best[idx] = np.where(better, s, sub)
        which[idx] = np.where(better, j, which[idx])
    return best, which


# --------------------------------------------------------------------------- checks


@dataclass
class _Acc:
    """Accumulates one check over runs: worst margin and its case."""

    must_operate: bool
    n_run: int = 0
    n_fail: int = 0
    worst: float = math.inf
    case: VerificationCase | None = None

    def add(self, margin: np.ndarray, mask: np.ndarray, required: float, describe) -> None:
        mask = np.broadcast_to(mask, margin.shape)
        margin = np.where(mask, margin, np.inf)
        self.n_run += int(np.count_nonzero(mask))
        self.n_fail += int(np.count_nonzero(mask & ~(margin >= required - 1e-9)))
        if not np.any(mask):
            return
        idx = np.unravel_index(int(np.argmin(margin)), margin.shape)
        if margin[idx] < self.worst or self.case is None:
            self.worst = float(margin[idx])
            self.case = describe(idx)


def _describe(view: _View, which: np.ndarray, labels, faulted: str, rf_pairs):
    sw, run = view.run.sweep, view.run

    def fn(idx):
        f, k_m, k_rf, k_s, k_l = idx
        j = int(which[idx])
        loop = LOOPS[j]
        ang = math.degrees(float(sw.transfer_angle_rad[k_s, k_l]))
        return VerificationCase(
            fault_type=fault_label(sw.fault_types[f], labels), faulted=faulted,
            location_pct=float(100 * view.m_end[k_m]), r_fault_ohm=float(rf_pairs[k_rf, 0]),
            r_phase_ohm=float(rf_pairs[k_rf, 1]), source_case=run.case_names[k_s],
            transfer_angle_deg=round(ang, 6), parallel_state=run.state,
            earth_resistivity_ohm_m=run.rho_ohm_m, loop=loop_label(loop, labels),
            z_apparent_primary_ohm=complex(view.loops[loop][idx]),
            mutual_compensation=view.mutual)
    return fn


def _finish(zone: str, check_id: str, requirement: str, acc: _Acc, required: float,
            consider: str) -> ZoneVerification:
    margin = None if not math.isfinite(acc.worst) else acc.worst
    passed = acc.n_fail == 0
    return ZoneVerification(zone, check_id, requirement, acc.n_run, acc.n_fail, margin,
                            required, passed, None if passed and margin is None else acc.case,
                            "" if passed else consider)


def _rf_mask(rf_pairs: np.ndarray, zone: ZoneSetting, tower_ohm: float) -> np.ndarray:
    """Fault resistances a zone must cover: its arc (+ tower footing) targets, else bolted."""
    if zone.shape == "quadrilateral" and zone.arc_resistance_ground_ohm is not None:
        rg = zone.arc_resistance_ground_ohm + tower_ohm
        rp = zone.arc_resistance_phase_ohm
    else:
        rg = rp = 0.0
    return (rf_pairs[:, 0] <= rg * (1 + 1e-9)) & (rf_pairs[:, 1] <= rp * (1 + 1e-9))


def rf_pairs_for(study: Study, settings: Sequence[SettingsResult]) -> np.ndarray:
    """Fault-resistance pairs (to ground, between phases) of the sweep [ohm]."""
    tower = study.fault_resistance.tower_footing_resistance
    pairs = {(0.0, 0.0)}
    quad = any(z.arc_resistance_ground_ohm is not None for st in settings for z in st.zones)
    if not quad:  # no resistive target: the study's own fault resistances
        rp_study = study.reach_study.phase_fault_resistance
        for r in study.reach_study.fault_resistances:
            pairs.add((float(r), float(rp_study)))
    for st in settings:
        for z in st.zones:
            if z.zone in ("zone1", "zone2") and z.arc_resistance_ground_ohm is not None:
                rg, rp = z.arc_resistance_ground_ohm + tower, z.arc_resistance_phase_ohm
                for f in (0.125, 0.25, 0.5, 1.0):
                    pairs.add((rg * f, rp * f))
    return np.array(sorted(pairs))


def infeed_range(sim: Simulation, end: str) -> InfeedRange | None:
    """Infeed factor K = I_fault / I_relay for bolted three-phase faults at the remote bus.

    With the fault at the remote bus R the relay at S measures the line, and for a fault a
    further impedance Z_x along a line leaving R it measures Z_L + K Z_x, K the ratio of the
    current into the adjacent line (the fault current at R) to the relay current: the
    classical infeed factor, here from the simulation, so it includes the parallel circuit
    and every source and load case (phase loop A-B).
    """
    at_s = end == sim.names[0]
    ks, descr = [], []
    for run in sim.runs:
        if run.faulted != "protected" or not run.sources[0 if at_s else 1]:
            continue  # without a source behind the relay there is no relay current
        sw = run.sweep
        f = sw.fault_types.index("ABC")
        k_m = int(np.argmax(sw.m)) if at_s else int(np.argmin(sw.m))
        if abs(sw.m[k_m] - (1.0 if at_s else 0.0)) > 1e-12:
            continue
        k_rf = int(np.argmin(sw.r_fault_ohm + sw.r_phase_ohm))
        i_f = sw.i_fault[f, k_m, k_rf]  # (K, L, 3)
        i_rel = (sw.i_s if at_s else sw.i_r)[f, k_m, k_rf]
        with np.errstate(all="ignore"):
            k = (i_f[..., 0] - i_f[..., 1]) / (i_rel[..., 0] - i_rel[..., 1])
        # the load case by its transfer angle, also for power flows
        delta = np.degrees(sw.transfer_angle_rad)  # (K, L)
        for (a, b), kv in np.ndenumerate(k):
            if np.isfinite(kv):
                ks.append(complex(kv))
                descr.append(f"{run.case_names[a]}, parallel {run.state}, transfer angle "
                             f"{delta[a, b]:.1f}°")
    if not ks:
        return None
    mags = np.abs(ks)
    lo, hi = int(np.argmin(mags)), int(np.argmax(mags))
    return InfeedRange(ks[lo], ks[hi], descr[lo], descr[hi])


def zone1_limit_pct(sim: Simulation, end: str, st: SettingsResult, tolerance_pct: float,
                    margin_pct: float) -> float | None:
    """Longest zone 1 [% of line] whose faults at the remote bus keep the tolerance.

    The reach scale of every remote-bus fault (every state, source, load case and fault
    resistance) is inversely proportional to the zone 1 reach, so the limit is the present
    reach times the smallest scale, less the tolerance and the margin; rounded down to 0.5 %.
    """
    worst = _worst_remote_bus_scale(sim, end, st)
    if worst is None:
        return None
    lim = st.zone("zone1").reach_pct * worst * (1 - margin_pct / 100) / (1 + tolerance_pct / 100)
    return math.floor(lim * 2 + 1e-9) / 2


def verify_end(sim: Simulation, end: str, st: SettingsResult, *, study: Study,
               tolerance_pct: float, remote: SettingsResult | None, source: str,
               zone2_adjacent_zone1_pct: float = 80.0) -> EndVerification:
    """Every check of the zones of the relay at ``end``."""
    at_s = end == sim.names[0]
    other = sim.names[1] if at_s else sim.names[0]
    theta = st.line_angle_rad
    zl = abs(st.line_z1_primary_ohm)
    t = tolerance_pct
    k0m = st.k0m if sim.mutual else None
    tower = study.fault_resistance.tower_footing_resistance
    z1, z2, z3, zr = (st.zone(n) for n in ("zone1", "zone2", "zone3", "reverse"))
    r1 = z1.reach_pct / 100
    acc = {k: _Acc(mo) for k, mo in (("z1_int", True), ("z2_int", True), ("z1_ext", False),
                                     ("z1_par", False), ("z1_par_nomut", False),
                                     ("fwd_behind", False))}
    labels = sim.labels
    for run in sim.runs:
        sw = run.sweep
        ft = sw.fault_types
        rfp = np.stack([sw.r_fault_ohm, sw.r_phase_ohm], axis=1)
        rf_ax = (None, None, slice(None), None, None)
        if run.faulted == "protected":
            v = _view(run, at_s, st.k0.k0, k0m, line_angle=theta)
            m_ax = v.m_end[None, :, None, None, None]
            s1, w1 = _scale(v, z1, theta, zl, ft)
            o1, u1 = _scale(v, z1, theta, zl, ft, close_in=0.0)
            o2, u2 = _scale(v, z2, theta, zl, ft, close_in=0.0)
            d1 = _describe(v, w1, labels, "protected line", rfp)
            mask_rf1 = _rf_mask(rfp, z1, tower)[rf_ax]
            mask_rf2 = _rf_mask(rfp, z2, tower)[rf_ax]
            every = np.ones(s1.shape, dtype=bool)
            # With no source behind the relay it sees no fault current: that is a weak-infeed
            # (pilot scheme) matter, not one of the zone's reach.
            fed = every & run.sources[0 if at_s else 1]
            in1 = (m_ax <= r1 * (1 - t / 100) + 1e-9) & mask_rf1 & fed
            acc["z1_int"].add((1 - o1) * 100, in1, 0.0,
                              _describe(v, u1, labels, "protected line", rfp))
            acc["z2_int"].add((1 - o2) * 100, mask_rf2 & fed, t,
                              _describe(v, u2, labels, "protected line", rfp))
            acc["z1_ext"].add((s1 - 1) * 100, np.isclose(m_ax, 1.0) & every, t, d1)
            # Faults at the relay's own bus, behind it (resistive only: see the notes).
            vb = _view(run, at_s, st.k0.k0, k0m, behind=True, line_angle=theta)
            at_own = np.isclose(vb.m_end, 0.0)[None, :, None, None, None]
            resist = (rfp[:, 0] + rfp[:, 1] > 0)[rf_ax]
            for zone in (z1, z2, z3):
                sb, wb = _scale(vb, zone, theta, zl, ft)
                acc["fwd_behind"].add((sb - 1) * 100, at_own & resist, t,
                                      _describe(vb, wb, labels, "behind the relay", rfp))
        else:
            for key, km in (("z1_par", k0m), ("z1_par_nomut", None)):
                v = _view(run, at_s, st.k0.k0, km, line_angle=theta)
                s1, w1 = _scale(v, z1, theta, zl, ft)
                acc[key].add((s1 - 1) * 100, np.ones(s1.shape, dtype=bool), t,
                             _describe(v, w1, labels, "parallel circuit", rfp))
    checks = [
        _finish("zone1", "operates_for_internal_faults",
                f"zone 1 operates for every fault up to (1 − {t:g} %) of its reach "
                f"({100 * r1 * (1 - t / 100):.4g} % of the line), fault resistance up to its "
                "resistive target", acc["z1_int"], 0.0,
                "lengthen zone 1's resistive reach (if load allows) or accept the shorter "
                "coverage and rely on a pilot scheme"),
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
    checks[0] = _resistive_need(checks[0], z1, theta, st)
    checks.append(_finish(
        "zone2", "covers_whole_line",
        f"zone 2 operates for every fault on the protected line up to {other} with {t:g} % "
        "margin (the error budget), fault resistance up to its resistive target",
        acc["z2_int"], t,
        "lengthen zone 2 until the worst underreach plus the error budget still covers the "
        "remote bus"))
    checks[-1] = _resistive_need(checks[-1], z2, theta, st)
    checks.append(_finish(
        "forward", "no_operation_behind",
        "zones 1 to 3 do not operate for resistive faults at the relay's own bus (behind it)",
        acc["fwd_behind"], t, "check the directional element and the left blinder"))
    checks += _beyond_bus_checks(sim, end, st, study=study, tolerance_pct=t, source=source,
                                 adjacent_zone1_pct=zone2_adjacent_zone1_pct)
    checks += _load_check(st, z3, t)
    checks.append(_targets_inside(st))
    if remote is not None:
        checks.append(_reverse_check(st, zr, remote, t, other))
    lim = zone1_limit_pct(sim, end, st, t, 0.0)
    return EndVerification(end, tuple(checks), infeed_range(sim, end), lim)


def _beyond_bus_checks(sim, end, st, *, study, tolerance_pct, source, adjacent_zone1_pct):
    """Zone 2 against the adjacent zone 1 at minimum infeed; zone 3 coverage at maximum."""
    from relayset.studies.settings import _lines_at

    names = sim.names
    remote_bus = names[1] if end == names[0] else names[0]
    lines = _lines_at(study, end, remote=True, source=source)
    inf = infeed_range(sim, end)
    if not lines or inf is None:
        return []
    theta = st.line_angle_rad
    t = tolerance_pct
    z_l = st.line_z1_primary_ohm
    out = []
    name, zs = min(lines, key=lambda nl: abs(nl[1]))
    p2 = z_l + inf.k_min * adjacent_zone1_pct / 100 * zs
    s2 = float(_both(np.array([p2]), st.zone("zone2"), theta)[0])
    margin = (s2 - 1) * 100 if math.isfinite(s2) else None
    ok = margin is None or margin >= t - 1e-9
    out.append(ZoneVerification(
        "zone2", "short_of_adjacent_zone1_at_min_infeed",
        f"zone 2 stays short of the end of zone 1 of '{name}' ({adjacent_zone1_pct:g} % of it, "
        f"from {remote_bus}) at the minimum infeed K = {abs(inf.k_min):.3g} ({inf.case_min}) "
        f"with {t:g} % margin", 1, 0 if ok else 1, margin, t, ok, None,
        "" if ok else "shorten zone 2 (graded at minimum infeed), or grade it in time with "
        "the adjacent line's zone 2"))
    name3, z3l = max(lines, key=lambda nl: abs(nl[1]))
    zone3 = st.zone("zone3")
    # Largest fraction x of the longest adjacent line inside zone 3 at maximum infeed.
    xs = np.linspace(0.0, 3.0, 3001)
    pts = z_l + inf.k_max * xs * z3l
    inside = _both(pts, zone3, theta) <= 1.0
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


def _targets_inside(st: SettingsResult) -> ZoneVerification:
    """Each zone reaches the point its own rule aims at (quadrilateral blinders included)."""
    bad = []
    worst = math.inf
    for z in st.zones:
        s = float(_both(np.array([z.reach_primary_ohm]), z, st.line_angle_rad)[0])
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
    if chk.passed or g is None or zone.shape != "quadrilateral":
        return chk
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


def _both(z: np.ndarray, zone: ZoneSetting, theta: float) -> np.ndarray:
    """Reach scale for whichever loop kind (ground or phase) reaches the point first."""
    return zone.reach_scale(z, theta)


def _load_check(st: SettingsResult, z3: ZoneSetting, t: float) -> list[ZoneVerification]:
    """Zone 3 stays clear of the minimum load impedance over the load angles, both ways."""
    phi = st.load.load_angle_max_rad
    ang = np.concatenate([np.linspace(-phi, phi, 181), math.pi + np.linspace(-phi, phi, 181)])
    pts = st.load.z_min_primary_ohm * np.exp(1j * ang)
    s = _both(pts, z3, st.line_angle_rad)
    k = int(np.argmin(s))
    margin = (float(s[k]) - 1) * 100 if math.isfinite(s[k]) else None
    ok = margin is None or margin >= t - 1e-9
    return [ZoneVerification(
        "zone3", "clear_of_load",
        f"zone 3 does not reach the minimum load impedance {st.load.z_min_primary_ohm:.4g} Ω "
        f"at load angles within ±{math.degrees(phi):g}° (both directions) with {t:g} % margin",
        ang.size, int(np.count_nonzero(s < 1 + t / 100)), margin, t, ok, None,
        "" if ok else "shorten zone 3 or add load-encroachment blocking")]


def _reverse_check(st: SettingsResult, zr: ZoneSetting, remote: SettingsResult, t: float,
                   other: str) -> ZoneVerification:
    """The reverse zone covers the remote end's zone 2 where it reaches past this bus."""
    over = abs(remote.zone("zone2").reach_primary_ohm) - abs(remote.line_z1_primary_ohm)
    if over <= 0:
        return ZoneVerification("reverse", "covers_remote_zone2",
                                f"zone 2 at {other} does not reach past this bus", 0, 0,
                                None, t, True, None)
    p = -over * cmath.exp(1j * st.line_angle_rad)
    s = float(reach_scale(np.array([p]), zr, False, st.line_angle_rad)[0])
    margin = (1 - s) * 100 if math.isfinite(s) else None
    ok = margin is not None and margin >= t - 1e-9
    return ZoneVerification(
        "reverse", "covers_remote_zone2",
        f"the reverse zone covers zone 2 of the relay at {other} where it reaches past this "
        f"bus ({over:.4g} Ω along the line angle) with {t:g} % margin",
        1, 0 if ok else 1, margin, t, ok, None,
        "" if ok else "lengthen the reverse zone to cover the remote zone 2 overreach with "
        "margin (needed for blocking schemes and as local backup)")


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


def check_tolerance(tolerance_pct: float, source: str) -> float:
    if not (math.isfinite(tolerance_pct) and 0 <= tolerance_pct < 50):
        raise InputError("the verification tolerance (the error budget's total) must be at "
                         "least 0 % and below 50 %", field="error_budget",
                         value=f"{tolerance_pct:g} %", source=source)
    return tolerance_pct


def verify_settings(study: Study, geo: LineGeometry, params_by_rho: dict[float, LineParameters],
                    settings_by_end: dict[str, SettingsResult], *, source: str,
                    zone2_adjacent_zone1_pct: float = 80.0,
                    ends: Sequence[str] | None = None) -> VerificationResult:
    """Run the verification of the settings of every end.

    Parameters
    ----------
    study, geo
        The validated study and its geometry.
    params_by_rho : dict of float to LineParameters
        Line parameters per earth resistivity of the sweep [ohm m] (the relay keeps the
        k0 of its settings; the line's own k0 moves with the resistivity).
    settings_by_end : dict of str to SettingsResult
        The settings of the relay at each end to verify.
    """
    names = (study.study.from_substation, study.study.to_substation)
    t = check_tolerance(study.error_budget.total_pct, source)
    if not settings_by_end:
        return VerificationResult("not verified", "no settings to verify", t, (), (), (), (),
                                  0)
    m = verification_grid(settings_by_end, names, t)
    rf = rf_pairs_for(study, list(settings_by_end.values()))
    sim = simulate(study, geo, params_by_rho, m=m, rf_pairs=rf, source=source)
    results = []
    for end, st in settings_by_end.items():
        if ends is not None and end not in ends:
            continue
        other = names[1] if end == names[0] else names[0]
        results.append(verify_end(sim, end, st, study=study, tolerance_pct=t,
                                  remote=settings_by_end.get(other), source=source,
                                  zone2_adjacent_zone1_pct=zone2_adjacent_zone1_pct))
    failed = [(e.end, c) for e in results for c in e.checks if not c.passed]
    if failed:
        verdict = "failed checks"
        reason = f"{len(failed)} check(s) failed: " + "; ".join(
            f"{e} {c.zone} {c.check_id}" for e, c in failed[:4])
    else:
        verdict, reason = "verified", "every check passed in every simulated case"
    notes = (
        "Zones tested as set (primary ohms) against the phase-domain solution of the real "
        "line; margins are in % of the zone's forward reach.",
        "Only the loops meant for each fault type are judged (phase selection assumed); "
        "close-in bolted faults rely on memory polarization.",
        "Faults behind the relay are at its own bus, resistive only; bolted ones need the "
        "relay's memory polarization.",
        "With the parallel circuit out of service its CTs carry no current, so mutual "
        "compensation has no input.",
        "Faults beyond the remote bus: the remote-bus fault governs zone 1 (infeed only "
        "moves faults further out); zone 2 and 3 are judged at Z_line + K Z_adjacent with K "
        "from the simulated remote-bus faults.",
        f"Verification tolerance {t:g} % (the study's error budget).",
        *_resistive_basis(study, geo, settings_by_end),
    )
    return VerificationResult(
        verdict=verdict, reason=reason, tolerance_pct=t, ends=tuple(results),
        parallel_states=sim.states, source_cases=sim.case_names,
        earth_resistivities_ohm_m=sim.resistivities, cases_solved=sim.n_cases, notes=notes)


def _resistive_basis(study: Study, geo: LineGeometry, settings_by_end) -> tuple[str, ...]:
    """How the resistive reach was chosen and what the simulation adds, in words."""
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
    )


# --------------------------------------------------------------------------- pipeline


def params_by_resistivity(study: Study, geo: LineGeometry, params: LineParameters,
                          source: str) -> dict[float, LineParameters]:
    """Line parameters at the study's resistivity and at the ends of its uncertainty range.

    The relay keeps the k0 of its settings while the line's own k0 moves with the earth
    resistivity, so the verification solves the line at each of them.
    """
    from relayset.studies.geometry import build_geometry
    from relayset.studies.parameters import compute_parameters

    rho = study.system.earth_resistivity
    out = {float(rho): params}
    rng = study.system.earth_resistivity_range
    for r in () if rng is None else rng:
        if float(r) not in out:
            system = replace(study.system, earth_resistivity=r)
            other = replace(study, system=system)
            out[float(r)] = compute_parameters(build_geometry(other, source))
    return out


def settle_and_verify(study: Study, geo: LineGeometry, params: LineParameters, relay,
                      reach, philosophy, *, source: str
                      ) -> tuple[tuple[SettingsResult, ...], VerificationResult]:
    """Settings of every relay end, closed by simulation, and their verification.

    1. Preliminary settings at both ends (the rules of :mod:`relayset.settings`); the end
       the study does not ask for is needed for its zone 2 (the reverse zone must cover it).
    2. A first simulation of the faults at both buses (every parallel-circuit state, source
       and load case, the resistive targets) gives per end the worst zone 1 overreach and
       the infeed range at the remote bus.
    3. Final settings: zone 1 limited by that overreach (the zone 1 rule of
       :func:`relayset.settings.zone1.recommended_zone1_pct`, with the tolerance), infeed
       from the simulation, reverse zone covering the other end's zone 2.
    4. The verification of the final settings of the ends the study asks for.
    """
    from relayset.settings.zone1 import recommended_zone1_pct
    from relayset.studies.settings import run_settings

    names = (study.study.from_substation, study.study.to_substation)
    t = check_tolerance(study.error_budget.total_pct, source)
    wanted = tuple(relay.ends)
    study = _lines_on_their_buses(study)

    def settings_at(simulated):
        out = {}
        for end in names:
            try:
                out[end] = run_settings(study, geo, params, relay, reach, philosophy,
                                        source=source, ends=(end,),
                                        simulated=simulated)[0]
            except InputError:
                if end in wanted:
                    raise
        return out

    prelim = settings_at({})
    by_rho = params_by_resistivity(study, geo, params, source)
    m0 = [0.0, 1.0]
    for end, st in prelim.items():  # where zone 1 must still operate, seen from each end
        x = st.zone("zone1").reach_pct / 100 * (1 - t / 100)
        m0.append(x if end == names[0] else 1 - x)
    sim0 = simulate(study, geo, by_rho, m=unique_sorted(m0),
                    rf_pairs=rf_pairs_for(study, list(prelim.values())), source=source,
                    parallel=False)
    st_tower = study.fault_resistance.tower_footing_resistance
    needs = {end: _resistive_needs(sim0, end, st, t, st_tower) for end, st in prelim.items()}
    # Zone 2's blinder is widened for remote infeed into the fault resistance (time-graded,
    # load permitting). Zone 1's is not: a wider zone 1 blinder admits resistive faults at
    # the remote bus and must then be shorter; what it would take is reported instead.
    simulated: dict[str, dict] = {
        end: {"resistive_need_ohm": {k: v for k, v in need.items() if k != "zone1"}}
        for end, need in needs.items()}
    wide = settings_at({end: {"resistive_need_ohm": need} for end, need in needs.items()})
    z1p = philosophy.zone1
    overreach: dict[str, float] = {}
    advice: dict[str, tuple[float, float | None]] = {}
    for end, st in prelim.items():
        sim_end = simulated[end]
        if end in wide and "zone1" in needs[end]:
            z1w = wide[end].zone("zone1")
            advice[end] = (z1w.r_reach_ground_primary_ohm,
                           zone1_limit_pct(sim0, end, wide[end], t, z1p.min_margin_pct))
        s_min = _worst_remote_bus_scale(sim0, end, st)
        if s_min is not None:
            # The worst case appears at s_min x reach (fraction of the line) though it sits
            # at the remote bus: the zone overreaches by e % of its setting.
            e = (100 / (s_min * st.zone("zone1").reach_pct) - 1) * 100
            b = t + t * max(0.0, e) / 100  # tolerance applied on top of the overreach
            rec = recommended_zone1_pct(e, b, z1p.reach_pct, z1p.min_margin_pct)
            if rec > 0:
                sim_end["zone1_limit"] = (rec, b + max(0.0, e))
                overreach[end] = e
        if philosophy.zone2.infeed == "computed" or philosophy.zone3.infeed == "computed":
            inf = infeed_range(sim0, end)
            if inf is not None:
                sim_end["infeed_range"] = (inf.k_min, inf.k_max)
    final = settings_at(simulated)
    # The reverse zone of each end covers the other end's zone 2 past this bus.
    again = False
    for end in final:
        other = names[1] if end == names[0] else names[0]
        if other not in final:
            continue
        rem = final[other]
        over = abs(rem.zone("zone2").reach_primary_ohm) - abs(rem.line_z1_primary_ohm)
        cover = over / (1 - t / 100) * (1 + 1e-6)
        if over > 0 and cover > abs(final[end].zone("reverse").reach_primary_ohm):
            simulated[end]["reverse_cover_ohm"] = cover
            again = True
    if again:
        final = settings_at(simulated)
    for end, st in final.items():
        if st.zone("zone1").reach_pct < prelim[end].zone("zone1").reach_pct - 1e-9 and (
                end in overreach):
            from relayset.results.settings import SettingWarning

            final[end] = replace(st, warnings=(*st.warnings, SettingWarning(
                "zone1_limited_by_simulation",
                f"Zone 1 at most {simulated[end]['zone1_limit'][0]:.4g} % of the line: the "
                "worst fault at the remote bus over every parallel-circuit state, source and "
                f"load case and fault resistance overreaches by {overreach[end]:.3g} % of the "
                "setting",
                "review the governing case in the verification; a pilot scheme restores "
                "instantaneous coverage of the line end")))
    ver = verify_settings(study, geo, by_rho, final, source=source,
                          zone2_adjacent_zone1_pct=philosophy.zone2.adjacent_zone1_pct,
                          ends=wanted)
    ends = []
    for e in ver.ends:
        checks = list(e.checks)
        for k, c in enumerate(checks):
            if (c.zone, c.check_id) == ("zone1", "operates_for_internal_faults") and (
                    not c.passed and e.end in advice):
                r_g, lim = advice[e.end]
                checks[k] = replace(c, consider=c.consider + (
                    f"; widened for the simulated infeed (ground blinder {r_g:.4g} Ω) zone 1 "
                    f"could reach only {lim:g} % of the line" if lim is not None else ""))
        ends.append(replace(e, checks=tuple(checks)))
    ver = replace(ver, ends=tuple(ends))
    return tuple(final[e] for e in wanted), ver


def _lines_on_their_buses(study: Study) -> Study:
    """The study with every adjacent line and line behind tied to the bus it leaves.

    A line without ``bus`` is relative to the study's relay end (adjacent lines leave its
    remote bus, lines behind its own). The verification also sets the other end (its zone 2
    is what the reverse zone must cover), so the buses are fixed here once.
    """
    if study.relay is None or study.relay.end not in study.ends:
        return study
    own = study.relay.end
    remote = study.ends[1] if own == study.ends[0] else study.ends[0]
    update = {}
    for which, bus in (("adjacent_lines", remote), ("lines_behind", own)):
        lines = getattr(study, which)
        if any(line.bus is None for line in lines):
            update[which] = tuple(line if line.bus is not None
                                  else replace(line, bus=bus) for line in lines)
    return replace(study, **update) if update else study


def _resistive_needs(sim: Simulation, end: str, st: SettingsResult, tolerance_pct: float,
                     tower_ohm: float) -> dict[str, tuple[float, float]]:
    """Blinder offset (phase, ground loops) each quadrilateral zone needs to operate for the
    simulated resistive faults it must cover, remote infeed included [ohm]."""
    at_s = end == sim.names[0]
    theta = st.line_angle_rad
    zl = abs(st.line_z1_primary_ohm)
    k0m = st.k0m if sim.mutual else None
    out = {}
    for name in ("zone1", "zone2"):
        zone = st.zone(name)
        if zone.shape != "quadrilateral":
            continue
        lim = (zone.reach_pct / 100 * (1 - tolerance_pct / 100) if name == "zone1"
               else 1.0)
        need = {True: 0.0, False: 0.0}
        for run in sim.runs:
            if run.faulted != "protected" or not run.sources[0 if at_s else 1]:
                continue
            sw = run.sweep
            v = _view(run, at_s, st.k0.k0, k0m, line_angle=theta)
            rfp = np.stack([sw.r_fault_ohm, sw.r_phase_ohm], axis=1)
            rf_ok = _rf_mask(rfp, zone, tower_ohm)[None, None, :, None, None]
            m_ok = (v.m_end <= lim + 1e-9)[None, :, None, None, None]
            for loop in LOOPS:
                idx = [f for f, ft in enumerate(sw.fault_types)
                       if loop in measurement.loops_for_fault(ft)]
                z = v.loops[loop][idx]
                ok = (rf_ok & m_ok & v.forward[idx] & (np.abs(z) >= _Z_SMALL * zl)
                      & (z.imag <= zone.x_reach_primary_ohm)
                      & (math.cos(theta) * z.real + math.sin(theta) * z.imag >= 0))
                if np.any(ok):
                    off = z.real - z.imag / math.tan(theta)
                    ground = loop in _GROUND
                    need[ground] = max(need[ground], float(np.max(off[ok])))
        out[name] = (need[False], need[True])
    return out


def _worst_remote_bus_scale(sim: Simulation, end: str, st: SettingsResult) -> float | None:
    at_s = end == sim.names[0]
    z1 = st.zone("zone1")
    zl = abs(st.line_z1_primary_ohm)
    k0m = st.k0m if sim.mutual else None
    theta = st.line_angle_rad
    worst = math.inf
    for run in sim.runs:
        if run.faulted != "protected":
            continue
        v = _view(run, at_s, st.k0.k0, k0m, line_angle=theta)
        s, _ = _scale(v, z1, theta, zl, run.sweep.fault_types)
        at_bus = np.isclose(v.m_end, 1.0)[None, :, None, None, None]
        worst = min(worst, float(np.min(np.where(at_bus, s, np.inf))))
    return worst if math.isfinite(worst) else None
