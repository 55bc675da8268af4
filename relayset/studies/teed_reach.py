r"""Reach study of a three-terminal (teed) line: ``relayset reach`` on a study with ``[tee]``.

For each relay end x and each remote terminal y, the *path* runs from bus x along x's leg
to the tee and on along y's leg to bus y; the third terminal z feeds the tee (infeed in)
or is disconnected (infeed out). Bolted faults of the reach study's types are solved
along each path on the teed solver (:func:`relayset.physics.teed.solve_teed_sweep`), over
the source cases, and the loops meant for each fault type
(:func:`relayset.physics.measurement.loops_for_fault`) are measured with the relay's Z1
and k0. The reach error is the two-ended study's, with the path in place of the line:

.. math:: e = 100\,\frac{\mathrm{Re}(Z_{1,path}(d)\,e^{-j\theta_1})
          - \mathrm{Re}(Z_{meas}\,e^{-j\theta_1})}{\mathrm{Re}(Z_{1,path}(d)\,e^{-j\theta_1})}

with :math:`Z_{1,path}(d)` the ideally transposed Z1 of the path from the relay to the
fault at distance d (the diagonal of each section's Z012; on a double-circuit line that of
circuit 1's own 3x3 block), :math:`\theta_1` the relay's line angle; on a path of one
construction with the relay set at its Z1 this is :math:`(m - m_{app})/m`. The same cases
are solved on the ideally transposed line (:func:`ideal_teed_line`), and the
*untransposition error* is the difference of the two reach errors: what the transposition
plan alone does, the infeed's effect (which is the same on both lines to first order)
taken out.

On a double-circuit line (circuit 1 tapped at the tee, circuit 2 running through it
untapped) every path is solved in each state of the parallel circuit
(:func:`relayset.physics.teed.parallel_states`: in service, out and earthed, out and
isolated), and with it in service the relays at the two ends of the double circuit also
measure with the mutual compensation k0m where the study uses it
(:func:`relayset.studies.teed.teed_loop_sets`, as the teed settings; the two-ended reach
study likewise measures with and without k0m). Each such case is a path of its own,
its state named in the labels of its worst cases.
"""

from __future__ import annotations

import cmath
import math
import warnings

import numpy as np

from relayset.errors import InputError
from relayset.inputs.limits import MAX_CASES
from relayset.inputs.study_file import Study, check_reach_inputs
from relayset.physics import measurement, transposition
from relayset.physics.network import LineCascade, Source
from relayset.physics.sequence import to_sequence
from relayset.physics.teed import (
    ENDS,
    GroundedTransformer,
    TeedLine,
    parallel_label,
    parallel_states,
    solve_teed_sweep,
)
from relayset.results.parameters import LineParameters
from relayset.results.reach import fault_label, loop_label
from relayset.results.relay import RelayBasis
from relayset.results.teed_reach import (
    TEED_PICKS,
    TeedEndReach,
    TeedLoopSummary,
    TeedPathReach,
    TeedReachResult,
    TeedWorstCase,
)
from relayset.studies.geometry import LineGeometry
from relayset.studies.teed import teed_line, teed_line_notes, teed_loop_sets, teed_terminals

LOOPS = measurement.LOOPS
#: Fault cases solved at a time (bounds memory, as the two-ended study's chunks).
CHUNK_CASES = 100_000


def ideal_teed_line(line: TeedLine) -> TeedLine:
    """The same legs ideally transposed: each section's matrices averaged over the three
    orders of the ideal cycle, every circuit's phases rotated cyclically together
    (:func:`relayset.physics.transposition.cyclic_orders`, the two-ended study's ideal
    cycle). On one circuit this is its Z012 (and Y012) reduced to the diagonal (Fortescue);
    on a double circuit each circuit's own block and their mutual block become circulant,
    so the zero-sequence mutual impedance Z0M stays as it is."""
    def bal(mats: np.ndarray | None) -> np.ndarray | None:
        if mats is None:
            return None
        n = mats.shape[-1]
        cycle = transposition.cyclic_orders(list(range(n)), n // 3)
        return sum(transposition.to_phase_order(mats, o) for o in cycle) / 3

    return TeedLine(tuple(LineCascade(bal(leg.z_ohm_per_m), leg.length_m,
                                      bal(leg.y_s_per_m), leg.elements)
                          for leg in line.legs))


def _z1_from_bus(leg: LineCascade, d_m: np.ndarray) -> np.ndarray:
    """Ideally transposed Z1 of a leg from its bus to distance ``d_m`` [ohm]: circuit 1's
    (the tapped circuit's own 3x3 block on a double-circuit leg)."""
    z1 = to_sequence(leg.z_ohm_per_m[:, :3, :3])[:, 1, 1]
    edges = np.concatenate([[0.0], np.cumsum(leg.length_m)])
    cum = np.concatenate([[0.0], np.cumsum(z1 * leg.length_m)])
    s = np.clip(np.searchsorted(edges, d_m, side="right") - 1, 0, z1.size - 1)
    return cum[s] + z1[s] * (d_m - edges[s])


def _path_grid(study: Study, frac_tee: float) -> np.ndarray:
    """Fault locations as fractions of the path: the reach study's, the tee and the
    remote terminal."""
    rs = study.reach_study
    if rs.locations_pct is not None:
        p = np.array(rs.locations_pct, dtype=float) / 100
    else:
        p = np.linspace(0.0, 1.0, max(2, round(100 / rs.location_step_pct)) + 1)
    return np.unique(np.concatenate([p, [0.0, frac_tee, 1.0]]))


def _loops_along(line: TeedLine, terms, x: int, y: int, d_m: np.ndarray, l_x: float,
                 l_path: float, ftypes, scales, v_nom: float, k0: complex,
                 parallel: str = "in_service", k0m: complex | None = None
                 ) -> dict[str, dict[str, np.ndarray]]:
    """The six loops of the relay at bus x, (F, M, K) [ohm], for faults at distances
    ``d_m`` along the path x -> tee -> y (up to the tee on x's leg, beyond on y's), with
    the parallel circuit (a double-circuit line) in state ``parallel``; keyed by how the
    relay measures (:func:`relayset.studies.teed.teed_loop_sets`): ``""`` with k0 and, at
    an end of the double circuit with it in service and ``k0m`` given,
    ``", mutual compensation"`` with k0m too."""
    fn = {"source_scale": "reach_study.source_cases", "fault_types": "reach_study.fault_types"}
    own = d_m <= l_x * (1 + 1e-12)
    l_y = l_path - l_x
    parts = ((x, np.minimum(d_m[own] / l_x, 1.0)),
             (y, np.clip((l_path - d_m[~own]) / l_y, 0.0, 1.0)))
    n_f, n_k = len(ftypes), scales.shape[0]
    mutual = (k0m is not None and parallel == "in_service" and line.n_conductors == 6
              and x != 2)
    out: dict[str, dict[str, np.ndarray]] = {}
    where = (np.flatnonzero(own), np.flatnonzero(~own))
    step = max(1, CHUNK_CASES // (n_f * n_k))
    for (leg, m), idx in zip(parts, where, strict=True):
        for a in range(0, m.size, step):
            sw = solve_teed_sweep(line, terms, v_nominal_v=v_nom, fault_leg=ENDS[leg],
                                  fault_types=ftypes, m=m[a:a + step], r_fault_ohm=[0.0],
                                  source_scale=scales, field_names=fn, parallel_state=parallel,
                                  parallel_currents=mutual)
            for _ps, how, z in teed_loop_sets([(parallel, sw)], ENDS[x], k0,
                                              k0m if mutual else None):
                got = out.setdefault(how, {lp: np.empty((n_f, d_m.size, n_k), dtype=complex)
                                           for lp in LOOPS})
                for lp in LOOPS:
                    got[lp][:, idx[a:a + step]] = z[lp][:, :, 0, :, 0]
    return out


def _extreme(a: np.ndarray, largest: bool):
    """Index and value of the extreme of the finite values of ``a``, or None."""
    fin = np.isfinite(a)
    if not fin.any():
        return None
    b = np.where(fin, a, -np.inf if largest else np.inf)
    k = int(np.argmax(b) if largest else np.argmin(b))
    return np.unravel_index(k, a.shape), float(a.flat[k])


def run_teed_reach(study: Study, geo: LineGeometry, params: LineParameters,
                   relay: RelayBasis, *, source: str) -> TeedReachResult:
    """The reach study of every relay end of a teed line (see the module text).

    Parameters
    ----------
    study, geo, params
        The validated study (with ``[tee]``), its geometry and its line parameters.
    relay : RelayBasis
        The relay ends and the Z1, k0 and (a double circuit's ends, where the reach study
        uses mutual compensation) k0m they are set with.
    source : str
        The study file name, for error messages.
    """
    check_reach_inputs(study, source)
    rs = study.reach_study
    buses = (*study.ends, study.tee.substation)
    line = teed_line(study, geo, params, rs.shunt_capacitance, source)
    ideal = ideal_teed_line(line)
    terms = teed_terminals(study, source)
    v_nom = study.system.nominal_voltage
    theta = cmath.phase(relay.z1_set_ohm)
    rot = complex(math.cos(theta), -math.sin(theta))
    k0 = relay.k0_set
    # the relays at the ends of a double circuit also measure with k0m (as the settings)
    k0m = relay.k0m_set if rs.mutual_compensation else None
    ftypes = tuple(rs.fault_types)
    labels = geo.phase_labels[0]
    meant = np.array([[lp in measurement.loops_for_fault(ft) for ft in ftypes]
                      for lp in LOOPS])
    lengths = [leg.total_length_m for leg in line.legs]
    z1_legs = [complex(_z1_from_bus(leg, np.array([leg.total_length_m]))[0])
               for leg in line.legs]
    # The reach study's source cases as given (each case's factor at each bus), as the
    # two-ended study takes them; a bus without a source has nothing to scale.
    cases = rs.source_cases
    scales = np.array([[c.scale_at(b) for b in buses] for c in cases], dtype=float)
    names = tuple(c.name for c in cases)

    plan = []
    for x in range(3):
        if buses[x] not in relay.ends:
            continue
        for y in (k for k in range(3) if k != x):
            z = 3 - x - y
            for infeed in (True, False):
                t = list(terms)
                if not infeed:
                    t[z] = None
                if not any(isinstance(s, Source) for s in t):
                    continue
                plan += [(x, y, z, infeed, t, ps) for ps in parallel_states(line)]
    n_m = _path_grid(study, 0.5).size + 1
    total = 2 * len(plan) * len(ftypes) * n_m * len(cases)
    if total > MAX_CASES:
        raise InputError(
            f"asks for {total:,} fault cases on the teed line's paths; the reach study "
            f"solves at most {MAX_CASES:,}: use a coarser step or fewer cases",
            field="reach_study.location_step_pct", value=rs.location_step_pct, source=source)

    solved = 0
    by_end: dict[int, list[TeedPathReach]] = {}
    for x, y, z, infeed, t, ps in plan:
        l_x, l_path = lengths[x], lengths[x] + lengths[y]
        p = _path_grid(study, l_x / l_path)
        d = p * l_path
        own = d <= l_x * (1 + 1e-12)
        z1_path = np.where(own, _z1_from_bus(line.legs[x], np.minimum(d, l_x)),
                           z1_legs[x] + z1_legs[y]
                           - _z1_from_bus(line.legs[y], np.maximum(l_path - d, 0.0)))
        ref = (z1_path * rot).real  # (M,)
        z_sets = _loops_along(line, t, x, y, d, l_x, l_path, ftypes, scales, v_nom, k0,
                              ps, k0m)
        z_ideal = _loops_along(ideal, t, x, y, d, l_x, l_path, ftypes, scales, v_nom, k0,
                               ps, k0m)
        solved += 2 * len(ftypes) * p.size * scales.shape[0]
        ref_safe = np.where(p == 0, np.nan, ref)[None, :, None]
        for how, z_act in z_sets.items():  # with k0; with k0m too where it is used
            z_id = z_ideal[how]
            label = parallel_label(line, ps) + how
            summaries, env = [], {k: np.full((6, p.size), np.nan) for k in
                                  ("emax", "emin", "amax", "amin", "umax", "umin")}
            app_tee, app_rem = [], []
            i_tee = int(np.argmin(np.abs(p - l_x / l_path)))
            with np.errstate(all="ignore"), warnings.catch_warnings():
                warnings.simplefilter("ignore", RuntimeWarning)  # all-NaN slices are expected
                for n_lp, lp in enumerate(LOOPS):
                    fs = np.flatnonzero(meant[n_lp])
                    za, zi = z_act[lp][fs], z_id[lp][fs]  # (Fm, M, K)
                    along = (za * rot).real
                    along = np.where(np.isfinite(along), along, np.nan)
                    err = 100 * (ref_safe - along) / ref_safe
                    err_i = 100 * (ref_safe - (zi * rot).real) / ref_safe
                    stray = np.where(np.isfinite(err_i), err - err_i, np.nan)
                    for key, arr, fn_ in (("emax", err, np.nanmax), ("emin", err, np.nanmin),
                                          ("amax", along, np.nanmax), ("amin", along, np.nanmin),
                                          ("umax", stray, np.nanmax), ("umin", stray, np.nanmin)):
                        if fs.size:
                            env[key][n_lp] = fn_(arr, axis=(0, 2))
                    for i_pt, acc in ((i_tee, app_tee), (p.size - 1, app_rem)):
                        vals = along[:, i_pt][np.isfinite(along[:, i_pt])]
                        acc.extend(vals.tolist())

                    def case(arr, largest, only_remote=False, fs=fs, za=za, p=p, d=d, x=x,
                             y=y, own=own, label=label):
                        if only_remote:
                            arr = arr[:, -1:]
                        hit = _extreme(arr, largest)
                        if hit is None:
                            return None
                        (f, j, k), val = hit
                        j = p.size - 1 if only_remote else j
                        return TeedWorstCase(
                            error_pct=val, fault_type=fault_label(ftypes[fs[f]], labels),
                            location_pct=float(100 * p[j]), distance_m=float(d[j]),
                            leg=buses[x] if own[j] else buses[y],
                            source_case=names[k] + label,
                            apparent_ohm=complex(za[f, j, k]))

                    picks = dict(zip(TEED_PICKS, (
                        case(err, True), case(err, False), case(err, True, True),
                        case(stray, True), case(stray, False)), strict=True))
                    summaries.append(TeedLoopSummary(loop=loop_label(lp, labels), **picks))

            def worst(attr, fn, summaries=summaries):
                vals = [getattr(s, attr).error_pct for s in summaries
                        if getattr(s, attr) is not None]
                return float(fn(vals)) if vals else float("nan")

            def span(vals):
                return (float(min(vals)), float(max(vals))) if vals else (math.nan, math.nan)

            by_end.setdefault(x, []).append(TeedPathReach(
                remote=buses[y], third=buses[z], infeed=infeed,
                parallel_circuit=ps if line.n_conductors == 6 else None,
                mutual_compensation=bool(how), length_m=l_path,
                tee_location_pct=100 * l_x / l_path, z1_path_ohm=z1_legs[x] + z1_legs[y],
                loops=tuple(summaries),
                worst_bolted_overreach_at_remote_terminal_pct=worst(
                    "worst_overreach_at_remote_terminal", max),
                worst_bolted_overreach_on_path_pct=worst("worst_overreach_on_path", max),
                worst_bolted_underreach_on_path_pct=worst("worst_underreach_on_path", min),
                worst_untransposition_overreach_on_path_pct=worst(
                    "worst_untransposition_overreach_on_path", max),
                worst_untransposition_underreach_on_path_pct=worst(
                    "worst_untransposition_underreach_on_path", min),
                apparent_at_tee_ohm=span(app_tee), apparent_at_remote_terminal_ohm=span(app_rem),
                envelope_location_pct=100 * p, envelope_max_pct=env["emax"],
                envelope_min_pct=env["emin"], apparent_max_ohm=env["amax"],
                apparent_min_ohm=env["amin"], untransposition_max_pct=env["umax"],
                untransposition_min_pct=env["umin"]))

    ends = tuple(TeedEndReach(
        end=buses[x], z1_set_ohm=complex(relay.z1_set_ohm), k0_set=complex(k0),
        tee_ohm=z1_legs[x], paths=tuple(paths),
        k0m_set=complex(k0m) if any(p.mutual_compensation for p in paths) else None)
        for x, paths in by_end.items())
    return TeedReachResult(
        buses=buses, tee_distance_m=study.tee.distance, branch_length_m=study.tee.length,
        fault_types=ftypes,
        location_step_pct=None if rs.locations_pct is not None else rs.location_step_pct,
        source_cases=names, shunt_capacitance=rs.shunt_capacitance, ends=ends,
        cases_solved=solved, notes=_notes(study, terms, buses))


def _notes(study: Study, terms, buses) -> tuple[str, ...]:
    rs = study.reach_study
    grounded = isinstance(terms[2], GroundedTransformer)
    notes = [
        "Relay set with Z1 and k0 of the ideally transposed line (from "
        f"{buses[0]} to {buses[1]}) unless [relay] gives them.",
        "Paths: from the relay end along its own leg to the tee, then along the remote "
        "terminal's leg to it; bolted faults (Rf = 0) of every fault type at the reach "
        "study's locations along each path, at the tee and at the remote terminal (on the "
        "line side of its current transformer); no prefault load (all source EMFs at "
        "nominal voltage, in phase).",
        "Reach error = 100 (Re(Z1_path(d) e^-j theta1) - Re(Z e^-j theta1)) / Re(Z1_path(d) "
        "e^-j theta1), Z the loop's measured impedance, Z1_path(d) the ideally transposed "
        "Z1 of the path from the relay to the fault and theta1 the relay's line angle; on "
        "a path of one construction this is the two-ended study's (m - m_apparent)/m. "
        "Positive is overreach.",
        "Infeed in: the third terminal (the one off the path) connected"
        + (f" (at {buses[2]} a grounded-star transformer: zero-sequence infeed only)"
           if grounded else "")
        + "; infeed out: it is disconnected. The reach study's source cases as "
        "given (a case's factor at each bus; 'relayset settings' also varies each bus's "
        "source independently for the infeed range). With the infeed in, a fault beyond "
        "the tee is seen farther away (the infeed's drop on the remote leg): that "
        "underreach is the tee's, not an error of the line model.",
        "Untransposition error = the reach error on the actual line less that of the same "
        "case on the ideally transposed line (each section's phases rotated through the "
        "ideal cycle, every circuit's together, and averaged: its Z012 reduced to the "
        "diagonal): what the transposition plan alone does, the infeed's effect taken out.",
        "Zones of a three-terminal line: 'relayset settings' (zone 1 short of the nearest "
        "remote terminal with the infeed out, zone 2 over the farthest with it in).",
    ]
    if len(study.circuits) == 2:
        notes.append(
            "Double-circuit line: each path in each state of the parallel circuit is a case "
            "of its own, and so is, with it in service, the relays' measurement with k0m "
            "at the two ends of the double circuit"
            + ("" if rs.mutual_compensation else " (not here: no mutual compensation)")
            + "; Z1_path is circuit 1's (its own block of the ideally transposed line).")
    notes += list(teed_line_notes(study))
    notes.append("Line shunt capacitance included (exact distributed sections)."
                 if rs.shunt_capacitance else
                 "Line shunt capacitance neglected (series impedance only).")
    return tuple(notes)
