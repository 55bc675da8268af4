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


def _with_line_behind(tmp_path, demo_path, z0: bool = True):
    """The 230 kV demo with a short line behind Elsford (invented)."""
    text = demo_path(D230).read_text("utf-8")
    phil = pipeline.load(demo_path(D230)).study.study.philosophy
    text = text.replace(f'"{phil}"', f'"{(demo_path(D230).parent / phil).as_posix()}"')
    text += ('\n[[lines_behind]]\nname = "Elsford - Kirkby 230 kV"\nz1 = "1.2 + 11j ohm"\n'
             + ('z0 = "4.1 + 36j ohm"\n' if z0 else ""))
    path = tmp_path / "behind.toml"
    path.write_text(text, "utf-8")
    return path


def _resolve_branch_case(study, src, geo, by_rho, settings, chk, end_index=0):
    """Re-solve a branch check's governing case with the reference solver: the loop the
    relay measures, and the margin from it."""
    from relayset.physics.sequence import balanced_phase_matrix
    from relayset.studies.verification.branches import branch_lines

    st = settings[end_index]
    g = chk.governing_case
    names = study.ends
    at_s = st.end == names[0]
    env = build_envelope(study, resistive_targets(study, list(settings)))
    sim = simulate(study, geo, by_rho, env, m=np.array([0.0]), source=src, parallel=False,
                   sequential=False)
    labels = geo.phase_labels[0]
    name = g.faulted.split("'")[1]
    run, (f, rf, k, ld) = _find(
        sim.runs, g, labels, lambda r: r.faulted == "branch" and r.state == g.parallel_state)
    bl = next(b for b in branch_lines(study, src) if b.name == name)
    x = g.location_pct / 100
    prm = by_rho[g.earth_resistivity_ohm_m]
    line = _cascade(prm.z_by_position_ohm_per_m, prm.y_by_position_s_per_m,
                    [list(o) for o in geo.section_orders], geo.section_lengths_m,
                    study.reach_study.shunt_capacitance)
    s_s = build_source(study, names[0], src) if run.sources[0] else None
    s_r = build_source(study, names[1], src) if run.sources[1] else None
    sw = run.sweep
    zb = balanced_phase_matrix(x * bl.z1_ohm, x * bl.z0_ohm)
    ref = solve_fault_single(line, s_s, s_r, v_nominal_v=geo.v_nominal_v,
                             fault_type=sw.fault_types[f], m=0.0 if bl.bus == names[0] else 1.0,
                             r_fault_ohm=sw.r_fault_ohm[rf], r_phase_ohm=sw.r_phase_ohm[rf],
                             source_scale=tuple(sw.source_scale[k]),
                             emf_v=(complex(sw.emf_s_v[k, ld]), complex(sw.emf_r_v[k, ld])),
                             parallel_state=g.parallel_state,
                             z_branch_ohm=zb if x > 0 else None)
    behind = bl.bus == st.end
    if at_s:
        v, i, i_par = ref.v_s, (-ref.i_f_from_r if behind else ref.i_s), ref.i_s_parallel
    else:
        v, i, i_par = ref.v_r, (-ref.i_f_from_s if behind else ref.i_r), ref.i_r_parallel
    loop = next(lp for lp in LOOP_PHASES if loop_label(lp, labels) == g.loop)
    z = _loop(v, i, i_par, loop, st.k0.k0, st.k0m if g.mutual_compensation else None)
    return z, g, st, loop


def test_line_behind_case_resolved_by_reference(tmp_path, demo_path):
    """Faults along the line behind Elsford: no forward zone operates at any reach (the
    check finds no case that could flip: margin None); a case of the sweep (ground fault
    through resistance halfway along the line, under export and import) re-solved by the
    reference solver (the line stretch stamped as a branch), the relay's loop within 1e-6 of
    the verification's view; the reverse zone's reach reported; the study's Z0 used and
    Z0 = 3 Z1 stated where none is given."""
    from relayset.physics.sequence import balanced_phase_matrix
    from relayset.studies.verification.checks import relay_model_at
    from relayset.studies.verification.relay_model import relay_view

    path = _with_line_behind(tmp_path, demo_path)
    study, src, geo, params, settings, ver = _settled(path)
    end = ver.ends[0]
    chk = next(c for c in end.checks if c.check_id == "no_operation_along_line_behind")
    assert chk.cases_run > 0 and chk.passed and chk.margin_pct is None
    rev = next(c for c in end.checks if c.check_id == "reach_along_line_behind")
    assert "Elsford - Kirkby 230 kV" in rev.requirement and rev.required_margin_pct is None
    notes = " ".join(ver.notes)
    assert "'Elsford - Kirkby 230 kV' at Elsford (Z1 1.2+11j Ω, Z0 4.1+36j Ω;" in notes
    assert "Z0 = 3 Z1 assumed" in notes  # the adjacent lines give no Z0
    assert "Not simulated" not in notes
    # one case of the sweep, re-solved
    by_rho = params_by_resistivity(study, geo, params, src)
    rho = float(study.system.earth_resistivity)
    env = build_envelope(study, resistive_targets(study, list(settings)))
    sim = simulate(study, geo, {rho: by_rho[rho]}, env, m=np.array([0.0]), source=src,
                   parallel=False, sequential=False)
    st = settings[0]
    run = next(r for r in sim.runs if r.faulted == "branch" and r.state == "in_service"
               and r.group == "ground" and all(r.sources))
    own = [k for k, (bus, _n, _x) in enumerate(run.branch) if bus == "Elsford"]
    j = next(n for n, k in enumerate(own) if run.branch[k][1:] == ("Elsford - Kirkby 230 kV", 0.5))
    model = relay_model_at(study, st.end)
    vb = relay_view(run, True, st.k0.k0, st.k0m, model, line_angle=st.line_angle_rad,
                    behind=True)
    sw = run.sweep
    line = _cascade(params.z_by_position_ohm_per_m, params.y_by_position_s_per_m,
                    [list(o) for o in geo.section_orders], geo.section_lengths_m,
                    study.reach_study.shunt_capacitance)
    s_s, s_r = build_source(study, "Elsford", src), build_source(study, "Fallowby", src)
    zb = balanced_phase_matrix(0.5 * (1.2 + 11j), 0.5 * (4.1 + 36j))
    rf = int(np.argmax(sw.r_fault_ohm))
    n_l = sw.emf_s_v.shape[1]
    for k, ld in ((0, 0), (sw.source_scale.shape[0] - 1, n_l - 1)):  # export and import
        ref = solve_fault_single(line, s_s, s_r, v_nominal_v=geo.v_nominal_v,
                                 fault_type="AG", m=0.0, r_fault_ohm=sw.r_fault_ohm[rf],
                                 source_scale=tuple(sw.source_scale[k]),
                                 emf_v=(complex(sw.emf_s_v[k, ld]),
                                        complex(sw.emf_r_v[k, ld])),
                                 z_branch_ohm=zb)
        mut = bool(np.broadcast_to(vb.mutual, vb.forward.shape)[0, j, rf, k, ld])
        z = _loop(ref.v_s, -ref.i_f_from_r, ref.i_s_parallel, "AG", st.k0.k0,
                  st.k0m if mut else None)
        f = vb.meant["AG"].index(sw.fault_types.index("AG"))
        assert_allclose(z, vb.loops["AG"][f, j, rf, k, ld], rtol=1e-6, atol=0)
        assert not vb.forward[sw.fault_types.index("AG"), j, rf, k, ld]


def test_adjacent_line_zone2_grading_case_resolved_by_reference(demo_path):
    """Faults on the adjacent lines beyond Fallowby: the governing case of zone 2's simulated
    grading against the adjacent zone 1 (bolted, at the philosophy's 80 % of the shortest
    adjacent line), re-solved by the reference solver within 1e-6, and its margin."""
    study, src, geo, params, settings, ver = _settled(demo_path(D230))
    end = ver.ends[0]
    chk = next(c for c in end.checks if c.check_id == "short_of_adjacent_zone1_simulated")
    g = chk.governing_case
    assert g.r_fault_ohm == 0 and g.r_phase_ohm == 0
    assert g.location_pct == 80.0 and "Fallowby - Greyholt 230 kV" in g.faulted
    by_rho = params_by_resistivity(study, geo, params, src)
    z, g, st, loop = _resolve_branch_case(study, src, geo, by_rho, settings, chk)
    assert_allclose(z, g.z_apparent_primary_ohm, rtol=1e-6, atol=0)
    s = float(st.zone("zone2").characteristic(loop.endswith("G"), st.line_angle_rad)
              .reach_scale(np.array([z]))[0])
    assert_allclose((s - 1) * 100, chk.margin_pct, rtol=1e-6, atol=1e-6)
    z1 = next(c for c in end.checks if c.check_id == "no_operation_on_adjacent_lines")
    assert z1.cases_run > 0 and z1.passed


def test_fault_at_distance_zero_along_a_line_is_the_bus_fault(tmp_path, demo_path):
    # Identity: at x = 0 the line behind adds nothing: the relay's loops there equal the
    # loops of the own-bus faults behind it (protected runs at m = 0), case for case
    # (relative 1e-9; same state, resistivity, source configuration and fault group).
    from relayset.studies.verification.relay_model import RelayModel, relay_view

    path = _with_line_behind(tmp_path, demo_path)
    study, src, geo, params, settings, _ver = _settled(path)
    by_rho = params_by_resistivity(study, geo, params, src)
    rho = float(study.system.earth_resistivity)
    env = build_envelope(study, resistive_targets(study, list(settings)))
    sim = simulate(study, geo, {rho: by_rho[rho]}, env, m=np.array([0.0, 1.0]), source=src,
                   parallel=False, sequential=False)
    st = settings[0]
    model = RelayModel()
    prot = {(r.group, r.case_names): r for r in sim.runs
            if r.faulted == "protected" and r.state == "in_service"}
    n = 0
    for run in sim.runs:
        if run.faulted != "branch" or run.state != "in_service":
            continue
        at0 = [k for k, (bus, nm, x) in enumerate(run.branch)
               if bus == study.ends[0] and x == 0.0 and nm == "Elsford - Kirkby 230 kV"]
        vb = relay_view(run, True, st.k0.k0, st.k0m, model, line_angle=st.line_angle_rad,
                        behind=True)
        own = [k for k, (bus, _n, _x) in enumerate(run.branch) if bus == study.ends[0]]
        vp = relay_view(prot[run.group, run.case_names], True, st.k0.k0, st.k0m, model,
                        line_angle=st.line_angle_rad, behind=True)
        for loop, zz in vb.loops.items():
            j = own.index(at0[0])
            assert_allclose(zz[:, j], vp.loops[loop][:, 0], rtol=1e-9, atol=0)
            n += 1
    assert n > 0


def test_coverage_interpolates_in_the_reach_scale():
    # Arithmetic written out: inside up to x = 0.25 (scale 0.8), outside at 0.5 (scale 1.2):
    # the crossing at 0.25 + (1 - 0.8)/(1.2 - 0.8) * 0.25 = 0.375; an outside point with an
    # infinite scale bounds the coverage instead; the first point outside gives 0.
    from relayset.studies.verification.branches import coverage

    assert_allclose(coverage([(0.0, 0.4), (0.25, 0.8), (0.5, 1.2)])[0], 0.375, rtol=1e-12,
                    atol=0)
    assert coverage([(0.0, 0.4), (0.25, math.inf), (0.5, 0.9)]) == (0.0, 0.25)
    assert coverage([(0.0, 1.5), (0.25, 0.5)]) == (0.0, None)
    assert coverage([(0.0, 0.5), (1.0, 0.9)]) == (1.0, None)
