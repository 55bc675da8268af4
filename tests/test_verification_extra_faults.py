"""Fault groups of the verification beyond the protected line: sequential clearing of a
parallel-circuit fault, faults along the line behind the relay, faults on the adjacent lines
beyond the remote bus.

Independent sources: the per-case modified-nodal-analysis solver in tests/reference_solver.py
(shares nothing with the batched solver but the fault constraints); identities (a fault at
distance 0 along a line is the bus fault).
"""

from __future__ import annotations

import math

import numpy as np
from numpy.testing import assert_allclose

from relayset.physics.measurement import LOOP_PHASES
from relayset.results.reach import fault_label, loop_label
from relayset.studies import pipeline
from relayset.studies.geometry import build_geometry
from relayset.studies.parameters import compute_parameters
from relayset.studies.reach import _cascade, build_source, run_reach_study
from relayset.studies.relay import resolve_relay
from relayset.studies.settings import study_philosophy
from relayset.studies.verification import (
    build_envelope,
    params_by_resistivity,
    settle_and_verify,
    simulate,
    swap_circuits,
)
from relayset.studies.verification.checks import resistive_targets

from reference_solver import solve_fault_single

D230 = "elsford_fallowby_230kv_double.toml"


def _settled(path):
    loaded = pipeline.load(path)
    study, src = loaded.study, loaded.source
    geo = build_geometry(study, src)
    params = compute_parameters(geo)
    relay = resolve_relay(study, params)
    phil = study_philosophy(study, src)
    reach = run_reach_study(study, geo, params, relay, phil, source=src)
    settings, ver = settle_and_verify(study, geo, params, relay, reach, phil, source=src)
    return study, src, geo, params, settings, ver


def _find(runs, g, labels, pred):
    """The run and case index (f, m, rf, k, l) of a governing case."""
    for run in runs:
        sw = run.sweep
        if not pred(run) or run.rho_ohm_m != g.earth_resistivity_ohm_m:
            continue
        names = [fault_label(ft, labels) for ft in sw.fault_types]
        if g.fault_type not in names or g.source_case not in run.case_names:
            continue
        f, k = names.index(g.fault_type), run.case_names.index(g.source_case)
        rf = np.flatnonzero(np.isclose(sw.r_fault_ohm, g.r_fault_ohm, rtol=1e-12, atol=1e-12)
                            & np.isclose(sw.r_phase_ohm, g.r_phase_ohm, rtol=1e-12,
                                         atol=1e-12))
        ang = np.round(np.degrees(sw.transfer_angle_rad[k]), 6)
        ls = np.flatnonzero(np.isclose(ang, g.transfer_angle_deg, rtol=0, atol=1e-6))
        if rf.size and ls.size:
            return run, (f, rf[0], k, ls[0])
    raise AssertionError("governing case not among the runs")


def _loop(v, i, i_par, loop: str, k0: complex, k0m: complex | None) -> complex:
    """Apparent impedance of a loop as the relay measures it [ohm] (written out here)."""
    ph = LOOP_PHASES[loop]
    if len(ph) == 1:
        comp = k0 * i.sum() + (0 if k0m is None else k0m * i_par.sum())
        return complex(v[ph[0]] / (i[ph[0]] + comp))
    a, b = ph
    return complex((v[a] - v[b]) / (i[a] - i[b]))


def test_sequential_clearing_governing_case_resolved_by_reference(demo_path):
    """The governing case of zone 1's sequential-clearing check on the 230 kV double circuit,
    re-solved by the reference solver (circuit 1's breaker left out at the open end): the
    loop impedance the verification reports within 1e-6, and its margin from it."""
    study, src, geo, params, settings, ver = _settled(demo_path(D230))
    st = settings[0]
    end = ver.ends[0]
    chk = next(c for c in end.checks if c.check_id == "no_operation_for_sequential_clearing")
    g = chk.governing_case
    assert g is not None and g.faulted.startswith("parallel circuit, its breaker at")
    open_at = g.faulted.split(" at ")[1].split(" open")[0]
    names = study.ends
    at_s = st.end == names[0]
    by_rho = params_by_resistivity(study, geo, params, src)
    env = build_envelope(study, resistive_targets(study, list(settings)))
    sim = simulate(study, geo, {g.earth_resistivity_ohm_m: by_rho[g.earth_resistivity_ohm_m]},
                   env, m=np.array([0.0]), source=src, protected=False)
    labels = geo.phase_labels[0]
    run, (f, rf, k, ld) = _find(sim.runs, g, labels, lambda r: r.open_at == open_at)
    sw = run.sweep
    m = g.location_pct / 100 if at_s else 1 - g.location_pct / 100
    prm = by_rho[g.earth_resistivity_ohm_m]
    line = swap_circuits(_cascade(prm.z_by_position_ohm_per_m, prm.y_by_position_s_per_m,
                                  [list(o) for o in geo.section_orders],
                                  geo.section_lengths_m, study.reach_study.shunt_capacitance))
    s_s = build_source(study, names[0], src) if run.sources[0] else None
    s_r = build_source(study, names[1], src) if run.sources[1] else None
    state = "faulted_open_at_s" if open_at == names[0] else "faulted_open_at_r"
    ref = solve_fault_single(line, s_s, s_r, v_nominal_v=geo.v_nominal_v,
                             fault_type=sw.fault_types[f], m=m, r_fault_ohm=sw.r_fault_ohm[rf],
                             r_phase_ohm=sw.r_phase_ohm[rf],
                             source_scale=tuple(sw.source_scale[k]),
                             emf_v=(complex(sw.emf_s_v[k, ld]), complex(sw.emf_r_v[k, ld])),
                             parallel_state=state)
    # The protected circuit is circuit 2 of the swapped line; the faulted one is circuit 1.
    v, i, i_par = ((ref.v_s, ref.i_s_parallel, ref.i_s) if at_s
                   else (ref.v_r, ref.i_r_parallel, ref.i_r))
    loop = next(lp for lp in LOOP_PHASES if loop_label(lp, labels) == g.loop)
    z = _loop(v, i, i_par, loop, st.k0.k0, st.k0m if g.mutual_compensation else None)
    assert_allclose(z, g.z_apparent_primary_ohm, rtol=1e-6, atol=0)
    s = float(st.zone("zone1").characteristic(loop.endswith("G"), st.line_angle_rad)
              .reach_scale(np.array([z]))[0])
    assert_allclose((s - 1) * 100, chk.margin_pct, rtol=1e-6, atol=1e-6)
    assert math.isfinite(chk.margin_pct) and chk.cases_run > 0
    notes = " ".join(ver.notes)
    assert "Sequential clearing" in notes
    assert "sequential clearing of a parallel-circuit fault" not in notes  # no longer a limit
