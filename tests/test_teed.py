"""Tests of the three-terminal (teed) line solver (relayset.physics.teed).

Checks: agreement with an independent per-case nodal solution built here (nodal admittance
of each uniform segment from tests/reference_solver.py, sources as Norton equivalents,
modified nodal analysis for the fault [Ho, Ruehli and Brennan 1975]) which shares no chain
matrix, terminal equation or superposition step with the batched solver; and the identity
that a tee leg of (near) zero length to an open end gives the two-ended solver's result
(Kirchhoff's laws: an unloaded stub of no length carries no current). Line data are the
invented ones of tests/test_network.py.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import pytest
from numpy.testing import assert_allclose
from test_network import C_ABC_NF_KM, Z_ABC_KM

from relayset.errors import InputError
from relayset.physics.characteristic import Mho
from relayset.physics.faults import FAULT_TYPES, fault_constraints
from relayset.physics.network import LineCascade, Source, solve_fault_sweep
from relayset.physics.sequence import balanced_phase_matrix, fortescue_matrix
from relayset.physics.teed import (
    ENDS,
    GroundedTransformer,
    TeedLine,
    solve_teed_sweep,
)

from reference_solver import _segment_nodal

V_NOM = 132e3
OMEGA = 2 * math.pi * 50
PERMS = [[0, 1, 2], [1, 2, 0], [2, 0, 1]]


def cascade(lengths, shunt: bool, first: int = 0) -> LineCascade:
    """Sections with rotated phase order (untransposed parts of a transposed line)."""
    z = Z_ABC_KM / 1e3
    perms = [PERMS[(first + k) % 3] for k in range(len(lengths))]
    zs = np.stack([z[np.ix_(p, p)] for p in perms])
    ys = None
    if shunt:
        y = 1j * OMEGA * C_ABC_NF_KM * 1e-12
        ys = np.stack([y[np.ix_(p, p)] for p in perms])
    return LineCascade(zs, np.asarray(lengths, dtype=float), ys)


def teed(shunt: bool) -> TeedLine:
    return TeedLine((cascade([30e3, 12e3], shunt), cascade([25e3, 20e3], shunt, 1),
                     cascade([18e3], shunt, 2)))


SOURCES = (Source(1.2 + 12j, 2.0 + 18j), Source(2.5 + 20j, 4.0 + 35j),
           Source(4.0 + 30j, 6.0 + 40j))
EMFS = tuple(V_NOM / math.sqrt(3) * np.exp(1j * np.radians(a)) for a in (10.0, 0.0, -5.0))


def nodal(line: TeedLine, terms, emf, fault_leg: str | None, m: float, fault_type: str,
          rf: float, rp: float, z_branch=None):
    """Independent per-case nodal solution: bus voltages and currents into each leg."""
    n = 3
    base = {}
    idx = 3  # nodes 0-2: the tee
    positions = []
    for k, leg in enumerate(line.legs):
        edges = list(np.concatenate([[0.0], np.cumsum(leg.length_m)]))
        if fault_leg == ENDS[k]:
            x = m * edges[-1]
            if all(abs(x - e) > 1e-9 for e in edges):
                edges = sorted([*edges, x])
        positions.append(edges)
        for j in range(len(edges) - 1):
            base[k, j] = idx
            idx += n
        base[k, len(edges) - 1] = 0
    if z_branch is not None:  # three nodes at the branch's far end, where the fault sits
        far = list(range(idx, idx + 3))
        idx += 3
    n_nodes = idx
    extra = 3 if fault_leg else 0
    mat = np.zeros((n_nodes + extra, n_nodes + extra), dtype=complex)
    rhs = np.zeros(n_nodes + extra, dtype=complex)
    for k, leg in enumerate(line.legs):
        sec_edges = np.concatenate([[0.0], np.cumsum(leg.length_m)])
        pos = positions[k]
        for j in range(len(pos) - 1):
            sec = int(np.searchsorted(sec_edges, pos[j] + 1e-9, side="right") - 1)
            yy = _segment_nodal(leg.z_ohm_per_m[sec],
                                None if leg.y_s_per_m is None else leg.y_s_per_m[sec],
                                pos[j + 1] - pos[j])
            ids = [base[k, j] + c for c in range(n)] + [base[k, j + 1] + c for c in range(n)]
            mat[np.ix_(ids, ids)] += yy
        bus = [base[k, 0] + c for c in range(3)]
        term = terms[k]
        if isinstance(term, Source):  # Norton equivalent of the Thevenin source
            ys = np.linalg.inv(term.phase_matrix())
            mat[np.ix_(bus, bus)] += ys
            rhs[bus] += ys @ (emf[k] * fortescue_matrix()[:, 1])
        elif isinstance(term, GroundedTransformer):  # admittance P0 / Z0 to ground
            mat[np.ix_(bus, bus)] += np.full((3, 3), 1 / 3) / term.z0_ohm
    if fault_leg:
        k = ENDS.index(fault_leg)
        j = int(np.argmin(np.abs(np.array(positions[k]) - m * positions[k][-1])))
        fn = [base[k, j] + c for c in range(3)]
        if z_branch is not None:
            yb = np.linalg.inv(z_branch)
            ids = fn + far
            mat[np.ix_(ids, ids)] += np.block([[yb, -yb], [-yb, yb]])
            fn = far
        p_v, p_i = fault_constraints(fault_type, rf, rp)
        cols = list(range(n_nodes, n_nodes + 3))
        for c in range(3):
            mat[fn[c], cols[c]] += 1.0  # fault current leaves the node
        mat[np.ix_(cols, fn)] = p_v
        mat[np.ix_(cols, cols)] = p_i
    sol = np.linalg.solve(mat, rhs)
    out = {}
    for k in range(3):  # the relay current is the terminal's (a fault at m = 0 lies on
        v_bus = sol[[base[k, 0] + c for c in range(3)]]  # the line side of the CT)
        term = terms[k]
        if isinstance(term, Source):
            i_bus = np.linalg.solve(term.phase_matrix(),
                                    emf[k] * fortescue_matrix()[:, 1] - v_bus)
        elif isinstance(term, GroundedTransformer):
            i_bus = -np.full((3, 3), 1 / 3) @ v_bus / term.z0_ohm
        else:
            i_bus = np.zeros(3, dtype=complex)
        out[ENDS[k]] = (v_bus, i_bus)
    return out, (sol[n_nodes:] if fault_leg else None)


@pytest.mark.parametrize("shunt", [False, True])
@pytest.mark.parametrize("leg", ENDS)
def test_teed_sweep_equals_nodal_reference(shunt, leg):
    line = teed(shunt)
    m = np.array([0.0, 0.37, 0.5, 1.0])
    ftypes = ("AG", "BC", "CAG", "ABC")
    rf, rp = np.array([0.0, 7.5]), np.array([0.0, 2.0])
    sw = solve_teed_sweep(line, SOURCES, v_nominal_v=V_NOM, fault_leg=leg,
                          fault_types=ftypes, m=m, r_fault_ohm=rf, r_phase_ohm=rp,
                          emf_v=tuple(np.array([e]) for e in EMFS))
    for fi, ft in enumerate(ftypes):
        for mi, mm in enumerate(m):
            for ri in range(2):
                ref, i_f = nodal(line, SOURCES, EMFS, leg, mm, ft, rf[ri], rp[ri])
                for end in ENDS:
                    v_ref, i_ref = ref[end]
                    # tight: both are exact network solutions, differing by rounding only
                    assert_allclose(sw.v[end][fi, mi, ri, 0, 0], v_ref, rtol=1e-8,
                                    atol=1e-8 * V_NOM)
                    assert_allclose(sw.i[end][fi, mi, ri, 0, 0], i_ref, rtol=1e-8,
                                    atol=1e-8 * np.max(np.abs(i_f)))
                assert_allclose(sw.i_fault[fi, mi, ri, 0, 0], i_f, rtol=1e-8,
                                atol=1e-8 * np.max(np.abs(i_f)))


def test_prefault_and_terminal_kinds_equal_nodal_reference():
    """A grounded-star transformer at T and an open end at R: prefault and a ground fault."""
    line = teed(True)
    terms = (SOURCES[0], None, GroundedTransformer(3.0 + 25j))
    sw = solve_teed_sweep(line, terms, v_nominal_v=V_NOM, fault_leg="R",
                          fault_types=FAULT_TYPES, m=np.array([0.2, 0.8]),
                          r_fault_ohm=np.array([3.0]), r_phase_ohm=1.0,
                          emf_v=tuple(np.array([e]) for e in EMFS))
    pre, _ = nodal(line, terms, EMFS, None, 0.0, "AG", 0.0, 0.0)
    for end in ENDS:
        assert_allclose(sw.v_pre[end][0, 0], pre[end][0], rtol=1e-9, atol=1e-9 * V_NOM)
        assert_allclose(sw.i_pre[end][0, 0], pre[end][1], rtol=1e-8, atol=1e-9)
    for fi, ft in enumerate(FAULT_TYPES):
        for mi, mm in enumerate((0.2, 0.8)):
            ref, i_f = nodal(line, terms, EMFS, "R", mm, ft, 3.0, 1.0)
            scale = np.max(np.abs(i_f))
            for end in ENDS:
                assert_allclose(sw.v[end][fi, mi, 0, 0, 0], ref[end][0], rtol=1e-8,
                                atol=1e-8 * V_NOM)
                assert_allclose(sw.i[end][fi, mi, 0, 0, 0], ref[end][1], rtol=1e-8,
                                atol=1e-8 * scale)
    # the transformer passes zero-sequence current only (Fortescue): ground fault, T end
    i_t = sw.i["T"][0, 0, 0, 0, 0]
    assert abs(i_t[0]) > 1.0
    assert_allclose(i_t, np.full(3, i_t.mean()), rtol=1e-9)


@pytest.mark.parametrize("shunt", [False, True])
def test_zero_length_open_tee_leg_gives_two_ended_result(shunt):
    """Identity: a stub of 1 mm to an open end at the tee changes nothing measurable."""
    full = cascade([30e3, 12e3, 25e3, 20e3], shunt)
    tee_m = 42e3 + 7e3  # inside the third section
    stub = LineCascade(full.z_ohm_per_m[:1], [1e-3],
                       None if full.y_s_per_m is None else full.y_s_per_m[:1])
    line = TeedLine.from_line(full, tee_m, stub)
    src = (SOURCES[0], SOURCES[1], None)
    length = full.total_length_m
    m_leg = np.array([0.0, 0.3, 0.9, 1.0])
    for leg in ("S", "R"):
        d = tee_m if leg == "S" else length - tee_m
        m_line = m_leg * d / length if leg == "S" else 1 - m_leg * d / length
        sw = solve_teed_sweep(line, src, v_nominal_v=V_NOM, fault_leg=leg,
                              fault_types=FAULT_TYPES, m=m_leg, r_fault_ohm=[0.0, 5.0],
                              emf_v=(np.array([EMFS[0]]), np.array([EMFS[1]]),
                                     np.array([0.0])))
        ref = solve_fault_sweep(full, SOURCES[0], SOURCES[1], v_nominal_v=V_NOM,
                                fault_types=FAULT_TYPES, m=m_line, r_fault_ohm=[0.0, 5.0],
                                emf_v=(np.array([EMFS[0]]), np.array([EMFS[1]])))
        scale_i = np.max(np.abs(ref.i_fault))
        assert_allclose(sw.v["S"], ref.v_s, rtol=1e-7, atol=1e-7 * V_NOM)
        assert_allclose(sw.v["R"], ref.v_r, rtol=1e-7, atol=1e-7 * V_NOM)
        assert_allclose(sw.i["S"], ref.i_s, rtol=1e-7, atol=1e-7 * scale_i)
        assert_allclose(sw.i["R"], ref.i_r, rtol=1e-7, atol=1e-7 * scale_i)
        assert_allclose(sw.i_fault, ref.i_fault, rtol=1e-7, atol=1e-7 * scale_i)
        # the open stub carries no current
        assert np.max(np.abs(sw.i["T"])) < 1e-6 * scale_i


def test_bad_input_is_refused():
    with pytest.raises(InputError, match="same circuits"):
        z6 = np.kron(np.eye(2), Z_ABC_KM / 1e3) + 1e-6
        TeedLine((LineCascade(z6, [1e3]), cascade([1e3], False), cascade([1e3], False)))
    full = cascade([30e3, 12e3], False)
    for bad in (0.0, 42e3, -1.0):
        with pytest.raises(InputError, match="inside the line"):
            TeedLine.from_line(full, bad, cascade([1e3], False))
    with pytest.raises(InputError, match="source at one end"):
        solve_teed_sweep(teed(False), (None, GroundedTransformer(5j), None),
                         v_nominal_v=V_NOM, fault_leg="S", fault_types=["AG"], m=[0.5],
                         r_fault_ohm=[0.0])
    with pytest.raises(InputError, match="unknown leg"):
        solve_teed_sweep(teed(False), SOURCES, v_nominal_v=V_NOM, fault_leg="X",
                         fault_types=["AG"], m=[0.5], r_fault_ohm=[0.0])


def _balanced_leg(length_m: float) -> LineCascade:
    z1, z0 = (0.05 + 0.40j) / 1e3, (0.20 + 1.20j) / 1e3  # ohm/m, invented
    return LineCascade(balanced_phase_matrix(z1, z0), [length_m])


def test_infeed_closed_form_on_a_balanced_line():
    """Three-phase bolted fault at bus R of a balanced teed line. Positive sequence only
    (Fortescue): with the fault voltage zero, V_tee = Z_R (I_S + I_T) and
    E = (Zs + Z_leg) I + V_tee at S and at T, a 2 x 2 system solved here by hand; the relay
    at S then measures Z_S + Z_R (1 + I_T / I_S) (the infeed effect, Kirchhoff's voltage
    law, e.g. Horowitz and Phadke, Power System Relaying, ch. on distance protection,
    from memory). Without the source at T it measures Z_S + Z_R."""
    z1 = (0.05 + 0.40j) / 1e3
    ls, lr, lt = 25e3, 35e3, 15e3
    line = TeedLine((_balanced_leg(ls), _balanced_leg(lr), _balanced_leg(lt)))
    src = SOURCES
    sw = solve_teed_sweep(line, src, v_nominal_v=V_NOM, fault_leg="R",
                          fault_types=["ABC"], m=[0.0], r_fault_ohm=[0.0])
    e = V_NOM / math.sqrt(3)
    a = np.array([[src[0].z1_ohm + z1 * ls + z1 * lr, z1 * lr],
                  [z1 * lr, src[2].z1_ohm + z1 * lt + z1 * lr]])
    i_s, i_t = np.linalg.solve(a, [e, e])
    expected = z1 * ls + z1 * lr * (1 + i_t / i_s)
    v, i = sw.v["S"][0, 0, 0, 0, 0], sw.i["S"][0, 0, 0, 0, 0]
    z_ab = (v[0] - v[1]) / (i[0] - i[1])
    assert_allclose(z_ab, expected, rtol=1e-9)
    assert_allclose(i[0], i_s, rtol=1e-9)  # phase A carries the positive-sequence current
    out = solve_teed_sweep(line, (src[0], src[1], None), v_nominal_v=V_NOM, fault_leg="R",
                           fault_types=["ABC"], m=[0.0], r_fault_ohm=[0.0])
    v, i = out.v["S"][0, 0, 0, 0, 0], out.i["S"][0, 0, 0, 0, 0]
    assert_allclose((v[0] - v[1]) / (i[0] - i[1]), z1 * (ls + lr), rtol=1e-9)


def test_grounded_transformer_changes_no_three_phase_fault():
    """A grounded-star transformer passes zero-sequence current only (Fortescue): a
    balanced three-phase fault on a balanced line sees the same network as with that end
    open; a ground fault does not."""
    line = TeedLine((_balanced_leg(25e3), _balanced_leg(35e3), _balanced_leg(15e3)))
    kw = dict(v_nominal_v=V_NOM, fault_leg="R", fault_types=["ABC", "AG"], m=[0.4],
              r_fault_ohm=[0.0])
    with_tr = solve_teed_sweep(line, (SOURCES[0], SOURCES[1], GroundedTransformer(2 + 20j)),
                               **kw)
    open_t = solve_teed_sweep(line, (SOURCES[0], SOURCES[1], None), **kw)
    scale = np.max(np.abs(open_t.i_fault))
    assert_allclose(with_tr.i["S"][0], open_t.i["S"][0], rtol=1e-9, atol=1e-9 * scale)
    assert np.max(np.abs(with_tr.i["S"][1] - open_t.i["S"][1])) > 1e-3 * scale


@dataclass(frozen=True)
class _Mho:
    """A forward mho zone at the line angle as the relay model reads a zone (its
    ``characteristic`` and ``direction``, as a ZoneSetting gives them)."""

    reach_ohm: float
    direction: str = "forward"

    def characteristic(self, ground: bool, line_angle_rad: float) -> Mho:
        return Mho(self.reach_ohm, line_angle_rad, self.direction)


def test_simulated_zones_on_a_balanced_line():
    """The verification's reach scales on a balanced line, three-phase bolted faults: the
    relay at S measures Z_S + Z_Y for a fault at bus Y with the third source out (the infeed
    only adds), and a mho circle of diameter D at the line angle has the reach scale
    |Z| / D for an impedance at that angle (the circle's equation, see
    relayset.physics.characteristic.Mho). With zone 1 at 80 % of the nearest terminal the
    smallest remote-terminal scale is 1/0.8; a zone 1 past it operates; a zone 2 short of
    the farthest terminal with infeed does not cover every leg."""
    from relayset.studies.verification.relay_model import RelayModel
    from relayset.studies.verification.teed import verify_teed

    z1 = (0.05 + 0.40j) / 1e3
    ls, lr, lt = 25e3, 35e3, 15e3
    line = TeedLine((_balanced_leg(ls), _balanced_leg(lr), _balanced_leg(lt)))
    theta = float(np.angle(z1))
    near = abs(z1) * (ls + lt)
    kw = dict(v_nominal_v=V_NOM, fault_types=["ABC"], r_fault_ohm=[0.0],
              source_scale=np.array([1.0]), case_names=("nominal",), k0=0j,
              line_angle_rad=theta, z_line_ohm=abs(z1) * (ls + lr),
              models={0: RelayModel()}, buses=("S", "R", "T"))
    good = verify_teed([("earth", line)], SOURCES, (0,),
                       {0: (_Mho(0.8 * near), _Mho(3 * near))}, **kw)[0]
    assert good.zone1_remote_scale == pytest.approx(1 / 0.8, rel=1e-9)
    assert all(c.passed for c in good.checks)
    assert 0 < good.zone1_coverage_pct < 100
    bad = verify_teed([("earth", line)], SOURCES, (0,),
                      {0: (_Mho(1.05 * near), _Mho(1.1 * near))}, **kw)[0]
    chk = {c.check_id: c for c in bad.checks}
    assert not chk["zone1_no_remote_terminal_trip"].passed
    assert "overreaches a remote terminal" in chk["zone1_no_remote_terminal_trip"].detail
    assert not chk["zone2_covers_all_legs"].passed
    assert bad.zone2_internal_scale > 1.0


def test_fault_beyond_a_series_branch_equals_nodal_reference():
    """A fault at the far end of a line leaving bus R (a series branch at m = 0 of leg R,
    stamped as its nodal admittance in the reference)."""
    line = teed(True)
    zb = np.stack([balanced_phase_matrix(f * (1 + 8j), f * (3 + 24j)) for f in (0.3, 1.0)])
    sw = solve_teed_sweep(line, SOURCES, v_nominal_v=V_NOM, fault_leg="R",
                          fault_types=("AG", "BC", "ABC"), m=[0.0, 0.0], r_fault_ohm=[2.0],
                          z_branch_ohm=zb, emf_v=tuple(np.array([e]) for e in EMFS))
    for fi, ft in enumerate(("AG", "BC", "ABC")):
        for mi in range(2):
            ref, i_f = nodal(line, SOURCES, EMFS, "R", 0.0, ft, 2.0, 0.0, z_branch=zb[mi])
            for end in ENDS:
                assert_allclose(sw.v[end][fi, mi, 0, 0, 0], ref[end][0], rtol=1e-8,
                                atol=1e-8 * V_NOM)
                assert_allclose(sw.i[end][fi, mi, 0, 0, 0], ref[end][1], rtol=1e-8,
                                atol=1e-8 * np.max(np.abs(i_f)))
            assert_allclose(sw.i_fault[fi, mi, 0, 0, 0], i_f, rtol=1e-8,
                            atol=1e-8 * np.max(np.abs(i_f)))


@pytest.mark.parametrize("factor, passes", [(0.99, True), (1.01, False)])
def test_simulated_zone2_against_the_next_zone1(factor, passes):
    """Zone 2 graded short of the next line's zone 1 (80 % of it): with the relay's own
    source feeding alone, a three-phase bolted fault at 80 % of a line leaving bus R is
    seen at Z_S + Z_R + 0.8 Z_adj (Kirchhoff's voltage law on a balanced network), and a
    mho of diameter D at that angle gives it the reach scale |Z| / D: a zone 2 of
    0.99 times that impedance stays out, 1.01 times reaches in."""
    from relayset.studies.verification.relay_model import RelayModel
    from relayset.studies.verification.teed import verify_teed

    z1 = (0.05 + 0.40j) / 1e3
    ls, lr, lt = 25e3, 35e3, 15e3
    line = TeedLine((_balanced_leg(ls), _balanced_leg(lr), _balanced_leg(lt)))
    z_adj = z1 * 20e3
    limit = abs(z1 * (ls + lr) + 0.8 * z_adj)
    res = verify_teed(
        [("earth", line)], SOURCES, (0,),
        {0: (_Mho(0.5 * abs(z1) * (ls + lt)), _Mho(factor * limit))},
        v_nominal_v=V_NOM, fault_types=["ABC"], r_fault_ohm=[0.0],
        source_scale=np.array([1.0]), case_names=("nominal",), k0=0j,
        line_angle_rad=float(np.angle(z1)), z_line_ohm=abs(z1) * (ls + lr),
        models={0: RelayModel()}, buses=("S", "R", "T"),
        beyond={1: [("R - X", z_adj, 3 * z_adj)]}, next_zone1_pct=80.0)[0]
    chk = {c.check_id: c for c in res.checks}["zone2_stays_short_of_next_zone1"]
    assert chk.passed is passes
    assert "80 % along 'R - X' beyond R" in chk.detail and "no source at R and T" in chk.detail
    assert f"reach scale {1 / factor:.3g} " in chk.detail


def test_branch_in_two_equal_sections_equals_one_section():
    """A uniform branch written as two sections gives the result of one section (the chain
    matrices multiply: Phi(a) Phi(b) = Phi(a + b), Paul ch. 7)."""
    one = TeedLine((cascade([30e3], True), cascade([25e3], True, 1), cascade([18e3], True)))
    two = TeedLine((cascade([30e3], True), cascade([25e3], True, 1),
                    LineCascade(np.stack([one.legs[2].z_ohm_per_m[0]] * 2), [11e3, 7e3],
                                np.stack([one.legs[2].y_s_per_m[0]] * 2))))
    kw = dict(v_nominal_v=V_NOM, fault_leg="T", fault_types=FAULT_TYPES, m=[0.0, 0.5, 1.0],
              r_fault_ohm=[0.0, 3.0])
    a, b = solve_teed_sweep(one, SOURCES, **kw), solve_teed_sweep(two, SOURCES, **kw)
    for end in ENDS:
        assert_allclose(b.v[end], a.v[end], rtol=1e-10, atol=1e-10 * V_NOM)
        assert_allclose(b.i[end], a.i[end], rtol=1e-10, atol=1e-6)


def test_verification_judges_every_line_it_is_given():
    """The earth-resistivity sweep hands the verification one line per resistivity: a zone 1
    safe on one (80 % of the nearest terminal, scale 1/0.8 on a balanced line, see above)
    but overreaching on another (a shorter leg T) must fail, naming that line."""
    from relayset.studies.verification.relay_model import RelayModel
    from relayset.studies.verification.teed import verify_teed

    z1 = (0.05 + 0.40j) / 1e3
    base = TeedLine((_balanced_leg(25e3), _balanced_leg(35e3), _balanced_leg(15e3)))
    short = TeedLine((_balanced_leg(25e3), _balanced_leg(35e3), _balanced_leg(5e3)))
    kw = dict(v_nominal_v=V_NOM, fault_types=["ABC"], r_fault_ohm=[0.0],
              source_scale=np.array([1.0]), case_names=("nominal",), k0=0j,
              line_angle_rad=float(np.angle(z1)), z_line_ohm=abs(z1) * 60e3,
              models={0: RelayModel()}, buses=("S", "R", "T"))
    zones = {0: (_Mho(0.8 * abs(z1) * 40e3), _Mho(3 * abs(z1) * 60e3))}
    alone = verify_teed([("earth 100 ohm*m", base)], SOURCES, (0,), zones, **kw)[0]
    both = verify_teed([("earth 100 ohm*m", base), ("earth 30 ohm*m", short)], SOURCES,
                       (0,), zones, **kw)[0]
    assert alone.zone1_remote_scale == pytest.approx(1 / 0.8, rel=1e-9)
    assert both.zone1_remote_scale == pytest.approx(30 / 32, rel=1e-9)  # |Z| / D
    chk = {c.check_id: c for c in both.checks}["zone1_no_remote_terminal_trip"]
    assert not chk.passed and "earth 30 ohm*m" in chk.detail


def test_a_fault_at_the_tee_is_the_same_from_every_leg():
    """The tee is one node (voltage continuity, Kirchhoff's current law): a fault at the
    tee end (m = 1) of any leg is the same fault."""
    line = teed(True)
    kw = dict(v_nominal_v=V_NOM, fault_types=FAULT_TYPES, m=[1.0], r_fault_ohm=[0.0, 4.0],
              r_phase_ohm=1.0, emf_v=tuple(np.array([e]) for e in EMFS))
    sw = {leg: solve_teed_sweep(line, SOURCES, fault_leg=leg, **kw) for leg in ENDS}
    scale = np.max(np.abs(sw["S"].i_fault))
    for leg in ("R", "T"):
        assert_allclose(sw[leg].i_fault, sw["S"].i_fault, rtol=1e-9, atol=1e-9 * scale)
        for end in ENDS:
            assert_allclose(sw[leg].v[end], sw["S"].v[end], rtol=1e-9, atol=1e-9 * V_NOM)
            assert_allclose(sw[leg].i[end], sw["S"].i[end], rtol=1e-9, atol=1e-9 * scale)
