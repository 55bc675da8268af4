r"""Distance-zone settings: a hand-derived worked example through every zone rule.

Invented scenario (Northmere Grid, 132 kV line Ashby-Brook, 100 km). Every impedance is a
multiple of u = 1 + 10j ohm, so all of them lie on one angle, theta = atan(10) = 84.2894 deg,
and magnitudes are multiples of |u| = sqrt(101) = 10.049876 ohm:

- protected line Z1 = 4u = 4 + 40j (|Z1| = 40.19950), Z0 = 12 + 120j = 3 Z1;
- adjacent lines from the remote bus: Brook-Cole 2u (shortest), Brook-Dale 3.2u (longest);
- line behind the relay: Ashby-Eden 1u;
- sources: 1.5u behind the relay, 3u behind the remote bus;
- CT 800/1, VT 132000/110: secondary factor 800/1200 = 2/3;
- load 160 MVA at 0.9 pu of 132 kV, load angles up to 30 deg.

Hand derivation (formulas of relayset.settings.compute's module notes):

- k0 = (Z0 - Z1)/(3 Z1) = 2/3 at 0 deg; kR = (12-4)/12 = 2/3, kX = (120-40)/120 = 2/3;
  Z0/Z1 = 3 at 0 deg.
- infeed K = 1 + (1.5u + 4u)/3u = 17/6 = 2.8333 (real: one angle).
- |Z_load,min| = 118 800^2 / 1.6e8 = 88.209 ohm primary, 58.806 ohm secondary.
- SIR relay end 1.5/4 = 0.375 (long), remote end 3/4 = 0.75 (medium).
- A reach n·u on the line angle has, along the load angle phi = 30 deg, a mho reach
  D cos(theta - phi) = n sqrt(101) (cos(theta)cos(phi) + sin(theta)sin(phi))
  = n (cos 30 + 10 sin 30) = n (sqrt(3)/2 + 5) = 5.866025 n ohm.

Default philosophy (infeed given as 1), reach study: recommended 75 %, worst overreach 15 %:
- zone 1: recommendation 75 % < 80 % (the budget is in it) -> reduced to 75 %: 3u,
  |.| = 30.14963 ohm, secondary 20.09975 ohm;
- zone 2 (max_of_both): 120 % = 4.8u against 4u + 0.5 x 2u = 5u -> 5u = 50.24938 ohm (125 %),
  secondary 33.49959; the adjacent zone 1 end 4u + 0.8 x 2u = 5.6u lies outside -> no warning;
- zone 3: 4u + 1.2 x 3.2u = 7.84u = 78.79102 ohm (196 %), secondary 52.52735; its load
  reach 7.84 x 5.866025 = 45.98964 ohm = 52.137 % of 88.209 < 80 % -> no warning;
- reverse: 20 % of the line = 0.8u = 8.03990 ohm, secondary 5.35993.

Infeed computed (K = 17/6):
- zone 2: 4u + (17/6)(0.5)(2u) = (4 + 17/6)u = 6.8333u = 68.67415 ohm; the adjacent zone 1 end
  5.6u is now inside -> warning zone2_past_adjacent_zone1;
- zone 3: 4u + (17/6)(1.2)(3.2u) = 14.88u = 149.54215 ohm; load reach 14.88 x 5.866025 =
  87.28645 ohm = 98.954 % > 80 % -> warning zone3_load_encroachment.
"""

from __future__ import annotations

import json
import math
from dataclasses import replace

import pytest

from relayset.errors import InputError
from relayset.inputs.philosophy import default_philosophy
from relayset.report.tables import settings_rows
from relayset.settings.compute import compute_settings
from relayset.settings.inputs import SettingsInputs

U = 1 + 10j
MAG_U = math.sqrt(101)
THETA = math.atan(10.0)


def inputs(**changes):
    base = dict(
        z1_line_ohm=4 * U,
        z0_line_ohm=12 + 120j,
        length_m=100e3,
        ct_ratio=800 / 1,
        vt_ratio=132000 / 110,
        v_nominal_ll_v=132e3,
        s_max_va=160e6,
        v_min_pu=0.9,
        load_angle_max_rad=math.radians(30),
        adjacent_lines=[("Brook-Cole", 2 * U), ("Brook-Dale", 3.2 * U)],
        reverse_lines=[("Ashby-Eden", 1 * U)],
        source_z1_relay_ohm=1.5 * U,
        source_z1_remote_ohm=3 * U,
        recommended_zone1_pct=75.0,
        worst_overreach_pct=15.0,
        arc_length_phase_m=3.5,
        arc_length_ground_m=1.5,
        tower_footing_ohm=10.0,
    )
    base.update(changes)
    return SettingsInputs(**base)


# The worked example checks the rule itself, so the zone 3 cap is lifted out of its way.
COMPUTED = {"zone2": {"infeed": "computed"},
            "zone3": {"infeed": "computed", "max_reach_pct": 1000.0}}


def test_worked_example_default_philosophy():
    # Hand derivation in the module docstring; tolerance rel 1e-6 (hand values to 7 digits).
    r = compute_settings(inputs(), default_philosophy())
    exp = {"zone1": 3.0, "zone2": 5.0, "zone3": 7.84, "reverse": 0.8}
    for name, n in exp.items():
        z = r.zone(name)
        assert abs(z.reach_primary_ohm) == pytest.approx(n * MAG_U, rel=1e-9)
        assert abs(z.reach_secondary_ohm) == pytest.approx(n * MAG_U * 2 / 3, rel=1e-9)
        assert z.mho_diameter_primary_ohm == pytest.approx(n * MAG_U, rel=1e-9)
        assert z.mho_diameter_secondary_ohm == pytest.approx(n * MAG_U * 2 / 3, rel=1e-9)
    assert abs(r.zone("zone1").reach_primary_ohm) == pytest.approx(30.14963, rel=1e-6)
    assert abs(r.zone("zone2").reach_secondary_ohm) == pytest.approx(33.49959, rel=1e-6)
    assert abs(r.zone("zone3").reach_primary_ohm) == pytest.approx(78.79102, rel=1e-6)
    assert abs(r.zone("reverse").reach_secondary_ohm) == pytest.approx(5.35993, rel=1e-6)
    assert [r.zone(n).reach_pct for n in exp] == pytest.approx([75, 125, 196, 20], rel=1e-9)
    # Reverse zone looks backwards: the reach point is -0.8u, mho angle theta - 180 deg.
    assert r.zone("reverse").reach_primary_ohm == pytest.approx(-0.8 * U, rel=1e-12)
    assert r.zone("reverse").char_angle_rad == pytest.approx(THETA - math.pi, rel=1e-12)
    assert r.zone("reverse").direction == "reverse"
    # Delays: the philosophy defaults (common practice, no source).
    assert [r.zone(n).delay_s for n in exp] == [0.0, 0.35, 1.0, 1.0]
    # Line angle, k0 forms.
    assert r.line_angle_rad == pytest.approx(THETA, rel=1e-12)
    assert r.k0.k0 == pytest.approx(2 / 3, rel=1e-12)
    assert (r.k0.kr, r.k0.kx) == pytest.approx((2 / 3, 2 / 3), rel=1e-12)
    assert r.k0.z0_over_z1 == pytest.approx(3.0, rel=1e-12)
    # Load and SIR.
    assert r.load.z_min_primary_ohm == pytest.approx(88.209, rel=1e-9)
    assert r.load.z_min_secondary_ohm == pytest.approx(58.806, rel=1e-9)
    assert r.zone("zone3").load_reach_pct_of_min == pytest.approx(
        7.84 * (math.sqrt(3) / 2 + 5) / 88.209 * 100, rel=1e-9)
    assert r.zone("zone3").load_reach_pct_of_min == pytest.approx(52.137, abs=1e-3)
    assert [(s.end, s.sir, s.line_class) for s in r.sources] == [
        ("relay", pytest.approx(0.375), "long"), ("remote", pytest.approx(0.75), "medium")]
    # Warnings and the checks behind them.
    assert r.warning_ids() == ["zone1_reduced_by_reach_study"]
    checks = {c.check_id: c.passed for c in r.zone("zone2").checks}
    assert checks["past_adjacent_zone1"] is True and checks["load_encroachment"] is True
    assert "max_of_both" not in r.zone("zone2").rule and "shortest adjacent" in r.zone("zone2").rule


def test_worked_example_computed_infeed():
    # Hand derivation in the module docstring (K = 17/6).
    r = compute_settings(inputs(), default_philosophy().with_changes(COMPUTED))
    assert r.zone("zone2").infeed_factor == pytest.approx(17 / 6, rel=1e-12)
    assert abs(r.zone("zone2").reach_primary_ohm) == pytest.approx(68.67415, rel=1e-6)
    assert abs(r.zone("zone3").reach_primary_ohm) == pytest.approx(149.54215, rel=1e-6)
    assert r.zone("zone3").load_reach_pct_of_min == pytest.approx(98.954, abs=1e-3)
    assert r.warning_ids() == [
        "zone1_reduced_by_reach_study", "zone3_load_encroachment", "zone2_past_adjacent_zone1"]
    base = compute_settings(inputs(), default_philosophy())
    assert r.zone("zone1") == base.zone("zone1") and r.zone("reverse") == base.zone("reverse")


@pytest.mark.parametrize(
    ("changes", "zone", "n_u"),
    [
        # Hand values in multiples of u (see module docstring).
        ({"zone2": {"rule": "line_pct"}}, "zone2", 4.8),  # 120 % of 4u
        ({"zone2": {"rule": "line_plus_adjacent"}}, "zone2", 5.0),  # 4u + 0.5 x 2u
        ({"zone2": {"rule": "line_pct", "reach_pct": 130}}, "zone2", 5.2),  # 130 % of 4u
        ({"zone3": {"rule": "line_pct"}}, "zone3", 8.0),  # 200 % of 4u
        ({"zone3": {"infeed_factor": 1.5}}, "zone3", 4 + 1.5 * 1.2 * 3.2),  # given K
        ({"reverse": {"rule": "behind_pct"}}, "reverse", 0.2),  # 20 % of 1u
        ({"reverse": {"reach_pct": 30}}, "reverse", 1.2),  # 30 % of 4u
    ],
)
def test_every_zone_rule(changes, zone, n_u):
    r = compute_settings(inputs(), default_philosophy().with_changes(changes))
    assert abs(r.zone(zone).reach_primary_ohm) == pytest.approx(n_u * MAG_U, rel=1e-9)


def test_zone2_change_moves_only_zone2():
    # Identity: a new zone 2 percentage leaves zones 1, 3 and reverse exactly as they were.
    base = compute_settings(inputs(), default_philosophy().with_changes(
        {"zone2": {"rule": "line_pct"}}))
    moved = compute_settings(inputs(), default_philosophy().with_changes(
        {"zone2": {"rule": "line_pct", "reach_pct": 150}}))
    for name in ("zone1", "reverse"):
        assert moved.zone(name) == base.zone(name)
    # Zone 3 changes only in its dependent check against zone 2.
    z3m, z3b = moved.zone("zone3"), base.zone("zone3")
    assert replace(z3m, checks=()) == replace(z3b, checks=())
    assert [c for c in z3m.checks if c.check_id != "reach_above_zone2"] == [
        c for c in z3b.checks if c.check_id != "reach_above_zone2"]
    assert moved.k0 == base.k0 and moved.load == base.load
    assert moved.zone("zone2").reach_pct == pytest.approx(150.0, rel=1e-12)
    assert base.zone("zone2").reach_pct == pytest.approx(120.0, rel=1e-12)


def test_zone1_not_reduced_when_not_allowed():
    # A utility margin of 10 % short of the remote bus (the default is 0 %).
    ph10 = default_philosophy().with_changes({"zone1": {"min_margin_pct": 10.0}})
    ph = ph10.with_changes({"zone1": {"reduce_to_reach_study": False}})
    r = compute_settings(inputs(), ph)
    assert r.zone("zone1").reach_pct == pytest.approx(80.0, rel=1e-12)
    assert r.warning_ids() == ["zone1_overreach_exceeds_margin"]
    # 80 % x 1.15 = 92 % against 90 % (hand value).
    check = next(c for c in r.zone("zone1").checks if c.check_id == "reach_study_margin")
    assert check.passed is False and "92 %" in check.detail
    # Small overreach: 80 x 1.10 = 88 % <= 90 %, and no recommendation below the setting:
    # nothing changes.
    r = compute_settings(inputs(worst_overreach_pct=10.0, recommended_zone1_pct=None), ph10)
    assert r.zone("zone1").reach_pct == pytest.approx(80.0) and r.warning_ids() == []
    # The recommendation carries the error budget: below the setting it rules even when
    # the bare overreach is inside the margin.
    r = compute_settings(inputs(worst_overreach_pct=10.0), ph10)
    assert r.zone("zone1").reach_pct == pytest.approx(inputs().recommended_zone1_pct)


def test_secondary_identity_for_every_reach():
    # Identity Z_sec = Z_pri x n_CT / n_VT for every impedance of every zone (quadrilateral).
    ph = default_philosophy().with_changes({"characteristic": {"shape": "quadrilateral"}})
    r = compute_settings(inputs(), ph)
    f = 800 / 1200
    for z in r.zones:
        assert z.reach_secondary_ohm == pytest.approx(z.reach_primary_ohm * f, rel=1e-12)
        assert z.x_reach_secondary_ohm == pytest.approx(z.x_reach_primary_ohm * f, rel=1e-12)
        assert z.r_reach_phase_secondary_ohm == pytest.approx(
            z.r_reach_phase_primary_ohm * f, rel=1e-12)
        assert z.r_reach_ground_secondary_ohm == pytest.approx(
            z.r_reach_ground_primary_ohm * f, rel=1e-12)


def _warrington_imperial(i_a, s_m):
    # Warrington (Electrical World, vol. 98, 1931): R = 8750 (s_ft + 3 v t)/I^1.4, no wind.
    return 8750 * (s_m / 0.3048) / i_a**1.4


def test_quadrilateral_worked_example():
    # Hand derivation: arc current = smallest phase-phase fault current at the remote bus fed
    # from the relay end, 132 kV / |2 (1.5u + 4u)| = 132000 / (11 sqrt(101)) = 1194.045 A.
    # Arc 3.5 m: R_arc = 4.94575 ohm; phase reach 1.2 x R_arc / 2 = 2.96745 ohm.
    # Ground arc 1.5 m: 2.11961 ohm; ground reach 1.2 (2.11961 + 10) / |1 + 2/3| = 8.72612 ohm.
    # Reactive reaches: Im of each target: zone 1 3u -> 30 ohm, zone 2 5u -> 50, zone 3 78.4,
    # reverse 8 (looking back).
    ph = default_philosophy().with_changes({"characteristic": {"shape": "quadrilateral"}})
    r = compute_settings(inputs(), ph)
    i_arc = 132000 / (11 * MAG_U)
    assert r.arc_current_a == pytest.approx(1194.045, rel=1e-6)
    r_ph = 1.2 * _warrington_imperial(i_arc, 3.5) / 2
    r_g = 1.2 * (_warrington_imperial(i_arc, 1.5) + 10) / (5 / 3)
    assert (r_ph, r_g) == pytest.approx((2.96745, 8.72612), rel=1e-5)
    for name, x in (("zone1", 30.0), ("zone2", 50.0), ("zone3", 78.4), ("reverse", 8.0)):
        z = r.zone(name)
        assert z.x_reach_primary_ohm == pytest.approx(x, rel=1e-12)
        assert z.x_reach_secondary_ohm == pytest.approx(x * 2 / 3, rel=1e-12)
        assert z.r_reach_phase_primary_ohm == pytest.approx(r_ph, rel=1e-9)
        assert z.r_reach_ground_primary_ohm == pytest.approx(r_g, rel=1e-9)
    # Load limit: 0.8 x 88.209 x (cos 30 - sin 30 cot(theta)) = 70.5672 x (0.866025 - 0.05).
    assert r.load.r_limit_primary_ohm == pytest.approx(57.58463, rel=1e-6)
    assert r.warning_ids() == ["zone1_reduced_by_reach_study"]


def test_quadrilateral_resistive_reach_limited_by_load():
    # Tower footing 100 ohm: ground reach 1.2 (2.11961 + 100)/(5/3) = 73.526 ohm > 57.585 ohm,
    # so every zone is cut to the limit; the blinder then passes exactly through the load
    # point 0.8 |Z_load,min| at 30 deg (identity), so no load-encroachment warning follows.
    ph = default_philosophy().with_changes({"characteristic": {"shape": "quadrilateral"}})
    r = compute_settings(inputs(tower_footing_ohm=100.0), ph)
    for z in r.zones:
        assert z.r_reach_ground_primary_ohm == pytest.approx(57.58463, rel=1e-6)
    for name in ("zone2", "zone3"):
        assert r.zone(name).load_reach_pct_of_min == pytest.approx(80.0, rel=1e-9)
    # Zone 1 (X = 30 ohm) is lower: its furthest load-range point is the corner of the
    # reactance line and the blinder, (57.58463 + 30 cot(theta)) + 30j = 60.58463 + 30j, at
    # atan(30/60.58) = 26.3 deg < 30 deg; |.| = 67.6053 ohm = 76.642 % of 88.209 (hand value).
    assert r.zone("zone1").load_reach_pct_of_min == pytest.approx(
        abs(57.58462787 + 3.0 + 30j) / 88.209 * 100, rel=1e-8)
    assert r.warning_ids() == ["zone1_reduced_by_reach_study"] + [
        f"{n}_resistive_reach_limited_by_load" for n in ("zone1", "zone2", "zone3", "reverse")]


def test_short_line_and_no_adjacent_line():
    # SIR = 20u / 4u = 5 >= 4: short (IEEE Std C37.113-2015, from memory). Without adjacent
    # lines max_of_both falls back to 120 % and zone 3 to 200 % of the line.
    r = compute_settings(
        inputs(source_z1_relay_ohm=20 * U, adjacent_lines=[]), default_philosophy())
    assert r.sources[0].sir == pytest.approx(5.0) and r.sources[0].line_class == "short"
    assert r.zone("zone2").reach_pct == pytest.approx(120.0)
    assert r.zone("zone3").reach_pct == pytest.approx(200.0)
    assert r.warning_ids() == ["short_line", "zone1_reduced_by_reach_study", "no_adjacent_line"]


def test_given_k0_forms_are_consistent():
    # Z0 = 10 + 130j: hand values kR = 0.5, kX = 0.75, k0 = 0.747525 + 0.024752j.
    r = compute_settings(inputs(z0_line_ohm=10 + 130j), default_philosophy())
    assert r.k0.k0 == pytest.approx(0.747525 + 0.024752j, abs=1e-6)
    assert (r.k0.kr, r.k0.kx) == pytest.approx((0.5, 0.75), rel=1e-12)
    # A given k0 that differs from the line totals is used and flagged; forms follow it.
    r = compute_settings(inputs(k0=0.7 + 0.0j, k0m=0.3 - 0.02j), default_philosophy())
    assert r.k0.k0 == 0.7 and r.k0.z0_over_z1 == pytest.approx(3.1, rel=1e-12)
    assert (r.k0.kr, r.k0.kx) == pytest.approx((0.7, 0.7), rel=1e-12)
    assert "k0_differs_from_line" in r.warning_ids()
    assert r.to_dict()["k0m"]["magnitude"] == pytest.approx(abs(0.3 - 0.02j), rel=1e-12)


def test_to_dict_and_rows_match_the_result():
    # Identity: the serialised values are the result's values.
    ph = default_philosophy().with_changes({"characteristic": {"shape": "quadrilateral"}})
    r = compute_settings(inputs(), ph)
    d = json.loads(json.dumps(r.to_dict()))
    z2 = r.zone("zone2")
    assert d["zones"]["zone2"]["reach_secondary_ohm"] == pytest.approx(
        [z2.reach_secondary_ohm.real, z2.reach_secondary_ohm.imag], rel=1e-12)
    assert d["zones"]["zone2"]["delay_s"] == 0.35
    assert d["load"]["z_min_secondary_ohm"] == pytest.approx(58.806, rel=1e-9)
    rows = {name: (value, unit) for name, value, unit in settings_rows(r)}
    assert rows["Zone 1 reactive reach, secondary"] == (pytest.approx(20.0, rel=1e-12), "Ω")
    assert rows["Zone 2 time delay"] == (0.35, "s")
    assert rows["Line angle"][0] == pytest.approx(math.degrees(THETA), rel=1e-12)


@pytest.mark.parametrize(
    ("changes", "field"),
    [
        ({"ct_ratio": 0.0}, "ct_ratio"),
        ({"vt_ratio": -1200.0}, "vt_ratio"),
        ({"length_m": float("nan")}, "length_m"),
        ({"z1_line_ohm": 4 - 40j}, "z1_line_ohm"),
        ({"load_angle_max_rad": 2.0}, "load_angle_max_rad"),
        ({"adjacent_lines": [("Brook-Cole",)]}, "adjacent_lines[0]"),
        ({"recommended_zone1_pct": 120.0}, "recommended_zone1_pct"),
    ],
)
def test_bad_inputs_raise_input_error(changes, field):
    with pytest.raises(InputError) as e:
        inputs(**changes)
    assert e.value.field == field


def test_quadrilateral_needs_arc_data():
    ph = default_philosophy().with_changes({"characteristic": {"shape": "quadrilateral"}})
    with pytest.raises(InputError) as e:
        compute_settings(inputs(arc_length_phase_m=None), ph)
    assert e.value.field == "arc_length_phase_m"
    with pytest.raises(InputError) as e:
        compute_settings(inputs(source_z1_relay_ohm=None), ph)
    assert e.value.field == "arc_current_a"


def test_zone3_capped_along_the_line_angle():
    # Hand values: zone 3 = Z_L + K * 1.2 * Z_adj,longest = 4U + K * 1.2 * 3.2U = (4 + 3.84 K) U.
    # With a given K = 1: 7.84 * |U| = 196 % of the 4U line, under the default 300 % cap.
    # With K = 5: (4 + 19.2) U = 580 % of the line; the philosophy caps it at 300 % along the
    # line angle (capping is common practice, no source) and warns.
    ph = default_philosophy()
    r = compute_settings(inputs(), ph)
    assert r.zone("zone3").reach_pct == pytest.approx(196.0, rel=1e-12, abs=0)
    assert "zone3_capped" not in r.warning_ids()
    ph5 = ph.with_changes({"zone3": {"infeed_factor": 5.0}})
    r = compute_settings(inputs(), ph5)
    z3 = r.zone("zone3")
    assert z3.reach_pct == pytest.approx(300.0, rel=1e-12, abs=0)
    assert z3.reach_primary_ohm == pytest.approx(3.0 * 4 * U, rel=1e-12, abs=0)
    assert "zone3_capped" in r.warning_ids() and "asks 580 %" in z3.rule


@pytest.mark.parametrize("sim, reach_pct, basis, warned", [
    (None, 75.0, "reach study", True),  # the reach study alone: 75 % (worked example)
    ((70.0, 20.0), 70.0, "fault simulation", True),  # simulation stricter than 75 %
    ((78.0, 12.0), 75.0, "reach study", True),  # simulation milder: the study's 75 %
])
def test_zone1_rule_names_the_recommendation_that_governs(sim, reach_pct, basis, warned):
    """Zone 1 takes the stricter of the reach study's and the fault simulation's
    recommendation (identity: min of the two), and its rule names which one; the check
    takes the larger overreach (max of the two) and names where it comes from."""
    kw = {} if sim is None else {"simulated_zone1_pct": sim[0],
                                 "simulated_overreach_pct": sim[1]}
    r = compute_settings(inputs(**kw), default_philosophy())
    z1 = r.zone("zone1")
    assert z1.reach_pct == pytest.approx(reach_pct, rel=1e-12)
    assert z1.rule == f"{reach_pct:g} % of the line ({basis} recommendation; philosophy 80 %)"
    assert ("zone1_reduced_by_reach_study" in r.warning_ids()) is warned
    over, over_from = 15.0, "reach study"  # worst_overreach_pct of inputs()
    if sim is not None and sim[1] > over:
        over, over_from = sim[1], "fault simulation"
    check = next(c for c in z1.checks if c.check_id == "reach_study_margin")
    assert f"plus {over:.3g} % of it" in check.detail and over_from in check.detail
    assert check.passed is (reach_pct * (1 + over / 100) <= 100)


@pytest.mark.parametrize("study_rec, study_over", [(85.0, 5.0), (None, None)])
def test_zone1_reduced_by_the_simulation_alone_is_not_called_the_reach_study(study_rec,
                                                                             study_over):
    """When the reach study allows the philosophy's 80 % (or there is no reach study) and
    only the fault simulation asks for less, zone 1 follows the simulation without the
    reach-study warning (the verification warns it as zone1_limited_by_simulation)."""
    r = compute_settings(inputs(recommended_zone1_pct=study_rec, worst_overreach_pct=study_over,
                                simulated_zone1_pct=72.5, simulated_overreach_pct=25.0),
                         default_philosophy())
    assert r.zone("zone1").reach_pct == 72.5
    assert "fault simulation recommendation" in r.zone("zone1").rule
    assert "zone1_reduced_by_reach_study" not in r.warning_ids()
