"""Property: on random studies, no zone 1 operation at the remote bus goes unreported.

Independent of the verification: the faults are re-solved one by one by the modified-nodal
reference solver (tests/reference_solver.py, shares nothing with the batched solver but
the fault constraints); the zone is read from the results JSON alone (its neutral
``region_primary_ohm`` geometry, tested with our own point-in-circle / point-in-polygon
code); the loops are the textbook loop impedances (IEEE Std C37.113-2015, ground loop
V/(I + k0 I_N), phase loop ΔV/ΔI) with the k0 the JSON states. The cases are drawn from the
envelope the JSON states (fault resistances, load exported at either end at ±φ, source
cases, earth resistivities).
"""

from __future__ import annotations

import json
import math
import tomllib
from dataclasses import replace

import numpy as np
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from relayset.cli import main
from relayset.physics import measurement
from relayset.resources import demo_lines_dir
from relayset.studies import pipeline
from relayset.studies.geometry import build_geometry
from relayset.studies.parameters import compute_parameters
from relayset.studies.reach import _cascade, build_source, emfs_for_flows_at

from reference_solver import solve_fault_single
from tomlwrite import dump_toml

FAULTS = ("AG", "BG", "CG", "AB", "BC", "CA", "ABC", "ABG", "BCG", "CAG")


def _in_region(z: complex, region: dict, scale: float = 1.0) -> bool:
    """z inside a zone given as neutral JSON geometry, the zone scaled about the origin."""
    if region["kind"] == "circle":
        c = complex(*region["center"]) * scale
        return abs(z - c) <= region["radius"] * scale * (1 + 1e-9)
    v = [complex(*p) * scale for p in region["vertices"]]
    return all(((b - a).conjugate() * (z - a)).imag >= -1e-9
               for a, b in zip(v, v[1:] + v[:1], strict=True))


def _study(tmp, length_km, relay_z1, remote_mva, s_mva, angle_deg, quad):
    """A variant of the 132 kV demo: line length, sources, load, characteristic."""
    demo = demo_lines_dir() / "ashcombe_brenwick_132kv.toml"
    d = tomllib.loads(demo.read_text("utf-8"))
    f = length_km / 80.0
    d["line"]["length"] = f"{length_km} km"
    d["line"]["sections"] = [dict(s, length=f"{float(s['length'].split()[0]) * f} km")
                             for s in d["line"]["sections"]]
    d["sources"]["Ashcombe"] = {"z1": f"{relay_z1.real} + {relay_z1.imag}j ohm",
                                "z0": f"{1.4 * relay_z1.real} + {1.6 * relay_z1.imag}j ohm"}
    d["sources"]["Brenwick"]["fault_level_3ph"] = f"{remote_mva} MVA"
    d["load"]["max_apparent_power"] = f"{s_mva} MVA"
    d["load"]["load_angle_max"] = f"{angle_deg} deg"
    if quad:
        d["study"]["philosophy"] = str(demo_lines_dir() / "philosophies"
                                       / "northmarch_transmission.toml")
    path = tmp / "s.toml"
    path.write_text(dump_toml(d), "utf-8")
    return path


@settings(max_examples=4, deadline=None,
          suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow])
@given(length_km=st.sampled_from([40.0, 80.0, 140.0]),
       relay_z1=st.sampled_from([0.8 + 6j, 1.5 + 12j, 3.0 + 30j]),
       remote_mva=st.sampled_from([800, 2500, 6000]),
       s_mva=st.sampled_from([100, 160, 220]),
       angle_deg=st.sampled_from([20.0, 30.0]),
       quad=st.booleans(),
       seed=st.integers(0, 2**16))
def test_no_unreported_zone1_operation_at_the_remote_bus(tmp_path_factory, length_km,
                                                          relay_z1, remote_mva, s_mva,
                                                          angle_deg, quad, seed):
    tmp = tmp_path_factory.mktemp("prop")
    path = _study(tmp, length_km, relay_z1, remote_mva, s_mva, angle_deg, quad)
    out = tmp / "r.json"
    assert main(["settings", str(path), "--json", str(out)]) in (0, 3)
    d = json.loads(out.read_text("utf-8"))
    end = d["settings"]["ends"][0]
    z1 = end["zones"]["zone1"]
    region = z1["region_primary_ohm"]
    k0 = complex(*end["k0"]["k0_complex"])
    check = next(c for c in d["verification"]["ends"][0]["checks"]
                 if c["check_id"] == "no_operation_at_remote_bus")
    env = d["verification"]["envelope"]
    # The line at each earth resistivity the JSON says was swept.
    study = pipeline.load(path).study
    names = study.ends
    src = {n: build_source(study, n, "") for n in names}
    lines = {}
    for rho in env["earth_resistivities_ohm_m"]:
        s2 = replace(study, system=replace(study.system, earth_resistivity=rho))
        geo = build_geometry(s2, str(path))
        p = compute_parameters(geo)
        lines[rho] = _cascade(p.z_by_position_ohm_per_m, p.y_by_position_s_per_m,
                              [list(o) for o in geo.section_orders], geo.section_lengths_m,
                              study.reach_study.shunt_capacitance)
    flows = [complex(*f) * 1e6 for f in env["max_load_exported_at_each_end_mva"]]
    scales = [c.scale for c in study.reach_study.source_cases if not c.at]
    rg = env["r_ground_ohm"]
    rp = env["r_phase_ohm"]
    rng = np.random.default_rng(seed)
    both = [(g, p) for g in rg for p in rp if g > 0 and p > 0]
    cases = ([(ft, (g, 0.0)) for ft in FAULTS[:3] for g in rg]
             + [(ft, (0.0, p)) for ft in FAULTS[3:7] for p in rp]
             + [(ft, r) for ft in FAULTS[7:] for r in
                [(g, 0.0) for g in rg] + [(0.0, p) for p in rp] + both])
    pairs = [(a, b) for a in scales for b in scales]
    inside = inside_wide = 0
    # Every fault type and resistance of the envelope, the maximum load exported at either
    # end at ±φ, three source pairs and one earth resistivity drawn at random.
    for j in rng.choice(len(pairs), size=min(3, len(pairs)), replace=False):
        a, b = pairs[j]
        rho = env["earth_resistivities_ohm_m"][rng.integers(len(lines))]
        line = lines[rho]
        for at in names:  # exported at either end (the other imports)
            f = np.array(flows)
            e_s, e_r = emfs_for_flows_at(line, src, names, at, f.real, f.imag,
                                         np.array([[a, b]]), "in_service",
                                         study.system.nominal_voltage)
            for li in range(f.size):
                emf = (complex(e_s[0, li]), complex(e_r[0, li]))
                for ft, rf in cases:
                    c = solve_fault_single(line, src[names[0]], src[names[1]],
                                           v_nominal_v=study.system.nominal_voltage,
                                           fault_type=ft, m=1.0, r_fault_ohm=rf[0],
                                           r_phase_ohm=rf[1], emf_v=emf, source_scale=(a, b))
                    loops = measurement.loop_impedances(c.v_s, c.i_s, k0)
                    for lp in measurement.loops_for_fault(ft):
                        reg = region["ground_loops" if lp.endswith("G") else "phase_loops"]
                        z = complex(loops[lp])
                        inside += _in_region(z, reg)
                        # zone 1 stretched to 110 % of the line: the sweep reaches the
                        # boundary
                        inside_wide += _in_region(z, reg, 110.0 / z1["reach_pct"])
    assert inside == 0 or check["result"] == "FAIL", (inside, check)
    assert inside_wide > 0
    assert math.isfinite(z1["reach_pct"])
