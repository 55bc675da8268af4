"""The reach study's sweep: identical arrangements solved once, absurd requests refused."""

from __future__ import annotations

import numpy as np
import pytest

from relayset.api import study_reach
from relayset.cli import main
from relayset.physics import network

DEMO_1C = "ashcombe_brenwick_132kv.toml"


def _one_section(data):
    data["line"].pop("sections", None)
    data["relay"]["end"] = "both"
    data.setdefault("reach_study", {})["shunt_capacitance"] = True


def _count_sweeps(monkeypatch) -> list[int]:
    calls = [0]
    real = network.solve_fault_sweep

    def counting(*args, **kwargs):
        calls[0] += 1
        return real(*args, **kwargs)

    monkeypatch.setattr(network, "solve_fault_sweep", counting)
    return calls


def test_one_section_line_reports_the_same_sweep_for_actual_and_untransposed(
        variant, monkeypatch):
    # Identity: a line of one section has no transposition, so its actual plan is the
    # untransposed line: solved once (2 sweeps, not 3) and reported with identical numbers.
    calls = _count_sweeps(monkeypatch)
    res = study_reach(variant(DEMO_1C, _one_section)).reach
    assert calls[0] == 2
    for end in res.ends:
        act, unt = end.arrangement("actual_plan"), end.arrangement("untransposed")
        assert act.to_dict()["loops"] == unt.to_dict()["loops"]
        np.testing.assert_array_equal(act.envelope_max_pct, unt.envelope_max_pct)
        ideal = end.arrangement("ideal_cycle")
        assert not np.array_equal(act.envelope_max_pct, ideal.envelope_max_pct)


def test_ideal_plan_is_reported_as_the_ideal_cycle(demo_path, monkeypatch):
    # The demo's plan is a full cycle of three equal sections (9 mi each of 27 mi), i.e.
    # the ideal cycle itself; one sweep serves both names.
    calls = _count_sweeps(monkeypatch)
    res = study_reach(demo_path("kessler_oxbow_115kv.toml")).reach
    assert calls[0] == 2
    end = res.ends[0]
    act, ideal = end.arrangement("actual_plan"), end.arrangement("ideal_cycle")
    np.testing.assert_array_equal(act.envelope_min_pct, ideal.envelope_min_pct)


@pytest.mark.parametrize("step", [0.005, 0.0001])
def test_tiny_location_step_is_refused_with_one_line(variant, capsys, step):
    # Rule (issue 9): a step below 0.01 % or more than 10 million cases is refused with a
    # one-line error naming the study field, exit code 2, no traceback.
    def edit(data):
        data.setdefault("reach_study", {})["location_step_pct"] = step

    path = variant(DEMO_1C, edit)
    assert main(["reach", str(path)]) == 2
    err = capsys.readouterr().err.strip()
    assert "reach_study.location_step_pct" in err
    assert len(err.splitlines()) == 1
    assert "Traceback" not in err


def test_too_many_cases_are_refused(variant, capsys):
    # 0.02 % step (allowed) with 30 fault resistances: 5001 locations x 10 types x 30
    # resistances x 3 sources x 2 loads x 3 arrangements = 27 million cases > 10 million.
    def edit(data):
        data.setdefault("reach_study", {})["location_step_pct"] = 0.02
        data["reach_study"]["fault_resistances"] = [f"{r} ohm" for r in range(0, 60, 2)]

    assert main(["reach", str(variant(DEMO_1C, edit))]) == 2
    err = capsys.readouterr().err.strip()
    assert "reach_study.location_step_pct" in err and "10,000,000" in err


def test_chunked_sweep_condenses_to_the_same_results(demo_path, monkeypatch):
    # Consistency: condensing the sweep in chunks of a few locations gives the worst cases
    # and envelopes of the sweep condensed at once (errors to 1e-9 relative; the location
    # of each worst case is the same unless two cases tie to rounding).
    import relayset.studies.reach as reach

    path = demo_path("elsford_fallowby_230kv_double.toml")
    whole = study_reach(path).reach
    monkeypatch.setattr(reach, "CHUNK_CASES", 1000)  # a few locations per chunk
    calls = _count_sweeps(monkeypatch)
    chunked = study_reach(path).reach
    assert calls[0] > 20  # many chunks per arrangement
    for e1, e2 in zip(whole.ends, chunked.ends, strict=True):
        for a1, a2 in zip(e1.arrangements, e2.arrangements, strict=True):
            np.testing.assert_allclose(a2.envelope_max_pct, a1.envelope_max_pct, rtol=1e-9,
                                       atol=1e-9)
            for l1, l2 in zip(a1.loops, a2.loops, strict=True):
                for w1, w2 in zip(l1.to_dict().values(), l2.to_dict().values(), strict=True):
                    if isinstance(w1, dict):
                        assert w2["error_pct"] == pytest.approx(w1["error_pct"], rel=1e-9,
                                                                abs=1e-9)


def test_too_many_cases_at_one_location_are_refused(variant, capsys):
    # Rule (memory bound): one location is the smallest chunk of the sweep, so the cases
    # at one location are limited to 200 000: 10 types x 100 resistances x 100 source
    # cases x 2 loads is the most; 1 more source case is refused naming the table.
    def edit(data):
        rs = data.setdefault("reach_study", {})
        rs["fault_resistances"] = [f"{r} ohm" for r in range(100)]
        rs["source_cases"] = [{"name": f"c{k}", "scale": 1.0} for k in range(101)]

    assert main(["reach", str(variant(DEMO_1C, edit))]) == 2
    err = capsys.readouterr().err.strip()
    assert "reach_study" in err and "202,000 fault cases at each location" in err
