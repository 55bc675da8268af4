r"""Earth-return correction over two-layer earth: Carson's integral with a layered earth.

An upper layer of resistivity :math:`\rho_1` and thickness :math:`d` lies over a lower
half-space of resistivity :math:`\rho_2` (both with :math:`\mu_0`, displacement currents
neglected, as in Carson's homogeneous case). The correction to the perfect-earth impedance
of conductors *i*, *j* at heights :math:`h_i, h_j` and horizontal separation :math:`x_{ij}` is
Carson's integral [1]_ with the homogeneous :math:`\alpha` replaced by the surface value of
the layered earth [2]_ [3]_:

.. math::

    \Delta Z_{ij} = \frac{j\omega\mu_0}{\pi}\int_0^\infty
    \frac{e^{-(h_i+h_j)\lambda}\cos(x_{ij}\lambda)}{\lambda + \alpha_e(\lambda)}\,d\lambda,
    \qquad
    \alpha_e = \alpha_1\,\frac{\alpha_2 + \alpha_1\tanh(\alpha_1 d)}
                              {\alpha_1 + \alpha_2\tanh(\alpha_1 d)},
    \qquad \alpha_k = \sqrt{\lambda^2 + j\omega\mu_0/\rho_k}.

:math:`\alpha_e` is the logarithmic derivative of the vector potential at the earth's surface,
carried up through the layer from :math:`\alpha_2` in the half-space (continuity of the
potential and of its derivative at the interface, equal permeabilities). It is exactly
:math:`\alpha_1` when :math:`\rho_1 = \rho_2` (Carson's integrand), tends to :math:`\alpha_2`
as :math:`d \to 0` and to :math:`\alpha_1` as :math:`d \to \infty`.

The integral is evaluated numerically with ``scipy.integrate.quad_vec`` (all matrix elements
at once) in the scaled variable :math:`t = \lambda D_{ij}`, :math:`D_{ij}` the distance to the
image, so that every element's integrand decays on the scale :math:`t \sim 1`.
:math:`\tanh` is written as :math:`(1 - e^{-2z})/(1 + e^{-2z})` with
:math:`\operatorname{Re} z \ge 0`, which cannot overflow.

References
----------
.. [1] J. R. Carson, "Wave propagation in overhead wires with ground return," Bell Syst. Tech.
   J., vol. 5, pp. 539-554, 1926.
.. [2] E. D. Sunde, Earth Conduction Effects in Transmission Systems. New York: Van Nostrand,
   1949 (Dover reprint 1968), ch. 4, two-layer earth (chapter from memory).
.. [3] M. Nakagawa, A. Ametani and K. Iwamoto, "Further studies on wave propagation in
   overhead lines with earth return: impedance of stratified earth," Proc. IEE, vol. 120,
   no. 12, pp. 1521-1528, Dec. 1973 (the formulation from memory; volume and pages as other
   papers' reference lists give them); their stratified-earth impedance with two layers,
   equal permeabilities and no displacement current.
"""

from __future__ import annotations

import math

import numpy as np

from relayset.physics.constants import MU0_H_PER_M

#: Relative accuracy asked of the quadrature (the engine's Carson forms: about 5e-7).
_EPSREL: float = 1e-9


def surface_alpha(lam, omega: float, rho_upper: float, rho_lower: float, thickness_m: float):
    r"""The layered earth's :math:`\alpha_e(\lambda)` [1/m] (see the module notes).

    Parameters
    ----------
    lam : array_like
        Spatial frequency :math:`\lambda` [1/m], >= 0.
    omega : float
        Angular frequency [rad/s].
    rho_upper, rho_lower : float
        Resistivity of the upper layer and of the lower half-space [ohm·m].
    thickness_m : float
        Thickness of the upper layer [m], >= 0.
    """
    lam = np.asarray(lam)
    a1 = np.sqrt(lam * lam + 1j * omega * MU0_H_PER_M / rho_upper)
    a2 = np.sqrt(lam * lam + 1j * omega * MU0_H_PER_M / rho_lower)
    e = np.exp(-2.0 * a1 * thickness_m)
    tanh = (1.0 - e) / (1.0 + e)
    return a1 * (a2 + a1 * tanh) / (a1 + a2 * tanh)


def two_layer_correction_ohm_per_m(
    h_i_m,
    h_j_m,
    x_ij_m,
    frequency_hz: float,
    rho_upper_ohm_m: float,
    rho_lower_ohm_m: float,
    thickness_m: float,
) -> np.ndarray:
    r"""Earth-return correction :math:`\Delta Z_{ij}` over two-layer earth [ohm/m].

    Parameters
    ----------
    h_i_m, h_j_m : array_like
        Heights of the two conductors above ground [m], > 0.
    x_ij_m : array_like
        Horizontal separation [m].
    frequency_hz : float
        Frequency [Hz].
    rho_upper_ohm_m : float
        Resistivity of the upper layer [ohm·m].
    rho_lower_ohm_m : float
        Resistivity of the lower half-space [ohm·m].
    thickness_m : float
        Thickness of the upper layer [m].

    Returns
    -------
    ndarray of complex
        The correction, broadcast over the inputs [ohm/m].
    """
    from scipy.integrate import quad_vec

    h_i, h_j, x = np.broadcast_arrays(np.asarray(h_i_m, float), np.asarray(h_j_m, float),
                                      np.abs(np.asarray(x_ij_m, float)))
    shape = h_i.shape
    big_h = (h_i + h_j).ravel()
    xs = x.ravel()
    # Each distinct (h_i + h_j, x) is integrated once (a symmetric matrix has half of them).
    pairs, inverse = np.unique(np.stack([big_h, xs], axis=1), axis=0, return_inverse=True)
    hh, xx = pairs[:, 0], pairs[:, 1]
    d = np.hypot(hh, xx)
    cos_t, sin_t = hh / d, xx / d
    omega = 2 * math.pi * frequency_hz

    def integrand(t):
        # quad_vec maps [0, inf) onto [0, 1): far out the exponentials underflow to their
        # true value, zero.
        with np.errstate(under="ignore"):
            lam = t / d
            alpha = surface_alpha(lam, omega, rho_upper_ohm_m, rho_lower_ohm_m, thickness_m)
            return np.exp(-t * cos_t) * np.cos(t * sin_t) / (t + d * alpha)

    j_val, _err = quad_vec(integrand, 0.0, np.inf, epsrel=_EPSREL, epsabs=1e-15, norm="max",
                           limit=2000)
    dz = 1j * omega * MU0_H_PER_M / math.pi * np.asarray(j_val)
    return dz[np.ravel(inverse)].reshape(shape)
