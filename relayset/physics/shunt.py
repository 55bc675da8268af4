r"""Shunt capacitance of overhead conductors by Maxwell's potential coefficients with images.

.. math::

    P_{ii} = \frac{1}{2\pi\varepsilon_0}\ln\frac{2h_i}{r_i}, \qquad
    P_{ij} = \frac{1}{2\pi\varepsilon_0}\ln\frac{D_{ij}}{d_{ij}}, \qquad
    C = P^{-1}

The earth is a perfect conductor for the electric field at power frequency. Earthed
conductors (shield wires, grounded at towers) are eliminated from :math:`C`; insulated
conductors at floating potential carry no charge and are removed from :math:`P`.

References
----------
.. [1] W. H. Kersting, Distribution System Modeling and Analysis, 4th ed. CRC Press, 2017,
   sec. 5.1-5.2.
.. [2] J. D. Glover, T. J. Overbye and M. S. Sarma, Power System Analysis and Design, 6th ed.
   Cengage, 2017, sec. 4.11.
"""

from __future__ import annotations

import math

import numpy as np

from relayset.physics.constants import EPS0_F_PER_M


def potential_coefficients_m_per_f(x_m, y_m, radius_m) -> np.ndarray:
    """Maxwell potential-coefficient matrix [m/F].

    Parameters
    ----------
    x_m, y_m : array_like, shape (n,)
        Position and height of each conductor [m].
    radius_m : array_like, shape (n,)
        Outside radius (or bundle equivalent radius) of each conductor [m].
    """
    x = np.asarray(x_m, float)
    y = np.asarray(y_m, float)
    rad = np.asarray(radius_m, float)
    dx = x[:, None] - x[None, :]
    d_direct = np.hypot(dx, y[:, None] - y[None, :])
    d_image = np.hypot(dx, y[:, None] + y[None, :])
    np.fill_diagonal(d_direct, rad)
    return np.log(d_image / d_direct) / (2 * math.pi * EPS0_F_PER_M)


def capacitance_f_per_m(p: np.ndarray, n_keep: int, floating: list[int] | None = None):
    """Capacitance matrix of the first ``n_keep`` conductors [F/m].

    Parameters
    ----------
    p : (n, n) ndarray
        Potential coefficients [m/F], kept conductors first.
    n_keep : int
        Conductors kept (phase conductors).
    floating : list of int, optional
        Indices (>= n_keep) of insulated conductors at floating potential; the rest are earthed.
    """
    floating = floating or []
    keep = [i for i in range(p.shape[0]) if i not in set(floating)]
    c = np.linalg.inv(p[np.ix_(keep, keep)])
    return c[:n_keep, :n_keep]


def shunt_admittance_s_per_m(x_m, y_m, radius_m, n_keep: int, frequency_hz: float) -> np.ndarray:
    """Shunt admittance matrix jωC of the first ``n_keep`` conductors, others earthed [S/m]."""
    c = capacitance_f_per_m(potential_coefficients_m_per_f(x_m, y_m, radius_m), n_keep)
    return 1j * 2 * math.pi * frequency_hz * c


def bundle_reduce_capacitance(c: np.ndarray, groups: list[list[int]]) -> np.ndarray:
    """Bundle reduction of a capacitance matrix: bonded subconductors share one voltage.

    Charges add and voltages are equal, so :math:`C_{red} = G^T C G` with the incidence matrix G.
    """
    n = c.shape[-1]
    g = np.zeros((n, len(groups)))
    for k, members in enumerate(groups):
        g[members, k] = 1.0
    return g.T @ c @ g
