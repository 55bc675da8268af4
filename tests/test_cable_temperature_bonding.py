"""Cable refinements: the sheath's resistance at its temperature, and cross-bonding with
unequal minor sections (relayset.inputs.cable, relayset.physics.cable).

Checks:
- resistivity at temperature rho_20 (1 + alpha (T - 20)) with IEC 60287-1-1 Table 1 (values
  from memory: copper 1.7241e-8 ohm*m, 3.93e-3 1/K; aluminium 2.8264e-8, 4.03e-3; lead
  21.4e-8, 4.0e-3), core and sheath; the default sheath temperature is the core's;
- identity: three equal minor sections give the ideal average (rtol 1e-12);
- independent explicit construction: the major section as a circuit solved by nodal
  analysis (each minor section a 6-conductor series branch stamped by its nodal admittance,
  the sheaths joined to the next position at each joint, earthed at the major-section
  ends), not by the averaging formula: the cores' impedance agrees to rtol 1e-9;
- bad input: one line, exit 2.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from numpy.testing import assert_allclose

from relayset.cli import main
from relayset.physics import cable as cb
from relayset.physics.impedance import kron_reduce
from relayset.physics.sequence import to_sequence

DEMO = "brackenholt_saltmarsh_street_132kv_cable.toml"

#: An invented 132 kV cable (that of tests/test_cable_physics.py).
DESIGN = cb.CableDesign(core_radius_m=0.0145, core_resistivity_ohm_m=2.8264e-8,
                        sheath_inner_radius_m=0.040, sheath_outer_radius_m=0.0412,
                        sheath_resistivity_ohm_m=1.7241e-8, jacket_radius_m=0.0455,
                        insulation_permittivity=2.5, jacket_permittivity=2.3)


def _cable_table(**kw):
    from relayset.inputs import schema
    from relayset.inputs.cable import Cable

    raw = {"core_material": "aluminium", "core_radius": "14.5 mm",
           "insulation_permittivity": 2.5, "sheath_inner_radius": "40 mm",
           "sheath_outer_radius": "41.2 mm", "sheath_material": "copper",
           "jacket_outer_radius": "45.5 mm", "depth": "1.2 m", "formation": "flat",
           "spacing": "0.2 m", "bonding": "both_ends"} | kw
    return schema.validate(Cable, {k: v for k, v in raw.items() if v is not None})


@pytest.mark.parametrize(("kw", "core", "sheath"), [
    # IEC 60287-1-1 Table 1 (from memory): rho_20 (1 + alpha (T - 20))
    ({"operating_temperature": "90 degC", "sheath_temperature": "70 degC"},
     2.8264e-8 * (1 + 4.03e-3 * 70), 1.7241e-8 * (1 + 3.93e-3 * 50)),
    ({"operating_temperature": "65 degC"},  # default: the sheath at the core's temperature
     2.8264e-8 * (1 + 4.03e-3 * 45), 1.7241e-8 * (1 + 3.93e-3 * 45)),
    ({}, 2.8264e-8, 1.7241e-8),  # both at 20 degC
    ({"sheath_material": "lead", "sheath_temperature": "50 degC"},
     2.8264e-8, 21.4e-8 * (1 + 4.0e-3 * 30)),
])
def test_resistivities_at_temperature(kw, core, sheath):
    from relayset.inputs.cable import resolve

    sec = resolve("c", _cable_table(**kw), 1)
    assert_allclose(sec.design.core_resistivity_ohm_m, core, rtol=1e-12, atol=0)
    assert_allclose(sec.design.sheath_resistivity_ohm_m, sheath, rtol=1e-12, atol=0)


def test_sheath_resistivity_given_is_taken_as_is():
    from relayset.inputs.cable import resolve

    t = _cable_table(sheath_material=None, sheath_resistivity="3e-8 ohm*m",
                     sheath_temperature="80 degC")
    sec = resolve("c", t, 1)
    assert sec.design.sheath_resistivity_ohm_m == pytest.approx(3e-8, rel=1e-12)
    assert any("as given" in n for n in sec.notes)


def test_warm_sheath_raises_r0_of_a_both_ends_bonded_cable():
    # Sheath return (both ends bonded): R0 grows with the sheath's resistance (common
    # practice, no source: the zero-sequence current returns mostly in the sheaths).
    from relayset.inputs.cable import resolve

    def seq(**kw):
        s = resolve("c", _cable_table(**kw), 1)
        z, _ = cb.cable_section_matrices(s.design, s.formation, s.spacing_m, s.depth_m,
                                         s.bonding, 50.0, 100.0)
        return to_sequence(z)

    cold, warm = seq(sheath_temperature="20 degC"), seq(sheath_temperature="80 degC")
    assert warm[0, 0].real > 1.05 * cold[0, 0].real


def _explicit_major_section(z: np.ndarray, lengths) -> np.ndarray:
    """Cores' impedance per metre of a single-circuit major section, built as a circuit.

    Nodes at the four joints (0: start, 3: end): the three core nodes, and the sheath node
    of each position at joints 1 and 2 (at joints 0 and 3 the sheaths are earthed). Minor
    section s runs from joint s to s + 1, conductors [cores by position, sheaths by
    position]; its sheath of position p ends on the node of position p + 1 of joint s + 1
    (the rotation at each joint). Unit currents are injected into the cores at joint 0 with
    the cores earthed at joint 3; the cores' voltages at joint 0 are the impedance matrix.
    """
    core = {(j, p): 3 * j + p for j in range(4) for p in range(3)}  # joint 3: earthed
    sheath = {(j, p): 12 + 3 * (j - 1) + p for j in (1, 2) for p in range(3)}
    n_nodes = 18
    y = np.zeros((n_nodes, n_nodes), complex)
    for s, ln in enumerate(lengths):
        yb = np.linalg.inv(z * ln)
        start = [core[s, p] for p in range(3)] + [sheath.get((s, p)) for p in range(3)]
        end = [core[s + 1, p] for p in range(3)] + [sheath.get((s + 1, (p + 1) % 3))
                                                    for p in range(3)]
        nodes = start + end
        blk = np.block([[yb, -yb], [-yb, yb]])
        for a, na in enumerate(nodes):
            for b, nb in enumerate(nodes):
                if na is not None and nb is not None:
                    y[na, nb] += blk[a, b]
    keep = [i for i in range(n_nodes) if i not in {core[3, p] for p in range(3)}]
    y = y[np.ix_(keep, keep)]
    inj = np.zeros((len(keep), 3), complex)
    for p in range(3):
        inj[keep.index(core[0, p]), p] = 1.0
    v = np.linalg.solve(y, inj)
    return v[[keep.index(core[0, p]) for p in range(3)]] / math.fsum(lengths)


@pytest.mark.parametrize("formation", ["flat", "trefoil"])
@pytest.mark.parametrize("lengths", [(480.0, 500.0, 520.0), (300.0, 650.0, 410.0),
                                     (500.0, 500.0, 500.0)])
def test_unequal_minor_sections_equal_explicit_construction(formation, lengths):
    # Independent construction (nodal analysis of the circuit, see _explicit_major_section)
    # against the cascade (relayset.physics.cable.cross_bonded_cascade + Kron reduction).
    x, d, _ = cb.cable_positions(formation, 0.25, 1.2)
    z, _ = cb.primitive_matrices(DESIGN, x, d, 50.0, 100.0)
    want = _explicit_major_section(z, lengths)
    got = kron_reduce(cb.cross_bonded_cascade(z, 1, lengths), 3)
    assert_allclose(got, want, rtol=1e-9, atol=0)


def test_equal_minor_sections_are_the_ideal_average():
    # Identity: equal lengths give today's ideal cross-bonding (cross_bonded_average), to
    # rtol 1e-12, for one and two circuits; unequal ones differ (flat formation).
    for n_c in (1, 2):
        x, d, _ = cb.cable_positions("flat", 0.25, 1.2, n_c, 1.5)
        z, y = cb.primitive_matrices(DESIGN, x, d, 50.0, 100.0)
        ideal = cb.bonded_core_matrices(z, y, "cross_bonded", n_c)[0]
        equal = cb.bonded_core_matrices(z, y, "cross_bonded", n_c, (700.0, 700.0, 700.0))[0]
        assert_allclose(equal, ideal, rtol=1e-12, atol=0)
        uneq = cb.bonded_core_matrices(z, y, "cross_bonded", n_c, (300.0, 700.0, 1100.0))[0]
        assert np.max(np.abs(uneq - ideal)) > 1e-3 * np.max(np.abs(ideal))


def test_study_with_minor_sections(variant):
    # Through the study: equal minor sections give the demo's parameters (rtol 1e-12);
    # unequal ones change the cable's phase matrix (its unbalance: the sequence Z1 and Z0
    # of the demo's trefoil barely move) and say so in the assumptions.
    from relayset.studies import pipeline

    def minor(lengths):
        def edit(d):
            d["cables"]["city_cable"]["minor_sections"] = lengths
        return edit

    base = pipeline.run(variant(DEMO, lambda d: None, "a.toml")).parameters
    equal = pipeline.run(variant(DEMO, minor(["600 m"] * 3), "b.toml")).parameters
    uneq = pipeline.run(variant(DEMO, minor(["300 m", "600 m", "900 m"]), "c.toml")).parameters
    assert_allclose(equal.tower_matrices()[0][-1], base.tower_matrices()[0][-1], rtol=1e-12,
                    atol=0)
    za, zb = base.tower_matrices()[0][-1], uneq.tower_matrices()[0][-1]
    assert np.max(np.abs(zb - za)) > 1e-3 * np.max(np.abs(za))
    assert any("minor sections of 300 m, 600 m, 900 m" in a for a in uneq.assumptions)


@pytest.mark.parametrize(("edit", "words"), [
    (lambda c: c.update(minor_sections=["300 m", "600 m"]),
     ["cables.city_cable.minor_sections", "three minor sections"]),
    (lambda c: c.update(bonding="both_ends", minor_sections=["1 km"] * 3),
     ["cables.city_cable.minor_sections", "cross-bonding"]),
    (lambda c: c.update(minor_sections=["2 km", "2 km", "1 km"]),
     ["cables.city_cable.minor_sections", "longer than the cable's sections"]),
    (lambda c: c.update(sheath_temperature="300 degC"),
     ["cables.city_cable.sheath_temperature = \"300 degC\"", "250 degC"]),
])
def test_bad_cable_refinement_is_one_line(capsys, tmp_path, variant, edit, words):
    path = variant(DEMO, lambda d: edit(d["cables"]["city_cable"]))
    out = tmp_path / "out"
    code = main(["report", str(path), "-o", str(out)])
    err = capsys.readouterr().err.strip()
    assert code == 2 and len(err.splitlines()) == 1, err
    for w in words:
        assert w in err, err
    assert not out.exists()


@pytest.mark.parametrize("towers", [True, False])
def test_cable_only_line_is_refused_saying_why(capsys, tmp_path, variant, towers):
    # A line of cable sections only is not modelled yet (the line model is built on an
    # overhead cross-section): one line, exit 2, nothing written, and the refusal comes
    # first (not a request for [towers] tables that could not help).
    def edit(d):
        d["line"]["length"] = "12 km"
        d["line"]["sections"] = [
            {"length": "6 km", "order": ["A", "B", "C"], "cable": "city_cable"},
            {"length": "6 km", "order": ["B", "C", "A"], "cable": "city_cable"}]
        if not towers:
            d.pop("towers")

    path = variant(DEMO, edit)
    out = tmp_path / "out"
    code = main(["report", str(path), "-o", str(out)])
    err = capsys.readouterr().err.strip()
    assert code == 2 and len(err.splitlines()) == 1, err
    assert "line.sections" in err and "cable sections only is not modelled yet" in err, err
    assert "overhead section's cross-section" in err
    assert not out.exists()
