"""Physics models against sources outside relayset: textbook formulas, handbook values and
general-purpose libraries (scipy.linalg.expm, scipy.special Kelvin functions).

Each check names its source beside it; remembered values say "from memory".
"""

from __future__ import annotations

import cmath
import itertools
import math

import numpy as np
import pytest
from numpy.testing import assert_allclose

from relayset.physics.conductor import (
    ALUMINIUM_LAYERS,
    resistance_at_temperature,
    skin_effect_ratio,
)
from relayset.physics.longline import long_line_equivalent
from relayset.physics.sequence import unbalance_factors

from reference_cases.ieee_feeders import CONFIGURATIONS, MILE_M

MU0 = 4e-7 * math.pi  # H/m, the classical value (written out here, not imported)


# ------------------------------------------------------------------ exact long-line pi


def _abcd_by_expm(z: complex, y: complex, length_m: float) -> np.ndarray:
    """ABCD matrix of a uniform line from the telegrapher's equations d/dx [V, I] =
    [[0, z], [y, 0]] [V, I], integrated exactly by scipy.linalg.expm (independent of any
    hyperbolic formula)."""
    from scipy.linalg import expm

    return expm(np.array([[0, z], [y, 0]], dtype=complex) * length_m)


@pytest.mark.parametrize(("z_ohm_per_km", "y_us_per_km", "length_km"), [
    (0.0165 + 0.3306j, 4.674j, 300.0),  # the 765 kV line of the textbook example below
    (0.06 + 0.40j, 2.9j, 80.0),  # a 132 kV-like positive sequence
    (0.30 + 1.20j, 2.0j, 450.0),  # a zero-sequence-like network, long
])
def test_exact_pi_equals_distributed_line_solution(z_ohm_per_km, y_us_per_km, length_km):
    # The exact pi is the two-port of the distributed line: Z' = B and Y'/2 = (A - 1)/B of
    # the ABCD matrix (Glover, Overbye & Sarma, Power System Analysis and Design, 6th ed.,
    # sec. 5.2-5.3: Z' = Zc sinh(gl), Y'/2 = tanh(gl/2)/Zc). ABCD from scipy.linalg.expm of
    # the telegrapher's equations; agreement 1e-10 relative (expm round-off).
    z, y, ln = z_ohm_per_km / 1e3, y_us_per_km * 1e-6 / 1e3, length_km * 1e3
    abcd = _abcd_by_expm(z, y, ln)
    e = long_line_equivalent(z, y, ln)
    assert_allclose(e.z_exact_ohm, abcd[0, 1], rtol=1e-10, atol=0)
    assert_allclose(e.y_exact_s / 2, (abcd[0, 0] - 1) / abcd[0, 1], rtol=1e-10, atol=0)
    # Zc and gamma: B/C = Zc^2, A = cosh(gl)
    assert_allclose(e.surge_impedance_ohm ** 2, abcd[0, 1] / abcd[1, 0], rtol=1e-10, atol=0)
    assert_allclose(np.cosh(e.propagation_per_m * ln), abcd[0, 0], rtol=1e-10, atol=0)
    assert e.z_nominal_ohm == z * ln and e.y_nominal_s == y * ln


def test_exact_pi_textbook_example_765kv():
    # Glover, Overbye & Sarma, Power System Analysis and Design (5th/6th ed.), Example 5.2
    # (from memory: example number and printed digits): 765 kV, 60 Hz, 300 km,
    # z = 0.0165 + j0.3306 ohm/km, y = j4.674e-6 S/km gives Zc = 266.1/-1.43 deg ohm,
    # gamma*l = 0.3731/88.57 deg, A = cosh(gamma*l) = 0.9313/0.209 deg, B = Z' = 97.0/87.2
    # deg ohm against the nominal 99.3/87.14 deg ohm. Tolerance: half a unit of the last
    # printed digit, one unit for |gamma*l| (exact 0.37315: the book's rounded intermediates).
    e = long_line_equivalent((0.0165 + 0.3306j) / 1e3, 4.674e-6j / 1e3, 300e3)

    def deg(x):
        return math.degrees(cmath.phase(x))

    gl = e.propagation_per_m * 300e3
    assert abs(e.surge_impedance_ohm) == pytest.approx(266.1, abs=0.05)
    assert deg(e.surge_impedance_ohm) == pytest.approx(-1.43, abs=0.005)
    assert abs(gl) == pytest.approx(0.3731, abs=1e-4)
    assert deg(gl) == pytest.approx(88.57, abs=0.005)
    assert abs(np.cosh(gl)) == pytest.approx(0.9313, abs=5e-5)
    assert deg(np.cosh(gl)) == pytest.approx(0.209, abs=5e-4)
    assert abs(e.z_exact_ohm) == pytest.approx(97.0, abs=0.05)
    assert deg(e.z_exact_ohm) == pytest.approx(87.2, abs=0.05)
    assert abs(e.z_nominal_ohm) == pytest.approx(99.3, abs=0.05)
    # the correction relayset reports: |Z'/(z l) - 1| = 1 - 97.0/99.3 ~ 2.3 %
    assert e.series_correction_pct == pytest.approx(2.3, abs=0.1)


# ------------------------------------------------------- temperature and skin effect


def test_resistance_temperature_correction_hand_values():
    # R(T) = R20 (1 + alpha (T - 20)), alpha = 0.00403 1/K for hard-drawn aluminium
    # (IEC 60889). Hand values: 0.1188 ohm/km at 20 degC -> 75 degC:
    # 0.1188 * (1 + 0.00403 * 55) = 0.1188 * 1.22165 = 0.14513202 ohm/km.
    alpha = 0.00403
    assert resistance_at_temperature(0.1188e-3, 20.0, 75.0, alpha) * 1e3 == pytest.approx(
        0.14513202, rel=1e-12, abs=0)
    # From a reference at 50 degC to 75 degC: R75 = R50 (1 + 55 a)/(1 + 30 a)
    # = 0.1859 * 1.22165/1.1209 = 0.202607... ohm/mi (hand: 1.22165/1.1209 = 1.0898832)
    assert resistance_at_temperature(0.1859, 50.0, 75.0, alpha) == pytest.approx(
        0.1859 * 1.0898832, rel=1e-7, abs=0)
    # Back to 20 degC from 50 degC: R20 = R50/(1 + 30 a) = 0.1859/1.1209
    assert resistance_at_temperature(0.1859, 50.0, 20.0, alpha) == pytest.approx(
        0.1859 / 1.1209, rel=1e-12, abs=0)


def _kelvin_ratio(x: float) -> float:
    """AC/DC resistance ratio of a round wire by Kelvin functions (scipy.special):
    R/Rdc = (x/2) (ber x bei' x - bei x ber' x) / (ber'^2 x + bei'^2 x),
    x = a sqrt(omega mu0 / rho) (S. Ramo, J. R. Whinnery, T. Van Duzer, Fields and Waves in
    Communication Electronics, 3rd ed., sec. 5.12; the Kelvin-function form)."""
    from scipy.special import bei, beip, ber, berp

    return float((x / 2) * (ber(x) * beip(x) - bei(x) * berp(x)) / (berp(x) ** 2 + beip(x) ** 2))


@pytest.mark.parametrize(("x", "handbook"), [
    # R/Rdc of a round wire against x = a sqrt(omega mu0/rho): tables of the Kelvin-function
    # solution (F. E. Terman, Radio Engineers' Handbook, 1943, skin-effect table; from
    # memory, printed to 3 decimals).
    (1.0, 1.005), (2.0, 1.078), (3.0, 1.318), (5.0, 2.043),
])
def test_skin_effect_ratio_against_kelvin_functions_and_table(x, handbook):
    a, f = 0.0148, 50.0
    rho = 2 * math.pi * f * MU0 * a * a / x**2
    r_dc = rho / (math.pi * a * a)
    got = skin_effect_ratio(r_dc, a, f)
    assert got == pytest.approx(_kelvin_ratio(x), rel=1e-12, abs=0)  # scipy.special ber/bei
    assert got == pytest.approx(handbook, abs=5e-4)  # table, half a unit of the 3rd decimal


def test_skin_effect_ratio_limits():
    # Low frequency: R/Rdc = 1 + x^4/192 - ... ; high frequency: x/(2 sqrt 2) + 1/4 + O(1/x)
    # (Ramo, Whinnery & Van Duzer, sec. 5.12, series and asymptotic forms; from memory).
    a, f = 0.0148, 50.0

    def ratio(x):
        return skin_effect_ratio(2 * math.pi * f * MU0 / x**2 / math.pi, a, f)

    assert ratio(0.3) - 1 == pytest.approx(0.3**4 / 192, rel=1e-3, abs=0)
    assert ratio(40.0) == pytest.approx(40 / (2 * math.sqrt(2)) + 0.25, rel=1e-3, abs=0)


# ------------------------------------------------------------------ m0/m2 unbalance


def test_unbalance_factors_by_their_definition_on_the_601_matrix():
    # m0 = Y01/Y11, m2 = Y21/Y11 (Anderson, Analysis of Faulted Power Systems, ch. 4; from
    # memory) are the zero- and negative-sequence currents per unit positive-sequence current
    # that flow when the line is driven by balanced positive-sequence voltages with its ends
    # short-circuited: I_abc = Zabc^-1 V_abc, V_abc = (1, a^2, a). Sequence currents written
    # out by hand from Fortescue's definitions: I0 = (Ia + Ib + Ic)/3,
    # I1 = (Ia + a Ib + a^2 Ic)/3, I2 = (Ia + a^2 Ib + a Ic)/3. Matrix: IEEE 13-node
    # configuration 601, published (tests/reference_cases). Agreement 1e-12 relative.
    from relayset.physics.sequence import to_sequence

    a = cmath.exp(2j * math.pi / 3)
    zabc = np.array(CONFIGURATIONS["601"]["z_ohm_per_mile"], dtype=complex) / MILE_M
    ia, ib, ic = np.linalg.solve(zabc, np.array([1, a * a, a]))
    i0 = (ia + ib + ic) / 3
    i1 = (ia + a * ib + a * a * ic) / 3
    i2 = (ia + a * a * ib + a * ic) / 3
    m0, m2 = unbalance_factors(to_sequence(zabc))
    assert_allclose(m0, i0 / i1, rtol=1e-12, atol=0)
    assert_allclose(m2, i2 / i1, rtol=1e-12, atol=0)
    # control: the transposed indices give other numbers, so the test sees an index swap
    y = np.linalg.inv(to_sequence(zabc))
    assert abs(y[1, 0] / y[1, 1] - i0 / i1) > 1e-3 * abs(i0 / i1)
    assert abs(y[1, 2] / y[1, 1] - i2 / i1) > 1e-3 * abs(i2 / i1)
    # an untransposed distribution line: a few percent (common practice, no source)
    assert 0.005 < abs(m0) < 0.2 and 0.005 < abs(m2) < 0.2


def test_unbalance_factors_zero_for_a_balanced_matrix():
    # A balanced (circulant symmetric) matrix has diagonal Z012 (Fortescue), so m0 = m2 = 0.
    from relayset.physics.sequence import balanced_phase_matrix, to_sequence

    m0, m2 = unbalance_factors(to_sequence(balanced_phase_matrix(0.1 + 0.4j, 0.3 + 1.2j)))
    assert abs(m0) < 1e-14 and abs(m2) < 1e-14


# ------------------------------------------------------------- stranding layer table

@pytest.mark.parametrize("construction", list(ALUMINIUM_LAYERS))
def test_aluminium_layers_are_concentric_lay(construction):
    # Concentric lay (ASTM B232/B232M for ACSR, ASTM B231/B231M for all-aluminium; IEC 61089,
    # now EN 50182): the layers add up to the aluminium wire count, and each layer, laid on
    # a larger circle, holds more wires than the one beneath it (six more when the wires are
    # of one size). A rule of the standards' construction tables, from memory.
    layers = ALUMINIUM_LAYERS[construction]
    assert sum(layers) == construction[0]
    assert all(b > a for a, b in itertools.pairwise(layers)), layers


def test_aluminium_layers_72_7():
    # 72/7 ACSR (e.g. the 1590 kcmil "Kiwi" construction): four aluminium layers of 9, 15,
    # 21 and 27 wires over a 7-wire steel core (ASTM B232 construction tables; from memory).
    # The table once read (12, 18, 24, 18): the GMR of a Kiwi-sized conductor came out
    # 12.9 mm instead of 13.9 mm (7 % low).
    assert ALUMINIUM_LAYERS[(72, 7)] == (9, 15, 21, 27)


def test_bessel_ratio_series_against_scipy():
    # The skin-effect ratio sums J0/J1 by the ascending series (Abramowitz & Stegun 9.1.10)
    # to avoid importing scipy.special; on the skin-effect ray (arg ka = -45 deg) it must
    # agree with scipy.special.jv (an independent implementation) to 1e-13 relative.
    from scipy.special import jv

    from relayset.physics.conductor import _bessel_j0_over_j1

    r = np.linspace(1e-3, 15.0, 400)
    for angle in (-np.pi / 4, 3 * np.pi / 4):
        z = r * np.exp(1j * angle)
        got = np.array([_bessel_j0_over_j1(complex(x)) for x in z])
        assert_allclose(got, jv(0, z) / jv(1, z), rtol=1e-13, atol=0)
    # beyond the series' range scipy is used directly
    z = 40.0 * np.exp(-1j * np.pi / 4)
    assert _bessel_j0_over_j1(complex(z)) == complex(jv(0, z) / jv(1, z))
