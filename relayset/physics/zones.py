r"""Distance-zone physics: arc resistance, impedance conversion, relay characteristics, SIR.

Everything is SI and per phase in the positive-sequence impedance plane (the plane in which a
distance relay compares its measured impedance with its characteristic). Functions broadcast
over numpy arrays.

References
----------
.. [1] A. R. van C. Warrington, "Reactance relays negligibly affected by arc impedance,"
   Electrical World, vol. 98, no. 12, pp. 502-505, Sept. 1931.
.. [2] IEEE Guide for Protective Relay Applications to Transmission Lines,
   IEEE Std C37.113-2015.
"""

from __future__ import annotations

import numpy as np

from relayset.physics.arrays import unique_sorted

# Warrington's formula [1] in its published units: R = 8750 (s + 3 v t) / I^1.4 ohm with
# s [ft], v [mph], t [s], I [A]. In SI, s [m] = 0.3048 s [ft] and v [m/s] = 0.44704 v [mph]:
#   R = (8750 / 0.3048) (s + 3 (0.3048 / 0.44704) v t) / I^1.4
#     = 28 707.3... (s + 2.045 45... v t) / I^1.4      [ohm], s [m], v [m/s], t [s], I [A]
FT_M = 0.3048  # exact, international foot
MPH_M_PER_S = 0.44704  # exact, international mile per hour
#: Warrington's constant in SI [ohm·A^1.4/m]: 8750 / 0.3048.
WARRINGTON_K_SI = 8750.0 / FT_M
#: Wind-stretch factor in SI [1]: 3 × 0.3048 / 0.44704 = 2.04545... (exactly 45/22).
WARRINGTON_WIND_SI = 3.0 * FT_M / MPH_M_PER_S
#: Current exponent of Warrington's formula [1].
WARRINGTON_EXPONENT = 1.4



def warrington_arc_resistance_ohm(
    current_a: float | np.ndarray,
    arc_length_m: float | np.ndarray,
    wind_speed_m_per_s: float | np.ndarray = 0.0,
    duration_s: float | np.ndarray = 0.0,
) -> np.ndarray:
    r"""Arc resistance by Warrington's formula [1], in SI.

    .. math:: R_{arc} = \frac{K\,(s + c\,v\,t)}{I^{1.4}},\qquad
              K = \frac{8750}{0.3048} = 28\,707.3\ \Omega\,\mathrm{A}^{1.4}/\mathrm{m},\quad
              c = \frac{3 \times 0.3048}{0.44704} = 2.0455

    The published form is :math:`R = 8750\,(s + 3vt)/I^{1.4}` with s in feet and v in
    miles per hour; the constants above convert it exactly.

    Parameters
    ----------
    current_a : float or array
        RMS arc current [A]; must be > 0.
    arc_length_m : float or array
        Initial arc length [m] (phase spacing for phase faults, insulator flashover length
        for ground faults).
    wind_speed_m_per_s : float or array, optional
        Cross wind that stretches the arc [m/s].
    duration_s : float or array, optional
        Time the arc has burnt when the relay measures it [s].

    Returns
    -------
    ndarray
        Arc resistance [ohm].
    """
    current = np.asarray(current_a, dtype=float)
    if np.any(current <= 0):
        raise ValueError("arc current must be greater than zero")
    length = np.asarray(arc_length_m, dtype=float) + WARRINGTON_WIND_SI * np.asarray(
        wind_speed_m_per_s, dtype=float
    ) * np.asarray(duration_s, dtype=float)
    return WARRINGTON_K_SI * length / current**WARRINGTON_EXPONENT


def secondary_ohm(
    z_primary_ohm: complex | np.ndarray, ct_ratio: float, vt_ratio: float
) -> np.ndarray:
    r"""Impedance seen on the relay's secondary side.

    .. math:: Z_{sec} = Z_{pri}\,\frac{n_{CT}}{n_{VT}}

    Parameters
    ----------
    z_primary_ohm : complex or array
        Primary impedance [ohm].
    ct_ratio, vt_ratio : float
        Current- and voltage-transformer ratios, primary over secondary [1].

    Returns
    -------
    ndarray
        Secondary impedance [ohm].
    """
    return np.asarray(z_primary_ohm) * (ct_ratio / vt_ratio)


def min_load_impedance_ohm(
    v_min_ll_v: float | np.ndarray, s_max_va: float | np.ndarray
) -> np.ndarray:
    r"""Smallest per-phase load impedance magnitude.

    .. math:: |Z_{load,min}| = \frac{V_{LL,min}^2}{S_{max}}

    (equal to :math:`V_{ph}^2/(S/3)`, the per-phase value).

    Parameters
    ----------
    v_min_ll_v : float or array
        Lowest line-to-line operating voltage [V].
    s_max_va : float or array
        Highest three-phase apparent power through the line [VA].

    Returns
    -------
    ndarray
        Minimum load impedance [ohm].
    """
    return np.asarray(v_min_ll_v, dtype=float) ** 2 / np.asarray(s_max_va, dtype=float)


def _tol(scale: np.ndarray) -> np.ndarray:
    # Points on the boundary count as inside, with a rounding allowance.
    return 1e-12 * np.maximum(np.abs(scale), 1.0)


def mho_contains(
    z_point: complex | np.ndarray, z_reach: float | np.ndarray, char_angle_rad: float | np.ndarray
) -> np.ndarray:
    r"""Whether impedances lie inside (or on) a self-polarised mho circle.

    The circle passes through the origin; its diameter has length ``z_reach`` at angle
    ``char_angle_rad``:

    .. math:: \left|Z - \tfrac{D}{2}e^{j\theta}\right| \le \tfrac{D}{2}

    A reverse-looking mho uses :math:`\theta + \pi`.

    Parameters
    ----------
    z_point : complex or array
        Impedances to test [ohm].
    z_reach : float or array
        Diameter magnitude D [ohm], >= 0.
    char_angle_rad : float or array
        Characteristic (diameter) angle θ [rad].

    Returns
    -------
    ndarray of bool
    """
    d = np.asarray(z_reach, dtype=float)
    centre = 0.5 * d * np.exp(1j * np.asarray(char_angle_rad, dtype=float))
    return np.abs(np.asarray(z_point, dtype=complex) - centre) <= 0.5 * d + _tol(d)


def mho_reach_along_ohm(
    z_reach: float | np.ndarray,
    char_angle_rad: float | np.ndarray,
    ray_angle_rad: float | np.ndarray,
) -> np.ndarray:
    r"""Distance from the origin to a mho circle along a ray, :math:`\max(D\cos(\psi-\theta), 0)`.

    Parameters
    ----------
    z_reach : float or array
        Diameter D [ohm].
    char_angle_rad, ray_angle_rad : float or array
        Characteristic angle θ and ray angle ψ [rad].

    Returns
    -------
    ndarray
        Reach along the ray [ohm].
    """
    d = np.asarray(z_reach, dtype=float)
    return np.maximum(d * np.cos(np.asarray(ray_angle_rad) - np.asarray(char_angle_rad)), 0.0)


def mho_diameter_for_point_ohm(
    z_target: complex | np.ndarray, char_angle_rad: float | np.ndarray
) -> np.ndarray:
    r"""Diameter of the mho circle at angle θ whose boundary passes through ``z_target``.

    .. math:: D = \frac{|Z_t|}{\cos(\arg Z_t - \theta)}

    Parameters
    ----------
    z_target : complex or array
        Impedance the zone must just reach [ohm].
    char_angle_rad : float or array
        Characteristic angle θ [rad]; within 90° of the target's angle.

    Returns
    -------
    ndarray
        Diameter [ohm].
    """
    z = np.asarray(z_target, dtype=complex)
    c = np.cos(np.angle(z) - np.asarray(char_angle_rad, dtype=float))
    if np.any(c <= 1e-9):
        raise ValueError("the target impedance is 90 degrees or more away from the mho angle")
    return np.abs(z) / c


def _quad_halfplanes(
    x_reach: np.ndarray, r_reach: np.ndarray, line_angle_rad: np.ndarray, r_left: np.ndarray
) -> list[tuple[np.ndarray, np.ndarray, np.ndarray]]:
    """Half-planes ``nx·R + ny·X <= c`` of the forward quadrilateral (c >= 0)."""
    s, co = np.sin(line_angle_rad), np.cos(line_angle_rad)
    zero, one = np.zeros_like(s), np.ones_like(s)
    return [
        (zero, one, x_reach),  # reactance line X <= X_reach
        (s, -co, r_reach * s),  # right blinder through (R_reach, 0), parallel to the line
        (-s, co, r_left * s),  # left blinder through (-R_left, 0), parallel to the line
        (-co, -s, zero),  # directional line through 0, perpendicular to the line angle
    ]


def quad_contains(
    z_point: complex | np.ndarray,
    x_reach: float | np.ndarray,
    r_reach: float | np.ndarray,
    line_angle_rad: float | np.ndarray,
    r_left_ohm: float | np.ndarray | None = None,
    forward: bool = True,
) -> np.ndarray:
    r"""Whether impedances lie inside (or on) a simple quadrilateral characteristic.

    The shape (forward-looking; a reverse one is its point reflection through the origin,
    :math:`Z \to -Z`) is the intersection of four half-planes, with θ the line angle:

    - reactance line: :math:`X \le X_{reach}` (horizontal);
    - right resistive blinder through :math:`(R_{reach}, 0)`, parallel to the line angle:
      :math:`R\sin\theta - X\cos\theta \le R_{reach}\sin\theta`;
    - left blinder through :math:`(-R_{left}, 0)`, parallel to the line angle;
    - directional boundary through the origin, perpendicular to the line angle:
      :math:`\mathrm{Re}(Z e^{-j\theta}) \ge 0`.

    Parameters
    ----------
    z_point : complex or array
        Impedances to test [ohm].
    x_reach : float or array
        Reactive reach [ohm], > 0.
    r_reach : float or array
        Right resistive reach (blinder offset on the R axis) [ohm], > 0.
    line_angle_rad : float or array
        Line (blinder) angle θ [rad], 0 < θ <= π/2.
    r_left_ohm : float or array, optional
        Left blinder offset [ohm]; defaults to ``r_reach``.
    forward : bool, optional
        False for a reverse-looking zone.

    Returns
    -------
    ndarray of bool
    """
    z = np.asarray(z_point, dtype=complex)
    if not forward:
        z = -z
    xr = np.asarray(x_reach, dtype=float)
    rr = np.asarray(r_reach, dtype=float)
    rl = rr if r_left_ohm is None else np.asarray(r_left_ohm, dtype=float)
    inside = np.ones(np.broadcast_shapes(z.shape, xr.shape, rr.shape, rl.shape), dtype=bool)
    for nx, ny, c in _quad_halfplanes(xr, rr, np.asarray(line_angle_rad, dtype=float), rl):
        inside &= nx * z.real + ny * z.imag <= c + _tol(c)
    return inside


def quad_vertices_ohm(
    x_reach: float,
    r_reach: float,
    line_angle_rad: float,
    r_left_ohm: float | None = None,
    forward: bool = True,
) -> np.ndarray:
    """Corners of the quadrilateral of :func:`quad_contains`, counter-clockwise.

    Parameters
    ----------
    x_reach, r_reach, line_angle_rad, r_left_ohm, forward
        As in :func:`quad_contains` (scalars) [ohm, ohm, rad, ohm, -].

    Returns
    -------
    (n,) complex ndarray
        Corner impedances [ohm] (four for the usual shape).
    """
    rl = r_reach if r_left_ohm is None else r_left_ohm
    planes = _quad_halfplanes(*(np.asarray(v, dtype=float) for v in
                                (x_reach, r_reach, line_angle_rad, rl)))
    corners = []
    for a in range(len(planes)):
        for b in range(a + 1, len(planes)):
            m = np.array([[planes[a][0], planes[a][1]], [planes[b][0], planes[b][1]]], float)
            if abs(np.linalg.det(m)) < 1e-12:
                continue
            rx = np.linalg.solve(m, np.array([planes[a][2], planes[b][2]], float))
            z = complex(rx[0], rx[1])
            # Keep only crossings that are corners of the shape (inside every half-plane).
            if bool(quad_contains(z, x_reach, r_reach, line_angle_rad, rl)):
                corners.append(z)
    pts = unique_sorted(np.round(np.array(corners), 12))
    centre = pts.mean()
    pts = pts[np.argsort(np.angle(pts - centre))]
    return pts if forward else -pts


def quad_reach_along_ohm(
    x_reach: float | np.ndarray,
    r_reach: float | np.ndarray,
    line_angle_rad: float | np.ndarray,
    ray_angle_rad: float | np.ndarray,
    r_left_ohm: float | np.ndarray | None = None,
    forward: bool = True,
) -> np.ndarray:
    r"""Distance from the origin to the quadrilateral of :func:`quad_contains` along a ray.

    For each half-plane :math:`n\cdot Z \le c` with :math:`n\cdot u > 0` (u the ray's unit
    vector) the ray leaves at :math:`c / (n\cdot u)`; the reach is the smallest of these.

    Parameters
    ----------
    x_reach, r_reach, line_angle_rad, r_left_ohm, forward
        As in :func:`quad_contains` [ohm, ohm, rad, ohm, -].
    ray_angle_rad : float or array
        Ray angle ψ [rad].

    Returns
    -------
    ndarray
        Reach along the ray [ohm] (``inf`` if the ray never leaves the shape).
    """
    psi = np.asarray(ray_angle_rad, dtype=float) + (0.0 if forward else np.pi)
    ux, uy = np.cos(psi), np.sin(psi)
    xr = np.asarray(x_reach, dtype=float)
    rr = np.asarray(r_reach, dtype=float)
    rl = rr if r_left_ohm is None else np.asarray(r_left_ohm, dtype=float)
    reach = np.full(np.broadcast_shapes(psi.shape, xr.shape, rr.shape, rl.shape), np.inf)
    for nx, ny, c in _quad_halfplanes(xr, rr, np.asarray(line_angle_rad, dtype=float), rl):
        nu = nx * ux + ny * uy
        with np.errstate(divide="ignore", invalid="ignore"):
            t = np.where(nu > 1e-12, c / np.where(nu > 1e-12, nu, 1.0), np.inf)
        reach = np.minimum(reach, t)
    return reach


def sir(z_source_ohm: complex | np.ndarray, z_line_ohm: complex | np.ndarray) -> np.ndarray:
    r"""Source-to-line impedance ratio, :math:`SIR = |Z_{S1}| / |Z_{L1}|` (positive sequence).

    Parameters
    ----------
    z_source_ohm : complex or array
        Source impedance behind the relay [ohm].
    z_line_ohm : complex or array
        Impedance of the protected line (or of the zone reach) [ohm].

    Returns
    -------
    ndarray
        SIR [1].
    """
    return np.abs(np.asarray(z_source_ohm, dtype=complex)) / np.abs(
        np.asarray(z_line_ohm, dtype=complex)
    )


def infeed_factor(
    z_source_relay: complex | np.ndarray,
    z_line: complex | np.ndarray,
    z_source_remote: complex | np.ndarray,
) -> np.ndarray:
    r"""Infeed factor of the remote-bus source for faults on a line beyond the remote bus.

    Relay at bus A behind source :math:`Z_S`; protected line A-R of impedance :math:`Z_L`;
    a source :math:`Z_R` behind the remote bus R; a fault on an adjacent line at impedance
    :math:`Z_x` beyond R, fed only through R. With both source EMFs equal (E) and no load,
    the voltage at R seen from either source is

    .. math:: V_R = E - I_{relay}(Z_S + Z_L) = E - I_{remote} Z_R
              \;\Rightarrow\; \frac{I_{remote}}{I_{relay}} = \frac{Z_S + Z_L}{Z_R}

    and the relay measures
    :math:`V_A/I_{relay} = Z_L + (1 + I_{remote}/I_{relay})\,Z_x = Z_L + K Z_x`, so

    .. math:: K = 1 + \frac{Z_S + Z_L}{Z_R}

    Assumptions: balanced (positive-sequence) fault with no fault resistance, equal and
    in-phase source EMFs, no pre-fault load, no other path between the sources. K is
    complex; it is real when all impedances share one angle.

    Parameters
    ----------
    z_source_relay : complex or array
        Source impedance behind the relay [ohm].
    z_line : complex or array
        Protected line impedance [ohm].
    z_source_remote : complex or array
        Source impedance behind the remote bus [ohm] (``inf`` for no remote source, K = 1).

    Returns
    -------
    ndarray of complex
        K [1].
    """
    zs = np.asarray(z_source_relay, dtype=complex)
    zl = np.asarray(z_line, dtype=complex)
    zr = np.asarray(z_source_remote, dtype=complex)
    return 1.0 + (zs + zl) / zr

