"""COMTRADE files of the verification's governing cases carry the network's phasors.

Independent sources:

- the files are read back by the `comtrade` package from PyPI (an IEEE Std C37.111 parser,
  not ours); the fundamental phasors by a one-cycle-multiple DFT at the end of the record,
  where the DC offset (tau = X/(omega R), IEEE Std C37.113-2015) has decayed;
- the network's phasors by the per-case modified-nodal-analysis solver of
  tests/reference_solver.py (shares nothing with the batched solver but input checks and the
  fault constraints), for the case's fault, location, resistances, sources, state and the
  EMFs of its load flow (whose transfer angle must be the case's); within 0.5 % of each
  channel's phasor (of the largest of its kind where it is near zero), issue 20;
- the apparent impedance of the governing loop from the read-back phasors by the loop
  equations (ground loop V_p / (I_p + k0 I_res [+ k0m I_res,parallel]), phase loop
  (V_x - V_y)/(I_x - I_y), IEEE Std C37.113-2015), against the one the verification
  reported, within 1 % (0.5 % per channel read back, a ratio of two of them).
"""

from __future__ import annotations

import math
from fractions import Fraction

import numpy as np
import pytest

from relayset import api
from relayset.export import comtrade as ours
from relayset.export import testshots
from relayset.inputs.study_file import parse_study
from relayset.physics.faults import FAULT_TYPES
from relayset.physics.measurement import LOOP_PHASES, LOOPS
from relayset.resources import demo_lines_dir
from relayset.results.reach import fault_label, loop_label

from reference_solver import solve_fault_single

comtrade = pytest.importorskip("comtrade")

DEMO = demo_lines_dir()
#: single circuit with a load flow and adjacent lines (60 Hz); double circuit with mutual
#: compensation, sequential clearing and lines beyond (50 Hz)
DEMOS = ("kessler_oxbow_115kv", "elsford_fallowby_230kv_double")


@pytest.fixture(scope="module")
def exported(tmp_path_factory):
    out = {}
    for n in DEMOS:
        r = api.study_settings(DEMO / f"{n}.toml")
        folder = tmp_path_factory.mktemp(n)
        paths = testshots.export_test_cases(r, folder)
        out[n] = (r, {p.stem: p for p in paths if p.suffix == ".cfg"})
    return out


def _phasors(cfg, f: float) -> np.ndarray:
    """Fundamental phasors of every channel, referred to the inception angle."""
    rec = comtrade.load(str(cfg), str(cfg.with_suffix(".dat")))
    fs = rec.cfg.sample_rates[0][0]
    x = np.asarray(rec.analog, dtype=float)
    n = Fraction(fs / f).limit_denominator(1000).numerator  # whole cycles, whole samples
    t = np.asarray(rec.time, dtype=float)[-n:] - rec.trigger_time
    w = 2 * math.pi * f
    return math.sqrt(2) / n * (x[:, -n:] * np.exp(-1j * (w * t + ours.INCEPTION_ANGLE_RAD))
                               ).sum(axis=1)


def _governing(r):
    """(basis, settings, check) of every check of every end naming a governing case."""
    for basis, st in zip(testshots.end_bases(r), r.settings, strict=True):
        for c in r.verification.end(st.end).checks:
            if c.governing_case is not None:
                yield basis, st, c


def _cfg(files, basis, c):
    return files[f"{basis.stem}-case-{ours._slug(c.zone)}-{ours._slug(c.check_id)}"]


def _loop_z(loop: str, v, i, k0, i_res_par=0j, k0m=0j) -> complex:
    ph = LOOP_PHASES[loop]
    if len(ph) == 1:
        p = ph[0]
        return v[p] / (i[p] + k0 * i.sum() + k0m * i_res_par)
    x, y = ph
    return (v[x] - v[y]) / (i[x] - i[y])


@pytest.mark.parametrize("name", DEMOS)
def test_governing_loop_measures_what_the_verification_reported(exported, name):
    r, files = exported[name]
    labels = testshots.end_bases(r)[0].phase_labels
    seen = 0
    for basis, _st, c in _governing(r):
        g = c.governing_case
        x = _phasors(_cfg(files, basis, c), r.parameters.frequency_hz)
        loop = next(lp for lp in LOOPS if loop_label(lp, labels) == g.loop)
        mutual = g.mutual_compensation and basis.k0m is not None
        z_sec = _loop_z(loop, x[:3], x[3:6], basis.k0, x[6] if mutual else 0j,
                        basis.k0m if mutual else 0j)
        z_pri = z_sec / basis.secondary_factor
        want = complex(g.z_apparent_primary_ohm)
        assert abs(z_pri - want) <= 0.01 * abs(want), (c.check, z_pri, want)
        seen += 1
    assert seen >= 5


def _reference(r, st, c):
    """The case solved by the reference solver: secondary phasors at the relay (V, I, I
    parallel residual), prefault and fault, referred to phase A's prefault voltage."""
    from relayset.studies.geometry import build_geometry
    from relayset.studies.parameters import compute_parameters
    from relayset.studies.reach import build_source, line_cascade
    from relayset.studies.verification import params_by_resistivity
    from relayset.studies.verification.branches import branch_lines
    from relayset.studies.verification.closing import _lines_on_their_buses
    from relayset.studies.verification.simulation import source_configs, swap_circuits

    src_name = str(r.source_file)
    study = _lines_on_their_buses(parse_study(r.input, source=src_name))
    geo = build_geometry(study, src_name)
    g = c.governing_case
    names = study.ends
    at_s = st.end == names[0]
    by_rho = params_by_resistivity(study, geo, compute_parameters(geo), src_name)
    line = line_cascade(geo, by_rho[g.earth_resistivity_ohm_m], "actual_plan",
                        study.reach_study.shunt_capacitance)
    src = {n: build_source(study, n, src_name) for n in names}
    s_s, s_r, scales = next((a, b, sc[lab.index(g.source_case)]) for a, b, sc, lab, _l
                            in source_configs(study, names, src) if g.source_case in lab)
    labels = geo.phase_labels[0]
    ft = next(f for f in FAULT_TYPES if fault_label(f, labels) == g.fault_type)
    # the EMFs of the case's load flow, as the export solved them; their transfer angle
    # must be the case's
    p = ours.case_solver(r).phasors(st.end, st, g)
    ang = math.degrees(np.angle(p.emf_s_v) - np.angle(p.emf_r_v))
    assert abs(ang - g.transfer_angle_deg) <= 1e-5
    kw = dict(v_nominal_v=geo.v_nominal_v, source_scale=tuple(scales),
              emf_v=(p.emf_s_v, p.emf_r_v))
    x = g.location_pct / 100
    state = "in_service" if g.parallel_state == "none" else g.parallel_state
    ln, m, z_b, behind, fault_state = line, (x if at_s else 1 - x), None, False, state
    if g.faulted.startswith("parallel circuit"):
        ln = swap_circuits(line)
        if g.faulted != "parallel circuit":
            fault_state = ("faulted_open_at_s" if g.faulted.endswith(f"at {names[0]} open")
                           else "faulted_open_at_r")
    elif g.faulted.startswith("line '"):
        b = next(b for b in branch_lines(study, src_name) if g.faulted.startswith(
            f"line '{b.name}' from {b.bus} "))
        m = 0.0 if b.bus == names[0] else 1.0
        # the line's phase matrix from Z1 and Z0 (Fortescue), none at the bus itself
        z_b = None if x == 0 else (x * (b.z0_ohm + 2 * b.z1_ohm) / 3 * np.eye(3) + x * (
            b.z0_ohm - b.z1_ohm) / 3 * (np.ones((3, 3)) - np.eye(3)))
        behind = b.bus == st.end
    elif g.faulted == "behind the relay":
        m, behind = (0.0 if at_s else 1.0), True
    f = solve_fault_single(
        ln, s_s, s_r, fault_type=ft, m=m, r_fault_ohm=g.r_fault_ohm,
        r_phase_ohm=g.r_phase_ohm, parallel_state=fault_state, z_branch_ohm=z_b, **kw)
    pre = solve_fault_single(line, s_s, s_r, fault_type="AG", m=0.5,
                                              r_fault_ohm=1e12, parallel_state=state, **kw)
    par = ln is not line
    if at_s:
        v, i, ip = f.v_s, (f.i_s_parallel if par else -f.i_f_from_r if behind else f.i_s), \
            (f.i_s if par else f.i_s_parallel)
        vp, ipre, ippre = pre.v_s, pre.i_s, pre.i_s_parallel
    else:
        v, i, ip = f.v_r, (f.i_r_parallel if par else -f.i_f_from_s if behind else f.i_r), \
            (f.i_r if par else f.i_r_parallel)
        vp, ipre, ippre = pre.v_r, pre.i_r, pre.i_r_parallel
    if state != "in_service":  # out of service: no current in the parallel circuit's CTs
        ip, ippre = np.zeros(3), np.zeros(3)
    ct, vt = study.relay.ratios(st.end)
    ref = np.exp(-1j * np.angle(vp[0]))
    return (np.concatenate([vp / float(vt), ipre / float(ct), [ippre.sum() / float(ct)]]) * ref,
            np.concatenate([v / float(vt), i / float(ct), [ip.sum() / float(ct)]]) * ref)


@pytest.mark.parametrize("name", DEMOS)
def test_governing_case_files_carry_the_network_phasors(exported, name):
    r, files = exported[name]
    seen = set()
    for basis, st, c in _governing(r):
        n_chan = 7 if basis.k0m is not None else 6
        want_pre, want = (a[:n_chan] for a in _reference(r, st, c))
        got = _phasors(_cfg(files, basis, c), r.parameters.frequency_hz)
        big = np.concatenate([np.full(3, np.abs(want[:3]).max()),
                              np.full(4, np.abs(want[3:]).max())])[:n_chan]
        tol = 0.005 * np.maximum(np.abs(want), 0.01 * big)
        assert np.all(np.abs(got - want) <= tol), (c.check, got, want)
        # the prefault (first cycles of the record): the network's load flow
        case = next(k for k in ours.governing_cases(r, st, basis) if k.case_id.endswith(
            f"-case-{ours._slug(c.zone)}-{ours._slug(c.check_id)}"))
        pre = np.concatenate([case.v_pre, case.i_pre, [case.in_parallel_pre]])[:n_chan]
        big_pre = np.concatenate([np.full(3, np.abs(want_pre[:3]).max()),
                                  np.full(4, max(np.abs(want_pre[3:]).max(), 1e-9))])[:n_chan]
        # (+ 1 µA: the reference's prefault leaks through its 1e12 ohm "fault")
        assert np.all(np.abs(pre - want_pre) <= 0.005 * np.maximum(
            np.abs(want_pre), 0.01 * big_pre) + 1e-6), (c.check, pre, want_pre)
        seen.add(c.governing_case.faulted.split(" (")[0].split(",")[0])
    # the kinds of faulted element the verification re-solves here
    assert "protected line" in seen
    assert any(s.startswith("line '") for s in seen)
    if name == "elsford_fallowby_230kv_double":
        assert "parallel circuit" in seen


def test_healthy_phases_are_the_network_not_the_test_set_convention(exported):
    # The test-set convention (relayset.export.testshots, common practice, no source)
    # injects a ground loop's current in the faulted phase alone, with no prefault current;
    # the network's healthy phases carry load and the fault's share.
    r, files = exported["kessler_oxbow_115kv"]
    labels = testshots.end_bases(r)[0].phase_labels
    checked = 0
    for basis, _st, c in _governing(r):
        g = c.governing_case
        loop = next(lp for lp in LOOPS if loop_label(lp, labels) == g.loop)
        if len(LOOP_PHASES[loop]) != 1:
            continue
        p = LOOP_PHASES[loop][0]
        healthy = [k for k in range(3) if k != p]
        _vpre, _v, i_conv = testshots.loop_phasors(
            loop, complex(g.z_apparent_primary_ohm) * basis.secondary_factor, basis.k0,
            basis.v_nom, basis.i_test)
        got = _phasors(_cfg(files, basis, c), r.parameters.frequency_hz)
        i_net = got[3:6]
        assert np.all(np.abs(i_conv[healthy]) == 0)
        assert np.all(np.abs(i_net[healthy]) > 0.05 * np.abs(i_net[p])), (c.check, i_net)
        checked += 1
    assert checked >= 2
