"""The setting rules fed by the fault simulation (relayset.settings.simulated).

Independent sources: hand derivations from the rules' own statements (zone 1 limit
r <= (100 - m)/(1 + b/100) with b the tolerance on top of the overreach; the zone 1 shape
rule), and plane geometry for the directional line (a point at -9.2 degrees lies below the
perpendicular to an 83-degree line angle, -7 degrees, and above -30 degrees).
"""

from __future__ import annotations

import math

import pytest

from relayset import api
from relayset.inputs.philosophy import default_philosophy
from relayset.settings.simulated import (
    SimulationSummary,
    reverse_cover_ohm,
    zone1_limit,
    zone1_shape,
)

D400 = "greyholt_ivel_400kv_twin.toml"


def test_zone1_limit_from_the_worst_remote_bus_scale():
    # Hand derivation: zone 1 at 80 % with the worst remote-bus fault at reach scale 1.25
    # sits exactly at the remote bus: e = 100/(1.25 * 80) - 1 = 0 %. The tolerance 10 %
    # goes on top, b = 10 %, so r <= (100 - m)/1.1, capped at the philosophy's reach.
    ph = default_philosophy()
    m, cap = ph.zone1.min_margin_pct, ph.zone1.reach_pct
    s = SimulationSummary(tolerance_pct=10.0, remote_bus_scale=1.25, zone1_reach_pct=80.0)
    assert s.zone1_overreach_pct() == pytest.approx(0.0, abs=1e-12)
    rec, over = zone1_limit(s, ph)
    assert rec == math.floor(min((100 - m) / 1.1, cap) * 2) / 2
    assert over == pytest.approx(10.0, rel=1e-12)
    # A worse case (scale 1.0 at 80 %: overreach 25 %) limits further: b = 10 * 1.25 = 12.5,
    # r <= (100 - m)/(1 + 0.375).
    rec2, over2 = zone1_limit(replace_scale(s, 1.0), ph)
    assert over2 == pytest.approx(37.5, rel=1e-12)
    assert rec2 == math.floor(min((100 - m) / 1.375, cap) * 2) / 2


def replace_scale(s: SimulationSummary, scale: float) -> SimulationSummary:
    from dataclasses import replace

    return replace(s, remote_bus_scale=scale)


def test_zone1_shape_widest_free_blinder_then_smallest_tilt():
    # The rule as stated: widen the blinder as far as its best worst-case scale stays within
    # 0.005 of the unwidened best (0.803): f = 2 (0.800) qualifies, f = 3 (0.790) does not;
    # then the smallest tilt within 0.005 of f = 2's best: 10 deg (0.796 >= 0.795).
    r = math.radians
    table = ((r(0), 1.0, 0.70), (r(10), 1.0, 0.80), (r(20), 1.0, 0.803), (r(30), 1.0, 0.80),
             (r(0), 2.0, 0.60), (r(10), 2.0, 0.796), (r(20), 2.0, 0.80), (r(30), 2.0, 0.79),
             (r(0), 3.0, 0.50), (r(10), 3.0, 0.70), (r(20), 3.0, 0.79), (r(30), 3.0, 0.78))
    tilt, widen = zone1_shape(SimulationSummary(10.0, zone1_shape_scales=table))
    assert widen == 2.0
    assert tilt == pytest.approx(r(10), abs=1e-12)
    # Without simulated remote-bus faults: horizontal, not widened.
    assert zone1_shape(SimulationSummary(10.0)) == (0.0, 1.0)


def test_reverse_cover_with_the_tolerance():
    # The remote zone 2 reaching 5 ohm past this bus is covered with 10 % tolerance:
    # 5 / 0.9 (times 1 + 1e-6 so that the cover is strictly past it).
    s = SimulationSummary(10.0, remote_zone2_overreach_ohm=5.0)
    assert reverse_cover_ohm(s) == pytest.approx(5.0 / 0.9, rel=2e-6)
    assert reverse_cover_ohm(SimulationSummary(10.0, remote_zone2_overreach_ohm=-1.0)) is None


def test_close_in_resistive_fault_below_the_r_axis_is_inside_zone1(demo_path):
    """Issue finding (400 kV demo): a close-in ground fault through 1 ohm with the remote end
    strong appeared at 0.868 - j0.141 ohm (-9.2 deg), outside zone 1's directional line when
    that line was perpendicular to the line angle; the quadrilateral's directional line now
    lies in the fourth quadrant, so zone 1 contains it."""
    from dataclasses import replace

    st = api.study_settings(demo_path(D400)).settings[0]
    th = st.line_angle_rad
    z1 = st.zone("zone1")
    z = complex(0.868, -0.141)
    assert math.degrees(math.atan2(z.imag, z.real)) < math.degrees(th) - 90  # below it
    assert bool(z1.contains(z, th))
    assert not bool(replace(z1, directional_angle_rad=None).contains(z, th))


def test_widened_zone2_keeps_its_left_blinder_at_the_arc_basis(demo_path):
    """Issue finding (400 kV demo): zone 2's blinders, widened for remote infeed to ~44 ohm
    on both sides, admitted a three-phase fault behind the relay through 7 ohm under heavy
    transfer, seen at -27.2 + j49.7 ohm. Remote infeed moves the apparent resistance to the
    right, so only the right blinder is widened: the point lies 33 ohm left of the line
    through the origin at the line angle (plane geometry: R - X/tan(theta)), beyond the left
    blinder kept at the arc basis, and inside the old symmetric zone."""
    from dataclasses import replace

    st = api.study_settings(demo_path(D400)).settings[0]
    th = st.line_angle_rad
    z2 = st.zone("zone2")
    z = complex(-27.248, 49.658)
    assert z2.r_left_phase_primary_ohm < z2.r_reach_phase_primary_ohm
    assert z.real - z.imag / math.tan(th) < -z2.r_left_phase_primary_ohm
    assert not bool(z2.contains(z, th))
    both = replace(z2, r_left_phase_primary_ohm=None, r_left_ground_primary_ohm=None)
    assert bool(both.contains(z, th))
