"""Shared corridors in the settings and their verification by fault simulation: the
neighbour's states as a state axis, its faults as external faults, the report."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from relayset.studies.pipeline import run

DEMO = Path(__file__).resolve().parent.parent / "demo_lines"
CORRIDOR = DEMO / "ashcombe_brenwick_132kv_corridor.toml"
ALONE = DEMO / "ashcombe_brenwick_132kv.toml"


@pytest.fixture(scope="module")
def results():
    return run(CORRIDOR, settings=True), run(ALONE, settings=True)


def _check(ver: dict, end: str, zone: str, check: str) -> dict:
    e = next(x for x in ver["ends"] if x["end"] == end)
    return next(c for c in e["checks"] if c["zone"] == zone and c["check_id"] == check)


def test_verification_sweeps_the_neighbour_states_and_faults(results):
    cor, _ = results
    ver = cor.verification.to_dict()
    assert ver["parallel_states"] == ["neighbour in_service", "neighbour earthed",
                                      "neighbour isolated"]
    # Faults on the neighbour are external: zone 1 must not operate for any (the
    # simulated margin is positive; they are many: 10 types x 5 points x resistances x
    # sources x loads x resistivities).
    nb = _check(ver, "Ashcombe", "zone1", "no_operation_for_neighbouring_line_faults")
    assert nb["result"] == "pass" and nb["cases_run"] > 10_000
    assert nb["margin_pct"] > 0
    assert any("Shared corridor" in n for n in ver["notes"])


def test_zone1_is_no_longer_with_the_neighbour(results):
    # The earthed neighbour makes the remote-bus ground faults overreach (zero-sequence
    # mutual coupling, see test_corridor_study): the zone 1 the simulation allows can only
    # shrink compared with the line alone (same line, same envelope otherwise).
    cor, alone = results

    def z1(res):
        st = res.settings[0]
        return st.zone("zone1").reach_pct

    assert z1(cor) < z1(alone)
    gov = _check(cor.verification.to_dict(), "Ashcombe", "zone1", "no_operation_at_remote_bus")
    assert gov["result"] == "pass"


def test_neighbour_faults_are_seen_through_the_remote_bus(results):
    # Circuit theory: the neighbour ends on Brenwick, the protected line's remote bus, so
    # a bolted fault on it reaches the relay at Ashcombe through that bus: the relay sees
    # it forward and farther than the remote bus (apparent reactance above the line's
    # for the phase loop of a three-phase fault, where no coupling acts).
    from relayset.studies.geometry import build_geometry
    from relayset.studies.parameters import compute_parameters
    from relayset.studies.pipeline import load
    from relayset.studies.verification.envelope import build_envelope
    from relayset.studies.verification.relay_model import RelayModel, view
    from relayset.studies.verification.simulation import simulate

    loaded = load(CORRIDOR)
    geo = build_geometry(loaded.study, loaded.source)
    params = compute_parameters(geo)
    env = build_envelope(loaded.study, [])
    sim = simulate(loaded.study, geo, {params.earth_resistivity_ohm_m: params}, env,
                   m=np.array([0.0, 1.0]), source=loaded.source, branches=False,
                   sequential=False, load=False)
    runs = [r for r in sim.runs if r.faulted == "neighbour" and r.group == "phase"
            and all(r.sources)]
    assert runs
    z_line = params.circuits[0].z1_ohm
    for r in runs:
        v = view(r, True, params.circuits[0].k0.k0, None, RelayModel())
        f = r.sweep.fault_types.index("ABC")
        z = v.loops["AB"][v.meant["AB"].index(f)]
        bolted = r.sweep.r_fault_ohm + r.sweep.r_phase_ohm == 0
        zb = z[:, bolted]
        assert np.all(v.forward[f][:, bolted])
        assert np.all(zb.imag > z_line.imag)


def test_report_shows_the_neighbour(results):
    # The report's corridor partial: the neighbour, its shared length, its states and their
    # effect on the reach, the mutual compensation question answered; user text escaped.
    from relayset.report.context import build_context
    from relayset.report.html import render_html

    cor, _ = results
    ctx = build_context(cor, environ={})
    html = render_html(ctx, CORRIDOR.read_text())
    assert "Shared corridor: Wendlow - Brenwick 132 kV" in html
    assert "shared length 56.00 km" in html
    for state in ("in service", "earthed", "isolated"):
        assert f"Ashcombe, {state}</td>" in html
    assert "not given mutual compensation for the neighbour" in html
    assert "neighbour earthed" in html  # the reach study's arrangement titles


def test_infeed_cases_name_the_neighbour_state_as_every_case_does(results):
    # Wording: the neighbour's state reads "neighbour earthed" in the infeed factor's case
    # as in every governing case, not "parallel neighbour earthed" (outside-check finding).
    cor, _ = results
    for e in cor.verification.ends:
        for case in (e.infeed.case_min, e.infeed.case_max):
            assert "neighbour " in case and "parallel neighbour" not in case, case
