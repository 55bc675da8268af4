r"""Earth-return correction terms for overhead conductors above homogeneous earth.

Self and mutual series impedances per unit length of conductors *i*, *j* above earth are

.. math::

    Z_{ii} = R_i + j\frac{\omega\mu_0}{2\pi}\ln\frac{2h_i}{GMR_i} + \Delta Z_{ii}, \qquad
    Z_{ij} = j\frac{\omega\mu_0}{2\pi}\ln\frac{D_{ij}}{d_{ij}} + \Delta Z_{ij}

where :math:`D_{ij}` is the distance from *i* to the image of *j* and :math:`\Delta Z` is the
earth-return correction computed here. Three models are offered, chosen by name:

``carson``
    Carson's infinite series [1]_, summed until the terms vanish, and its asymptotic expansion
    for large Carson parameter (``r > 18``), where the alternating series loses precision (both
    agree with direct integration to better than 5e-7 relative there), both as given by
    Carson [1]_ and restated in [2]_.
``carson_truncated``
    The first term of P and the first two of Q ("modified Carson" [3]_): the form the
    distribution test feeders and most handbook tables use. Good only for small r (low
    frequency, close to the ground relative to the skin depth of the earth).
``deri``
    Deri's complex-depth image [4]_: the earth is replaced by a perfect conductor at the
    complex depth :math:`p = \sqrt{\rho / (j\omega\mu_0)}`.

References
----------
.. [1] J. R. Carson, "Wave propagation in overhead wires with ground return," Bell Syst. Tech.
   J., vol. 5, pp. 539-554, 1926.
.. [2] P. M. Anderson, Analysis of Faulted Power Systems. New York: IEEE Press, 1995,
   ch. 4 (Carson's series for P and Q; section from memory).
.. [3] W. H. Kersting, Distribution System Modeling and Analysis, 4th ed. Boca Raton: CRC
   Press, 2017, ch. 4.
.. [4] A. Deri, G. Tevan, A. Semlyen and A. Castanheira, "The complex ground return plane: a
   simplified model for homogeneous and multi-layer earth return," IEEE Trans. Power App.
   Syst., vol. PAS-100, no. 8, pp. 3686-3693, Aug. 1981.
"""

from __future__ import annotations

import math

import numpy as np

from relayset.physics.constants import EULER_GAMMA, MU0_H_PER_M
from relayset.physics.earth_models import EARTH_MODELS

#: Above this Carson parameter the asymptotic expansion replaces the power series.
_R_ASYMPTOTIC: float = 18.0
_Q0: float = 0.5 * (0.5 - EULER_GAMMA)  # the "-0.0386" of the handbooks, exactly
_C2: float = 1.25 - EULER_GAMMA + math.log(2.0)  # 1.3659315


def list_earth_models() -> list[str]:
    """Names of the earth-return models, for input validation and ``relayset models``."""
    return list(EARTH_MODELS)


def carson_parameter(d_image_m, frequency_hz, resistivity_ohm_m):
    r"""Carson's parameter :math:`r = D\sqrt{\omega\mu_0/\rho}` [dimensionless].

    Parameters
    ----------
    d_image_m : array_like
        Distance from conductor *i* to the image of conductor *j* [m].
    frequency_hz : float
        Frequency [Hz].
    resistivity_ohm_m : float
        Earth resistivity [ohm·m].
    """
    omega = 2 * math.pi * frequency_hz
    return np.asarray(d_image_m, dtype=float) * np.sqrt(omega * MU0_H_PER_M / resistivity_ohm_m)


def carson_pq_series(r, theta):
    r"""Carson's P and Q by the full power series (accurate for r up to about 10-20).

    Parameters
    ----------
    r : array_like
        Carson parameter [dimensionless], > 0.
    theta : array_like
        Angle between the image line and the vertical [rad], 0 <= theta < pi/2.

    Returns
    -------
    (P, Q) : tuple of ndarray

    Notes
    -----
    With :math:`b_1 = \sqrt2/6`, :math:`b_2 = 1/16`, :math:`|b_i| = |b_{i-2}|/(i(i+2))`
    (the sign of :math:`b_i` is + for i = 1..4, - for 5..8, and so on), :math:`c_2 = 1.3659315`,
    :math:`c_i = c_{i-2} + 1/i + 1/(i+2)` and :math:`d_i = \pi b_i / 4` [2]_.
    """
    r, theta = np.broadcast_arrays(np.asarray(r, float), np.asarray(theta, float))
    lnr = np.log(r)
    p = np.full(r.shape, math.pi / 8)
    q = _Q0 + 0.5 * (math.log(2.0) - lnr)
    b = {1: math.sqrt(2) / 6, 2: 1.0 / 16}
    c = {2: _C2}
    term_floor = 1e-17
    for i in range(1, 200):
        if i > 2:
            # The sign of b_i itself flips after every four terms (+ for i = 1..4, - for 5..8).
            sign = 1.0 if ((i - 1) // 4) % 2 == 0 else -1.0
            b[i] = sign * abs(b[i - 2]) / (i * (i + 2))
            if i % 2 == 0:
                c[i] = c[i - 2] + 1.0 / i + 1.0 / (i + 2)
        ri = r**i
        cos_i = np.cos(i * theta)
        if i % 2 == 1:
            t = b[i] * ri * cos_i
            p += (-1.0) ** ((i + 1) // 2) * t
            q += t
            size = np.abs(t)
        else:
            d_i = math.pi / 4 * b[i]
            log_term = b[i] * ((c[i] - lnr) * ri * cos_i + theta * ri * np.sin(i * theta))
            plain = d_i * ri * cos_i
            if i % 4 == 2:
                p += log_term
                q -= plain
            else:
                p -= plain
                q -= log_term
            size = np.abs(log_term) + np.abs(plain)
        if i > 8 and np.all(size < term_floor * np.maximum(1.0, np.abs(q))):
            break
    return p, q


def carson_pq_asymptotic(r, theta):
    r"""Carson's P and Q by the asymptotic expansion for large r [2]_.

    .. math::

        P \approx \frac{\cos\theta}{\sqrt2 r} - \frac{\cos2\theta}{r^2}
        + \frac{\cos3\theta}{\sqrt2 r^3} + \frac{3\cos5\theta}{\sqrt2 r^5}
        - \frac{45\cos7\theta}{\sqrt2 r^7}, \qquad
        Q \approx \frac{\cos\theta}{\sqrt2 r} - \frac{\cos3\theta}{\sqrt2 r^3}
        + \frac{3\cos5\theta}{\sqrt2 r^5} + \frac{45\cos7\theta}{\sqrt2 r^7}
    """
    r = np.asarray(r, float)
    theta = np.asarray(theta, float)
    s2 = math.sqrt(2.0)
    c1, c2, c3 = np.cos(theta), np.cos(2 * theta), np.cos(3 * theta)
    c5, c7 = np.cos(5 * theta), np.cos(7 * theta)
    p = c1 / (s2 * r) - c2 / r**2 + c3 / (s2 * r**3) + 3 * c5 / (s2 * r**5) - 45 * c7 / (s2 * r**7)
    q = c1 / (s2 * r) - c3 / (s2 * r**3) + 3 * c5 / (s2 * r**5) + 45 * c7 / (s2 * r**7)
    return p, q


def _geometry(h_i_m, h_j_m, x_ij_m):
    h_i = np.asarray(h_i_m, float)
    h_j = np.asarray(h_j_m, float)
    x = np.abs(np.asarray(x_ij_m, float))
    d_image = np.hypot(h_i + h_j, x)
    theta = np.arctan2(x, h_i + h_j)
    return h_i, h_j, x, d_image, theta


def earth_correction_ohm_per_m(
    model: str,
    h_i_m,
    h_j_m,
    x_ij_m,
    frequency_hz: float,
    resistivity_ohm_m: float,
    layers: tuple[float, float] | None = None,
) -> np.ndarray:
    r"""Earth-return correction :math:`\Delta Z_{ij}` [ohm/m] by the named model.

    .. math:: \Delta Z_{ij} = \frac{\omega\mu_0}{\pi}\,(P + jQ)

    for the Carson models, and
    :math:`\Delta Z_{ij} = j\frac{\omega\mu_0}{2\pi}\ln(D'_{ij}/D_{ij})` with
    :math:`D'_{ij} = \sqrt{(h_i + h_j + 2p)^2 + x_{ij}^2}` for Deri's.

    Parameters
    ----------
    model : str
        One of :data:`EARTH_MODELS`.
    h_i_m, h_j_m : array_like
        Heights of the two conductors above ground [m], > 0 (for a self term, equal).
    x_ij_m : array_like
        Horizontal separation [m].
    frequency_hz : float
        Frequency [Hz].
    resistivity_ohm_m : float
        Earth resistivity [ohm·m]; for ``two_layer`` the upper layer's.
    layers : (float, float), optional
        For ``two_layer`` only: resistivity of the lower half-space [ohm·m] and thickness of
        the upper layer [m].

    Returns
    -------
    ndarray of complex
        The correction, broadcast over the inputs [ohm/m].
    """
    if model not in EARTH_MODELS:
        raise ValueError(f"unknown earth model {model!r}; valid: {', '.join(EARTH_MODELS)}")
    if (model == "two_layer") != (layers is not None):
        raise ValueError("layers (lower resistivity, thickness) go with two_layer only")
    if model == "two_layer":
        from relayset.physics.earth_two_layer import two_layer_correction_ohm_per_m

        return two_layer_correction_ohm_per_m(h_i_m, h_j_m, x_ij_m, frequency_hz,
                                              resistivity_ohm_m, *layers)
    omega = 2 * math.pi * frequency_hz
    h_i, h_j, x, d_image, theta = _geometry(h_i_m, h_j_m, x_ij_m)
    if model == "deri":
        p = np.sqrt(resistivity_ohm_m / (1j * omega * MU0_H_PER_M))
        d_complex = np.sqrt((h_i + h_j + 2 * p) ** 2 + x**2)
        return 1j * omega * MU0_H_PER_M / (2 * math.pi) * np.log(d_complex / d_image)
    r = carson_parameter(d_image, frequency_hz, resistivity_ohm_m)
    if model == "carson_truncated":
        p_val = np.full(r.shape, math.pi / 8)
        q_val = _Q0 + 0.5 * np.log(2.0 / r)
    else:
        small = r <= _R_ASYMPTOTIC
        p_val = np.empty(r.shape)
        q_val = np.empty(r.shape)
        if np.any(small):
            p_val[small], q_val[small] = carson_pq_series(r[small], theta[small])
        if np.any(~small):
            p_val[~small], q_val[~small] = carson_pq_asymptotic(r[~small], theta[~small])
    return omega * MU0_H_PER_M / math.pi * (p_val + 1j * q_val)
