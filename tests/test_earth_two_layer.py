r"""Two-layer earth (relayset.physics.earth_two_layer) against its limits and an independent
integration.

Sources and identities checked:

- Equal layers: with :math:`\rho_1 = \rho_2` the layered :math:`\alpha_e` is Carson's
  :math:`\alpha` exactly (Carson 1926), so the model must give the engine's ``carson``
  correction, itself checked against Carson's integral to 1e-6 in test_carson_integral.py.
- Thin and thick upper layer: :math:`d \to 0` gives homogeneous earth of the lower
  resistivity, :math:`d \to \infty` of the upper (the limits of the layer recursion, Sunde
  1949 ch. 4 / Nakagawa, Ametani and Iwamoto, Proc. IEE 120(12), 1973; from memory).
- Independent integration: the correction written in the reflection-coefficient form
  :math:`\Delta Z = \frac{j\omega\mu_0}{2\pi}\int_0^\infty \frac{1+R(\lambda)}{\lambda}
  e^{-(h_i+h_j)\lambda}\cos(x\lambda)\,d\lambda`,
  :math:`R = (\lambda - \alpha_e)/(\lambda + \alpha_e)`, with :math:`\alpha_e` from the
  layer's exponential form (no tanh), integrated with scipy.integrate.quad on the unscaled
  variable, real and imaginary parts separately, one element at a time (the engine uses
  quad_vec on a scaled variable over all elements at once). Tolerance 1e-7 relative.
"""

from __future__ import annotations

import itertools
import math

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy.integrate import quad

from relayset.physics.earth import earth_correction_ohm_per_m
from relayset.physics.earth_two_layer import surface_alpha, two_layer_correction_ohm_per_m

MU0 = 4e-7 * math.pi
F = 50.0

# (h_i, h_j, x): self terms, a phase pair, phase to shield wire, the two sides of a tower.
GEOM = np.array([(20.0, 20.0, 0.0), (15.0, 22.0, 6.5), (12.0, 35.0, 4.0), (25.0, 25.0, 14.0)])


def _engine(rho1, rho2, d, geom=GEOM, f=F):
    return two_layer_correction_ohm_per_m(geom[:, 0], geom[:, 1], geom[:, 2], f, rho1, rho2, d)


def _carson(rho, geom=GEOM, f=F):
    return earth_correction_ohm_per_m("carson", geom[:, 0], geom[:, 1], geom[:, 2], f, rho)


def _independent(h_i, h_j, x, f, rho1, rho2, d) -> complex:
    """ΔZ by the reflection-coefficient form, scipy.quad, unscaled λ (see module notes)."""
    w = 2 * math.pi * f

    def integrand(lam: float) -> complex:
        a1 = np.sqrt(complex(lam * lam, w * MU0 / rho1))
        a2 = np.sqrt(complex(lam * lam, w * MU0 / rho2))
        u = np.exp(-2 * a1 * d)
        a_e = a1 * (a2 * (1 + u) + a1 * (1 - u)) / (a1 * (1 + u) + a2 * (1 - u))
        refl = (lam - a_e) / (lam + a_e)
        # (1 + R)/λ = 2/(λ + α_e): written out so that λ = 0 is no division by zero.
        one_plus_r_over_lam = 2.0 / (lam + a_e) if lam == 0 else (1 + refl) / lam
        return one_plus_r_over_lam * math.exp(-(h_i + h_j) * lam) * math.cos(x * lam)

    scale = 1.0 / (h_i + h_j)
    edges = [0.0, *(scale * k for k in (0.5, 2.0, 8.0, 30.0, 100.0))]
    re = im = 0.0
    for a, b in itertools.pairwise(edges):
        re += quad(lambda t: integrand(t).real, a, b, epsabs=0.0, epsrel=1e-12, limit=500)[0]
        im += quad(lambda t: integrand(t).imag, a, b, epsabs=0.0, epsrel=1e-12, limit=500)[0]
    total = complex(re, im)
    return 1j * w * MU0 / (2 * math.pi) * total


def test_surface_alpha_is_carsons_alpha_for_equal_layers():
    """Identity: ρ1 = ρ2 gives α_e = sqrt(λ² + jωμ0/ρ) (Carson 1926), to rounding."""
    lam = np.logspace(-6, 0, 50)
    w = 2 * math.pi * F
    got = surface_alpha(lam, w, 100.0, 100.0, 15.0)
    assert_allclose(got, np.sqrt(lam**2 + 1j * w * MU0 / 100.0), rtol=1e-14, atol=0)


@pytest.mark.parametrize("rho", [10.0, 100.0, 1000.0, 10000.0])
def test_equal_layers_reduce_to_carson(rho):
    """ρ1 = ρ2: the engine's Carson series (itself 1e-6 from Carson's integral): 2e-6."""
    assert_allclose(_engine(rho, rho, 20.0), _carson(rho), rtol=2e-6, atol=0)


@pytest.mark.parametrize(("rho1", "rho2"), [(50.0, 2000.0), (3000.0, 30.0)])
def test_thin_upper_layer_is_the_lower_earth(rho1, rho2):
    """d -> 0: homogeneous earth of the lower resistivity (limit of the layer recursion)."""
    assert_allclose(_engine(rho1, rho2, 1e-6), _carson(rho2), rtol=2e-6, atol=0)


@pytest.mark.parametrize(("rho1", "rho2"), [(50.0, 2000.0), (3000.0, 30.0)])
def test_thick_upper_layer_is_the_upper_earth(rho1, rho2):
    """d -> inf: homogeneous earth of the upper resistivity (d = 100 skin depths)."""
    depth = 100 * 503.3 * math.sqrt(rho1 / F)
    assert_allclose(_engine(rho1, rho2, depth), _carson(rho1), rtol=2e-6, atol=0)


@pytest.mark.parametrize(
    ("rho1", "rho2", "d", "f"),
    [
        (100.0, 1000.0, 20.0, 50.0),  # soil over rock
        (1000.0, 50.0, 10.0, 50.0),  # rock over clay
        (300.0, 30.0, 300.0, 60.0),  # deep layer, comparable to the skin depth
        (20.0, 5000.0, 2.0, 60.0),  # thin wet top soil over rock
    ],
)
def test_against_independent_integration(rho1, rho2, d, f):
    """Against scipy.quad of the reflection-coefficient form (module notes): 1e-7."""
    got = _engine(rho1, rho2, d, f=f)
    ref = np.array([_independent(*g, f, rho1, rho2, d) for g in GEOM])
    assert_allclose(got, ref, rtol=1e-7, atol=0)


def test_layering_matters_at_power_frequency():
    """Control (the checks above can fail): a 100 m layer of 100 ohm m over 1000 ohm m is
    more than 10 % away from either homogeneous earth in ΔZ (it lies between them)."""
    got = _engine(100.0, 1000.0, 100.0)
    for rho in (100.0, 1000.0):
        assert np.all(np.abs(got - _carson(rho)) > 0.10 * np.abs(_carson(rho)))


def test_matrix_broadcast_matches_elementwise():
    """A symmetric (n, n) call (elements integrated once per distinct pair) equals the
    element-wise calls (identity)."""
    h = np.array([12.0, 18.0, 24.0, 30.0])
    x = np.array([-4.0, 4.0, -5.0, 0.0])
    dx = x[:, None] - x[None, :]
    m = two_layer_correction_ohm_per_m(h[:, None], h[None, :], dx, F, 200.0, 20.0, 8.0)
    assert m.shape == (4, 4)
    assert_allclose(m, m.T, rtol=0, atol=0)
    for i in range(4):
        for j in range(4):
            one = two_layer_correction_ohm_per_m(h[i], h[j], dx[i, j], F, 200.0, 20.0, 8.0)
            assert_allclose(m[i, j], one, rtol=1e-9, atol=0)


def test_dispatch_needs_layers_with_two_layer_only():
    """earth_correction_ohm_per_m: the layers go with two_layer and no other model."""
    with pytest.raises(ValueError, match="two_layer"):
        earth_correction_ohm_per_m("two_layer", 10.0, 10.0, 0.0, F, 100.0)
    with pytest.raises(ValueError, match="two_layer"):
        earth_correction_ohm_per_m("carson", 10.0, 10.0, 0.0, F, 100.0, (10.0, 5.0))
    got = earth_correction_ohm_per_m("two_layer", 10.0, 10.0, 0.0, F, 100.0, (1000.0, 5.0))
    assert_allclose(got, two_layer_correction_ohm_per_m(10.0, 10.0, 0.0, F, 100.0, 1000.0, 5.0),
                    rtol=0, atol=0)


# --- Through a study: the input fields, the parameters and the verification's sweep --------

DEMO_DIR = __import__("pathlib").Path(__file__).resolve().parents[1] / "demo_lines"


def _study(**system):
    import tomllib

    from relayset.inputs.study_file import parse_study

    data = tomllib.loads((DEMO_DIR / "elsford_fallowby_230kv_double.toml").read_text())
    data["system"].update(system)
    return parse_study(data, "two_layer.toml")


def _params(study):
    from relayset.studies.geometry import build_geometry
    from relayset.studies.parameters import compute_parameters

    return compute_parameters(build_geometry(study, "two_layer.toml"))


def test_study_with_equal_layers_gives_the_carson_parameters():
    """A two-layer study whose layers are alike has the Carson study's Z (identity; the
    earth terms agree to 2e-6, the conductors' own terms are shared)."""
    two = _params(_study(earth_model="two_layer", earth_lower_resistivity="300 ohm*m",
                         earth_layer_thickness="15 m"))
    one = _params(_study())
    assert two.earth_model == "two_layer"
    assert_allclose(two.z_by_position_ohm_per_m, one.z_by_position_ohm_per_m, rtol=2e-6, atol=0)
    assert any("two horizontal layers" in a and "15 m thick" in a for a in two.assumptions)


def test_study_two_layer_zero_sequence_moves_towards_the_lower_earth():
    """300 ohm m over 3000 ohm m at 20 m: Z0 lies between the homogeneous Z0 of the two
    (each layer alone, engine's carson) and is not equal to either (physics: the 50 Hz
    skin depth, about 1.2 km, reaches far into the lower layer)."""
    z0 = {}
    for key, system in {
        "upper": {"earth_resistivity": "300 ohm*m"},
        "lower": {"earth_resistivity": "3000 ohm*m"},
        "two": {"earth_model": "two_layer", "earth_lower_resistivity": "3000 ohm*m",
                "earth_layer_thickness": "20 m"},
    }.items():
        z0[key] = _params(_study(**system)).circuits[0].z0_ohm_per_m
    assert z0["upper"].imag < z0["two"].imag < z0["lower"].imag
    assert abs(z0["two"] - z0["upper"]) > 0.02 * abs(z0["upper"])


def test_resistivity_sweep_scales_both_layers():
    """The verification's resistivity range scales the lower layer with the upper one
    (the ratio of the layers is kept; common practice, no source)."""
    from relayset.studies.verification.closing import params_by_resistivity

    study = _study(earth_model="two_layer", earth_lower_resistivity="3000 ohm*m",
                   earth_layer_thickness="20 m", earth_resistivity_range=["150 ohm*m",
                                                                          "600 ohm*m"])
    by_rho = params_by_resistivity(study, None, _params(study), "two_layer.toml")
    assert sorted(by_rho) == [150.0, 300.0, 600.0]
    scaled = _params(_study(earth_model="two_layer", earth_resistivity="600 ohm*m",
                            earth_lower_resistivity="6000 ohm*m", earth_layer_thickness="20 m"))
    assert_allclose(by_rho[600.0].z_by_position_ohm_per_m, scaled.z_by_position_ohm_per_m,
                    rtol=1e-12, atol=0)
