"""Fortescue's symmetrical components for three-phase matrices.

References
----------
.. [1] C. L. Fortescue, "Method of symmetrical co-ordinates applied to the solution of
   polyphase networks," Trans. AIEE, vol. 37, pp. 1027-1140, 1918.
"""

from __future__ import annotations

import numpy as np

#: The operator a = exp(j·120°).
A_OP: complex = complex(np.exp(2j * np.pi / 3))


def fortescue_matrix() -> np.ndarray:
    r"""The transform A with :math:`V_{abc} = A\,V_{012}` (order zero, positive, negative).

    .. math:: A = \begin{bmatrix}1&1&1\\1&a^2&a\\1&a&a^2\end{bmatrix}
    """
    a = A_OP
    return np.array([[1, 1, 1], [1, a * a, a], [1, a, a * a]], dtype=complex)


def fortescue_inverse() -> np.ndarray:
    """The inverse transform, :math:`A^{-1} = \\tfrac13 A^*` (conjugate)."""
    return np.conj(fortescue_matrix()) / 3.0


def to_sequence(z_abc: np.ndarray) -> np.ndarray:
    """Symmetrical-component matrix :math:`Z_{012} = A^{-1} Z_{abc} A`.

    Parameters
    ----------
    z_abc : (..., 3, 3) complex array
        Phase-domain matrix [any unit].

    Returns
    -------
    (..., 3, 3) complex array
        Sequence matrix in the order 0, 1, 2 [same unit]. Off-diagonal terms are kept.
    """
    return fortescue_inverse() @ np.asarray(z_abc, dtype=complex) @ fortescue_matrix()


def from_sequence(z_012: np.ndarray) -> np.ndarray:
    """Phase-domain matrix from a sequence matrix, :math:`Z_{abc} = A Z_{012} A^{-1}`."""
    return fortescue_matrix() @ np.asarray(z_012, dtype=complex) @ fortescue_inverse()


def balanced_phase_matrix(z1: complex | np.ndarray, z0: complex | np.ndarray) -> np.ndarray:
    r"""Phase matrix of a balanced element with positive (= negative) and zero sequence values.

    .. math:: Z_s = \frac{Z_0 + 2Z_1}{3}, \quad Z_m = \frac{Z_0 - Z_1}{3}

    Parameters
    ----------
    z1, z0 : complex or array
        Positive- and zero-sequence impedance [ohm, or ohm/m]; broadcast together.

    Returns
    -------
    (..., 3, 3) complex array
    """
    z1 = np.asarray(z1, dtype=complex)
    z0 = np.asarray(z0, dtype=complex)
    zs = (z0 + 2 * z1) / 3
    zm = (z0 - z1) / 3
    eye = np.eye(3)
    return zs[..., None, None] * eye + zm[..., None, None] * (1 - eye)


def residual_compensation(z1: complex, z0: complex) -> complex:
    r"""Residual compensation factor :math:`k_0 = (Z_0 - Z_1)/(3 Z_1)` [dimensionless]."""
    return (z0 - z1) / (3 * z1)


def residual_compensation_split(z1: complex, z0: complex) -> tuple[float, float]:
    r"""Separate resistive and reactive ratios :math:`(R_0-R_1)/(3R_1)` and
    :math:`(X_0-X_1)/(3X_1)` used by relays that set the two parts apart."""
    return (
        (z0.real - z1.real) / (3 * z1.real),
        (z0.imag - z1.imag) / (3 * z1.imag),
    )


def unbalance_factors(z_012: np.ndarray) -> tuple[complex, complex]:
    r"""Zero- and negative-sequence current unbalance factors of a line.

    For the line driven by a positive-sequence voltage with its zero- and negative-sequence
    paths short-circuited, the currents that flow are :math:`I = Y_{012} V` with
    :math:`Y_{012} = Z_{012}^{-1}`, so

    .. math:: m_0 = \frac{Y_{01}}{Y_{11}}, \qquad m_2 = \frac{Y_{21}}{Y_{11}}

    (P. M. Anderson, Analysis of Faulted Power Systems, IEEE Press, 1995, ch. 4; from memory.)
    Both are zero for an ideally transposed line.

    Parameters
    ----------
    z_012 : (3, 3) complex ndarray
        Sequence impedance matrix in the order 0, 1, 2 [ohm or ohm/m].
    """
    y = np.linalg.inv(z_012)
    return complex(y[0, 1] / y[1, 1]), complex(y[2, 1] / y[1, 1])
