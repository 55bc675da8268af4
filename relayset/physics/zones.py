r"""Distance-zone physics: arc resistance, impedance conversion, mho sizing, SIR, infeed.

Everything is SI and per phase in the positive-sequence impedance plane (the plane in which a
distance relay compares its measured impedance with its characteristic). Functions broadcast
over numpy arrays. The characteristics themselves (mho, quadrilateral) are the objects of
:mod:`relayset.physics.characteristic`.

References
----------
.. [1] A. R. van C. Warrington, "Reactance relays negligibly affected by arc impedance,"
   Electrical World, vol. 98, no. 12, pp. 502-505, Sept. 1931.
.. [2] IEEE Guide for Protective Relay Applications to Transmission Lines,
   IEEE Std C37.113-2015.
"""

from __future__ import annotations

import numpy as np

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

