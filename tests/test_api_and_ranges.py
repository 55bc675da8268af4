"""The Python API (DataFrame views, lazy package attributes) and typical-range sanity checks."""

from __future__ import annotations

import pytest
from numpy.testing import assert_allclose

import relayset

DEMOS = ["ashcombe_brenwick_132kv.toml", "kessler_oxbow_115kv.toml",
         "elsford_fallowby_230kv_double.toml", "greyholt_ivel_400kv_twin.toml"]


def test_matrix_frame_matches_results(demo_path):
    res = relayset.study_parameters(demo_path(DEMOS[2]))
    df = relayset.matrix_frame(res.parameters, "untransposed")
    assert df.shape == (6, 6) and list(df.columns[:3]) == ["1A", "1B", "1C"]
    assert_allclose(df.to_numpy(), res.parameters.arrangements["untransposed"]
                    .zabc_ohm_per_m * 1e3, rtol=1e-15, atol=0)
    seq = relayset.sequence_frame(res.parameters, per="mi")
    # 1 mi = 1609.344 m exactly (NIST SP 811)
    assert seq["z1_ohm_per_mi"].iloc[0] == pytest.approx(
        res.parameters.circuits[0].z1_ohm_per_m * 1609.344, rel=1e-15, abs=0)


def test_lazy_api_names():
    assert set(relayset.__all__) >= {"study_parameters", "study_reach", "study_settings"}
    assert "carson" in relayset.list_earth_models()


@pytest.mark.parametrize("name", DEMOS)
def test_typical_ranges(demo_path, name):
    # Typical overhead-line values at 50/60 Hz (common practice, no source):
    # X1 0.25-0.50 ohm/km, |Z0/Z1| 2-4.5, C1 7-15 nF/km, surge impedance 230-450 ohm,
    # k0 magnitude 0.3-1.2.
    p = relayset.study_parameters(demo_path(name)).parameters
    for c in p.circuits:
        assert 0.25 < c.z1_ohm_per_m.imag * 1e3 < 0.50
        assert 2.0 < abs(c.z0_ohm_per_m / c.z1_ohm_per_m) < 4.5
        assert 7 < c.c1_f_per_m * 1e12 < 15
        assert 230 < abs(c.positive_long_line.surge_impedance_ohm) < 450
        assert 0.3 < abs(c.k0.k0) < 1.2
