"""relayset's truncated-Carson series impedance against the independent `carsons` package.

`carsons` (PyPI, version 1.x; source carsons/carsons.py) implements the modified Carson
equations of Kersting in its class ``ModifiedCarsonsEquations`` (P = π/8, Q = -0.0386 +
ln(2/k)/2), with earth resistivity as the class attribute ``ρ = 100`` ohm·m, μ = 4π·1e-7 H/m
and the frequency read from the model. It is a separate implementation (different code,
per-element loops) of the same formulas as relayset's ``carson_truncated`` model.

Known, documented difference: `carsons` rounds Carson's constant to -0.0386, relayset uses
the exact (1/2 - γ)/2 = -0.0386078... . That shifts every element's reactance by the same
ωμ0/π · ((1/2 - γ)/2 + 0.0386), which the test adds back before comparing (identity); then
primitive and Kron-reduced matrices must agree to 1e-12 relative (floating-point rounding).
Without the correction they agree to 1e-5 relative.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from carsons import calculate_impedance
from carsons.carsons import ModifiedCarsonsEquations

from relayset.physics.impedance import kron_reduce, primitive_impedance_ohm_per_m

EULER_GAMMA = 0.5772156649015329
MU0 = 4e-7 * math.pi
REL_TOL_CORRECTED = 1e-12
REL_TOL_UNCORRECTED = 1e-5


class _Model:
    """The attribute set `carsons` reads from a line model (its README's interface)."""

    def __init__(self, positions, gmr, resistance, frequency):
        self.phases = list(positions)
        self.wire_positions = positions
        self.geometric_mean_radius = gmr
        self.resistance = resistance
        self.frequency = frequency


def _carsons_with_resistivity(rho: float) -> type[ModifiedCarsonsEquations]:
    """`carsons` keeps ρ as a class attribute; a subclass sets another earth resistivity."""
    return type("ModifiedCarsonsRho", (ModifiedCarsonsEquations,), {"ρ": rho})


# Invented geometries (SI): conductor name -> (x [m], height [m]), GMR [m], R [ohm/m].
GEOMETRIES = {
    "132kV-horizontal-1-shield": {
        "pos": {"A": (-4.5, 20.0), "B": (0.0, 22.5), "C": (4.5, 20.0), "N1": (0.0, 28.0)},
        "gmr": {"A": 0.0088, "B": 0.0088, "C": 0.0088, "N1": 0.0030},
        "r": {"A": 7.0e-5, "B": 7.0e-5, "C": 7.0e-5, "N1": 3.0e-4},
    },
    "220kV-delta-2-shields": {
        "pos": {
            "A": (-6.0, 24.0),
            "B": (6.0, 24.0),
            "C": (0.0, 31.0),
            "N1": (-4.0, 38.0),
            "N2": (4.0, 38.0),
        },
        "gmr": {"A": 0.0114, "B": 0.0114, "C": 0.0114, "N1": 0.0025, "N2": 0.0025},
        "r": {"A": 4.0e-5, "B": 4.0e-5, "C": 4.0e-5, "N1": 4.5e-4, "N2": 4.5e-4},
    },
    "distribution-crossarm": {
        "pos": {
            "A": (0.762, 8.5344),
            "B": (0.0, 8.5344),
            "C": (2.1336, 8.5344),
            "N1": (1.2192, 7.3152),
        },
        "gmr": {"A": 0.00954, "B": 0.00954, "C": 0.00954, "N1": 0.00248},
        "r": {"A": 1.155e-4, "B": 1.155e-4, "C": 1.155e-4, "N1": 3.679e-4},
    },
}
RUNS = [
    (name, f, rho)
    for name in GEOMETRIES
    for f, rho in [(50.0, 100.0), (60.0, 100.0), (50.0, 1000.0), (60.0, 20.0)]
]


def _order(geometry):
    """`carsons` orders conductors A, B, C, then the neutrals sorted by name."""
    return ["A", "B", "C", *sorted(k for k in geometry["pos"] if k.startswith("N"))]


def _relayset_primitive(geometry, f, rho):
    names = _order(geometry)
    x = [geometry["pos"][n][0] for n in names]
    y = [geometry["pos"][n][1] for n in names]
    gmr = [geometry["gmr"][n] for n in names]
    r = [geometry["r"][n] for n in names]
    return primitive_impedance_ohm_per_m(x, y, gmr, r, f, rho, "carson_truncated")


def _carsons_primitive(geometry, f, rho):
    model = _Model(dict(geometry["pos"]), dict(geometry["gmr"]), dict(geometry["r"]), f)
    eq = _carsons_with_resistivity(rho)(model)
    return eq.build_z_primitive(), calculate_impedance(eq)


def _constant_offset(f):
    """Reactance shift from -0.0386 -> (1/2 - γ)/2 in Q, ΔX = ωμ0/π · δQ [ohm/m]."""
    return 2 * math.pi * f * MU0 / math.pi * (0.5 * (0.5 - EULER_GAMMA) + 0.0386)


@pytest.mark.parametrize(("name", "f", "rho"), RUNS)
def test_primitive_matches_carsons_package(name, f, rho):
    """Primitive Z [ohm/m]: relayset 'carson_truncated' = carsons ModifiedCarsonsEquations."""
    geometry = GEOMETRIES[name]
    ours = _relayset_primitive(geometry, f, rho)
    theirs, _ = _carsons_primitive(geometry, f, rho)
    np.testing.assert_allclose(ours, theirs, rtol=REL_TOL_UNCORRECTED, atol=0)
    np.testing.assert_allclose(
        ours, theirs + 1j * _constant_offset(f), rtol=REL_TOL_CORRECTED, atol=0
    )


@pytest.mark.parametrize(("name", "f", "rho"), RUNS)
def test_kron_reduced_matches_carsons_package(name, f, rho):
    """Phase matrix after eliminating the earthed wires: relayset kron_reduce = carsons."""
    geometry = GEOMETRIES[name]
    ours = kron_reduce(_relayset_primitive(geometry, f, rho), 3)
    theirs_prim, theirs_abc = _carsons_primitive(geometry, f, rho)
    np.testing.assert_allclose(ours, theirs_abc, rtol=REL_TOL_UNCORRECTED, atol=0)
    corrected = theirs_prim + 1j * _constant_offset(f)
    n = corrected.shape[0]
    theirs_corr = (
        corrected[:3, :3]
        - corrected[:3, 3:n] @ np.linalg.inv(corrected[3:, 3:]) @ corrected[3:, :3]
    )
    np.testing.assert_allclose(ours, theirs_corr, rtol=REL_TOL_CORRECTED, atol=0)


def test_offset_is_what_the_docstring_says():
    """The constant shift is a few 1e-6 of the reactance (so 1e-5 without the correction)."""
    z, _ = _carsons_primitive(GEOMETRIES["132kV-horizontal-1-shield"], 50.0, 100.0)
    rel = abs(_constant_offset(50.0)) / np.min(np.abs(z.imag))
    assert 1e-7 < rel < REL_TOL_UNCORRECTED
