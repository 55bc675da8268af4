"""Single-point bonded cables with an earth continuity conductor (ECC).

With single-point bonding the sheaths carry no current, so without an ECC the zero-sequence
current returns through the earth alone (a large Z0); an ECC earthed at both ends carries
most of it. The ECC is checked against an independent construction with Carson's
approximate earth-return formulas (J. R. Carson, Bell Syst. Tech. J. 5, 1926; the form
Z_ii = R_i + pi^2 f 1e-7 + j 4 pi f 1e-7 ln(De/GMR_i), Z_ij = pi^2 f 1e-7 +
j 4 pi f 1e-7 ln(De/d_ij), De = 658.5 sqrt(rho/f) m: from memory), valid where the
conductors' depth and spacing are far below De (here ~1 m against ~930 m).
"""

from __future__ import annotations

import json
import math

import numpy as np
import pytest

from relayset.cli import main
from relayset.physics.cable import cable_positions

DEMO = "brackenholt_saltmarsh_street_132kv_cable.toml"
ECC = {"cross_section": "240 mm2", "material": "copper", "x": "0.3 m"}


def _single_point(d, ecc=None):
    c = d["cables"]["city_cable"]
    c["bonding"] = "single_point"
    if ecc is not None:
        c["earth_continuity_conductor"] = dict(ecc)


def _cable_z(tmp_path, path) -> tuple[complex, complex, dict]:
    out = tmp_path / "p.json"
    assert main(["params", str(path), "--json", str(out)]) == 0
    d = json.loads(out.read_text("utf-8"))
    (c,) = d["parameters"]["cables"]
    z1 = complex(*c["z1_ohm_per_km"][0])  # circuit 1
    z0 = complex(*c["z0_ohm_per_km"][0])
    return z1, z0, c


def test_ecc_carries_the_zero_sequence_return(tmp_path, variant, capsys):
    z1_sp, z0_sp, _ = _cable_z(tmp_path, variant(DEMO, _single_point, "sp.toml"))
    z1_e, z0_e, c = _cable_z(tmp_path, variant(DEMO, lambda d: _single_point(d, ECC),
                                               "ecc.toml"))
    capsys.readouterr()
    assert "earth continuity conductor" in c["return_paths"]
    # Z1 of a trefoil hardly changes (the ECC sees almost no positive-sequence flux):
    # within 3 % (identity of the balanced group, common practice, no source).
    assert abs(z1_e - z1_sp) / abs(z1_sp) < 0.03
    assert abs(z0_e) < 0.5 * abs(z0_sp)  # the return moved from the earth to the ECC

    # Independent: the Kron step with Carson's approximate formulas (module notes).
    f, rho = 50.0, 100.0  # the demo's frequency and earth resistivity
    de = 658.5 * math.sqrt(rho / f)
    a = 240e-6
    r_e = math.sqrt(a / math.pi)
    x, dep, _ = cable_positions("trefoil", 2 * 42.4e-3, 1.2)
    d_ce = np.hypot(x - 0.3, dep - 1.2)
    w = 4 * math.pi * f * 1e-7
    z_ce = math.pi**2 * f * 1e-7 + 1j * w * np.log(de / d_ce)
    z_ee = (1.7241e-8 / a + math.pi**2 * f * 1e-7
            + 1j * w * math.log(de / (r_e * math.exp(-0.25))))
    dz0 = np.sum(z_ce) ** 2 / z_ee / 3 * 1e3  # [ohm/km] off Z0 = (1/3) 1'Z1
    np.testing.assert_allclose(z0_sp - z0_e, dz0, rtol=0.03, atol=0)


@pytest.mark.parametrize(("edit", "words"), [
    (lambda d: d["cables"]["city_cable"].update(earth_continuity_conductor=dict(ECC)),
     ["earth_continuity_conductor", "single-point bonding"]),
    (lambda d: _single_point(d, {**ECC, "x": "0.02 m"}),
     ['earth_continuity_conductor.x = "0.02 m"', "inside a cable"]),
])
def test_bad_ecc_is_one_line(tmp_path, variant, capsys, edit, words):
    path = variant(DEMO, edit)
    out = tmp_path / "p.json"
    assert main(["params", str(path), "--json", str(out)]) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1 and "Traceback" not in err, err
    assert not out.exists()
    for w in words:
        assert w in err, (w, err)
