"""The varistor state phase by phase (relayset.physics.series_capacitor.per_phase_operating_point
and relayset.studies.series_capacitors): each phase of a bank at Goldsworthy's impedance of
its own phase current.

Checks:
- against an independent computation: the per-case modified nodal analysis of
  tests/reference_solver.py with the bank's three phase impedances found by scipy's root
  finder (scipy.optimize.root) on |I_phase(Z_G(i))| = i, independently of the code under
  test (its compensation-theorem model, Gauss-Seidel and bisection);
- identities: a balanced fault on a balanced line gives three equal phase impedances, the
  old single operating point (found here by scipy.optimize.brentq on the one-impedance
  problem); a single-phase fault's healthy phases stay at -jX_C where their current is
  below the protective level;
- honesty: a case that does not converge is flagged, and a study refuses it in one line.
Line data are invented (tests/test_network.py's and the demo's).
"""

from __future__ import annotations

from functools import cache
from pathlib import Path

import numpy as np
import pytest
from test_network import SRC_R, SRC_S, V_NOM, single_circuit

from relayset.physics import network
from relayset.physics.series_capacitor import goldsworthy_impedance_pu, per_phase_operating_point

from reference_solver import solve_fault_single

DEMO = Path(__file__).resolve().parents[1] / "demo_lines" / "tarrow_hithe_400kv_series_comp.toml"


def _cascade(line: network.LineCascade, at: float, z3) -> network.LineCascade:
    n = line.n_conductors
    el = network.SeriesElement(at, np.diag(np.tile(np.asarray(z3, complex), n // 3)))
    return network.LineCascade(line.z_ohm_per_m, line.length_m, line.y_s_per_m, (el,))


def _gold(i, x_c, i_pl):
    return goldsworthy_impedance_pu(np.asarray(i) / i_pl) * x_c


def _reference_root(line, at, m, side, ft, x_c, i_pl, src_s, src_r, scale=1.0, i_start=None,
                    v_nom=V_NOM):
    """Independent operating point: MNA (tests/reference_solver.py) inside scipy's root
    finder on the three phase currents."""
    from scipy.optimize import root

    def currents(i3):
        z3 = _gold(np.maximum(i3, 0.0), x_c, i_pl)
        ref = solve_fault_single(_cascade(line, at, z3), src_s, src_r, v_nominal_v=v_nom,
                                 fault_type=ft, m=m, r_fault_ohm=0.0, source_scale=scale)
        return np.abs(ref.i_f_from_s if side == "s" else ref.i_f_from_r)

    if i_start is None:  # the in-service currents (every phase -jX_C)
        i_start = currents(np.zeros(3))
    sol = root(lambda i3: (currents(i3) - i3) / i_pl, i_start, method="hybr", tol=1e-12)
    assert sol.success, sol.message
    i3 = np.maximum(sol.x, 0.0)
    return i3, _gold(i3, x_c, i_pl)


X_C, AT = 25.0, 0.45  # ohm, place: invented, some 60 % of the 100 km test line


@pytest.mark.parametrize("ft", ["AG", "BC", "ABG", "ABC", "CAG"])
def test_per_phase_operating_point_equals_reference_root(ft):
    # Code under test: the batched solver through the compensation model; reference: MNA
    # with scipy's root finder. Tolerance 1e-6 of I_pl on the currents, 1e-5 of X_C on the
    # impedances (the code's stated tolerance is 1e-6 of I_pl; Goldsworthy's slope is below
    # 3 X_C per unit current above the level).
    line = single_circuit(shunt=True)
    m = AT + 1e-6
    in_service = solve_fault_single(_cascade(line, AT, np.full(3, -1j * X_C)), SRC_S, SRC_R,
                                    v_nominal_v=V_NOM, fault_type=ft, m=m, r_fault_ohm=0.0)
    i_pl = 0.55 * float(np.max(np.abs(in_service.i_f_from_s)))  # the faulted phases conduct

    def solve(z):
        out = np.empty(z.shape, complex)
        for c in range(z.shape[0]):
            sw = network.solve_fault_sweep(_cascade(line, AT, z[c]), SRC_S, SRC_R,
                                           v_nominal_v=V_NOM, fault_types=[ft], m=[m],
                                           r_fault_ohm=[0.0])
            out[c] = sw.i_f_from_s[0, 0, 0, 0, 0]
        return out

    op = per_phase_operating_point(solve, np.full(3, X_C), np.full(3, i_pl), 1)
    assert op.converged.all()
    i_ref, z_ref = _reference_root(line, AT, m, "s", ft, X_C, i_pl, SRC_S, SRC_R)
    np.testing.assert_allclose(op.i_a[0], i_ref, rtol=0, atol=1e-6 * i_pl)
    np.testing.assert_allclose(op.z_ohm[0], z_ref, rtol=0, atol=1e-5 * X_C)
    faulted = [p for p in range(3) if "ABC"[p] in ft]
    assert all(op.status[0, p] == 1 for p in faulted)  # conducting


def test_balanced_fault_gives_the_old_single_operating_point():
    # Identity: a balanced line (balanced_phase_matrix), balanced sources and a three-phase
    # fault: the three phase impedances are equal, and equal to the single operating point
    # with one impedance in every phase (found here by scipy.optimize.brentq on
    # |I(Z_G(i))| - i), within 1e-6 of I_pl and 1e-5 of X_C.
    from scipy.optimize import brentq

    from relayset.physics.sequence import balanced_phase_matrix

    z = balanced_phase_matrix(0.03 + 0.33j, 0.25 + 1.1j) / 1e3
    y = balanced_phase_matrix(1j * 3.5e-6, 1j * 2.2e-6) / 1e3
    line = network.LineCascade(np.stack([z, z]), np.array([60e3, 140e3]), np.stack([y, y]))
    src_s, src_r = network.Source(1.5 + 18j, 2.5 + 24j), network.Source(2.0 + 25j, 3.0 + 30j)
    m, x_c = 0.3 + 1e-6, 30.0

    def sweep(z3):
        return network.solve_fault_sweep(_cascade(line, 0.3, z3), src_s, src_r,
                                         v_nominal_v=V_NOM, fault_types=["ABC"], m=[m],
                                         r_fault_ohm=[0.0]).i_f_from_s[0, 0, 0, 0, 0]

    i_full = float(np.max(np.abs(sweep(np.full(3, -1j * x_c)))))
    i_pl = 0.5 * i_full
    op = per_phase_operating_point(lambda zz: np.array([sweep(r) for r in zz]),
                                   np.full(3, x_c), np.full(3, i_pl), 1)
    assert op.converged.all()
    i_old = brentq(lambda i: abs(sweep(np.full(3, complex(_gold(i, x_c, i_pl))))[0]) - i,
                   0.99 * i_pl, 10 * i_pl, xtol=1e-9 * i_pl)
    np.testing.assert_allclose(op.i_a[0], np.full(3, i_old), rtol=0, atol=1e-6 * i_pl)
    np.testing.assert_allclose(op.z_ohm[0], np.full(3, _gold(i_old, x_c, i_pl)), rtol=0,
                               atol=1e-5 * x_c)


def test_single_phase_fault_healthy_phases_keep_the_full_capacitor():
    # Identity: in an A-to-ground fault the healthy phases B and C carry a current below
    # the protective level, so their varistors do not conduct: exactly -jX_C, and their
    # current is what the network lets through with the operating point (1e-6 of I_pl).
    line = single_circuit(shunt=True)
    m = AT + 1e-6

    def sweep(z3):
        return network.solve_fault_sweep(_cascade(line, AT, z3), SRC_S, SRC_R,
                                         v_nominal_v=V_NOM, fault_types=["AG"], m=[m],
                                         r_fault_ohm=[0.0], transfer_angle_rad=0.2
                                         ).i_f_from_s[0, 0, 0, 0, 0]

    i_a = abs(sweep(np.full(3, -1j * X_C))[0])
    i_pl = 0.5 * i_a
    op = per_phase_operating_point(lambda zz: np.array([sweep(r) for r in zz]),
                                   np.full(3, X_C), np.full(3, i_pl), 1)
    assert op.converged.all()
    assert op.status[0].tolist() == [1, 0, 0]
    assert np.all(op.i_a[0, 1:] < 0.98 * i_pl)
    np.testing.assert_array_equal(op.z_ohm[0, 1:], [-1j * X_C, -1j * X_C])
    np.testing.assert_allclose(np.abs(sweep(op.z_ohm[0])), op.i_a[0], rtol=0,
                               atol=1e-6 * i_pl)
    assert op.z_ohm[0, 0].real > 0 and abs(op.z_ohm[0, 0].imag) < X_C  # phase A conducts


def test_a_case_that_does_not_converge_is_flagged():
    # A network that is not linear (its currents change from one solve to the next, as no
    # network does) cannot meet the model check: the case comes back not converged rather
    # than with a value.
    calls = [0]

    def solve(z):
        calls[0] += 1
        i = 1e3 / (1.0 + np.abs(z) / 10.0) * (1 + 0.01 * np.sin(calls[0]))
        return i.astype(complex)

    op = per_phase_operating_point(solve, np.full(3, 10.0), np.full(3, 200.0), 2,
                                   max_linearisations=3)
    assert not op.converged.any()


@cache
def _demo_basis():
    from relayset.inputs.study_file import load_study
    from relayset.studies.geometry import build_geometry
    from relayset.studies.parameters import compute_parameters
    from relayset.studies.reach import build_source, line_cascade
    from relayset.studies.series_capacitors import capacitor_basis

    study = load_study(DEMO)
    geo = build_geometry(study, str(DEMO))
    params = compute_parameters(geo)
    line = line_cascade(geo, params, "actual_plan", study.reach_study.shunt_capacitance)
    src = {n: build_source(study, n, str(DEMO)) for n in study.ends}
    # the strongest source case at each end (the design case's)
    cases = study.reach_study.source_cases
    scale = tuple(min(c.scale_at(e) for c in cases) for e in study.ends)
    return (study, line, src, scale, geo.v_nominal_v,
            capacitor_basis(study, geo, params, line, src, str(DEMO)))


@pytest.mark.parametrize("ft", ["AG", "CA", "BCG", "ABC"])
def test_demo_bank_operating_point_equals_reference_root(ft):
    # The study's varistor state (relayset.studies.series_capacitors) on the demo's
    # mid-line bank: per fault type, the side of the bank letting the larger phase current
    # through, each phase at its own current. Reference: MNA with scipy's root finder on
    # both sides (tests/reference_solver.py), the side with the larger current kept.
    # Tolerance 1e-5 of I_pl and of X_C.
    study, line, src, scale, v_nom, basis = _demo_basis()
    (bank,) = basis.banks
    base = network.LineCascade(line.z_ohm_per_m, line.length_m, line.y_s_per_m)
    s_s, s_r = src[study.ends[0]], src[study.ends[1]]
    best = None
    for m, side in ((bank.at + 1e-6, "s"), (bank.at, "r")):
        i3, z3 = _reference_root(base, bank.at, m, side, ft, bank.x_c_ohm,
                                 bank.i_protective_a, s_s, s_r, scale, v_nom=v_nom)
        if best is None or np.max(i3) > np.max(best[0]):
            best = (i3, z3)
    np.testing.assert_allclose(bank.varistor_i_a[ft], best[0], rtol=0,
                               atol=1e-5 * bank.i_protective_a)
    np.testing.assert_allclose(bank.varistor_z_ohm[ft], best[1], rtol=0,
                               atol=1e-5 * bank.x_c_ohm)


def test_study_sweep_uses_each_fault_types_phase_impedances():
    # The reach study's and the verification's solve (solve_sweep): the varistor state's
    # AG faults are solved with the AG operating point, not the three-phase one: equal to
    # one solve of that fault type with those elements (the same solver: an identity of
    # the joining, to 1e-12 relative).
    from relayset.studies.series_capacitors import solve_sweep, with_state

    study, line, src, scale, v_nom, basis = _demo_basis()
    s_s, s_r = src[study.ends[0]], src[study.ends[1]]
    kw = dict(v_nominal_v=v_nom, m=np.array([0.2, 0.6, 0.9]), r_fault_ohm=[0.0, 10.0],
              source_scale=np.array([scale]))
    ln = with_state(line, basis, "varistor")
    sw = solve_sweep(basis, "varistor", ln, s_s, s_r, fault_types=["ABC", "AG"], **kw)
    one = network.LineCascade(line.z_ohm_per_m, line.length_m, line.y_s_per_m,
                              basis.elements(3, "varistor", "AG"))
    ag = network.solve_fault_sweep(one, s_s, s_r, fault_types=["AG"], **kw)
    np.testing.assert_allclose(sw.i_s[1], ag.i_s[0], rtol=1e-12, atol=0)
    np.testing.assert_allclose(sw.v_s[1], ag.v_s[0], rtol=1e-12, atol=0)
    assert not np.allclose(basis.banks[0].varistor_z_ohm["AG"],
                           basis.banks[0].varistor_z_ohm["ABC"])
    # the prefault state is the load flow's network (the cascade from with_state) for every
    # fault type, as the replay of one case sees it
    sw2 = solve_sweep(basis, "varistor", ln, s_s, s_r, fault_types=["AG", "BC"], **kw)
    ref = network.solve_fault_sweep(ln, s_s, s_r, fault_types=["AG"], **kw)
    for name in ("v_s_pre", "i_s_pre", "v_r_pre", "i_r_pre"):
        np.testing.assert_allclose(getattr(sw2, name), getattr(ref, name), rtol=1e-12,
                                   atol=0)
    np.testing.assert_allclose(sw2.i_s[0], ag.i_s[0], rtol=1e-12, atol=0)


def test_study_refuses_a_varistor_state_that_does_not_converge(monkeypatch, capsys, tmp_path):
    # One line, exit 2, nothing written, naming the bank (RULES.md, bad input / not
    # modelled): the iteration's result is not returned when it did not converge.
    from dataclasses import replace

    import relayset.studies.series_capacitors as sc
    from relayset.cli import main

    real = sc.per_phase_operating_point

    def never(*a, **k):
        op = real(*a, **k)
        return replace(op, converged=np.zeros_like(op.converged))

    monkeypatch.setattr(sc, "per_phase_operating_point", never)
    out = tmp_path / "out"
    code = main(["report", str(DEMO), "-o", str(out)])
    err = capsys.readouterr().err.strip()
    assert code == 2 and len(err.splitlines()) == 1, err
    assert "series_capacitors[0]" in err and "did not converge" in err
    assert not out.exists()


def test_strongly_compensated_bank_converges_through_the_network(tmp_path):
    # 85 % compensation: the Gauss-Seidel sweeps over the phases of a three-phase fault
    # cycle (the close-in loop near series resonance couples the phases strongly), and
    # Newton's method finishes them. Checked through the network itself: the batched
    # solver with the operating point's impedances lets through the phase currents the
    # point was found at (1e-5 of I_pl), for every fault type, the side chosen.
    import tomllib

    import tomli_w

    from relayset.inputs.study_file import load_study
    from relayset.studies.geometry import build_geometry
    from relayset.studies.parameters import compute_parameters
    from relayset.studies.reach import build_source, line_cascade
    from relayset.studies.series_capacitors import capacitor_basis

    data = tomllib.loads(DEMO.read_text())
    data["study"]["philosophy"] = str((DEMO.parent / data["study"]["philosophy"]).resolve())
    data["series_capacitors"][0]["compensation_pct"] = 85
    path = tmp_path / "c85.toml"
    path.write_text(tomli_w.dumps(data))
    study = load_study(path)
    geo = build_geometry(study, str(path))
    params = compute_parameters(geo)
    line = line_cascade(geo, params, "actual_plan", study.reach_study.shunt_capacitance)
    src = {n: build_source(study, n, str(path)) for n in study.ends}
    basis = capacitor_basis(study, geo, params, line, src, str(path))
    assert basis.varistor_error is None
    (bank,) = basis.banks
    cases = study.reach_study.source_cases
    scale = np.array([[min(c.scale_at(e) for c in cases) for e in study.ends]])
    for ft in network.FAULT_TYPES:
        ln = network.LineCascade(line.z_ohm_per_m, line.length_m, line.y_s_per_m,
                                 basis.elements(3, "varistor", ft))
        sw = network.solve_fault_sweep(ln, src[study.ends[0]], src[study.ends[1]],
                                       v_nominal_v=geo.v_nominal_v, fault_types=[ft],
                                       m=[bank.at + 1e-6, bank.at], r_fault_ohm=[0.0],
                                       source_scale=scale)
        sides = [np.abs(sw.i_f_from_s[0, 0, 0, 0, 0]), np.abs(sw.i_f_from_r[0, 1, 0, 0, 0])]
        want = np.array(bank.varistor_i_a[ft])
        err = min(np.max(np.abs(s - want)) for s in sides)
        assert err <= 1e-5 * bank.i_protective_a, (ft, err)


def test_json_names_fault_types_in_the_studys_phase_labels():
    # The results JSON names fault types as everywhere else (the study's labels, "L1-G"),
    # the phases in the order of the labels; an A-to-ground fault: only phase A conducts.
    *_, basis = _demo_basis()
    (bank,) = basis.banks
    per = basis.to_dict()["banks"][0]["varistor_state"]["per_fault_type"]
    assert set(per) == {"L1-G", "L2-G", "L3-G", "L1-L2", "L2-L3", "L3-L1", "L1-L2-G",
                        "L2-L3-G", "L3-L1-G", "L1-L2-L3"}
    ag = per["L1-G"]
    assert ag["phase_varistor"] == ["conducting", "not_conducting", "not_conducting"]
    assert ag["phase_current_a"] == list(bank.varistor_i_a["AG"])
    assert ag["phase_impedance_ohm"][1] == [0.0, -bank.x_c_ohm]
