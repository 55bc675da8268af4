"""The fault simulation of a verification: every solve over the envelope, no settings.

One :class:`Run` is one batched solve (one earth resistivity, parallel-circuit state,
faulted circuit, source configuration and fault group); :func:`simulate` makes all of them.

The fault currents do not depend on the zone settings, only the zones' judgement does. So
each run can be *measured* as it is solved (``measure``: what the relay at each end sees,
its loops, release and direction, see :mod:`.relay_model`), its bulky phase quantities
dropped, and the measurement kept for every later judgement: the settings closed by the
simulation and their verification then share one simulation, and its memory is the
measured loops, not every phase voltage and current of every case.
"""

from __future__ import annotations

import itertools
from collections.abc import Callable
from dataclasses import dataclass, field, replace

import numpy as np

from relayset.errors import InputError
from relayset.inputs.study_file import Study
from relayset.physics import network
from relayset.results.parameters import LineParameters
from relayset.studies.geometry import LineGeometry
from relayset.studies.reach import build_source, emfs_for_flows_at, line_cascade
from relayset.studies.series_capacitors import capacitor_basis, solve_sweep, with_state
from relayset.studies.verification.envelope import SEQUENTIAL_M, Envelope, FaultGroup

#: Per-case results the relay model reads (both ends, both circuits, the currents into the
#: fault from each side for faults behind a relay); the fault-point voltage is not needed.
OUTPUTS = ("v_s", "i_s", "i_s_parallel", "v_r", "i_r", "i_r_parallel", "i_f_from_s",
           "i_f_from_r")


@dataclass(frozen=True, eq=False)
class Run:
    """One batched solve and how to read it."""

    sweep: network.FaultSweep
    faulted: str  #: "protected" or "parallel"
    state: str  #: parallel-circuit state, "none" for a single circuit
    case_names: tuple[str, ...]  #: per source-case index
    rho_ohm_m: float
    sources: tuple[bool, bool]  #: source in service at S, at R
    group: str = ""  #: fault group (by the resistance the faults go through)
    #: Sequential clearing: the bus at which the faulted parallel circuit's breaker is open
    #: ("" where both are closed).
    open_at: str = ""
    #: Faults along lines leaving the buses (faulted "branch"): per location (bus, line
    #: name, fraction of that line), see :mod:`.branches`.
    branch: tuple[tuple[str, str, float], ...] = ()
    #: Measurements kept when the phase quantities were dropped: key -> (relay, view).
    views: dict = field(default_factory=dict)
    #: Per end (True: S), the infeed samples of :func:`infeed_samples`, once measured.
    infeed: dict = field(default_factory=dict)
    #: Per end (True: S), the largest phase current of each case [A], once measured.
    i_max: dict = field(default_factory=dict)
    #: Series capacitor state of every bank ("" for a line without banks), see
    #: :mod:`relayset.studies.series_capacitors`.
    cap_state: str = ""
    #: Faulted "neighbour": which neighbouring line (index into ``[[neighbours]]``).
    neighbour: int = -1

    @property
    def n_cases(self) -> int:
        sw = self.sweep
        return len(sw.fault_types) * sw.m.size * sw.r_fault_ohm.size * sw.emf_s_v.size

    @property
    def measured(self) -> bool:
        """Whether the phase quantities were dropped (only the kept views remain)."""
        return self.sweep.v_s is None


@dataclass(frozen=True, eq=False)
class Simulation:
    """Every solve a verification needs, independent of the zone settings."""

    names: tuple[str, str]
    labels: tuple[str, str, str]
    runs: tuple[Run, ...]
    n_circuits: int
    mutual: bool
    case_names: tuple[str, ...]
    states: tuple[str, ...]
    resistivities: tuple[float, ...]
    max_transfer_angle_deg: float = 0.0
    #: Series capacitor states solved (empty without banks) and the banks' basis.
    capacitor_states: tuple[str, ...] = ()
    capacitors: dict | None = None
    #: The neighbouring lines' names (shared corridors; ``Run.neighbour`` indexes them).
    neighbour_names: tuple[str, ...] = ()

    @property
    def n_cases(self) -> int:
        return sum(r.n_cases for r in self.runs)

    def joined(self, other: Simulation) -> Simulation:
        """This simulation and ``other`` (more fault locations of the same envelope)."""
        return replace(self, runs=self.runs + other.runs,
                       max_transfer_angle_deg=max(self.max_transfer_angle_deg,
                                                  other.max_transfer_angle_deg))


#: Phase quantities a measured run no longer holds.
BULK = ("v_s", "i_s", "i_s_parallel", "v_r", "i_r", "i_r_parallel", "v_f", "i_fault",
        "i_f_from_s", "i_f_from_r")


def lighten(run: Run) -> Run:
    """The run without its phase quantities (after measuring: see the module notes)."""
    return replace(run, sweep=replace(run.sweep, **dict.fromkeys(BULK)), views={},
                   infeed={}, i_max={})


def largest_phase_current(run: Run, at_s: bool) -> np.ndarray:
    """The largest phase current of each case at the relay at S (``at_s``) or R [A],
    (F, M, Rf, K, L): what the minimum operating current is compared with."""
    if at_s in run.i_max:
        return run.i_max[at_s]
    if run.measured:
        raise RuntimeError("this run was measured without the relay currents of that end")
    return np.max(np.abs(run.sweep.i_s if at_s else run.sweep.i_r), axis=-1)


def infeed_samples(run: Run, at_s: bool) -> list[tuple[complex, str]]:
    """Infeed factors K = I_fault / I_relay of the run's bolted three-phase faults at the
    remote bus, seen from S (``at_s``) or R, with their case descriptions (see
    :func:`relayset.studies.verification.checks.infeed_range`)."""
    if at_s in run.infeed:
        return run.infeed[at_s]
    if run.faulted != "protected" or not run.sources[0 if at_s else 1]:
        return []  # without a source behind the relay there is no relay current
    sw = run.sweep
    if "ABC" not in sw.fault_types:
        return []
    f = sw.fault_types.index("ABC")
    k_m = int(np.argmax(sw.m)) if at_s else int(np.argmin(sw.m))
    if abs(sw.m[k_m] - (1.0 if at_s else 0.0)) > 1e-12:
        return []
    k_rf = int(np.argmin(sw.r_fault_ohm + sw.r_phase_ohm))
    i_f = sw.i_fault[f, k_m, k_rf]  # (K, L, 3)
    # The fault's own (incremental) relay current: the infeed factor of the grading
    # formula belongs to the superposed fault network, whatever load flowed before.
    i_rel = ((sw.i_s if at_s else sw.i_r)[f, k_m, k_rf]
             - (sw.i_s_pre if at_s else sw.i_r_pre))
    with np.errstate(all="ignore"):
        k = (i_f[..., 0] - i_f[..., 1]) / (i_rel[..., 0] - i_rel[..., 1])
    # the load case by its transfer angle, also for power flows
    delta = np.degrees(sw.transfer_angle_rad)  # (K, L)
    out = []
    # A neighbouring line's state names itself ("neighbour earthed"), as in every case.
    state = run.state if run.state.startswith("neighbour") else f"parallel {run.state}"
    for (a, b), kv in np.ndenumerate(k):
        if np.isfinite(kv):
            cap = f", series capacitors {run.cap_state.replace('_', ' ')}" if run.cap_state else ""
            out.append((complex(kv), f"{run.case_names[a]}, {state}{cap}, "
                        f"transfer angle {delta[a, b]:.1f}°"))
    return out


def source_configs(study: Study, names, src):
    """(source S, source R, scales (K, 2), case names, with load) per configuration."""
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


def swap_circuits(line: network.LineCascade) -> network.LineCascade:
    """The same line with circuit 2 first, so that the solver faults the parallel circuit
    (the circuits after them, neighbouring lines, stay where they are)."""
    p = [3, 4, 5, 0, 1, 2, *range(6, line.n_conductors)]
    z = line.z_ohm_per_m[:, p][:, :, p]
    y = None if line.y_s_per_m is None else line.y_s_per_m[:, p][:, :, p]
    els = tuple(network.SeriesElement(e.at, e.z_ohm[p][:, p], e.vt_line_side)
                for e in line.elements)
    return network.LineCascade(z, line.length_m, y, els)


def load_emfs(env: Envelope, line, src, names, relay_end, scales, state,
              v_nom: float, corridor: int = 0) -> np.ndarray:
    """(2, K, L) phase-A EMFs of both sources for every load case of the envelope: the
    listed cases (transfer angles, or power flows at the relay end), then the maximum load
    exported at each end in turn (the other end then imports it), through the load flow."""
    parts = []
    if env.listed_flows_va:
        f = np.array(env.listed_flows_va)
        parts.append(np.stack(emfs_for_flows_at(line, src, names, relay_end, f.real, f.imag,
                                                scales, state, v_nom, corridor)))
    else:
        parts.append(np.stack(network._emfs(v_nom, np.array(env.transfer_angles_rad), None,
                                            scales.shape[0], None)))
    if env.envelope_flows_va:
        f = np.array(env.envelope_flows_va)
        for end in names:
            parts.append(np.stack(emfs_for_flows_at(line, src, names, end, f.real, f.imag,
                                                    scales, state, v_nom, corridor)))
    return np.concatenate(parts, axis=2)


def simulate(study: Study, geo: LineGeometry, params_by_rho: dict[float, LineParameters],
             env: Envelope, *, m: np.ndarray, source: str, protected: bool = True,
             parallel: bool = True, load: bool = True, sequential: bool = True,
             branches: bool = True,
             measure: Callable[[Run], Run] | None = None) -> Simulation:
    """Solve the fault cases of a verification over the envelope (no settings needed).

    Parameters
    ----------
    study, geo
        The validated study and its geometry.
    params_by_rho : dict
        Line parameters per earth resistivity [ohm m] of the sweep.
    env : Envelope
        Load cases and fault-resistance grids.
    m : (M,) array
        Fault locations from the from-substation [1].
    sequential : bool
        Also solve sequential clearing of parallel-circuit faults on a double circuit
        (the faulted parallel circuit open at one end, then at the other; both circuits
        in service, the EMFs of the load flow with both closed) at :data:`SEQUENTIAL_M`,
        faults to ground (ground and two-phase-to-ground groups), both sources in service.
    branches : bool
        Also solve faults along the lines leaving the buses (behind a relay, beyond the
        remote bus; :mod:`.branches`), at the study's earth resistivity, both circuits in
        service.

    With neighbouring lines in shared corridors (``[[neighbours]]``) the states are
    :func:`relayset.studies.corridor.corridor_states` (run state "neighbour in_service"
    and so on, with the parallel circuit's state on a double circuit), and with
    ``parallel`` each neighbour's faults are solved along its shared stretch, every circuit
    in service (faulted "neighbour", external to the protected line; ``Run.neighbour``
    says which).
    measure : callable, optional
        Applied to each run as it is solved (e.g. keep what the relays see and drop the
        phase quantities, :class:`relayset.studies.verification.relay_model.Measure`).
    """
    names = study.ends
    src = {n: build_source(study, n, source) for n in names}
    if src[names[0]] is None and src[names[1]] is None:
        raise InputError(f"give a source for {names[0]!r} or {names[1]!r} (or both)",
                         field="sources", source=source)
    rs = study.reach_study
    n_c = geo.n_circuits
    states = network.PARALLEL_STATES if n_c == 2 else ("in_service",)
    mutual = n_c == 2 and rs.mutual_compensation
    corridor = geo.corridor is not None
    cor_n = n_c if corridor else 0  # the load flow's protected circuits
    if corridor:
        from relayset.studies.corridor import (
            corridor_states,
            neighbour_circuit,
            neighbour_ends,
            neighbour_fault_locations,
        )

        states = corridor_states(geo)
    relay_end = study.relay.end if study.relay and study.relay.end in names else names[0]
    configs = source_configs(study, names, src)
    groups = env.groups(tuple(network.FAULT_TYPES))
    runs = []
    all_names: list[str] = []
    max_angle = 0.0
    caps = _capacitors(study, geo, params_by_rho, src, source)
    cap_states = caps.states if caps is not None else ("",)
    for rho, params in params_by_rho.items():
        nb_ends = neighbour_ends(study, params, source) if corridor else None
        # one level: parallel-circuit (or neighbours') state x capacitor state
        for cstate, cap in ((s, c) for s in states for c in cap_states):
            # a corridor's state: the parallel circuit's and the neighbours' (the solver's
            # keywords), named by its label
            state = cstate.parallel if corridor else cstate
            all_in = cstate.all_in_service if corridor else state == "in_service"
            nb_kw = cstate.solver_args(nb_ends) if corridor else {}
            run_state = cstate.label if corridor else _state_name(state, n_c, False)
            line = with_state(line_cascade(geo, params, "actual_plan", rs.shunt_capacitance),
                              caps, cap)
            jobs = []
            if protected:
                jobs.append(("protected", line, state, "", m))
            if parallel and corridor and all_in:
                jobs += [("neighbour", line, state, "", neighbour_fault_locations(geo, m, j),
                          neighbour_circuit(geo, j)) for j in range(len(geo.corridors))]
            if parallel and n_c == 2 and all_in:
                swapped = swap_circuits(line)
                jobs.append(("parallel", swapped, state, "", m))
                if sequential:
                    jobs += [("parallel", swapped, open_state, bus, SEQUENTIAL_M)
                             for open_state, bus in zip(network.OPEN_END_STATES, names,
                                                        strict=True)]
            emfs: dict = {}  # per (line, configuration): sequential clearing reuses them
            for faulted, ln, solved_state, open_at, m_job, *fc in jobs:
                for c, (s_s, s_r, scales, labels, loaded) in enumerate(configs):
                    if open_at and (s_s is None or s_r is None):
                        # Sequential clearing needs both sources: with one out, the
                        # protected circuit carries no fault current or sees the fault
                        # through both circuits (twice the line, no zone 1 concern).
                        continue
                    if loaded and load:
                        if (id(ln), c) not in emfs:
                            emfs[id(ln), c] = load_emfs(env, ln, src, names, relay_end,
                                                        scales, state, geo.v_nominal_v,
                                                        cor_n)
                        emf = emfs[id(ln), c]
                        d = np.degrees(np.abs(np.angle(emf[0] / emf[1])))
                        max_angle = max(max_angle, float(np.max(d)))
                        emf_t = (emf[0], emf[1])
                    else:
                        emf_t = None
                    # Sequential clearing: faults to ground only (lean: the zero-sequence
                    # mutual coupling that makes it worst acts through the residual current;
                    # phase faults on the parallel circuit are judged with both ends closed).
                    for g in (groups if not open_at else
                              [g for g in groups if g.name != "phase"]):
                        try:
                            sw = solve_sweep(
                                caps, cap, ln, s_s, s_r, v_nominal_v=geo.v_nominal_v,
                                fault_types=g.fault_types, m=np.asarray(m_job),
                                r_fault_ohm=g.rf_pairs[:, 0], r_phase_ohm=g.rf_pairs[:, 1],
                                source_scale=scales, transfer_angle_rad=np.zeros(1),
                                emf_v=emf_t, outputs=OUTPUTS,
                                fault_circuit=fc[0] if fc else 1,
                                **{**nb_kw, "parallel_state": solved_state})
                        except InputError as exc:
                            raise exc.located(source=source) from None
                        run = Run(sw, faulted, run_state, labels,
                                  rho, (s_s is not None, s_r is not None), g.name,
                                  open_at=open_at, cap_state=cap,
                                  neighbour=fc[0] - n_c - 1 if fc else -1)
                        runs.append(run if measure is None else measure(run))
                    all_names += [n for n in labels if n not in all_names]
    if branches and protected:
        for cap in cap_states:
            runs += _branch_runs(study, geo, params_by_rho, env, names, src, configs, groups,
                                 relay_end, source, measure, caps, cap)
    return Simulation(names, geo.phase_labels[0], tuple(runs), n_c, mutual,
                      tuple(all_names),
                      tuple(s.label if corridor else _state_name(s, n_c, False)
                            for s in states)
                      if n_c == 2 or corridor else ("none",),
                      tuple(sorted(params_by_rho)), max_angle,
                      capacitor_states=tuple(c for c in cap_states if c),
                      capacitors=None if caps is None else caps.to_dict(),
                      neighbour_names=tuple(c.name for c in geo.corridors))


def _capacitors(study, geo, params_by_rho, src, source):
    """The series capacitor banks' basis (None without banks), at the study's earth
    resistivity (or the first of the sweep)."""
    if not study.series_capacitors:
        return None
    rho = float(study.system.earth_resistivity)
    params = params_by_rho.get(rho) or next(iter(params_by_rho.values()))
    line = line_cascade(geo, params, "actual_plan", study.reach_study.shunt_capacitance)
    try:
        return capacitor_basis(study, geo, params, line, src, source)
    except InputError as exc:
        raise exc.located(source=source) from None


def _state_name(state: str, n_c: int, corridor: bool) -> str:
    """A run's state as reported: the parallel circuit's, the neighbour's, or "none"."""
    if corridor:
        return f"neighbour {state}"
    return state if n_c == 2 else "none"


def _branch_runs(study, geo, params_by_rho, env, names, src, configs, groups, relay_end,
                 source, measure, caps=None, cap="") -> list[Run]:
    """Faults along the lines leaving both buses (see :mod:`.branches`): one solve per
    source configuration and fault group, every line point a location at its bus."""
    from relayset.physics.sequence import balanced_phase_matrix
    from relayset.studies.verification.branches import branch_lines

    lines = branch_lines(study, source)
    if not lines:
        return []
    info = tuple((b.bus, b.name, x) for b in lines for x in b.fractions)
    m = np.array([0.0 if bus == names[0] else 1.0 for bus, _n, _x in info])
    z1 = np.array([x * b.z1_ohm for b in lines for x in b.fractions])
    z0 = np.array([x * b.z0_ohm for b in lines for x in b.fractions])
    z_b = balanced_phase_matrix(z1, z0)
    rho = float(study.system.earth_resistivity)
    if rho not in params_by_rho:
        rho = next(iter(params_by_rho))
    params = params_by_rho[rho]
    line = with_state(line_cascade(geo, params, "actual_plan",
                                   study.reach_study.shunt_capacitance), caps, cap)
    out = []
    # Lean (the benchmark's budget): every fault group with both circuits in service;
    # with the parallel circuit out (the smallest infeed, for zone 2's grading and zone 3's
    # coverage) bolted faults of every type.
    bolted = FaultGroup("bolted", tuple(ft for g in groups for ft in g.fault_types),
                        np.zeros((1, 2)))
    states = network.PARALLEL_STATES if geo.n_circuits == 2 else ("in_service",)
    corridor = geo.corridor is not None
    nb_ends = None
    if corridor:  # the corridor's states (the parallel circuit's and the neighbours')
        from relayset.studies.corridor import corridor_states, neighbour_ends

        states, nb_ends = corridor_states(geo), neighbour_ends(study, params, source)
    for cstate in states:
        state = cstate.parallel if corridor else cstate
        all_in = cstate.all_in_service if corridor else state == "in_service"
        nb_kw = cstate.solver_args(nb_ends) if corridor else {"parallel_state": state}
        for s_s, s_r, scales, labels, loaded in configs:
            emf_t = None
            if loaded:
                emf = load_emfs(env, line, src, names, relay_end, scales, state,
                                geo.v_nominal_v, geo.n_circuits if corridor else 0)
                emf_t = (emf[0], emf[1])
            for g in (groups if all_in else (bolted,)):
                try:
                    sw = solve_sweep(
                        caps, cap, line, s_s, s_r, v_nominal_v=geo.v_nominal_v,
                        fault_types=g.fault_types, m=m, r_fault_ohm=g.rf_pairs[:, 0],
                        r_phase_ohm=g.rf_pairs[:, 1], source_scale=scales,
                        transfer_angle_rad=np.zeros(1), emf_v=emf_t,
                        outputs=OUTPUTS, z_branch_ohm=z_b, **nb_kw)
                except InputError as exc:
                    raise exc.located(source=source) from None
                run = Run(sw, "branch", cstate.label if corridor
                          else _state_name(state, geo.n_circuits, False), labels,
                          rho, (s_s is not None, s_r is not None), g.name, branch=info,
                          cap_state=cap)
                out.append(run if measure is None else measure(run))
    return out
