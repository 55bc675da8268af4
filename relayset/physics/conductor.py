r"""Conductor internal impedance: AC resistance at temperature, GMR from stranding, bundles.

The internal inductance of a conductor is carried by its geometric mean radius (GMR): the
self term :math:`j\omega\mu_0/(2\pi)\ln(2h/GMR)` then includes it. The resistance is the AC
resistance at the operating temperature.

References
----------
.. [1] IEC 60889:1987, Hard-drawn aluminium wire for overhead line conductors (temperature
   coefficient of resistance of aluminium, 0.00403 1/K at 20 degC).
.. [2] J. D. Glover, T. J. Overbye and M. S. Sarma, Power System Analysis and Design, 6th ed.
   Cengage, 2017, sec. 4.4-4.6 (GMR of stranded conductors and bundles).
.. [3] S. Ramo, J. R. Whinnery and T. Van Duzer, Fields and Waves in Communication
   Electronics, 3rd ed. Wiley, 1994, sec. 5.12 (skin effect in a round wire).
.. [4] M. Abramowitz and I. A. Stegun, Handbook of Mathematical Functions. Washington, DC:
   NBS, 1964, eq. 9.1.10 (ascending series of J_n).
"""

from __future__ import annotations

import math

import numpy as np

from relayset.physics.constants import MU0_H_PER_M

#: GMR of a solid round wire of radius a is a·exp(-1/4).
SOLID_GMR_FACTOR: float = math.exp(-0.25)

#: Aluminium wire counts per layer, innermost first, for common stranding codes.
#: Standard concentric lay (each layer adds six wires for equal diameters; ACSR aluminium
#: layers over a steel core follow the published constructions). Source: the construction
#: tables of ASTM B231/B231M (all-aluminium) and ASTM B232/B232M (ACSR); IEC 61089 /
#: EN 50182 use the same lays. Rows entered from memory, not checked against the standards.
#: Each layer holds more wires than the one beneath it (tests/test_physics_models.py).
ALUMINIUM_LAYERS: dict[tuple[int, int], tuple[int, ...]] = {
    (6, 1): (6,),
    (7, 0): (1, 6),
    (19, 0): (1, 6, 12),
    (37, 0): (1, 6, 12, 18),
    (61, 0): (1, 6, 12, 18, 24),
    (18, 1): (6, 12),
    (24, 7): (10, 14),
    (26, 7): (10, 16),
    (30, 7): (12, 18),
    (45, 7): (9, 15, 21),
    (48, 7): (12, 15, 21),
    (54, 7): (12, 18, 24),
    (54, 19): (12, 18, 24),
    (72, 7): (9, 15, 21, 27),
}


def resistance_at_temperature(
    r_ref_ohm_per_m: float, t_ref_c: float, t_c: float, alpha_per_k: float
) -> float:
    r"""Linear temperature correction of resistance.

    .. math:: R(T) = R(T_{ref})\,\frac{1 + \alpha(T - 20)}{1 + \alpha(T_{ref} - 20)}

    Parameters
    ----------
    r_ref_ohm_per_m : float
        Resistance at the reference temperature [ohm/m].
    t_ref_c, t_c : float
        Reference and operating temperature [degC].
    alpha_per_k : float
        Temperature coefficient of resistance at 20 degC [1/K].
    """
    return r_ref_ohm_per_m * (1 + alpha_per_k * (t_c - 20.0)) / (1 + alpha_per_k * (t_ref_c - 20.0))


def skin_effect_ratio(r_dc_ohm_per_m: float, radius_m: float, frequency_hz: float) -> float:
    r"""AC/DC resistance ratio of a solid round conductor with the given DC resistance.

    Exact Bessel-function solution for a round wire [3]_, using the resistivity implied by the
    DC resistance over the full circle :math:`\rho = R_{dc}\pi a^2`:

    .. math::

        \frac{Z}{R_{dc}} = \frac{ka}{2}\,\frac{J_0(ka)}{J_1(ka)}, \qquad
        k = \sqrt{-j\omega\mu_0/\rho}

    For steel-reinforced conductors this treats the whole cross-section as one material; it
    is a small correction (1-3 % at 50/60 Hz for large conductors). A measured or tabulated
    AC resistance should be preferred when known.

    Parameters
    ----------
    r_dc_ohm_per_m : float
        DC resistance [ohm/m].
    radius_m : float
        Outside radius [m].
    frequency_hz : float
        Frequency [Hz].
    """
    rho = r_dc_ohm_per_m * math.pi * radius_m**2
    k = np.sqrt(-1j * 2 * math.pi * frequency_hz * MU0_H_PER_M / rho)
    ka = k * radius_m
    if abs(ka) < 1e-6:
        return 1.0
    ratio = ka / 2 * _bessel_j0_over_j1(complex(ka))
    return float(ratio.real)


#: Largest |ka| summed by the series. The skin-effect argument lies on the -45 degree ray,
#: where z^2 is imaginary and the terms do not cancel: against scipy.special.jv the ratio
#: agrees to 1e-14 up to |z| = 15 (tests/test_physics_models.py).
_SERIES_MAX = 15.0


def _bessel_j0_over_j1(z: complex) -> complex:
    r"""J0(z)/J1(z) by the ascending series [4]_, scipy beyond the series' range.

    .. math:: J_n(z) = \sum_{m \ge 0} \frac{(-z^2/4)^m}{m!\,(m+n)!}\,(z/2)^n

    Summed here because importing scipy.special costs about 0.2 s per process, and
    conductors at power frequency have |ka| of a few units.
    """
    if abs(z) > _SERIES_MAX:
        from scipy.special import jv  # heavy import: only for very large conductors

        return complex(jv(0, z) / jv(1, z))
    q = -z * z / 4
    term0 = term1 = 1.0 + 0j  # m = 0 terms of J0 and of J1/(z/2)
    j0 = j1 = term0
    m = 0
    while True:
        m += 1
        term0 *= q / (m * m)
        term1 *= q / (m * (m + 1))
        j0 += term0
        j1 += term1
        if abs(term0) < 1e-17 * abs(j0) and abs(term1) < 1e-17 * abs(j1):
            break
    return j0 / (j1 * z / 2)


def gmr_from_stranding(
    layers: tuple[int, ...], wire_radius_m: float, core_radius_m: float
) -> float:
    r"""GMR of the current-carrying wires of a stranded conductor, from its geometry.

    The geometric mean of all pairwise distances between the :math:`n` wires (each wire's
    own GMR :math:`a e^{-1/4}`), assuming the current divides equally between the wires of
    the conducting material and the steel core carries none [2]_:

    .. math:: GMR = \Big(\prod_{i}\prod_{j} d_{ij}\Big)^{1/n^2}

    Parameters
    ----------
    layers : tuple of int
        Wire count per conducting layer, innermost first; a leading 1 means a centre wire.
    wire_radius_m : float
        Radius of one conducting wire [m].
    core_radius_m : float
        Radius of the (non-conducting) core under the first layer [m]; 0 for all-aluminium.
    """
    points = []
    radius = core_radius_m
    for k, count in enumerate(layers):
        if k == 0 and count == 1 and core_radius_m == 0:
            points.append(0j)
            radius = wire_radius_m
            continue
        center = radius + wire_radius_m
        offset = 0.0 if k % 2 == 0 else math.pi / count
        angles = offset + 2 * math.pi * np.arange(count) / count
        points.extend(center * np.exp(1j * angles))
        radius = center + wire_radius_m
    z = np.asarray(points)
    d = np.abs(z[:, None] - z[None, :])
    np.fill_diagonal(d, wire_radius_m * SOLID_GMR_FACTOR)
    return float(np.exp(np.mean(np.log(d))))


def bundle_offsets_m(count: int, spacing_m: float, orientation_rad: float = 0.0) -> np.ndarray:
    """Subconductor positions relative to the bundle centre, on a regular polygon.

    Parameters
    ----------
    count : int
        Subconductors per phase (1 to 8).
    spacing_m : float
        Distance between adjacent subconductors [m].
    orientation_rad : float
        Rotation of the polygon [rad]. At 0 a twin bundle is horizontal, a triple bundle has
        one subconductor at the top, a quad bundle is a square with horizontal sides.

    Returns
    -------
    (count, 2) ndarray
        Horizontal and vertical offsets [m].
    """
    if count == 1:
        return np.zeros((1, 2))
    radius = spacing_m / (2 * math.sin(math.pi / count))
    if count == 2:
        start = 0.0
    elif count % 2 == 1:
        start = math.pi / 2
    else:
        start = math.pi / count
    angles = start + orientation_rad + 2 * math.pi * np.arange(count) / count
    return np.column_stack([radius * np.cos(angles), radius * np.sin(angles)])


def bundle_equivalent_gmr_m(gmr_m: float, count: int, spacing_m: float) -> float:
    r"""Equivalent GMR of a symmetric bundle [2]_.

    .. math:: GMR_{eq} = \left(n \cdot GMR \cdot A^{n-1}\right)^{1/n}, \quad
        A = \frac{s}{2\sin(\pi/n)}

    Parameters
    ----------
    gmr_m : float
        GMR of one subconductor [m].
    count : int
        Number of subconductors.
    spacing_m : float
        Adjacent subconductor spacing [m].
    """
    if count == 1:
        return gmr_m
    a = spacing_m / (2 * math.sin(math.pi / count))
    return float((count * gmr_m * a ** (count - 1)) ** (1.0 / count))
