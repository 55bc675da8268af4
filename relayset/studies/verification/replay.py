r"""One case of a verification solved again on its own: the network's phasors at the relay.

A :class:`~relayset.results.verification.VerificationCase` names its case as the engineer
reads it (fault type and loop in the study's phase labels, what was faulted, the location
from the relay end, :math:`R_g` and :math:`R_{ph}`, the source case, the load case by its
transfer angle, the parallel-circuit or neighbouring line's state, the series capacitors'
state and the earth resistivity). That is enough to
solve it again as one case with the verification's own pieces: the line at that
resistivity (:func:`~relayset.studies.verification.closing.params_by_resistivity`), the
source configurations and load-flow EMFs of :mod:`.simulation`, the faults along the lines
behind and beyond of :mod:`.branches` (a fault at the bus through the line's series
matrix), and :func:`relayset.physics.network.solve_fault_sweep`. The relay's quantities are
read as the relay model reads them (:func:`.relay_model.relay_quantities`).

Where the identity leaves a choice (several load cases of one transfer angle, the
"parallel circuit" of the current-reversal check, which covers sequential clearing too),
every candidate is solved and the one whose governing loop measures the verification's
apparent impedance is kept; none within :data:`Z_RTOL`: :class:`CaseNotReproducedError` (a fault
of the program, not of the input).

Prefault: the network before the fault with the case's load flow (the sources' EMFs of
the case), both circuits closed where the case is sequential clearing (its fault state has
the parallel circuit's breaker at one end open; its EMFs are those of the load flow with
both closed, see :func:`.simulation.simulate`). A parallel circuit out of service carries
no current in the relay's CTs (the relay model's assumption): its currents are zero.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property

import numpy as np

from relayset.errors import InternalError
from relayset.inputs.study_file import Study
from relayset.physics import network
from relayset.physics.faults import FAULT_TYPES
from relayset.results.reach import fault_label, loop_label
from relayset.results.settings import SettingsResult
from relayset.results.verification import VerificationCase
from relayset.studies.series_capacitors import solve_sweep

#: Relative agreement of the re-solved loop impedance with the verification's [1]: the
#: same solver on a batch of one (floating-point rounding only).
Z_RTOL = 1e-6
#: Agreement of the transfer angle with the case's (rounded to 1e-6 degrees there) [deg].
ANGLE_ATOL_DEG = 1e-5


class CaseNotReproducedError(InternalError):
    """The case could not be solved again to the verification's loop impedance."""


@dataclass(frozen=True)
class CasePhasors:
    """The network's phasors at one relay end for one case (primary, phases in the study's
    conductor order, currents into the protected line)."""

    v_pre: np.ndarray  #: (3,) prefault bus voltages [V]
    i_pre: np.ndarray  #: (3,) prefault currents of the protected circuit [A]
    i_parallel_pre: np.ndarray  #: (3,) prefault currents of the parallel circuit [A]
    v: np.ndarray  #: (3,) fault-state bus voltages [V]
    i: np.ndarray  #: (3,) fault-state currents of the protected circuit [A]
    i_parallel: np.ndarray  #: (3,) fault-state currents of the parallel circuit [A]
    z_loop_ohm: complex  #: the governing loop, re-solved [ohm]
    emf_s_v: complex  #: phase-A EMF of the source at S of the case [V]
    emf_r_v: complex  #: phase-A EMF of the source at R [V]


class CaseSolver:
    """Solves cases of one study's verification again (the line, sources and load flow
    are formed once per study and resistivity).

    Parameters
    ----------
    study : Study
        The validated study the verification ran on.
    source : str
        The study file's name (messages, relative paths).
    """

    def __init__(self, study: Study, source: str) -> None:
        from relayset.studies.verification.closing import _lines_on_their_buses

        # the study exactly as the verification saw it (lines tied to their buses)
        self.study = _lines_on_their_buses(study)
        self.source = source

    @cached_property
    def geo(self):
        """The study's geometry (as the verification built it)."""
        from relayset.studies.geometry import build_geometry

        return build_geometry(self.study, self.source)

    @cached_property
    def _by_rho(self) -> dict:
        from relayset.studies.parameters import compute_parameters
        from relayset.studies.verification.closing import params_by_resistivity

        return params_by_resistivity(self.study, self.geo, compute_parameters(self.geo),
                                     self.source)

    @cached_property
    def _sources(self) -> dict:
        from relayset.studies.reach import build_source

        return {n: build_source(self.study, n, self.source) for n in self.study.ends}

    @cached_property
    def _envelope(self):
        from relayset.studies.verification.envelope import build_envelope

        return build_envelope(self.study, [])  # the load cases do not depend on the zones

    @cached_property
    def _caps(self):
        """The series capacitor banks' basis as the verification formed it (None: none)."""
        from relayset.studies.verification.simulation import _capacitors

        return _capacitors(self.study, self.geo, self._by_rho, self._sources, self.source)

    def _line(self, rho: float, capacitor_state: str = ""):
        """The line at ``rho`` with its banks in the case's state, and the neighbouring
        line's ends of a shared corridor (None without one)."""
        from relayset.studies.reach import line_cascade
        from relayset.studies.series_capacitors import with_state

        by_rho = self._by_rho
        params = by_rho[rho] if rho in by_rho else by_rho[min(by_rho, key=lambda r: abs(
            r - rho))]
        line = with_state(line_cascade(self.geo, params, "actual_plan",
                                       self.study.reach_study.shunt_capacitance),
                          self._caps, capacitor_state)
        nb_ends = None
        if self.geo.corridor is not None:
            from relayset.studies.corridor import neighbour_ends

            nb_ends = neighbour_ends(self.study, params, self.source)
        return line, nb_ends

    def _jobs(self, case: VerificationCase, at_s: bool, line):
        """Candidates (faulted, line, solved state, open_at, behind, m from S, branch
        matrix, branch info) the case's ``faulted`` and location may stand for."""
        from relayset.physics.sequence import balanced_phase_matrix
        from relayset.studies.verification.branches import branch_lines
        from relayset.studies.verification.simulation import swap_circuits

        names = self.study.ends
        x = case.location_pct / 100
        m = x if at_s else 1.0 - x
        state = "in_service" if case.parallel_state == "none" else case.parallel_state
        if self.geo.corridor is not None:  # the corridor's state: the parallel circuit's
            from relayset.studies.corridor import state_by_label

            state = state_by_label(self.geo, state).parallel
        what = case.faulted
        if what == "protected line":
            return [("protected", line, state, "", False, m, None, ())]
        if what.startswith("neighbouring line"):  # a fault on a neighbour (its circuit)
            return [("neighbour", line, state, "", False, m, None, (), j)
                    for j, c in enumerate(self.geo.corridors)
                    if what in ("neighbouring line", f"neighbouring line {c.name}")]
        if what == "behind the relay":
            return [("protected", line, state, "", True, 0.0 if at_s else 1.0, None, ())]
        if what.startswith("parallel circuit"):
            sw = swap_circuits(line)
            opens = list(zip(network.OPEN_END_STATES, names, strict=True))
            chosen = [(s, b) for s, b in opens
                      if what == f"parallel circuit, its breaker at {b} open"]
            if what == "parallel circuit":  # both closed, or (current reversal) either open
                chosen = [(state, ""), *opens]
            return [("parallel", sw, s, b, False, m, None, ()) for s, b in chosen]
        out = []
        for b in branch_lines(self.study, self.source):
            for where in ("behind the relay", "beyond the remote bus"):
                if what == f"line '{b.name}' from {b.bus} ({where})":
                    z_b = balanced_phase_matrix(np.array([x * b.z1_ohm]),
                                                np.array([x * b.z0_ohm]))
                    out.append(("branch", line, state, "", b.bus == names[0 if at_s else 1],
                                0.0 if b.bus == names[0] else 1.0, z_b, ((b.bus, b.name, x),)))
        return out

    def phasors(self, end: str, st: SettingsResult, case: VerificationCase) -> CasePhasors:
        """The case solved again: prefault and fault phasors at the relay at ``end``.

        Parameters
        ----------
        end : str
            The relay end whose verification named the case.
        st : SettingsResult
            That end's settings (its k0, k0m and line angle measure the loop).
        case : VerificationCase
            The case as the verification reported it.

        Raises
        ------
        CaseNotReproducedError
            No candidate measures the verification's apparent impedance.
        """
        from relayset.studies.verification.checks import relay_model_at
        from relayset.studies.verification.relay_model import (
            LOOPS,
            relay_quantities,
            view,
        )
        from relayset.studies.verification.simulation import (
            OUTPUTS,
            Run,
            load_emfs,
            source_configs,
        )

        study, geo = self.study, self.geo
        names = study.ends
        at_s = end == names[0]
        labels = geo.phase_labels[0]
        ft = next((f for f in FAULT_TYPES if fault_label(f, labels) == case.fault_type), None)
        loop = next((lp for lp in LOOPS if loop_label(lp, labels) == case.loop), None)
        if ft is None or loop is None:
            raise CaseNotReproducedError(f"unknown fault type or loop: {case.fault_type}, "
                                    f"{case.loop}")
        rho = float(case.earth_resistivity_ohm_m)
        line, nb_ends = self._line(rho, case.capacitor_state or "")
        corridor = nb_ends is not None
        nb_kw = {}
        if corridor:  # the case's state of every neighbour (by its label)
            from relayset.studies.corridor import neighbour_circuit, state_by_label

            cstate = state_by_label(geo, case.parallel_state)
            nb_kw = {"neighbours": nb_ends, "neighbour_states": cstate.neighbours}
        src = self._sources
        relay_end = study.relay.end if study.relay and study.relay.end in names else names[0]
        mutual = geo.n_circuits == 2 and study.reach_study.mutual_compensation
        km = st.k0m if mutual and case.mutual_compensation else None
        model = relay_model_at(study, end)
        v_nom = geo.v_nominal_v
        z_want = complex(case.z_apparent_primary_ohm)
        best = None
        for s_s, s_r, scales, labels_k, loaded in source_configs(study, names, src):
            for k in [k for k, nm in enumerate(labels_k) if nm == case.source_case]:
                sc = scales[k:k + 1]
                for faulted, ln, solved, open_at, behind, m, z_b, info, *j_nb in self._jobs(
                        case, at_s, line):
                    if open_at and (s_s is None or s_r is None):
                        continue
                    emf_state = "in_service" if faulted == "parallel" else solved
                    emf = None
                    if loaded:
                        e = load_emfs(self._envelope, ln, src, names, relay_end, sc,
                                      emf_state, v_nom, geo.n_circuits if corridor else 0)
                        emf = (e[0], e[1])
                    sw = solve_sweep(
                        self._caps, case.capacitor_state or "", ln, s_s, s_r,
                        v_nominal_v=v_nom, fault_types=(ft,),
                        m=np.array([m]), r_fault_ohm=np.array([case.r_fault_ohm]),
                        r_phase_ohm=np.array([case.r_phase_ohm]), source_scale=sc,
                        transfer_angle_rad=np.zeros(1), parallel_state=solved, emf_v=emf,
                        outputs=OUTPUTS, z_branch_ohm=z_b, **nb_kw,
                        fault_circuit=neighbour_circuit(geo, j_nb[0]) if j_nb else 1)
                    run = Run(sw, faulted, case.parallel_state, labels_k, rho,
                              (s_s is not None, s_r is not None), open_at=open_at,
                              branch=info, cap_state=case.capacitor_state or "")
                    vw = view(run, at_s, st.k0.k0, km, model, behind=behind,
                              line_angle=st.line_angle_rad)
                    ang = np.degrees(sw.transfer_angle_rad[0])
                    for li in range(ang.size):
                        if abs(round(float(ang[li]), 6) - case.transfer_angle_deg) > \
                                ANGLE_ATOL_DEG:
                            continue
                        z = vw.loop_at(loop, (0, 0, 0, 0, li))
                        err = abs(z - z_want) / max(abs(z_want), 1e-300)
                        if best is None or err < best[0]:
                            best = (err, run, li, behind, z, (s_s, s_r, sc, emf_state))
        if best is None or not best[0] <= Z_RTOL:
            raise CaseNotReproducedError(
                f"{case.faulted}, {case.fault_type} at {case.location_pct:g} %: solved again "
                "it does not measure the verification's loop impedance")
        _err, run, li, behind, z, (s_s, s_r, sc, emf_state) = best
        sw = run.sweep
        v, i, ip = (a[0, 0, 0, 0, li] for a in relay_quantities(run, at_s, behind=behind))
        emf = (sw.emf_s_v[:, li:li + 1], sw.emf_r_v[:, li:li + 1])
        v_pre, i_pre, ip_pre = self._prefault(line, s_s, s_r, sc, emf, emf_state, at_s,
                                              nb_kw)
        if emf_state != "in_service" or (corridor and geo.n_circuits == 1):
            # parallel circuit out (no current in its CTs), or a neighbouring line as
            # circuit 2 (its currents are at other substations)
            ip, ip_pre = np.zeros(3, complex), np.zeros(3, complex)
        return CasePhasors(v_pre, i_pre, ip_pre, np.array(v), np.array(i), np.array(ip), z,
                           complex(emf[0][0, 0]), complex(emf[1][0, 0]))

    def _prefault(self, line, s_s, s_r, sc, emf, state: str, at_s: bool, nb_kw=None):
        """Prefault (V, I, I parallel) at the relay end of the healthy network with the
        case's EMFs; the parallel circuit at R from the line with the circuits swapped
        (the solver gives circuit 2's prefault current at S only)."""
        from relayset.studies.verification.simulation import swap_circuits

        def pre(ln):
            return network.solve_fault_sweep(
                ln, s_s, s_r, v_nominal_v=self.geo.v_nominal_v, fault_types=("AG",),
                m=np.array([0.5]), r_fault_ohm=np.array([0.0]), source_scale=sc,
                parallel_state=state, emf_v=emf, outputs=(), **(nb_kw or {}))

        sw = pre(line)
        if at_s:
            return sw.v_s_pre[0, 0], sw.i_s_pre[0, 0], sw.i_s_parallel_pre[0, 0]
        ip = (pre(swap_circuits(line)).i_r_pre[0, 0]
              if self.geo.n_circuits == 2 else np.zeros(3, complex))
        return sw.v_r_pre[0, 0], sw.i_r_pre[0, 0], ip


__all__ = ["CaseNotReproducedError", "CasePhasors", "CaseSolver"]
