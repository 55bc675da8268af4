r"""Series capacitor bank with its metal-oxide varistor (MOV): Goldsworthy's linearised model.

Under a fault the varistor across a series capacitor conducts once the capacitor voltage
reaches its protective level, so the bank no longer looks like :math:`-jX_C`. Goldsworthy
[1]_ fitted the fundamental-frequency equivalent impedance :math:`R_e - jX_e` of the
capacitor in parallel with its varistor, fed by a sinusoidal current, as a function of the
capacitor current in per unit of the protective-level current
:math:`I_{pu} = |I_C| / I_{pl}` (:math:`I_{pl}`: the RMS current whose peak capacitor
voltage equals the protective level):

.. math::
   R_e &= X_C\,(0.0745 + 0.49\,e^{-0.243 I_{pu}} - 35.0\,e^{-5.0 I_{pu}}
          - 0.6\,e^{-1.4 I_{pu}}) \\
   X_e &= X_C\,(0.101 - 0.005749\,I_{pu} + 2.088\,e^{-0.8566 I_{pu}})

for :math:`0.98 < I_{pu} \le 10`; below, the varistor does not conduct
(:math:`R_e = 0`, :math:`X_e = X_C`). The coefficients are given from memory and checked
in tests/test_series_cap_varistor.py against an independent time-domain computation
(scipy.integrate of the capacitor and a power-law varistor fed by an ideal sinusoidal
current source; the fundamental of the capacitor voltage over the current). Above 10 per
unit the value at 10 per unit is used (a bounded representation: the reactance is then
already below 5 % of :math:`X_C`, and such currents make a bank's bypass operate anyway).

References
----------
.. [1] D. L. Goldsworthy, "A linearized model for MOV-protected series capacitors," IEEE
   Trans. Power Systems, vol. PWRS-2, no. 4, pp. 953-958, Nov. 1987.
"""

from __future__ import annotations

import numpy as np

__all__ = ["GOLDSWORTHY_RANGE", "goldsworthy_impedance_pu"]

#: Range of the fit [per unit of the protective-level current] (Goldsworthy, from memory).
GOLDSWORTHY_RANGE: tuple[float, float] = (0.98, 10.0)


def goldsworthy_impedance_pu(i_pu: np.ndarray | float) -> np.ndarray:
    r"""Equivalent impedance of an MOV-protected series capacitor in per unit of
    :math:`X_C`, :math:`(R_e - jX_e)/X_C` (Goldsworthy [1]_, see the module notes).

    Parameters
    ----------
    i_pu : array_like
        Capacitor current in per unit of the protective-level current [1], >= 0.

    Returns
    -------
    complex ndarray
        :math:`(R_e - jX_e)/X_C` [1]; exactly :math:`-j` where the varistor does not
        conduct.
    """
    i = np.clip(np.asarray(i_pu, dtype=float), 0.0, GOLDSWORTHY_RANGE[1])
    r = 0.0745 + 0.49 * np.exp(-0.243 * i) - 35.0 * np.exp(-5.0 * i) - 0.6 * np.exp(-1.4 * i)
    x = 0.101 - 0.005749 * i + 2.088 * np.exp(-0.8566 * i)
    on = i > GOLDSWORTHY_RANGE[0]
    return np.where(on, np.maximum(r, 0.0) - 1j * x, -1j + 0.0)
