"""Goldsworthy's linearised model of an MOV-protected series capacitor
(relayset.physics.series_capacitor) against an independent time-domain computation.

Independent check (scipy.integrate): an ideal sinusoidal current source
i(t) = sqrt(2) I sin(wt) feeds a capacitor C in parallel with a power-law varistor
i_v = I_ref (|v|/V_pl)^alpha sign(v); the stiff circuit equation C dv/dt = i - i_v is
integrated (Radau) to the periodic state and the fundamental of v over that of i is the
equivalent impedance. Per unit: X_C = 1, V_pl = 1 (so the protective-level current
I_pl = 1), alpha = 30 and I_ref = I_pl (a varistor of typical steepness, from memory: metal
oxide alpha 20-40). The fit (coefficients from memory) must agree within 0.05 of X_C in R
and X over 1 to 10 per unit; the comparison is made at points inside the fit's range.
"""

from __future__ import annotations

import numpy as np
import pytest

from relayset.physics.series_capacitor import goldsworthy_impedance_pu


def _time_domain_impedance_pu(i_pk: float, alpha: float = 30.0) -> complex:
    from scipy.integrate import solve_ivp

    def f(t, v):
        return [i_pk * np.sin(t) - np.sign(v[0]) * abs(v[0]) ** alpha]

    def jac(t, v):
        return [[-alpha * abs(v[0]) ** (alpha - 1)]]

    cycles = 6
    sol = solve_ivp(f, (0, 2 * np.pi * cycles), [-min(i_pk, 1.0)], method="Radau", jac=jac,
                    rtol=1e-8, atol=1e-10, dense_output=True, max_step=0.01)
    t = np.linspace(2 * np.pi * (cycles - 1), 2 * np.pi * cycles, 4001)
    v = sol.sol(t)[0]
    v1 = np.trapezoid(v * np.exp(-1j * t), t) / np.pi  # fundamental phasor of v
    return complex(v1 / (-1j * i_pk))  # i = Re(-j i_pk e^{jt})


@pytest.mark.parametrize("i_pu", [1.0, 1.2, 1.5, 2.0, 3.0, 5.0, 8.0, 10.0])
def test_fit_matches_time_domain_capacitor_with_varistor(i_pu):
    # peak current of the per-unit source: the protective-level current's peak is 1 here
    z_sim = _time_domain_impedance_pu(i_pu)
    z_fit = complex(goldsworthy_impedance_pu(i_pu))
    assert abs(z_fit.real - z_sim.real) <= 0.05, (z_fit, z_sim)
    assert abs(z_fit.imag - z_sim.imag) <= 0.05, (z_fit, z_sim)


def test_below_the_protective_level_the_bank_is_the_capacitor():
    # The varistor does not conduct below the protective level (definition of the model):
    # -jX_C exactly, and the time-domain computation agrees within 0.01.
    np.testing.assert_array_equal(goldsworthy_impedance_pu([0.0, 0.5, 0.97]), -1j)
    z_sim = _time_domain_impedance_pu(0.8)
    assert abs(z_sim - (-1j)) <= 0.01
