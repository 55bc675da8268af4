r"""Distance-relay loop measurement, reach error and the zone 1 reach it allows.

A distance relay measures six loops. Ground loops divide the phase voltage by the phase
current compensated with the residual current (and optionally the residual current of the
parallel circuit); phase loops divide the phase-to-phase voltage by the loop current:

.. math:: Z_{AG} = \frac{V_A}{I_A + k_0 I_N + k_{0m} I_{N,par}},\qquad
          Z_{AB} = \frac{V_A - V_B}{I_A - I_B},\qquad I_N = I_A + I_B + I_C

with :math:`k_0 = (Z_{0L} - Z_{1L})/(3 Z_{1L})` and :math:`k_{0m} = Z_{0M}/(3 Z_{1L})`.
For a bolted fault on an ideally transposed line the loop meant for the fault measures
exactly :math:`m Z_{1L}` [1]_.

References
----------
.. [1] *IEEE Guide for Protective Relay Applications to Transmission Lines*, IEEE Std
   C37.113-2015 (zero-sequence and mutual compensation of ground distance elements).
"""

from __future__ import annotations

import math

import numpy as np

from relayset.errors import InputError

_GROUND_LOOPS = ("AG", "BG", "CG")
_PHASE_LOOPS = (("AB", 0, 1), ("BC", 1, 2), ("CA", 2, 0))

#: The six measuring loops, and the phases (0, 1, 2 = A, B, C) each measures.
LOOPS = ("AG", "BG", "CG", "AB", "BC", "CA")
LOOP_PHASES: dict[str, tuple[int, ...]] = {"AG": (0,), "BG": (1,), "CG": (2,),
                                           "AB": (0, 1), "BC": (1, 2), "CA": (2, 0)}
GROUND_LOOPS = frozenset(_GROUND_LOOPS)

_LOOPS_FOR_FAULT: dict[str, tuple[str, ...]] = {
    "AG": ("AG",),
    "BG": ("BG",),
    "CG": ("CG",),
    "AB": ("AB",),
    "BC": ("BC",),
    "CA": ("CA",),
    "ABG": ("AB", "AG", "BG"),
    "BCG": ("BC", "BG", "CG"),
    "CAG": ("CA", "CG", "AG"),
    "ABC": ("AB", "BC", "CA"),
}


def loop_impedances(
    v: np.ndarray,
    i: np.ndarray,
    k0: complex | np.ndarray,
    *,
    i_parallel: np.ndarray | None = None,
    k0m: complex | np.ndarray = 0,
) -> dict[str, np.ndarray]:
    """Apparent impedance of the six fault loops.

    Parameters
    ----------
    v : (..., 3) complex array
        Phase-to-ground voltages at the relay [V].
    i : (..., 3) complex array
        Phase currents into the protected line [A].
    k0 : complex
        Residual compensation factor (Z0L - Z1L)/(3 Z1L) [1].
    i_parallel : (..., 3) complex array, optional
        Phase currents of the parallel circuit at the same end [A].
    k0m : complex
        Mutual compensation factor Z0M/(3 Z1L) [1]; used with ``i_parallel``.

    Returns
    -------
    dict of str to (...) complex arrays
        Keys "AG", "BG", "CG", "AB", "BC", "CA" [ohm]. Non-finite where the loop current
        is zero (the loop does not see the fault).
    """
    v = np.asarray(v, dtype=complex)
    i = np.asarray(i, dtype=complex)
    if v.shape[-1:] != (3,) or i.shape[-1:] != (3,):
        raise InputError("voltages and currents need a last axis of 3 phases",
                         field="v", value=(v.shape, i.shape))
    comp = k0 * i.sum(axis=-1)
    if i_parallel is not None:
        comp = comp + k0m * np.asarray(i_parallel, dtype=complex).sum(axis=-1)
    out: dict[str, np.ndarray] = {}
    # a (near-)zero loop current gives inf/nan: the loop does not see the fault
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        for p, name in enumerate(_GROUND_LOOPS):
            out[name] = v[..., p] / (i[..., p] + comp)
        for name, x, y in _PHASE_LOOPS:
            out[name] = (v[..., x] - v[..., y]) / (i[..., x] - i[..., y])
    return out


def reach_error_pct(
    z_measured: np.ndarray, m: np.ndarray, z1_line_ohm: complex
) -> tuple[np.ndarray, np.ndarray]:
    r"""Reach error of a measured loop impedance for a fault at fraction m of the line.

    .. math:: m_{app} = \frac{\mathrm{Re}(Z_{meas} e^{-j\theta_1})}{|Z_{1L}|},\quad
              e_{line} = 100\,\frac{m - m_{app}}{m},\quad
              e_X = 100\,\frac{m X_{1L} - \mathrm{Im}\,Z_{meas}}{m X_{1L}}

    Positive errors are overreach: the relay sees the fault closer than it is.

    Parameters
    ----------
    z_measured : array
        Measured loop impedance [ohm].
    m : array
        True fault location, fraction of the line [1]; broadcast with ``z_measured``.
    z1_line_ohm : complex
        Positive-sequence impedance of the whole line the relay is set with [ohm].

    Returns
    -------
    along_line_pct, reactance_pct : arrays
        Errors along the line angle and in reactance [%]; NaN where m = 0.
    """
    z1 = complex(z1_line_ohm)
    if not (abs(z1) > 0 and z1.imag > 0 and math.isfinite(abs(z1))):
        raise InputError("line Z1 must be finite with positive reactance",
                         field="z1_line_ohm", value=z1)
    z = np.asarray(z_measured, dtype=complex)
    m = np.asarray(m, dtype=float)
    theta = math.atan2(z1.imag, z1.real)
    m_app = (z * complex(math.cos(theta), -math.sin(theta))).real / abs(z1)
    m_safe = np.where(m == 0, np.nan, m)
    along = 100 * (m_safe - m_app) / m_safe
    react = 100 * (m_safe * z1.imag - z.imag) / (m_safe * z1.imag)
    return along, react


def loops_for_fault(fault_type: str) -> tuple[str, ...]:
    """Loops meant to measure a fault type (their reach error is what the study checks).

    Ground faults: their ground loop. Phase-phase faults: their phase loop. Two-phase-to-
    ground faults: the phase loop and both ground loops. Three-phase faults: the three
    phase loops.
    """
    try:
        return _LOOPS_FOR_FAULT[fault_type]
    except KeyError:
        raise InputError(
            "unknown fault type; use one of " + ", ".join(_LOOPS_FOR_FAULT),
            field="fault_type", value=fault_type,
        ) from None
