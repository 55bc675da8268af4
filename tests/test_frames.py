"""DataFrames of every result (relayset.frames): the JSON's names and units, the JSON's
numbers, pandas only when a frame is made."""

from __future__ import annotations

import cmath
import math
import subprocess
import sys

import numpy as np
import pytest
from numpy.testing import assert_allclose

import relayset

STUDY = "elsford_fallowby_230kv_double.toml"  # two circuits, quadrilateral, failed checks


@pytest.fixture(scope="module")
def results():
    from relayset.resources import demo_lines_dir

    return relayset.study_settings(demo_lines_dir() / STUDY)


def _c(v):
    """A JSON complex ([re, im] or polar) as a complex number."""
    if isinstance(v, dict):
        return cmath.rect(v["magnitude"], math.radians(v["angle_deg"]))
    return complex(*v)


def test_every_result_has_its_frame(results):
    f = results.frames()
    assert set(f) == {"parameters", "reach_errors", "worst_cases", "settings",
                      "setting_checks", "warnings", "verification_checks"}
    assert set(relayset.study_parameters(results.source_file).frames()) == {"parameters"}
    d = results.to_dict()
    assert len(f["parameters"]) == len(d["parameters"]["circuits"]) == 2
    n_zones = sum(len(e["zones"]) for e in d["settings"]["ends"])
    assert len(f["settings"]) == n_zones
    assert len(f["warnings"]) == sum(len(e["warnings"]) for e in d["settings"]["ends"])
    assert len(f["verification_checks"]) == sum(
        len(e["checks"]) for e in d["verification"]["ends"])


def test_parameters_frame_is_the_json(results):
    df = results.parameters.to_frame()
    d = results.to_dict()["parameters"]["circuits"]
    assert_allclose(df["z1_ohm_per_km"].to_numpy(), [_c(c["z1_ohm_per_km"]) for c in d],
                    rtol=0, atol=0)
    assert_allclose(df["k0.k0"].to_numpy(), [_c(c["k0"]["k0"]) for c in d], rtol=1e-14,
                    atol=0)
    # ohm/m inside, ohm/km in the column named so (units at the edge).
    assert_allclose(df["z1_ohm_per_km"].to_numpy(),
                    [c.z1_ohm_per_m * 1e3 for c in results.parameters.circuits],
                    rtol=1e-15, atol=0)
    assert df["c1_nf_per_km"].dtype == float and df["circuit"].tolist() == ["1", "2"]


def test_reach_frames_agree_with_the_summaries(results):
    """The long-form reach errors give back each arrangement's summary figures."""
    env = results.frames()["reach_errors"]
    for end in results.reach_study.ends:
        for a in end.arrangements:
            sel = env[(env["end"] == end.end) & (env["arrangement"] == a.arrangement)
                      & (env["mutual_compensation"] == a.mutual_compensation)]
            assert len(sel) == len(a.loops) * len(a.envelope_m)
            assert_allclose(np.nanmax(sel["bolted_reach_error_max_pct"]),
                            np.nanmax(a.envelope_max_pct), rtol=0, atol=0)
            own = a.to_frame()
            assert len(own) == len(sel)
    worst = results.reach_study.to_frame()
    remote = worst[worst["extreme"] == "worst_overreach_at_remote_bus"]
    for end in results.reach_study.ends:
        for a in end.arrangements:
            sel = remote[(remote["end"] == end.end) & (remote["arrangement"] == a.arrangement)
                         & (remote["mutual_compensation"] == a.mutual_compensation)]
            # The arrangement's figure is the worst of its loops' (README, reach study).
            assert_allclose(sel["error_pct"].max(),
                            a.worst_bolted_overreach_at_remote_bus_pct, rtol=1e-12, atol=0)
            assert (sel["location_pct"] == 100.0).all()


def test_settings_and_checks_frames(results):
    df = results.frames()["settings"]
    z = results.settings[0].zone("zone1")
    row = df[(df["end"] == results.settings[0].end) & (df["zone"] == "zone1")].iloc[0]
    assert row["reach_primary_ohm"] == z.reach_primary_ohm
    assert row["reach_secondary_ohm"] == pytest.approx(z.reach_secondary_ohm, rel=1e-15)
    assert row["delay_s"] == z.delay_s and row["shape"] == z.shape
    checks = results.verification.to_frame()
    failed = checks[checks["result"] == "FAIL"]
    assert len(failed) == len(results.verification.failures) > 0  # the demo fails on purpose
    # Simulated checks name a governing case; checks judged without a simulated case (the
    # CT rating) have none.
    simulated = failed[failed["cases_run"] > 1]
    assert len(simulated) > 0 and simulated["governing_case.fault_type"].notna().all()
    assert all(isinstance(v, complex) for v in simulated["governing_case.z_apparent_primary_ohm"])
    sc = results.frames()["setting_checks"]
    assert set(sc.columns) == {"end", "zone", "check_id", "passed", "detail"}
    assert len(sc) == sum(len(z.checks) for s in results.settings for z in s.zones)


def test_pandas_is_imported_only_for_a_frame():
    code = ("import sys, relayset, relayset.api, relayset.frames; "
            "print('pandas' in sys.modules)")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True)
    assert out.stdout.strip() == "False"
