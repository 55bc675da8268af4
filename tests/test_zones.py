"""Zone physics against published formulas, hand calculations and circuit identities."""

from __future__ import annotations

import math

import numpy as np
import pytest

from relayset.physics import zones as zp
from relayset.physics.sequence import residual_compensation, residual_compensation_split
from relayset.settings.checks import line_class

# ---------------------------------------------------------------- Warrington


def test_warrington_no_wind_against_published_formula():
    # Source: A. R. van C. Warrington, "Reactance relays negligibly affected by arc impedance,"
    # Electrical World, vol. 98, no. 12, pp. 502-505, 1931: R = 8750 (s + 3 v t) / I^1.4,
    # s [ft], v [mph], t [s]. Hand value for I = 1000 A, s = 1 m = 3.280840 ft, no wind:
    # 1000^1.4 = 10^4.2 = 15 848.93; R = 8750 x 3.280840 / 15 848.93 = 1.81131 ohm.
    assert zp.warrington_arc_resistance_ohm(1000.0, 1.0) == pytest.approx(1.81131, rel=1e-5)


def test_warrington_with_wind_against_published_formula():
    # Same source. I = 1000 A, s = 10 ft (3.048 m), v = 10 mph (4.4704 m/s), t = 0.5 s:
    # R = 8750 x (10 + 3 x 10 x 0.5) / 15 848.93 = 8750 x 25 / 15 848.93 = 13.8022 ohm.
    r = zp.warrington_arc_resistance_ohm(1000.0, 3.048, wind_speed_m_per_s=4.4704, duration_s=0.5)
    assert r == pytest.approx(13.8022, rel=1e-5)


def test_warrington_si_constants_identity():
    # Identity: 8750 ohm.A^1.4/ft = 8750 / 0.3048 ohm.A^1.4/m; 3 mph.s -> ft becomes
    # 3 x 0.3048 / 0.44704 = 45/22 m per (m/s.s) (exact foot and mile per hour definitions).
    assert zp.WARRINGTON_K_SI == pytest.approx(28707.349, rel=1e-7)
    assert zp.WARRINGTON_WIND_SI == pytest.approx(45 / 22, rel=1e-12)


def test_warrington_vectorised_and_current_exponent():
    # Identity from the formula: doubling the current divides R by 2^1.4.
    r = zp.warrington_arc_resistance_ohm(np.array([500.0, 1000.0]), 2.0)
    assert r.shape == (2,)
    assert r[0] / r[1] == pytest.approx(2**1.4, rel=1e-12)
    with pytest.raises(ValueError):
        zp.warrington_arc_resistance_ohm(0.0, 1.0)


# ---------------------------------------------------------------- conversions


def test_secondary_ohm_identity():
    # Identity Z_sec = Z_pri x n_CT / n_VT: CT 800/1, VT 132000/110 gives 800/1200 = 2/3.
    z = zp.secondary_ohm(4 + 40j, 800 / 1, 132000 / 110)
    assert complex(z) == pytest.approx((4 + 40j) * 2 / 3, rel=1e-12)
    # Round trip back to primary.
    assert complex(z) * (132000 / 110) / 800 == pytest.approx(4 + 40j, rel=1e-12)


def test_min_load_impedance_identity():
    # Hand value: (0.9 x 132 kV)^2 / 160 MVA = 118 800^2 / 1.6e8 = 88.209 ohm.
    z = zp.min_load_impedance_ohm(0.9 * 132e3, 160e6)
    assert float(z) == pytest.approx(88.209, rel=1e-9)
    # Identity with the per-phase form V_ph / I, I = S / (sqrt(3) V_LL).
    v = 0.9 * 132e3
    assert float(z) == pytest.approx((v / math.sqrt(3)) / (160e6 / (math.sqrt(3) * v)), rel=1e-12)


# ---------------------------------------------------------------- mho


def test_mho_diameter_for_point_puts_point_on_circle():
    # Identity: the target lies on the circle of the returned diameter.
    zt = 10 + 45j
    ang = math.radians(70)
    d = float(zp.mho_diameter_for_point_ohm(zt, ang))
    centre = d / 2 * np.exp(1j * ang)
    assert abs(zt - centre) == pytest.approx(d / 2, rel=1e-12)


# ---------------------------------------------------------------- SIR, infeed, k0


def test_sir_and_line_class_thresholds():
    # IEEE Std C37.113-2015, IEEE Guide for Protective Relay Applications to Transmission
    # Lines, line-length classes by SIR (thresholds from memory): short >= 4, long <= 0.5.
    assert float(zp.sir(3 + 40j, 0.3 + 4j)) == pytest.approx(10.0, rel=1e-12)
    assert line_class(4.0) == "short"
    assert line_class(3.99) == "medium"
    assert line_class(0.51) == "medium"
    assert line_class(0.5) == "long"
    assert list(line_class(np.array([10.0, 1.0, 0.1]))) == ["short", "medium", "long"]


def _infeed_by_circuit(zs, zl, zr, zx):
    """Solve the two-source network by Kirchhoff's laws; return (Z_app - Z_L) / Z_x."""
    e = 1.0
    # Unknown node voltages V_A, V_B; bolted fault at Z_x beyond B (fault node at 0 V).
    y = np.array([[1 / zs + 1 / zl, -1 / zl], [-1 / zl, 1 / zl + 1 / zr + 1 / zx]])
    va, vb = np.linalg.solve(y, np.array([e / zs, e / zr]))
    z_app = va / ((va - vb) / zl)
    return (z_app - zl) / zx


def test_infeed_factor_against_circuit_solution():
    # Identity: the closed form K = 1 + (Zs + Zl) / Zr equals the apparent-impedance ratio of a
    # nodal solution of the same network (equal EMFs, no load), for any fault position.
    rng = np.random.default_rng(7)
    for _ in range(20):
        zs, zl, zr, zx = (complex(rng.uniform(0.1, 5), rng.uniform(1, 50)) for _ in range(4))
        assert complex(zp.infeed_factor(zs, zl, zr)) == pytest.approx(
            _infeed_by_circuit(zs, zl, zr, zx), rel=1e-9
        )


def test_infeed_factor_hand_value():
    # Hand value: Zs = 1.5u, Zl = 4u, Zr = 3u (u = 1 + 10j): K = 1 + 5.5/3 = 2.8333.
    u = 1 + 10j
    assert complex(zp.infeed_factor(1.5 * u, 4 * u, 3 * u)) == pytest.approx(17 / 6, rel=1e-12)
    assert complex(zp.infeed_factor(1.5 * u, 4 * u, np.inf)) == pytest.approx(1.0)


def test_k0_forms_hand_values():
    # Hand values for Z1 = 4 + 40j, Z0 = 10 + 130j:
    # k0 = (6 + 90j)/(12 + 120j) = (10872 + 360j)/14544 = 0.747525 + 0.024752j;
    # kR = (10 - 4)/12 = 0.5; kX = (130 - 40)/120 = 0.75. Identity: 1 + 3 k0 = Z0/Z1.
    k0 = complex(residual_compensation(4 + 40j, 10 + 130j))
    assert k0 == pytest.approx(10872 / 14544 + 360j / 14544, rel=1e-12)
    kr, kx = residual_compensation_split(4 + 40j, 10 + 130j)
    assert (float(kr), float(kx)) == pytest.approx((0.5, 0.75), rel=1e-12)
    assert 1 + 3 * k0 == pytest.approx((10 + 130j) / (4 + 40j), rel=1e-12)
