"""Line parameters through the public entry point (relayset.study_parameters) against
independent sources: hand derivations from definitions, textbook formulas, handbook values.
"""

from __future__ import annotations

import cmath
import math

import numpy as np
import pytest
from numpy.testing import assert_allclose

import relayset

from tomlwrite import dump_toml

DEMO_1C = "ashcombe_brenwick_132kv.toml"
DEMO_2C = "elsford_fallowby_230kv_double.toml"
EPS0 = 8.8541878128e-12  # F/m, CODATA 2018, written out here (independent of relayset)


# ------------------------------------------------------------------------------ k0m


@pytest.mark.parametrize("arrangement", ["actual_plan", "untransposed", "ideal_cycle"])
def test_k0m_from_the_mutual_block_of_a_double_circuit(demo_path, arrangement):
    # Zero-sequence mutual impedance, hand-derived from its definition: equal currents I0 in
    # the three phases of circuit 2 induce in circuit 1 V_i = sum_j Z_ij I0, whose
    # zero-sequence part is V0 = (1/3) sum_i V_i, so Z0M = (1/3) sum_ij Z_ij over the 3 x 3
    # mutual block of Zabc (Anderson, Analysis of Faulted Power Systems, ch. 4, from memory).
    # k0m = Z0M/(3 Z1) (IEEE Std C37.113-2015, mutual compensation of ground distance
    # elements). 1e-12 relative.
    path = demo_path(DEMO_2C)
    p = relayset.study_parameters(path).parameters
    arr = p.arrangements[arrangement]
    z0m = arr.zabc_ohm_per_m[:3, 3:].sum() / 3
    assert_allclose(arr.z0m_ohm_per_m, z0m, rtol=1e-12, atol=0)
    if arrangement == "actual_plan":
        z1 = p.circuits[0].z1_ohm_per_m
        assert_allclose(p.k0m, z0m / (3 * z1), rtol=1e-12, atol=0)
        d = relayset.study_parameters(path).to_dict()["parameters"]["k0m"]
        assert d["magnitude"] == pytest.approx(abs(z0m / (3 * z1)), rel=1e-12, abs=0)
        assert d["angle_deg"] == pytest.approx(
            math.degrees(cmath.phase(z0m / (3 * z1))), abs=1e-9)
        # a 230 kV double circuit: |k0m| a few tenths (common practice, no source)
        assert 0.1 < abs(p.k0m) < 0.6


# ---------------------------------------------------------------- charging current


def _triangle_study(length_km=120.0, kv=230.0, f_hz=60.0, h_m=20.0, d_m=8.0, radius_mm=15.0):
    """Equilateral triangle (side d) one circuit, no earth wire, an ideal three-section cycle."""
    top = h_m + d_m * math.sqrt(3) / 2
    s = f"{length_km / 3!r} km"
    return {
        "schema": "relayset-study/1",
        "study": {"line_id": "T", "title": "triangle", "from_substation": "S",
                  "to_substation": "R"},
        "system": {"nominal_voltage": f"{kv} kV", "frequency": f"{f_hz} Hz",
                   "earth_resistivity": "100 ohm*m"},
        "conductor_types": {"ph": {"outside_diameter": f"{2 * radius_mm} mm",
                                   "gmr": f"{0.78 * radius_mm} mm",
                                   "ac_resistance": "0.06 ohm/km"}},
        "circuits": [{"name": "1", "phase_labels": ["A", "B", "C"], "positions": [
            {"name": "l", "x": f"{-d_m / 2} m", "average_height": f"{h_m} m",
             "conductor": "ph"},
            {"name": "t", "x": "0 m", "average_height": f"{top} m", "conductor": "ph"},
            {"name": "r", "x": f"{d_m / 2} m", "average_height": f"{h_m} m",
             "conductor": "ph"}]}],
        "line": {"length": f"{length_km} km", "sections": [
            {"length": s, "order": ["A", "B", "C"]},
            {"length": s, "order": ["C", "A", "B"]},
            {"length": s, "order": ["B", "C", "A"]}]},
    }


def test_c1_and_charging_current_against_textbook_formulas(tmp_path):
    # Capacitance to neutral of a transposed line with the earth's effect (J. J. Grainger and
    # W. D. Stevenson, Power System Analysis, McGraw-Hill, 1994, sec. 5.6 "Effect of earth on
    # the capacitance of three-phase transmission lines"; from memory of the section):
    #   C_n = 2 pi eps0 / (ln(Deq/r) - ln(Hm/Hs)),  Hm = (H12 H23 H31)^(1/3),
    #   Hs = (H1 H2 H3)^(1/3), Hij conductor-to-image distances, Hi = 2 hi.
    # The book averages the potential coefficients over the cycle, relayset averages the
    # capacitance matrices (C = P^-1 per section); the two differ at second order in the
    # asymmetry, here 3.0e-4 relative (measured: inv(mean P) against mean(inv P)):
    # tolerance 5e-4.
    # Charging current I = V/sqrt(3) * omega * C1 * l (Glover, Overbye & Sarma, 6th ed.,
    # sec. 4.10): to 1e-12 against relayset's own C1, and 5e-4 against the formula above;
    # in the results and in the JSON (per km and for the line).
    h, d, r, kv, f, length_km = 20.0, 8.0, 0.015, 230.0, 60.0, 120.0
    path = tmp_path / "triangle.toml"
    path.write_text(dump_toml(_triangle_study(length_km, kv, f, h, d, r * 1e3)), "utf-8")
    res = relayset.study_parameters(path)
    c = res.parameters.circuits[0]
    ys = [h, h + d * math.sqrt(3) / 2, h]
    xs = [-d / 2, 0.0, d / 2]
    himg = [[math.hypot(xs[i] - xs[j], ys[i] + ys[j]) for j in range(3)] for i in range(3)]
    hm = (himg[0][1] * himg[1][2] * himg[2][0]) ** (1 / 3)
    hs = (himg[0][0] * himg[1][1] * himg[2][2]) ** (1 / 3)
    cn = 2 * math.pi * EPS0 / (math.log(d / r) - math.log(hm / hs))
    tol = dict(rtol=5e-4, atol=0)
    assert_allclose(c.c1_f_per_m, cn, **tol)
    # about 9 nF/km for a 230 kV line (common practice, no source)
    assert 8.0 < cn * 1e12 < 10.0
    w, v_ph = 2 * math.pi * f, kv * 1e3 / math.sqrt(3)
    exact = dict(rtol=1e-12, atol=0)
    assert_allclose(c.charging_current_a_per_m, v_ph * w * c.c1_f_per_m, **exact)
    assert_allclose(c.charging_current_a, v_ph * w * c.c1_f_per_m * length_km * 1e3, **exact)
    i_per_km = v_ph * w * cn * 1e3
    i_total = i_per_km * length_km
    assert_allclose(c.charging_current_a, i_total, **tol)
    circ = res.to_dict()["parameters"]["circuits"][0]
    assert_allclose(circ["c1_nf_per_km"], c.c1_f_per_m * 1e12, **exact)
    assert_allclose(circ["b1_us_per_km"], w * c.c1_f_per_m * 1e9, **exact)
    assert_allclose(circ["charging_current_a_per_km"], v_ph * w * c.c1_f_per_m * 1e3, **exact)
    assert_allclose(circ["charging_current_a"], c.charging_current_a, **exact)
    assert_allclose(circ["c1_nf_per_km"], cn * 1e12, **tol)
    assert_allclose(circ["charging_current_a_per_km"], i_per_km, **tol)
    # Hand order of magnitude: 230 kV, 9 nF/km, 60 Hz, 120 km -> about 55 A
    assert 45 < i_total < 65


# --------------------------------------------------------------------- shield wires


def _grounding(kind: str | None):
    def edit(d):
        if kind is None:
            d.pop("shield_wires")
        else:
            d["shield_wires"][0]["grounding"] = kind
    return edit


def test_segmented_and_insulated_shield_wires(variant):
    # Maxwell's potential coefficients (Glover, Overbye & Sarma, 6th ed., sec. 4.11;
    # Kersting, 4th ed., ch. 5): an earthed conductor (V = 0) is eliminated from C = P^-1;
    # a floating conductor (q = 0) simply drops out of P, so for the phases it is as if it
    # were not there. Series impedance: a wire that carries no current (segmented or
    # insulated) does not enter the Kron reduction. Hence, on the 132 kV demo:
    #   Z(segmented) = Z(insulated) = Z(no earth wire) != Z(continuous)
    #   Y(segmented) = Y(continuous) != Y(no earth wire) = Y(insulated)
    def run(kind, name):
        p = relayset.study_parameters(variant(DEMO_1C, _grounding(kind), name)).parameters
        return p.z_by_position_ohm_per_m, p.y_by_position_s_per_m

    z_cont, y_cont = run("continuous", "c.toml")
    z_seg, y_seg = run("segmented", "s.toml")
    z_ins, y_ins = run("none", "i.toml")
    z_bare, y_bare = run(None, "b.toml")
    assert_allclose(z_seg, z_bare, rtol=1e-13, atol=0)
    assert_allclose(z_ins, z_bare, rtol=1e-13, atol=0)
    assert_allclose(y_seg, y_cont, rtol=1e-13, atol=0)
    assert_allclose(y_ins, y_bare, rtol=1e-13, atol=0)
    # controls: the earth wire matters for both, so the identities above can fail
    assert np.abs(z_cont - z_bare).max() > 1e-3 * np.abs(z_bare).max()
    assert np.abs(y_cont - y_bare).max() > 1e-3 * np.abs(y_bare).max()


# ------------------------------------------------------ resistance through the study


def _phase_conductor(**props):
    def edit(d):
        d["conductor_types"]["phase"] = {"outside_diameter": "21.8 mm", "gmr": "8.8 mm",
                                         **props}
    return edit


def _r_ac_ohm_per_km(variant, name, **props) -> float:
    res = relayset.study_parameters(variant(DEMO_1C, _phase_conductor(**props), name))
    rows = {c["name"]: c for c in res.to_dict()["parameters"]["conductors"]}
    return rows["phase"]["r_ac_ohm_per_km"]


def test_resistance_at_operating_temperature_through_the_study(variant):
    # R(T) = R20 (1 + alpha (T - 20)) (IEC 60889: alpha = 0.00403 1/K for aluminium).
    # Hand values: 0.1188 ohm/km, 75 degC, AC/DC ratio 1.02:
    #   0.1188 * 1.22165 * 1.02 = 0.148034660 ohm/km
    r = _r_ac_ohm_per_km(variant, "a.toml", dc_resistance_20c="0.1188 ohm/km",
                         temperature_coefficient="0.00403 1/K", ac_dc_ratio=1.02,
                         operating_temperature="75 degC")
    assert r == pytest.approx(0.1188 * 1.22165 * 1.02, rel=1e-12, abs=0)
    # The default coefficient is aluminium's 0.00403 (README): same value without it.
    r = _r_ac_ohm_per_km(variant, "b.toml", dc_resistance_20c="0.1188 ohm/km",
                         ac_dc_ratio=1.02, operating_temperature="75 degC")
    assert r == pytest.approx(0.1188 * 1.22165 * 1.02, rel=1e-12, abs=0)
    # AC resistance given at 50 degC, used at 75 degC: R50 (1 + 55 a)/(1 + 30 a)
    r = _r_ac_ohm_per_km(variant, "c.toml", ac_resistance="0.1300 ohm/km",
                         ac_resistance_temperature="50 degC", operating_temperature="75 degC")
    assert r == pytest.approx(0.1300 * 1.22165 / 1.1209, rel=1e-12, abs=0)


def test_skin_effect_through_the_study(variant):
    # Without ac_dc_ratio the round-wire skin effect applies at the system frequency (50 Hz):
    # x = a sqrt(omega mu0 / rho), rho = Rdc pi a^2, R/Rdc from Kelvin functions
    # (scipy.special ber/bei; Ramo, Whinnery & Van Duzer, 3rd ed., sec. 5.12).
    from scipy.special import bei, beip, ber, berp

    r_dc = 0.1188e-3 * 1.22165  # ohm/m at 75 degC
    a = 21.8e-3 / 2
    x = a * math.sqrt(2 * math.pi * 50 * 4e-7 * math.pi / (r_dc * math.pi * a * a))
    ratio = (x / 2) * (ber(x) * beip(x) - bei(x) * berp(x)) / (berp(x) ** 2 + beip(x) ** 2)
    r = _r_ac_ohm_per_km(variant, "d.toml", dc_resistance_20c="0.1188 ohm/km",
                         operating_temperature="75 degC")
    assert r == pytest.approx(r_dc * 1e3 * ratio, rel=1e-12, abs=0)
    # a solid-wire estimate for a 22 mm conductor at 50 Hz: about 1 % (common practice)
    assert 1.003 < ratio < 1.03
