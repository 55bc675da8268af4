"""The fault solver with a neighbouring line on buses of its own (a shared corridor).

Checks: the batched chain-matrix solver against the independent per-case nodal solver of
tests/reference_solver.py (modified nodal analysis, Ho, Ruehli and Brennan 1975) extended
the same way; identities of circuit theory (a neighbour on the protected line's buses with
no route outside the corridor is the double circuit; a series impedance is the same
lumped at the end of the neighbour's route or spread along it)."""

from __future__ import annotations

import numpy as np
import pytest
from test_network import (
    C_12_NF_KM,
    C_ABC_NF_KM,
    OMEGA,
    SRC_R,
    SRC_S,
    V_NOM,
    Z_12_KM,
    Z_ABC_KM,
)

from relayset.errors import InputError
from relayset.physics.faults import FAULT_TYPES
from relayset.physics.network import (
    PARALLEL_STATES,
    LineCascade,
    NeighbourEnd,
    Source,
    solve_fault_sweep,
)
from relayset.physics.sequence import balanced_phase_matrix

from reference_solver import solve_fault_single

SRC_X = Source(3.0 + 30j, 4.0 + 45j)  # the neighbour's own buses (invented)
SRC_Y = Source(2.0 + 22j, 3.5 + 35j)
LENGTHS = np.array([20e3, 50e3, 30e3])  # shared: the middle section only
NAMES = ["v_s", "i_s", "i_s_parallel", "v_r", "i_r", "i_r_parallel", "v_f", "i_fault",
         "i_f_from_s", "i_f_from_r"]


def corridor(shunt: bool, outside: str = "own") -> LineCascade:
    """Protected line beside a neighbour over the middle section. Outside the corridor
    the neighbour is uncoupled: ``own`` its own series (and shunt) matrix, ``zero`` a
    zero-impedance connector (its route lumped into its terminals instead)."""
    z22 = Z_ABC_KM[::-1, ::-1]
    shared = np.block([[Z_ABC_KM, Z_12_KM], [Z_12_KM.T, z22]]) / 1e3
    apart = np.zeros((6, 6), dtype=complex)
    apart[:3, :3] = Z_ABC_KM / 1e3
    if outside == "own":
        apart[3:, 3:] = z22 / 1e3
    zs = np.stack([apart, shared, apart])
    ys = None
    if shunt:
        c = np.block([[C_ABC_NF_KM, C_12_NF_KM], [C_12_NF_KM.T, C_ABC_NF_KM[::-1, ::-1]]])
        c_apart = np.zeros((6, 6))
        c_apart[:3, :3] = C_ABC_NF_KM
        if outside == "own":
            c_apart[3:, 3:] = C_ABC_NF_KM[::-1, ::-1]
        ys = np.stack([1j * OMEGA * c_apart * 1e-12, 1j * OMEGA * c * 1e-12,
                       1j * OMEGA * c_apart * 1e-12])
    return LineCascade(zs, LENGTHS, ys)


ROUTE_X = balanced_phase_matrix(0.5 + 4j, 1.5 + 12j)  # its routes outside (invented)
ROUTE_Y = balanced_phase_matrix(0.8 + 6j, 2.0 + 18j)
ENDS = {
    "own buses": (NeighbourEnd(ROUTE_X, SRC_X), NeighbourEnd(ROUTE_Y, SRC_Y)),
    "one end on bus S": (NeighbourEnd(ROUTE_X, on_line_bus=True),
                         NeighbourEnd(ROUTE_Y, SRC_Y)),
    "open at R": (NeighbourEnd(ROUTE_X, SRC_X), NeighbourEnd(ROUTE_Y)),
}
CASES = [(e, s, sh, fc) for e in ENDS for s in PARALLEL_STATES for sh in (False, True)
         for fc in ((1, 2) if s == "in_service" else (1,))]


@pytest.mark.parametrize(("ends", "state", "shunt", "fault_circuit"), CASES)
def test_neighbour_sweep_equals_reference(ends, state, shunt, fault_circuit):
    # Independent formulations (chain matrices + Thevenin superposition versus modified
    # nodal analysis with the neighbour's routes stamped as coupled branches); tolerance
    # 1e-9 of the sweep's largest voltage or current, as in test_network.
    rng = np.random.default_rng(11 + len(state) + 3 * shunt + fault_circuit)
    line = corridor(shunt)
    nb = ENDS[ends]
    m = np.concatenate([[0.0, 0.2, 0.7, 1.0], rng.uniform(0, 1, 2)])  # section edges
    rf = np.array([0.0, rng.uniform(1, 30)])
    rp = np.array([0.0, rng.uniform(0.5, 5)])
    scale = np.array([[1.0, 1.0], [0.4, 2.5]])
    delta = np.radians([-20.0, 35.0])
    sw = solve_fault_sweep(line, SRC_S, SRC_R, v_nominal_v=V_NOM, fault_types=FAULT_TYPES,
                           m=m, r_fault_ohm=rf, r_phase_ohm=rp, source_scale=scale,
                           transfer_angle_rad=delta, parallel_state=state, neighbour=nb,
                           fault_circuit=fault_circuit)
    v_scale = max(np.max(np.abs(getattr(sw, n))) for n in NAMES if n.startswith("v"))
    i_scale = max(np.max(np.abs(getattr(sw, n))) for n in NAMES if n.startswith("i"))
    for _ in range(20):
        f, i, r, k, ld = (rng.integers(len(FAULT_TYPES)), rng.integers(m.size),
                          rng.integers(rf.size), rng.integers(2), rng.integers(2))
        ref = solve_fault_single(line, SRC_S, SRC_R, v_nominal_v=V_NOM,
                                 fault_type=FAULT_TYPES[f], m=m[i], r_fault_ohm=rf[r],
                                 r_phase_ohm=rp[r], source_scale=tuple(scale[k]),
                                 transfer_angle_rad=delta[ld], parallel_state=state,
                                 neighbour=nb, fault_circuit=fault_circuit)
        for name in NAMES:
            if name == "i_s_parallel" and state == "isolated":
                continue  # floating circuit 2 (series only: tied at S by the reference)
            got = getattr(sw, name)[f, i, r, k, ld]
            tol = 1e-9 * (v_scale if name.startswith("v") else i_scale)
            np.testing.assert_allclose(got, getattr(ref, name), rtol=0, atol=tol,
                                       err_msg=f"{name} {FAULT_TYPES[f]} m={m[i]}")


@pytest.mark.parametrize("shunt", [False, True])
def test_neighbour_on_both_buses_is_the_double_circuit(shunt):
    # Identity: both ends on the protected line's buses, no route outside the corridor,
    # whole route shared: the parallel circuit of a double-circuit line (in service).
    # Tolerance 1e-10 of the sweep's scale (rounding only).
    z22 = Z_ABC_KM[::-1, ::-1]
    z = np.block([[Z_ABC_KM, Z_12_KM], [Z_12_KM.T, z22]]) / 1e3
    ys = None
    if shunt:
        c = np.block([[C_ABC_NF_KM, C_12_NF_KM], [C_12_NF_KM.T, C_ABC_NF_KM[::-1, ::-1]]])
        ys = np.stack([1j * OMEGA * c * 1e-12] * 3)
    line = LineCascade(np.stack([z] * 3), LENGTHS, ys)
    zero = np.zeros((3, 3))
    nb = (NeighbourEnd(zero, on_line_bus=True), NeighbourEnd(zero, on_line_bus=True))
    kw = dict(v_nominal_v=V_NOM, fault_types=FAULT_TYPES, m=np.linspace(0, 1, 7),
              r_fault_ohm=[0.0, 10.0], source_scale=[0.5, 2.0],
              transfer_angle_rad=[0.0, 0.3])
    for fc in (1, 2):
        a = solve_fault_sweep(line, SRC_S, SRC_R, neighbour=nb, fault_circuit=fc, **kw)
        b = solve_fault_sweep(line, SRC_S, SRC_R, fault_circuit=fc, **kw)
        for name in NAMES:
            x, y = getattr(a, name), getattr(b, name)
            np.testing.assert_allclose(x, y, rtol=0, atol=1e-10 * np.max(np.abs(y)),
                                       err_msg=name)


@pytest.mark.parametrize("state", PARALLEL_STATES)
def test_zero_impedance_connectors_equal_the_route_spread_along(state):
    # Identity (series circuit): the neighbour's uncoupled stretches outside the corridor
    # as its own series impedance along the cascade, or as zero-impedance connectors with
    # the same impedance lumped into its terminals (series only, so exact). Also checks
    # that the chain-matrix path takes a section whose neighbour block is zero.
    z22 = Z_ABC_KM[::-1, ::-1] / 1e3
    lumped_x, lumped_y = z22 * LENGTHS[0], z22 * LENGTHS[2]
    spread = (NeighbourEnd(np.zeros((3, 3)), SRC_X), NeighbourEnd(np.zeros((3, 3)), SRC_Y))
    lumped = (NeighbourEnd(lumped_x, SRC_X), NeighbourEnd(lumped_y, SRC_Y))
    kw = dict(v_nominal_v=V_NOM, fault_types=FAULT_TYPES, m=np.linspace(0, 1, 11),
              r_fault_ohm=[0.0, 10.0], source_scale=[0.5, 2.0],
              transfer_angle_rad=[0.0, 0.3], parallel_state=state)
    a = solve_fault_sweep(corridor(False, "own"), SRC_S, SRC_R, neighbour=spread, **kw)
    b = solve_fault_sweep(corridor(False, "zero"), SRC_S, SRC_R, neighbour=lumped, **kw)
    for name in NAMES:
        x, y = getattr(a, name), getattr(b, name)
        np.testing.assert_allclose(x, y, rtol=0, atol=1e-9 * np.max(np.abs(y)), err_msg=name)


def test_zero_connectors_with_shunt_take_the_modal_path():
    # The chain matrix of a section with a zero neighbour block (Z and Y) is finite and
    # leaves the neighbour's conductors unchanged end to end: Phi's neighbour blocks are
    # the identity (dV = 0, dI = 0), and no coupling to the protected conductors.
    from relayset.physics.chain import section_chain_matrices

    line = corridor(True, "zero")
    phi = section_chain_matrices(line.z_ohm_per_m[:1], line.y_s_per_m[:1],
                                 np.array([[20e3]]))[0, 0]
    nb = [3, 4, 5, 9, 10, 11]
    assert np.all(np.isfinite(phi))
    np.testing.assert_allclose(phi[np.ix_(nb, nb)], np.eye(6), rtol=0, atol=1e-12)
    pr = [0, 1, 2, 6, 7, 8]
    np.testing.assert_allclose(phi[np.ix_(pr, nb)], 0, rtol=0, atol=1e-12)


def test_bad_neighbour_arguments():
    line = corridor(False)
    kw = dict(v_nominal_v=V_NOM, fault_types=["AG"], m=[0.5], r_fault_ohm=[0.0])
    nb = ENDS["own buses"]
    with pytest.raises(InputError, match="faulted circuit"):
        solve_fault_sweep(line, SRC_S, SRC_R, neighbour=nb, parallel_state="earthed",
                          fault_circuit=2, **kw)
    with pytest.raises(InputError, match="neighbouring line"):
        solve_fault_sweep(line, SRC_S, SRC_R, neighbour=nb, parallel_state="faulted_open_at_s",
                          **kw)
    with pytest.raises(InputError, match="3x3"):
        NeighbourEnd(np.zeros((2, 2)))
