"""Reach study: per-loop reach error of the real line, its worst cases and zone 1 advice.

The relay is set with one Z1 and one k0 (by default those of the ideally transposed line);
the real line is solved in the phase domain section by section, so each measuring loop sees
its own impedance. This module runs the sweep for the actual transposition plan and, for
comparison, for the untransposed line and an ideal cycle, then condenses the results.
"""

from __future__ import annotations

import bisect
import itertools
import math
import warnings
from dataclasses import replace

import numpy as np

from relayset.errors import InputError
from relayset.inputs.limits import MAX_CASES, MAX_CASES_PER_LOCATION
from relayset.inputs.philosophy import Philosophy
from relayset.inputs.study_file import Study, check_reach_inputs
from relayset.physics import loadflow, measurement, network, transposition
from relayset.physics.arrays import unique_sorted
from relayset.results.parameters import LineParameters
from relayset.results.reach import (
    ArrangementReach,
    EndReach,
    LoopSummary,
    ReachStudyResult,
    WorstCase,
    fault_label,
    loop_label,
)
from relayset.results.relay import RelayBasis
from relayset.results.serialize import cplx
from relayset.settings.zone1 import compensated_zone1_pct, recommended_zone1_pct
from relayset.studies.geometry import LineGeometry
from relayset.studies.parameters import plan_sections, section_stack
from relayset.studies.series_capacitors import (
    capacitor_basis,
    describe_state,
    solve_sweep,
    with_state,
)

LOOPS = measurement.LOOPS


def build_source(study: Study, name: str, source: str) -> network.Source | None:
    """The Thevenin source of a substation from the study, or None for an open end."""
    data = study.sources.get(name)
    if data is None:
        return None
    return source_from_data(study, data, f"sources.{name}", source)


def source_from_data(study: Study, data, field: str, source: str) -> network.Source:
    """The Thevenin source of a ``[sources.NAME]``-like table (``field`` its path)."""
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


#: Fault cases solved and condensed at a time (bounds the sweep's memory, some 0.5 kB a
#: case while a chunk is worked on; the sections of the line add some 5 kB each, not per
#: case: see :func:`relayset.physics.chain.fault_chain_products`). The case limits live with
#: the other input limits.
CHUNK_CASES = 100_000


def _same_cascade(a: network.LineCascade, b: network.LineCascade) -> bool:
    """True when two cascades are the same line, so one sweep serves both: the same section
    matrices, and section lengths equal to rounding (e.g. 9 mi each and 27 mi / 3)."""
    if (a.y_s_per_m is None) != (b.y_s_per_m is None) or a.length_m.shape != b.length_m.shape:
        return False
    return (np.allclose(a.length_m, b.length_m, rtol=1e-12, atol=0)
            and np.array_equal(a.z_ohm_per_m, b.z_ohm_per_m)
            and (a.y_s_per_m is None or np.array_equal(a.y_s_per_m, b.y_s_per_m)))


def _cascade(z_pos, y_pos, orders, lengths, shunt: bool, towers=None) -> network.LineCascade:
    """The line as a cascade of its sections. ``z_pos``/``y_pos``: the matrices by
    position of the one cross-section, or (with ``towers``, the tower of each section) a
    sequence of them, one per tower."""
    if towers is None:
        zs = transposition.section_matrices(z_pos, orders)
        ys = transposition.section_matrices(y_pos, orders) if shunt else None
    else:
        zs = section_stack(z_pos, orders, towers)
        ys = section_stack(y_pos, orders, towers) if shunt else None
    return network.LineCascade(zs, np.asarray(lengths, float), ys)


def line_cascade(geo: LineGeometry, params: LineParameters, plan: str,
                 shunt: bool) -> network.LineCascade:
    """The cascade of an arrangement (see :func:`relayset.studies.parameters.plan_sections`)
    at the resistivity of ``params``."""
    if getattr(params, "neighbour", None) is not None:  # a shared corridor: six conductors
        from relayset.studies.corridor import corridor_cascade

        return corridor_cascade(geo, params, plan, shunt)
    orders, lengths, towers = plan_sections(geo, plan)
    if len(geo.tower_names) <= 1:
        return _cascade(params.z_by_position_ohm_per_m, params.y_by_position_s_per_m,
                        orders, lengths, shunt)
    z_t, y_t = params.tower_matrices()
    return _cascade(z_t, y_t, orders, lengths, shunt, towers)


def _positions_at(m: float, loop: str, orders, lengths, names) -> tuple[str, ...]:
    """The positions of the loop's phases where the fault is (``names``: the position
    names of each section's tower)."""
    total = math.fsum(lengths)  # a few sections: plain Python beats numpy's call overhead
    edges = list(itertools.accumulate(lengths))
    s = min(bisect.bisect_left([e / total for e in edges], m - 1e-12), len(orders) - 1)
    order = list(orders[s])
    return tuple(names[s][order.index(p)].split("/", 1)[-1]
                 for p in measurement.LOOP_PHASES[loop])


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
    m = unique_sorted(np.concatenate([m, [z1_reach / 100, 1.0]]))
    rf = np.array(rs.fault_resistances or (0.0,))
    if 0.0 not in rf:
        rf = np.concatenate([[0.0], rf])
    # (K, 2): the factor on each end's source (a case may weaken one end only).
    scales = np.array([[c.scale_at(names[0]), c.scale_at(names[1])] for c in rs.source_cases])
    angles = np.array(study.load.transfer_angles if study.load else (0.0,))
    flows = study.load.power_flows if study.load else None
    if flows:
        angles = np.zeros(len(flows))  # replaced by the EMFs of each flow

    z1_set, k0_set, k0m_set = relay.z1_set_ohm, relay.k0_set, relay.k0m_set
    budget = study.error_budget.total_pct

    plans = {key: plan_sections(geo, key)
             for key in ("actual_plan", "untransposed", "ideal_cycle")}
    field_names = {"m": "reach_study.locations_pct",
                   "r_fault_ohm": "reach_study.fault_resistances",
                   "r_phase_ohm": "reach_study.phase_fault_resistance",
                   "source_scale": "reach_study.source_cases"}
    lines = {key: line_cascade(geo, params, key, rs.shunt_capacitance) for key in plans}
    # Series capacitor banks: their states are an extra axis of every arrangement's sweep.
    caps = capacitor_basis(study, geo, params, lines["actual_plan"], src, source)
    if caps is not None:
        _check_compensation(caps, study, budget, zone1_margin_pct, source)
    cap_states = caps.states if caps is not None else ("",)
    # Identical arrangements (one-section line: actual plan = untransposed; ideal plan =
    # ideal cycle) are solved once and reported under each name.
    same_as: dict[str, str] = {}
    for key, line in lines.items():
        same_as[key] = next((k for k in same_as if same_as[k] == k
                             and _same_cascade(lines[k], line)), key)
    per_arrangement = (len(rs.fault_types) * m.size * rf.size * scales.shape[0] * angles.size
                       * len(cap_states))
    # Shared corridors: the neighbours' states are a state axis (every arrangement with
    # them in service, the actual plan also in their other states: corridor_states).
    corridor = params.neighbour is not None
    nb_ends, cor_states = None, {}
    if corridor:
        from relayset.studies.corridor import corridor_states, neighbour_ends

        nb_ends = neighbour_ends(study, params, source)
        cor_states = {c.label: c for c in corridor_states(
            geo, parallel if n_c == 2 else None)}
    n_distinct = len(set(same_as.values())) + max(len(cor_states) - 1, 0)
    per_location = per_arrangement // m.size // len(cap_states)
    if per_location > MAX_CASES_PER_LOCATION:  # one location is the smallest chunk
        raise InputError(
            f"asks for {per_location:,} fault cases at each location (fault types x "
            f"resistances x source cases x load cases); at most {MAX_CASES_PER_LOCATION:,}",
            field="reach_study", source=source)
    if per_arrangement * n_distinct > MAX_CASES:  # the step itself is checked on reading
        raise InputError(
            f"asks for {per_arrangement * n_distinct:,} fault cases; the reach study solves "
            f"at most {MAX_CASES:,}: use a coarser step or fewer resistances or cases",
            field="reach_study.location_step_pct", value=rs.location_step_pct, source=source)
    labels = geo.phase_labels[0]
    base = next(iter(cor_states)) if corridor else parallel  # every circuit as set
    variants = [(k, False, base) for k in plans]
    if n_c == 2 and parallel == "in_service" and rs.mutual_compensation:
        variants = [(k, True, base) for k in plans] + [("actual_plan", False, base)]
    if corridor:  # the relay's own arrangement (mutual compensation as it is set)
        variants += [("actual_plan", variants[0][1], st) for st in list(cor_states)[1:]]
    # One condenser per (end, distinct arrangement, mutual compensation); the sweep runs in
    # chunks of locations so that memory stays bounded, each chunk condensed and dropped.
    condensers: dict[tuple[str, str, bool, str], _Condenser] = {}
    for end_name in ends:
        for key, mutual, state in variants:
            ck = (end_name, same_as[key], mutual, state)
            if ck not in condensers:
                condensers[ck] = _Condenser(
                    end_name == names[0], mutual, z1_set, k0_set,
                    k0m_set if mutual else None, z1_reach, rs.fault_types, rf, m,
                    cap_states)
    outputs = [o for e in ends for o in (("v_s", "i_s", "i_s_parallel") if e == names[0]
                                         else ("v_r", "i_r", "i_r_parallel"))]
    m_chunk = max(1, CHUNK_CASES // per_location)
    # per arrangement solved (and the neighbour's state), per capacitor state: (K, L)
    # transfer angles of its load cases
    angles_rad: dict[tuple[str, str], list] = {}
    solves = list(dict.fromkeys((same_as[k], st) for k, _mu, st in variants))
    for key, state in solves:
        angles_rad[key, state] = [None] * len(cap_states)
        for k_c, cap in enumerate(cap_states):
            line = with_state(lines[key], caps, cap)
            try:
                cs = cor_states.get(state)
                p_state = state if cs is None else cs.parallel
                emf = _emfs_for_power_flows(study, line, src, names, ends[0], scales, p_state,
                                            geo.v_nominal_v, n_c if corridor else 0)
                for start in range(0, m.size, m_chunk):
                    sw = solve_sweep(
                        caps, cap, line, src[names[0]], src[names[1]],
                        v_nominal_v=geo.v_nominal_v,
                        fault_types=rs.fault_types, m=m[start:start + m_chunk],
                        r_fault_ohm=rf, r_phase_ohm=rs.phase_fault_resistance,
                        source_scale=scales, transfer_angle_rad=angles,
                        emf_v=emf, field_names=field_names, outputs=outputs,
                        **({"parallel_state": state} if cs is None
                           else cs.solver_args(nb_ends)))
                    for (_end, k, _mutual, st), cond in condensers.items():
                        if k == key and st == state:
                            cond.add(sw, start, k_c)
                    angles_rad[key, state][k_c] = sw.transfer_angle_rad
                    del sw
            except InputError as exc:
                raise exc.located(source=source) from None

    end_results = []
    for end_name in ends:
        at_s = end_name == names[0]
        arrs = []
        for key, mutual, state in variants:
            ords, lens, tws = plans[key]
            names_by_section = [geo.tower_position_names[t] if geo.tower_names
                                else geo.position_names for t in tws]
            if not at_s:  # seen from R the plan runs backwards
                ords, lens = ords[::-1], list(lens)[::-1]
                names_by_section = names_by_section[::-1]
            res = condensers[(end_name, same_as[key], mutual, state)].result(
                key, same_as[key], angles_rad[same_as[key], state], rs, labels, ords, lens,
                names_by_section)
            arrs.append(replace(res, neighbour_state=cor_states[state].reach_label)
                        if corridor else res)
        actual = arrs[0]
        if corridor:  # the neighbours' worst state governs zone 1
            actual = max((a for a in arrs if a.arrangement == "actual_plan"
                          and a.mutual_compensation == actual.mutual_compensation),
                         key=lambda a: a.worst_bolted_overreach_at_remote_bus_pct)
        worst = actual.worst_bolted_overreach_at_remote_bus_pct
        rec = recommended_zone1_pct(worst, budget, zone1_max_pct, zone1_margin_pct)
        allowed = recommended_zone1_pct(worst, budget, 100.0, zone1_margin_pct)  # no cap
        if caps is not None:  # a compensated line: below its compensated reactance
            comp = compensated_zone1_pct(caps.x_line1_ohm, caps.z1_compensated_ohm[end_name].imag,
                                         budget, zone1_margin_pct, zone1_max_pct)
            comp_allowed = compensated_zone1_pct(  # no philosophy cap, as ``allowed``
                caps.x_line1_ohm, caps.z1_compensated_ohm[end_name].imag, budget,
                zone1_margin_pct)
            rec, allowed = min(rec, comp), min(allowed, comp_allowed)
        gov = max((lp for lp in actual.loops if lp.worst_overreach_at_remote_bus is not None),
                  key=lambda lp: lp.worst_overreach_at_remote_bus.error_pct, default=None)
        end_results.append(EndReach(
            end=end_name, z1_set_ohm=complex(z1_set), k0_set=complex(k0_set),
            k0m_set=None if k0m_set is None else complex(k0m_set),
            zone1_reach_pct=z1_reach, error_budget_pct=budget, recommended_zone1_pct=rec,
            zone1_allowed_by_errors_pct=allowed,
            governing_loop="" if gov is None else gov.loop,
            governing_case=None if gov is None else gov.worst_overreach_at_remote_bus,
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
    for n in names:
        if src[n] is None:
            notes.append(f"No source at {n}: the line is fed from the other end only; the "
                         "load cases (transfer angles) have no effect there and repeat.")
    neighbour = None
    if corridor:
        from relayset.studies.corridor import corridor_notes

        notes.append(corridor_notes(params.corridor, "reach", n_c == 2))
        nbs = params.corridor.neighbours
        neighbour = {"name": nbs[0].name, "shared_length_km": nbs[0].shared_length_m / 1e3,
                     "states": [c.reach_label for c in cor_states.values()]}
        if len(nbs) > 1:
            neighbour["neighbours"] = [{"name": nb.name,
                                        "shared_length_km": nb.shared_length_m / 1e3}
                                       for nb in nbs]
    if caps is not None:
        notes += list(caps.notes)
        notes.append(
            f"Compensated line: zone 1 at most min({zone1_max_pct:g} %, (100 - "
            f"{zone1_margin_pct:g} %) / (1 + {budget:g} %/100)) x (X_L1 - X_C)/X_L1 (the "
            "philosophy's zone 1 applied to the compensated reactance; common practice, no "
            "source), with X_C the banks in the relay's measured path; worst cases name the "
            "capacitor state. Close beyond a bank in the relay's path the measured reactance "
            "is offset by -X_C, so the reach error in % of the distance to the fault grows "
            "without bound there: the 'on the line' extremes of a compensated line show that "
            "offset, not a setting error (zone 1 follows from the remote bus and the "
            "compensated-line rule; the inversion checks judge the region near the bank).")
    if rs.shunt_capacitance:
        notes.append("Line shunt capacitance included (exact distributed sections).")
    else:
        notes.append("Line shunt capacitance neglected (series impedance only).")
    return ReachStudyResult(
        fault_types=tuple(rs.fault_types),
        locations_pct=tuple(float(x) for x in 100 * m),
        fault_resistances_ohm=tuple(float(x) for x in rf),
        phase_fault_resistance_ohm=rs.phase_fault_resistance,
        source_cases=tuple((c.name, c.scale) for c in rs.source_cases),
        transfer_angles_deg=(None if flows else tuple(math.degrees(a) for a in angles)),
        power_flows=(tuple((f.active_power, f.reactive_power) for f in flows) if flows
                     else None),
        parallel_circuit=parallel if n_c == 2 else None,
        shunt_capacitance=rs.shunt_capacitance,
        source_impedances_ohm={n: {"z1_ohm": cplx(s.z1_ohm), "z0_ohm": cplx(s.z0_ohm)}
                           for n, s in src.items() if s is not None},
        ends=tuple(end_results),
        cases_solved=per_arrangement * n_distinct,  # identical arrangements are solved once
        notes=tuple(notes),
        neighbour=neighbour,
        series_capacitors=None if caps is None else caps.to_dict(),
    )


def _check_compensation(caps, study: Study, budget: float, margin_pct: float,
                        source: str) -> None:
    """A compensation the compensated-line zone 1 rule cannot take is bad input: the banks
    in a relay's path leave so little of the line's reactance to the remote bus (or none: a
    bank given by its reactance is compared with the line's only here) that zone 1 would
    be 0 %."""
    ends = study.ends
    for end in study.relay_ends:
        x_comp = caps.z1_compensated_ohm[end].imag
        if compensated_zone1_pct(caps.x_line1_ohm, x_comp, budget, margin_pct) > 0:
            continue
        other = ends[1] if end == ends[0] else ends[0]
        raise InputError(
            f"the banks in the path from {end} to {other} have X_C "
            f"{caps.x_line1_ohm - x_comp:.4g} ohm, the line's X1 is "
            f"{caps.x_line1_ohm:.4g} ohm: zone 1, kept below the compensated reactance, "
            "would be 0 %; give a smaller compensation", field="series_capacitors",
            source=source)


def _emfs_for_power_flows(study, line, src, names, relay_end, scales, parallel, v_nom,
                          corridor=False):
    """EMFs of both sources for the P, Q load cases at the relay end (None: use angles)."""
    if not (study.load and study.load.power_flows):
        return None
    p = np.array([f.active_power for f in study.load.power_flows])
    q = np.array([f.reactive_power for f in study.load.power_flows])
    return emfs_for_flows_at(line, src, names, relay_end, p, q, scales, parallel, v_nom,
                             corridor)


def emfs_for_flows_at(line, src, names, end, p_w, q_var, scales, parallel, v_nom,
                      corridor: int = 0):
    """EMFs (e_s, e_r) of both sources for powers P + jQ [W, var] into the line at ``end``.

    The positive-sequence load flow of :func:`relayset.physics.loadflow.emfs_for_load`
    fixes that end's voltage at nominal; seen from the far end the line is reversed.
    ``corridor``: the number of the protected line's circuits (1, 2; True is 1) when the
    circuits after them are neighbouring lines on their own buses, left out of the load
    flow (:func:`relayset.studies.corridor.protected_part`); 0: no neighbour.
    """
    if corridor:
        from relayset.studies.corridor import protected_part

        line = protected_part(line, int(corridor))
        if int(corridor) == 1:
            parallel = "in_service"
    if end == names[0]:
        return loadflow.emfs_for_load(line, src[names[0]], src[names[1]], v_nominal_v=v_nom,
                                     p_w=p_w, q_var=q_var, source_scale=scales,
                                     parallel_state=parallel)
    rev = network.LineCascade(line.z_ohm_per_m[::-1], line.length_m[::-1],
                              None if line.y_s_per_m is None else line.y_s_per_m[::-1],
                              tuple(network.SeriesElement(1.0 - e.at, e.z_ohm, e.vt_line_side)
                                    for e in line.elements))  # series capacitor banks
    e_r, e_s = loadflow.emfs_for_load(rev, src[names[1]], src[names[0]], v_nominal_v=v_nom,
                                     p_w=p_w, q_var=q_var, source_scale=scales[..., ::-1]
                                     if np.ndim(scales) == 2 else scales,
                                     parallel_state=parallel)
    return e_s, e_r


_PICKS = ("over_at_reach", "under_at_reach", "over_line", "under_line", "over_at_remote_bus",
          "reactance_over_resistive")
#: The LoopSummary field (the JSON key) each pick fills.
_FIELD = dict(zip(_PICKS, (
    "worst_overreach_at_zone1_reach", "worst_underreach_at_zone1_reach",
    "worst_overreach_on_line", "worst_underreach_on_line", "worst_overreach_at_remote_bus",
    "worst_reactance_overreach_at_zone1_reach_resistive"), strict=True))


def _extremes(a: np.ndarray, first_meant: np.ndarray, largest: bool):
    """Per loop (first axis), the extreme of the rest of ``a`` with NaN ignored, as
    np.nanargmax/np.nanargmin on that loop's own fault types would find it.

    ``a`` holds NaN for the fault types a loop is not meant for; ``first_meant`` is the flat
    index of each loop's first meant element. Returns (any finite value, extreme value or
    NaN when all NaN, flat index or -1) per loop. Like np.nanargmax, NaN counts as -inf
    (+inf for the minimum) once a finite or infinite value exists, so where the extreme is
    -inf (+inf) the first meant element is the answer, as on the loop's own types.
    """
    flat = a.reshape(a.shape[0], -1)
    nan = np.isnan(flat)
    all_nan = nan.all(axis=1)
    has_finite = np.isfinite(flat).any(axis=1)
    fill = -np.inf if largest else np.inf
    filled = np.where(nan, fill, flat)
    idx = filled.argmax(axis=1) if largest else filled.argmin(axis=1)
    val = filled[np.arange(flat.shape[0]), idx]
    at_fill = val == fill
    idx = np.where(at_fill, first_meant, idx)
    val = flat[np.arange(flat.shape[0]), idx]
    idx = np.where(all_nan, -1, idx)
    return has_finite, np.where(all_nan, np.nan, val), idx


class _Condenser:
    """Worst reach errors of one relay end, arrangement and compensation, accumulated over
    chunks of fault locations. The result is the same as condensing the whole sweep at
    once: each extreme is the first in (fault type, location, resistance, source case,
    load case) order, as np.nanargmax would return it on each loop's own fault types.
    All six loops are condensed together, a loop's other fault types masked with NaN."""

    def __init__(self, at_s, mutual, z1_set, k0_set, k0m_set, z1_reach, ftypes, rf, m,
                 cap_states=("",)):
        self.at_s, self.mutual = at_s, mutual
        self.cap_states = tuple(cap_states)  #: series capacitor states ("" without banks)
        self.k_c = 0  #: the capacitor state of the chunk being condensed
        self.z1_set, self.k0_set, self.k0m_set = z1_set, k0_set, k0m_set
        self.ftypes, self.rf = tuple(ftypes), rf
        self.m = m if at_s else 1.0 - m  # location seen from the relay
        self.i_reach = int(np.argmin(np.abs(self.m - z1_reach / 100)))
        self.i_remote = int(np.argmax(self.m))
        self.rb, self.rr = np.flatnonzero(rf == 0), np.flatnonzero(rf > 0)
        # (loop, fault type): True where the loop is meant to measure the fault type
        self.meant = np.array([[lp in measurement.loops_for_fault(ft) for ft in self.ftypes]
                               for lp in LOOPS])
        self.first_f = np.argmax(self.meant, axis=1)  # first meant fault type per loop
        # per (loop, pick): [any finite value, extreme value, global index]
        self.best = {(lp, p): [False, None, None] for lp in LOOPS for p in _PICKS}
        self.env_max = np.full((len(LOOPS), m.size), np.nan)
        self.env_min = np.full((len(LOOPS), m.size), np.nan)

    def _offer(self, pick, a, largest, to_global) -> None:
        """Offer the extremes of ``a`` (loop, fault type, ...) for one pick of every loop;
        ``to_global`` maps an index into a[loop] to the sweep's case index."""
        rest = int(np.prod(a.shape[2:]))
        has_finite, vals, idxs = _extremes(a, self.first_f * rest, largest)
        for n_lp, lp in enumerate(LOOPS):
            rec = self.best[(lp, pick)]
            rec[0] = rec[0] or bool(has_finite[n_lp])
            if idxs[n_lp] < 0:
                continue
            val = float(vals[n_lp])
            gidx = to_global(np.unravel_index(int(idxs[n_lp]), a.shape[1:]))
            # A NaN record (a chunk with only NaN and infinities) gives way to any number,
            # so that chunks condense as the whole sweep would.
            if (rec[1] is None or (val > rec[1] if largest else val < rec[1])
                    or (val == rec[1] and gidx < rec[2])
                    or (math.isnan(rec[1]) and not math.isnan(val))):
                rec[1], rec[2] = val, gidx

    def _errors(self, v, i, ip, m):
        """Reach errors of the six loops (loop, fault type, ...) [%], NaN for the fault
        types a loop is not meant for."""
        z = measurement.loop_impedances(v, i, self.k0_set,
                                        i_parallel=ip if self.mutual else None,
                                        k0m=self.k0m_set or 0)
        with np.errstate(all="ignore"):  # loops that see no current give inf/nan
            along, react = measurement.reach_error_pct(np.stack([z[lp] for lp in LOOPS]),
                                                       m, self.z1_set)
        along[~self.meant] = np.nan
        react[~self.meant] = np.nan
        return along, react

    def add(self, sw, start: int, k_c: int = 0) -> None:
        """Condense one chunk of the sweep, whose locations start at index ``start``
        (``k_c``: its capacitor state)."""
        self.k_c = k_c
        cap = (k_c,) if len(self.cap_states) > 1 else ()  # the case index's capacitor state
        if self.at_s:
            v, i, ip = sw.v_s, sw.i_s, sw.i_s_parallel
        else:
            v, i, ip = sw.v_r, sw.i_r, sw.i_r_parallel
        n_m = v.shape[1]
        stop = start + n_m
        rb, rr = self.rb, self.rr
        # (loop, F, Mc, Rb, K, L)
        along, _ = self._errors(v[:, :, rb], i[:, :, rb], ip[:, :, rb],
                                self.m[start:stop][None, None, :, None, None, None])
        with warnings.catch_warnings():  # all-NaN slices (m = 0, unused loops) are expected
            warnings.simplefilter("ignore", RuntimeWarning)
            self.env_max[:, start:stop] = np.fmax(self.env_max[:, start:stop],
                                                  np.nanmax(along, axis=(1, 3, 4, 5)))
            self.env_min[:, start:stop] = np.fmin(self.env_min[:, start:stop],
                                                  np.nanmin(along, axis=(1, 3, 4, 5)))

        def line_idx(ix):
            return (int(ix[0]), start + int(ix[1]), int(rb[ix[2]]), int(ix[3]), int(ix[4]),
                    *cap)

        self._offer("over_line", along, True, line_idx)
        self._offer("under_line", along, False, line_idx)
        for j_m, picks in ((self.i_reach, (("over_at_reach", True), ("under_at_reach", False))),
                           (self.i_remote, (("over_at_remote_bus", True),))):
            if not start <= j_m < stop:
                continue

            def point_idx(ix, j_m=j_m):
                return (int(ix[0]), j_m, int(rb[ix[1]]), int(ix[2]), int(ix[3]), *cap)

            sub = along[:, :, j_m - start]
            for pick, largest in picks:
                self._offer(pick, sub, largest, point_idx)
        if start <= self.i_reach < stop and rr.size:
            j = self.i_reach - start
            _, react = self._errors(v[:, j, rr], i[:, j, rr], ip[:, j, rr],
                                    self.m[self.i_reach])  # (loop, F, Rr, K, L)

            def res_idx(ix):
                return (int(ix[0]), self.i_reach, int(rr[ix[1]]), int(ix[2]), int(ix[3]),
                        *cap)

            self._offer("reactance_over_resistive", react, True, res_idx)

    def result(self, key, solved_as, angle, rs, labels, orders, lengths,
               position_names) -> ArrangementReach:
        """The condensed results, reported under arrangement name ``key``; ``solved_as`` is
        the arrangement whose sweep they are (another name when it is the same line);
        ``angle`` the (K, L) transfer angles of its cases [rad]."""
        ft_labels = [fault_label(ft, labels) for ft in self.ftypes]

        def case(lp, pick):
            has_finite, val, idx = self.best[(lp, pick)]
            if not has_finite or val is None:
                return None
            f, k_m, k_rf, k_s, k_l = idx[:5]
            k_c = idx[5] if len(idx) > 5 else 0
            mm = float(self.m[k_m])
            cap = self.cap_states[k_c]
            return WorstCase(
                error_pct=val, fault_type=ft_labels[f], m=mm,
                r_fault_ohm=float(self.rf[k_rf]),
                source_case=rs.source_cases[k_s].name + (
                    f" (series capacitors {describe_state(cap, short=True)})" if cap else ""),
                transfer_angle_deg=math.degrees(float(angle[k_c][k_s, k_l])),
                positions=_positions_at(mm, lp, orders, lengths, position_names))

        summaries = [LoopSummary(loop=loop_label(lp, labels),
                                 **{_FIELD[p]: case(lp, p) for p in _PICKS}) for lp in LOOPS]

        def extreme(attr, fn):
            vals = [getattr(s, attr).error_pct for s in summaries
                    if getattr(s, attr) is not None]
            return float(fn(vals)) if vals else float("nan")

        order_m = np.argsort(self.m)
        return ArrangementReach(
            arrangement=key,
            solved_as=None if solved_as == key else solved_as,
            mutual_compensation=self.mutual,
            loops=tuple(summaries),
            worst_bolted_overreach_at_remote_bus_pct=extreme("worst_overreach_at_remote_bus", max),
            worst_bolted_overreach_on_line_pct=extreme("worst_overreach_on_line", max),
            worst_bolted_underreach_on_line_pct=extreme("worst_underreach_on_line", min),
            envelope_m=self.m[order_m],
            envelope_max_pct=self.env_max[:, order_m],
            envelope_min_pct=self.env_min[:, order_m],
        )
