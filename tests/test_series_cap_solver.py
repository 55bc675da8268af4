"""Series capacitor banks in the fault solver (relayset.physics.network, chain).

Checks: agreement of the batched chain-matrix solver with the independent per-case
modified nodal analysis of tests/reference_solver.py (the bank stamped as the nodal
admittance of its impedance between two nodes at its place), and textbook identities of a
radial line (the loop impedance of a bolted fault beyond the bank is Z_line - jX_C).
Line data are invented but realistic (those of tests/test_network.py).
"""

from __future__ import annotations

import numpy as np
import pytest
from test_network import SRC_R, SRC_S, V_NOM, double_circuit, single_circuit

from relayset.physics.faults import FAULT_TYPES
from relayset.physics.network import LineCascade, SeriesElement, solve_fault_sweep

from reference_solver import solve_fault_single

X_C = 25.0  # ohm, some 60 % of the 100 km test line's reactance


def with_banks(line: LineCascade, banks) -> LineCascade:
    n = line.n_conductors
    els = tuple(SeriesElement(at, np.diag(np.full(n, z)), vt) for at, z, vt in banks)
    return LineCascade(line.z_ohm_per_m, line.length_m, line.y_s_per_m, els)


ARRANGEMENTS = [
    # (place, impedance, VT on the line side)
    [(0.0, -1j * X_C, False)],  # at bus S, VT on the bus side
    [(0.0, -1j * X_C, True)],  # at bus S, VT on the line side
    [(1.0, -1j * X_C, True)],  # at bus R, VT on the line side
    [(0.45, -1j * X_C, False)],  # mid-line, inside a section
    [(0.3, 4.0 - 6j, False), (1.0, -1j * 12.0, False)],  # MOV-conducting + a bus bank
]


@pytest.mark.parametrize("banks", ARRANGEMENTS)
@pytest.mark.parametrize(("kind", "state", "shunt"), [
    ("single", "in_service", False), ("single", "in_service", True),
    ("double", "in_service", True), ("double", "earthed", False),
    ("double", "faulted_open_at_r", True)])
def test_sweep_with_banks_equals_reference(banks, kind, state, shunt):
    # Independent formulations: chain matrices with [[1, Z],[0, 1]] inserted versus modified
    # nodal analysis with the bank's nodal admittance (tests/reference_solver.py).
    # Tolerance 1e-9 of the sweep's largest voltage or current.
    base = single_circuit(shunt) if kind == "single" else double_circuit(shunt)
    line = with_banks(base, banks)
    rng = np.random.default_rng(11)
    places = [b[0] for b in banks]
    # both sides of every bank: at its place (bus side / S side) and just beyond it
    m = np.unique(np.concatenate([[0.0, 0.3, 1.0, 1e-4, 1 - 1e-4], places,
                                  [min(p + 1e-4, 1.0) for p in places],
                                  rng.uniform(0, 1, 2)]))
    rf = np.array([0.0, 7.0])
    scale = np.array([[1.0, 1.0], [0.3, 2.0]])
    delta = np.radians([15.0])
    names = ["v_s", "i_s", "i_s_parallel", "v_r", "i_r", "i_r_parallel", "v_f", "i_fault",
             "i_f_from_s", "i_f_from_r"]
    sw = solve_fault_sweep(line, SRC_S, SRC_R, v_nominal_v=V_NOM, fault_types=FAULT_TYPES,
                           m=m, r_fault_ohm=rf, r_phase_ohm=rf / 7, source_scale=scale,
                           transfer_angle_rad=delta, parallel_state=state)
    v_scale = max(np.max(np.abs(getattr(sw, n))) for n in names if n.startswith("v"))
    i_scale = max(np.max(np.abs(getattr(sw, n))) for n in names if n.startswith("i"))
    for i in range(m.size):
        f, r, k = rng.integers(len(FAULT_TYPES)), rng.integers(2), rng.integers(2)
        ref = solve_fault_single(line, SRC_S, SRC_R, v_nominal_v=V_NOM,
                                 fault_type=FAULT_TYPES[f], m=m[i], r_fault_ohm=rf[r],
                                 r_phase_ohm=rf[r] / 7, source_scale=tuple(scale[k]),
                                 transfer_angle_rad=delta[0], parallel_state=state)
        for name in names:
            np.testing.assert_allclose(
                getattr(sw, name)[f, i, r, k, 0], getattr(ref, name), rtol=0,
                atol=1e-9 * (v_scale if name.startswith("v") else i_scale),
                err_msg=f"{name} at m = {m[i]}")


def test_radial_bolted_fault_beyond_the_bank_measures_line_minus_xc():
    # Textbook identity (Kirchhoff's voltage law on a balanced radial line fed from S): a
    # bolted three-phase fault at m beyond a bank at S, VT on the bus side, gives
    # V_S = (m Z_L1 - jX_C) I_S in each phase; with the VT on the line side, m Z_L1.
    from relayset.physics.sequence import balanced_phase_matrix
    z1, z0 = 0.03 + 0.33j, 0.25 + 1.1j  # ohm/km, invented
    z = balanced_phase_matrix(z1, z0) / 1e3
    base = LineCascade(np.stack([z, z]), np.array([60e3, 140e3]))
    m = np.array([0.05, 0.2, 0.7, 1.0])
    want = m * 200 * z1
    for vt_line, xc in ((False, -1j * X_C), (True, 0.0)):
        line = with_banks(base, [(0.0, -1j * X_C, vt_line)])
        sw = solve_fault_sweep(line, SRC_S, None, v_nominal_v=V_NOM, fault_types=["ABC"],
                               m=m, r_fault_ohm=[0.0])
        z_meas = sw.v_s[0, :, 0, 0, 0] / sw.i_s[0, :, 0, 0, 0]
        np.testing.assert_allclose(z_meas, (want + xc)[:, None] * np.ones(3), rtol=1e-9,
                                   atol=0)
    assert (want[0] - 1j * X_C).imag < 0  # close to the bank the reactance is inverted


def test_bus_fault_behind_a_line_side_vt_is_measured_at_plus_jxc():
    # Kirchhoff's voltage law: a bolted three-phase fault on bus S fed from R only through
    # the line and a bank at S, with the relay's VT on the line side of the bank, gives
    # V_VT = V_bus + jX_C * (current from the line into the bus) = jX_C (-I_S): the relay
    # measures V/I = +jX_C, a reverse fault seen forward and inductive.
    from relayset.physics.sequence import balanced_phase_matrix
    z = balanced_phase_matrix(0.03 + 0.33j, 0.25 + 1.1j) / 1e3  # ohm/m, invented
    line = with_banks(LineCascade(np.stack([z]), np.array([100e3])),
                      [(0.0, -1j * X_C, True)])
    sw = solve_fault_sweep(line, None, SRC_R, v_nominal_v=V_NOM, fault_types=["ABC"],
                           m=np.array([0.0]), r_fault_ohm=[0.0])
    # the relay's current for a fault at its own bus is what arrives from the line (the
    # verification's relay model, relay_model.relay_quantities with behind=True)
    z_meas = sw.v_s[0, 0, 0, 0, 0] / -sw.i_f_from_r[0, 0, 0, 0, 0]
    np.testing.assert_allclose(z_meas, 1j * X_C * np.ones(3), rtol=1e-9, atol=0)


def test_bypassed_bank_equals_no_bank():
    # A zero element is the line itself (identity of the chain matrix [[1, 0],[0, 1]]).
    base = single_circuit(True)
    line = with_banks(base, [(0.45, 0.0, False)])
    kw = dict(v_nominal_v=V_NOM, fault_types=FAULT_TYPES, m=np.linspace(0, 1, 7),
              r_fault_ohm=[0.0, 5.0])
    a = solve_fault_sweep(line, SRC_S, SRC_R, **kw)
    b = solve_fault_sweep(base, SRC_S, SRC_R, **kw)
    np.testing.assert_allclose(a.i_s, b.i_s, rtol=1e-11, atol=1e-9)
    np.testing.assert_allclose(a.v_r, b.v_r, rtol=1e-11, atol=1e-6)


def test_load_flow_through_a_bank_from_either_end():
    # The load flow (relayset.physics.loadflow) sees the banks: the solver's prefault power
    # into the line at the end whose voltage it fixed is the P + jQ asked for (definition,
    # S = 3 V I*), from S and, through the reversed line, from R.
    from relayset.physics.loadflow import emfs_for_load
    from relayset.physics.sequence import balanced_phase_matrix
    from relayset.studies.reach import emfs_for_flows_at

    # a balanced line (the load flow is positive-sequence), with shunt capacitance
    z = balanced_phase_matrix(0.03 + 0.33j, 0.25 + 1.1j) / 1e3
    y = balanced_phase_matrix(1j * 3.5e-6, 1j * 2.2e-6) / 1e3
    base = LineCascade(np.stack([z, z]), np.array([60e3, 140e3]), np.stack([y, y]))
    line = with_banks(base, [(0.45, -1j * X_C, False), (1.0, -1j * 9.0, True)])
    src = {"S": SRC_S, "R": SRC_R}
    p, q = np.array([60e6, -40e6]), np.array([10e6, 5e6])
    e_s, e_r = emfs_for_load(line, SRC_S, SRC_R, v_nominal_v=V_NOM, p_w=p, q_var=q)
    sw = solve_fault_sweep(line, SRC_S, SRC_R, v_nominal_v=V_NOM, fault_types=["AG"],
                           m=[0.5], r_fault_ohm=[0.0], emf_v=(e_s, e_r))
    s_in = 3 * sw.v_s_pre[0, :, 0] * np.conj(sw.i_s_pre[0, :, 0])
    np.testing.assert_allclose(s_in, p + 1j * q, rtol=1e-9, atol=0)
    e_s, e_r = emfs_for_flows_at(line, src, ("S", "R"), "R", p, q, np.array([[1.0, 1.0]]),
                                 "in_service", V_NOM)
    sw = solve_fault_sweep(line, SRC_S, SRC_R, v_nominal_v=V_NOM, fault_types=["AG"],
                           m=[0.5], r_fault_ohm=[0.0], emf_v=(e_s, e_r))
    # at R the bank's VT is on its line side: the power at the bus is V_bus I*, with
    # V_bus = V_line + Z_bank I (the current into the line flows through the bank first)
    v_bus = sw.v_r_pre[0, :, 0] + (-1j * 9.0) * sw.i_r_pre[0, :, 0]
    s_in = 3 * v_bus * np.conj(sw.i_r_pre[0, :, 0])
    np.testing.assert_allclose(s_in, p + 1j * q, rtol=1e-9, atol=0)
