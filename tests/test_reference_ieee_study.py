"""IEEE 13-node configuration 601 through the real entry point.

tests/reference_cases/ieee13_config601.toml describes the published line as a study file
(US units, modified Carson, neutral as a continuously earthed wire). It is run through
``relayset.study_parameters`` and through ``relayset params --json``, and the phase matrices
are compared with the published "Impedances" of the IEEE 13 Node Test Feeder ([F13] in
tests/reference_cases/ieee_feeders.py). Tolerances and why: tests/reference_cases/README.md
(±0.0001 ohm/mile on R and X; ±0.0001 µS/mile on B after rescaling Kersting's rounded
11.17689 mile/µF to the CODATA value).
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
from numpy.testing import assert_allclose

import relayset
from relayset.cli import main

from reference_cases.ieee_feeders import CONFIGURATIONS, KERSTING_P_FACTOR_MILE_PER_UF, MILE_M

STUDY = Path(__file__).resolve().parent / "reference_cases" / "ieee13_config601.toml"
EPS0_CODATA_F_PER_M = 8.8541878128e-12
CODATA_P_FACTOR_MILE_PER_UF = 1.0 / (2 * math.pi * EPS0_CODATA_F_PER_M) / MILE_M * 1e-6
Z_PUB = np.array(CONFIGURATIONS["601"]["z_ohm_per_mile"], dtype=complex)
B_PUB = np.array(CONFIGURATIONS["601"]["b_us_per_mile"], dtype=float)
TOL = dict(rtol=0, atol=1e-4)
MI_PER_KM = MILE_M / 1e3  # ohm/km -> ohm/mile factor (1 mi = 1.609344 km exactly)


def _check(z_ohm_per_mile: np.ndarray, b_us_per_mile: np.ndarray) -> None:
    assert_allclose(z_ohm_per_mile.real, Z_PUB.real, **TOL)
    assert_allclose(z_ohm_per_mile.imag, Z_PUB.imag, **TOL)
    b_rescaled = b_us_per_mile * CODATA_P_FACTOR_MILE_PER_UF / KERSTING_P_FACTOR_MILE_PER_UF
    assert_allclose(b_rescaled, B_PUB, **TOL)


def test_601_study_file_through_the_api():
    p = relayset.study_parameters(STUDY).parameters
    assert p.phase_labels == (("A", "B", "C"),) and p.section_orders == (("B", "A", "C"),)
    arr = p.arrangements["actual_plan"]  # one section: the line as built, rows a, b, c
    _check(arr.zabc_ohm_per_m * MILE_M, arr.yabc_s_per_m.imag * 1e6 * MILE_M)
    assert np.array_equal(arr.zabc_ohm_per_m, p.arrangements["untransposed"].zabc_ohm_per_m)


def test_601_study_file_through_the_json(tmp_path):
    out = tmp_path / "601.json"
    assert main(["params", str(STUDY), "--json", str(out)]) == 0
    d = json.loads(out.read_text("utf-8"))["parameters"]
    assert d["earth_model"] == "carson_truncated" and d["frequency_hz"] == 60.0
    a = d["arrangements"]["actual_plan"]
    z = (np.array(a["zabc_ohm_per_km"]["re"]) + 1j * np.array(a["zabc_ohm_per_km"]["im"]))
    b = np.array(a["yabc_us_per_km"]["im"])
    _check(z * MI_PER_KM, b * MI_PER_KM)
    # control: the study file's phasing matters (A at the left position instead of B)
    text = STUDY.read_text("utf-8").replace('order = ["B", "A", "C"]', 'order = ["A", "B", "C"]')
    swapped = tmp_path / "601_swapped.toml"
    swapped.write_text(text, "utf-8")
    zs = relayset.study_parameters(swapped).parameters.arrangements["actual_plan"]
    assert np.abs(zs.zabc_ohm_per_m * MILE_M - Z_PUB).max() > 20 * TOL["atol"]
