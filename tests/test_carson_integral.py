r"""Carson's earth-return correction against direct numerical integration of his integral.

Reference: J. R. Carson, "Wave propagation in overhead wires with ground return," Bell
System Technical Journal, vol. 5, pp. 539-554, 1926:

.. math::

    \Delta Z_{ij} = \frac{j\omega\mu_0}{\pi}\int_0^\infty
    \frac{e^{-(h_i+h_j)\lambda}\cos(x_{ij}\lambda)}{\lambda + \sqrt{\lambda^2 + j\omega\mu_0/\rho}}
    \,d\lambda

With :math:`\lambda = t/D` (:math:`D = \sqrt{(h_i+h_j)^2 + x_{ij}^2}`, the distance to the
image) this becomes :math:`(j\omega\mu_0/\pi)\,J(r, \theta)` with

.. math::

    J(r, \theta) = \int_0^\infty
    \frac{e^{-t\cos\theta}\cos(t\sin\theta)}{t + \sqrt{t^2 + j r^2}}\,dt,

:math:`r = D\sqrt{\omega\mu_0/\rho}` and :math:`\tan\theta = x_{ij}/(h_i + h_j)`. J is
integrated here with scipy.integrate.quad, real and imaginary parts separately: plain
adaptive quadrature on [0, T] split at multiples of r (the integrand changes on the scale
t ~ r), and for the tail [T, inf) QUADPACK's Fourier integrator QAWF (``weight='cos'``),
which handles the slowly damped oscillation when theta approaches 90 degrees.

Tolerance: the engine's docstring (relayset.physics.earth) states that its series and
asymptotic forms agree with direct integration to better than 2e-7 relative; the test
asserts 1e-6 relative on |ΔZ| (and on each of Re, Im measured against |ΔZ|) over
1e-3 <= r <= 50 and 0 <= theta <= 89 degrees. The quadrature itself is asked for 1e-11
relative and checked against its own error estimate.
"""

from __future__ import annotations

import itertools
import math

import numpy as np
import pytest
from scipy.integrate import quad

from relayset.physics.earth import (
    EARTH_MODELS,
    earth_correction_ohm_per_m,
    list_earth_models,
)

MU0 = 4e-7 * math.pi  # the value the published test cases use (see relayset constants)
REL_TOL_FULL = 1e-6
REL_TOL_TRUNCATED_SMALL_R = 0.01
_QUAD_EPSREL = 1e-11


def _integrand_parts(r: float, c: float):
    """Real and imaginary parts of exp(-t c) / (t + sqrt(t^2 + j r^2))."""

    def g(t: float) -> complex:
        return math.exp(-t * c) / (t + np.sqrt(complex(t * t, r * r)))

    return (lambda t: g(t).real), (lambda t: g(t).imag)


def carson_integral_j(r: float, theta: float) -> tuple[complex, float]:
    """J(r, theta) by scipy.integrate.quad; returns (value, estimated absolute error)."""
    c, s = math.cos(theta), math.sin(theta)
    parts = _integrand_parts(r, c)
    # Finite part: breakpoints at the scales of the integrand (r) and of the oscillation.
    t_end = 60.0 if c * 60.0 > 40.0 else 400.0
    scales = [r * k for k in (0.1, 1.0, 10.0, 100.0) if r * k < t_end]
    # Chunks of 10 keep each piece to under two oscillation periods when theta -> 90 deg.
    edges = sorted({0.0, *scales, *np.arange(10.0, t_end, 10.0).tolist(), t_end})
    value = [0.0, 0.0]
    err = 0.0
    for k, part in enumerate(parts):
        for a, b in itertools.pairwise(edges):
            v, e = quad(
                lambda t, f=part: f(t) * math.cos(s * t),
                a,
                b,
                epsabs=1e-14,
                epsrel=_QUAD_EPSREL,
                limit=400,
            )
            value[k] += v
            err += e
        if c * t_end <= 40.0:  # tail not negligible: Fourier integral on [t_end, inf)
            v, e = quad(
                part, t_end, np.inf, weight="cos", wvar=s, limlst=200, limit=400, epsabs=1e-15
            )
            value[k] += v
            err += e
    return complex(value[0], value[1]), err


def reference_delta_z(h_i, h_j, x, f, rho) -> complex:
    """Carson's ΔZ [ohm/m] from the integral (independent of relayset)."""
    d_image = math.hypot(h_i + h_j, x)
    theta = math.atan2(abs(x), h_i + h_j)
    r = d_image * math.sqrt(2 * math.pi * f * MU0 / rho)
    j_val, j_err = carson_integral_j(r, theta)
    assert j_err <= 1e-9 * abs(j_val), (r, theta, j_err)
    return 1j * 2 * math.pi * f * MU0 / math.pi * j_val


def _cases():
    """(h_i, h_j, x, f, rho) spanning r = 1e-3 ... 50 and theta = 0 ... 89 degrees."""
    geometries = [
        (4.0, 4.0, 0.0),  # self term, low-voltage conductor
        (10.0, 10.0, 0.0),  # self term, 10 m conductor
        (25.0, 25.0, 0.0),  # self term, transmission height
        (12.0, 9.0, 3.0),  # distribution crossarm, theta ~ 8 deg
        (30.0, 22.0, 30.0),  # double circuit, theta ~ 30 deg
        (20.0, 20.0, 69.3),  # parallel lines, theta ~ 60 deg
        (15.0, 15.0, 343.0),  # distant pipeline / line, theta ~ 85 deg
        (10.0, 10.0, 1146.0),  # far parallel, theta ~ 89 deg
    ]
    freqs = [50.0, 60.0, 1e3, 2e4, 5e5]
    rhos = [10000.0, 100.0, 1.0]
    out = []
    for h_i, h_j, x in geometries:
        for f in freqs:
            for rho in rhos:
                r = math.hypot(h_i + h_j, x) * math.sqrt(2 * math.pi * f * MU0 / rho)
                if 1e-3 <= r <= 50.0:
                    out.append((h_i, h_j, x, f, rho))
    return out


CASES = _cases()


def test_cases_cover_the_stated_range():
    """The grid really spans r from about 1e-3 to 50 and theta up to 89 degrees."""
    rs = [
        math.hypot(a + b, x) * math.sqrt(2 * math.pi * f * MU0 / rho) for a, b, x, f, rho in CASES
    ]
    thetas = [math.degrees(math.atan2(x, a + b)) for a, b, x, _f, _rho in CASES]
    assert min(rs) < 3e-3 and max(rs) > 30.0
    assert max(thetas) > 88.0 and min(thetas) == 0.0
    assert len(CASES) >= 40


@pytest.mark.parametrize(("h_i", "h_j", "x", "f", "rho"), CASES)
def test_full_carson_matches_integral(h_i, h_j, x, f, rho):
    """'carson' against scipy quad of Carson (1926) eq. for ΔZ: 1e-6 relative."""
    ref = reference_delta_z(h_i, h_j, x, f, rho)
    got = complex(earth_correction_ohm_per_m("carson", h_i, h_j, x, f, rho))
    scale = abs(ref)
    assert abs(got - ref) <= REL_TOL_FULL * scale
    assert abs(got.real - ref.real) <= REL_TOL_FULL * scale
    assert abs(got.imag - ref.imag) <= REL_TOL_FULL * scale


def test_full_carson_broadcasts_like_scalar_calls():
    """Array inputs give the same numbers as element-wise calls (identity)."""
    h = np.array([10.0, 20.0, 15.0])
    x = np.array([0.0, 5.0, 300.0])
    arr = earth_correction_ohm_per_m("carson", h[:, None], h[None, :], x[:, None], 50.0, 100.0)
    assert arr.shape == (3, 3)
    for i in range(3):
        for j in range(3):
            one = earth_correction_ohm_per_m("carson", h[i], h[j], x[i], 50.0, 100.0)
            assert complex(arr[i, j]) == pytest.approx(complex(one), rel=1e-14)


@pytest.mark.parametrize(
    ("h_i", "h_j", "x", "f", "rho"),
    [
        (10.0, 10.0, 0.0, 50.0, 100.0),  # r ~ 0.04
        (10.0, 10.0, 0.0, 60.0, 1000.0),
        (12.0, 9.0, 3.0, 60.0, 100.0),
        (30.0, 22.0, 30.0, 50.0, 1000.0),
        (15.0, 15.0, 80.0, 50.0, 10000.0),  # theta ~ 70 deg
        (8.0, 8.0, 0.0, 50.0, 10000.0),  # r ~ 3e-3
    ],
)
def test_truncated_converges_to_full_for_small_r(h_i, h_j, x, f, rho):
    """For r < 0.05 the two-term carson_truncated is within 1 % of the integral."""
    r = math.hypot(h_i + h_j, x) * math.sqrt(2 * math.pi * f * MU0 / rho)
    assert r < 0.05
    ref = reference_delta_z(h_i, h_j, x, f, rho)
    got = complex(earth_correction_ohm_per_m("carson_truncated", h_i, h_j, x, f, rho))
    assert abs(got - ref) <= REL_TOL_TRUNCATED_SMALL_R * abs(ref)
    # ... and the neglected terms are O(r): the error shrinks with r (identity of the series).
    if r < 0.01:
        assert abs(got - ref) <= 0.003 * abs(ref)


def test_truncated_departs_from_full_at_large_r():
    """Control: at r ~ 2 the truncation error is well above 1 % (the test can fail)."""
    h, f, rho = 20.0, 5e4, 10.0
    ref = reference_delta_z(h, h, 0.0, f, rho)
    got = complex(earth_correction_ohm_per_m("carson_truncated", h, h, 0.0, f, rho))
    assert abs(got - ref) > 0.05 * abs(ref)


def test_model_registry_names():
    """The four documented earth models are registered."""
    assert set(list_earth_models()) == {"carson", "carson_truncated", "deri", "two_layer"}
    assert set(EARTH_MODELS) == set(list_earth_models())
