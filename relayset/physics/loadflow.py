r"""Prefault load flow: source EMFs that deliver a given P + jQ at the relay end.

The load flow is solved in the positive-sequence network of the line (each circuit reduced
to its positive-sequence self and mutual impedance and admittance per metre, Fortescue
[1]_); the phase-domain fault solver then uses the EMFs it returns.

References
----------
.. [1] C. L. Fortescue, "Method of symmetrical co-ordinates applied to the solution of
   polyphase networks," Trans. AIEE, vol. 37, pp. 1027-1140, 1918.
"""

from __future__ import annotations

import math
from collections.abc import Mapping

import numpy as np

from relayset.errors import InputError
from relayset.physics.chain import chain_products, element_fault_chain_products
from relayset.physics.network import (
    LineCascade,
    Source,
    _check_scale,
    _check_state,
    _name,
)
from relayset.physics.sequence import to_sequence


def emfs_for_load(
    line: LineCascade,
    source_s: Source,
    source_r: Source,
    *,
    v_nominal_v: float,
    p_w: np.ndarray | float,
    q_var: np.ndarray | float,
    source_scale: np.ndarray | float = 1.0,
    parallel_state: str = "in_service",
    field_names: Mapping[str, str] | None = None,
) -> tuple[np.ndarray, np.ndarray]:
    """EMFs that give three-phase power P + jQ into the line at S with V_S at nominal.

    Assumption: the prefault state is computed in the positive-sequence network only
    (each circuit reduced to its positive-sequence self and mutual impedance and
    admittance per metre, [1]_); on an untransposed line the phase-domain solution then
    gives a slightly unbalanced V_S and a power close to, not exactly, P + jQ. With
    circuit 2 out of service it is left out of the load flow. V_S is the angle reference.

    Parameters
    ----------
    line : LineCascade
    source_s, source_r : Source
        Both sources are needed to carry load.
    v_nominal_v : float
        Nominal line-to-line voltage [V]; V_S = v_nominal_v/sqrt(3) at angle 0.
    p_w, q_var : (L,) arrays
        Three-phase active [W] and reactive [var] power into the line at S.
    source_scale : (K,) or (K, 2) array
        Source cases as in :func:`~relayset.physics.network.solve_fault_sweep` [1].
    parallel_state : str
        Circuit 2 state.

    Returns
    -------
    e_s, e_r : (K, L) complex arrays
        Phase-A EMF phasors of the two sources [V], for ``emf_v`` of
        :func:`~relayset.physics.network.solve_fault_sweep`.
    """
    fn = field_names
    _check_state(line, parallel_state, fn)
    if source_s is None or source_r is None:
        raise InputError("a load flow needs sources at both ends",
                         field=_name("source_r", fn), value=None)
    if not (math.isfinite(v_nominal_v) and v_nominal_v > 0):
        raise InputError("nominal voltage must be positive", field=_name("v_nominal_v", fn),
                         value=v_nominal_v)
    scale = _check_scale(source_scale, fn)
    p, q = np.broadcast_arrays(np.atleast_1d(np.asarray(p_w, float)),
                               np.atleast_1d(np.asarray(q_var, float)))
    if p.ndim != 1 or not (np.all(np.isfinite(p)) and np.all(np.isfinite(q))):
        raise InputError("load powers must be finite 1-D lists", field=_name("p_w", fn),
                         value=p.tolist())
    n_c = 2 if (line.n_conductors == 6 and parallel_state == "in_service") else 1
    z1 = _positive_sequence(line.z_ohm_per_m, n_c)
    y1 = None if line.y_s_per_m is None else _positive_sequence(line.y_s_per_m, n_c)
    if line.elements:  # series capacitor banks in the line
        z_el = np.concatenate([_positive_sequence(e.z_ohm[None], n_c) for e in line.elements])
        phi = element_fault_chain_products(z1, y1, line.length_m, np.array([1.0]),
                                           np.array([e.at for e in line.elements]), z_el)[0][0]
    else:
        phi = chain_products(z1, y1, line.length_m[None, :], reverse=False)[0]
    a_, b_, c_, d_ = phi[:n_c, :n_c], phi[:n_c, n_c:], phi[n_c:, :n_c], phi[n_c:, n_c:]
    b_inv = np.linalg.inv(b_)
    y11, y12 = d_ @ b_inv, c_ - d_ @ b_inv @ a_  # current into the line at S
    y21, y22 = -b_inv, b_inv @ a_  # current into the line at R
    u = np.ones(n_c)
    v_s = v_nominal_v / math.sqrt(3)
    i_tot = np.conj((p + 1j * q) / (3 * v_s))  # (L,)
    v_r = (i_tot - (u @ y11 @ u) * v_s) / (u @ y12 @ u)
    i_r = (u @ y21 @ u) * v_s + (u @ y22 @ u) * v_r
    e_s = v_s + source_s.z1_ohm * scale[:, 0, None] * i_tot[None, :]
    e_r = v_r[None, :] + source_r.z1_ohm * scale[:, 1, None] * i_r[None, :]
    return e_s, e_r


def _positive_sequence(mat: np.ndarray, n_c: int) -> np.ndarray:
    """(S, n_c, n_c) positive-sequence self and mutual terms of the circuits' 3x3 blocks."""
    out = np.empty((mat.shape[0], n_c, n_c), dtype=complex)
    for i in range(n_c):
        for j in range(n_c):
            out[:, i, j] = to_sequence(mat[:, 3 * i:3 * i + 3, 3 * j:3 * j + 3])[:, 1, 1]
    return out
