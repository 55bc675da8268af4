"""Tests of loop measurement, reach error and zone 1 reach (relayset.physics.measurement).

All expected numbers are derived by hand in the comments beside each check.
"""

from __future__ import annotations

import cmath
import math

import numpy as np
import pytest

from relayset.errors import InputError
from relayset.physics.faults import FAULT_TYPES
from relayset.physics.measurement import (
    loop_impedances,
    loops_for_fault,
    reach_error_pct,
)
from relayset.settings.zone1 import recommended_zone1_pct


def test_loop_impedances_invert_the_loop_equations():
    # Identity (definition of the loops, IEEE Std C37.113-2015): build V from chosen loop
    # impedances, V_p = Z_pG (I_p + k0 I_res + k0m I_res,par) and V_x - V_y = Z_xy (I_x - I_y);
    # the function must return the chosen values. Tolerance 1e-12 relative.
    rng = np.random.default_rng(11)
    i = rng.normal(size=(4, 3)) + 1j * rng.normal(size=(4, 3))
    ip = rng.normal(size=(4, 3)) + 1j * rng.normal(size=(4, 3))
    k0, k0m = 0.62 - 0.05j, 0.35 + 0.02j
    z_g = rng.normal(size=(4, 3)) + 1j * rng.normal(size=(4, 3))
    v = z_g * (i + k0 * i.sum(-1, keepdims=True) + k0m * ip.sum(-1, keepdims=True))
    loops = loop_impedances(v, i, k0, i_parallel=ip, k0m=k0m)
    for p, name in enumerate(("AG", "BG", "CG")):
        np.testing.assert_allclose(loops[name], z_g[:, p], rtol=1e-12)
    # Phase loops of the same V and I, directly from their definition.
    for name, x, y in (("AB", 0, 1), ("BC", 1, 2), ("CA", 2, 0)):
        expected = (v[:, x] - v[:, y]) / (i[:, x] - i[:, y])
        np.testing.assert_allclose(loops[name], expected, rtol=1e-12)
    # Without the parallel current the mutual term is absent.
    plain = loop_impedances(v, i, k0)
    np.testing.assert_allclose(plain["AG"], v[:, 0] / (i[:, 0] + k0 * i.sum(-1)), rtol=1e-12)


def test_loop_with_no_current_is_not_finite():
    # A phase loop whose two currents are equal has no loop current (division by zero).
    loops = loop_impedances(np.array([1.0, 0.5, 0.2]), np.array([5.0, 1.0, 1.0]), 0.5)
    assert not np.isfinite(loops["BC"])
    assert np.isfinite(loops["AB"])


def test_reach_error_hand_values():
    # Z1L = 10 ohm at 80 deg (|Z1L| = 10, X1L = 10 sin 80 deg), fault at m = 0.8.
    z1 = cmath.rect(10.0, math.radians(80))
    m = 0.8
    # Measured 7.6 ohm on the line angle: m_app = 0.76, along = 100 (0.8 - 0.76)/0.8 = +5 %
    # (overreach); reactance 7.6 sin80 vs 8 sin80: also +5 %.
    along, react = reach_error_pct(cmath.rect(7.6, math.radians(80)), m, z1)
    assert along == pytest.approx(5.0, abs=1e-12)
    assert react == pytest.approx(5.0, abs=1e-12)
    # 8.4 ohm on the line angle: -5 % (underreach).
    along, _ = reach_error_pct(cmath.rect(8.4, math.radians(80)), m, z1)
    assert along == pytest.approx(-5.0, abs=1e-12)
    # m Z1L plus 2 ohm of fault resistance: m_app = 0.8 + 2 cos80 / 10, so
    # along = -100 * 0.2 cos 80 / 0.8 = -4.3412 %, reactance error 0.
    along, react = reach_error_pct(m * z1 + 2.0, m, z1)
    assert along == pytest.approx(-100 * 0.2 * math.cos(math.radians(80)) / 0.8, abs=1e-12)
    assert react == pytest.approx(0.0, abs=1e-12)
    # Broadcasting and NaN at m = 0.
    along, react = reach_error_pct(np.array([0.1, 3.0]), np.array([0.0, 0.3]), z1)
    assert math.isnan(along[0]) and math.isnan(react[0])
    assert np.isfinite(along[1])


def test_loops_for_fault():
    # Assignment of loops to faults (common practice, no source): ground faults ->
    # their ground loop; phase faults -> their phase loop; double-phase-ground -> the
    # phase loop and both ground loops; three-phase -> the three phase loops.
    assert loops_for_fault("AG") == ("AG",)
    assert loops_for_fault("CA") == ("CA",)
    assert set(loops_for_fault("BCG")) == {"BC", "BG", "CG"}
    assert set(loops_for_fault("ABC")) == {"AB", "BC", "CA"}
    assert {ft for ft in FAULT_TYPES if loops_for_fault(ft)} == set(FAULT_TYPES)
    with pytest.raises(InputError):
        loops_for_fault("AX")


@pytest.mark.parametrize(
    ("overreach", "budget", "cap", "margin", "expected"),
    [
        (5.0, 10.0, 100.0, 0.0, 86.5),  # 100 / 1.15 = 86.96 -> 86.5
        (5.0, 10.0, 80.0, 0.0, 80.0),  # capped by the philosophy
        (-3.0, 10.0, 100.0, 0.0, 90.5),  # underreach not counted: 100 / 1.1 = 90.91 -> 90.5
        (25.0, 0.0, 100.0, 0.0, 80.0),  # exactly 80: stays 80.0 (no float slip to 79.5)
        (14.5, 2.0, 100.0, 0.0, 85.5),  # 100 / 1.165 = 85.84 -> 85.5
        (0.0, 0.0, 100.0, 0.0, 100.0),
        (120.0, 5.0, 85.0, 0.0, 44.0),  # 100 / 2.25 = 44.44 -> 44.0
        (5.0, 10.0, 100.0, 10.0, 78.0),  # 90 / 1.15 = 78.26 -> 78.0
    ],
)
def test_recommended_zone1_hand_values(overreach, budget, cap, margin, expected):
    # Hand-derived from r (1 + (b + max(0, e))/100) <= 100 - margin, rounded down to 0.5 %.
    assert recommended_zone1_pct(overreach, budget, cap, margin) == expected


def test_recommended_zone1_bad_input():
    with pytest.raises(InputError) as err:
        recommended_zone1_pct(5.0, -1.0, 80.0)
    assert err.value.field == "error_budget_pct"
    with pytest.raises(InputError) as err:
        recommended_zone1_pct(5.0, 10.0, 120.0)
    assert err.value.field == "philosophy_max_pct"
    with pytest.raises(InputError):
        recommended_zone1_pct(float("nan"), 10.0, 80.0)
    with pytest.raises(InputError) as err:
        recommended_zone1_pct(5.0, 10.0, 80.0, margin_pct=100.0)
    assert err.value.field == "margin_pct"
