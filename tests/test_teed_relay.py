"""The relay side of a three-terminal (teed) line: the philosophy's zone shape, relay
profiles, accepted deviations and the R-X diagram (relayset.settings.teed,
relayset.studies.teed, relayset.studies.verification.teed, relayset.report.teed).

Independent checks: the loop impedance of a three-phase bolted fault on a balanced line
without shunt capacitance is the series impedance between the relay and the fault
(Kirchhoff's voltage law), tested against a quadrilateral whose half-planes are written out
by hand here; Warrington's arc formula (A. R. van C. Warrington, "Reactance relays
negligibly affected by arc impedance", Electrical World, 1931: R = 8750 (s + 3 v t) / I^1.4,
s in feet) for the resistive reach; a relay profile's step applied by hand.
"""

from __future__ import annotations

import cmath
import math
from dataclasses import dataclass

import numpy as np
import pytest
from test_teed import SOURCES, V_NOM, _balanced_leg
from test_teed_study import TEED_TOML

from relayset.physics.characteristic import Quadrilateral
from relayset.physics.teed import TeedLine

Z1_KM = (0.05 + 0.40j) / 1e3  # [ohm/m], the balanced legs of tests/test_teed.py


@dataclass(frozen=True)
class _Quad:
    """A forward quadrilateral zone as the relay model reads a zone (``characteristic``,
    ``direction``), for both kinds of loop."""

    x_reach: float
    r_right: float
    r_left: float
    direction: str = "forward"

    def characteristic(self, ground: bool, line_angle_rad: float) -> Quadrilateral:
        return Quadrilateral(self.x_reach, self.r_right, line_angle_rad,
                             r_left_ohm=self.r_left, direction=self.direction)


def _inside_by_hand(z: complex, x_reach: float, r_right: float, r_left: float,
                    theta: float) -> bool:
    """The quadrilateral's four half-planes written out (IEEE Std C37.113-2015's shape:
    reactance line X <= X_reach, blinders parallel to the line angle through (R_right, 0)
    and (-R_left, 0), directional line through the origin perpendicular to the line
    angle)."""
    r, x = z.real, z.imag
    return (x <= x_reach
            and r * math.sin(theta) - x * math.cos(theta) <= r_right * math.sin(theta)
            and -r * math.sin(theta) + x * math.cos(theta) <= r_left * math.sin(theta)
            and r * math.cos(theta) + x * math.sin(theta) >= 0)


@pytest.mark.parametrize("side", [+1, -1])
def test_quadrilateral_zone2_verification_against_the_polygon_by_hand(side):
    """A balanced teed line, the third terminal open (no infeed): three-phase bolted faults
    are measured at the relay as the series impedance to the fault (Kirchhoff), so on the
    line's own angle (82.9 deg). The relay's blinders are set at 70 deg, so these points
    lie left of the blinder direction; the farthest one (bus R) needs a left blinder offset
    of X/tan(70 deg) - R. Zone 2 with its left blinder 0.1 % wider covers every leg; 0.1 %
    narrower, the fault at R falls outside the polygon (hand half-planes agree) and the
    verification says zone 2 does not reach it."""
    from relayset.studies.verification.relay_model import RelayModel
    from relayset.studies.verification.teed import verify_teed

    ls, lr, lt = 25e3, 35e3, 15e3
    line = TeedLine((_balanced_leg(ls), _balanced_leg(lr), _balanced_leg(lt)))
    theta = math.radians(70.0)
    z_far = Z1_KM * (ls + lr)  # the relay at S sees bus R here (T open: no infeed)
    need_left = z_far.imag / math.tan(theta) - z_far.real
    r_left = need_left * (1 + side * 1e-3)
    x_reach = 2 * z_far.imag
    assert _inside_by_hand(z_far, x_reach, 30.0, r_left, theta) is (side > 0)
    zone2 = _Quad(x_reach, 30.0, r_left)
    zone1 = _Quad(0.5 * (Z1_KM * ls).imag, 30.0, 30.0)
    res = verify_teed(
        [("earth", line)], (SOURCES[0], SOURCES[1], None), (0,), {0: (zone1, zone2)},
        v_nominal_v=V_NOM, fault_types=["ABC"], r_fault_ohm=[0.0],
        source_scale=np.array([1.0]), case_names=("nominal",), k0=0j,
        line_angle_rad=theta, z_line_ohm=abs(z_far), models={0: RelayModel()},
        buses=("S", "R", "T"))[0]
    chk = {c.check_id: c for c in res.checks}["zone2_covers_all_legs"]
    assert chk.passed is (side > 0), chk.detail
    if side < 0:
        assert res.zone2_internal_scale == math.inf and "at R," in chk.detail
    else:  # inside: the reach scale is the reactance line's, X / X_reach (hand: 0.5)
        assert res.zone2_internal_scale == pytest.approx(0.5, rel=1e-9)


def test_quadrilateral_zone1_remote_terminal_against_the_reactance_line_by_hand():
    """Zone 1 must stay out of the remote terminals: the nearest one seen without infeed
    (bus T, at Z1 (ls + lt), Kirchhoff) has the reach scale X / X_reach of the reactance
    line; at 0.8 of its X the scale is 1/0.8, at 1.01 of it zone 1 operates."""
    from relayset.studies.verification.relay_model import RelayModel
    from relayset.studies.verification.teed import verify_teed

    ls, lr, lt = 25e3, 35e3, 15e3
    line = TeedLine((_balanced_leg(ls), _balanced_leg(lr), _balanced_leg(lt)))
    theta = float(np.angle(Z1_KM))
    near = Z1_KM * (ls + lt)
    kw = dict(v_nominal_v=V_NOM, fault_types=["ABC"], r_fault_ohm=[0.0],
              source_scale=np.array([1.0]), case_names=("nominal",), k0=0j,
              line_angle_rad=theta, z_line_ohm=abs(Z1_KM) * (ls + lr),
              models={0: RelayModel()}, buses=("S", "R", "T"))
    zone2 = _Quad(3 * near.imag, 5.0, 5.0)
    for factor, ok in ((0.8, True), (1.01, False)):
        assert _inside_by_hand(near, factor * near.imag, 5.0, 5.0, theta) is not ok
        res = verify_teed([("earth", line)], (SOURCES[0], None, SOURCES[2]), (0,),
                          {0: (_Quad(factor * near.imag, 5.0, 5.0), zone2)}, **kw)[0]
        chk = {c.check_id: c for c in res.checks}["zone1_no_remote_terminal_trip"]
        assert chk.passed is ok
        assert res.zone1_remote_scale == pytest.approx(1 / factor, rel=1e-9)


QUAD_PHILOSOPHY = '[characteristic]\nshape = "quadrilateral"\n'


def _study(tmp_path, text: str = TEED_TOML, philosophy: str | None = QUAD_PHILOSOPHY):
    if philosophy is not None:
        (tmp_path / "quad.toml").write_text(philosophy, encoding="utf-8")
        text = text.replace('to_substation = "Velmar"\n',
                            'to_substation = "Velmar"\nphilosophy = "quad.toml"\n', 1)
    path = tmp_path / "teed.toml"
    path.write_text(text, encoding="utf-8")
    return path


@pytest.fixture(scope="module")
def quad_result(tmp_path_factory):
    from relayset.studies import pipeline
    from relayset.studies.teed import run_teed

    return run_teed(pipeline.load(_study(tmp_path_factory.mktemp("quad"))))


def test_a_quadrilateral_philosophy_gives_quadrilateral_teed_zones(quad_result):
    """The philosophy's shape is used (before: mho circles whatever the philosophy said),
    through the one characteristic object, and the verification says it simulated them."""
    for e in quad_result.ends:
        for z in e.settings.zones:
            assert z.shape == "quadrilateral"
            ch = z.characteristic(True, cmath.phase(quad_result.z1_set_ohm))
            assert isinstance(ch, Quadrilateral)
            assert ch.region()["kind"] == "polygon"
            # the reach point on the line angle lies on the reactance line (X = Im Zt)
            assert z.x_reach_primary_ohm == pytest.approx(z.reach_primary_ohm.imag, rel=1e-12)
        ids = [c.check_id for c in e.checks]
        assert "zone1_resistive_load_limit" in ids and "zone2_load_encroachment" in ids
    text = " ".join(quad_result.assumptions)
    assert "quadrilateral shapes" not in text and "mho or quadrilateral" in text


def test_teed_zone1_blinder_is_the_two_ended_arc_rule_by_hand(quad_result):
    """Zone 1's ground-loop blinder: (1 + margin) (R_arc + R_footing) / |1 + k0|, the arc
    by Warrington's formula (no wind, defaults: margin 20 %, footing 10 ohm, ground arc
    0.01 m per kV) at the phase-to-phase current of a fault at the farthest remote terminal
    fed from the relay end alone, I = V / |2 (Zs + Z_path)|; the phase-loop blinder
    (1 + margin) R_arc / 2 with the phase spacing (5 m) as arc length."""
    legs = [z1 for _, z1, _ in quad_result.legs]
    zs = {"Wrenfold": 1.5 + 12j, "Velmar": 2.5 + 18j, "Oakrest": 4 + 30j}
    k0 = quad_result.k0_set
    for x, e in enumerate(quad_result.ends):
        path = legs[x] + max((legs[y] for y in range(3) if y != x), key=abs)
        i_arc = V_NOM / abs(2 * (zs[e.end] + path))
        warrington = 8750 / 0.3048  # ohm A^1.4 per metre (8750 per foot)
        r_g = 1.2 * (warrington * 1.32 / i_arc ** 1.4 + 10.0) / abs(1 + k0)
        r_ph = 1.2 * warrington * 5.0 / i_arc ** 1.4 / 2
        z1 = e.settings.zone("zone1")
        assert z1.r_reach_ground_primary_ohm == pytest.approx(r_g, rel=1e-9)
        assert z1.r_reach_phase_primary_ohm == pytest.approx(r_ph, rel=1e-9)


def test_quadrilateral_zone2_holds_the_remote_terminals_with_infeed(quad_result):
    """Zone 2's blinders are widened (both sides) to hold every bolted remote-terminal
    fault as the infeed turns it: the reach study's extreme cases lie inside zone 2 by the
    hand half-planes (each with its loop's blinders), and the verification finds every
    bolted fault on the legs inside zone 2."""
    theta = cmath.phase(quad_result.z1_set_ohm)
    for e in quad_result.ends:
        chk = {c.check_id: c for c in e.verification_checks}["zone2_covers_all_legs"]
        assert chk.passed, chk.detail
        z2 = e.settings.zone("zone2")
        for a in e.apparent:
            for z, case in ((a.min_z_ohm, a.min_case), (a.max_z_ohm, a.max_case)):
                loop = case.split("loop ")[1].split(",")[0]
                q = z2.characteristic(loop.endswith("G"), theta)
                assert _inside_by_hand(z, q.x_reach_ohm, q.r_reach_ohm, q.r_left, theta), (
                    e.end, a, z)


# --------------------------------------------------------------------- relay profiles
def _profile(tmp_path, edit: tuple[str, str] | None = None) -> str:
    """The shipped generic quadrilateral profile (1 A, steps 0.01 ohm), edited."""
    from relayset.inputs.profile import shipped_profiles

    text = shipped_profiles()["generic_quadrilateral_1a"].read_text(encoding="utf-8")
    if edit is not None:
        assert edit[0] in text
        text = text.replace(*edit, 1)
    (tmp_path / "prof.toml").write_text(text, encoding="utf-8")
    return TEED_TOML.replace('vt_ratio = "132000/110 V"\n',
                             'vt_ratio = "132000/110 V"\nprofile = "prof.toml"\n', 1)


def _run(path):
    from relayset.studies import pipeline
    from relayset.studies.teed import run_teed

    return run_teed(pipeline.load(path))


def test_teed_zones_on_the_profile_steps_by_hand(tmp_path, quad_result):
    """Each end's settable values: the ideal secondary value (primary x CT ratio / VT
    ratio = 600/1200 here) rounded to the profile's 0.01 ohm step by hand, zone 1's reach
    down, zone 2's up, blinders down (settings.settable.ROUNDING); the zone as set (and so
    the verification) carries the settable value back in primary ohms."""
    res = _run(_study(tmp_path, _profile(tmp_path)))
    f = 600 / (132000 / 110)
    for ideal, e in zip(quad_result.ends, res.ends, strict=True):
        st = e.settings
        assert st.settable is not None and st.settable.profile_name.startswith("Generic")
        for zone, how in (("zone1", math.floor), ("zone2", math.ceil)):
            x_ideal = ideal.settings.zone(zone).x_reach_primary_ohm * f
            by_hand = how(round(x_ideal / 0.01, 6)) * 0.01
            z = st.zone(zone)
            assert z.x_reach_secondary_ohm == pytest.approx(by_hand, abs=1e-12)
            assert z.x_reach_primary_ohm == pytest.approx(by_hand / f, rel=1e-12)
            r_ideal = ideal.settings.zone(zone).r_reach_ground_primary_ohm * f
            assert z.r_reach_ground_secondary_ohm == pytest.approx(
                math.floor(round(r_ideal / 0.01, 6)) * 0.01, abs=1e-12)
            v = st.settable.value(f"{zone}.reach")
            assert v.ideal == pytest.approx(x_ideal, rel=1e-12)
            assert v.settable == z.x_reach_secondary_ohm
        ids = {c.check_id: c for c in e.checks}
        assert ids["zone1_within_profile_range"].passed
        assert ids["zone2_within_profile_range"].passed


def test_a_value_outside_the_profile_range_fails_its_check(tmp_path):
    """Zone 2's reach above the profile's range: a failed ``zone2_within_profile_range``
    naming the range (never clamped), and the verdict says failed checks."""
    text = _profile(tmp_path, ('label = "Zone 2 reactance reach"\nmin = 0.05\nmax = 250',
                               'label = "Zone 2 reactance reach"\nmin = 0.05\nmax = 5'))
    res = _run(_study(tmp_path, text))
    for e in res.ends:
        c = {c.check_id: c for c in e.checks}["zone2_within_profile_range"]
        assert not c.passed and "outside the range 0.05 to 5" in c.detail
        assert e.settings.zone("zone2").x_reach_secondary_ohm > 5  # not clamped
    assert res.verification == "failed checks"


def test_the_verification_judges_the_settable_zone(tmp_path):
    """A coarse zone 1 reach step (1 ohm secondary, rounded down) against the profile's
    own 0.01 ohm step (k0 rounded alike in both): the verification's smallest zone 1 reach
    scale over the remote-terminal faults grows by the ratio of the two settable reactance
    reaches (the scale of a point inside the blinders is X / X_reach,
    relayset.physics.characteristic.Quadrilateral)."""
    import re

    fine = _run(_study(tmp_path, _profile(tmp_path)))
    text = _profile(tmp_path, ('label = "Zone 1 reactance reach"\nmin = 0.05\nmax = 250\n'
                               'step = 0.01',
                               'label = "Zone 1 reactance reach"\nmin = 1\nmax = 250\n'
                               'step = 1'))
    res = _run(_study(tmp_path, text))

    def scale(e):
        c = {c.check_id: c for c in e.verification_checks}["zone1_no_remote_terminal_trip"]
        return float(re.search(r"smallest reach scale ([0-9.]+)", c.detail).group(1))

    for ideal, e in zip(fine.ends, res.ends, strict=True):
        ratio = (ideal.settings.zone("zone1").x_reach_primary_ohm
                 / e.settings.zone("zone1").x_reach_primary_ohm)
        assert ratio > 1.005  # the step moved the reach
        assert scale(e) == pytest.approx(scale(ideal) * ratio, rel=2e-3)


def test_teed_report_with_a_profile_embeds_it_and_verify_recomputes(tmp_path, capsys):
    """The report of a teed study on a relay profile prints each end's settable values,
    embeds the profile (its SHA-256 the one each end's settable values record), and
    `relayset verify` recomputes the study from the embedded files: it matches."""
    pytest.importorskip("pypdf")
    import json

    from relayset.cli import main

    path = _study(tmp_path, TEED_TOML.replace(
        'vt_ratio = "132000/110 V"\n',
        'vt_ratio = "132000/110 V"\nprofile = "generic_quadrilateral_1a"\n', 1))
    out = tmp_path / "rep"
    assert main(["report", str(path), "-o", str(out)]) in (0, 3)
    capsys.readouterr()
    html = next(out.glob("*.html")).read_text("utf-8")
    assert "Settable values on the relay profile" in html and "zone2.resistive_ground" in html
    d = json.loads(next(out.glob("*.json")).read_text("utf-8"))
    hashes = {e["settings"]["settable"]["profile"]["sha256"] for e in d["teed"]["ends"]}
    assert len(hashes) == 1
    assert main(["verify", str(next(out.glob("*.pdf")))]) == 0
    text = capsys.readouterr().out
    assert "MATCHES" in text and hashes.pop() in text


# ----------------------------------------------------------------- accepted deviations
NEXT_LINE = '''
[[adjacent_lines]]
name = "Velmar - Ixworth 132 kV"
z1 = "2 + 6j ohm"
bus = "Velmar"
'''


def _deviation(check: str, end: str) -> str:
    return (f'\n[[deviations]]\ncheck = "{check}"\nend = "{end}"\n'
            'reason = "zone 2 is time graded with the next zone 2 by the protection study"\n'
            'accepted_by = "A. Mbeki"\ndate = 2026-12-01\n')


# The checks the short next line fails (a zone 2 that must reach Velmar with infeed
# overlaps its zone 1), by end: the setting rule's and the simulation's.
FAILING = {end: ("zone2.short_of_next_zone1", "zone2.stays_short_of_next_zone1")
           for end in ("Wrenfold", "Oakrest")}


def _settings(tmp_path, capsys, extra: str):
    from relayset.cli import main

    path = tmp_path / "dev.toml"
    path.write_text(TEED_TOML + NEXT_LINE + extra, encoding="utf-8")
    out_json = tmp_path / "dev.json"
    code = main(["settings", str(path), "--json", str(out_json)])
    cap = capsys.readouterr()
    return code, cap, out_json


def test_accepted_deviations_change_the_teed_verdict(tmp_path, capsys):
    """The two-ended rule (relayset.studies.verification.deviations): a failed check the
    study accepts is listed with who and why and not counted; every failure accepted gives
    "verified with accepted deviations" and exit 0; one left open keeps "failed checks"
    and exit 3, with the one count of failed checks one per open check."""
    import json

    from relayset.report.failures import failed_checks

    code, _, out = _settings(tmp_path, capsys, "")
    d = json.loads(out.read_text("utf-8"))
    assert code == 3 and d["teed"]["verification"] == "failed checks"
    assert len(failed_checks(d)) == 4
    every = "".join(_deviation(c, e) for e, cs in FAILING.items() for c in cs)
    code, cap, out = _settings(tmp_path, capsys, every)
    d = json.loads(out.read_text("utf-8"))
    assert code == 0, cap.err
    assert d["teed"]["verification"] == "verified with accepted deviations"
    assert failed_checks(d) == []
    assert {(a["end"], a["check"]) for a in d["teed"]["accepted_deviations"]} == {
        (e, c) for e, cs in FAILING.items() for c in cs}
    assert "accepted as a deviation (zone2.short_of_next_zone1) by A. Mbeki" in cap.out
    # one of the four left open
    some = "".join(_deviation(c, e) for e, cs in FAILING.items() for c in cs
                   if (e, c) != ("Oakrest", "zone2.stays_short_of_next_zone1"))
    code, _, out = _settings(tmp_path, capsys, some)
    d = json.loads(out.read_text("utf-8"))
    assert code == 3 and d["teed"]["verification"] == "failed checks"
    assert [(f.end, f.check_id) for f in failed_checks(d)] == [
        ("Oakrest", "zone2_stays_short_of_next_zone1")]


@pytest.mark.parametrize("check, end, words", [
    ("zone1.reaches_tee", "Wrenfold", ["names no failing check", "passed at Wrenfold"]),
    ("zone2.short_of_next_zone", "Wrenfold",
     ["is no check of the verification or the settings at Wrenfold",
      "zone2.short_of_next_zone1"]),
])
def test_a_deviation_that_accepts_nothing_is_refused(tmp_path, capsys, check, end, words):
    """A stale or mistyped acceptance must not cover a later failure: one line naming the
    file, the field and the value, exit 2, nothing written."""
    code, cap, out = _settings(tmp_path, capsys, _deviation(check, end))
    err = cap.err.strip()
    assert code == 2 and len(err.splitlines()) == 1 and "Traceback" not in err
    assert f'deviations[0].check = "{check}"' in err
    for w in words:
        assert w in err, err
    assert not out.exists()


# --------------------------------------------------------------------- R-X diagram
def _html_report(path) -> tuple[str, dict]:
    """The report's HTML and results JSON (the PDF step left out: the pages are HTML)."""
    import json

    from relayset.report import build

    r = build.report_for_study(path, pdf_renderer=lambda html, files, when: b"%PDF-")
    return r.html, json.loads(r.json)


@pytest.mark.parametrize("philosophy", [QUAD_PHILOSOPHY, None], ids=["quad", "mho"])
def test_teed_rx_diagram_draws_each_ends_zones_and_remote_terminals(tmp_path, philosophy):
    """One R-X diagram per relay end: zone 1 and zone 2 as set (a quadrilateral drawn per
    loop kind, a mho circle once), read back through the figure's own tick labels equal to
    the zone's region in the results (the characteristic as set); and the apparent
    impedances of the remote terminals, two remote terminals x infeed in/out x smallest
    and largest, at their place (filled: infeed in)."""
    from test_report import SVG_NS, _axis, _numbers, _role, _svgs

    html, d = _html_report(_study(tmp_path, philosophy=philosophy))
    figs = _svgs(html)
    theta = cmath.phase(complex(*d["teed"]["z1_set_ohm"]))
    assert len([k for k in figs if k.startswith("R-X diagram")]) == 3
    for e in d["teed"]["ends"]:
        root = figs[f"R-X diagram, relay at {e['end']}"]
        ar, kr = _axis(_role(root, "ticks-r"), "x")
        ax, kx = _axis(_role(root, "ticks-x"), "y")
        tol = 0.015 / abs(kr)
        zones = e["settings"]["zones"]
        drawn = [el for el in root.iter() if el.get("data-zone")]
        quad = philosophy is not None
        assert sorted(el.get("data-zone") for el in drawn) == (
            ["zone1", "zone1", "zone2", "zone2"] if quad else ["zone1", "zone2"])
        for el in drawn:
            for loops in el.get("data-loops").split():
                g = zones[el.get("data-zone")]["region_primary_ohm"][loops]
                if quad:
                    xy = np.array(_numbers(el.get("d"))).reshape(-1, 2)
                    ohm = np.column_stack([(xy[:, 0] - ar) / kr, (xy[:, 1] - ax) / kx])
                    np.testing.assert_allclose(ohm, g["vertices"], rtol=0, atol=tol)
                    # the corners are the polygon's by hand: on its boundary lines
                    z = ohm[:, 0] + 1j * ohm[:, 1]
                    q = Quadrilateral(zones[el.get("data-zone")]["x_reach_primary_ohm"],
                                      1.0, theta)  # only its reactance line is used
                    assert np.any(np.isclose(z.imag, q.x_reach_ohm, atol=tol))
                else:
                    assert el.tag == SVG_NS + "circle"
                    np.testing.assert_allclose(float(el.get("r")) / kr, g["radius"],
                                               rtol=0, atol=tol)
        marks = [p for p in _role(root, "points").iter(SVG_NS + "path")]
        want = [(complex(*a[k]), a["infeed"]) for a in e["apparent"]
                for k in ("min_z_ohm", "max_z_ohm")]
        assert len(marks) == len(want) == 8
        for p, (z, infeed) in zip(marks, want, strict=True):
            x, y = _numbers(p.get("d"))[:2]  # the square's corner, 2.8 units off centre
            got = complex((x + 2.8 - ar) / kr, (y + 2.8 - ax) / kx)
            assert abs(got - z) <= 2 * tol
            assert (p.get("fill") == "#000") is infeed


def test_teed_report_marks_accepted_deviations(tmp_path):
    """An accepted teed check is printed "FAIL, accepted" with who accepted it and why,
    and the report's verdict is "verified with accepted deviations"."""
    path = tmp_path / "dev.toml"
    every = "".join(_deviation(c, e) for e, cs in FAILING.items() for c in cs)
    path.write_text(TEED_TOML + NEXT_LINE + every, encoding="utf-8")
    html, d = _html_report(path)
    assert d["teed"]["verification"] == "verified with accepted deviations"
    assert html.count("FAIL, accepted") == 4 and "by A. Mbeki, 2026-12-01" in html
    assert "VERIFIED WITH ACCEPTED DEVIATIONS" in html.upper()


def test_teed_settings_need_a_load_table(tmp_path, capsys):
    """The zones' load checks (and a quadrilateral's load limit) need [load], as the
    two-ended settings do: one line, exit 2, nothing written."""
    from relayset.cli import main

    path = tmp_path / "noload.toml"
    path.write_text(TEED_TOML[:TEED_TOML.index("[load]")], encoding="utf-8")
    out = tmp_path / "x.json"
    assert main(["settings", str(path), "--json", str(out)]) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1 and "Traceback" not in err
    assert f"{path}: load: settings need a [load] table" in err
    assert not out.exists()
