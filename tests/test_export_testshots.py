"""Test points of the zones as set (relayset.export.testshots).

Sources named beside each check: the loop equations of IEEE Std C37.113-2015 (ground loop
V = Z (I + k0 I_res), phase loop (V_X - V_Y)/(I_X - I_Y)), elementary circle geometry
(Thales: the chord of a mho circle through the origin at angle psi from its diameter is
D cos psi), and the test-set convention stated in the module (common practice, no source).
"""

from __future__ import annotations

import csv
import io
import json
import math
import os
import re

import numpy as np
import pytest
from hypothesis import assume, given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose

from relayset import api
from relayset.export import testshots
from relayset.physics.characteristic import Mho, Quadrilateral
from relayset.physics.measurement import loop_impedances
from relayset.resources import demo_lines_dir

DEMO = demo_lines_dir()

DEMOS = ("kessler_oxbow_115kv", "elsford_fallowby_230kv_double")


@pytest.fixture(scope="module")
def studies():
    return {n: api.study_settings(DEMO / f"{n}.toml") for n in DEMOS}


def _shots(r):
    return [(s, b, testshots.test_shots(s, b))
            for s, b in zip(r.settings, testshots.end_bases(r), strict=True)]


@pytest.mark.parametrize("name", DEMOS)
def test_loop_impedance_from_the_shot_is_the_target_point(studies, name):
    # Identity (IEEE Std C37.113-2015 loop equations, via relayset.physics.measurement):
    # the relay's loop impedance from the shot's secondary phasors, divided by the
    # secondary factor CT/VT, is the test point in primary ohms. The relay measures with
    # its k0 as set: on the profile's step where the study names a profile (kessler).
    r = studies[name]
    n = 0
    for s, _, shots in _shots(r):
        for shot in shots:
            z = loop_impedances(shot.v, shot.i, s.k0.k0)[shot.loop]
            assert_allclose(z / s.secondary_factor, shot.z_primary_ohm, rtol=1e-12, atol=0)
            n += 1
    assert n >= 100


@pytest.mark.parametrize("name", DEMOS)
def test_shots_straddle_the_boundary(studies, name):
    # Each "in" point lies inside its zone's characteristic for its kind of loop and each
    # "out" point outside: the points are 95 % and 105 % of the boundary along the ray.
    r = studies[name]
    for s, _, shots in _shots(r):
        for shot in shots:
            ch = s.zone(shot.zone).characteristic(shot.ground, s.line_angle_rad)
            assert bool(ch.contains(shot.z_primary_ohm)) == (shot.side == "in"), shot.shot_id


def test_mho_points_follow_the_circle_geometry(studies):
    # Thales: chord of a circle through the origin at angle psi from the diameter D is
    # D cos psi; the shots sit at 95 % / 105 % of it (kessler demo: mho zones).
    r = studies["kessler_oxbow_115kv"]
    s, _, shots = _shots(r)[0]
    for shot in shots:
        z = s.zone(shot.zone)
        off = {"diameter": 0.0, "diameter +30 deg": 30.0, "diameter -30 deg": -30.0}[shot.ray]
        chord = z.mho_diameter_primary_ohm * math.cos(math.radians(off))
        frac = {"in": 0.95, "out": 1.05}[shot.side]  # the issue's +-5 % of the reach
        assert_allclose(abs(shot.z_primary_ohm), frac * chord, rtol=1e-12, atol=0)
        assert_allclose(shot.ray_angle_rad, z.char_angle_rad + math.radians(off),
                        rtol=0, atol=1e-12)


def test_quadrilateral_rays_include_the_tilted_reactance_line_and_blinders(studies):
    r = studies["elsford_fallowby_230kv_double"]
    s, _, shots = _shots(r)[0]
    z1 = s.zone("zone1")
    assert z1.reactance_tilt_rad > 0  # the demo's zone 1 is tilted
    rays = {x.ray for x in shots if x.zone == "zone1"}
    assert {"line angle", "reactance line", "right blinder", "left blinder"} <= rays
    # The reactance-line point at 100 % would satisfy R sin(tau) + X cos(tau) = X_reach
    # cos(tau) (the tilted line's equation, characteristic.py docstring).
    tau = z1.reactance_tilt_rad
    for x in shots:
        if x.zone == "zone1" and x.ray == "reactance line":
            zb = x.z_primary_ohm / x.fraction
            assert_allclose(zb.real * math.sin(tau) + zb.imag * math.cos(tau),
                            z1.x_reach_primary_ohm * math.cos(tau), rtol=1e-9, atol=0)


@pytest.mark.parametrize("name", DEMOS)
def test_expected_result_is_the_fastest_zone_holding_the_point(studies, name):
    r = studies[name]
    for s, _, shots in _shots(r):
        delays = {z.zone: z.delay_s for z in s.zones}
        for shot in shots:
            if shot.zone == "zone1" and shot.side == "in":
                assert shot.expected_zone == "zone1" and shot.expected_delay_s == 0.0
            if shot.side == "in":  # the own zone or a faster one operates
                assert shot.expected_delay_s <= delays[shot.zone]
            if shot.zone == "zone1" and shot.side == "out" and shot.ray in (
                    "line angle", "diameter"):
                # beyond zone 1 on the line: zone 2 (covers the line) operates after its delay
                assert shot.expected_zone == "zone2"
                assert shot.expected_delay_s == delays["zone2"]
        assert any(x.expected_zone is None for x in shots)  # beyond zone 3: no operation


@pytest.mark.parametrize("name", DEMOS)
def test_test_set_convention(studies, name):
    # The module's stated convention (common practice, no source): healthy phases at
    # nominal, loop voltage at most 80 % of nominal, current only in the loop's phases.
    r = studies[name]
    for _, b, shots in _shots(r):
        for x in shots:
            phases = [p for p in range(3) if "ABC"[p] in x.loop]
            healthy = [p for p in range(3) if p not in phases]
            assert_allclose(x.v[healthy], x.v_pre[healthy], rtol=1e-12, atol=0)
            assert np.all(x.i[healthy] == 0)
            assert np.all(np.abs(x.i) <= b.i_test * (1 + 1e-12))
            if x.ground:
                assert abs(x.v[phases[0]]) <= 0.8 * b.v_nom * (1 + 1e-9)
            else:
                assert abs(x.v[phases[0]] - x.v[phases[1]]) <= \
                    0.8 * math.sqrt(3) * b.v_nom * (1 + 1e-9)


def test_ground_shot_matches_the_stated_formula():
    # V = Z (I + k0 I_res) with only the faulted phase carrying current, by hand.
    z, k0 = complex(2.0, 10.0), complex(0.6, 0.05)
    v_pre, v, i = testshots.loop_phasors("BG", z, k0, 63.5, 1.0)
    assert i[0] == 0 and i[2] == 0
    assert_allclose(v[1], z * (i[1] + k0 * i[1]), rtol=1e-14, atol=0)
    assert_allclose(np.angle(v[1]), np.angle(v_pre[1]), rtol=0, atol=1e-12)
    assert_allclose(abs(i[1]), 1.0, rtol=1e-14, atol=0)  # 10.4 * 1.6 V < 0.8 * 63.5 V


def test_safe_file_names():
    # Names come from the end's position and its safe characters only.
    for end in ("../../etc/passwd", "a,b\r\nc", "\u202ebad", "", "K\u00f8ge / Nord"):
        stem = testshots.end_stem(0, end, "L_rev0")
        assert re.fullmatch(r"L_rev0-end1-[A-Za-z0-9-]+", stem), stem


def test_export_writes_csv_json_and_comtrade_with_the_umask(studies, tmp_path):
    r = studies["kessler_oxbow_115kv"]
    old = os.umask(0o027)
    try:
        paths = testshots.export_test_cases(r, tmp_path / "out")
    finally:
        os.umask(old)
    assert all(p.is_file() and p.resolve().is_relative_to((tmp_path / "out").resolve())
               for p in paths)
    assert {p.stat().st_mode & 0o777 for p in paths} == {0o640}
    assert len(paths) == len(set(paths))
    csv_path = next(p for p in paths if p.name.endswith("test-points.csv"))
    js = json.loads(next(p for p in paths if p.name.endswith("test-points.json")).read_text())
    assert js["schema"] == "relayset-test-points/1"
    # the published schema, checked by a validator from the package registry (jsonschema)
    jsonschema = pytest.importorskip("jsonschema")
    schema = testshots.test_points_schema()
    jsonschema.Draft202012Validator.check_schema(schema)
    jsonschema.Draft202012Validator(schema).validate(js)
    bad = dict(js, shots=[dict(js["shots"][0], side="middle")])
    with pytest.raises(jsonschema.ValidationError):
        jsonschema.Draft202012Validator(schema).validate(bad)
    rows = list(csv.DictReader(io.StringIO(csv_path.read_text(encoding="utf-8-sig"))))
    assert len(rows) == len(js["shots"])
    ids = {c["id"] for c in js["comtrade"]["cases"]}
    assert {s["shot_id"] for s in js["shots"]} <= ids
    governing = [c for c in js["comtrade"]["cases"] if c["kind"] == "governing case"]
    assert governing and all(c["verification_case"]["z_apparent_primary_ohm"]
                             for c in governing)
    cfgs = {p.stem for p in paths if p.suffix == ".cfg"}
    dats = {p.stem for p in paths if p.suffix == ".dat"}
    assert cfgs == dats == ids


def test_report_table_per_end_escapes_the_end_name(tmp_path):
    # A hostile substation name: escaped in the report's test-point table, and only its
    # safe characters reach the file names.
    from relayset.report.context import build_context
    from relayset.report.html import render_html

    text = (DEMO / "kessler_oxbow_115kv.toml").read_text(encoding="utf-8")
    text = text.replace("Kessler Junction", "Kessler <i>Jct</i>")
    path = tmp_path / "hostile.toml"
    path.write_text(text, encoding="utf-8")
    r = api.study_settings(path)
    ctx = build_context(r, environ={"SOURCE_DATE_EPOCH": "0"})
    (t,) = ctx["test_points"]
    zones = {x.zone for x in r.settings[0].zones}
    # one row per zone, kind of loop and ray (mho: diameter and +-30 deg)
    assert len(t["rows"]) == len(zones) * 2 * 3
    assert all(row["in_expected"] and row["out_expected"] for row in t["rows"])
    html = render_html(ctx, text)
    assert "Test points for secondary injection" in html
    assert "Relay at Kessler &lt;i&gt;Jct&lt;/i&gt;: test current 5 A" in html
    assert "<i>Jct" not in html.split("Test points for secondary injection")[1]
    paths = testshots.export_test_cases(r, tmp_path / "out")
    assert all(re.fullmatch(r"[A-Za-z0-9._-]+", p.name) for p in paths)
    assert {p.parent.name for p in paths} == {"out", "PR-KO-115_rev0-end1-Kessler-i-Jct-i"}


def test_shot_below_the_minimum_operating_current_expects_no_operation(studies):
    # The verification's relay model: no loop operates below its minimum operating current
    # (relay_model.py); a shot the voltage limit brings below it expects no operation.
    import dataclasses

    r = studies["kessler_oxbow_115kv"]
    s, b = r.settings[0], testshots.end_bases(r)[0]
    assert b.min_current_a == r.verification.relay_model[s.end][
        "min_operating_current_secondary_a"]
    assert any(x.expected_zone for x in testshots.test_shots(s, b))
    high = dataclasses.replace(b, min_current_a=10 * b.i_test)
    assert all(x.expected_zone is None and x.expected == "no operation"
               for x in testshots.test_shots(s, high))


# Property: for any valid quadrilateral or mho (random reaches, angles, tilt, directional
# line, left blinder, forward or reverse), every shot straddles the one characteristic's
# boundary and the relay's loop impedance from its phasors is the point (identities).

class _Zone:
    def __init__(self, ch, name="zone1", delay=0.0):
        self.ch, self.zone, self.delay_s = ch, name, delay

    def characteristic(self, ground, theta):
        return self.ch


class _End:
    def __init__(self, zone, theta):
        self.zones, self.line_angle_rad, self.end = (zone,), theta, "X"

    def zone(self, name):
        return self.zones[0]


@st.composite
def _characteristics(draw):
    theta = math.radians(draw(st.floats(45, 88)))
    direction = draw(st.sampled_from(["forward", "reverse"]))
    if draw(st.booleans()):
        ang = theta if direction == "forward" else theta + math.pi
        return Mho(draw(st.floats(0.5, 200)), ang, direction), theta
    tilt = math.radians(draw(st.floats(-10, 20)))
    delta = theta - math.radians(draw(st.floats(60, 120)))
    x, r = draw(st.floats(0.5, 200)), draw(st.floats(0.5, 200))
    # A valid shape: the tilted reactance line still above the R axis at the right blinder
    # (the settings never tilt it further), and a left blinder of some width.
    assume(x - r * math.tan(tilt) > 0.05 * x)
    return Quadrilateral(x, r, theta,
                         r_left_ohm=draw(st.one_of(st.none(), st.floats(0.1, 100))),
                         direction=direction, tilt_rad=tilt,
                         directional_angle_rad=draw(st.one_of(st.none(), st.just(delta)))
                         ), theta


@settings(max_examples=60, deadline=None)
@given(_characteristics(), st.floats(0.05, 2.0),
       st.builds(complex, st.floats(-0.3, 1.5), st.floats(-0.5, 0.5)))
def test_property_shots_straddle_any_boundary(chth, factor, k0):
    ch, theta = chth
    basis = testshots.EndBasis("X", "s", factor, 63.5, 1.0, 100.0, 1000.0, k0, 50.0,
                               None, ("A", "B", "C"))
    shots = testshots.test_shots(_End(_Zone(ch), theta), basis)
    assert len({s.shot_id for s in shots}) == len(shots) >= 2 * 3 * 2 * 3
    for s in shots:
        assert bool(ch.contains(s.z_primary_ohm)) == (s.side == "in")
        assert s.expected_zone == ("zone1" if s.side == "in" else None)
        z = loop_impedances(s.v, s.i, k0)[s.loop]
        assert_allclose(z / factor, s.z_primary_ohm, rtol=1e-9, atol=0)
