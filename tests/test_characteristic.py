"""Zone characteristics (relayset.physics.characteristic) against hand geometry and identities.

Shapes as in IEEE Std C37.113-2015 (mho circle through the origin; quadrilateral of a
reactance line, two resistive blinders parallel to the line angle and a directional line).
The quadrilateral's reactance-line tilt: a line through (0, X_reach) with slope -tan(tau)
(hand geometry). Tolerances are stated beside each check.
"""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose

from relayset import api
from relayset.physics.characteristic import Mho, Quadrilateral

D132 = "ashcombe_brenwick_132kv.toml"  # mho zones
D230 = "elsford_fallowby_230kv_double.toml"  # quadrilateral zones
# Points closer than this to a boundary (in reach scale) are left out of the iff checks:
# the rounding allowance of contains() is 1e-12 ohm-relative.
CLEAR = 1e-9


def _quads():
    """Quadrilaterals of every kind: both directions, tilts of both signs, left blinder,
    a directional line that is not perpendicular to the line angle."""
    out = []
    for direction in ("forward", "reverse"):
        for tilt in (0.0, math.radians(6), math.radians(25), math.radians(-4)):
            out.append(Quadrilateral(30.0, 12.0, math.radians(78), direction=direction,
                                     tilt_rad=tilt))
        out.append(Quadrilateral(30.0, 12.0, math.radians(78), r_left_ohm=5.0,
                                 direction=direction, tilt_rad=math.radians(10),
                                 directional_angle_rad=math.radians(-20)))
    return out


def _mhos():
    fwd = math.radians(75)
    return [Mho(40.0, fwd, "forward"), Mho(15.0, math.remainder(fwd + math.pi, 2 * math.pi),
                                            "reverse")]


def _points(n=20000, seed=3):
    rng = np.random.default_rng(seed)
    return rng.normal(0, 35, n) + 1j * rng.normal(0, 35, n)


# ---------------------------------------------------------------- contains vs reach scale


@pytest.mark.parametrize("char", _quads() + _mhos(), ids=repr)
def test_reach_scale_at_most_one_exactly_where_contains(char):
    # Identity (definition of the reach scale): s <= 1 iff the point is inside, for random
    # points away from the boundary.
    z = _points()
    s = char.reach_scale(z)
    inside = char.contains(z)
    clear = np.abs(s - 1) > CLEAR
    assert np.count_nonzero(inside) > 200 and np.count_nonzero(~inside) > 200
    assert np.array_equal((s <= 1)[clear], inside[clear])


@pytest.mark.parametrize("char", _quads() + _mhos(), ids=repr)
def test_reach_scale_puts_the_point_on_the_scaled_boundary(char):
    # Definition: with the forward reach (mho diameter, quad reactive reach) scaled by s and
    # everything else kept, the point sits on the boundary: inside at s(1 + 1e-7), outside
    # at s(1 - 1e-7).
    z = _points(3000, seed=5)
    s = char.reach_scale(z)
    # Well-conditioned scales only (a mho of 100 times the diameter has a rounding
    # allowance of the order of the 1e-7 step near the origin).
    ok = (s > 1e-3) & (s < 10)
    z, s = z[ok], s[ok]
    assert z.size > 250

    def scaled(k):
        if isinstance(char, Mho):
            return replace(char, diameter_ohm=char.diameter_ohm * k)
        return replace(char, x_reach_ohm=char.x_reach_ohm * k)

    for zi, si in zip(z[:250], s[:250], strict=True):
        assert scaled(si * (1 + 1e-7)).contains(zi)
        assert not scaled(si * (1 - 1e-7)).contains(zi)


def test_reach_scale_behind_or_outside_the_blinders_is_inf():
    # Definition (module notes of relayset.studies.verification): s = inf where no reach
    # makes the zone operate.
    q = Quadrilateral(30.0, 12.0, math.radians(80))
    assert np.all(np.isinf(q.reach_scale([-5 - 5j, 40 + 1j, -40 + 1j, complex(math.nan, 1)])))
    m = Mho(40.0, math.radians(80))
    assert np.all(np.isinf(m.reach_scale([-5 - 5j, complex(math.inf, 0)])))


@pytest.mark.parametrize("char", _quads() + _mhos(), ids=repr)
def test_origin_is_inside_at_every_scale(char):
    # Definition: every boundary passes through (or encloses) the origin, so it is inside
    # and any positive scale reaches it: s = 0, in both shapes alike.
    assert char.contains(0j)
    assert float(char.reach_scale(0j)) == 0.0


def test_reach_scale_for_zero_tilt_is_the_verification_definition():
    # The formulas of relayset.studies.verification's module notes, written out:
    # s_mho = |Z|^2 / (D Re(Z e^{-j phi})), s_quad = Im Z / X_reach (inside the blinders,
    # on or above the R axis; 0 below it). Relative 1e-12.
    z = _points(4000, seed=11)
    phi, d = math.radians(72), 40.0
    proj = (z * np.exp(-1j * phi)).real
    fwd = proj > 0
    assert_allclose(Mho(d, phi).reach_scale(z)[fwd], (np.abs(z) ** 2 / (d * proj))[fwd],
                    rtol=1e-12, atol=0)
    th, x, r = math.radians(78), 30.0, 12.0
    q = Quadrilateral(x, r, th)
    s = q.reach_scale(z)
    sn, co = math.sin(th), math.cos(th)
    margin = np.maximum.reduce([z.real * sn - z.imag * co - r * sn,  # right blinder
                                -z.real * sn + z.imag * co - r * sn,  # left blinder
                                -(z * np.exp(-1j * th)).real])  # directional line
    between, outside = margin < -1e-9, margin > 1e-9
    assert np.count_nonzero(between) > 200 and np.count_nonzero(outside) > 200
    assert_allclose(s[between], np.maximum(z.imag[between], 0) / x, rtol=1e-12, atol=0)
    assert np.all(np.isinf(s[outside]))


def test_reverse_is_the_point_reflection():
    # Definition: a reverse-looking zone is the forward one reflected through the origin.
    z = _points(4000, seed=2)
    for tilt in (0.0, math.radians(8)):
        f = Quadrilateral(30.0, 12.0, math.radians(78), tilt_rad=tilt)
        r = replace(f, direction="reverse")
        assert np.array_equal(r.contains(-z), f.contains(z))
        assert np.array_equal(r.reach_scale(-z), f.reach_scale(z))
        assert_allclose(r.outline(), -f.outline(), rtol=0, atol=1e-12)
    phi = math.radians(75)
    f = Mho(20.0, phi)
    r = Mho(20.0, math.remainder(phi + math.pi, 2 * math.pi), "reverse")
    clear = np.abs(f.reach_scale(z) - 1) > CLEAR
    assert np.array_equal(r.contains(-z)[clear], f.contains(z)[clear])


# ---------------------------------------------------------------- reach along a ray


def test_mho_reach_along_is_d_cos_of_the_angle_from_the_diameter():
    # IEEE Std C37.113-2015 mho geometry (Thales: the chord from the origin at angle psi of a
    # circle with diameter D at phi has length D cos(psi - phi)), relative 1e-12.
    d, phi = 40.0, math.radians(80)
    psi = np.radians(np.linspace(-5, 165, 35))
    m = Mho(d, phi)
    assert_allclose(m.reach_along(psi), np.maximum(d * np.cos(psi - phi), 0), rtol=1e-12,
                    atol=0)
    assert float(m.reach_along(phi)) == pytest.approx(d, rel=1e-12)
    # The reverse zone behind the relay: the same chord along psi + pi.
    r = Mho(d, math.remainder(phi + math.pi, 2 * math.pi), "reverse")
    assert_allclose(r.reach_along(psi + math.pi), m.reach_along(psi), rtol=1e-12, atol=1e-12)


def test_quad_reach_along_the_line_angle():
    # Hand geometry: the ray along the line angle theta runs parallel to the blinders and
    # meets the reactance line. tau = 0: at X_reach / sin(theta). Tilted (line through
    # (0, X) with slope -tan tau): t sin(theta) = X - t cos(theta) tan(tau), so
    # t = X cos(tau) / sin(theta + tau). Relative 1e-12.
    x, r = 30.0, 12.0
    for th in np.radians([60.0, 75.0, 84.0, 90.0]):
        q = Quadrilateral(x, r, th)
        assert float(q.reach_along(th)) == pytest.approx(x / math.sin(th), rel=1e-12)
        back = replace(q, direction="reverse")
        assert float(back.reach_along(th + math.pi)) == pytest.approx(x / math.sin(th),
                                                                    rel=1e-12)
        for tau in np.radians([3.0, 10.0, -5.0]):
            qt = replace(q, tilt_rad=tau)
            assert float(qt.reach_along(th)) == pytest.approx(
                x * math.cos(tau) / math.sin(th + tau), rel=1e-12)


@pytest.mark.parametrize("char", _quads() + _mhos(), ids=repr)
def test_reach_along_lies_on_the_boundary(char):
    # Identity: just inside / just outside the returned distance along each ray.
    psi = np.radians(np.linspace(-179, 179, 181))
    t = char.reach_along(psi)
    u = np.exp(1j * psi)
    ok = t > 1e-9
    assert np.count_nonzero(ok) > 40
    assert np.all(char.contains(t[ok] * u[ok] * (1 - 1e-9)))
    assert not np.any(char.contains(t * u * (1 + 1e-6) + 1e-5 * u))


# ---------------------------------------------------------------- hand shapes


def test_quad_at_90_degrees_is_a_rectangle():
    # Hand geometry: with a 90 degree line angle the blinders are vertical and the directional
    # line is the R axis, so the shape is -R_left <= R <= R_reach, 0 <= X <= X_reach.
    inside = [5 + 5j, 0 + 0j, 8 + 20j, -4 + 20j, -4 + 0j]
    outside = [8.01 + 5j, -4.01 + 5j, 5 + 20.01j, 5 - 0.01j]
    q = Quadrilateral(20.0, 8.0, math.pi / 2, r_left_ohm=4.0)
    assert np.all(q.contains(inside))
    assert not np.any(q.contains(outside))
    # Corners, counter-clockwise from the right end of the directional line (abs 1e-12).
    assert_allclose(q.outline(), [8, 8 + 20j, -4 + 20j, -4], rtol=0, atol=1e-12)
    assert q.region() == {"kind": "polygon",
                          "vertices": [[8.0, 0.0], [8.0, 20.0], [-4.0, 20.0], [-4.0, 0.0]]}
    back = replace(q, direction="reverse")
    assert np.all(back.contains(-np.array(inside)))
    assert_allclose(back.outline(), [-8, -8 - 20j, 4 - 20j, 4], rtol=0, atol=1e-12)


def test_quad_blinder_is_parallel_to_line_angle():
    # Hand geometry: the right blinder passes through (R_reach + X cot(theta), X).
    th = math.radians(75)
    q = Quadrilateral(30.0, 10.0, th)
    for height in (0.0, 10.0, 29.0):
        edge = 10.0 + height / math.tan(th)
        assert q.contains(complex(edge - 1e-6, height))
        assert not q.contains(complex(edge + 1e-6, height))


def test_mho_matches_phase_comparator_form():
    # Identity: a self-polarised mho operates when the angle between Z and (Zr - Z) is at most
    # 90 degrees, i.e. Re(Z conj(Zr - Z)) >= 0 (Thales' theorem; the comparator form of the
    # mho, e.g. S. H. Horowitz and A. G. Phadke, Power System Relaying, distance chapter,
    # from memory).
    rng = np.random.default_rng(1)
    z = rng.uniform(-60, 60, 4000) + 1j * rng.uniform(-60, 60, 4000)
    d, ang = 50.0, math.radians(75)
    zr = d * np.exp(1j * ang)
    expected = np.real(z * np.conj(zr - z)) >= 0
    assert np.array_equal(Mho(d, ang).contains(z), expected)


def test_mho_region_and_outline():
    # Hand geometry: centre D/2 at phi, radius D/2 (abs 1e-12 ohm).
    m = Mho(40.0, math.pi / 2)
    reg = m.region()
    assert reg["kind"] == "circle"
    assert_allclose(reg["center"], [0.0, 20.0], rtol=0, atol=1e-12)
    assert reg["radius"] == 20.0
    pts = m.outline(36)
    assert_allclose(np.abs(pts - 20j), 20.0, rtol=1e-12, atol=0)
    assert np.all(m.contains(pts))


# ---------------------------------------------------------------- tilt


def _boundary_height(q: Quadrilateral, r: float) -> float:
    """Top of the shape above R = r, by bisection on contains() alone."""
    lo, hi = 0.0, 10 * q.x_reach_ohm
    for _ in range(200):
        mid = 0.5 * (lo + hi)
        lo, hi = (mid, hi) if q.contains(complex(r, mid)) else (lo, mid)
    return lo


@pytest.mark.parametrize("tau_deg", [0.0, 5.0, 12.0, -6.0])
def test_tilted_reactance_line_through_x_reach_with_slope_minus_tan_tau(tau_deg):
    # Hand geometry: the reactance line passes through (0, X_reach) with slope -tan(tau),
    # found from contains() alone (bisection; abs 1e-9 ohm, slope 1e-9).
    tau = math.radians(tau_deg)
    q = Quadrilateral(30.0, 20.0, math.radians(80), tilt_rad=tau)
    r1, r2 = 2.0, 9.0  # inside the blinders at that height (cot 80 deg x 30 = 5.3 < 20)
    x0, x1, x2 = (_boundary_height(q, r) for r in (0.0, r1, r2))
    assert x0 == pytest.approx(30.0, abs=1e-9)
    assert (x2 - x1) / (r2 - r1) == pytest.approx(-math.tan(tau), abs=1e-9)
    # On that line the reach scale is 1 (relative 1e-12).
    on = np.array([complex(r, 30.0 - r * math.tan(tau)) for r in (0.0, r1, r2)])
    assert_allclose(q.reach_scale(on), 1.0, rtol=1e-12, atol=0)
    # Positive tilt pulls the line down toward +R: less reach under export.
    if tau_deg > 0:
        assert x2 < x1 < x0


def test_steep_tilt_can_make_a_triangle():
    # Hand geometry: theta = 90 deg (directional line = R axis), tau = 45 deg, X = 10, R = 20:
    # the reactance line X = 10 - R meets the R axis at R = 10, inside the right blinder, so
    # the corners are (10, 0), (-4, 14) on the left blinder at -4, (-4, 0).
    q = Quadrilateral(10.0, 20.0, math.pi / 2, r_left_ohm=4.0, tilt_rad=math.pi / 4)
    assert_allclose(q.outline(), [10, -4 + 14j, -4], rtol=0, atol=1e-12)


# ---------------------------------------------------------------- region polygon


@pytest.mark.parametrize("char", _quads(), ids=repr)
def test_region_vertices_are_inside_and_on_the_boundary(char):
    # Identity: every corner is inside (rounding allowance), and extreme: a step of 1e-7 of
    # its distance from the centroid outward leaves the shape, inward stays.
    reg = char.region()
    assert reg["kind"] == "polygon" and len(reg["vertices"]) in (3, 4)
    v = np.array([complex(r, x) for r, x in reg["vertices"]])
    assert np.all(char.contains(v))
    c = v.mean()
    assert not np.any(char.contains(v + 1e-7 * (v - c)))
    assert np.all(char.contains(v - 1e-7 * (v - c)))
    # Counter-clockwise: positive signed area (shoelace).
    assert np.sum(v.real * np.roll(v.imag, -1) - np.roll(v.real, -1) * v.imag) > 0


# ---------------------------------------------------------------- property test


@settings(max_examples=200, deadline=None)
@given(
    x=st.floats(0.5, 400), r=st.floats(0.5, 300), left=st.floats(0, 1.5),
    th=st.floats(30, 90), tau=st.floats(-20, 30), reverse=st.booleans(),
    pr=st.floats(-800, 800), px=st.floats(-800, 800), psi=st.floats(-180, 180),
)
def test_property_quadrilateral(x, r, left, th, tau, reverse, pr, px, psi):
    # Identities for any quadrilateral: s <= 1 iff inside (away from the boundary); the reach
    # along any ray ends on the boundary; the corners are inside.
    q = Quadrilateral(x, r, math.radians(th), r_left_ohm=left * r,
                      direction="reverse" if reverse else "forward", tilt_rad=math.radians(tau))
    z = complex(pr, px)
    s = float(q.reach_scale(z)[()])
    if abs(s - 1) > 1e-7:
        assert (s <= 1) == bool(q.contains(z))
    t = float(q.reach_along(math.radians(psi))[()])
    u = complex(math.cos(math.radians(psi)), math.sin(math.radians(psi)))
    assert math.isfinite(t)
    if t > 1e-6:
        assert q.contains(t * u * (1 - 1e-9))
    assert not q.contains(t * u * (1 + 1e-6) + 1e-5 * u)
    assert np.all(q.contains(q.outline()))


@settings(max_examples=200, deadline=None)
@given(d=st.floats(0.5, 800), phi=st.floats(1, 90), reverse=st.booleans(),
       pr=st.floats(-900, 900), px=st.floats(-900, 900))
def test_property_mho(d, phi, reverse, pr, px):
    ang = math.radians(phi) + (math.pi if reverse else 0.0)
    m = Mho(d, math.remainder(ang, 2 * math.pi), "reverse" if reverse else "forward")
    z = complex(pr, px)
    s = float(m.reach_scale(z)[()])
    # Away from the circle (its rounding allowance reaches behind the tangent at the origin).
    if abs(abs(z - m.center_ohm) - m.radius_ohm) > 1e-9 * d:
        assert (s <= 1) == bool(m.contains(z))


# ---------------------------------------------------------------- bad shapes


@pytest.mark.parametrize("kwargs", [
    dict(x_reach_ohm=0.0), dict(r_reach_ohm=-1.0), dict(r_left_ohm=-1.0),
    dict(line_angle_rad=0.0), dict(tilt_rad=math.radians(95)),
    dict(line_angle_rad=math.radians(80), tilt_rad=math.radians(89.9),
         directional_angle_rad=math.radians(80)),
    dict(direction="sideways"),
])
def test_open_or_meaningless_quadrilateral_is_refused(kwargs):
    base = dict(x_reach_ohm=30.0, r_reach_ohm=12.0, line_angle_rad=math.radians(80))
    with pytest.raises(ValueError):
        Quadrilateral(**{**base, **kwargs})


def test_mho_direction_must_agree_with_its_diameter():
    with pytest.raises(ValueError):
        Mho(20.0, math.radians(75), "reverse")
    with pytest.raises(ValueError):
        Mho(20.0, math.radians(-105), "forward")


# ---------------------------------------------------------------- the zones as set


@pytest.mark.parametrize("demo", [D132, D230])
def test_zone_setting_characteristic(demo_path, demo):
    # The zone's characteristic is built from its own fields: a quadrilateral's ground loops
    # use the ground resistive reach, its phase loops the phase one; a mho is one circle.
    st_ = api.study_settings(demo_path(demo)).settings[0]
    th = st_.line_angle_rad
    for z in st_.zones:
        ph, gr = z.characteristic(False, th), z.characteristic(True, th)
        assert ph.direction == gr.direction == z.direction
        if z.shape == "mho":
            assert ph == gr == Mho(z.mho_diameter_primary_ohm, z.char_angle_rad, z.direction)
        else:
            assert (ph.r_reach_ohm, gr.r_reach_ohm) == (z.r_reach_phase_primary_ohm,
                                                        z.r_reach_ground_primary_ohm)
            assert ph.x_reach_ohm == gr.x_reach_ohm == z.x_reach_primary_ohm
            assert ph.tilt_rad == gr.tilt_rad == z.reactance_tilt_rad
            assert ph.directional_angle_rad == z.directional_angle_rad
            assert ph.line_angle_rad == th
            tilted = replace(z, reactance_tilt_rad=math.radians(7))
            assert tilted.characteristic(True, th).tilt_rad == math.radians(7)
        pts = _points(3000, seed=4) * abs(z.reach_primary_ohm) / 30
        assert np.array_equal(z.contains(pts, th), ph.contains(pts) | gr.contains(pts))
        assert np.array_equal(z.reach_scale(pts, th),
                              np.minimum(ph.reach_scale(pts), gr.reach_scale(pts)))
        assert z.region(th) == {"phase_loops": ph.region(), "ground_loops": gr.region()}
