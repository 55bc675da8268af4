"""Identities the line-parameter engine must satisfy whatever the geometry.

Each check is an identity of the mathematics (no external data), with its tolerance.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from numpy.testing import assert_allclose

from relayset.api import study_parameters
from relayset.physics import impedance, transposition
from relayset.physics.conductor import (
    bundle_equivalent_gmr_m,
    bundle_offsets_m,
    gmr_from_stranding,
)
from relayset.physics.sequence import balanced_phase_matrix, from_sequence, to_sequence
from relayset.physics.shunt import potential_coefficients_m_per_f

DEMOS = ["ashcombe_brenwick_132kv.toml", "kessler_oxbow_115kv.toml",
         "elsford_fallowby_230kv_double.toml", "greyholt_ivel_400kv_twin.toml"]


@pytest.mark.parametrize("model", ["carson", "carson_truncated", "deri"])
def test_physics_matrices_reciprocal_before_any_symmetrisation(model):
    # Reciprocity: the series impedance and potential coefficients of passive conductors are
    # symmetric (Carson 1926 and Maxwell; Glover, Overbye & Sarma, 6th ed., sec. 4.7 and
    # 4.11). Checked on the physics functions themselves, before the study layer averages
    # Z with its transpose, for an irregular geometry (unequal heights, a twin bundle, two
    # earth wires) to 1e-12 of the largest element; the Kron and bundle reductions keep it.
    rng = np.random.default_rng(7)
    x = np.array([-7.1, -6.7, 0.3, 6.9, -2.5, 3.1])
    y = np.array([18.2, 18.2, 24.9, 17.6, 31.0, 30.2]) + rng.uniform(-0.3, 0.3, 6)
    gmr = np.array([0.012, 0.012, 0.011, 0.0125, 0.004, 0.005])
    r = np.array([6.0e-5, 6.0e-5, 7.0e-5, 5.5e-5, 4.0e-4, 3.5e-4])
    z = impedance.primitive_impedance_ohm_per_m(x, y, gmr, r, 50.0, 250.0, model)
    tol = dict(rtol=0, atol=1e-12 * np.abs(z).max())
    assert_allclose(z, z.T, **tol)
    zk = impedance.kron_reduce(z, 4)
    assert_allclose(zk, zk.T, **tol)
    zb = impedance.bundle_reduce(zk, [[0, 1], [2], [3]])
    assert_allclose(zb, zb.T, **tol)
    pc = potential_coefficients_m_per_f(x, y, gmr * 1.3)
    assert_allclose(pc, pc.T, rtol=0, atol=1e-12 * np.abs(pc).max())


@pytest.mark.parametrize("name", DEMOS)
def test_ideal_cycle_gives_diagonal_z012(demo_path, name):
    # A full cycle of three equal sections makes each circuit's Zabc circulant, so its
    # Z012 is diagonal (Fortescue); off-diagonals below 1e-12 of the diagonal.
    p = study_parameters(demo_path(name)).parameters
    z012 = p.arrangements["ideal_cycle"].z012_ohm_per_m
    for c in range(len(p.circuits)):
        blk = z012[3 * c:3 * c + 3, 3 * c:3 * c + 3]
        off = blk - np.diag(np.diag(blk))
        assert np.abs(off).max() < 1e-12 * np.abs(blk).max()
        # and its unbalance factors vanish
        assert abs(p.arrangements["ideal_cycle"].unbalance_m0[c]) < 1e-12
        assert abs(p.arrangements["ideal_cycle"].unbalance_m2[c]) < 1e-12


def test_sequence_diagonal_is_arrangement_independent(demo_path):
    # Averaging over a transposition only removes off-diagonal sequence terms: the
    # diagonal of Z012 is the same for every arrangement (identity of the transform).
    p = study_parameters(demo_path("ashcombe_brenwick_132kv.toml")).parameters
    diags = [np.diag(a.z012_ohm_per_m) for a in p.arrangements.values()]
    for d in diags[1:]:
        assert_allclose(d, diags[0], rtol=1e-12, atol=0)


def test_relabelling_phases_is_invariant(variant, demo_path):
    # Calling the phases R/Y/B instead of A/B/C changes no number.
    base = study_parameters(demo_path("ashcombe_brenwick_132kv.toml")).parameters

    def relabel(d):
        m = {"A": "R", "B": "Y", "C": "B"}
        d["circuits"][0]["phase_labels"] = ["R", "Y", "B"]
        for s in d["line"]["sections"]:
            s["order"] = [m[x] for x in s["order"]]

    other = study_parameters(variant("ashcombe_brenwick_132kv.toml", relabel)).parameters
    for k in base.arrangements:
        assert_allclose(base.arrangements[k].zabc_ohm_per_m,
                        other.arrangements[k].zabc_ohm_per_m, rtol=1e-14, atol=0)
    assert base.circuits[0].k0 == other.circuits[0].k0


def test_one_section_plan_equals_untransposed(variant, demo_path):
    # A plan of one section is the untransposed line (identity of the weighting).
    def one(d):
        d["line"]["sections"] = [{"length": "80 km", "order": ["A", "B", "C"]}]

    p = study_parameters(variant("ashcombe_brenwick_132kv.toml", one)).parameters
    a, b = p.arrangements["actual_plan"], p.arrangements["untransposed"]
    assert np.array_equal(a.zabc_ohm_per_m, b.zabc_ohm_per_m)
    # and equals leaving the plan out altogether
    def none(d):
        d["line"].pop("sections")

    q = study_parameters(variant("ashcombe_brenwick_132kv.toml", none)).parameters
    assert_allclose(q.arrangements["actual_plan"].zabc_ohm_per_m, a.zabc_ohm_per_m,
                    rtol=1e-14, atol=0)


def test_swapping_positions_in_the_order_permutes_the_matrix():
    # T Z T^T with a permutation: element (i, j) of the phase matrix is element
    # (pos(i), pos(j)) of the position matrix.
    rng = np.random.default_rng(1)
    z = rng.normal(size=(3, 3)) + 1j * rng.normal(size=(3, 3))
    z = z + z.T
    order = [2, 0, 1]  # phase 2 at position 0, phase 0 at position 1, phase 1 at position 2
    zp = transposition.to_phase_order(z, order)
    pos = {ph: k for k, ph in enumerate(order)}
    for i in range(3):
        for j in range(3):
            assert zp[i, j] == z[pos[i], pos[j]]


def test_fortescue_round_trip_and_balanced_matrix():
    # A Z A^-1 round trip is exact to round-off; a balanced element maps to diag(Z0, Z1, Z1).
    zb = balanced_phase_matrix(0.1 + 0.4j, 0.3 + 1.2j)
    z012 = to_sequence(zb)
    # absolute 1e-15 ohm: zero off-diagonals have no relative scale
    assert_allclose(z012, np.diag([0.3 + 1.2j, 0.1 + 0.4j, 0.1 + 0.4j]), rtol=0, atol=1e-15)
    assert_allclose(from_sequence(z012), zb, rtol=0, atol=1e-15)


def test_bundle_reduction_agrees_with_equivalent_gmr():
    # For a symmetric twin/quad bundle, bundle reduction of explicit subconductors agrees with
    # one conductor of equivalent GMR (Glover, Overbye & Sarma, 6th ed., sec. 4.6) to within
    # the small difference of subconductor-to-other-phase distances: 0.1 % on Z.
    for count, spacing in ((2, 0.4), (3, 0.45), (4, 0.45)):
        offs = bundle_offsets_m(count, spacing)
        centres = np.array([[-11.0, 20.0], [0.0, 20.0], [11.0, 20.0]])
        xs = np.concatenate([c[0] + offs[:, 0] for c in centres])
        ys = np.concatenate([c[1] + offs[:, 1] for c in centres])
        gmr, r = 0.0115, 6.6e-5
        zsub = impedance.primitive_impedance_ohm_per_m(
            xs, ys, [gmr] * len(xs), [r] * len(xs), 50.0, 100.0, "carson")
        groups = [list(range(k * count, (k + 1) * count)) for k in range(3)]
        zb = impedance.bundle_reduce(zsub, groups)
        geq = bundle_equivalent_gmr_m(gmr, count, spacing)
        zeq = impedance.primitive_impedance_ohm_per_m(
            centres[:, 0], centres[:, 1], [geq] * 3, [r / count] * 3, 50.0, 100.0, "carson")
        assert_allclose(zb, zeq, rtol=1e-3, atol=0)


def test_stranding_gmr_factors():
    # GMR/radius of all-aluminium concentric strandings. 7 wires, hand-derived from the
    # definition (geometric mean of all 49 distances, wire radius a, own GMR a e^-1/4; the
    # six outer wires each see the centre and two neighbours at 2a, two at 2a sqrt 3, one at
    # 4a): GMR = a (e^-7/4 2^6 (2^3 12 4)^6)^(1/49) = 2.1767 a, over the outer radius 3a:
    # 0.72557 (Glover, Overbye & Sarma, 6th ed., sec. 4.6, GMR of a composite conductor).
    # 19 and 37 wires: 0.7577 and 0.7678, as tabulated in handbooks (e.g. Westinghouse,
    # Electrical Transmission and Distribution Reference Book, 4th ed., 1964, ch. 3; from
    # memory, table number not recorded). 4-digit agreement.
    seven = math.exp((-7 / 4 + 6 * math.log(2) + 6 * math.log(2**3 * 12 * 4)) / 49) / 3
    assert seven == pytest.approx(0.72557, abs=5e-6)
    for layers, outer, factor in (((1, 6), 3, seven), ((1, 6, 12), 5, 0.7577),
                                  ((1, 6, 12, 18), 7, 0.7678)):
        g = gmr_from_stranding(layers, 0.5, 0.0)
        assert g / (outer * 0.5) == pytest.approx(factor, abs=1e-4)


def test_acsr_26_7_gmr_against_published():
    # 556.5 kcmil 26/7 ACSR "Dove": published GMR 0.0313 ft (Kersting, Distribution System
    # Modeling and Analysis, App. A). Wire diameters 0.1463 in (Al) and 0.1138 in (steel)
    # from the ASTM B232 construction (from memory). The geometric mean over the aluminium
    # wires, steel carrying no current, gives it to the published digits (±0.0001 ft).
    g = gmr_from_stranding((10, 16), 0.1463 * 0.0254 / 2, 1.5 * 0.1138 * 0.0254)
    assert g / 0.3048 == pytest.approx(0.0313, abs=1e-4)
