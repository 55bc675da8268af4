"""relayset's line-parameter engine against the IEEE PES distribution test feeders.

Series phase impedance (modified Carson, Kron reduction of the neutral) and shunt
susceptance (Maxwell potential coefficients, neutral earthed) are rebuilt from the published
spacings and conductor data and compared with the published matrices. Sources, tables and
tolerances: tests/reference_cases/README.md and the ``source`` entries of
tests/reference_cases/ieee_feeders.py.

Tolerances
----------
Series, ±0.0001 ohm/mile on R and X: the documents print four decimals, and the engine uses
exact constants (µ0 = 4π·1e-7 H/m, Q0 = (1/2 - γ)/2) where the published computation used
Kersting's rounded ones (0.09530, 0.12134, 7.93402); the rounding moves the fourth decimal
by up to 0.6e-4 (seen for 601 X_aa: 1.01796 against 1.0179), so half a unit (0.5e-4) is not
attainable and one unit is used.

Shunt: the published susceptances use Kersting's rounded factor 11.17689 mile/µF for
1/(2π ε0), 0.069 % above the value from CODATA ε0 (11.16921 mile/µF). Because B ∝ 1/(2π ε0)
exactly, the engine's B rescaled by the ratio of the two factors must match the published
digits to ±0.0001 µS/mile (one unit in the fourth decimal: rounding plus the residual
rounding of 11.17689 itself). Unscaled, the engine must match to 0.1 % relative.
"""

from __future__ import annotations

import math
import tomllib
from pathlib import Path

import numpy as np
import pytest

from relayset.physics.impedance import kron_reduce, primitive_impedance_ohm_per_m
from relayset.physics.shunt import shunt_admittance_s_per_m

from reference_cases.ieee_feeders import (
    CONDUCTORS,
    CONFIGURATIONS,
    FREQUENCY_HZ,
    FT_M,
    IN_M,
    KERSTING_P_FACTOR_MILE_PER_UF,
    MILE_M,
    RESISTIVITY_OHM_M,
    SPACINGS,
)

SERIES_TOL_OHM_PER_MILE = 1e-4
SHUNT_TOL_US_PER_MILE = 1e-4
SHUNT_REL_TOL_UNSCALED = 1e-3
PHASE_INDEX = {"A": 0, "B": 1, "C": 2}

# CODATA 2018 electric constant, written out here (independent of relayset's constants).
EPS0_CODATA_F_PER_M = 8.8541878128e-12
EXACT_P_FACTOR_MILE_PER_UF = 1.0 / (2 * math.pi * EPS0_CODATA_F_PER_M) / MILE_M * 1e-6


def _line(config_name: str, phasing: str | None = None) -> dict[str, object]:
    """Published configuration rebuilt as SI conductor arrays, phases a, b, c first.

    Conductors are ordered by phase letter (so Kron-reduced rows follow the published
    a, b, c order), the neutral last; ``phases`` lists the present phase letters in order.
    ``phasing`` overrides the published phasing (for the control test only).
    """
    cfg = CONFIGURATIONS[config_name]
    positions = SPACINGS[cfg["spacing"]]["positions_ft"]
    phasing = phasing or cfg["phasing"]
    assert len(phasing) == len(positions)
    placed = dict(zip(phasing, positions, strict=True))
    phases = sorted(p for p in phasing if p != "N")
    order = [*phases, "N"]
    x, y, gmr, r, radius = [], [], [], [], []
    for name in order:
        cond = CONDUCTORS[cfg["neutral_conductor" if name == "N" else "phase_conductor"]]
        x.append(placed[name][0] * FT_M)
        y.append(placed[name][1] * FT_M)
        gmr.append(cond["gmr_ft"] * FT_M)
        r.append(cond["r_ohm_per_mile"] / MILE_M)
        radius.append(cond["diameter_in"] / 2 * IN_M)
    idx = [PHASE_INDEX[p] for p in phases]
    return {
        "x": np.array(x),
        "y": np.array(y),
        "gmr": np.array(gmr),
        "r": np.array(r),
        "radius": np.array(radius),
        "phases": phases,
        "idx": idx,
        "z_published": np.array(cfg["z_ohm_per_mile"], dtype=complex)[np.ix_(idx, idx)],
        "b_published": (
            None
            if cfg["b_us_per_mile"] is None
            else np.array(cfg["b_us_per_mile"], dtype=float)[np.ix_(idx, idx)]
        ),
    }


@pytest.fixture(params=["601", "602", "603", "4-node"])
def ieee_line(request):
    """One published IEEE test feeder line configuration, SI arrays (see ieee_feeders.py)."""
    return request.param, _line(request.param)


@pytest.fixture(params=["601", "602", "603"])
def ieee_line_with_shunt(request):
    """The configurations whose shunt matrix was read in the 13-node document."""
    return request.param, _line(request.param)


def _z_abc_ohm_per_mile(line) -> np.ndarray:
    z = primitive_impedance_ohm_per_m(
        line["x"],
        line["y"],
        line["gmr"],
        line["r"],
        FREQUENCY_HZ,
        RESISTIVITY_OHM_M,
        "carson_truncated",
    )
    return kron_reduce(z, len(line["phases"])) * MILE_M


def _b_abc_us_per_mile(line) -> np.ndarray:
    y = shunt_admittance_s_per_m(
        line["x"], line["y"], line["radius"], len(line["phases"]), FREQUENCY_HZ
    )
    return y.imag * 1e6 * MILE_M


def test_series_phase_impedance_matches_published(ieee_line):
    """Zabc [ohm/mile] against IEEE 13-node 'Impedances' (601, 602, 603) and 4-node feeder."""
    name, line = ieee_line
    z = _z_abc_ohm_per_mile(line)
    pub = line["z_published"]
    np.testing.assert_allclose(
        z.real, pub.real, rtol=0, atol=SERIES_TOL_OHM_PER_MILE, err_msg=f"config {name}: R"
    )
    np.testing.assert_allclose(
        z.imag, pub.imag, rtol=0, atol=SERIES_TOL_OHM_PER_MILE, err_msg=f"config {name}: X"
    )


def test_shunt_susceptance_matches_published_with_kersting_constant(ieee_line_with_shunt):
    """B [µS/mile] against IEEE 13-node 'Impedances' (601, 602, 603), rescaled to 11.17689."""
    name, line = ieee_line_with_shunt
    b = _b_abc_us_per_mile(line) * EXACT_P_FACTOR_MILE_PER_UF / KERSTING_P_FACTOR_MILE_PER_UF
    np.testing.assert_allclose(
        b, line["b_published"], rtol=0, atol=SHUNT_TOL_US_PER_MILE, err_msg=f"config {name}"
    )


def test_shunt_susceptance_matches_published_unscaled(ieee_line_with_shunt):
    """B [µS/mile] with CODATA ε0 against the published values, 0.1 % (constant rounding)."""
    name, line = ieee_line_with_shunt
    np.testing.assert_allclose(
        _b_abc_us_per_mile(line),
        line["b_published"],
        rtol=SHUNT_REL_TOL_UNSCALED,
        atol=0,
        err_msg=f"config {name}",
    )


def test_kersting_factor_differs_from_codata_by_the_stated_amount():
    """The rescaling above is 0.069 % (Kersting ch. 5 factor vs CODATA 2018 ε0)."""
    assert EXACT_P_FACTOR_MILE_PER_UF == pytest.approx(11.16921, abs=5e-6)
    ratio = KERSTING_P_FACTOR_MILE_PER_UF / EXACT_P_FACTOR_MILE_PER_UF
    assert ratio - 1 == pytest.approx(6.87e-4, abs=5e-6)


def test_phasing_matters_601_swapped_positions_fail():
    """Control: putting phase A at the first position of spacing 500 (ABCN instead of BACN)
    must move X_aa by more than the tolerance - the test can tell phasings apart."""
    good = _z_abc_ohm_per_mile(_line("601"))
    bad = _z_abc_ohm_per_mile(_line("601", phasing="ABCN"))
    pub = np.array(CONFIGURATIONS["601"]["z_ohm_per_mile"])
    assert np.max(np.abs(good - pub)) <= 1.5 * SERIES_TOL_OHM_PER_MILE
    assert np.max(np.abs(bad - pub)) > 20 * SERIES_TOL_OHM_PER_MILE


# The built-in conductor table must carry the feeder documents' conductor data exactly.
_TABLE = Path(__file__).resolve().parents[1] / "relayset" / "data" / "conductors.toml"
_TABLE_NAME = {
    "556,500 26/7 ACSR": "556.5-26/7-ACSR",
    "336,400 26/7 ACSR": "336.4-26/7-ACSR",
    "4/0 6/1 ACSR": "4/0-6/1-ACSR",
    "1/0 ACSR": "1/0-6/1-ACSR",
}


@pytest.mark.parametrize("feeder_name", sorted(_TABLE_NAME))
def test_builtin_conductor_table_reproduces_feeder_data(feeder_name):
    """relayset/data/conductors.toml converted back = IEEE 4/13-node conductor data."""
    with _TABLE.open("rb") as fh:
        entry = tomllib.load(fh)["conductor"][_TABLE_NAME[feeder_name]]
    pub = CONDUCTORS[feeder_name]
    assert round(entry["outside_diameter_m"] / IN_M, 6) == pub["diameter_in"]
    assert round(entry["gmr_m"] / FT_M, 7) == pub["gmr_ft"]
    assert round(entry["ac_resistance_ohm_per_m"] * MILE_M, 6) == pub["r_ohm_per_mile"]
    assert entry["ac_resistance_temperature_c"] == 50.0
