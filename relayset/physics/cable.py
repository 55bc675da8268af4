r"""Series impedance and shunt admittance of buried single-core cables, with sheath bonding.

Each cable is a solid round core, its insulation, a tubular metallic sheath (or a wire
screen taken as the tube of the same cross-section) and an outer jacket, buried in
homogeneous earth. The formulation is Ametani's [1]_: loop impedances of the core-sheath and
sheath-earth loops from the internal impedances of the core and of the tubular sheath
(Schelkunoff's Bessel-function formulas [2]_), the insulation impedances, and the
earth-return impedance of buried conductors by Pollaczek's integral [3]_ (evaluated
numerically here, no closed-form approximation). The shunt admittance comes from the two
insulation layers; the earth screens the cables from each other. The bonding of the sheaths
then gives the matrix of the cores alone, which the line's chain model takes like an
overhead section's:

- ``both_ends``: sheaths earthed at both ends and taken at earth potential all along: the
  sheaths are eliminated by Kron reduction (return through the sheaths and the earth);
- ``single_point``: sheaths earthed at one end only carry no current: the core submatrix
  (return through the earth only; no earth continuity conductor is modelled);
- ``cross_bonded``: ideal cross-bonding [4]_: three equal minor sections per major section,
  the sheaths rotated at each cross-bonding point and earthed at the major-section ends. Over
  a major section each sheath circuit runs once through every position of its circuit, so its
  impedances are the averages over the three positions; the sheath circuits are then
  eliminated by Kron reduction (return through the sheath circuits and the earth). With
  unequal minor sections of given lengths the major section is the cascade of its three
  minor sections, the sheaths rotated at each joint (:func:`cross_bonded_cascade`): their
  series impedances in the sheath circuits' variables add, each minor section weighted by
  its length; equal lengths give the ideal average.

References
----------
.. [1] A. Ametani, "A general formulation of impedance and admittance of cables," IEEE
   Trans. Power App. Syst., vol. PAS-99, no. 3, pp. 902-910, 1980.
.. [2] S. A. Schelkunoff, "The electromagnetic theory of coaxial transmission lines and
   cylindrical shields," Bell Syst. Tech. J., vol. 13, pp. 532-579, 1934.
.. [3] F. Pollaczek, "Über das Feld einer unendlich langen wechselstromdurchflossenen
   Einfachleitung," Elektrische Nachrichtentechnik, vol. 3, no. 9, pp. 339-359, 1926.
.. [4] H. W. Dommel, EMTP Theory Book, 2nd ed. Vancouver: Microtran Power System Analysis
   Corp., 1992, ch. 4 (cross-bonded cables; chapter from memory).
.. [5] B. Gustavsen, J. A. Martinez and D. Durbak, "Parameter determination for modeling
   system transients - Part II: Insulated cables," IEEE Trans. Power Del., vol. 20, no. 3,
   pp. 2045-2050, 2005 (core resistivity from the DC resistance; semiconducting screens by
   a corrected insulation permittivity).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from relayset.physics.constants import EPS0_F_PER_M, MU0_H_PER_M
from relayset.physics.impedance import kron_reduce

BONDINGS: tuple[str, ...] = ("both_ends", "single_point", "cross_bonded")
FORMATIONS: tuple[str, ...] = ("flat", "trefoil")

#: What each bonding assumes about the return of the zero-sequence current (report text).
RETURN_PATHS: dict[str, str] = {
    "both_ends": "the sheaths (bonded and earthed at both ends, taken at earth potential all "
                 "along) in parallel with the earth",
    "single_point": "the earth only (sheaths earthed at one end carry no current; no earth "
                    "continuity conductor given)",
    "single_point_ecc": "the earth continuity conductor (earthed at both ends, at earth "
                        "potential all along) in parallel with the earth (sheaths earthed at "
                        "one end carry no current)",
    "cross_bonded": "the cross-bonded sheath circuits (ideal cross-bonding: three equal minor "
                    "sections, sheaths earthed at the major-section ends, earthing resistances "
                    "neglected) in parallel with the earth",
    "cross_bonded_minor": "the cross-bonded sheath circuits (the three minor sections of the "
                          "given lengths cascaded with the sheath rotations, sheaths earthed "
                          "at the major-section ends, earthing resistances neglected) in "
                          "parallel with the earth",
}


@dataclass(frozen=True)
class ContinuityConductor:
    """An earth continuity conductor laid with single-point bonded cables: a solid round
    conductor, earthed at both ends, at ``x_m`` from the group's centre and ``depth_m``."""

    radius_m: float
    resistivity_ohm_m: float
    x_m: float
    depth_m: float


@dataclass(frozen=True)
class CableDesign:
    """One single-core cable, SI: radii from the axis outwards and the materials.

    The core is a solid round conductor of radius ``core_radius_m``; the metallic sheath a
    tube from ``sheath_inner_radius_m`` to ``sheath_outer_radius_m``; the jacket ends at
    ``jacket_radius_m``. ``insulation_permittivity`` is the relative permittivity between
    core and sheath (already corrected for semiconducting screens, [5]_).
    """

    core_radius_m: float
    core_resistivity_ohm_m: float
    sheath_inner_radius_m: float
    sheath_outer_radius_m: float
    sheath_resistivity_ohm_m: float
    jacket_radius_m: float
    insulation_permittivity: float
    jacket_permittivity: float


def _m(resistivity_ohm_m: float, omega: float) -> complex:
    """Complex propagation constant of a conductor, m = sqrt(j omega mu0 / rho) [1/m]."""
    return complex(np.sqrt(1j * omega * MU0_H_PER_M / resistivity_ohm_m))


def core_internal_impedance(radius_m: float, resistivity_ohm_m: float,
                            frequency_hz: float) -> complex:
    r"""Internal impedance of a solid round conductor [ohm/m] (Schelkunoff [2]_).

    .. math::

        z_c = \frac{\rho\, m}{2\pi r}\,\frac{I_0(m r)}{I_1(m r)},\qquad
        m = \sqrt{j\omega\mu_0/\rho}

    Parameters
    ----------
    radius_m : float
        Conductor radius [m].
    resistivity_ohm_m : float
        Resistivity [ohm m].
    frequency_hz : float
        Frequency [Hz].

    Returns
    -------
    complex
        Internal impedance [ohm/m]: the DC resistance and :math:`j\omega\mu_0/8\pi` at low
        frequency.
    """
    from scipy.special import ive

    m = _m(resistivity_ohm_m, 2 * math.pi * frequency_hz)
    x = m * radius_m
    # Exponentially scaled functions share the factor, so the ratio stays exact.
    return complex(resistivity_ohm_m * m / (2 * math.pi * radius_m) * ive(0, x) / ive(1, x))


def tube_impedances(inner_m: float, outer_m: float, resistivity_ohm_m: float,
                    frequency_hz: float) -> tuple[complex, complex, complex]:
    r"""Internal impedances of a tubular conductor [ohm/m] (Schelkunoff [2]_, Ametani [1]_).

    .. math::

        z_{i} &= \frac{\rho m}{2\pi a D}\left[I_0(ma)K_1(mb) + K_0(ma)I_1(mb)\right]\\
        z_{o} &= \frac{\rho m}{2\pi b D}\left[I_0(mb)K_1(ma) + K_0(mb)I_1(ma)\right]\\
        z_{m} &= \frac{\rho}{2\pi a b D},\qquad D = I_1(mb)K_1(ma) - I_1(ma)K_1(mb)

    with :math:`a`, :math:`b` the inner and outer radius.

    Parameters
    ----------
    inner_m, outer_m : float
        Inner and outer radius [m].
    resistivity_ohm_m : float
        Resistivity [ohm m].
    frequency_hz : float
        Frequency [Hz].

    Returns
    -------
    (complex, complex, complex)
        Inner-surface, outer-surface and mutual (transfer) impedance [ohm/m].
    """
    from scipy.special import ive, kve

    m = _m(resistivity_ohm_m, 2 * math.pi * frequency_hz)
    a, b = m * inner_m, m * outer_m
    # I_n(z) = ive(n, z) e^{Re z}, K_n(z) = kve(n, z) e^{-z}; every term is multiplied by
    # e^{a - Re b}, which leaves E = e^{(Re a - Re b) + (a - b)} (|E| <= 1) on the small ones.
    e = np.exp((a.real - b.real) + (a - b))
    d = ive(1, b) * kve(1, a) - ive(1, a) * kve(1, b) * e
    num_i = ive(0, a) * kve(1, b) * e + kve(0, a) * ive(1, b)
    num_o = ive(0, b) * kve(1, a) + kve(0, b) * ive(1, a) * e
    rho = resistivity_ohm_m
    z_i = rho * m / (2 * math.pi * inner_m) * num_i / d
    z_o = rho * m / (2 * math.pi * outer_m) * num_o / d
    z_m = rho / (2 * math.pi * inner_m * outer_m) * np.exp(a - b.real) / d
    return complex(z_i), complex(z_o), complex(z_m)


def pollaczek_integral(depth_sum_m: float, dx_m: float, resistivity_ohm_m: float,
                       frequency_hz: float) -> complex:
    r"""The integral term of Pollaczek's earth-return impedance [-], numerically [3]_.

    .. math::

        J = \int_{-\infty}^{\infty} \frac{e^{-H\sqrt{\lambda^2+m^2}}}
            {|\lambda| + \sqrt{\lambda^2+m^2}}\, e^{j\lambda x}\, d\lambda
          = 2\int_0^{\infty} \frac{e^{-H\sqrt{\lambda^2+m^2}}}{\lambda+\sqrt{\lambda^2+m^2}}
            \cos(\lambda x)\, d\lambda

    with :math:`H = h_i + h_j`, :math:`m = \sqrt{j\omega\mu_0/\rho}` (displacement currents
    in the earth neglected). Composite 16-point Gauss-Legendre: geometric panels where the
    integrand varies on the scale of :math:`|m|` (near :math:`\lambda = 0`), then panels no
    wider than a quarter period of the cosine and :math:`1/H`, up to
    :math:`\lambda = 50/H` (the rest is below :math:`e^{-50}`).

    Parameters
    ----------
    depth_sum_m : float
        Sum of the two burial depths [m] (twice the depth for a self term).
    dx_m : float
        Horizontal distance between the two conductors [m].
    resistivity_ohm_m : float
        Earth resistivity [ohm m].
    frequency_hz : float
        Frequency [Hz].

    Returns
    -------
    complex
        :math:`J` [-].
    """
    h = float(depth_sum_m)
    x = abs(float(dx_m))
    m = _m(resistivity_ohm_m, 2 * math.pi * frequency_hz)
    lo = 1e-7 * abs(m)
    top = 50.0 / h
    knee = min(1.0 / h, 1.0 / x) if x > 0 else 1.0 / h
    knee = max(knee, 2 * lo)
    n_geo = max(math.ceil(math.log2(knee / lo)), 1)
    width = min(1.0 / h, math.pi / (2 * x)) if x > 0 else 1.0 / h
    n_lin = max(math.ceil((top - knee) / width), 1)
    edges = np.concatenate([np.geomspace(lo, knee, n_geo + 1),
                            np.linspace(knee, top, n_lin + 1)[1:]])
    t, w = np.polynomial.legendre.leggauss(16)
    a, b = edges[:-1, None], edges[1:, None]
    lam = (0.5 * (b - a) * t + 0.5 * (b + a)).ravel()
    wts = (0.5 * (b - a) * w).ravel()
    s = np.sqrt(lam * lam + m * m)
    f = np.exp(-h * s) / (lam + s) * np.cos(lam * x)
    # Below ``lo`` the integrand is its value at 0, e^{-Hm}/m, to 1e-7.
    return complex(2 * (np.dot(wts, f) + lo * np.exp(-h * m) / m))


def earth_return_impedance(dx_m: float, depth_i_m: float, depth_j_m: float, radius_m: float,
                           resistivity_ohm_m: float, frequency_hz: float) -> complex:
    r"""Earth-return impedance of two buried conductors (or one: ``dx = 0``, same depth),
    by Pollaczek [3]_ as written by Ametani [1]_ [ohm/m].

    .. math::

        Z_{e,ij} = \frac{j\omega\mu_0}{2\pi}\left[K_0(m d_{ij}) - K_0(m D_{ij}) + J\right],
        \quad d_{ij} = \sqrt{x^2 + (h_i - h_j)^2},\ D_{ij} = \sqrt{x^2 + (h_i + h_j)^2}

    with :math:`d_{ii}` the outer radius of the conductor and :math:`J` from
    :func:`pollaczek_integral`.

    Parameters
    ----------
    dx_m : float
        Horizontal distance [m].
    depth_i_m, depth_j_m : float
        Burial depths of the axes [m].
    radius_m : float
        Outer radius [m], used for the self term.
    resistivity_ohm_m : float
        Earth resistivity [ohm m].
    frequency_hz : float
        Frequency [Hz].
    """
    from scipy.special import kv

    omega = 2 * math.pi * frequency_hz
    m = _m(resistivity_ohm_m, omega)
    same = dx_m == 0 and depth_i_m == depth_j_m
    d = radius_m if same else math.hypot(dx_m, depth_i_m - depth_j_m)
    big_d = math.hypot(dx_m, depth_i_m + depth_j_m)
    j = pollaczek_integral(depth_i_m + depth_j_m, dx_m, resistivity_ohm_m, frequency_hz)
    return complex(1j * omega * MU0_H_PER_M / (2 * math.pi) * (kv(0, m * d) - kv(0, m * big_d) + j))


def cable_positions(formation: str, spacing_m: float, depth_m: float, n_circuits: int = 1,
                    circuit_spacing_m: float = 0.0
                    ) -> tuple[np.ndarray, np.ndarray, tuple[str, str, str]]:
    """Axes of the cables of one or two circuits [m] and the position names.

    Flat: one row at ``depth_m``, ``spacing_m`` between axes (left, middle, right). Trefoil:
    ``depth_m`` to the centre of the group; the two lower cables (left, right) and the top
    one touch or sit ``spacing_m`` apart (left, top, right). Two circuits: the groups'
    centres ``circuit_spacing_m`` apart horizontally, the first on the left.

    Returns
    -------
    (x [m], depth [m], names)
        ``3 n_circuits`` axes in position order, each circuit's three position names.
    """
    s = spacing_m
    if formation == "flat":
        x0, d0, names = np.array([-s, 0.0, s]), np.full(3, depth_m), ("left", "middle", "right")
    else:
        r = s / math.sqrt(3)  # circumradius of the triangle
        x0 = np.array([-s / 2, 0.0, s / 2])
        d0 = np.array([depth_m + r / 2, depth_m - r, depth_m + r / 2])
        names = ("left", "top", "right")
    offsets = [0.0] if n_circuits == 1 else [-circuit_spacing_m / 2, circuit_spacing_m / 2]
    x = np.concatenate([x0 + o for o in offsets])
    d = np.concatenate([d0 for _ in offsets])
    return x, d, names


def primitive_matrices(design: CableDesign, x_m, depth_m, frequency_hz: float,
                       resistivity_ohm_m: float) -> tuple[np.ndarray, np.ndarray]:
    r"""Series impedance [ohm/m] and shunt admittance [S/m] of n cables, cores then sheaths.

    Ametani's conductor form [1]_ from the loop impedances of one cable
    (:math:`z_c` core, :math:`z_{si}, z_{so}, z_{sm}` sheath, :math:`z_{1}, z_{2}` the
    insulation and the jacket, :math:`Z_e` earth return):

    .. math::

        Z_{cc} &= z_c + z_1 + z_{si} - 2 z_{sm} + z_{so} + z_2 + Z_{e,ii},\quad
        Z_{cs} = z_{so} - z_{sm} + z_2 + Z_{e,ii},\quad Z_{ss} = z_{so} + z_2 + Z_{e,ii}\\
        z_1 &= \frac{j\omega\mu_0}{2\pi}\ln\frac{r_{si}}{r_c},\quad
        z_2 = \frac{j\omega\mu_0}{2\pi}\ln\frac{r_j}{r_{so}},

    every core or sheath of cable i coupled to every one of cable j by :math:`Z_{e,ij}`.
    Shunt: :math:`P = [[p_1 + p_2, p_2], [p_2, p_2]]` per cable,
    :math:`p_k = \ln(r_{out}/r_{in}) / (2\pi\varepsilon_0\varepsilon_k)`, no coupling between
    cables (the earth screens them), :math:`Y = j\omega P^{-1}`.

    Parameters
    ----------
    design : CableDesign
        The cable (all cables alike).
    x_m, depth_m : array_like, shape (n,)
        Horizontal position and burial depth of each cable's axis [m].
    frequency_hz : float
        Frequency [Hz].
    resistivity_ohm_m : float
        Earth resistivity [ohm m].

    Returns
    -------
    ((2n, 2n) complex ndarray, (2n, 2n) complex ndarray)
        Z [ohm/m] and Y [S/m], the n cores first, then the n sheaths.
    """
    x = np.asarray(x_m, float)
    dep = np.asarray(depth_m, float)
    n = len(x)
    omega = 2 * math.pi * frequency_hz
    jw = 1j * omega * MU0_H_PER_M / (2 * math.pi)
    c = design
    z_core = core_internal_impedance(c.core_radius_m, c.core_resistivity_ohm_m, frequency_hz)
    z_si, z_so, z_sm = tube_impedances(c.sheath_inner_radius_m, c.sheath_outer_radius_m,
                                       c.sheath_resistivity_ohm_m, frequency_hz)
    z_1 = jw * math.log(c.sheath_inner_radius_m / c.core_radius_m)
    z_2 = jw * math.log(c.jacket_radius_m / c.sheath_outer_radius_m)
    ze = np.empty((n, n), complex)
    for i in range(n):
        for j in range(i, n):
            ze[i, j] = ze[j, i] = earth_return_impedance(
                float(x[i] - x[j]), float(dep[i]), float(dep[j]), c.jacket_radius_m,
                resistivity_ohm_m, frequency_hz)
    z = np.tile(ze, (2, 2))
    idx = np.arange(n)
    z[idx, idx] += z_core + z_1 + z_si - 2 * z_sm + z_so + z_2
    z[idx, n + idx] += z_so - z_sm + z_2
    z[n + idx, idx] += z_so - z_sm + z_2
    z[n + idx, n + idx] += z_so + z_2

    p1 = math.log(c.sheath_inner_radius_m / c.core_radius_m) / (
        2 * math.pi * EPS0_F_PER_M * c.insulation_permittivity)
    p2 = math.log(c.jacket_radius_m / c.sheath_outer_radius_m) / (
        2 * math.pi * EPS0_F_PER_M * c.jacket_permittivity)
    p = np.zeros((2 * n, 2 * n))
    p[idx, idx] = p1 + p2
    p[idx, n + idx] = p[n + idx, idx] = p[n + idx, n + idx] = p2
    y = 1j * omega * np.linalg.inv(p)
    return z, y


def cross_bonded_average(z: np.ndarray, n_circuits: int) -> np.ndarray:
    r"""The cores and the sheath circuits of ideally cross-bonded cables [4]_ [ohm/m].

    Sheath circuit k of a circuit runs through position :math:`(k + s) \bmod 3` in minor
    section s = 0, 1, 2 (the cores stay in place), so over a major section

    .. math::

        \bar Z_{c_p, S_k} = \tfrac13\sum_{s} Z_{c_p, s_{(k+s) \bmod 3}},\quad
        \bar Z_{S_k, S_l} = \tfrac13\sum_{s} Z_{s_{(k+s) \bmod 3}, s_{(l+s) \bmod 3}}

    (the minor sections of two circuits taken to coincide).

    Parameters
    ----------
    z : (2n, 2n) complex ndarray
        Cores then sheaths, ``n = 3 n_circuits``, each circuit's three cables together.
    n_circuits : int
        Number of three-phase circuits.

    Returns
    -------
    (2n, 2n) complex ndarray
        The cores, then the sheath circuits.
    """
    n = 3 * n_circuits
    out = z.copy()
    rot = [[3 * (k // 3) + (k % 3 + s) % 3 for k in range(n)] for s in range(3)]
    out[:n, n:] = sum(z[:n, n:][:, r] for r in rot) / 3
    out[n:, :n] = out[:n, n:].T
    out[n:, n:] = sum(z[n:, n:][np.ix_(r, r)] for r in rot) / 3
    return out


def cross_bonded_cascade(z: np.ndarray, n_circuits: int, minor_lengths_m) -> np.ndarray:
    r"""The cores and the sheath circuits of a cross-bonded major section made of three
    minor sections of given lengths, per unit length of the major section [ohm/m].

    In minor section s (length :math:`\ell_s`) sheath circuit k of a circuit lies in
    position :math:`(k + s) \bmod 3` (the sheath of position p continues in position
    p + 1 after each joint; the cores stay in place). With :math:`T_s` that permutation
    of the sheaths, the minor section's matrix in the circuits' variables is
    :math:`T_s^{\mathsf T} Z T_s`, and the series impedances of the minor sections, which
    carry the same circuit currents one after the other, add:

    .. math::

        \bar Z = \frac{1}{\sum_s \ell_s}\sum_s \ell_s\, T_s^{\mathsf T} Z\, T_s

    Exact for the series impedance; the shunt admittance inside a major section (a few
    hundred metres to a few km, against a wavelength of some thousand km) is left to the
    cable's shunt model, as for the ideal average (:func:`cross_bonded_average`, to which
    equal lengths reduce).

    Parameters
    ----------
    z : (2n, 2n) complex ndarray
        Cores then sheaths [ohm/m], ``n = 3 n_circuits``.
    n_circuits : int
        Number of three-phase circuits.
    minor_lengths_m : sequence of 3 float
        The minor sections' lengths in order [m], > 0.

    Returns
    -------
    (2n, 2n) complex ndarray
        The cores, then the sheath circuits [ohm/m].
    """
    n = 3 * n_circuits
    w = np.asarray(minor_lengths_m, dtype=float)
    if w.shape != (3,) or not np.all(w > 0):
        raise ValueError("three positive minor-section lengths")
    w = w / w.sum()
    out = np.zeros_like(z, dtype=complex)
    for s in range(3):
        # conductor order of minor section s in the circuits' variables: the cores, then
        # sheath circuit k at position (k + s) mod 3 of its circuit
        idx = np.concatenate([np.arange(n), n + np.array(
            [3 * (k // 3) + (k % 3 + s) % 3 for k in range(n)])])
        out += w[s] * z[np.ix_(idx, idx)]
    return out


def bonded_core_matrices(z: np.ndarray, y: np.ndarray, bonding: str, n_circuits: int,
                         minor_lengths_m=None) -> tuple[np.ndarray, np.ndarray]:
    """The cores' series impedance [ohm/m] and shunt admittance [S/m] for a sheath bonding.

    ``both_ends``: Kron reduction of the sheaths (zero sheath voltage);
    ``single_point``: the core submatrix (zero sheath current); ``cross_bonded``: Kron
    reduction of the averaged sheath circuits (:func:`cross_bonded_average`; with
    ``minor_lengths_m``, the cascade of unequal minor sections,
    :func:`cross_bonded_cascade`). The shunt
    admittance holds the sheaths at earth potential for every bonding (the standing sheath
    voltage of single-point and cross-bonding is a few hundred volts at most at load
    current: common practice, no source), so it is the core submatrix of ``y``.

    Parameters
    ----------
    z, y : (2n, 2n) complex ndarray
        From :func:`primitive_matrices`.
    bonding : str
        One of :data:`BONDINGS`.
    n_circuits : int
        Number of three-phase circuits (n = 3 n_circuits).
    """
    n = 3 * n_circuits
    if bonding == "both_ends":
        zc = kron_reduce(z, n)
    elif bonding == "single_point":
        zc = z[:n, :n].copy()
    elif bonding == "cross_bonded":
        zc = kron_reduce(cross_bonded_average(z, n_circuits) if minor_lengths_m is None
                         else cross_bonded_cascade(z, n_circuits, minor_lengths_m), n)
    else:
        raise ValueError(f"unknown bonding {bonding}")
    yc = y[:n, :n].copy()
    return 0.5 * (zc + zc.T), 0.5 * (yc + yc.T)


def with_continuity_conductor(z_cores: np.ndarray, x_m, depth_m, ecc: ContinuityConductor,
                              frequency_hz: float, resistivity_ohm_m: float) -> np.ndarray:
    r"""The cores' series impedance [ohm/m] with an earth continuity conductor that is
    earthed at both ends (single-point bonded sheaths carry no current).

    The conductor e is a solid round wire outside the cables: its self impedance is its
    internal impedance plus Pollaczek's earth return, its mutual with the core of cable i
    the earth-return mutual :math:`Z_{e,ie}` (outside cable i, core and sheath see it
    alike [1]_). Earthed at both ends it is at earth potential all along and is eliminated
    by Kron reduction [2]_:

    .. math:: Z = Z_{cc} - Z_{ce} Z_{ee}^{-1} Z_{ec}

    Parameters
    ----------
    z_cores : (n, n) complex ndarray
        The cores' impedance with the sheaths carrying no current [ohm/m].
    x_m, depth_m : array_like, shape (n,)
        The cables' axes [m].
    ecc : ContinuityConductor
        The conductor.
    frequency_hz, resistivity_ohm_m : float
        Frequency [Hz], earth resistivity [ohm m].
    """
    x = np.asarray(x_m, float)
    dep = np.asarray(depth_m, float)
    n = len(x)
    z = np.empty((n + 1, n + 1), complex)
    z[:n, :n] = z_cores
    for i in range(n):
        z[i, n] = z[n, i] = earth_return_impedance(
            float(x[i] - ecc.x_m), float(dep[i]), ecc.depth_m, ecc.radius_m,
            resistivity_ohm_m, frequency_hz)
    z[n, n] = (core_internal_impedance(ecc.radius_m, ecc.resistivity_ohm_m, frequency_hz)
               + earth_return_impedance(0.0, ecc.depth_m, ecc.depth_m, ecc.radius_m,
                                        resistivity_ohm_m, frequency_hz))
    return kron_reduce(z, n)


def cable_section_matrices(design: CableDesign, formation: str, spacing_m: float,
                           depth_m: float, bonding: str, frequency_hz: float,
                           resistivity_ohm_m: float, n_circuits: int = 1,
                           circuit_spacing_m: float = 0.0,
                           ecc: ContinuityConductor | None = None,
                           minor_lengths_m=None) -> tuple[np.ndarray, np.ndarray]:
    """Series impedance [ohm/m] and shunt admittance [S/m] of a cable section by position.

    The cores in position order (:func:`cable_positions`), sheaths eliminated by their
    bonding (:func:`bonded_core_matrices`): the ``(3 n_circuits)``-square matrices that an
    overhead section's tower gives. ``ecc`` (single-point bonding only): an earth
    continuity conductor (:func:`with_continuity_conductor`). ``minor_lengths_m``
    (cross-bonding only): the three minor sections' lengths [m] (None: equal).
    """
    if minor_lengths_m is not None and bonding != "cross_bonded":
        raise ValueError("minor sections go with cross-bonding")
    x, d, _ = cable_positions(formation, spacing_m, depth_m, n_circuits, circuit_spacing_m)
    z, y = primitive_matrices(design, x, d, frequency_hz, resistivity_ohm_m)
    zc, yc = bonded_core_matrices(z, y, bonding, n_circuits, minor_lengths_m)
    if ecc is not None:
        if bonding != "single_point":
            raise ValueError("an earth continuity conductor goes with single-point bonding")
        zc = with_continuity_conductor(zc, x, d, ecc, frequency_hz, resistivity_ohm_m)
        zc = 0.5 * (zc + zc.T)
    return zc, yc
