"""Tests of the phase-domain fault solver (relayset.physics.network, faults, loadflow, chain).

Checks are identities from Kirchhoff's laws and Fortescue's transform, textbook line
equations, or agreement between the batched solver and the independent per-case
modified-nodal reference. Line data are invented but realistic.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from relayset.errors import InputError
from relayset.physics.faults import FAULT_TYPES, fault_admittance, fault_constraints
from relayset.physics.loadflow import emfs_for_load
from relayset.physics.measurement import loop_impedances, loops_for_fault, reach_error_pct
from relayset.physics.network import (
    OPEN_END_STATES,
    PARALLEL_STATES,
    LineCascade,
    Source,
    solve_fault_sweep,
)
from relayset.physics.sequence import balanced_phase_matrix, to_sequence

from reference_solver import solve_fault_single

V_NOM = 132e3
OMEGA = 2 * math.pi * 50

# Untransposed horizontal single circuit, ohm/km: unequal self terms, outer-phase mutual
# (A-C) smaller than the adjacent ones (invented, typical magnitudes).
Z_ABC_KM = np.array(
    [
        [0.090 + 0.400j, 0.050 + 0.150j, 0.050 + 0.120j],
        [0.050 + 0.150j, 0.088 + 0.395j, 0.050 + 0.155j],
        [0.050 + 0.120j, 0.050 + 0.155j, 0.092 + 0.405j],
    ]
)
# Maxwell capacitance matrix, nF/km (invented, typical magnitudes).
C_ABC_NF_KM = np.array([[8.6, -1.6, -0.6], [-1.6, 8.9, -1.6], [-0.6, -1.6, 8.6]])
# Inter-circuit blocks of a double-circuit tower (rows circuit 1, columns circuit 2).
Z_12_KM = np.array(
    [
        [0.048 + 0.110j, 0.048 + 0.095j, 0.048 + 0.085j],
        [0.048 + 0.100j, 0.048 + 0.105j, 0.048 + 0.092j],
        [0.048 + 0.090j, 0.048 + 0.098j, 0.048 + 0.104j],
    ]
)
C_12_NF_KM = np.array([[-0.8, -0.5, -0.3], [-0.5, -0.7, -0.5], [-0.3, -0.5, -0.8]])


def single_circuit(shunt: bool = False, lengths=(30e3, 45e3, 25e3)) -> LineCascade:
    z = Z_ABC_KM / 1e3
    # Three sections with rotated phase order, as the caller hands them over.
    perms = [[0, 1, 2], [1, 2, 0], [2, 0, 1]]
    zs = np.stack([z[np.ix_(p, p)] for p in perms])
    ys = None
    if shunt:
        y = 1j * OMEGA * C_ABC_NF_KM * 1e-12
        ys = np.stack([y[np.ix_(p, p)] for p in perms])
    return LineCascade(zs, np.array(lengths), ys)


def double_circuit(shunt: bool = False) -> LineCascade:
    z22 = Z_ABC_KM[::-1, ::-1]  # circuit 2 mirrored on the tower
    z = np.block([[Z_ABC_KM, Z_12_KM], [Z_12_KM.T, z22]]) / 1e3
    zs = np.stack([z, z, z])
    ys = None
    if shunt:
        c = np.block([[C_ABC_NF_KM, C_12_NF_KM], [C_12_NF_KM.T, C_ABC_NF_KM[::-1, ::-1]]])
        ys = np.stack([1j * OMEGA * c * 1e-12] * 3)
    return LineCascade(zs, np.array([20e3, 50e3, 30e3]), ys)


SRC_S = Source(1.5 + 18j, 2.5 + 24j)
SRC_R = Source(2.0 + 25j, 3.0 + 30j)


def line_k0(z_ohm: np.ndarray) -> tuple[complex, complex]:
    """Z1 and k0 of a 3x3 phase matrix from the mean sequence values (Fortescue [2])."""
    seq = to_sequence(z_ohm)
    z1, z0 = seq[1, 1], seq[0, 0]
    return z1, (z0 - z1) / (3 * z1)


# ------------------------------------------------------------------------------------
# Radial bolted faults on an untransposed line
# ------------------------------------------------------------------------------------


def test_bolted_ground_fault_radial_measures_self_impedance():
    # Derivation (Kirchhoff's voltage law, Fortescue's transform): fed from S only with no
    # load, the healthy phases carry no current on the line (open end at R), so the
    # faulted phase p carries I_p = I_f = I_res. The bolted fault gives V_p(F) = 0, hence
    # V_p(S) = m L Z_pp I_p and the compensated ground loop is
    #   Z = V_p / (I_p + k0 I_res) = m L Z_pp / (1 + k0)   (any k0).
    # Tolerance: relative 1e-9 (exact fault constraints, no resistance floor).
    z = Z_ABC_KM / 1e3
    line = LineCascade(z[None], np.array([80e3]))
    m = np.array([0.1, 0.37, 0.8, 1.0])
    _, k0 = line_k0(line.z_total_ohm)
    sw = solve_fault_sweep(line, SRC_S, None, v_nominal_v=V_NOM, fault_types=("AG", "BG", "CG"),
                           m=m, r_fault_ohm=np.array([0.0]))
    for f, (name, p) in enumerate((("AG", 0), ("BG", 1), ("CG", 2))):
        loops = loop_impedances(sw.v_s[f, :, 0, 0, 0], sw.i_s[f, :, 0, 0, 0], k0)
        expected = m * 80e3 * z[p, p] / (1 + k0)
        np.testing.assert_allclose(loops[name], expected, rtol=1e-9)


def test_bolted_phase_fault_radial_measures_loop_impedance():
    # Derivation (Kirchhoff): BC fault, I_b = -I_c = I, I_a = 0 on the radial line.
    #   V_b(S) - V_c(S) = m L [(Z_bb - Z_cb) - (Z_bc - Z_cc)] I = m L (Z_bb + Z_cc - 2 Z_bc) I
    # and I_b - I_c = 2 I, so Z_BC = m L (Z_bb + Z_cc - 2 Z_bc) / 2. Same for AB and CA.
    # Tolerance: relative 1e-9.
    z = Z_ABC_KM / 1e3
    line = LineCascade(z[None], np.array([80e3]))
    m = np.array([0.05, 0.5, 0.9])
    sw = solve_fault_sweep(line, SRC_S, None, v_nominal_v=V_NOM, fault_types=("AB", "BC", "CA"),
                           m=m, r_fault_ohm=np.array([0.0]))
    for f, (name, x, y) in enumerate((("AB", 0, 1), ("BC", 1, 2), ("CA", 2, 0))):
        loops = loop_impedances(sw.v_s[f, :, 0, 0, 0], sw.i_s[f, :, 0, 0, 0], 0.0)
        expected = m * 80e3 * (z[x, x] + z[y, y] - 2 * z[x, y]) / 2
        np.testing.assert_allclose(loops[name], expected, rtol=1e-9)


# ------------------------------------------------------------------------------------
# Ideally transposed line
# ------------------------------------------------------------------------------------


def _max_reach_error(sw, z1_line, k0, m):
    worst = 0.0
    for f, ft in enumerate(sw.fault_types):
        loops = loop_impedances(sw.v_s[f], sw.i_s[f], k0)
        for name in loops_for_fault(ft):
            along, react = reach_error_pct(loops[name], m[:, None, None, None], z1_line)
            worst = max(worst, np.nanmax(np.abs(along)), np.nanmax(np.abs(react)))
    return worst


def test_transposed_line_has_no_reach_error():
    # Identity: on a balanced line V_p(S) - V_p(F) = m Z1L (I_p + k0 I_res) for every
    # phase, and the meant loops have V(F) = 0 for bolted faults (Fortescue [2]), so
    # every meant loop measures m Z1L exactly, with infeed from R and load.
    # Required < 0.1 %; asserted at 1e-6 % because the identity is exact.
    z1, z0 = (0.03 + 0.30j) / 1e3, (0.16 + 0.95j) / 1e3
    zb = balanced_phase_matrix(z1, z0)
    line = LineCascade(np.stack([zb, zb]), np.array([40e3, 60e3]))
    m = np.array([0.1, 0.3, 0.55, 0.8, 1.0])
    sw = solve_fault_sweep(line, SRC_S, SRC_R, v_nominal_v=V_NOM, fault_types=FAULT_TYPES, m=m,
                           r_fault_ohm=np.array([0.0]), source_scale=np.array([0.3, 1.0, 4.0]),
                           transfer_angle_rad=np.radians([-25.0, 0.0, 25.0]))
    k0 = (z0 - z1) / (3 * z1)
    assert _max_reach_error(sw, z1 * 100e3, k0, m) < 1e-6


def test_full_transposition_cycle_balances_remote_bus_fault():
    # Identity: three equal sections with the phase order rotated through a full cycle
    # have a circulant (balanced) total Z; with series-only sections the currents are the
    # same along the line, so a bolted fault at m = 1 is measured exactly as m Z1L.
    # Tolerance 1e-6 % (the requirement is < 0.1 %).
    line = single_circuit(lengths=(30e3, 30e3, 30e3))
    z1, k0 = line_k0(line.z_total_ohm)
    m = np.array([1.0])
    sw = solve_fault_sweep(line, SRC_S, SRC_R, v_nominal_v=V_NOM, fault_types=FAULT_TYPES, m=m,
                           r_fault_ohm=np.array([0.0]), transfer_angle_rad=np.radians([15.0]))
    assert _max_reach_error(sw, z1, k0, m) < 1e-6


# ------------------------------------------------------------------------------------
# Kirchhoff's laws and power balance
# ------------------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("kind", "state", "shunt"),
    [("single", "in_service", False), ("single", "in_service", True),
     ("double", "in_service", False), ("double", "earthed", True),
     ("double", "isolated", True)],
)
def test_fault_current_is_sum_of_currents_into_fault_point(kind, state, shunt):
    # Kirchhoff's current law at the fault point; tolerance 1e-9 of the largest current.
    line = single_circuit(shunt) if kind == "single" else double_circuit(shunt)
    sw = solve_fault_sweep(line, SRC_S, SRC_R, v_nominal_v=V_NOM, fault_types=FAULT_TYPES,
                           m=np.array([0.0, 0.25, 0.5, 1.0]), r_fault_ohm=np.array([0.0, 7.0]),
                           r_phase_ohm=2.0, parallel_state=state,
                           transfer_angle_rad=np.radians([20.0]))
    scale = np.max(np.abs(sw.i_fault))
    np.testing.assert_allclose(sw.i_f_from_s + sw.i_f_from_r, sw.i_fault, rtol=0,
                               atol=1e-9 * scale)
    if not shunt:  # series-only: current is the same along each part of the line
        np.testing.assert_allclose(sw.i_s + sw.i_r, sw.i_fault, rtol=0, atol=1e-9 * scale)
        np.testing.assert_allclose(sw.i_s_parallel + sw.i_r_parallel, 0, atol=1e-9 * scale)


def _complex_power(v, i):
    return np.sum(v * np.conj(i), axis=-1)


@pytest.mark.parametrize(("kind", "state"), [("single", "in_service"),
                                             ("double", "in_service"),
                                             ("double", "earthed")])
def test_complex_power_balance(kind, state):
    # Tellegen / conservation of complex power: power delivered by the source EMFs equals
    # the complex power absorbed by source impedances, line series impedances and fault
    # resistances. Currents and impedances are taken from the results and line data
    # independently of the solver. Tolerance 1e-9 relative.
    line = single_circuit() if kind == "single" else double_circuit()
    n = line.n_conductors
    m = np.array([0.0, 0.2, 0.5, 0.85, 1.0])
    scale = np.array([[0.5, 2.0], [1.0, 1.0]])
    sw = solve_fault_sweep(line, SRC_S, SRC_R, v_nominal_v=V_NOM, fault_types=FAULT_TYPES, m=m,
                           r_fault_ohm=np.array([0.0, 5.0]), r_phase_ohm=np.array([1.0, 3.0]),
                           source_scale=scale, transfer_angle_rad=np.radians([-10.0, 30.0]),
                           parallel_state=state)
    e_s = np.asarray(sw.emf_s_v)[..., None] * np.array([1, np.exp(-2j * np.pi / 3),
                                                         np.exp(2j * np.pi / 3)])
    e_r = np.asarray(sw.emf_r_v)[..., None] * np.array([1, np.exp(-2j * np.pi / 3),
                                                         np.exp(2j * np.pi / 3)])
    par = 1.0 if state == "in_service" else 0.0
    i_src_s = sw.i_s + par * sw.i_s_parallel  # out of source S into bus S
    i_src_r = sw.i_r + par * sw.i_r_parallel
    zs = SRC_S.phase_matrix(scale[:, 0])[:, None]  # (K, 1, 3, 3)
    zr = SRC_R.phase_matrix(scale[:, 1])[:, None]
    s_emf = _complex_power(e_s, i_src_s) + _complex_power(e_r, i_src_r)
    s_src = (_complex_power((zs @ i_src_s[..., None])[..., 0], i_src_s)
             + _complex_power((zr @ i_src_r[..., None])[..., 0], i_src_r))
    edges = np.concatenate([[0], np.cumsum(line.length_m)])
    left = np.clip(m[:, None] * edges[-1] - edges[None, :-1], 0, line.length_m)
    z_left = np.einsum("ms,sij->mij", left, line.z_ohm_per_m)  # (M, n, n)
    z_right = line.z_total_ohm - z_left
    i_l = np.concatenate([sw.i_s, sw.i_s_parallel], axis=-1)[..., :n]
    i_r = np.concatenate([sw.i_r, sw.i_r_parallel], axis=-1)[..., :n]
    zl = z_left[None, :, None, None, None]
    zr_ = z_right[None, :, None, None, None]
    s_line = (_complex_power((zl @ i_l[..., None])[..., 0], i_l)
              + _complex_power((zr_ @ i_r[..., None])[..., 0], i_r))
    s_fault = _complex_power(sw.v_f, sw.i_fault)
    total = s_src + s_line + s_fault
    np.testing.assert_allclose(total, s_emf, rtol=1e-9, atol=1e-9 * np.max(np.abs(s_emf)))
    assert np.all(np.abs(s_fault.imag) <= 1e-9 * np.max(np.abs(s_emf)))  # resistors only


# ------------------------------------------------------------------------------------
# Batched solver against the per-case reference
# ------------------------------------------------------------------------------------


CASES = [("single", "in_service", False), ("single", "in_service", True)] + [
    ("double", s, sh) for s in PARALLEL_STATES + OPEN_END_STATES for sh in (False, True)
]  # OPEN_END_STATES: sequential clearing, the reference simply omits circuit 1's branch


@pytest.mark.parametrize(("kind", "state", "shunt"), CASES)
def test_batched_sweep_equals_reference(kind, state, shunt):
    # Independent formulations: chain matrices (matrix exponential) + Thevenin
    # superposition versus plain modified nodal analysis with section nodal matrices
    # from an eigendecomposition. Tolerance 1e-9 of the largest voltage (for voltages) or
    # current (for currents) of the sweep, so that exact zeros (open ends) compare sanely.
    rng = np.random.default_rng(7 + len(state) + 3 * shunt)
    line = single_circuit(shunt) if kind == "single" else double_circuit(shunt)
    m = np.concatenate([[0.0, 0.3, 1.0], rng.uniform(0, 1, 3)])  # 0.3 is a section edge
    rf = np.array([0.0, rng.uniform(1, 30)])
    rp = np.array([0.0, rng.uniform(0.5, 5)])
    scale = np.array([[1.0, 1.0], [0.4, 2.5], [0.02, 1.0]])
    delta = np.radians([-20.0, 35.0])
    sources = [(SRC_S, SRC_R), (SRC_S, None), (None, SRC_R)]
    names = ["v_s", "i_s", "i_s_parallel", "v_r", "i_r", "i_r_parallel", "v_f", "i_fault",
             "i_f_from_s", "i_f_from_r"]
    for src_s, src_r in sources:
        sw = solve_fault_sweep(line, src_s, src_r, v_nominal_v=V_NOM, fault_types=FAULT_TYPES,
                               m=m, r_fault_ohm=rf, r_phase_ohm=rp, source_scale=scale,
                               transfer_angle_rad=delta, parallel_state=state)
        v_scale = max(np.max(np.abs(getattr(sw, n))) for n in names if n.startswith("v"))
        i_scale = max(np.max(np.abs(getattr(sw, n))) for n in names if n.startswith("i"))
        for _ in range(25):
            f, i, r, k, ld = (rng.integers(len(FAULT_TYPES)), rng.integers(m.size),
                              rng.integers(rf.size), rng.integers(3), rng.integers(2))
            ref = solve_fault_single(line, src_s, src_r, v_nominal_v=V_NOM,
                                     fault_type=FAULT_TYPES[f], m=m[i], r_fault_ohm=rf[r],
                                     r_phase_ohm=rp[r], source_scale=tuple(scale[k]),
                                     transfer_angle_rad=delta[ld], parallel_state=state)
            for name in names:
                got = getattr(sw, name)[f, i, r, k, ld]
                want = getattr(ref, name)
                tol = 1e-9 * (v_scale if name.startswith("v") else i_scale)
                np.testing.assert_allclose(got, want, rtol=0, atol=tol, err_msg=name)


# ------------------------------------------------------------------------------------
# Double circuit: mutual compensation
# ------------------------------------------------------------------------------------


def test_mutual_compensation_corrects_ground_loop():
    # Identity (Kirchhoff + Fortescue): both circuits balanced, inter-circuit block
    # Z0M/3 in every entry, series-only. Between S and the fault both circuits' currents
    # are constant, so V_a(S) = m Z1L (I_a + k0 I_res + k0m I_res,par) for a bolted AG
    # fault with k0m = Z0M/(3 Z1). Compensated: error < 1e-6 % (exact). Uncompensated:
    # the parallel residual current at S flows the same way, so the relay underreaches
    # by several percent near the remote end (IEEE Std C37.113-2015, mutual coupling;
    # from memory). Asserted: |uncompensated| > 1 % and > 1e6 x |compensated|.
    z1, z0, z0m = (0.03 + 0.30j) / 1e3, (0.16 + 0.95j) / 1e3, (0.12 + 0.55j) / 1e3
    zb = balanced_phase_matrix(z1, z0)
    zm = np.full((3, 3), z0m / 3)
    z = np.block([[zb, zm], [zm, zb]])
    line = LineCascade(z[None], np.array([100e3]))
    m = np.array([0.7, 0.85, 0.95])
    sw = solve_fault_sweep(line, SRC_S, SRC_R, v_nominal_v=V_NOM, fault_types=("AG",), m=m,
                           r_fault_ohm=np.array([0.0]), transfer_angle_rad=np.radians([10.0]))
    k0, k0m = (z0 - z1) / (3 * z1), z0m / (3 * z1)
    v, i, ip = sw.v_s[0, :, 0, 0, 0], sw.i_s[0, :, 0, 0, 0], sw.i_s_parallel[0, :, 0, 0, 0]
    comp, _ = reach_error_pct(loop_impedances(v, i, k0, i_parallel=ip, k0m=k0m)["AG"], m,
                              z1 * 100e3)
    plain, _ = reach_error_pct(loop_impedances(v, i, k0)["AG"], m, z1 * 100e3)
    assert np.all(np.abs(comp) < 1e-6)
    assert np.all(np.abs(plain) > 1.0)
    assert np.all(plain < 0)  # underreach
    assert np.all(np.abs(plain) > 1e6 * np.abs(comp))


# ------------------------------------------------------------------------------------
# Sources, load flow and long-line behaviour
# ------------------------------------------------------------------------------------


def test_source_from_fault_levels_identities():
    # Definitions: |Z1| = V^2/S3ph, |2 Z1 + Z0| = 3 V^2/S1ph, angle atan(X/R)
    # (S = sqrt(3) V I, IEC 60909-0:2016 defines S"k = sqrt(3) Un I"k; from memory).
    src = Source.from_fault_levels(V_NOM, 5e9, 12.0, s1ph_va=4e9)
    assert abs(src.z1_ohm) == pytest.approx(V_NOM**2 / 5e9, rel=1e-12)
    assert src.z1_ohm.imag / src.z1_ohm.real == pytest.approx(12.0, rel=1e-12)
    assert abs(2 * src.z1_ohm + src.z0_ohm) == pytest.approx(3 * V_NOM**2 / 4e9, rel=1e-12)
    assert src.z0_ohm.imag / src.z0_ohm.real == pytest.approx(12.0, rel=1e-12)
    src2 = Source.from_fault_levels(V_NOM, 5e9, 12.0, z0_over_z1=1.5)
    assert src2.z0_ohm == pytest.approx(1.5 * src2.z1_ohm, rel=1e-12)
    # The solver reproduces the fault levels for bolted faults at the bus (m = 0, open
    # line end at R): |I3ph| = S3ph/(sqrt3 V), |I1ph| = S1ph/(sqrt3 V). Tolerance 1e-9.
    line = single_circuit()
    sw = solve_fault_sweep(line, src, None, v_nominal_v=V_NOM, fault_types=("ABC", "AG"),
                           m=np.array([0.0]), r_fault_ohm=np.array([0.0]))
    i3 = np.abs(sw.i_fault[0, 0, 0, 0, 0])
    np.testing.assert_allclose(i3, 5e9 / (math.sqrt(3) * V_NOM), rtol=1e-9)
    i1 = abs(sw.i_fault[1, 0, 0, 0, 0, 0])
    assert i1 == pytest.approx(4e9 / (math.sqrt(3) * V_NOM), rel=1e-9)


def test_transfer_angle_gives_classical_power_transfer():
    # Lossless series network: P = E_S E_R sin(delta) / X per phase, i.e.
    # P3 = V^2 sin(delta) / (X_S + X_L + X_R) (J. J. Grainger and W. D. Stevenson,
    # Power System Analysis, McGraw-Hill 1994, power-angle equation; from memory).
    # Read from the prefault results; tolerance 1e-9 relative. S leading R: P > 0.
    x1 = 0.30j / 1e3
    zb = balanced_phase_matrix(x1, 3 * x1)
    line = LineCascade(zb[None], np.array([100e3]))
    ss, sr = Source(15j, 20j), Source(25j, 30j)
    delta = np.radians([5.0, 20.0, 40.0])
    sw = solve_fault_sweep(line, ss, sr, v_nominal_v=V_NOM, fault_types=("AG",),
                           m=np.array([0.5]), r_fault_ohm=np.array([10.0]),
                           transfer_angle_rad=delta)
    p = np.sum(sw.v_s_pre * np.conj(sw.i_s_pre), axis=-1).real[0]
    expected = V_NOM**2 * np.sin(delta) / (15 + 30 + 25)
    np.testing.assert_allclose(p, expected, rtol=1e-9)


@pytest.mark.parametrize(("kind", "shunt"), [("single", False), ("single", True),
                                             ("double", True)])
def test_emfs_for_load_reproduce_power_on_balanced_line(kind, shunt):
    # Identity: on a balanced line (and balanced double circuit) the positive-sequence
    # network is exact, so the phase-domain prefault power at S equals the requested
    # P + jQ and |V_S| is nominal. Tolerance 1e-9 relative.
    z1, z0 = (0.03 + 0.30j) / 1e3, (0.16 + 0.95j) / 1e3
    y1, y0 = 1j * OMEGA * 12e-12, 1j * OMEGA * 7e-12
    zb, yb = balanced_phase_matrix(z1, z0), balanced_phase_matrix(y1, y0)
    if kind == "double":
        zm, ym = np.full((3, 3), 0.12e-3 + 0.5e-3j), np.full((3, 3), -1j * OMEGA * 0.6e-12)
        zb, yb = np.block([[zb, zm], [zm, zb]]), np.block([[yb, ym], [ym, yb]])
    line = LineCascade(np.stack([zb, zb]), np.array([60e3, 90e3]),
                       np.stack([yb, yb]) if shunt else None)
    p, q = np.array([150e6, -80e6, 0.0]), np.array([30e6, 20e6, -10e6])
    scale = np.array([0.5, 2.0])
    e_s, e_r = emfs_for_load(line, SRC_S, SRC_R, v_nominal_v=V_NOM, p_w=p, q_var=q,
                             source_scale=scale)
    sw = solve_fault_sweep(line, SRC_S, SRC_R, v_nominal_v=V_NOM, fault_types=("AG",),
                           m=np.array([0.5]), r_fault_ohm=np.array([1.0]),
                           source_scale=scale, emf_v=(e_s, e_r))
    s = np.sum(sw.v_s_pre * np.conj(sw.i_s_pre + sw.i_s_parallel_pre), axis=-1)
    np.testing.assert_allclose(s, np.broadcast_to(p + 1j * q, s.shape), rtol=0,
                               atol=1e-9 * 150e6)
    np.testing.assert_allclose(np.abs(sw.v_s_pre), V_NOM / math.sqrt(3), rtol=1e-9)


def test_open_ended_long_line_ferranti_rise():
    # Long-line equations: an open-ended line fed by an ideal source has
    # V_R = V_S / cosh(gamma l), gamma = sqrt(z1 y1) (Grainger & Stevenson, Power System
    # Analysis, 1994, long transmission line; from memory). Fault of 1e12 ohm at m = 1
    # draws a negligible current. Tolerance 1e-8 relative.
    z1, z0 = (0.02 + 0.28j) / 1e3, (0.15 + 0.9j) / 1e3
    y1, y0 = 1j * OMEGA * 13e-12, 1j * OMEGA * 8e-12
    length = 400e3
    line = LineCascade(balanced_phase_matrix(z1, z0)[None], np.array([length]),
                       balanced_phase_matrix(y1, y0)[None])
    sw = solve_fault_sweep(line, Source(1.0, 1.0), None, v_nominal_v=V_NOM,
                           fault_types=("AG",), m=np.array([1.0]),
                           r_fault_ohm=np.array([1e12]), source_scale=0.0)
    gamma = np.sqrt(z1 * y1)
    ratio = sw.v_r[0, 0, 0, 0, 0] / sw.v_s[0, 0, 0, 0, 0]
    np.testing.assert_allclose(ratio, 1 / np.cosh(gamma * length), rtol=1e-8)
    assert np.all(np.abs(ratio) > 1.05)  # the Ferranti rise is visible on 400 km


def test_fault_admittance_matches_constraints():
    # Identity: I = Y_f V must satisfy P_v V + P_i I = 0 for positive resistances; the
    # three-phase star is unearthed, so Y_f has zero row sums. Tolerance 1e-12 relative.
    rng = np.random.default_rng(3)
    v = rng.normal(size=3) + 1j * rng.normal(size=3)
    for ft in FAULT_TYPES:
        y = fault_admittance(ft, 4.0, 1.5)
        p_v, p_i = fault_constraints(ft, 4.0, 1.5)
        res = p_v @ v + p_i @ (y @ v)
        assert np.max(np.abs(res)) <= 1e-12 * np.max(np.abs(v))
    assert np.max(np.abs(fault_admittance("ABC", 0.0, 2.0).sum(axis=-1))) < 1e-12


# ------------------------------------------------------------------------------------
# Bad input
# ------------------------------------------------------------------------------------


def _sweep(**kw):
    args = dict(v_nominal_v=V_NOM, fault_types=("AG",), m=np.array([0.5]),
                r_fault_ohm=np.array([0.0]))
    line = kw.pop("line", single_circuit())
    args.update(kw)
    return solve_fault_sweep(line, SRC_S, SRC_R, **args)


def test_fault_through_a_series_branch():
    # Independent check: the reference solver stamps the branch as a nodal admittance to
    # extra nodes (MNA) where the batched solver adds it to the Thevenin matrix; relative
    # 1e-9. Identity: on a radial, series-only line with balanced sections (no source at
    # R), a fault at m equals the fault at m = 0 through the stretch 0..m as a branch.
    from relayset.physics.sequence import balanced_phase_matrix

    z1, z0 = (0.03 + 0.32j) / 1e3, (0.25 + 1.1j) / 1e3
    zm = balanced_phase_matrix(z1, z0)
    line = LineCascade(np.stack([zm, zm]), np.array([40e3, 60e3]))
    x = 0.37
    zb = balanced_phase_matrix(x * 100e3 * z1, x * 100e3 * z0)
    kw = dict(v_nominal_v=V_NOM, fault_types=FAULT_TYPES, r_fault_ohm=[0.0, 6.0],
              r_phase_ohm=[0.0, 2.0], transfer_angle_rad=[0.0])
    far = solve_fault_sweep(line, SRC_S, None, m=[x], **kw)
    branch = solve_fault_sweep(line, SRC_S, None, m=[0.0], z_branch_ohm=zb[None], **kw)
    for name in ("i_fault", "v_s", "i_s"):
        want = getattr(far, name)
        np.testing.assert_allclose(getattr(branch, name), want, rtol=0,
                                   atol=1e-9 * np.max(np.abs(want)), err_msg=name)
    dbl = double_circuit(shunt=True)
    zb2 = balanced_phase_matrix(4.0 + 30j, 12.0 + 95j)
    sw = solve_fault_sweep(dbl, SRC_S, SRC_R, m=[0.0, 1.0], z_branch_ohm=np.stack([zb2, zb2]),
                           **{**kw, "transfer_angle_rad": [0.3]})
    for f, ft in enumerate(FAULT_TYPES):
        for i, m in enumerate((0.0, 1.0)):
            ref = solve_fault_single(dbl, SRC_S, SRC_R, v_nominal_v=V_NOM, fault_type=ft, m=m,
                                     r_fault_ohm=6.0, r_phase_ohm=2.0, transfer_angle_rad=0.3,
                                     z_branch_ohm=zb2)
            for name in ("i_fault", "v_s", "i_s", "i_s_parallel", "i_r", "v_r"):
                got = getattr(sw, name)[f, i, 1, 0, 0]
                want = getattr(ref, name)
                np.testing.assert_allclose(got, want, rtol=0,
                                           atol=1e-9 * np.max(np.abs(getattr(sw, name))),
                                           err_msg=f"{ft} {m} {name}")
    with pytest.raises(InputError) as err:
        solve_fault_sweep(line, SRC_S, None, m=[0.0, 0.5], z_branch_ohm=zb[None], **kw)
    assert err.value.field == "z_branch_ohm"


def test_sequential_clearing_mirrors_between_the_ends():
    # Identity (relabelling): circuit 1 open at R on a line equals circuit 1 open at S on the
    # same line reversed, with the sources and EMFs swapped and m -> 1 - m (relative 1e-9).
    line = double_circuit(shunt=True)
    rev = LineCascade(line.z_ohm_per_m[::-1], line.length_m[::-1], line.y_s_per_m[::-1])
    m = np.array([0.0, 0.35, 1.0])
    kw = dict(v_nominal_v=V_NOM, fault_types=("AG", "BCG", "ABC"), r_fault_ohm=[0.0, 7.0])
    a = solve_fault_sweep(line, SRC_S, SRC_R, m=m, emf_v=([80e3 * np.exp(0.3j)], [76e3]),
                          parallel_state="faulted_open_at_r", **kw)
    b = solve_fault_sweep(rev, SRC_R, SRC_S, m=1 - m, emf_v=([76e3], [80e3 * np.exp(0.3j)]),
                          parallel_state="faulted_open_at_s", **kw)
    for x, y in (("v_s", "v_r"), ("i_s", "i_r"), ("i_s_parallel", "i_r_parallel"),
                 ("v_r", "v_s"), ("i_fault", "i_fault")):
        want = getattr(b, y)
        assert_rel = 1e-9 * np.max(np.abs(want))
        np.testing.assert_allclose(getattr(a, x), want, rtol=0, atol=assert_rel, err_msg=x)
    assert np.max(np.abs(a.i_r)) <= 1e-9 * np.max(np.abs(a.i_fault))  # open breaker: nothing
    np.testing.assert_allclose(a.v_r_pre, b.v_s_pre, rtol=0, atol=1e-9 * 80e3)
    with pytest.raises(InputError) as err:  # the load flow knows no sequential clearing
        emfs_for_load(line, SRC_S, SRC_R, v_nominal_v=V_NOM, p_w=[1e8], q_var=[0.0],
                      parallel_state="faulted_open_at_s")
    assert err.value.field == "parallel_state"


@pytest.mark.parametrize(
    ("kwargs", "field"),
    [
        ({"m": np.array([0.2, 1.2])}, "reach_study.fault_locations"),
        ({"m": np.array([-0.1])}, "reach_study.fault_locations"),
        ({"r_fault_ohm": np.array([5.0, -1.0])}, "reach_study.fault_resistances"),
        ({"r_phase_ohm": -2.0}, "r_phase_ohm"),
        ({"fault_types": ("AG", "AX")}, "reach_study.fault_types"),
        ({"parallel_state": "open", "line": double_circuit()}, "parallel_state"),
        ({"parallel_state": "earthed"}, "parallel_state"),
        ({"parallel_state": "faulted_open_at_s"}, "parallel_state"),  # single circuit
        ({"source_scale": np.array([1.0, -0.5])}, "source_scale"),
    ],
)
def test_bad_input_raises_input_error(kwargs, field):
    # Rule: bad user input raises InputError naming the field (helper rules).
    names = {"m": "reach_study.fault_locations", "r_fault_ohm": "reach_study.fault_resistances",
             "fault_types": "reach_study.fault_types"}
    with pytest.raises(InputError) as err:
        _sweep(field_names=names, **kwargs)
    assert err.value.field == field


def test_bad_sources_and_lines_raise_input_error():
    with pytest.raises(InputError, match="negative"):
        Source(-0.5 + 10j, 1 + 20j)
    with pytest.raises(InputError) as err:
        Source(0.5 + 10j, -1 + 20j)
    assert err.value.field == "z0_ohm"
    with pytest.raises(InputError) as err:
        solve_fault_sweep(single_circuit(), None, None, v_nominal_v=V_NOM, fault_types=("AG",),
                          m=np.array([0.5]), r_fault_ohm=np.array([0.0]))
    assert err.value.field == "source_s"
    with pytest.raises(InputError) as err:
        LineCascade(np.zeros((2, 4, 4)), np.array([1.0, 2.0]))
    assert err.value.field == "z_ohm_per_m"
    with pytest.raises(InputError) as err:
        LineCascade(np.stack([Z_ABC_KM]), np.array([0.0]))
    assert err.value.field == "length_m"
    with pytest.raises(InputError) as err:  # infinite bus with a bolted fault on it
        solve_fault_sweep(single_circuit(), SRC_S, None, v_nominal_v=V_NOM, fault_types=("AG",),
                          m=np.array([0.0]), r_fault_ohm=np.array([0.0]), source_scale=0.0)
    assert err.value.field == "source_scale"
    with pytest.raises(InputError, match="did you mean"):
        fault_admittance("ACG", 1.0, 1.0)


# ------------------------------------------------------------------------------------
# Chain matrices, closed-form fault currents, random lines against the reference
# ------------------------------------------------------------------------------------


def _random_line(rng, n, shunt, n_sec=3):
    """Random reciprocal line: symmetric Z with dominant self terms, Maxwell-like Y."""
    zs, ys = [], []
    for _ in range(n_sec):
        r = rng.uniform(0.02, 0.1, (n, n))
        x = rng.uniform(0.1, 0.3, (n, n))
        z = (r + r.T) / 2 + 1j * (x + x.T) / 2 + np.diag(rng.uniform(0.05, 0.1, n)
                                                          + 1j * rng.uniform(0.2, 0.3, n))
        c = -rng.uniform(0.3, 1.5, (n, n))
        c = (c + c.T) / 2
        np.fill_diagonal(c, rng.uniform(8, 10, n))
        zs.append(z / 1e3)
        ys.append(1j * OMEGA * c * 1e-12)
    lengths = rng.uniform(5e3, 120e3, n_sec)
    return LineCascade(np.stack(zs), lengths, np.stack(ys) if shunt else None)


@pytest.mark.parametrize("n", [3, 6])
def test_chain_matrices_match_scipy_expm(n):
    # Independent check (scipy.linalg.expm, a general-purpose library): the modal chain
    # matrix of a uniform section equals exp([[0, Z l], [Y l, 0]]) [Paul 2008, ch. 7]. The
    # batched Pade fallback is checked the same way. Tolerance: 1e-12 of each block's norm.
    from scipy.linalg import expm

    from relayset.physics.chain import _pade_section, section_chain_matrices

    rng = np.random.default_rng(11 + n)
    line = _random_line(rng, n, True)
    lengths = np.array([[0.0] * 3, [1.0, 2e3, 5e4], [4e5, 1e5, 3e5]])
    phi = section_chain_matrices(line.z_ohm_per_m, line.y_s_per_m, lengths)
    for s in range(3):
        pade = _pade_section(line.z_ohm_per_m[s], line.y_s_per_m[s], lengths[:, s])
        for k in range(3):
            ln = lengths[k, s]
            big = np.block([[np.zeros((n, n)), line.z_ohm_per_m[s] * ln],
                            [line.y_s_per_m[s] * ln, np.zeros((n, n))]])
            want = expm(big)
            for got in (phi[k, s], pade[k]):
                for rows in (slice(0, n), slice(n, 2 * n)):
                    for cols in (slice(0, n), slice(n, 2 * n)):
                        ref = want[rows, cols]
                        scale = max(np.max(np.abs(ref)), 1e-300)
                        np.testing.assert_allclose(got[rows, cols], ref, rtol=0,
                                                   atol=1e-12 * scale)


def test_fault_currents_satisfy_the_fault_constraints():
    # Independent formulations: the closed-form currents with V_F = V - Z_th I must satisfy
    # P_v V_F + P_i I = 0 of fault_constraints (Kirchhoff), for random Thevenin data,
    # bolted and resistive. Tolerance 1e-12 of |V|.
    from relayset.physics.faults import fault_currents

    rng = np.random.default_rng(5)
    a = rng.normal(size=(4, 3, 3)) + 1j * rng.normal(size=(4, 3, 3))
    z_th = a @ np.swapaxes(a, -1, -2) + 3 * np.eye(3)  # symmetric, well conditioned
    v = rng.normal(size=(4, 3, 2)) + 1j * rng.normal(size=(4, 3, 2))
    for rf, rp in ((0.0, 0.0), (7.0, 0.0), (0.0, 3.0), (2.5, 1.5)):
        for ft in FAULT_TYPES:
            cur = fault_currents(ft, np.moveaxis(z_th, 0, -1)[..., None],
                                 np.moveaxis(v, 0, 1), np.full((4, 1), rf),
                                 np.full((4, 1), rp))  # phase axes first
            i = np.stack([np.zeros((4, 2)) if c is None else c for c in cur], axis=-2)
            v_f = v - z_th @ i
            p_v, p_i = fault_constraints(ft, rf, rp)
            res = p_v @ v_f + p_i @ i
            assert np.max(np.abs(res)) <= 1e-12 * np.max(np.abs(v)), (ft, rf, rp)


@pytest.mark.parametrize(("n", "shunt", "state"), [(3, True, "in_service"),
                                                   (6, True, "in_service"),
                                                   (6, True, "earthed"),
                                                   (6, False, "isolated")])
def test_sweep_equals_reference_on_random_lines(n, shunt, state):
    # Random lines, locations and resistances: the batched sweep (modal chain matrices,
    # closed-form fault currents) against the per-case modified nodal analysis
    # (tests/reference_solver.py). Tolerance 1e-9 of the largest voltage or current.
    rng = np.random.default_rng(100 + n + shunt + len(state))
    line = _random_line(rng, n, shunt, n_sec=int(rng.integers(1, 5)))
    m = np.concatenate([[0.0, 1.0], rng.uniform(0, 1, 4)])
    rf = np.array([0.0, rng.uniform(1, 40)])
    rp = np.array([0.0, rng.uniform(0.1, 8)])
    scale = np.array([[1.0, 1.0], [rng.uniform(0.1, 3), rng.uniform(0.1, 3)]])
    delta = np.radians(rng.uniform(-40, 40, 2))
    sw = solve_fault_sweep(line, SRC_S, SRC_R, v_nominal_v=V_NOM, fault_types=FAULT_TYPES,
                           m=m, r_fault_ohm=rf, r_phase_ohm=rp, source_scale=scale,
                           transfer_angle_rad=delta, parallel_state=state)
    names = ["v_s", "i_s", "i_s_parallel", "v_r", "i_r", "i_r_parallel", "v_f", "i_fault",
             "i_f_from_s", "i_f_from_r"]
    v_scale = max(np.max(np.abs(getattr(sw, k))) for k in names if k.startswith("v"))
    i_scale = max(np.max(np.abs(getattr(sw, k))) for k in names if k.startswith("i"))
    for _ in range(40):
        f, i, r, k, ld = (rng.integers(len(FAULT_TYPES)), rng.integers(m.size),
                          rng.integers(2), rng.integers(2), rng.integers(2))
        ref = solve_fault_single(line, SRC_S, SRC_R, v_nominal_v=V_NOM,
                                 fault_type=FAULT_TYPES[f], m=m[i], r_fault_ohm=rf[r],
                                 r_phase_ohm=rp[r], source_scale=tuple(scale[k]),
                                 transfer_angle_rad=delta[ld], parallel_state=state)
        for name in names:
            tol = 1e-9 * (v_scale if name.startswith("v") else i_scale)
            np.testing.assert_allclose(getattr(sw, name)[f, i, r, k, ld], getattr(ref, name),
                                       rtol=0, atol=tol, err_msg=name)


def test_selected_outputs_equal_the_full_sweep():
    # Consistency: asking only for the relay-end results gives the same numbers (1e-12
    # relative, different matrix products) and leaves the others out.
    line = double_circuit(True)
    kw = dict(v_nominal_v=V_NOM, fault_types=FAULT_TYPES, m=np.linspace(0, 1, 7),
              r_fault_ohm=np.array([0.0, 9.0]), transfer_angle_rad=np.radians([12.0]))
    full = solve_fault_sweep(line, SRC_S, SRC_R, **kw)
    part = solve_fault_sweep(line, SRC_S, SRC_R, outputs=("v_r", "i_r_parallel"), **kw)
    for name in ("v_r", "i_r_parallel", "i_fault"):
        np.testing.assert_allclose(getattr(part, name), getattr(full, name), rtol=1e-12,
                                   atol=1e-12 * np.max(np.abs(getattr(full, name))))
    assert part.v_s is None and part.i_f_from_s is None
    with pytest.raises(InputError) as err:
        solve_fault_sweep(line, SRC_S, SRC_R, outputs=("v_x",), **kw)
    assert err.value.field == "outputs"


def test_modal_and_pade_paths_give_the_same_sweep(monkeypatch):
    # The Pade fallback (forced by a zero condition limit) and the modal path are two
    # exact evaluations of the same chain matrices; sweeps agree to 1e-11 relative.
    import relayset.physics.chain as chain

    line = single_circuit(True)
    kw = dict(v_nominal_v=V_NOM, fault_types=FAULT_TYPES, m=np.linspace(0, 1, 5),
              r_fault_ohm=np.array([0.0, 4.0]))
    modal = solve_fault_sweep(line, SRC_S, SRC_R, **kw)
    monkeypatch.setattr(chain, "MODAL_COND_MAX", 0.0)
    pade = solve_fault_sweep(line, SRC_S, SRC_R, **kw)
    for name in ("v_s", "i_s", "v_r", "i_r", "i_fault"):
        ref = getattr(modal, name)
        np.testing.assert_allclose(getattr(pade, name), ref, rtol=0,
                                   atol=1e-11 * np.max(np.abs(ref)))
