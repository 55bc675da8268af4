"""Sections of different construction: [towers.NAME] tables and a tower per section.

Identities checked (each exact to rounding, rtol 1e-12 unless said):

- A line of uniform towers written with [towers] and several sections is the same line as
  the [[circuits]] form with one section: parameters, reach study and settings agree.
- The general several-tower path (two tower tables of the same cross-section, alternating)
  gives the same line again (it takes each section's matrices from its own tower).
- A line on two tower types: the actual plan's per-length matrix is the length-weighted
  average of each tower's section matrices (the series impedance of a cascade is the sum of
  its sections' Z l: Kirchhoff), each taken from a one-tower study of that cross-section;
  the fault solver's cascade carries each section's own matrix.
"""

from __future__ import annotations

import copy
import math

import numpy as np
import pytest
from numpy.testing import assert_allclose

from relayset.studies import pipeline
from relayset.studies.reach import line_cascade

DEMO_1C = "ashcombe_brenwick_132kv.toml"
DEMO_TOWERS = "harlow_quay_tessmoor_132kv_towers.toml"
RTOL = 1e-12


def _one_section(d):
    d["line"]["sections"] = [{"length": "80 km", "order": ["A", "B", "C"]}]


def _as_towers(d, names=("lattice",), parts=4):
    """The demo's cross-section moved to [towers] tables (one per name, all alike) and the
    80 km cut into ``parts`` equal sections of one phase order, towers taken in turn."""
    positions = d["circuits"][0].pop("positions")
    tower = {"positions": {"1": positions}, "shield_wires": d.pop("shield_wires")}
    d["towers"] = {n: copy.deepcopy(tower) for n in names}
    d["line"]["sections"] = [
        {"length": f"{80 / parts!r} km", "order": ["A", "B", "C"], "tower": names[k % len(names)]}
        for k in range(parts)]


def _flat(obj, prefix=""):
    """Every number of a result dictionary by its path."""
    out = {}
    if isinstance(obj, dict):
        for k, v in obj.items():
            out.update(_flat(v, f"{prefix}.{k}"))
    elif isinstance(obj, list | tuple):
        for k, v in enumerate(obj):
            out.update(_flat(v, f"{prefix}[{k}]"))
    elif isinstance(obj, bool) or obj is None or isinstance(obj, str):
        pass
    elif isinstance(obj, int | float):
        out[prefix] = float(obj)
    return out


def _assert_same_numbers(a: dict, b: dict, skip=("sections", "cases_solved"), rtol=RTOL,
                         atol=1e-9):
    fa, fb = _flat(a), _flat(b)
    # Which case is named the worst may differ between cases tied to rounding (only their
    # error, the value, is compared in a worst-case record); so may the count of cases
    # solved (a one-section plan is solved once for two arrangements).
    keys = [k for k in fa if not any(f".{s}" in k for s in skip)
            and not (".worst_" in k and not k.endswith(".error_pct"))]
    assert keys and set(keys) <= set(fb)
    for k in keys:
        if math.isnan(fa[k]):
            assert math.isnan(fb[k]), k
            continue
        assert math.isclose(fa[k], fb[k], rel_tol=rtol, abs_tol=atol), (k, fa[k], fb[k])


@pytest.mark.parametrize("names", [("lattice",), ("lattice", "lattice_b")],
                         ids=["one tower table", "two alike tower tables"])
def test_uniform_towers_in_sections_equal_one_section(variant, names):
    """[towers] form, four sections (one or two alike tower tables) = [[circuits]] form, one
    section: parameters, reach study and settings (numbers to rtol 1e-12; reach errors in %
    and other quantities near zero to 1e-9 absolute)."""
    one = pipeline.run(variant(DEMO_1C, _one_section, "one.toml"), settings=True)
    many = pipeline.run(variant(DEMO_1C, lambda d: _as_towers(d, names), "many.toml"),
                        settings=True)
    pa, pb = one.parameters, many.parameters
    assert len(pb.section_lengths_m) == 4
    assert (len(pb.tower_names) > 1) == (len(names) > 1)  # the general path is exercised
    for key in ("untransposed", "actual_plan", "ideal_cycle"):
        assert_allclose(pb.arrangements[key].zabc_ohm_per_m, pa.arrangements[key].zabc_ohm_per_m,
                        rtol=RTOL, atol=0)
        assert_allclose(pb.arrangements[key].yabc_s_per_m, pa.arrangements[key].yabc_s_per_m,
                        rtol=RTOL, atol=0)
    assert_allclose(pb.circuits[0].z0_ohm, pa.circuits[0].z0_ohm, rtol=RTOL, atol=0)
    _assert_same_numbers(one.reach_study.to_dict(), many.reach_study.to_dict())
    _assert_same_numbers(one.settings[0].to_dict(), many.settings[0].to_dict())


def _split_study(d):
    """The towers demo with its compact-pole section moved to the lattice (one tower)."""
    for sec in d["line"]["sections"]:
        sec["tower"] = "lattice"


def test_two_tower_types_average_and_cascade(variant, demo_path):
    """Mixed line = length-weighted sections of one-tower studies (Kirchhoff: a cascade's
    series impedance is the sum of its sections'); the solver's cascade holds each section's
    own matrix, exactly."""
    from relayset.physics.transposition import to_phase_order

    mixed = pipeline.run(demo_path(DEMO_TOWERS))
    lattice = pipeline.run(variant(DEMO_TOWERS, _split_study, "lattice.toml"))

    def compact(d):
        for sec in d["line"]["sections"]:
            sec["tower"] = "compact_pole"

    pole = pipeline.run(variant(DEMO_TOWERS, compact, "pole.toml"))
    lengths = np.array(mixed.parameters.section_lengths_m)
    assert mixed.parameters.tower_names == ("compact_pole", "lattice")
    orders = mixed.parameters.section_orders
    for plan, plan_orders in (("actual_plan", orders), ("untransposed", [orders[0]] * 4)):
        zs = []
        for k, order in enumerate(plan_orders):
            src = pole if k == 0 else lattice  # the one-tower study of section k's tower
            labels = list(src.parameters.phase_labels[0])
            zs.append(to_phase_order(src.parameters.z_by_position_ohm_per_m,
                                     [labels.index(p) for p in order]))
        expected = np.tensordot(lengths / lengths.sum(), np.stack(zs), axes=1)
        assert_allclose(mixed.parameters.arrangements[plan].zabc_ohm_per_m, expected,
                        rtol=RTOL, atol=0)
    # Per-tower Z1, Z0 (reported per section): the tower's ideally transposed sequence
    # impedances = the one-tower study's ideal cycle (the diagonal of the Fortescue transform
    # is unchanged by cyclic rotation of the phases: identity).
    for k, src in enumerate((pole, lattice)):
        z012 = src.parameters.arrangements["ideal_cycle"].z012_ohm_per_m
        assert_allclose(mixed.parameters.tower_sequence(k)[0], (z012[1, 1], z012[0, 0]),
                        rtol=RTOL, atol=0)
    # The pole section differs from the lattice (the check above can fail).
    assert not np.allclose(pole.parameters.z_by_position_ohm_per_m,
                           lattice.parameters.z_by_position_ohm_per_m, rtol=1e-3)


def test_fault_solver_cascade_takes_each_sections_tower(demo_path):
    """The cascade the reach study and the verification solve: section k's matrices are
    its own tower's, in its order (exact)."""
    from relayset.inputs.study_file import load_study
    from relayset.physics.transposition import to_phase_order
    from relayset.studies.geometry import build_geometry
    from relayset.studies.parameters import compute_parameters

    path = demo_path(DEMO_TOWERS)
    study = load_study(path)
    geo = build_geometry(study, str(path))
    params = compute_parameters(geo)
    line = line_cascade(geo, params, "actual_plan", True)
    z_t, y_t = params.tower_matrices()
    assert len(z_t) == 2 and line.z_ohm_per_m.shape == (4, 3, 3)
    for k, (order, tower) in enumerate(zip(geo.section_orders, geo.section_towers,
                                           strict=True)):
        assert_allclose(line.z_ohm_per_m[k], to_phase_order(z_t[tower], list(order)),
                        rtol=0, atol=0)
        assert_allclose(line.y_s_per_m[k], to_phase_order(y_t[tower], list(order)),
                        rtol=0, atol=0)
    assert_allclose(line.length_m, geo.section_lengths_m, rtol=0, atol=0)


def test_towers_demo_is_verified(demo_path):
    """The invented towers demo (two tower types, two-layer earth) passes its verification
    by fault simulation but for the tower-footing faults outside its mho circles, which it
    accepts as deviations; its zone 1 is the simulation's (stated in the settings)."""
    res = pipeline.run(demo_path(DEMO_TOWERS), settings=True)
    assert res.verification is not None
    assert res.verification.verdict == "verified with accepted deviations"
    assert all(c.deviation is not None and c.governing_case.r_fault_ohm > 0
               for _, c in res.verification.failures)
    d = res.parameters.to_dict()
    assert [s["tower"] for s in d["sections"]] == ["compact_pole"] + ["lattice"] * 3
    assert "z1_ohm_per_km" in d["sections"][0]


def test_report_lists_every_towers_wires_and_each_sections_tower(demo_path):
    """The report's input tables: each tower's positions and shield wires (tower name
    first) and the tower of each section, as the study file gives them."""
    from relayset.report.context import build_context

    res = pipeline.run(demo_path(DEMO_TOWERS))
    inputs = build_context(res)["inputs"]
    circuits = [p["circuit"] for p in inputs["positions"]]
    assert circuits == ["compact_pole · 1"] * 3 + ["lattice · 1"] * 3
    assert [s["name"] for s in inputs["shields"]] == ["compact_pole · E1", "lattice · E1"]
    assert [s["order"] for s in inputs["sections"]] == [
        "A B C (tower compact_pole)", "A B C (tower lattice)", "C A B (tower lattice)",
        "B C A (tower lattice)"]


def test_reach_names_the_positions_of_the_faulted_sections_tower(demo_path):
    """A fault on the compact poles is at their positions, one on the lattice at the
    lattice's (each section's own tower), seen from either end."""
    from relayset.inputs.study_file import load_study
    from relayset.studies.geometry import build_geometry
    from relayset.studies.parameters import plan_sections
    from relayset.studies.reach import _positions_at

    path = demo_path(DEMO_TOWERS)
    geo = build_geometry(load_study(path), str(path))
    orders, lengths, towers = plan_sections(geo, "actual_plan")
    names = [geo.tower_position_names[t] for t in towers]
    # 5 % of 70 km lies on the first 6 km (compact poles); section 1: A B C = top middle bottom
    assert _positions_at(0.05, "AG", orders, lengths, names) == ("top",)
    assert _positions_at(0.05, "BC", orders, lengths, names) == ("middle", "bottom")
    # 50 % lies in section 3 (lattice, C A B at left middle right): A is in the middle.
    assert _positions_at(0.50, "AG", orders, lengths, names) == ("middle",)
    # Seen from Tessmoor the plan runs backwards: 5 % from there is the lattice's section 4.
    back = _positions_at(0.05, "AG", orders[::-1], lengths[::-1], names[::-1])
    assert back == ("right",)
