r"""Distributed-parameter (long-line) equivalent of a line.

For series impedance z and shunt admittance y per unit length, length :math:`\ell`:

.. math::

    \gamma = \sqrt{z y}, \qquad Z_c = \sqrt{z / y}, \qquad
    Z' = Z_c \sinh(\gamma\ell), \qquad \frac{Y'}{2} = \frac{\tanh(\gamma\ell/2)}{Z_c}

References
----------
.. [1] J. D. Glover, T. J. Overbye and M. S. Sarma, Power System Analysis and Design, 6th ed.
   Cengage, 2017, sec. 5.2 (exact pi-equivalent).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np


@dataclass(frozen=True)
class LongLineEquivalent:
    """Exact pi-equivalent of one sequence network of a line."""

    propagation_per_m: complex  #: gamma [1/m]
    surge_impedance_ohm: complex  #: Zc [ohm]
    z_nominal_ohm: complex  #: z·l [ohm]
    z_exact_ohm: complex  #: Z' [ohm]
    y_nominal_s: complex  #: y·l [S]
    y_exact_s: complex  #: Y' [S]

    @property
    def series_correction_pct(self) -> float:
        """|Z'/(z·l) - 1| in percent: how far the nominal pi is from the exact one."""
        return float(abs(self.z_exact_ohm / self.z_nominal_ohm - 1) * 100)


def long_line_equivalent(z_ohm_per_m: complex, y_s_per_m: complex, length_m: float):
    """Exact pi-equivalent from per-unit-length series impedance and shunt admittance.

    Parameters
    ----------
    z_ohm_per_m : complex
        Series impedance per unit length [ohm/m].
    y_s_per_m : complex
        Shunt admittance per unit length [S/m].
    length_m : float
        Line length [m].
    """
    gamma = complex(np.sqrt(z_ohm_per_m * y_s_per_m))
    if gamma.real < 0:
        gamma = -gamma
    zc = complex(np.sqrt(z_ohm_per_m / y_s_per_m))
    if zc.real < 0:
        zc = -zc
    gl = gamma * length_m
    return LongLineEquivalent(
        propagation_per_m=gamma,
        surge_impedance_ohm=zc,
        z_nominal_ohm=z_ohm_per_m * length_m,
        z_exact_ohm=complex(zc * np.sinh(gl)),
        y_nominal_s=y_s_per_m * length_m,
        y_exact_s=complex(2 * np.tanh(gl / 2) / zc),
    )
