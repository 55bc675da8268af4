"""Cable sections in a study: [cables.NAME] tables, `cable = NAME` on a section.

- Bad input: one line (file, field as written, value as written, rule), exit 2, nothing
  written.
- Identity: one cable section split in two gives the same line (rtol 1e-12): the parameters,
  the reach study and the settings.
- Kirchhoff: the mixed line's per-length matrix is the length-weighted average of its
  sections' own matrices, the cable's from relayset.physics.cable directly; the fault
  solver's cascade holds the cable's matrix for the cable section.
- The demo runs through to a verdict; its report states the cable's Z1, Z0, bonding, return
  paths and the uncertainty sentence; the JSON carries each section's construction.
"""

from __future__ import annotations

import json

import numpy as np
import pytest
from numpy.testing import assert_allclose

from relayset.cli import main
from relayset.studies import pipeline
from relayset.studies.reach import line_cascade

DEMO = "brackenholt_saltmarsh_street_132kv_cable.toml"
RTOL = 1e-12


def _cable(d):
    return d["cables"]["city_cable"]


CASES = [
    ("section names an unknown cable",
     lambda d: d["line"]["sections"][4].update(cable="city_cabel"),
     ["line.sections[4].cable = \"city_cabel\"", "names no cable", "did you mean 'city_cable'"]),
    ("cable deeper than plausible", lambda d: _cable(d).update(depth="12 m"),
     ["cables.city_cable.depth = \"12 m\"", "at most 10 m"]),
    ("radii out of order", lambda d: _cable(d).update(sheath_outer_radius="37.0 mm"),
     ["cables.city_cable.sheath_outer_radius = \"37.0 mm\"", "radii out of order",
      "sheath_inner_radius (37.6 mm)"]),
    ("permittivity below one", lambda d: _cable(d).update(insulation_permittivity=0.8),
     ["cables.city_cable.insulation_permittivity = 0.8", "at least 1"]),
    ("both tower and cable",
     lambda d: d["line"]["sections"][4].update(tower="lattice"),
     ["line.sections[4].cable = \"city_cable\"", "not both"]),
    ("cables overlap", lambda d: _cable(d).update(spacing="50 mm"),
     ["cables.city_cable.spacing = \"50 mm\"", "overlap"]),
    ("cable out of the ground", lambda d: _cable(d).update(depth="0.08 m"),
     ["cables.city_cable.depth = \"0.08 m\"", "below the surface"]),
    ("bonding misspelt", lambda d: _cable(d).update(bonding="cross-bonded"),
     ["cables.city_cable.bonding = \"cross-bonded\"", "cross_bonded"]),
    ("only cable sections",
     lambda d: [s.update(cable="city_cable") or s.pop("tower", None)
                for s in d["line"]["sections"]],
     ["line.sections", "cable sections only is not modelled yet"]),
]


@pytest.mark.parametrize(("name", "edit", "words"), CASES, ids=[c[0] for c in CASES])
def test_bad_cable_input_gives_one_line(capsys, tmp_path, variant, name, edit, words):
    path = variant(DEMO, edit)
    out = tmp_path / "out.json"
    code = main(["params", str(path), "--json", str(out)])
    err = capsys.readouterr().err.strip()
    assert code == 2
    assert len(err.splitlines()) == 1 and "Traceback" not in err, err
    assert str(path) in err
    assert not out.exists()
    for w in words:
        assert w in err, f"{w!r} not in {err!r}"


def _split_cable(d):
    secs = d["line"]["sections"]
    last = secs.pop()
    secs += [dict(last, length="1.5 km"), dict(last, length="2.5 km")]


def test_cable_section_split_in_two_is_the_same_line(variant, demo_path):
    """Identity: the 4 km cable as 1.5 km + 2.5 km of the same cable and order."""
    from test_towers import _assert_same_numbers

    one = pipeline.run(demo_path(DEMO), settings=True)
    two = pipeline.run(variant(DEMO, _split_cable, "two.toml"), settings=True)
    assert len(two.parameters.section_lengths_m) == 6
    for key in ("untransposed", "actual_plan", "ideal_cycle"):
        assert_allclose(two.parameters.arrangements[key].zabc_ohm_per_m,
                        one.parameters.arrangements[key].zabc_ohm_per_m, rtol=RTOL, atol=0)
        assert_allclose(two.parameters.arrangements[key].yabc_s_per_m,
                        one.parameters.arrangements[key].yabc_s_per_m, rtol=RTOL, atol=0)
    _assert_same_numbers(one.parameters.circuits[0].to_dict(),
                         two.parameters.circuits[0].to_dict())
    _assert_same_numbers(one.parameters.to_dict()["cables"][0],
                         two.parameters.to_dict()["cables"][0])
    _assert_same_numbers(one.reach_study.to_dict(), two.reach_study.to_dict())
    _assert_same_numbers(one.settings[0].to_dict(), two.settings[0].to_dict())


def test_mixed_line_is_the_weighted_sum_of_its_sections(demo_path):
    """Kirchhoff: the actual plan's Zabc = sum of l_k Z_k / l, the cable's Z_k computed here
    directly by relayset.physics.cable from the study's cable data (the pipeline's wiring of
    the cable into the line is what is checked); the solver's cascade holds it exactly."""
    from relayset.inputs.cable import resolve
    from relayset.inputs.study_file import load_study
    from relayset.physics.cable import cable_section_matrices
    from relayset.physics.transposition import to_phase_order
    from relayset.studies.geometry import build_geometry
    from relayset.studies.parameters import compute_parameters, construction_matrices

    path = demo_path(DEMO)
    study = load_study(path)
    geo = build_geometry(study, str(path))
    params = compute_parameters(geo)
    assert params.tower_names == ("lattice", "compact_pole", "city_cable")
    cs = resolve("city_cable", study.cables["city_cable"], 1)
    z_cable, y_cable = cable_section_matrices(
        cs.design, "trefoil", cs.spacing_m, 1.2, "cross_bonded", 50.0, 100.0)
    z_t, y_t = params.tower_matrices()
    assert_allclose(z_t[2], z_cable, rtol=RTOL, atol=0)
    assert_allclose(y_t[2], y_cable, rtol=RTOL, atol=0)
    mats = [construction_matrices(geo, k)[0] for k in range(3)]
    lengths = np.array(geo.section_lengths_m)
    expected = sum(ln * to_phase_order(mats[t], list(o)) for ln, o, t in
                   zip(lengths, geo.section_orders, geo.section_towers, strict=True))
    assert_allclose(params.arrangements["actual_plan"].zabc_ohm_per_m,
                    expected / lengths.sum(), rtol=1e-12, atol=0)
    line = line_cascade(geo, params, "actual_plan", True)
    assert_allclose(line.z_ohm_per_m[4], to_phase_order(z_cable, [0, 1, 2]), rtol=0, atol=0)
    assert_allclose(line.y_s_per_m[4], to_phase_order(y_cable, [0, 1, 2]), rtol=0, atol=0)
    # The cable differs from the overhead sections (the checks above can fail).
    assert abs(params.cable_at(2).z1_ohm_per_m[0]) < 0.5 * abs(params.tower_sequence(0)[0][0])


def test_cable_demo_report_and_json(tmp_path, demo_path):
    """The demo runs through to a verdict; the HTML states the cable's Z1 and Z0, its
    bonding, the return paths and the uncertainty; the JSON names each section's
    construction and carries the cable's sequence impedances."""
    out = tmp_path / "rep"
    code = main(["report", str(demo_path(DEMO)), "-o", str(out)])
    assert code == 0  # verified (with accepted deviations)
    html = next(out.glob("*.html")).read_text("utf-8")
    d = json.loads(next(out.glob("*.json")).read_text("utf-8"))
    p = d["parameters"]
    assert [s.get("tower") or s.get("cable") for s in p["sections"]] == (
        ["lattice"] * 3 + ["compact_pole", "city_cable"])
    assert p["sections"][4]["bonding"] == "cross_bonded"
    (cable,) = p["cables"]
    assert cable["length_km"] == pytest.approx(4.0, rel=1e-12)
    z1 = complex(*cable["z1_ohm_per_km"][0])
    assert_allclose(complex(*cable["z1_ohm"][0]), 4 * z1, rtol=1e-12, atol=0)
    assert "Cable sections" in html and "cross bonded" in html
    assert "zero-sequence impedance is uncertain" in html
    assert "cross-bonded sheath circuits" in html
    assert f"{z1.real:.4f}" in html
    assert d["verification"]["verdict"] in ("verified", "verified with accepted deviations")


def _double_with_cable(d, bonding="cross_bonded"):
    """The 230 kV double-circuit demo on [towers] tables with its last 6 km in cable: two
    trefoil groups 1 m apart (invented cable data)."""
    pos = {c["name"]: c.pop("positions") for c in d["circuits"]}
    d["towers"] = {"double": {"positions": pos, "shield_wires": d.pop("shield_wires")}}
    order = {"1": ["A", "B", "C"], "2": ["A", "B", "C"]}
    d["line"]["sections"] = [{"length": "58 km", "order": order, "tower": "double"},
                             {"length": "6 km", "order": order, "cable": "c"}]
    d["cables"] = {"c": {
        "core_material": "copper", "core_cross_section": "1000 mm2", "core_radius": "18.9 mm",
        "insulation_permittivity": 2.5, "sheath_inner_radius": "45 mm",
        "sheath_outer_radius": "46.5 mm", "sheath_material": "aluminium",
        "jacket_outer_radius": "51 mm", "depth": "1.4 m", "formation": "trefoil",
        "circuit_spacing": "1.0 m", "bonding": bonding}}


def test_double_circuit_with_a_cable_section(variant, demo_path):
    """Two circuits in cable: the cable's 6x6 matrix is symmetric, its two circuits alike
    by symmetry (mirror image: the same self blocks to rtol 1e-9), coupled in zero sequence
    (Z0M) far less than on the towers, and the line runs to a verification verdict; the
    double-circuit study without a circuit spacing is refused in one line."""
    from relayset.physics.sequence import to_sequence

    res = pipeline.run(variant("elsford_fallowby_230kv_double.toml", _double_with_cable),
                       settings=True)
    p = res.parameters
    z_t, _ = p.tower_matrices()
    zc = z_t[p.tower_names.index("c")]
    assert zc.shape == (6, 6)
    assert_allclose(zc, zc.T, rtol=1e-12, atol=0)
    a, b = to_sequence(zc[:3, :3]), to_sequence(zc[3:, 3:])
    assert_allclose(np.diag(a), np.diag(b), rtol=1e-9, atol=0)
    z0m_cable = abs(to_sequence(zc[:3, 3:])[0, 0])
    z0m_tower = abs(to_sequence(z_t[0][:3, 3:])[0, 0])
    assert z0m_cable < 0.2 * z0m_tower
    assert res.verification is not None and res.verification.verdict


def test_double_circuit_cable_needs_circuit_spacing(capsys, tmp_path, variant):
    def edit(d):
        _double_with_cable(d)
        d["cables"]["c"].pop("circuit_spacing")

    path = variant("elsford_fallowby_230kv_double.toml", edit)
    code = main(["params", str(path)])
    err = capsys.readouterr().err.strip()
    assert code == 2 and len(err.splitlines()) == 1
    assert "cables.c.circuit_spacing" in err and "two circuits" in err


def test_study_schema_covers_the_cable_tables(demo_path):
    """`relayset schema study` describes [cables.NAME]: the demo validates (jsonschema, an
    independent validator); a misspelt key or an unknown bonding does not."""
    import tomllib

    import jsonschema

    from relayset.export.schemas import study_schema

    schema = study_schema()
    data = tomllib.loads(demo_path(DEMO).read_text("utf-8"))
    jsonschema.validate(data, schema)
    for edit in (lambda c: c.update(bonding="solid"), lambda c: c.update(burial_depth="1 m"),
                 lambda c: c.pop("depth")):
        bad = tomllib.loads(demo_path(DEMO).read_text("utf-8"))
        edit(bad["cables"]["city_cable"])
        with pytest.raises(jsonschema.ValidationError):
            jsonschema.validate(bad, schema)


def test_params_console_names_each_circuit_of_a_double_circuit_cable(capsys, variant):
    # Two circuits in cable: the console gives each circuit's Z1 and Z0 under its name (it
    # printed "Z1 = ..., Z0 = ... Z1 = ..., Z0 = ..." unnamed; outside-check finding).
    path = variant("elsford_fallowby_230kv_double.toml", _double_with_cable)
    assert main(["params", str(path)]) == 0
    line = next(x for x in capsys.readouterr().out.splitlines() if x.startswith("Cable c:"))
    assert ": circuit 1 Z1 = " in line and "; circuit 2 Z1 = " in line
