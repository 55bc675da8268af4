"""Identities the line-parameter engine must satisfy whatever the geometry.

Each check is an identity of the mathematics (no external data), with its tolerance.
"""

from __future__ import annotations

import numpy as np
import pytest

from relayset.api import study_parameters
from relayset.physics import impedance, transposition
from relayset.physics.conductor import (
    bundle_equivalent_gmr_m,
    bundle_offsets_m,
    gmr_from_stranding,
)
from relayset.physics.sequence import balanced_phase_matrix, from_sequence, to_sequence

DEMOS = ["ashcombe_brenwick_132kv.toml", "kessler_oxbow_115kv.toml",
         "elsford_fallowby_230kv_double.toml", "greyholt_ivel_400kv_twin.toml"]


@pytest.mark.parametrize("name", DEMOS)
def test_matrices_symmetric(demo_path, name):
    # Reciprocity: Z and Y of a passive line are symmetric (to round-off, 1e-12 relative).
    p = study_parameters(demo_path(name)).parameters
    for arr in p.arrangements.values():
        for m in (arr.zabc_ohm_per_m, arr.yabc_s_per_m):
            assert np.allclose(m, m.T, rtol=0, atol=1e-12 * np.abs(m).max())


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
        assert np.allclose(d, diags[0], rtol=1e-12)


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
        assert np.allclose(base.arrangements[k].zabc_ohm_per_m,
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
    assert np.allclose(q.arrangements["actual_plan"].zabc_ohm_per_m, a.zabc_ohm_per_m,
                       rtol=1e-14)


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
    assert np.allclose(z012, np.diag([0.3 + 1.2j, 0.1 + 0.4j, 0.1 + 0.4j]), atol=1e-15)
    assert np.allclose(from_sequence(z012), zb, atol=1e-15)


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
        assert np.allclose(zb, zeq, rtol=1e-3)


def test_stranding_gmr_factors():
    # GMR/radius of all-aluminium concentric strandings: 7 wires 0.7256, 19 wires 0.7577,
    # 37 wires 0.7678 (J. D. Glover et al., Power System Analysis and Design, Table 4.x
    # footnote; also in the Westinghouse T&D Reference Book; from memory). 4-digit agreement.
    for layers, outer, factor in (((1, 6), 3, 0.7256), ((1, 6, 12), 5, 0.7577),
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
