"""Reach study: per-loop reach error of the real line, its worst cases and zone 1 advice.

The relay is set with one Z1 and one k0 (by default those of the ideally transposed line);
the real line is solved in the phase domain section by section, so each measuring loop sees
its own impedance. This module runs the sweep for the actual transposition plan and, for
comparison, for the untransposed line and an ideal cycle, then condenses the results.
"""

from __future__ import annotations

import math
import warnings

import numpy as np

from relayset.errors import InputError
from relayset.inputs.philosophy import Philosophy
from relayset.inputs.study_file import Study, check_reach_inputs
from relayset.physics import measurement, network, transposition
from relayset.results.parameters import LineParameters
from relayset.results.reach import (
    ArrangementReach,
    EndReach,
    LoopSummary,
    ReachStudyResult,
    WorstCase,
)
from relayset.results.relay import RelayBasis
from relayset.results.serialize import cplx
from relayset.settings.zone1 import recommended_zone1_pct
from relayset.studies.geometry import LineGeometry

LOOPS = ("AG", "BG", "CG", "AB", "BC", "CA")
_LOOP_PHASES = {"AG": (0,), "BG": (1,), "CG": (2,), "AB": (0, 1), "BC": (1, 2), "CA": (2, 0)}


def build_source(study: Study, name: str, source: str) -> network.Source | None:
    """The Thevenin source of a substation from the study, or None for an open end."""
    data = study.sources.get(name)
    if data is None:
        return None
    field = f"sources.{name}"
    if data.z1 is not None:
        try:
            return network.Source(z1_ohm=data.z1, z0_ohm=data.z0)
        except InputError as exc:
            raise exc.located(source=source, prefix=field) from None
    try:
        return network.Source.from_fault_levels(
            study.system.nominal_voltage, data.fault_level_3ph, data.x_over_r,
            s1ph_va=data.fault_level_1ph,
            z0_over_z1=None if data.fault_level_1ph is not None else data.z0_over_z1)
    except InputError as exc:
        raise exc.located(source=source, prefix=field) from None


def _loop_label(loop: str, labels: tuple[str, str, str]) -> str:
    ph = _LOOP_PHASES[loop]
    if len(ph) == 1:
        return f"{labels[ph[0]]}-G"
    return f"{labels[ph[0]]}-{labels[ph[1]]}"


def fault_label(fault_type: str, labels: tuple[str, str, str]) -> str:
    """A fault type in the study's phase labels, e.g. "ABG" -> "L1-L2-G"."""
    parts = [labels["ABC".index(ch)] for ch in fault_type if ch in "ABC"]
    return "-".join(parts + (["G"] if fault_type.endswith("G") else []))


def _cascade(z_pos, y_pos, orders, lengths, shunt: bool) -> network.LineCascade:
    zs = transposition.section_matrices(z_pos, orders)
    ys = transposition.section_matrices(y_pos, orders) if shunt else None
    return network.LineCascade(zs, np.asarray(lengths, float), ys)


def _positions_at(m: float, loop: str, orders, lengths, names) -> tuple[str, ...]:
    edges = np.cumsum(lengths) / np.sum(lengths)
    s = int(min(np.searchsorted(edges, m - 1e-12), len(orders) - 1))
    order = list(orders[s])
    return tuple(names[order.index(p)].split("/", 1)[-1] for p in _LOOP_PHASES[loop])


def run_reach_study(
    study: Study, geo: LineGeometry, params: LineParameters, relay: RelayBasis,
    philosophy: Philosophy, *, source: str,
) -> ReachStudyResult:
    """Sweep faults over the real line and condense the reach errors per loop and end.

    Parameters
    ----------
    study, geo, params
        The validated study, its geometry and its line parameters.
    relay : RelayBasis
        The relay ends and the Z1, k0 and k0m they are set with (resolved once).
    philosophy : Philosophy
        Gives the zone 1 reach at which over/underreach is reported (unless
        ``reach_study.zone1_reach_pct`` is set), its cap and its margin.
    source : str
        The study file name, for error messages.
    """
    rs = study.reach_study
    names = study.ends
    check_reach_inputs(study, source)  # the file's own rules were checked when it was read
    ends = list(relay.ends)
    src = {n: build_source(study, n, source) for n in names}
    n_c = geo.n_circuits
    parallel = (rs.parallel_circuit or "in_service") if n_c == 2 else "in_service"
    zone1_max_pct = zone1_reach_pct = philosophy.zone1.reach_pct
    zone1_margin_pct = philosophy.zone1.min_margin_pct
    z1_reach = rs.zone1_reach_pct or zone1_reach_pct
    if not 0 < z1_reach < 100:  # the philosophy's value when the study gives none
        raise InputError("must be between 0 and 100 % of the line",
                         field="reach_study.zone1_reach_pct", value=z1_reach, source=source)
    if rs.locations_pct is not None:
        m = np.array(rs.locations_pct, dtype=float) / 100
    else:
        m = np.linspace(0.0, 1.0, max(2, round(100 / rs.location_step_pct)) + 1)
    m = np.unique(np.concatenate([m, [z1_reach / 100, 1.0]]))
    rf = np.array(rs.fault_resistances or (0.0,))
    if 0.0 not in rf:
        rf = np.concatenate([[0.0], rf])
    # (K, 2): the factor on each end's source (a case may weaken one end only).
    scales = np.array([[c.scale_at(names[0]), c.scale_at(names[1])] for c in rs.source_cases])
    angles = np.array(study.load.transfer_angles if study.load else (0.0,))
    if study.load and study.load.power_flows:
        angles = np.zeros(len(study.load.power_flows))  # replaced by the EMFs of each flow

    z1_set, k0_set, k0m_set = relay.z1_set_ohm, relay.k0_set, relay.k0m_set
    budget = study.error_budget.total_pct

    lengths = np.array(geo.section_lengths_m)
    orders = [list(o) for o in geo.section_orders]
    plans = {
        "actual_plan": (orders, lengths),
        "untransposed": (orders[:1], [geo.length_m]),
        "ideal_cycle": (transposition.cyclic_orders(orders[0], n_c), [geo.length_m / 3] * 3),
    }
    field_names = {"m": "reach_study.locations_pct",
                   "r_fault_ohm": "reach_study.fault_resistances",
                   "r_phase_ohm": "reach_study.phase_fault_resistance",
                   "source_scale": "reach_study.source_cases"}
    sweeps = {}
    for key, (ords, lens) in plans.items():
        line = _cascade(params.z_position_ohm_per_m, params.y_position_s_per_m, ords, lens,
                        rs.shunt_capacitance)
        try:
            emf = _emfs_for_power_flows(study, line, src, names, ends[0], scales, parallel,
                                        geo.v_nominal_v)
            sweeps[key] = network.solve_fault_sweep(
                line, src[names[0]], src[names[1]], v_nominal_v=geo.v_nominal_v,
                fault_types=rs.fault_types, m=m, r_fault_ohm=rf,
                r_phase_ohm=rs.phase_fault_resistance, source_scale=scales,
                transfer_angle_rad=angles, parallel_state=parallel, emf_v=emf,
                field_names=field_names)
        except InputError as exc:
            raise exc.located(source=source) from None

    labels = geo.phase_labels[0]
    end_results = []
    for end_name in ends:
        at_s = end_name == names[0]
        arrs = []
        variants = [(k, False) for k in plans]
        if n_c == 2 and parallel == "in_service" and rs.mutual_compensation:
            variants = [(k, True) for k in plans] + [("actual_plan", False)]
        for key, mutual in variants:
            ords, lens = plans[key]
            if not at_s:  # seen from R the plan runs backwards
                ords, lens = ords[::-1], list(lens)[::-1]
            arrs.append(_condense(sweeps[key], at_s, key, mutual, z1_set, k0_set,
                                  k0m_set if mutual else None, z1_reach, rs, labels,
                                  ords, lens, geo.position_names))
        actual = arrs[0]
        worst = actual.worst_bolted_overreach_at_remote_bus_pct
        rec = recommended_zone1_pct(worst, budget, zone1_max_pct, zone1_margin_pct)
        gov = max((lp for lp in actual.loops if lp.over_at_remote_bus is not None),
                  key=lambda lp: lp.over_at_remote_bus.error_pct, default=None)
        end_results.append(EndReach(
            end=end_name, z1_set_ohm=complex(z1_set), k0_set=complex(k0_set),
            k0m_set=None if k0m_set is None else complex(k0m_set),
            zone1_reach_pct=z1_reach, error_budget_pct=budget, recommended_zone1_pct=rec,
            governing_loop="" if gov is None else gov.loop,
            governing_case=None if gov is None else gov.over_at_remote_bus,
            arrangements=tuple(arrs)))

    notes = [
        "Relay set with Z1 and k0 of the ideally transposed line unless [relay] gives them.",
        "Reach error = (m - m_apparent)/m along the line angle, in % of the reach; positive "
        "is overreach.",
        "Worst bolted errors (Rf = 0) measure what untransposition does; resistive faults "
        "add the reactance error of remote infeed and load, shown separately.",
        f"Recommended zone 1 = ({100 - zone1_margin_pct:g} %) / (1 + ({budget:g} % error "
        "budget + worst bolted overreach at the remote bus)/100), capped at "
        f"{zone1_max_pct:g} %, rounded down to 0.5 %.",
    ]
    if rs.shunt_capacitance:
        notes.append("Line shunt capacitance included (exact distributed sections).")
    else:
        notes.append("Line shunt capacitance neglected (series impedance only).")
    sweep = sweeps["actual_plan"]
    return ReachStudyResult(
        fault_types=tuple(rs.fault_types),
        locations_pct=tuple(float(x) for x in 100 * m),
        fault_resistances_ohm=tuple(float(x) for x in rf),
        phase_fault_resistance_ohm=rs.phase_fault_resistance,
        source_cases=tuple((c.name, c.scale) for c in rs.source_cases),
        transfer_angles_deg=tuple(math.degrees(a) for a in angles),
        parallel_circuit=parallel if n_c == 2 else None,
        shunt_capacitance=rs.shunt_capacitance,
        source_impedances={n: {"z1_ohm": cplx(s.z1_ohm), "z0_ohm": cplx(s.z0_ohm)}
                           for n, s in src.items() if s is not None},
        ends=tuple(end_results),
        n_cases=int(sweep.v_s.size // 3) * len(plans),
        notes=tuple(notes),
    )


def _emfs_for_power_flows(study, line, src, names, relay_end, scales, parallel, v_nom):
    """EMFs of both sources for the P, Q load cases at the relay end (None: use angles).

    The positive-sequence load flow of :func:`relayset.physics.network.emfs_for_load`
    fixes the relay-end voltage at nominal; seen from the far end the line is reversed.
    """
    if not (study.load and study.load.power_flows):
        return None
    p = np.array([f.active_power for f in study.load.power_flows])
    q = np.array([f.reactive_power for f in study.load.power_flows])
    if relay_end == names[0]:
        return network.emfs_for_load(line, src[names[0]], src[names[1]], v_nominal_v=v_nom,
                                     p_w=p, q_var=q, source_scale=scales,
                                     parallel_state=parallel)
    rev = network.LineCascade(line.z_ohm_per_m[::-1], line.length_m[::-1],
                              None if line.y_s_per_m is None else line.y_s_per_m[::-1])
    e_r, e_s = network.emfs_for_load(rev, src[names[1]], src[names[0]], v_nominal_v=v_nom,
                                     p_w=p, q_var=q, source_scale=scales[..., ::-1]
                                     if np.ndim(scales) == 2 else scales,
                                     parallel_state=parallel)
    return e_s, e_r


def _condense(sw, at_s, key, mutual, z1_set, k0_set, k0m_set, z1_reach, rs, labels,
              orders, lengths, position_names) -> ArrangementReach:
    if at_s:
        v, i, ip, m = sw.v_s, sw.i_s, sw.i_s_parallel, sw.m
    else:
        v, i, ip, m = sw.v_r, sw.i_r, sw.i_r_parallel, 1.0 - sw.m
    loops = measurement.loop_impedances(v, i, k0_set, i_parallel=ip if mutual else None,
                                        k0m=k0m_set or 0)
    # axes: (F, M, Rf, K, L)
    m_b = m[None, :, None, None, None]
    ftypes = sw.fault_types
    rf = sw.r_fault_ohm
    i_reach = int(np.argmin(np.abs(m - z1_reach / 100)))
    i_remote = int(np.argmax(m))
    summaries = []
    env_max, env_min = [], []
    for loop in LOOPS:
        meant = np.array([loop in measurement.loops_for_fault(ft) for ft in ftypes])
        with np.errstate(all="ignore"):  # loops that see no current give inf/nan
            along, react = measurement.reach_error_pct(loops[loop], m_b, z1_set)
        along = np.where(meant[:, None, None, None, None], along, np.nan)
        react = np.where(meant[:, None, None, None, None], react, np.nan)
        bolted = np.where((rf == 0)[None, None, :, None, None], along, np.nan)
        resist = np.where((rf > 0)[None, None, :, None, None], react, np.nan)

        def pick(arr, fn, mask_m=None, loop=loop):
            a = arr if mask_m is None else np.where(mask_m, arr, np.nan)
            if not np.any(np.isfinite(a)):
                return None
            idx = np.unravel_index(fn(a), a.shape)
            f, k_m, k_rf, k_s, k_l = idx
            mm = float(m[k_m])
            return WorstCase(
                error_pct=float(a[idx]), fault_type=fault_label(ftypes[f], labels), m=mm,
                r_fault_ohm=float(rf[k_rf]), source_case=rs.source_cases[k_s].name,
                transfer_angle_deg=math.degrees(float(np.angle(sw.emf_s_v[k_s, k_l])
                                                      - np.angle(sw.emf_r_v[k_s, k_l]))),
                positions=_positions_at(mm, loop, orders, lengths, position_names))

        at_reach = np.zeros_like(m, dtype=bool)
        at_reach[i_reach] = True
        at_remote = np.zeros_like(m, dtype=bool)
        at_remote[i_remote] = True
        mr = at_reach[None, :, None, None, None]
        mrem = at_remote[None, :, None, None, None]
        summaries.append(LoopSummary(
            loop=_loop_label(loop, labels),
            over_at_reach=pick(bolted, np.nanargmax, mr),
            under_at_reach=pick(bolted, np.nanargmin, mr),
            over_line=pick(bolted, np.nanargmax),
            under_line=pick(bolted, np.nanargmin),
            over_at_remote_bus=pick(bolted, np.nanargmax, mrem),
            reactance_over_resistive=pick(resist, np.nanargmax, mr),
        ))
        with warnings.catch_warnings():  # all-NaN slices (m = 0) are expected
            warnings.simplefilter("ignore", RuntimeWarning)
            env_max.append(np.nanmax(bolted, axis=(0, 2, 3, 4)))
            env_min.append(np.nanmin(bolted, axis=(0, 2, 3, 4)))

    def extreme(attr, fn):
        vals = [getattr(s, attr).error_pct for s in summaries if getattr(s, attr) is not None]
        return float(fn(vals)) if vals else float("nan")

    order_m = np.argsort(m)
    return ArrangementReach(
        arrangement=key,
        mutual_compensation=mutual,
        loops=tuple(summaries),
        worst_bolted_overreach_at_remote_bus_pct=extreme("over_at_remote_bus", max),
        worst_bolted_overreach_on_line_pct=extreme("over_line", max),
        worst_bolted_underreach_on_line_pct=extreme("under_line", min),
        envelope_m=m[order_m],
        envelope_max_pct=np.array(env_max)[:, order_m],
        envelope_min_pct=np.array(env_min)[:, order_m],
    )
