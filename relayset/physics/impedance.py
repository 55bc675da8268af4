r"""Series impedance matrices of overhead conductors: primitive matrix, Kron and bundle reduction.

References
----------
.. [1] W. H. Kersting, Distribution System Modeling and Analysis, 4th ed. CRC Press, 2017,
   sec. 4.1-4.2 (primitive matrix and Kron reduction).
.. [2] G. Kron, Tensor Analysis of Networks. New York: Wiley, 1939.
.. [3] J. Arrillaga and N. R. Watson, Computer Modelling of Electrical Power Systems, 2nd ed.
   Chichester: Wiley, 2001, ch. 2 (bundled conductors; chapter from memory).
"""

from __future__ import annotations

import math

import numpy as np

from relayset.physics.constants import MU0_H_PER_M
from relayset.physics.earth import earth_correction_ohm_per_m


def primitive_impedance_ohm_per_m(
    x_m,
    y_m,
    gmr_m,
    r_ohm_per_m,
    frequency_hz: float,
    resistivity_ohm_m: float,
    earth_model: str = "carson",
    earth_layers: tuple[float, float] | None = None,
) -> np.ndarray:
    r"""Primitive series impedance matrix of n conductors above earth [ohm/m].

    .. math::

        Z_{ii} = R_i + j\frac{\omega\mu_0}{2\pi}\ln\frac{2h_i}{GMR_i} + \Delta Z_{ii},\quad
        Z_{ij} = j\frac{\omega\mu_0}{2\pi}\ln\frac{D_{ij}}{d_{ij}} + \Delta Z_{ij}

    Parameters
    ----------
    x_m, y_m : array_like, shape (n,)
        Horizontal position and (average) height above ground of each conductor [m].
    gmr_m : array_like, shape (n,)
        Geometric mean radius of each conductor [m].
    r_ohm_per_m : array_like, shape (n,)
        AC resistance of each conductor at its operating temperature [ohm/m].
    frequency_hz : float
        System frequency [Hz].
    resistivity_ohm_m : float
        Earth resistivity [ohm·m].
    earth_model : str
        Name of the earth-return model (see :func:`relayset.physics.earth.list_earth_models`).
    earth_layers : (float, float), optional
        With ``two_layer``: lower resistivity [ohm·m] and upper-layer thickness [m].

    Returns
    -------
    (n, n) complex ndarray
        Symmetric primitive impedance matrix [ohm/m].
    """
    x = np.asarray(x_m, float)
    y = np.asarray(y_m, float)
    gmr = np.asarray(gmr_m, float)
    r = np.asarray(r_ohm_per_m, float)
    omega = 2 * math.pi * frequency_hz
    dx = x[:, None] - x[None, :]
    d_direct = np.hypot(dx, y[:, None] - y[None, :])
    d_image = np.hypot(dx, y[:, None] + y[None, :])
    np.fill_diagonal(d_direct, gmr)
    z = 1j * omega * MU0_H_PER_M / (2 * math.pi) * np.log(d_image / d_direct)
    z += earth_correction_ohm_per_m(
        earth_model, y[:, None], y[None, :], dx, frequency_hz, resistivity_ohm_m, earth_layers
    )
    z[np.diag_indices_from(z)] += r
    return z


def kron_reduce(z: np.ndarray, n_keep: int) -> np.ndarray:
    r"""Eliminate the conductors after the first ``n_keep`` (held at zero voltage) [2]_.

    .. math:: Z_{red} = Z_{pp} - Z_{pe} Z_{ee}^{-1} Z_{ep}

    Parameters
    ----------
    z : (..., n, n) ndarray
        Impedance (or potential-coefficient) matrix, kept conductors first.
    n_keep : int
        Number of conductors kept.
    """
    z = np.asarray(z)
    if z.shape[-1] == n_keep:
        return z.copy()
    zpp = z[..., :n_keep, :n_keep]
    zpe = z[..., :n_keep, n_keep:]
    zep = z[..., n_keep:, :n_keep]
    zee = z[..., n_keep:, n_keep:]
    return zpp - zpe @ np.linalg.solve(zee, zep)


def bundle_reduce(z: np.ndarray, groups: list[list[int]]) -> np.ndarray:
    r"""Reduce subconductors that share one voltage to one equivalent conductor each [3]_.

    Subconductors of a bundle are bonded at every spacer, so they share the phase voltage and
    their currents add. With :math:`Y = Z^{-1}` and the incidence matrix :math:`C` (1 where a
    subconductor belongs to a group), :math:`Z_{red} = (C^T Y C)^{-1}`.

    Parameters
    ----------
    z : (n, n) complex ndarray
        Series impedance of all subconductors (earth wires already eliminated) [ohm/m].
    groups : list of list of int
        Indices of the subconductors of each equivalent conductor, in output order.
    """
    n = z.shape[-1]
    c = np.zeros((n, len(groups)))
    for k, members in enumerate(groups):
        c[members, k] = 1.0
    y = np.linalg.inv(z)
    return np.linalg.inv(c.T @ y @ c)
