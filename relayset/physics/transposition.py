r"""Transposition: phase-domain matrices of a line whose phases change positions along it.

A section with phase order :math:`o` (``o[k]`` = index of the phase hung at position *k*)
has the phase-domain matrix :math:`Z^{(s)} = T_s Z_{pos} T_s^T` with the permutation
:math:`T_s[o_k, k] = 1`. For series quantities the whole line is the length-weighted sum of
its sections; for the average per unit length

.. math:: \bar Z = \sum_s \frac{\ell_s}{L} T_s Z_{pos} T_s^T

The ideal cycle is three equal sections with the phases rotated cyclically, which makes
:math:`\bar Z` circulant-symmetric, so its sequence matrix is diagonal.
"""

from __future__ import annotations

import numpy as np


def permutation_matrix(order: list[int] | tuple[int, ...]) -> np.ndarray:
    """T with T[order[k], k] = 1: maps position-ordered quantities to phase order."""
    n = len(order)
    t = np.zeros((n, n))
    t[list(order), list(range(n))] = 1.0
    return t


def to_phase_order(z_pos: np.ndarray, order) -> np.ndarray:
    """Phase-domain matrix of one section from its position-ordered matrix."""
    t = permutation_matrix(order)
    return t @ z_pos @ t.T


def section_matrices(z_pos: np.ndarray, orders) -> np.ndarray:
    """Stack of phase-ordered matrices, one per section, shape (S, n, n)."""
    return np.stack([to_phase_order(z_pos, o) for o in orders])


def weighted_average(z_sections: np.ndarray, lengths_m) -> np.ndarray:
    """Length-weighted average of per-unit-length section matrices."""
    w = np.asarray(lengths_m, float)
    return np.tensordot(w / w.sum(), z_sections, axes=1)


def cyclic_orders(order: list[int], n_circuits: int = 1) -> list[list[int]]:
    """The three orders of an ideal transposition cycle starting from ``order``.

    ``order`` covers all conductors (3 per circuit); each circuit's three phases are rotated
    one position per section, all circuits together.
    """
    out = []
    for shift in range(3):
        rotated: list[int] = []
        for c in range(n_circuits):
            block = order[3 * c : 3 * c + 3]
            rotated.extend(block[(k - shift) % 3] for k in range(3))
        out.append(rotated)
    return out
