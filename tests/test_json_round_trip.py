"""JSON export round trip: `relayset params/reach/settings FILE --json PATH`, loaded back.

Every key documented in README.md ("JSON export", "Reach study", "Settings") must be present,
carry the unit its name claims, and hold the value of the results object it comes from
(relayset.study_parameters / study_reach / study_settings on the same file), converted by
the exact unit factors (1 km = 1e3 m; µS = 1e-6 S; nF = 1e-9 F; mm = 1e-3 m; degrees from
radians by math.degrees). Values: 1e-12 relative (float round trip through JSON is exact;
the margin covers the unit factors).
"""

from __future__ import annotations

import cmath
import hashlib
import json
import math

import numpy as np
import pytest
from numpy.testing import assert_allclose

import relayset
from relayset.cli import main

DEMO_1C = "ashcombe_brenwick_132kv.toml"
DEMO_2C = "elsford_fallowby_230kv_double.toml"
EXACT = dict(rtol=1e-12, atol=0)


def _export(command: str, path, tmp_path) -> dict:
    out = tmp_path / f"{command}.json"
    # 3: written, with a failed verification check (the 230 kV demo; README, exit codes)
    assert main([command, str(path), "--json", str(out)]) in (0, 3)
    return json.loads(out.read_text("utf-8"))


def _c(v) -> complex:
    """A complex value in either documented JSON form: [re, im] or {magnitude, angle_deg}."""
    if isinstance(v, dict):
        assert set(v) == {"magnitude", "angle_deg"}
        return cmath.rect(v["magnitude"], math.radians(v["angle_deg"]))
    assert isinstance(v, list) and len(v) == 2
    return complex(v[0], v[1])


def _m(v) -> np.ndarray:
    assert set(v) == {"re", "im"}
    return np.array(v["re"]) + 1j * np.array(v["im"])


def _close(a, b):
    assert_allclose(np.asarray(a, dtype=complex), np.asarray(b, dtype=complex), **EXACT)


# Keys whose numbers are dimensionless (ratios, counts, per-unit): no unit in the name.
_DIMENSIONLESS = {"k0", "k0_complex", "kr", "kx", "z0_over_z1", "z0_over_z1_magnitude",
                  "k0m", "k0m_set", "k0_set", "magnitude", "k0_magnitude", "k0m_magnitude",
                  "scale", "cases_solved", "sir", "secondary_factor", "infeed_factor",
                  "ct_ratio", "vt_ratio",
                  "unbalance_m0_pct", "unbalance_m2_pct", "re", "im"}
_UNITS = ("_km", "_m", "_mm", "_ohm", "_ohm_per_km", "_pct", "_deg", "_hz", "_kv", "_a",
          "_a_per_km", "_nf_per_km", "_us_per_km", "_per_km", "_ohm_m", "_c", "_s",
          "_m_per_s", "_va", "_pu", "_pct_of_min")


def _unitless_numbers(d, path="") -> list[str]:
    """Keys holding numbers whose name carries no unit and that are not dimensionless."""
    bad = []
    if isinstance(d, dict) and d.get("kind") in ("polygon", "circle") and any(
            part.endswith(_UNITS) for part in path.split(".")):
        return bad  # neutral geometry (README "Settings"): a key holding it carries the unit
    if isinstance(d, dict):
        for k, v in d.items():
            num = isinstance(v, int | float) and not isinstance(v, bool)
            cplx = isinstance(v, list) and len(v) == 2 and all(
                isinstance(x, int | float) for x in v)
            if (num or cplx) and k not in _DIMENSIONLESS and not k.endswith(_UNITS):
                bad.append(f"{path}.{k}")
            bad += _unitless_numbers(v, f"{path}.{k}")
    elif isinstance(d, list):
        for i, v in enumerate(d):
            bad += _unitless_numbers(v, f"{path}[{i}]")
    return bad


@pytest.mark.parametrize("demo", [DEMO_1C, DEMO_2C])
def test_params_json_round_trip(tmp_path, demo_path, demo):
    path = demo_path(demo)
    d = _export("params", path, tmp_path)
    res = relayset.study_parameters(path)
    p = res.parameters
    # provenance (README "JSON export"): SHA-256 of the file's bytes (hashlib)
    assert d["relayset_version"] == res.relayset_version
    assert "licensed professional engineer" in d["caution"]
    assert d["source_file"] == path.name  # the name only: the same bytes wherever it runs
    assert d["source_sha256"] == hashlib.sha256(path.read_bytes()).hexdigest()
    assert d["study"]["line_id"] == res.study["line_id"]
    assert d["study"]["nominal_voltage_kv"] == p.v_nominal_v / 1e3
    assert d["input"] == json.loads(json.dumps(res.input, default=str))
    q = d["parameters"]
    assert set(q) >= {"length_km", "frequency_hz", "earth_resistivity_ohm_m", "earth_model",
                      "nominal_voltage_kv", "positions", "phase_labels", "sections",
                      "conductors", "z_by_position_ohm_per_km", "circuits", "k0m",
                      "arrangements", "assumptions"}
    assert q["length_km"] == pytest.approx(p.length_m / 1e3, rel=1e-12, abs=0)
    assert q["frequency_hz"] == p.frequency_hz
    assert q["earth_resistivity_ohm_m"] == p.earth_resistivity_ohm_m
    assert q["earth_model"] == p.earth_model
    assert q["positions"] == list(p.positions)
    assert q["phase_labels"] == [list(x) for x in p.phase_labels]
    for s, ln, order in zip(q["sections"], p.section_lengths_m, p.section_orders, strict=True):
        assert s["length_km"] == pytest.approx(ln / 1e3, rel=1e-12, abs=0)
        assert s["order"] == list(order)
    for c, cd in zip(q["conductors"], p.conductors, strict=True):
        assert set(c) == {"name", "description", "r_ac_ohm_per_km", "gmr_mm",
                          "outside_diameter_mm", "operating_temperature_c", "source"}
        _close(c["r_ac_ohm_per_km"], cd.r_ac_ohm_per_m * 1e3)
        _close(c["gmr_mm"], cd.gmr_m * 1e3)
        _close(c["outside_diameter_mm"], cd.radius_m * 2e3)
        assert c["operating_temperature_c"] == cd.operating_temperature_c
    _close(_m(q["z_by_position_ohm_per_km"]), p.z_by_position_ohm_per_m * 1e3)
    keys = {"z1_ohm_per_km", "z0_ohm_per_km", "z0_over_z1_magnitude", "line_angle_deg", "k0",
            "c1_nf_per_km", "c0_nf_per_km", "b1_us_per_km", "charging_current_a_per_km",
            "z1_ohm", "z0_ohm", "charging_current_a", "surge_impedance_ohm",
            "propagation_constant_per_km", "z1_exact_ohm", "z0_exact_ohm",
            "z1_exact_correction_pct", "z0_exact_correction_pct",
            "long_line_correction_needed"}
    for c, cs in zip(q["circuits"], p.circuits, strict=True):
        assert set(c) >= keys
        _close(_c(c["z1_ohm_per_km"]), cs.z1_ohm_per_m * 1e3)
        _close(_c(c["z0_ohm_per_km"]), cs.z0_ohm_per_m * 1e3)
        _close(c["z0_over_z1_magnitude"], abs(cs.z0_ohm_per_m / cs.z1_ohm_per_m))
        _close(c["line_angle_deg"], math.degrees(cmath.phase(cs.z1_ohm_per_m)))
        assert set(c["k0"]) == {"k0", "k0_complex", "kr", "kx", "z0_over_z1"}
        assert set(c["k0"]["k0"]) == {"magnitude", "angle_deg"}  # polar, README
        _close(_c(c["k0"]["k0"]), cs.k0.k0)
        _close(_c(c["k0"]["k0_complex"]), cs.k0.k0)
        _close(c["k0"]["kr"], cs.k0.kr)
        _close(c["k0"]["kx"], cs.k0.kx)
        _close(_c(c["k0"]["z0_over_z1"]), cs.z0_ohm_per_m / cs.z1_ohm_per_m)
        _close(c["c1_nf_per_km"], cs.c1_f_per_m * 1e9 * 1e3)
        _close(c["c0_nf_per_km"], cs.c0_f_per_m * 1e9 * 1e3)
        _close(c["b1_us_per_km"], cs.b1_s_per_m * 1e6 * 1e3)
        _close(c["charging_current_a_per_km"], cs.charging_current_a_per_m * 1e3)
        _close(c["charging_current_a"], cs.charging_current_a)
        _close(_c(c["z1_ohm"]), cs.z1_ohm)
        _close(_c(c["z0_ohm"]), cs.z0_ohm)
        _close(_c(c["z1_ohm"]), cs.z1_ohm_per_m * p.length_m)  # line total = per m x length
        pos, zer = cs.positive_long_line, cs.zero_long_line
        _close(_c(c["surge_impedance_ohm"]), pos.surge_impedance_ohm)
        _close(_c(c["propagation_constant_per_km"]), pos.propagation_per_m * 1e3)
        _close(_c(c["z1_exact_ohm"]), pos.z_exact_ohm)
        _close(_c(c["z0_exact_ohm"]), zer.z_exact_ohm)
        _close(c["z1_exact_correction_pct"], 100 * abs(pos.z_exact_ohm / cs.z1_ohm - 1))
        _close(c["z0_exact_correction_pct"], 100 * abs(zer.z_exact_ohm / cs.z0_ohm - 1))
        assert c["long_line_correction_needed"] == (c["z1_exact_correction_pct"] > 1
                                                    or c["z0_exact_correction_pct"] > 1)
    if p.k0m is None:
        assert q["k0m"] is None and len(p.circuits) == 1
    else:
        assert set(q["k0m"]) == {"magnitude", "angle_deg"}
        _close(_c(q["k0m"]), p.k0m)
    assert set(q["arrangements"]) == {"untransposed", "actual_plan", "ideal_cycle"}
    for name, a in q["arrangements"].items():
        arr = p.arrangements[name]
        _close(_m(a["zabc_ohm_per_km"]), arr.zabc_ohm_per_m * 1e3)
        _close(_m(a["yabc_us_per_km"]), arr.yabc_s_per_m * 1e6 * 1e3)
        _close(_m(a["z012_ohm_per_km"]), arr.z012_ohm_per_m * 1e3)
        _close(a["unbalance_m0_pct"], [100 * abs(m) for m in arr.unbalance_m0])
        _close(a["unbalance_m2_pct"], [100 * abs(m) for m in arr.unbalance_m2])
        if len(p.circuits) == 2:
            _close(_c(a["z0m_ohm_per_km"]), arr.z0m_ohm_per_m * 1e3)
        else:
            assert "z0m_ohm_per_km" not in a
    assert q["assumptions"] == list(p.assumptions)
    assert _unitless_numbers(q) == []


def _worst(j, w):
    if w is None:
        assert j is None
        return
    assert set(j) == {"error_pct", "fault_type", "location_pct", "r_fault_ohm", "source_case",
                      "transfer_angle_deg", "positions"}
    _close(j["error_pct"], w.error_pct)
    _close(j["location_pct"], 100 * w.m)
    assert (j["fault_type"], j["r_fault_ohm"], j["source_case"], j["positions"]) == (
        w.fault_type, w.r_fault_ohm, w.source_case, list(w.positions))
    _close(j["transfer_angle_deg"], w.transfer_angle_deg)


@pytest.mark.parametrize("demo", [DEMO_1C, DEMO_2C])
def test_reach_json_round_trip(tmp_path, demo_path, demo):
    path = demo_path(demo)
    d = _export("reach", path, tmp_path)
    r = relayset.study_reach(path).reach_study
    j = d["reach_study"]
    assert set(j) >= {"fault_types", "location_step_pct", "fault_resistances_ohm",
                      "phase_fault_resistance_ohm", "source_cases", "transfer_angles_deg",
                      "power_flows", "parallel_circuit", "shunt_capacitance",
                      "source_impedances_ohm", "cases_solved", "ends", "notes"}
    assert j["fault_types"] == list(r.fault_types)
    _close(j["fault_resistances_ohm"], r.fault_resistances_ohm)
    if r.power_flows is None:
        _close(j["transfer_angles_deg"], r.transfer_angles_deg)
        assert j["power_flows"] is None
    else:  # load cases given as P, Q: no common transfer angle
        assert j["transfer_angles_deg"] is None
        assert [(f["active_power_w"], f["reactive_power_var"]) for f in j["power_flows"]] == [
            (p, q) for p, q in r.power_flows]
    assert j["source_cases"] == [{"name": n, "scale": s} for n, s in r.source_cases]
    assert j["cases_solved"] == r.cases_solved
    for name, s in j["source_impedances_ohm"].items():
        assert set(s) == {"z1_ohm", "z0_ohm"} and len(s["z1_ohm"]) == 2, name
    for je, e in zip(j["ends"], r.ends, strict=True):
        assert set(je) == {"end", "z1_set_ohm", "k0_set", "k0m_set", "zone1_reach_pct",
                           "error_budget_pct", "recommended_zone1_pct",
                           "zone1_allowed_by_errors_pct", "governing_loop",
                           "governing_case", "arrangements"}
        assert je["end"] == e.end
        _close(_c(je["z1_set_ohm"]), e.z1_set_ohm)
        _close(_c(je["k0_set"]), e.k0_set)
        if e.k0m_set is None:
            assert je["k0m_set"] is None
        else:
            _close(_c(je["k0m_set"]), e.k0m_set)
        assert (je["zone1_reach_pct"], je["error_budget_pct"], je["recommended_zone1_pct"],
                je["zone1_allowed_by_errors_pct"], je["governing_loop"]) == (
            e.zone1_reach_pct, e.error_budget_pct, e.recommended_zone1_pct,
            e.zone1_allowed_by_errors_pct, e.governing_loop)
        _worst(je["governing_case"], e.governing_case)
        for ja, a in zip(je["arrangements"], e.arrangements, strict=True):
            assert (ja["arrangement"], ja["solved_as"], ja["mutual_compensation"]) == (
                a.arrangement, a.solved_as, a.mutual_compensation)
            for key in ("worst_bolted_overreach_at_remote_bus_pct",
                        "worst_bolted_overreach_on_line_pct",
                        "worst_bolted_underreach_on_line_pct"):
                _close(ja[key], getattr(a, key))
            env = ja["envelope"]
            _close(env["location_pct"], 100 * a.envelope_m)
            assert env["loops"] == [lp.loop for lp in a.loops]
            mx = np.array(env["bolted_reach_error_max_pct"], dtype=float)
            assert_allclose(mx, a.envelope_max_pct, rtol=1e-12, atol=0, equal_nan=True)
            for jl, lp in zip(ja["loops"], a.loops, strict=True):
                assert jl["loop"] == lp.loop
                # The results use the JSON's names (issue 19).
                for key in ("worst_overreach_at_zone1_reach", "worst_underreach_at_zone1_reach",
                            "worst_overreach_on_line", "worst_underreach_on_line",
                            "worst_overreach_at_remote_bus",
                            "worst_reactance_overreach_at_zone1_reach_resistive"):
                    _worst(jl[key], getattr(lp, key))
    assert _unitless_numbers(j) == []


def _zone_keys(shape: str) -> set[str]:
    base = {"direction", "rule", "reach_primary_ohm", "reach_primary_magnitude_ohm",
            "reach_secondary_ohm", "reach_secondary_magnitude_ohm", "reach_angle_deg",
            "reach_pct", "delay_s", "shape", "infeed_factor", "checks", "region_primary_ohm"}
    if shape == "mho":
        return base | {"char_angle_deg", "mho_diameter_primary_ohm",
                       "mho_diameter_secondary_ohm"}
    return base | {"x_reach_primary_ohm", "x_reach_secondary_ohm",
                   "r_reach_phase_primary_ohm", "r_reach_ground_primary_ohm"}


def _region_round_trip(j, z, theta):
    """README "Settings": the zone as set, for phase and ground loops, as plain geometry any
    program can test points against: a circle (centre, radius) or a polygon of corners."""
    assert set(j) == {"phase_loops", "ground_loops"}
    for key, ground in (("phase_loops", False), ("ground_loops", True)):
        g, char = j[key], z.characteristic(ground, theta)
        if z.shape == "mho":
            assert set(g) == {"kind", "center", "radius"} and g["kind"] == "circle"
            # centre D/2 at the characteristic angle, radius D/2 (hand geometry)
            _close(_c(g["center"]), cmath.rect(z.mho_diameter_primary_ohm / 2, z.char_angle_rad))
            _close(g["radius"], z.mho_diameter_primary_ohm / 2)
            continue
        assert set(g) == {"kind", "vertices"} and g["kind"] == "polygon"
        v = np.array([_c(p) for p in g["vertices"]])
        _close(v, char.outline())
        # corners are inside the zone as set and on its boundary: a step outward leaves it
        assert np.all(z.contains(v, theta)) and np.all(char.contains(v))
        assert not np.any(char.contains(v + 1e-7 * (v - v.mean())))
        # the reactance line, tilted by tau: two corners on X + R tan(tau) = x_reach (hand
        # geometry; tau = 0: X = x_reach)
        w = v if z.direction == "forward" else -v
        top = (w.imag + w.real * math.tan(z.reactance_tilt_rad)).max()
        _close(top, z.x_reach_primary_ohm)


@pytest.mark.parametrize("demo", [DEMO_1C, DEMO_2C])
def test_settings_json_round_trip(tmp_path, demo_path, demo):
    path = demo_path(demo)
    d = _export("settings", path, tmp_path)
    res = relayset.study_settings(path)
    # relay basis, resolved once (README "JSON export": `relay`)
    rb, jr = res.relay, d["relay"]
    assert set(jr) == {"ends", "z1_set_ohm", "k0_set", "k0m_set", "z1_from", "k0_from",
                       "k0m_from", "ct_ratio", "vt_ratio"}
    assert jr["ends"] == list(rb.ends)
    _close(_c(jr["z1_set_ohm"]), rb.z1_set_ohm)
    assert set(jr["k0_set"]) == {"magnitude", "angle_deg"}
    _close(_c(jr["k0_set"]), rb.k0_set)
    if rb.k0m_set is None:
        assert jr["k0m_set"] is None
    else:
        _close(_c(jr["k0m_set"]), rb.k0m_set)
    assert jr["z1_from"] == jr["k0_from"] == "line parameters"  # the demos give none
    _close(jr["ct_ratio"], rb.ct_ratio)
    _close(jr["vt_ratio"], rb.vt_ratio)
    assert list(d["settings"]) == ["ends"]
    assert len(d["settings"]["ends"]) == len(res.settings)
    for j, s in zip(d["settings"]["ends"], res.settings, strict=True):
        assert set(j) >= {"end", "remote_end", "line", "zones", "k0", "k0m", "load",
                          "sources", "warnings"}
        assert (j["end"], j["remote_end"]) == (s.end, s.remote_end)
        assert set(j["zones"]) == {"zone1", "zone2", "zone3", "reverse"}
        for name, jz in j["zones"].items():
            z = s.zone(name)
            assert set(jz) >= _zone_keys(z.shape)
            _close(_c(jz["reach_primary_ohm"]), z.reach_primary_ohm)
            _close(_c(jz["reach_secondary_ohm"]), z.reach_secondary_ohm)
            # secondary = primary x CT ratio / VT ratio (README "Settings")
            _close(_c(jz["reach_secondary_ohm"]),
                   z.reach_primary_ohm * rb.ct_ratio / rb.vt_ratio)
            _close(jz["reach_primary_magnitude_ohm"], abs(z.reach_primary_ohm))
            _close(jz["reach_angle_deg"], math.degrees(cmath.phase(z.reach_primary_ohm)))
            _close(jz["reach_pct"], z.reach_pct)
            assert jz["delay_s"] == z.delay_s
            if z.shape == "mho":
                _close(jz["char_angle_deg"], math.degrees(z.char_angle_rad))
                _close(jz["mho_diameter_primary_ohm"], z.mho_diameter_primary_ohm)
            _region_round_trip(jz["region_primary_ohm"], z, s.line_angle_rad)
            assert [c["check_id"] for c in jz["checks"]] == [c.check_id for c in z.checks]
        # k0 in the same form as parameters.circuits[].k0 (README "Settings")
        assert set(j["k0"]) == {"k0", "k0_complex", "kr", "kx", "z0_over_z1"}
        assert set(j["k0"]["k0"]) == {"magnitude", "angle_deg"}
        _close(_c(j["k0"]["k0"]), s.k0.k0)
        _close(_c(j["k0"]["k0_complex"]), s.k0.k0)
        _close(j["k0"]["kr"], s.k0.kr)
        _close(j["k0"]["kx"], s.k0.kx)
        _close(_c(j["k0"]["z0_over_z1"]), s.k0.z0_over_z1)
        _close(s.k0.k0, rb.k0_set)  # the relay's k0, resolved once
        if s.k0m is None:
            assert j["k0m"] is None
        else:
            assert set(j["k0m"]) == {"magnitude", "angle_deg"}
            _close(_c(j["k0m"]), s.k0m)
        _close(j["load"]["z_min_primary_ohm"], s.load.z_min_primary_ohm)
        _close(j["load"]["load_angle_max_deg"], math.degrees(s.load.load_angle_max_rad))
        for js, src in zip(j["sources"], s.sources, strict=True):
            assert set(js) == {"end", "role", "z_source_ohm", "sir", "line_class"}
            _close(_c(js["z_source_ohm"]), src.z_source_ohm)
            _close(js["sir"], src.sir)
            assert (js["end"], js["role"], js["line_class"]) == (src.end, src.role,
                                                                 src.line_class)
        assert [w["rule_id"] for w in j["warnings"]] == s.warning_ids()
        line = j["line"]
        assert set(line) == {"z1_primary_ohm", "z1_secondary_ohm", "angle_deg", "length_km",
                             "secondary_factor"}
        _close(_c(line["z1_primary_ohm"]), s.line_z1_primary_ohm)
        _close(line["angle_deg"], math.degrees(s.line_angle_rad))
        _close(line["length_km"], s.length_m / 1e3)
        _close(line["length_km"], d["parameters"]["length_km"])  # one length, one unit
        assert _unitless_numbers(j) == []
    assert d["philosophy"] == json.loads(json.dumps(res.philosophy))
