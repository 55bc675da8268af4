"""Property test: any geometry gives finite, symmetric results or the documented InputError.

Random towers (positions, heights, sags, bundles, shield wires, resistivity, frequency, earth
model and section plans) are fed through validation and the engine. Nothing else may come
out: no other exception, no NaN, no asymmetric matrix.
"""

from __future__ import annotations

import numpy as np
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from relayset.errors import InputError
from relayset.inputs.study_file import parse_study
from relayset.studies.geometry import build_geometry
from relayset.studies.parameters import compute_parameters

metres = st.floats(min_value=-40, max_value=60) | st.sampled_from([float("nan"), float("inf")])


@st.composite
def studies(draw):
    n_c = draw(st.sampled_from([1, 2]))
    circuits = []
    for c in range(n_c):
        positions = []
        for k in range(3):
            pos = {
                "name": f"p{k}",
                "x": f"{draw(metres)} m",
                "height": f"{draw(metres)} m",
                "sag": f"{draw(st.floats(0, 30))} m",
                "conductor": "ph",
            }
            if draw(st.booleans()):
                pos["bundle"] = {"count": draw(st.integers(1, 4)),
                                 "spacing": f"{draw(st.floats(0.001, 1.0))} m"}
            positions.append(pos)
        circuits.append({"name": str(c + 1), "positions": positions})
    shields = [
        {"x": f"{draw(metres)} m", "height": f"{draw(metres)} m", "conductor": "ew",
         "grounding": draw(st.sampled_from(["continuous", "segmented", "none"]))}
        for _ in range(draw(st.integers(0, 2)))
    ]
    length = draw(st.floats(1, 300))
    n_sec = draw(st.integers(1, 4))
    fractions = draw(st.lists(st.floats(0.05, 1), min_size=n_sec, max_size=n_sec))
    perms = [["A", "B", "C"], ["C", "A", "B"], ["B", "C", "A"], ["A", "C", "B"]]
    sections = []
    for f in fractions:
        o = draw(st.sampled_from(perms))
        order = o if n_c == 1 else {c["name"]: draw(st.sampled_from(perms)) for c in circuits}
        sections.append({"length": f"{length * f / sum(fractions)} km", "order": order})
    return {
        "study": {"line_id": "X", "title": "t", "from_substation": "S", "to_substation": "R"},
        "system": {
            "nominal_voltage": "132 kV",
            "frequency": draw(st.sampled_from(["50 Hz", "60 Hz"])),
            "earth_resistivity": f"{draw(st.floats(1, 10000))} ohm*m",
            "earth_model": draw(st.sampled_from(["carson", "carson_truncated", "deri"])),
        },
        "conductor_types": {
            "ph": {"outside_diameter": "21.8 mm", "gmr": "8.8 mm",
                   "dc_resistance_20c": "0.1188 ohm/km"},
            "ew": {"outside_diameter": "11.7 mm", "gmr": "4.3 mm",
                   "ac_resistance": "0.43 ohm/km"},
        },
        "circuits": circuits,
        "shield_wires": shields,
        "line": {"length": f"{length} km", "sections": sections},
    }


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(studies())
def test_random_geometry_is_finite_symmetric_or_input_error(data):
    try:
        study = parse_study(data, "random.toml")
        params = compute_parameters(build_geometry(study, "random.toml"))
    except InputError as exc:
        msg = str(exc)
        assert msg.startswith("random.toml") and "\n" not in msg
        return
    for arr in params.arrangements.values():
        for m in (arr.zabc_ohm_per_m, arr.yabc_s_per_m, arr.z012_ohm_per_m):
            assert np.all(np.isfinite(m))
        z = arr.zabc_ohm_per_m
        assert np.allclose(z, z.T, rtol=0, atol=1e-12 * np.abs(z).max())
        # Passivity: resistances and reactances of the self terms are positive.
        assert np.all(np.diag(z).real > 0) and np.all(np.diag(z).imag > 0)
    for c in params.circuits:
        assert np.isfinite(c.z1_ohm_per_m) and c.z1_ohm_per_m.real > 0
        assert c.c1_f_per_m > 0
