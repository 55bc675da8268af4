"""Chain matrices of the line to each fault with memory bounded in the number of sections:
the same numbers as the plain product over every section part (the unchunked computation),
from the chain matrices up to a whole reach study of a line with hundreds of sections."""

from __future__ import annotations

import numpy as np
import pytest
from route_sections import route_sections
from test_network import _random_line

from relayset.api import study_reach
from relayset.physics import chain, network


def _plain(z, y, length_m, m):
    """The unchunked computation: every section's part for every fault, (M, S, 2n, 2n),
    multiplied out section by section (chain_products of the S- and R-side parts)."""
    left, right = chain.split_lengths(length_m, m)
    return (chain.chain_products(z, y, left, reverse=False),
            chain.chain_products(z, y, right, reverse=True))


def _repeated_line(n: int, shunt: bool):
    """A random line of 17 sections, some repeating others' matrices exactly (as the phase
    orders of a transposed line do), and fault locations including every section boundary
    and both buses."""
    line = _random_line(np.random.default_rng(40 + n), n, shunt, n_sec=7)
    pick = [0, 1, 2, 3, 4, 5, 6, 0, 1, 2, 0, 1, 2, 3, 4, 5, 6]
    z = line.z_ohm_per_m[pick]
    y = None if line.y_s_per_m is None else line.y_s_per_m[pick]
    length_m = np.concatenate([line.length_m, line.length_m[:3], line.length_m])
    edges = np.cumsum(length_m) / length_m.sum()
    m = np.unique(np.concatenate([np.linspace(0.0, 1.0, 401), edges, [0.0, 0.85, 1.0]]))
    return z, y, length_m, m


@pytest.mark.parametrize("block", [chain.SPLIT_BLOCK_PARTS, 17])
@pytest.mark.parametrize(("n", "shunt"), [(3, True), (6, True), (3, False), (6, False)])
def test_fault_chains_equal_the_plain_product_bit_for_bit(n, shunt, block, monkeypatch):
    # Identity: prefix products of the whole sections and the cut section alone are the same
    # products in the same order as multiplying every part (absent parts are exact
    # identities), so the matrices are equal exactly, also when the faults are split into
    # blocks of a few locations.
    monkeypatch.setattr(chain, "SPLIT_BLOCK_PARTS", block)
    z, y, length_m, m = _repeated_line(n, shunt)
    want_s, want_r = _plain(z, y, length_m, m)
    got_s, got_r = chain.fault_chain_products(z, y, length_m, m)
    np.testing.assert_array_equal(got_s, want_s)
    np.testing.assert_array_equal(got_r, want_r)


def test_fault_chains_on_the_pade_path_match_to_rounding(monkeypatch):
    # Identity on the fallback for ill-conditioned modes (every section forced onto it):
    # the Pade scaling follows the largest part of each batch, which differs between the
    # two groupings, so the matrices agree to rounding: 1e-12 of each matrix's largest entry.
    monkeypatch.setattr(chain, "MODAL_COND_MAX", 0.0)
    z, y, length_m, m = _repeated_line(6, True)
    want_s, want_r = _plain(z, y, length_m, m)
    got_s, got_r = chain.fault_chain_products(z, y, length_m, m)
    for got, want in ((got_s, want_s), (got_r, want_r)):
        scale = np.max(np.abs(want), axis=(1, 2), keepdims=True)
        np.testing.assert_allclose(got / scale, want / scale, rtol=0, atol=1e-12)


def _unchunked(monkeypatch):
    """Make the solver form the chain matrices the plain way (the unchunked computation)."""
    monkeypatch.setattr(network, "fault_chain_products", _plain)


@pytest.mark.parametrize("name", ["elsford_fallowby_230kv_double.toml",
                                  "ashcombe_brenwick_132kv.toml"])
def test_reach_study_of_many_sections_equals_the_unchunked_computation(name, variant,
                                                                         monkeypatch):
    # Identity: a route of 300 sections with shunt capacitance (double and single circuit)
    # gives the same reach study, number for number, as the plain product over every part.
    path = variant(name, lambda d: route_sections(d, 300))
    got = study_reach(path).reach_study.to_dict()
    _unchunked(monkeypatch)
    want = study_reach(path).reach_study.to_dict()
    np.testing.assert_equal(got, want)  # exact; NaN (loops that see nothing) equals NaN
