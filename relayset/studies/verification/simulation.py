"""The fault simulation of a verification: every solve over the envelope, no settings.

One :class:`Run` is one batched solve (one earth resistivity, parallel-circuit state,
faulted circuit, source configuration and fault group); :func:`simulate` makes all of them.
"""

from __future__ import annotations

import itertools
from dataclasses import dataclass

import numpy as np

from relayset.errors import InputError
from relayset.inputs.study_file import Study
from relayset.physics import network
from relayset.results.parameters import LineParameters
from relayset.studies.geometry import LineGeometry
from relayset.studies.reach import _cascade, build_source, emfs_for_flows_at
from relayset.studies.verification.envelope import Envelope

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

    @property
    def n_cases(self) -> int:
        return sum(int(r.sweep.i_fault.size // 3) for r in self.runs)


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
    """The same line with circuit 2 first, so that the solver faults the parallel circuit."""
    p = [3, 4, 5, 0, 1, 2]
    z = line.z_ohm_per_m[:, p][:, :, p]
    y = None if line.y_s_per_m is None else line.y_s_per_m[:, p][:, :, p]
    return network.LineCascade(z, line.length_m, y)


def load_emfs(env: Envelope, line, src, names, relay_end, scales, state,
              v_nom: float) -> np.ndarray:
    """(2, K, L) phase-A EMFs of both sources for every load case of the envelope: the
    listed cases (transfer angles, or power flows at the relay end), then the maximum load
    exported at each end in turn (the other end then imports it), through the load flow."""
    parts = []
    if env.listed_flows_va:
        f = np.array(env.listed_flows_va)
        parts.append(np.stack(emfs_for_flows_at(line, src, names, relay_end, f.real, f.imag,
                                                scales, state, v_nom)))
    else:
        parts.append(np.stack(network._emfs(v_nom, np.array(env.transfer_angles_rad), None,
                                            scales.shape[0], None)))
    if env.envelope_flows_va:
        f = np.array(env.envelope_flows_va)
        for end in names:
            parts.append(np.stack(emfs_for_flows_at(line, src, names, end, f.real, f.imag,
                                                    scales, state, v_nom)))
    return np.concatenate(parts, axis=2)


def simulate(study: Study, geo: LineGeometry, params_by_rho: dict[float, LineParameters],
             env: Envelope, *, m: np.ndarray, source: str, protected: bool = True,
             parallel: bool = True, load: bool = True) -> Simulation:
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
    lengths = np.array(geo.section_lengths_m)
    orders = [list(o) for o in geo.section_orders]
    relay_end = study.relay.end if study.relay and study.relay.end in names else names[0]
    configs = source_configs(study, names, src)
    groups = env.groups(tuple(network.FAULT_TYPES))
    runs = []
    all_names: list[str] = []
    max_angle = 0.0
    for rho, params in params_by_rho.items():
        for state in states:
            line = _cascade(params.z_by_position_ohm_per_m, params.y_by_position_s_per_m, orders,
                            lengths, rs.shunt_capacitance)
            jobs = []
            if protected:
                jobs.append(("protected", line))
            if parallel and n_c == 2 and state == "in_service":
                jobs.append(("parallel", swap_circuits(line)))
            for faulted, ln in jobs:
                for s_s, s_r, scales, labels, loaded in configs:
                    if loaded and load:
                        emf = load_emfs(env, ln, src, names, relay_end, scales, state,
                                        geo.v_nominal_v)
                        d = np.degrees(np.abs(np.angle(emf[0] / emf[1])))
                        max_angle = max(max_angle, float(np.max(d)))
                        emf_t = (emf[0], emf[1])
                    else:
                        emf_t = None
                    for g in groups:
                        try:
                            sw = network.solve_fault_sweep(
                                ln, s_s, s_r, v_nominal_v=geo.v_nominal_v,
                                fault_types=g.fault_types, m=m,
                                r_fault_ohm=g.rf_pairs[:, 0], r_phase_ohm=g.rf_pairs[:, 1],
                                source_scale=scales, transfer_angle_rad=np.zeros(1),
                                parallel_state=state, emf_v=emf_t, outputs=OUTPUTS)
                        except InputError as exc:
                            raise exc.located(source=source) from None
                        runs.append(Run(sw, faulted, state if n_c == 2 else "none", labels,
                                        rho, (s_s is not None, s_r is not None), g.name))
                    all_names += [n for n in labels if n not in all_names]
    return Simulation(names, geo.phase_labels[0], tuple(runs), n_c, mutual,
                      tuple(all_names), tuple(states) if n_c == 2 else ("none",),
                      tuple(sorted(params_by_rho)), max_angle)
