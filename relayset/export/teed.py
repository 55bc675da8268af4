r"""``relayset export`` of a three-terminal (teed) line: per relay end the setting file,
the test points and the COMTRADE cases, the governing ones solved on the teed solver.

The zones of each end are read from the results as they are
(:class:`relayset.results.teed.TeedEndSettings`: its ``settings``, the two-ended settings'
results type with the zones' characteristics and the relay profile's settable values).
Nothing here sets a zone.

Governing cases of a teed end are the cases its two zones are set from
(:mod:`relayset.studies.teed`): zone 1's, the bolted fault at the nearest remote terminal
with the third terminal's infeed out whose meant loop measures the smallest apparent
impedance along the line angle; zone 2's, the bolted fault at the farthest remote terminal
with the infeed in whose meant loop measures the largest. Each is found again on the teed
solver (:func:`relayset.physics.teed.solve_teed_sweep`) over the same source cases and, on
a double-circuit line, the same states of the parallel circuit with the relay measuring
as the settings have it (:func:`relayset.studies.teed.teed_loop_sets`: k0, and k0m too
at an end of the double circuit while the parallel circuit is in service), and must
measure the apparent impedance the results report (:data:`Z_RTOL`), else
:class:`CaseNotReproducedError`; its phasors at the relay are the network's, prefault
(no load: every EMF at nominal, in phase, as the teed reach study) and fault, with the
parallel circuit's residual current where the relay compensates with k0m.
"""

from __future__ import annotations

import cmath
import math
from dataclasses import dataclass

import numpy as np

from relayset.errors import InternalError

#: Relative agreement of the re-found apparent impedance with the results' [1] (the same
#: solver on the same cases; floating-point rounding only).
Z_RTOL = 1e-6


class CaseNotReproducedError(InternalError):
    """A teed end's governing case could not be found again at the reported impedance."""


def end_settings(results) -> list:
    """The :class:`~relayset.results.settings.SettingsResult` of every relay end: a
    two-ended study's ``settings``; a teed line's, one per end, as its results carry them
    (:class:`relayset.results.teed.TeedEndSettings`)."""
    if results.teed is None:
        return list(results.settings or ())
    out = [e.settings for e in results.teed.ends]
    if any(st is None for st in out):  # every teed end is set with its zones' shapes
        raise InternalError("a teed relay end's results carry no zone settings")
    return out


def end_bases(results, settings: list) -> list:
    """The :class:`~relayset.export.testshots.EndBasis` of every relay end of a teed line
    (``settings`` from :func:`end_settings`)."""
    from relayset.export.testshots import DEFAULT_TEST_CURRENT_A, EndBasis, end_stem
    from relayset.inputs.study_file import parse_study
    from relayset.report.context import safe_stem
    from relayset.studies.reach import build_source

    src = str(results.source_file)
    study = parse_study(results.input, src)
    doc_stem = safe_stem(results.study["line_id"], results.study["revision"])
    labels = tuple(study.circuits[0].phase_labels)
    k0m = _k0m(results, study)
    buses = tuple(results.teed.buses)
    out = []
    for n, st in enumerate(settings):
        ct, vt = study.relay.ratios(st.end)
        primary = study.relay.ct_primary_a(st.end)
        s = build_source(study, st.end, src)
        out.append(EndBasis(
            st.end, end_stem(n, st.end, doc_stem), st.secondary_factor,
            results.parameters.v_nominal_v / (math.sqrt(3) * vt),
            primary / ct if primary else DEFAULT_TEST_CURRENT_A, float(ct), float(vt),
            complex(st.k0.k0), results.parameters.frequency_hz,
            None if s is None else s.z1_ohm, labels,
            float(study.relay.min_operating_current),  # the relay model's, secondary
            # the ends of the double circuit measure with k0m too (not the third terminal)
            k0m if st.end in buses[:2] else None))
    return out


def _k0m(results, study) -> complex | None:
    """The k0m the relays at the ends of a teed double circuit measure with while their
    parallel circuit is in service, as :func:`relayset.studies.teed.run_teed_study` takes
    it; None without mutual compensation or on a single circuit."""
    if (len(study.circuits) != 2 or not study.reach_study.mutual_compensation
            or results.relay is None or results.relay.k0m_set is None):
        return None
    return complex(results.relay.k0m_set)


@dataclass(frozen=True)
class TeedCase:
    """One governing case of a teed end, as the engineer reads it."""

    zone: str  #: "zone1" or "zone2", whose rule it sets
    remote: str  #: the faulted remote terminal (bolted, on the line side of its CT)
    infeed: bool  #: the third terminal's source in
    fault_type: str  #: in the study's phase labels
    loop: str  #: the governing loop, in the study's phase labels
    source_case: str
    z_apparent_primary_ohm: complex  #: what the loop measures [ohm]
    along_ohm: float  #: its reach along the line angle [ohm], as the results report it
    #: the parallel circuit's state on a double-circuit line (None: a single circuit)
    parallel_circuit: str | None = None
    mutual_compensation: bool = False  #: the loop measured with k0m too

    def to_dict(self) -> dict:
        return {"zone": self.zone, "faulted": "remote terminal", "remote": self.remote,
                "infeed": self.infeed, "fault_type": self.fault_type, "location_pct": 100.0,
                "r_fault_ohm": 0.0, "r_phase_ohm": 0.0, "loop": self.loop,
                "source_case": self.source_case,
                "parallel_circuit": self.parallel_circuit,
                "mutual_compensation": self.mutual_compensation,
                "load": "none (EMFs nominal, in phase)",
                "z_apparent_primary_ohm": [self.z_apparent_primary_ohm.real,
                                           self.z_apparent_primary_ohm.imag],
                "along_line_angle_ohm": self.along_ohm}


@dataclass(frozen=True)
class TeedCasePhasors:
    """The network's phasors at the relay for one case (primary, currents into the line)."""

    case: TeedCase
    v_pre: np.ndarray  #: (3,) [V]
    i_pre: np.ndarray  #: (3,) [A]
    v: np.ndarray  #: (3,) [V]
    i: np.ndarray  #: (3,) [A]
    i_parallel_pre: np.ndarray | None = None  #: (3,) circuit 2's at the bus [A], or None
    i_parallel: np.ndarray | None = None


class TeedCaseSolver:
    """The teed line, terminals and source cases of a study with settings, formed once.

    Parameters
    ----------
    results : StudyResults
        A teed study's results with settings (``results.teed``).
    """

    def __init__(self, results):
        from relayset.inputs.study_file import parse_study
        from relayset.physics.teed import GroundedTransformer
        from relayset.studies.geometry import build_geometry
        from relayset.studies.parameters import compute_parameters
        from relayset.studies.teed import teed_line, teed_source_cases, teed_terminals

        src = str(results.source_file)
        study = parse_study(results.input, source=src)
        geo = build_geometry(study, src)
        self.study, self.results = study, results
        self.labels = tuple(study.circuits[0].phase_labels)
        self.buses = tuple(results.teed.buses)
        self.line = teed_line(study, geo, compute_parameters(geo),
                              study.reach_study.shunt_capacitance, src)
        self.terms = teed_terminals(study, src)
        self.k0m = _k0m(results, study)
        self.scales, self.names = teed_source_cases(
            study, self.buses, tuple(t is not None and not isinstance(t, GroundedTransformer)
                                     for t in self.terms))

    def _search(self, x: int, y: int, infeed: bool, largest: bool):
        """(along, phasors) of the extreme meant loop for a bolted fault at bus y."""
        from relayset.physics import measurement
        from relayset.physics.network import Source
        from relayset.physics.teed import ENDS, parallel_states, solve_teed_sweep
        from relayset.results.reach import fault_label, loop_label
        from relayset.studies.teed import teed_loop_sets

        t = list(self.terms)
        if not infeed:
            t[3 - x - y] = None
        if not any(isinstance(s, Source) for s in t):
            return None
        ftypes = tuple(self.study.reach_study.fault_types)
        k0 = complex(self.results.teed.k0_set)  # what the apparent impedances are with
        rot = cmath.rect(1.0, -cmath.phase(self.results.teed.z1_set_ohm))
        best = None
        for ps in parallel_states(self.line):  # a double circuit: each state, as the study
            sw = solve_teed_sweep(self.line, t,
                                  v_nominal_v=self.study.system.nominal_voltage,
                                  fault_leg=ENDS[y], fault_types=ftypes, m=[0.0],
                                  r_fault_ohm=[0.0], source_scale=self.scales,
                                  parallel_state=ps, parallel_currents=self.k0m is not None)
            for _ps, how, loops in teed_loop_sets([(ps, sw)], ENDS[x], k0, self.k0m):
                for f, ft in enumerate(ftypes):
                    for lp in measurement.loops_for_fault(ft):
                        for k, z in enumerate(loops[lp][f, 0, 0, :, 0]):
                            a = (z * rot).real
                            if not math.isfinite(a):
                                continue
                            if best is None or (a > best[0] if largest else a < best[0]):
                                best = (float(a), f, lp, k, complex(z), ps, bool(how), sw)
        if best is None:
            return None
        a, f, lp, k, z, ps, mutual, sw = best
        two = self.line.n_conductors == 6
        case = TeedCase("zone2" if largest else "zone1", self.buses[y], infeed,
                        fault_label(ftypes[f], self.labels), loop_label(lp, self.labels),
                        self.names[k], z, a, ps if two else None, mutual)
        end = ENDS[x]
        ip = (None if sw.i_parallel is None
              else np.asarray(sw.i_parallel[end][f, 0, 0, k, 0]))
        ip_pre = None if ip is None else np.asarray(sw.i_parallel_pre[end][k, 0])
        return a, TeedCasePhasors(case, sw.v_pre[end][k, 0], sw.i_pre[end][k, 0],
                                  sw.v[end][f, 0, 0, k, 0], sw.i[end][f, 0, 0, k, 0],
                                  ip_pre, ip)

    def governing(self, end) -> list[TeedCasePhasors]:
        """Zone 1's and zone 2's cases of the relay at ``end`` (a TeedEndSettings), each
        checked against the apparent impedances the results report."""
        x = self.buses.index(end.end)
        out = []
        for zone, infeed, largest in (("zone1", False, False), ("zone2", True, True)):
            found = [r for y in range(3) if y != x
                     if (r := self._search(x, y, infeed, largest)) is not None]
            if not found:
                continue
            a, p = (max if largest else min)(found, key=lambda r: r[0])
            told = [(ap.max_ohm if largest else ap.min_ohm) for ap in end.apparent
                    if ap.infeed == infeed]
            want = (max if largest else min)(told) if told else math.nan
            if not math.isclose(a, want, rel_tol=Z_RTOL):
                raise CaseNotReproducedError(
                    f"{end.end}: the {zone} case measures {a:.9g} ohm along the line angle, "
                    f"the results report {want:.9g} ohm")
            out.append(p)
        return out


def governing_cases(results, end, basis, solver: TeedCaseSolver) -> list:
    """The COMTRADE cases (:class:`relayset.export.comtrade.Case`) of a teed end's
    governing cases, secondary, referred to phase A's prefault voltage at 0°."""
    from relayset.export.comtrade import Case, _slug

    out = []
    for p in solver.governing(end):
        c = p.case
        ref = np.exp(-1j * np.angle(p.v_pre[0]))
        vt, ct = basis.vt_ratio / ref, basis.ct_ratio / ref
        state = ("" if c.parallel_circuit is None else
                 f", parallel circuit {c.parallel_circuit.replace('_', ' ')}"
                 + (", mutual compensation" if c.mutual_compensation else ""))
        # the parallel circuit's residual current through the relay's own CT ratio (its
        # seventh channel where the relay compensates with k0m), the network's
        par = ((0j, 0j) if basis.k0m is None or p.i_parallel is None else
               (complex(p.i_parallel_pre.sum()) / ct, complex(p.i_parallel.sum()) / ct))
        out.append(Case(
            f"{basis.stem}-case-{c.zone}-{_slug(c.remote)}-infeed-{'in' if c.infeed else 'out'}",
            p.v_pre / vt, p.i_pre / ct, p.v / vt, p.i / ct, None, "governing case",
            f"{c.zone} set from it: {c.loop} of {c.fault_type} at {c.remote}, infeed "
            f"{'in' if c.infeed else 'out'}, {c.source_case}{state}", c.to_dict(), *par))
    return out


#: How a teed end's governing cases are formed (the test-point file's manifest).
FORMED_FROM = ("the network's phasors at the relay: the bolted remote-terminal fault each "
               "zone is set from (zone 1: nearest terminal, infeed out, smallest apparent "
               "impedance; zone 2: farthest, infeed in, largest; on a double-circuit line "
               "over the parallel circuit's states, with k0m where the relay uses it) solved "
               "again on the teed solver, prefault (no load) and fault")


def shot_and_case_files(results, out_dir, *, sample_rate_hz: float = 4000.0,
                        duration_s: float = 0.5) -> list:
    """The test points (CSV, JSON) and COMTRADE cases of every relay end of a teed line,
    formed, not written, as :func:`relayset.export.testshots.shot_and_case_files`."""
    from pathlib import Path

    from relayset.export.testshots import end_files

    out_dir = Path(out_dir)
    settings = end_settings(results)
    solver = TeedCaseSolver(results)
    outputs = []
    for basis, st, end in zip(end_bases(results, settings), settings, results.teed.ends,
                              strict=True):
        outputs += end_files(results, st, basis, out_dir,
                             governing_cases(results, end, basis, solver),
                             sample_rate_hz=sample_rate_hz, duration_s=duration_s,
                             formed_from=FORMED_FROM)
    return outputs
