"""A verification case, as the results name it, is enough to solve it again on its own.

The verification names its cases through one description (``checks._describe``, and the
lines behind and beyond renamed as ``branches.branch_checks`` does). Cases of every kind
the simulation solves (protected line, its own bus behind the relay, parallel circuit,
sequential clearing, the lines behind and beyond) are described from a full simulation of
the double-circuit demo and solved again by
:class:`relayset.studies.verification.replay.CaseSolver`: its governing loop must measure
what the simulation measured (relative 1e-6: the same solver on a batch of one, float
rounding only), and its relay currents must be the simulation's own (the relay model's
``relay_quantities``), within the same tolerance of the largest.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import pytest

from relayset import api
from relayset.export import comtrade
from relayset.resources import demo_lines_dir
from relayset.studies.verification import closing, relay_model, simulation
from relayset.studies.verification.checks import _describe, relay_model_at, resistive_targets
from relayset.studies.verification.envelope import build_envelope
from relayset.studies.verification.replay import CaseNotReproducedError

DEMO = demo_lines_dir() / "elsford_fallowby_230kv_double.toml"


@pytest.fixture(scope="module")
def solved(tmp_path_factory):
    # the demo with a line behind its relay (invented), so that every kind of case is there
    text = DEMO.read_text("utf-8").replace(
        'philosophy = "philosophies/', f'philosophy = "{DEMO.parent.as_posix()}/philosophies/')
    text += '\n[[lines_behind]]\nname = "Elsford - Ryecombe 230 kV"\nz1 = "2.4 + 22j ohm"\n'
    path = tmp_path_factory.mktemp("behind") / DEMO.name
    path.write_text(text, "utf-8")
    r = api.study_settings(path)
    solver = comtrade.case_solver(r)
    study, geo = solver.study, solver.geo
    env = build_envelope(study, resistive_targets(study, list(r.settings)))
    by_rho = closing.params_by_resistivity(study, geo, solver._by_rho[
        float(study.system.earth_resistivity)], str(r.source_file))
    sim = simulation.simulate(study, geo, by_rho, env, m=np.array([0.0, 0.5, 1.0]),
                              source=str(r.source_file))
    return r, solver, sim


def _cases(r, solver, sim, rng, end):
    """(case, relay currents) of sampled cases of every run, seen by a relay at ``end``
    with the k0, k0m and line angle of the study's relay (the currents do not depend on
    the zones)."""
    st = r.settings[0]
    names = sim.names
    at_s = end == names[0]
    model = relay_model_at(solver.study, end)
    k0m = st.k0m if sim.mutual else None
    out = []
    for run in sim.runs:
        kinds = [False, True] if run.faulted in ("protected", "branch") else [False]
        for behind in kinds:
            v = relay_model.relay_view(run, at_s, st.k0.k0, k0m, model,
                                       line_angle=st.line_angle_rad, behind=behind)
            if v is None:
                continue
            sw = run.sweep
            rfp = np.stack([sw.r_fault_ohm, sw.r_phase_ohm], axis=1)
            what = ("behind the relay" if behind else "protected line"
                    if run.faulted == "protected" else "parallel circuit" +
                    (f", its breaker at {run.open_at} open" if run.open_at else ""))
            for _ in range(2):
                idx = tuple(int(rng.integers(n)) for n in v.forward.shape)
                ft = sw.fault_types[idx[0]]
                loop = next(lp for lp in relay_model.LOOPS if lp in model.loops_for(ft))
                which = np.full(v.forward.shape, relay_model.LOOPS.index(loop))
                case = _describe(v, which, sim.labels, what, rfp)(idx)
                if run.faulted == "branch":  # as branches.branch_checks names them
                    locs = [k for k, b in enumerate(run.branch)
                            if (b[0] == end) == behind]
                    if idx[1] >= len(locs):
                        continue
                    if not behind:
                        v2 = v.at_locations(np.array(locs))
                        case = _describe(v2, which[:, :len(locs)], sim.labels, what,
                                         rfp)(idx)
                    bus, nm, x = run.branch[locs[idx[1]]]
                    case = replace(case, location_pct=100 * x, faulted=(
                        f"line '{nm}' from {bus} ("
                        + ("behind the relay" if behind else "beyond the remote bus") + ")"))
                if not np.isfinite(complex(case.z_apparent_primary_ohm)):
                    continue
                vv, ii, _ = relay_model.relay_quantities(run, at_s, behind=behind)
                if behind and run.faulted == "protected":
                    own = np.flatnonzero(np.isclose(sw.m, 0.0 if at_s else 1.0))
                    vv, ii = vv[:, own], ii[:, own]
                elif run.faulted == "branch":
                    sel = np.array(locs)
                    vv, ii = vv[:, sel], ii[:, sel]
                # the simulation's own prefault at the relay where it solved it for the
                # healthy network (not where a breaker is open; the parallel circuit's at R
                # is not among the solver's prefault outputs)
                k, li = idx[3], idx[4]
                pre = None
                if not run.open_at and run.faulted != "parallel":
                    pre = ((sw.v_s_pre, sw.i_s_pre) if at_s else (sw.v_r_pre, sw.i_r_pre))
                elif not run.open_at and at_s:
                    pre = (sw.v_s_pre, sw.i_s_parallel_pre)
                pre = None if pre is None else (pre[0][k, li], pre[1][k, li])
                out.append((case, ii[idx], pre))
    return out


@pytest.mark.parametrize("at", [0, 1], ids=["relay at S", "relay at R"])
def test_every_kind_of_case_is_solved_again(solved, at):
    r, solver, sim = solved
    st = r.settings[0]
    end = sim.names[at]
    cases = _cases(r, solver, sim, np.random.default_rng(20), end)
    kinds = {c.faulted.split(" (")[0].split(",")[0] if not c.faulted.startswith("line")
             else c.faulted.split("(")[1] for c, _, _ in cases}
    assert {"protected line", "behind the relay", "parallel circuit",
            "behind the relay)", "beyond the remote bus)"} <= kinds, kinds
    assert any("breaker at" in c.faulted for c, _, _ in cases)
    n_pre = 0
    for case, i_sim, pre in cases:
        p = solver.phasors(end, st, case)
        z = complex(case.z_apparent_primary_ohm)
        assert abs(p.z_loop_ohm - z) <= 1e-6 * abs(z), case
        assert np.all(np.abs(p.i - i_sim) <= 1e-6 * np.abs(i_sim).max()), case
        if pre is not None:
            v_pre, i_pre = pre
            assert np.all(np.abs(p.v_pre - v_pre) <= 1e-6 * np.abs(v_pre).max()), case
            assert np.all(np.abs(p.i_pre - i_pre) <= 1e-6 * np.abs(i_pre).max() + 1e-9), case
            n_pre += 1
    assert n_pre >= 10


def test_a_case_that_is_not_the_networks_is_refused(solved):
    r, solver, _sim = solved
    st = r.settings[0]
    g = next(c.governing_case for c in r.verification.end(st.end).checks
             if c.governing_case is not None)
    wrong = replace(g, z_apparent_primary_ohm=complex(g.z_apparent_primary_ohm) * 1.01)
    with pytest.raises(CaseNotReproducedError):
        solver.phasors(st.end, st, wrong)
