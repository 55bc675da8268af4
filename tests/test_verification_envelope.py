"""The verification's envelope and relay model, checked from outside the verification.

Independent sources: the per-case modified-nodal-analysis solver in tests/reference_solver.py
(shares nothing with the batched solver but the fault constraints); circuit laws
(S = 3 V I*, superposition); the zone as set read back from the results JSON alone.
"""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
from numpy.testing import assert_allclose

from relayset import api
from relayset.cli import main
from relayset.physics import loadflow, measurement, network
from relayset.studies import pipeline
from relayset.studies.geometry import build_geometry
from relayset.studies.parameters import compute_parameters
from relayset.studies.reach import _cascade, build_source
from relayset.studies.verification import RelayModel, Run, view
from relayset.studies.verification.relay_model import forward

from reference_solver import solve_fault_single

D132 = "ashcombe_brenwick_132kv.toml"
D230 = "elsford_fallowby_230kv_double.toml"


def _line(path):
    study = pipeline.load(path).study
    geo = build_geometry(study, str(path))
    params = compute_parameters(geo)
    line = _cascade(params.z_by_position_ohm_per_m, params.y_by_position_s_per_m,
                    [list(o) for o in geo.section_orders], geo.section_lengths_m,
                    study.reach_study.shunt_capacitance)
    names = study.ends
    return study, geo, line, build_source(study, names[0], ""), build_source(study, names[1], "")


def _in_region(z: complex, region: dict) -> bool:
    """Whether z lies in a zone given as the JSON's neutral geometry (circle or polygon)."""
    if region["kind"] == "circle":
        c = complex(*region["center"])
        return abs(z - c) <= region["radius"] * (1 + 1e-9)
    v = [complex(*p) for p in region["vertices"]]
    return all(((b - a).conjugate() * (z - a)).imag >= -1e-9 for a, b in zip(v, v[1:] + v[:1],
                                                                           strict=True))


def test_remote_bus_dlg_through_ground_resistance_at_max_export_132kv(tmp_path, demo_path):
    """Regression (issue: false 'verified'): on the 132 kV mho demo zone 1 operated for
    two-phase-to-ground faults at the remote bus through 1-5 ohm to ground (0 ohm between
    phases) while the relay end exported the study's maximum load. Re-solved here with the
    reference solver, zone 1 read from the results JSON alone: it must not operate (the
    verification says 'verified'), while the zone 1 the old sweep issued (80 % of the line)
    does operate, so the test can fail."""
    out = tmp_path / "r.json"
    assert main(["settings", str(demo_path(D132)), "--json", str(out)]) in (0, 3)
    d = json.loads(out.read_text("utf-8"))
    end = d["settings"]["ends"][0]
    z1 = end["zones"]["zone1"]
    region = z1["region_primary_ohm"]
    k0 = complex(*end["k0"]["k0_complex"])
    check = next(c for c in d["verification"]["ends"][0]["checks"]
                 if c["check_id"] == "no_operation_at_remote_bus")
    assert check["result"] == "pass"
    study, geo, line, s_s, s_r = _line(demo_path(D132))
    ld = study.load
    s_max = ld.max_apparent_power / ld.min_voltage ** 2  # at nominal voltage, same impedance
    old = region["ground_loops"]
    scale_old = 80.0 / z1["reach_pct"]
    old = {"kind": "circle", "center": [x * scale_old for x in old["center"]],
           "radius": old["radius"] * scale_old}
    inside_now = inside_old = 0
    scales = [c.scale for c in study.reach_study.source_cases]
    for a in scales:
        for b in scales:
            for phi in (-ld.load_angle_max, ld.load_angle_max):
                p, q = s_max * math.cos(phi), s_max * math.sin(phi)
                e_s, e_r = loadflow.emfs_for_load(line, s_s, s_r, v_nominal_v=geo.v_nominal_v,
                                                  p_w=[p], q_var=[q], source_scale=[[a, b]])
                emf = (complex(e_s[0, 0]), complex(e_r[0, 0]))
                # The load flow is trusted only after the reference solver delivers its
                # power: S = sum V I* at the relay bus within 2 % (positive-sequence load
                # flow on an untransposed line).
                pre = solve_fault_single(line, s_s, s_r, v_nominal_v=geo.v_nominal_v,
                                         fault_type="AG", m=0.5, r_fault_ohm=1e12, emf_v=emf,
                                         source_scale=(a, b))
                s_got = complex(np.sum(pre.v_s * np.conj(pre.i_s)))
                assert_allclose(abs(s_got - complex(p, q)), 0, atol=0.02 * s_max)
                for ft in ("ABG", "BCG", "CAG"):
                    for rg in (1.0, 2.0, 3.0, 4.0, 5.0):
                        c = solve_fault_single(line, s_s, s_r, v_nominal_v=geo.v_nominal_v,
                                               fault_type=ft, m=1.0, r_fault_ohm=rg,
                                               r_phase_ohm=0.0, emf_v=emf,
                                               source_scale=(a, b))
                        loops = measurement.loop_impedances(c.v_s, c.i_s, k0)
                        for lp in measurement.loops_for_fault(ft):
                            reg = region["ground_loops" if lp.endswith("G") else "phase_loops"]
                            inside_now += _in_region(complex(loops[lp]), reg)
                            inside_old += _in_region(complex(loops[lp]), old)
    assert inside_now == 0
    assert inside_old > 0


def test_prefault_quantities_at_r_by_superposition(demo_path):
    # Identity: a fault through 1e12 ohm leaves the network in its prefault state, so the
    # bus R quantities equal the prefault ones the sweep reports (relative 1e-9).
    _, geo, line, s_s, s_r = _line(demo_path(D132))
    sw = network.solve_fault_sweep(line, s_s, s_r, v_nominal_v=geo.v_nominal_v,
                                   fault_types=("AG",), m=np.array([0.3]),
                                   r_fault_ohm=np.array([1e12]), transfer_angle_rad=[0.2])
    assert_allclose(sw.v_r[0, 0, 0], sw.v_r_pre, rtol=1e-9, atol=0)
    assert_allclose(sw.i_r[0, 0, 0], sw.i_r_pre, rtol=1e-6, atol=1e-6)


def _run(sw, faulted="protected"):
    return Run(sw, faulted, "in_service", ("nominal",), 300.0, (True, True))


def test_balanced_bolted_internal_fault_on_untransposed_double_circuit_is_forward(demo_path):
    """Issue finding: with |I2| < 2 % the old element left balanced faults to chance; on the
    untransposed 230 kV double circuit a bolted three-phase fault carries 2-2.4 % I2 and was
    judged reverse. The positive-sequence element polarised by the prefault voltage sees
    every internal three-phase fault forward, and every one at the relay's own bus
    (behind it, fed from the line) reverse, at every listed load case."""
    _, geo, line, s_s, s_r = _line(demo_path(D230))
    sw = network.solve_fault_sweep(line, s_s, s_r, v_nominal_v=geo.v_nominal_v,
                                   fault_types=("ABC",), m=np.linspace(0.0, 1.0, 11),
                                   r_fault_ohm=np.array([0.0, 0.0]),
                                   r_phase_ohm=np.array([0.0, 5.0]),
                                   transfer_angle_rad=np.radians([-20.0, 0.0, 20.0]))
    theta = math.radians(80.0)
    i2 = np.abs(sw.i_s[..., 0] + np.exp(-2j * math.pi / 3) * sw.i_s[..., 1]
                + np.exp(2j * math.pi / 3) * sw.i_s[..., 2]) / 3
    assert np.max(i2 / np.max(np.abs(sw.i_s), axis=-1)) > 0.005  # unbalanced enough to fool
    fwd = forward(sw.v_s, sw.i_s, sw.v_s_pre, sw.fault_types, theta)
    assert fwd.all()
    behind = view(_run(sw), True, 0.6, None, RelayModel(), behind=True, line_angle=theta)
    assert not behind.forward[:, 0].any()


def test_supervision_drops_k0m_only_where_the_parallel_residual_is_larger(demo_path):
    # Circuit law: for a ground fault on the parallel circuit its residual current exceeds
    # the protected circuit's, so the supervised relay measures without k0m there, and the
    # loop equals the uncompensated one exactly.
    _, geo, line, s_s, s_r = _line(demo_path(D230))
    from relayset.studies.verification import swap_circuits

    sw = network.solve_fault_sweep(swap_circuits(line), s_s, s_r,
                                   v_nominal_v=geo.v_nominal_v, fault_types=("AG",),
                                   m=np.array([0.2, 0.5, 0.8]), r_fault_ohm=np.array([0.0]))
    run = _run(sw, "parallel")
    k0, k0m = 0.7 - 0.05j, 0.35 + 0.02j
    sup = view(run, True, k0, k0m, RelayModel(mutual_supervision=True))
    raw = view(run, True, k0, None, RelayModel())
    assert not np.any(sup.mutual)
    assert_allclose(sup.loops["AG"], raw.loops["AG"], rtol=1e-12, atol=0)


def test_envelope_and_relay_model_recorded(demo_path):
    res = api.study_settings(demo_path(D132))
    d = res.verification.to_dict()
    env = d["envelope"]
    ld = pipeline.load(demo_path(D132)).study.load
    s = ld.max_apparent_power / ld.min_voltage ** 2 / 1e6
    assert_allclose([math.hypot(*f) for f in env["max_load_exported_at_each_end_mva"]],
                    [s, s], rtol=1e-12, atol=0)
    assert 1.0 in env["r_ground_ohm"] and 2.0 in env["r_ground_ohm"]
    assert env["earth_resistivities_ohm_m"] == [30.0, 100.0, 1000.0]
    model = d["relay_model"]["Ashcombe"]
    assert model["phase_selection"] == "faulted_loops"
    # 0.05 A secondary through the 800/1 CT
    assert_allclose(model["min_operating_current_primary_a"], 40.0, rtol=1e-12, atol=0)
    notes = " ".join(d["notes"])
    assert "Load envelope" in notes and "Relay model" in notes and "fault cases solved" in notes


@pytest.mark.parametrize("line, rule", [
    ('phase_selection = "some"', "must be"),
    ('min_operating_current = "-1 A"', "at least 0 A"),
    ('ground_release_current = "3 V"', "current"),
])
def test_relay_model_keys_refused_with_one_line(tmp_path, demo_path, capsys, line, rule):
    text = demo_path(D132).read_text("utf-8").replace("[relay]\n", f"[relay]\n{line}\n", 1)
    bad = tmp_path / "bad.toml"
    bad.write_text(text, "utf-8")
    out = tmp_path / "o.json"
    assert main(["settings", str(bad), "--json", str(out)]) == 2
    err = capsys.readouterr().err.strip()
    key = line.split(" = ")[0]
    assert len(err.splitlines()) == 1 and f"relay.{key} = " in err and rule in err
    assert "bad.toml" in err and not out.exists()
