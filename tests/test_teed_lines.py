"""A tee on more kinds of line: cable sections on the line and on the branch.

The study is invented (a 132 kV single circuit on lattice towers with a cable into one
end, tapped by a branch partly or wholly in cable). Checks:

- the teed solver on the study's legs (overhead and cable sections, shunt admittance)
  against the independent per-case nodal solution of tests/test_teed.py (nodal admittance
  of each uniform segment by eigendecomposition, tests/reference_solver.py; modified nodal
  analysis, Ho, Ruehli and Brennan 1975), to 1e-8;
- a branch written as an overhead section and a cable section: its leg is the cascade of
  the tower's matrices (the line's own parameters) and the cable's matrices (computed
  here from the cable table by relayset.physics.cable, itself checked against published
  data in tests/test_cable_physics.py), each section's chain matrix the matrix
  exponential of [[0, Z l], [Y l, 0]] (Paul, Analysis of Multiconductor Transmission
  Lines, 2nd ed., ch. 7) by scipy.linalg.expm, multiplied by hand;
- a branch of 1 mm to no source gives the two-ended line's measurements (Kirchhoff: an
  open stub of no length carries no current), the two-ended solver checked against the
  nodal reference in tests/test_network.py;
- bad input on the branch's cable sections: one line, exit 2, nothing written.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from numpy.testing import assert_allclose
from test_teed import nodal

from relayset.cli import main
from relayset.physics.faults import FAULT_TYPES
from relayset.physics.network import solve_fault_sweep
from relayset.physics.teed import ENDS, solve_teed_sweep

V_NOM = 132e3

CABLE_TOML = '''
schema = "relayset-study/1"

[study]
line_id = "HX-TEE-C1"
title = "Harwick - Ostmere 132 kV with a cabled tee to Linden Lane"
from_substation = "Harwick"
to_substation = "Ostmere"

[system]
nominal_voltage = "132 kV"
frequency = "50 Hz"
earth_resistivity = "100 ohm*m"

[conductor_types.phase]
code = "243-AL1/39-ST1A"
operating_temperature = "75 degC"

[conductor_types.earth]
dc_resistance_20c = "0.43 ohm/km"
outside_diameter = "11.7 mm"
gmr = "4.3 mm"
ac_dc_ratio = 1.0

[[circuits]]
name = "1"
phase_labels = ["A", "B", "C"]

[towers.lattice]
positions."1" = [
  { name = "left",   x = "-5.0 m", height = "21 m", sag = "6 m", conductor = "phase" },
  { name = "middle", x = "0.0 m",  height = "21 m", sag = "6 m", conductor = "phase" },
  { name = "right",  x = "5.0 m",  height = "21 m", sag = "6 m", conductor = "phase" },
]
shield_wires = [
  { name = "E1", x = "0 m", height = "28 m", sag = "5 m", conductor = "earth" },
]

[cables.xlpe]
core_material = "aluminium"
core_cross_section = "800 mm2"
core_radius = "16.9 mm"
core_dc_resistance = "0.0367 ohm/km"
operating_temperature = "65 degC"
insulation_inner_radius = "18.4 mm"
insulation_outer_radius = "36.4 mm"
insulation_permittivity = 2.5
sheath_inner_radius = "37.6 mm"
sheath_outer_radius = "38.4 mm"
sheath_material = "copper"
jacket_outer_radius = "42.4 mm"
jacket_permittivity = 2.3
depth = "1.2 m"
formation = "trefoil"
bonding = "both_ends"

[line]
length = "43 km"
sections = [
  { length = "13 km", order = ["A", "B", "C"], tower = "lattice" },
  { length = "13 km", order = ["C", "A", "B"], tower = "lattice" },
  { length = "14 km", order = ["B", "C", "A"], tower = "lattice" },
  { length = "3 km",  order = ["A", "B", "C"], cable = "xlpe" },
]

[tee]
distance = "17 km"
substation = "Linden Lane"
sections = [
  { length = "6 km", order = ["A", "B", "C"], tower = "lattice" },
  { length = "2.5 km", order = ["B", "C", "A"], cable = "xlpe" },
]

[relay]
end = "all"
ct_ratio = "600/1 A"
vt_ratio = "132000/110 V"

[reach_study]
shunt_capacitance = true

[sources.Harwick]
z1 = "1.5 + 12j ohm"
z0 = "2.0 + 20j ohm"

[sources.Ostmere]
z1 = "2.5 + 18j ohm"
z0 = "3.0 + 28j ohm"

[sources."Linden Lane"]
z1 = "4 + 30j ohm"
z0 = "5 + 40j ohm"

[load]
max_apparent_power = "120 MVA"
'''

BRANCH = '''sections = [
  { length = "6 km", order = ["A", "B", "C"], tower = "lattice" },
  { length = "2.5 km", order = ["B", "C", "A"], cable = "xlpe" },
]'''


def _loaded(text: str):
    from relayset.studies import pipeline

    return pipeline.load_bytes(text.encode(), "teedc.toml")


def _legs(text: str, shunt: bool = True):
    from relayset.studies.geometry import build_geometry
    from relayset.studies.parameters import compute_parameters
    from relayset.studies.teed import teed_line, teed_terminals

    study = _loaded(text).study
    geo = build_geometry(study)
    params = compute_parameters(geo)
    return study, geo, params, teed_line(study, geo, params, shunt, ""), teed_terminals(
        study, "")


def _chain_by_hand(z, y, length):
    """Chain matrix of one uniform section, exp([[0, Z l], [Y l, 0]]) (Paul, ch. 7)."""
    from scipy.linalg import expm

    n = z.shape[0]
    a = np.zeros((2 * n, 2 * n), dtype=complex)
    a[:n, n:] = z * length
    a[n:, :n] = y * length
    return expm(a)


def test_branch_of_an_overhead_and_a_cable_section_is_their_cascade():
    from relayset.inputs.cable import constructions
    from relayset.physics import transposition
    from relayset.physics.cable import cable_section_matrices

    study, geo, params, line, _ = _legs(CABLE_TOML)
    leg_t = line.legs[2]  # from Linden Lane to the tee: the cable first
    assert_allclose(leg_t.length_m, [2.5e3, 6e3], rtol=0, atol=1e-9)
    z_t, y_t = params.tower_matrices()
    k_lat = geo.tower_names.index("lattice")
    (_, (cab,), _) = constructions(study, ("xlpe",))
    z_c, y_c = cable_section_matrices(
        cab.design, cab.formation, cab.spacing_m, cab.depth_m, cab.bonding, 50.0, 100.0,
        cab.n_circuits, cab.circuit_spacing_m, cab.ecc)
    bca = [1, 2, 0]  # order B, C, A at the positions: phase p sits at position order.index(p)
    pos = [bca.index(p) for p in range(3)]
    z_cab = z_c[np.ix_(pos, pos)]
    y_cab = y_c[np.ix_(pos, pos)]
    assert_allclose(z_cab, transposition.to_phase_order(z_c, bca), rtol=1e-12, atol=0)
    # by hand: bus T -> cable -> overhead -> tee
    want = (_chain_by_hand(z_cab, y_cab, 2.5e3)
            @ _chain_by_hand(z_t[k_lat], y_t[k_lat], 6e3))
    got = (_chain_by_hand(leg_t.z_ohm_per_m[0], leg_t.y_s_per_m[0], leg_t.length_m[0])
           @ _chain_by_hand(leg_t.z_ohm_per_m[1], leg_t.y_s_per_m[1], leg_t.length_m[1]))
    assert_allclose(got, want, rtol=1e-10, atol=1e-12)
    # the cable's series impedance is a cable's, not the tower's (tens of times less X1)
    x1 = lambda z: (np.trace(z) / 3 - (z.sum() - np.trace(z)) / 6).imag  # noqa: E731
    assert x1(leg_t.z_ohm_per_m[0]) < 0.5 * x1(leg_t.z_ohm_per_m[1])


def test_branch_of_cable_sections_only():
    """A branch wholly in cable (a common city tap): the leg is the cable's sections."""
    text = CABLE_TOML.replace(BRANCH, '''sections = [
  { length = "1.5 km", order = ["A", "B", "C"], cable = "xlpe" },
  { length = "1.5 km", order = ["C", "A", "B"], cable = "xlpe" },
]''')
    _, _, _, line, _ = _legs(text)
    _, _, _, ref, _ = _legs(CABLE_TOML)
    leg_t = line.legs[2]
    assert_allclose(leg_t.length_m, [1.5e3, 1.5e3], rtol=0, atol=1e-9)
    # the A, B, C cable of the branch (last section from the tee) is the same cable as the
    # line's last section (A, B, C at Ostmere, first section of leg R)
    assert_allclose(leg_t.z_ohm_per_m[1], line.legs[1].z_ohm_per_m[0], rtol=1e-12, atol=0)
    assert_allclose(leg_t.y_s_per_m[1], line.legs[1].y_s_per_m[0], rtol=1e-12, atol=0)
    assert_allclose(line.legs[0].z_ohm_per_m, ref.legs[0].z_ohm_per_m, rtol=1e-12, atol=0)


@pytest.mark.parametrize("leg", ENDS)
def test_teed_line_with_cables_equals_nodal_reference(leg):
    _, _, _, line, terms = _legs(CABLE_TOML)
    emfs = tuple(V_NOM / math.sqrt(3) * np.exp(1j * np.radians(a)) for a in (8.0, 0.0, -4.0))
    m = np.array([0.0, 0.4, 0.95, 1.0])
    ftypes = ("AG", "BC", "CAG", "ABC")
    sw = solve_teed_sweep(line, terms, v_nominal_v=V_NOM, fault_leg=leg, fault_types=ftypes,
                          m=m, r_fault_ohm=[0.0, 6.0], emf_v=tuple(np.array([e]) for e in emfs))
    for fi, ft in enumerate(ftypes):
        for mi, mm in enumerate(m):
            for ri, rf in enumerate((0.0, 6.0)):
                ref, i_f = nodal(line, terms, emfs, leg, mm, ft, rf, 0.0)
                scale = np.max(np.abs(i_f))
                for end in ENDS:
                    assert_allclose(sw.v[end][fi, mi, ri, 0, 0], ref[end][0], rtol=1e-8,
                                    atol=1e-8 * V_NOM)
                    assert_allclose(sw.i[end][fi, mi, ri, 0, 0], ref[end][1], rtol=1e-8,
                                    atol=1e-8 * scale)


def test_tiny_branch_without_source_is_the_two_ended_line_with_its_cable():
    from relayset.studies.reach import build_source, line_cascade

    text = CABLE_TOML.replace(BRANCH, '''sections = [
  { length = "1 mm", order = ["A", "B", "C"], cable = "xlpe" },
]''').replace('[sources."Linden Lane"]\nz1 = "4 + 30j ohm"\nz0 = "5 + 40j ohm"\n', '')
    study, geo, params, line, terms = _legs(text)
    assert terms[2] is None
    full = line_cascade(geo, params, "actual_plan", True)
    assert full.z_ohm_per_m.shape[0] == 4  # the line's cable section is in the cascade
    tee = 17e3
    m_leg = np.array([0.0, 0.5, 1.0])
    for leg, d in (("S", tee), ("R", 43e3 - tee)):
        m_line = m_leg * d / 43e3 if leg == "S" else 1 - m_leg * d / 43e3
        sw = solve_teed_sweep(line, terms, v_nominal_v=V_NOM, fault_leg=leg,
                              fault_types=FAULT_TYPES, m=m_leg, r_fault_ohm=[0.0, 5.0])
        ref = solve_fault_sweep(full, build_source(study, "Harwick", ""),
                                build_source(study, "Ostmere", ""), v_nominal_v=V_NOM,
                                fault_types=FAULT_TYPES, m=m_line, r_fault_ohm=[0.0, 5.0])
        scale = np.max(np.abs(ref.i_fault))
        assert_allclose(sw.v["S"], ref.v_s, rtol=1e-7, atol=1e-7 * V_NOM)
        assert_allclose(sw.i["S"], ref.i_s, rtol=1e-7, atol=1e-7 * scale)
        assert_allclose(sw.i["R"], ref.i_r, rtol=1e-7, atol=1e-7 * scale)
        assert np.max(np.abs(sw.i["T"])) < 1e-6 * scale


def test_settings_of_a_teed_line_with_cables(tmp_path, capsys):
    path = tmp_path / "teedc.toml"
    path.write_text(CABLE_TOML, encoding="utf-8")
    out = tmp_path / "out.json"
    code = main(["settings", str(path), "--json", str(out)])
    err = capsys.readouterr().err
    assert code in (0, 1), err  # 1: failed checks, stated
    assert out.exists()


BAD = [
    ("unknown cable", ('cable = "xlpe" },\n]\n\n[relay]', 'cable = "xple" },\n]\n\n[relay]'),
     ["tee.sections[1].cable = \"xple\"", "names no cable"]),
    ("tower and cable", ('{ length = "2.5 km", order = ["B", "C", "A"], cable',
                         '{ length = "2.5 km", order = ["B", "C", "A"], tower = "lattice", '
                         'cable'),
     ["tee.sections[1].cable = \"xlpe\"", "either overhead or cable"]),
    ("circuit spacing on one circuit", ('bonding = "both_ends"',
                                        'bonding = "both_ends"\ncircuit_spacing = "1 m"'),
     ["cables.xlpe.circuit_spacing", "double-circuit"]),
]


@pytest.mark.parametrize("case", BAD, ids=[c[0] for c in BAD])
def test_bad_branch_cable_input_is_one_line_and_exit_2(tmp_path, capsys, case):
    _, (old, new), words = case
    text = CABLE_TOML
    if case[0] == "circuit spacing on one circuit":  # the cable on the branch only
        text = text.replace('  { length = "3 km",  order = ["A", "B", "C"], cable = "xlpe" },\n',
                            '').replace('length = "43 km"', 'length = "40 km"')
    assert old in text
    path = tmp_path / "bad.toml"
    path.write_text(text.replace(old, new, 1), encoding="utf-8")
    out_json = tmp_path / "out.json"
    code = main(["params", str(path), "--json", str(out_json)])
    err = capsys.readouterr().err.strip()
    assert code == 2 and len(err.splitlines()) == 1, err
    assert "Traceback" not in err and str(path) in err
    for w in words:
        assert w in err, err
    assert not out_json.exists()


def test_branch_cable_without_towers_is_refused(tmp_path, capsys):
    from test_teed_study import TEED_TOML

    text = TEED_TOML.replace('{ length = "7 km", order = ["B", "C", "A"] }',
                             '{ length = "7 km", order = ["B", "C", "A"], cable = "x" }')
    assert text != TEED_TOML
    path = tmp_path / "bad.toml"
    path.write_text(text, encoding="utf-8")
    code = main(["params", str(path)])
    err = capsys.readouterr().err.strip()
    assert code == 2 and len(err.splitlines()) == 1, err
    assert "cable" in err


# --- Task: a tee on a double-circuit line (circuit 1 tapped, circuit 2 untapped) ----------

def _double_teed(shunt: bool, coupled: bool = True):
    """A double-circuit line S-R (invented matrices of tests/test_network.py, the phases
    of circuit 1 rotated section by section) tapped on circuit 1 at 32 km by a 14 km
    single-circuit branch."""
    from test_network import C_12_NF_KM, C_ABC_NF_KM, OMEGA, Z_12_KM, Z_ABC_KM

    from relayset.physics.network import LineCascade
    from relayset.physics.teed import TeedLine

    k = 1.0 if coupled else 0.0
    perms = [[0, 1, 2], [1, 2, 0], [2, 0, 1]]
    zs, ys = [], []
    for p in perms:
        q = [*p, 3, 4, 5]
        z = np.block([[Z_ABC_KM, k * Z_12_KM], [k * Z_12_KM.T, Z_ABC_KM[::-1, ::-1]]]) / 1e3
        c = np.block([[C_ABC_NF_KM, k * C_12_NF_KM],
                      [k * C_12_NF_KM.T, C_ABC_NF_KM[::-1, ::-1]]])
        zs.append(z[np.ix_(q, q)])
        ys.append(1j * OMEGA * c[np.ix_(q, q)] * 1e-12)
    main = LineCascade(np.stack(zs), np.array([20e3, 25e3, 30e3]),
                       np.stack(ys) if shunt else None)
    zb = Z_ABC_KM[np.ix_(perms[2], perms[2])] / 1e3
    yb = 1j * OMEGA * C_ABC_NF_KM[np.ix_(perms[2], perms[2])] * 1e-12
    branch = LineCascade(np.stack([zb, Z_ABC_KM / 1e3]), np.array([6e3, 8e3]),
                         np.stack([yb, 1j * OMEGA * C_ABC_NF_KM * 1e-12]) if shunt else None)
    return main, branch, TeedLine.from_line(main, 32e3, branch)


def _dc_sources():
    from relayset.physics.network import Source

    return (Source(1.2 + 12j, 2.0 + 18j), Source(2.5 + 20j, 4.0 + 35j),
            Source(4.0 + 30j, 6.0 + 40j))


DC_EMFS = tuple(V_NOM / math.sqrt(3) * np.exp(1j * np.radians(a)) for a in (10.0, 0.0, -5.0))


def _legs_of(line):
    return tuple((leg.z_ohm_per_m, leg.y_s_per_m, leg.length_m) for leg in line.legs)


DC_CASES = [(s, st) for s in (False, True) for st in ("in_service", "earthed", "isolated")]


@pytest.mark.parametrize(("shunt", "state"), DC_CASES, ids=[f"{s}-{t}" for s, t in DC_CASES])
@pytest.mark.parametrize("leg", ENDS)
def test_double_circuit_tee_equals_nodal_reference(shunt, state, leg):
    """Independent check: tests/reference_solver.solve_teed_single (modified nodal
    analysis, Ho, Ruehli and Brennan 1975; segment admittances by eigendecomposition),
    sharing no chain matrix, terminal equation or superposition with the solver."""
    from reference_solver import solve_teed_single

    _, _, line = _double_teed(shunt)
    terms = _dc_sources()
    m = np.array([0.0, 0.45, 1.0])
    ftypes = ("AG", "BC", "BCG", "ABC")
    rf, rp = np.array([0.0, 8.0]), np.array([0.0, 1.5])
    sw = solve_teed_sweep(line, terms, v_nominal_v=V_NOM, fault_leg=leg, fault_types=ftypes,
                          m=m, r_fault_ohm=rf, r_phase_ohm=rp, parallel_state=state,
                          emf_v=tuple(np.array([e]) for e in DC_EMFS), parallel_currents=True)
    for fi, ft in enumerate(ftypes):
        for mi, mm in enumerate(m):
            for ri in range(2):
                ref = solve_teed_single(_legs_of(line), terms, DC_EMFS, fault_leg=leg,
                                        m=float(mm), fault_type=ft, r_fault_ohm=rf[ri],
                                        r_phase_ohm=rp[ri], parallel_state=state)
                scale = np.max(np.abs(ref.i_fault))
                for end in ENDS:
                    assert_allclose(sw.v[end][fi, mi, ri, 0, 0], ref.v[end], rtol=1e-8,
                                    atol=1e-8 * V_NOM)
                    assert_allclose(sw.i[end][fi, mi, ri, 0, 0], ref.i[end], rtol=1e-8,
                                    atol=1e-8 * scale)
                    assert_allclose(sw.i_parallel[end][fi, mi, ri, 0, 0], ref.i_parallel[end],
                                    rtol=1e-8, atol=1e-8 * scale)
                assert_allclose(sw.i_fault[fi, mi, ri, 0, 0], ref.i_fault, rtol=1e-8,
                                atol=1e-8 * scale)


@pytest.mark.parametrize("leg", ["S", "R"])
def test_fault_on_the_untapped_circuit_and_a_transformer_equal_nodal_reference(leg):
    """Circuit 2 faulted (in service), and a grounded-star transformer at T with an open
    end at R (prefault and fault), against the nodal reference."""
    from relayset.physics.teed import GroundedTransformer

    from reference_solver import solve_teed_single

    _, _, line = _double_teed(True)
    src = _dc_sources()
    for terms, tz, fc in (((src[0], src[1], src[2]), {}, 2),
                          ((src[0], None, GroundedTransformer(3.0 + 25j)),
                           {"T": 3.0 + 25j}, 1),
                          ((GroundedTransformer(2.0 + 20j), src[1], src[2]),
                           {"S": 2.0 + 20j}, 1)):
        sw = solve_teed_sweep(line, terms, v_nominal_v=V_NOM, fault_leg=leg,
                              fault_types=("AG", "CAG"), m=np.array([0.3]), r_fault_ohm=[2.0],
                              fault_circuit=fc, emf_v=tuple(np.array([e]) for e in DC_EMFS),
                              parallel_currents=True)
        for fi, ft in enumerate(("AG", "CAG")):
            ref = solve_teed_single(_legs_of(line), terms, DC_EMFS, fault_leg=leg, m=0.3,
                                    fault_type=ft, r_fault_ohm=2.0, fault_circuit=fc,
                                    transformer_z0=tz)
            scale = np.max(np.abs(ref.i_fault))
            for end in ENDS:
                assert_allclose(sw.v[end][fi, 0, 0, 0, 0], ref.v[end], rtol=1e-8,
                                atol=1e-8 * V_NOM)
                assert_allclose(sw.i[end][fi, 0, 0, 0, 0], ref.i[end], rtol=1e-8,
                                atol=1e-8 * scale)
                assert_allclose(sw.i_parallel[end][fi, 0, 0, 0, 0], ref.i_parallel[end],
                                rtol=1e-8, atol=1e-8 * scale)


@pytest.mark.parametrize("state", ["earthed", "isolated"])
@pytest.mark.parametrize("shunt", [False, True])
def test_uncoupled_parallel_circuit_out_is_the_single_circuit(state, shunt):
    """Identity: circuit 2 out of service and not coupled (far away) changes nothing on
    circuit 1 (Kirchhoff: it carries no current into circuit 1's network)."""
    from relayset.physics.network import LineCascade
    from relayset.physics.teed import TeedLine

    main, branch, line = _double_teed(shunt, coupled=False)
    single = TeedLine.from_line(
        LineCascade(main.z_ohm_per_m[:, :3, :3], main.length_m,
                    None if main.y_s_per_m is None else main.y_s_per_m[:, :3, :3]),
        32e3, branch)
    terms = _dc_sources()
    kw = dict(v_nominal_v=V_NOM, fault_types=FAULT_TYPES, m=np.array([0.0, 0.6, 1.0]),
              r_fault_ohm=[0.0, 4.0], emf_v=tuple(np.array([e]) for e in DC_EMFS))
    for leg in ENDS:
        a = solve_teed_sweep(line, terms, fault_leg=leg, parallel_state=state, **kw)
        b = solve_teed_sweep(single, terms, fault_leg=leg, **kw)
        scale = np.max(np.abs(b.i_fault))
        for end in ENDS:
            assert_allclose(a.v[end], b.v[end], rtol=1e-9, atol=1e-9 * V_NOM)
            assert_allclose(a.i[end], b.i[end], rtol=1e-9, atol=1e-9 * scale)


def test_coupled_parallel_circuit_isolated_series_only_is_the_single_circuit():
    """Identity: series-only, circuit 2 isolated carries no current, so its mutual
    coupling induces nothing on circuit 1 (Z I with I2 = 0)."""
    from relayset.physics.network import LineCascade
    from relayset.physics.teed import TeedLine

    main, branch, line = _double_teed(False)
    single = TeedLine.from_line(LineCascade(main.z_ohm_per_m[:, :3, :3], main.length_m),
                                32e3, branch)
    kw = dict(v_nominal_v=V_NOM, fault_types=("AG", "BC"), m=np.array([0.5]),
              r_fault_ohm=[0.0], emf_v=tuple(np.array([e]) for e in DC_EMFS))
    a = solve_teed_sweep(line, _dc_sources(), fault_leg="R", parallel_state="isolated", **kw)
    b = solve_teed_sweep(single, _dc_sources(), fault_leg="R", **kw)
    assert_allclose(a.i["S"], b.i["S"], rtol=1e-10, atol=1e-6)
    # and in service it does matter: the parallel path carries current
    c = solve_teed_sweep(line, _dc_sources(), fault_leg="R", parallel_currents=True, **kw)
    assert np.max(np.abs(c.i_parallel["S"])) > 10.0
    d = solve_teed_sweep(line, _dc_sources(), fault_leg="R", **kw)  # the same without them
    assert d.i_parallel is None
    assert_allclose(d.i["S"], c.i["S"], rtol=1e-12, atol=0)
    assert np.max(np.abs(c.i["S"] - b.i["S"])) > 10.0


def test_double_circuit_tee_bad_input():
    from relayset.errors import InputError

    _, _, line = _double_teed(False)
    with pytest.raises(InputError, match="faulted circuit"):
        solve_teed_sweep(line, _dc_sources(), v_nominal_v=V_NOM, fault_leg="T",
                         fault_types=["AG"], m=[0.5], r_fault_ohm=[0.0], fault_circuit=2)
    with pytest.raises(InputError, match="parallel circuit state"):
        solve_teed_sweep(line, _dc_sources(), v_nominal_v=V_NOM, fault_leg="S",
                         fault_types=["AG"], m=[0.5], r_fault_ohm=[0.0],
                         parallel_state="gone")


def _double_study_text() -> str:
    """tests/test_teed_study.py's teed line with a second circuit above the first on the
    same towers (untapped), the branch on circuit 1 alone."""
    from test_teed_study import TEED_TOML

    text = TEED_TOML.replace('[[shield_wires]]', '''[[circuits]]
name = "2"
positions = [
  { name = "l2", x = "-5.0 m", height = "31 m", sag = "6 m", conductor = "phase" },
  { name = "m2", x = "0.0 m",  height = "31 m", sag = "6 m", conductor = "phase" },
  { name = "r2", x = "5.0 m",  height = "31 m", sag = "6 m", conductor = "phase" },
]

[[shield_wires]]''').replace('height = "28 m"', 'height = "38 m"')
    line = text[text.index("[line]"):text.index("[tee]")]
    new = line
    for o in ('["A", "B", "C"]', '["C", "A", "B"]', '["B", "C", "A"]'):
        new = new.replace(f"order = {o} }}", f'order = {{ "1" = {o}, "2" = {o} }} }}')
    return text.replace(line, new)


def _single_study_text() -> str:
    """The same line without circuit 2 (the shield wire as high as above)."""
    from test_teed_study import TEED_TOML

    return TEED_TOML.replace('height = "28 m"', 'height = "38 m"')


def test_double_circuit_study_legs_and_the_absent_parallel_circuit():
    """Study level: the legs from the ends carry six conductors and the branch three; the
    circuit-1 blocks and the branch are those of the same line without circuit 2 (Kron
    reduction keeps a phase block whatever other phase wires there are; the branch has
    no circuit 2), so with circuit 2 isolated and series-only (no current in it, so no
    coupling) the teed solution equals the single-circuit one."""
    _, _, _, dline, dterms = _legs(_double_study_text(), shunt=False)
    _, _, _, sline, sterms = _legs(_single_study_text(), shunt=False)
    assert [leg.n_conductors for leg in dline.legs] == [6, 6, 3]
    assert [leg.n_conductors for leg in sline.legs] == [3, 3, 3]
    for d, s in zip(dline.legs[:2], sline.legs[:2], strict=True):
        assert_allclose(d.z_ohm_per_m[:, :3, :3], s.z_ohm_per_m, rtol=1e-12, atol=0)
        assert_allclose(d.length_m, s.length_m, rtol=1e-12, atol=0)
    assert_allclose(dline.legs[2].z_ohm_per_m, sline.legs[2].z_ohm_per_m, rtol=1e-12, atol=0)
    kw = dict(v_nominal_v=V_NOM, fault_types=FAULT_TYPES, m=np.array([0.0, 0.5, 1.0]),
              r_fault_ohm=[0.0, 5.0])
    for leg in ENDS:
        a = solve_teed_sweep(dline, dterms, fault_leg=leg, parallel_state="isolated", **kw)
        b = solve_teed_sweep(sline, sterms, fault_leg=leg, **kw)
        scale = np.max(np.abs(b.i_fault))
        for end in ENDS:
            assert_allclose(a.i[end], b.i[end], rtol=1e-9, atol=1e-9 * scale)
            assert_allclose(a.v[end], b.v[end], rtol=1e-9, atol=1e-9 * V_NOM)


@pytest.mark.parametrize("state", ["in_service", "earthed", "isolated"])
def test_double_circuit_study_equals_nodal_reference(state):
    from reference_solver import solve_teed_single

    _, _, _, line, terms = _legs(_double_study_text(), shunt=True)
    emfs = tuple(V_NOM / math.sqrt(3) * np.exp(1j * np.radians(a)) for a in (6.0, 0.0, -3.0))
    for leg in ENDS:
        sw = solve_teed_sweep(line, terms, v_nominal_v=V_NOM, fault_leg=leg,
                              fault_types=("AG", "BC"), m=np.array([0.7]),
                              r_fault_ohm=[3.0], parallel_state=state,
                              emf_v=tuple(np.array([e]) for e in emfs))
        for fi, ft in enumerate(("AG", "BC")):
            ref = solve_teed_single(_legs_of(line), terms, emfs, fault_leg=leg, m=0.7,
                                    fault_type=ft, r_fault_ohm=3.0, parallel_state=state)
            scale = np.max(np.abs(ref.i_fault))
            for end in ENDS:
                assert_allclose(sw.i[end][fi, 0, 0, 0, 0], ref.i[end], rtol=1e-8,
                                atol=1e-8 * scale)
                assert_allclose(sw.v[end][fi, 0, 0, 0, 0], ref.v[end], rtol=1e-8,
                                atol=1e-8 * V_NOM)


def test_double_circuit_teed_settings_cover_every_parallel_state(monkeypatch):
    from test_teed_study import _run

    import relayset.studies.teed as st
    import relayset.studies.verification.teed as vt

    solved = {"reach": set(), "verification": set()}

    currents = set()

    def spy(where, real):
        def solve(*a, **kw):
            solved[where].add(kw.get("parallel_state", "in_service"))
            currents.add(kw.get("parallel_currents", False))
            return real(*a, **kw)
        return solve

    monkeypatch.setattr(st, "solve_teed_sweep", spy("reach", st.solve_teed_sweep))
    monkeypatch.setattr(vt, "solve_teed_sweep", spy("verification", vt.solve_teed_sweep))
    res = _run(_double_study_text())
    assert solved["reach"] == solved["verification"] == {"in_service", "earthed", "isolated"}
    assert currents == {True}  # mutual compensation (the default): circuit 2's currents
    labels = [a.min_case for e in res.ends for a in e.apparent]
    labels += [a.max_case for e in res.ends for a in e.apparent]
    assert all("parallel circuit" in lab for lab in labels)
    # zone 1 short of the nearest remote terminal over every state: at least as short as
    # with the parallel circuit in service alone
    checks = {c.check_id: c for e in res.ends for c in e.verification_checks}
    assert "zone1_no_remote_terminal_trip" in checks
    text = " ".join(c.detail for e in res.ends for c in e.verification_checks)
    assert "parallel circuit" in text
    # the relays' mutual compensation (on by default) changes what they measure and how
    # the zones are judged; off, the same study measures with k0 alone
    monkeypatch.undo()
    off = _run(_double_study_text().replace("[load]", "[reach_study]\nmutual_compensation = "
                                            "false\n\n[load]"))
    text_off = " ".join(c.detail for e in off.ends for c in e.verification_checks)
    assert text_off != text
    assert any(a.startswith("Double-circuit line: circuit 1 is tapped") and "k0m" in a
               for a in res.assumptions)
    assert any("k0 only" in a for a in off.assumptions)
    assert all("mutual" not in a.min_case + a.max_case for e in off.ends for a in e.apparent)


def test_branch_order_of_the_untapped_circuit_is_refused(tmp_path, capsys):
    text = _double_study_text().replace(
        '{ length = "7 km", order = ["B", "C", "A"] }',
        '{ length = "7 km", order = { "1" = ["B", "C", "A"], "2" = ["A", "B", "C"] } }')
    path = tmp_path / "bad.toml"
    path.write_text(text, encoding="utf-8")
    out = tmp_path / "o.json"
    code = main(["params", str(path), "--json", str(out)])
    err = capsys.readouterr().err.strip()
    assert code == 2 and len(err.splitlines()) == 1, err
    assert "tee.sections[1].order.2" in err and "tapped circuit" in err, err
    assert not out.exists()


def test_mutual_compensation_of_the_relays_on_a_teed_double_circuit():
    """With the parallel circuit in service the relays at S and R also measure with k0m
    (compensated ground loop V / (I_p + k0 I_res + k0m I_res,parallel), the standard
    relay equation, e.g. Ziegler, Numerical Distance Protection, 4th ed., 2011, ch. 3);
    out of service, and at the third terminal (no parallel circuit there), k0 only."""
    from relayset.studies.teed import teed_loop_sets

    _, _, _, line, terms = _legs(_double_study_text(), shunt=False)
    k0, k0m = 0.6 + 0.05j, 0.4 - 0.02j
    sws = [(ps, solve_teed_sweep(line, terms, v_nominal_v=V_NOM, fault_leg="R",
                                 fault_types=("AG",), m=[0.0], r_fault_ohm=[0.0],
                                 parallel_state=ps, parallel_currents=True))
           for ps in ("in_service", "earthed")]
    sets = teed_loop_sets(sws, "S", k0, k0m)
    assert [(ps, how) for ps, how, _ in sets] == [
        ("in_service", ""), ("in_service", ", mutual compensation"), ("earthed", "")]
    sw = sws[0][1]
    v, i, ip = sw.v["S"][0, 0, 0, 0, 0], sw.i["S"][0, 0, 0, 0, 0], sw.i_parallel["S"][0, 0, 0,
                                                                                     0, 0]
    want = v[0] / (i[0] + k0 * i.sum() + k0m * ip.sum())
    assert abs(ip.sum()) > 10.0
    assert_allclose(sets[1][2]["AG"][0, 0, 0, 0, 0], want, rtol=1e-12, atol=0)
    assert_allclose(sets[0][2]["AG"][0, 0, 0, 0, 0], v[0] / (i[0] + k0 * i.sum()), rtol=1e-12,
                    atol=0)
    assert len(teed_loop_sets(sws, "T", k0, k0m)) == 2  # no parallel circuit at T
    assert len(teed_loop_sets(sws, "S", k0, None)) == 2  # relays without k0m


def _double_cable_text() -> str:
    """CABLE_TOML with a second circuit on the lattice towers and in the line's cable
    trench (1 m apart); the branch (overhead and cable) carries circuit 1."""
    t = CABLE_TOML.replace('''[[circuits]]
name = "1"
phase_labels = ["A", "B", "C"]
''', '''[[circuits]]
name = "1"
phase_labels = ["A", "B", "C"]

[[circuits]]
name = "2"
''').replace('conductor = "phase" },\n]\nshield', '''conductor = "phase" },
]
positions."2" = [
  { name = "l2", x = "-5.0 m", height = "30 m", sag = "6 m", conductor = "phase" },
  { name = "m2", x = "0.0 m",  height = "30 m", sag = "6 m", conductor = "phase" },
  { name = "r2", x = "5.0 m",  height = "30 m", sag = "6 m", conductor = "phase" },
]
shield''').replace('height = "28 m", sag = "5 m"', 'height = "37 m", sag = "5 m"').replace(
        'bonding = "both_ends"', 'bonding = "both_ends"\ncircuit_spacing = "1 m"')
    line = t[t.index("[line]"):t.index("[tee]")]
    new = line
    for o in ('["A", "B", "C"]', '["C", "A", "B"]', '["B", "C", "A"]'):
        new = new.replace(f"order = {o},", f'order = {{ "1" = {o}, "2" = {o} }},')
    return t.replace(line, new)


@pytest.mark.parametrize("state", ["in_service", "earthed"])
def test_double_circuit_with_cables_equals_nodal_reference(state):
    """Cable sections of both circuits on the line (6 x 6, sheaths eliminated) and of
    circuit 1 on the branch, against the nodal reference."""
    from reference_solver import solve_teed_single

    _, _, _, line, terms = _legs(_double_cable_text(), shunt=True)
    assert [leg.n_conductors for leg in line.legs] == [6, 6, 3]
    assert line.legs[1].length_m[0] == pytest.approx(3e3)  # Ostmere's cable first
    emfs = tuple(V_NOM / math.sqrt(3) * np.exp(1j * np.radians(a)) for a in (6.0, 0.0, -3.0))
    for leg, mm in (("R", 0.05), ("T", 0.1), ("S", 0.8)):
        sw = solve_teed_sweep(line, terms, v_nominal_v=V_NOM, fault_leg=leg,
                              fault_types=("AG", "ABC"), m=np.array([mm]), r_fault_ohm=[1.0],
                              parallel_state=state, parallel_currents=True,
                              emf_v=tuple(np.array([e]) for e in emfs))
        for fi, ft in enumerate(("AG", "ABC")):
            ref = solve_teed_single(_legs_of(line), terms, emfs, fault_leg=leg, m=mm,
                                    fault_type=ft, r_fault_ohm=1.0, parallel_state=state)
            scale = np.max(np.abs(ref.i_fault))
            for end in ENDS:
                assert_allclose(sw.i[end][fi, 0, 0, 0, 0], ref.i[end], rtol=1e-8,
                                atol=1e-8 * scale)
                assert_allclose(sw.i_parallel[end][fi, 0, 0, 0, 0], ref.i_parallel[end],
                                rtol=1e-8, atol=1e-8 * scale)
                assert_allclose(sw.v[end][fi, 0, 0, 0, 0], ref.v[end], rtol=1e-8,
                                atol=1e-8 * V_NOM)


# --- Series elements (capacitor banks) in the legs: the solver only (studies refuse them)

def _banked(shunt: bool, double: bool):
    """The invented teed line with a bank at bus S (relay VT on its line side) and one
    mid-way on the R side: -j 12 ohm and -j 9 ohm in circuit 1's phases."""
    from relayset.physics.network import LineCascade, SeriesElement
    from relayset.physics.teed import TeedLine

    main, branch, _ = _double_teed(shunt)
    n = 6 if double else 3
    if not double:
        main = LineCascade(main.z_ohm_per_m[:, :3, :3], main.length_m,
                           None if main.y_s_per_m is None else main.y_s_per_m[:, :3, :3])

    def bank(x_c):
        z = np.zeros((n, n), dtype=complex)
        z[:3, :3] = -1j * x_c * np.eye(3)
        return z

    total = 75e3
    main = LineCascade(main.z_ohm_per_m, main.length_m, main.y_s_per_m,
                       (SeriesElement(0.0, bank(12.0), True),
                        SeriesElement(55e3 / total, bank(9.0))))
    line = TeedLine.from_line(main, 32e3, branch)
    # per leg: (distance from its bus [m], Z_e, VT on the line side)
    where = (((0.0, bank(12.0), True),), ((20e3, bank(9.0), False),), ())
    return line, where


BANK_CASES = [(False, "in_service"), (True, "in_service"), (True, "earthed"),
              (True, "isolated")]


@pytest.mark.parametrize(("double", "state"), BANK_CASES,
                         ids=[f"{d}-{s}" for d, s in BANK_CASES])
@pytest.mark.parametrize("leg", ENDS)
def test_series_banks_in_the_legs_equal_nodal_reference(double, state, leg):
    """Lumped banks in the legs (chain matrix [[1, Z_e], [0, 1]]) against the nodal
    reference's series branches; faults at the bus behind a bank (between the CT and the
    bank), just beyond it and at the mid-line bank's place (its bus side)."""
    from reference_solver import solve_teed_single

    line, where = _banked(True, double)
    assert [len(leg_.elements) for leg_ in line.legs] == [1, 1, 0]
    assert line.legs[1].elements[0].at == pytest.approx(20e3 / 43e3)
    terms = _dc_sources()
    m = {"S": [0.0, 1e-6, 0.5], "R": [0.0, 20e3 / 43e3, 0.9], "T": [0.3, 1.0]}[leg]
    sw = solve_teed_sweep(line, terms, v_nominal_v=V_NOM, fault_leg=leg,
                          fault_types=("AG", "BC", "ABC"), m=np.array(m), r_fault_ohm=[0.5],
                          parallel_state=state if double else "in_service",
                          parallel_currents=True, emf_v=tuple(np.array([e]) for e in DC_EMFS))
    for fi, ft in enumerate(("AG", "BC", "ABC")):
        for mi, mm in enumerate(m):
            ref = solve_teed_single(_legs_of(line), terms, DC_EMFS, fault_leg=leg, m=mm,
                                    fault_type=ft, r_fault_ohm=0.5,
                                    parallel_state=state if double else "in_service",
                                    elements=where)
            scale = np.max(np.abs(ref.i_fault))
            for end in ENDS:
                assert_allclose(sw.v[end][fi, mi, 0, 0, 0], ref.v[end], rtol=1e-8,
                                atol=1e-8 * V_NOM)
                assert_allclose(sw.i[end][fi, mi, 0, 0, 0], ref.i[end], rtol=1e-8,
                                atol=1e-8 * scale)
                assert_allclose(sw.i_parallel[end][fi, mi, 0, 0, 0], ref.i_parallel[end],
                                rtol=1e-8, atol=1e-8 * scale)


def test_a_bank_at_the_tee_is_refused():
    from relayset.errors import InputError
    from relayset.physics.network import LineCascade, SeriesElement
    from relayset.physics.teed import TeedLine

    main, branch, _ = _double_teed(False)
    bad = LineCascade(main.z_ohm_per_m, main.length_m, None,
                      (SeriesElement(32e3 / 75e3, np.zeros((6, 6))),))
    with pytest.raises(InputError, match="at the tee"):
        TeedLine.from_line(bad, 32e3, branch)


def test_teed_double_circuit_ends_are_issued_with_the_k0m_they_measure_with():
    """The relays at the double circuit's two ends are verified measuring with k0m (above):
    their settings carry that k0m (the two-ended basis, Z0M / (3 Z1)) with the mutual
    compensation supervision, the third terminal's relay none; without
    ``reach_study.mutual_compensation`` no end has it."""
    from relayset.studies import pipeline

    text = _double_study_text()
    res = pipeline.run_loaded(_loaded(text), settings=True)
    ends = {e.end: e.settings for e in res.teed.ends}
    s, r, t = res.teed.buses
    assert res.relay.k0m_set is not None
    for b in (s, r):
        assert ends[b].k0m == res.relay.k0m_set
        assert ends[b].mutual_supervision is not None
    assert ends[t].k0m is None and ends[t].mutual_supervision is None
    off = text.replace("[reach_study]", "[reach_study]\nmutual_compensation = false", 1)
    if off == text:
        off = text + "\n[reach_study]\nmutual_compensation = false\n"
    res_off = pipeline.run_loaded(_loaded(off), settings=True)
    assert all(e.settings.k0m is None for e in res_off.teed.ends)
