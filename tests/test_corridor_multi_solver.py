"""The fault solver with 3k conductors: neighbouring lines beside a double-circuit line, and
more than one neighbour (shared corridors).

Checks: the batched chain-matrix solver against the independent per-case nodal solver of
tests/reference_solver.py (modified nodal analysis, Ho, Ruehli and Brennan 1975), extended
to any number of neighbours independently of relayset.physics.network; identities of
circuit theory (a neighbour with no coupling is no neighbour; a neighbour tied to both buses
with no route of its own over the whole route is one more parallel circuit, so a double
circuit with such a neighbour equals a single circuit with two such neighbours: the triple
circuit both ways). The line matrices are built here from an invented cross-section with
Carson's simplified earth return (Carson 1926, the first terms; any symmetric passive
matrices would do: both solvers take them as given)."""

from __future__ import annotations

import itertools
import math

import numpy as np
import pytest

from relayset.errors import InputError
from relayset.physics.faults import FAULT_TYPES
from relayset.physics.network import (
    PARALLEL_STATES,
    LineCascade,
    NeighbourEnd,
    Source,
    solve_fault_sweep,
)
from relayset.physics.sequence import balanced_phase_matrix

from reference_solver import solve_fault_single

F_HZ = 50.0
OMEGA = 2 * math.pi * F_HZ
MU0 = 4e-7 * math.pi
EPS0 = 8.854187817e-12
V_NOM = 132e3
SRC_S = Source(1.5 + 18j, 2.5 + 24j)  # invented
SRC_R = Source(2.0 + 25j, 3.0 + 30j)
SRC_X = Source(3.0 + 30j, 4.0 + 45j)  # the neighbours' own buses (invented)
SRC_Y = Source(2.0 + 22j, 3.5 + 35j)
ROUTE_X = balanced_phase_matrix(0.5 + 4j, 1.5 + 12j)  # routes outside the corridor
ROUTE_Y = balanced_phase_matrix(0.8 + 6j, 2.0 + 18j)
ZERO = np.zeros((3, 3))
LENGTHS = np.array([20e3, 50e3, 30e3])
NAMES = ["v_s", "i_s", "i_s_parallel", "v_r", "i_r", "i_r_parallel", "v_f", "i_fault",
         "i_f_from_s", "i_f_from_r"]

# Circuits of an invented corridor: (x, y) of phases A, B, C [m]. Circuit 1 and 2 on one
# tower; neighbours at 30 m and at -25 m.
CIRCUITS = [
    [(-4.0, 20.0), (-4.5, 16.0), (-4.0, 12.0)],
    [(4.0, 12.0), (4.5, 16.0), (4.0, 20.0)],
    [(25.0, 18.0), (30.0, 18.0), (35.0, 18.0)],
    [(-30.0, 15.0), (-25.0, 15.0), (-20.0, 15.0)],
]
GMR, RADIUS, R_AC = 0.0085, 0.0108, 0.12e-3  # [m], [m], [ohm/m]


def cross_section(circuits: list[int], rho: float = 100.0) -> tuple[np.ndarray, np.ndarray]:
    """Series impedance [ohm/m] and shunt admittance [S/m] of the chosen circuits."""
    pts = [p for c in circuits for p in CIRCUITS[c]]
    n = len(pts)
    de = 658.87 * math.sqrt(rho / F_HZ)  # Carson's equivalent earth-return depth [m]
    z = np.empty((n, n), complex)
    p = np.empty((n, n))
    for i, j in itertools.product(range(n), range(n)):
        (xi, yi), (xj, yj) = pts[i], pts[j]
        d = GMR if i == j else math.hypot(xi - xj, yi - yj)
        z[i, j] = (R_AC if i == j else 0.0) + math.pi**2 * F_HZ * 1e-7 + \
            1j * OMEGA * MU0 / (2 * math.pi) * math.log(de / d)
        dd = RADIUS if i == j else math.hypot(xi - xj, yi - yj)
        p[i, j] = math.log(math.hypot(xi - xj, yi + yj) / dd) / (2 * math.pi * EPS0)
    return z, 1j * OMEGA * np.linalg.inv(p)


def cascade(circuits: list[int], shared: list[list[int]], shunt: bool) -> LineCascade:
    """Sections of the line: in section s the circuits listed in ``shared[s]`` (indices
    into ``circuits``) are coupled on the cross-section; the others run uncoupled there,
    on their own (the nodal reference takes no zero-impedance connector; that form is
    checked against this one in test_corridor_solver)."""
    zs, ys = [], []
    n = 3 * len(circuits)
    for here in shared:
        z, y = cross_section([circuits[k] for k in here])
        idx = [3 * k + p for k in here for p in range(3)]
        zz, yy = np.zeros((n, n), complex), np.zeros((n, n), complex)
        zz[np.ix_(idx, idx)] = z
        yy[np.ix_(idx, idx)] = y
        for k in set(range(len(circuits))) - set(here):
            zk, yk = cross_section([circuits[k]])
            jdx = [3 * k + p for p in range(3)]
            zz[np.ix_(jdx, jdx)] = zk
            yy[np.ix_(jdx, jdx)] = yk
        zs.append(zz)
        ys.append(yy)
    return LineCascade(np.stack(zs), LENGTHS, np.stack(ys) if shunt else None)


# Double circuit (circuits 1, 2 everywhere) with a neighbour over the middle section.
DOUBLE_ONE = ([0, 1, 2], [[0, 1], [0, 1, 2], [0, 1]])
# Single circuit with two neighbours: one over sections 1-2, one over sections 2-3.
SINGLE_TWO = ([0, 2, 3], [[0, 1], [0, 1, 2], [0, 2]])
# Double circuit with two neighbours.
DOUBLE_TWO = ([0, 1, 2, 3], [[0, 1, 2], [0, 1, 2, 3], [0, 1, 3]])
LINES = {"double+1": DOUBLE_ONE, "single+2": SINGLE_TWO, "double+2": DOUBLE_TWO}
ENDS = [
    (NeighbourEnd(ROUTE_X, SRC_X), NeighbourEnd(ROUTE_Y, SRC_Y)),  # buses of its own
    (NeighbourEnd(ROUTE_Y, on_line_bus=True), NeighbourEnd(ROUTE_X)),  # on S, open at R
    (NeighbourEnd(ZERO), NeighbourEnd(ROUTE_X, on_line_bus=True)),  # open at S, on R
]


def _cases():
    out = []
    for key, (circ, _sh) in LINES.items():
        n_nb = len(circ) - (2 if circ[1] == 1 else 1)
        par = PARALLEL_STATES if circ[1] == 1 else ("in_service",)
        combos = [("in_service",) * n_nb] + [
            tuple(s if j == k else "in_service" for j in range(n_nb))
            for k in range(n_nb) for s in ("earthed", "isolated")]
        if n_nb > 1:
            combos.append(("earthed",) * n_nb)
        for p, nbs, shunt in itertools.product(par, combos, (False, True)):
            faults = [1] + [c + 1 for c in range(1, len(circ))
                            if (circ[c] == 1 and p == "in_service")
                            or (circ[c] > 1 and nbs[c - len(circ) + n_nb] == "in_service")]
            out += [(key, p, nbs, shunt, fc) for fc in faults]
    # sequential clearing on the double circuit with its neighbours in service
    out += [(k, s, ("in_service",) * (len(LINES[k][0]) - 2), False, 1)
            for k in ("double+1", "double+2") for s in ("faulted_open_at_s",
                                                        "faulted_open_at_r")]
    return out


CASES = _cases()


@pytest.mark.parametrize(("key", "par", "nb_states", "shunt", "fault_circuit"), CASES)
def test_multi_circuit_sweep_equals_reference(key, par, nb_states, shunt, fault_circuit):
    # Independent formulations (chain matrices + Thevenin superposition versus modified
    # nodal analysis, routes stamped as coupled branches); tolerance 1e-9 of the sweep's
    # largest voltage or current, as in test_network.
    circ, shared = LINES[key]
    line = cascade(circ, shared, shunt)
    # each kind of terminal for each neighbour, in turn over the cases
    k = CASES.index((key, par, nb_states, shunt, fault_circuit))
    nbs = tuple(ENDS[(j + k) % len(ENDS)] for j in range(len(nb_states)))
    rng = np.random.default_rng(7 + len(CASES) % 5 + fault_circuit + 3 * shunt
                                + len(par) + sum(map(len, nb_states)))
    m = np.concatenate([[0.0, 0.2, 0.7, 1.0], rng.uniform(0, 1, 2)])
    rf = np.array([0.0, rng.uniform(1, 30)])
    rp = np.array([0.0, rng.uniform(0.5, 5)])
    scale = np.array([[1.0, 1.0], [0.4, 2.5]])
    delta = np.radians([-20.0, 35.0])
    sw = solve_fault_sweep(line, SRC_S, SRC_R, v_nominal_v=V_NOM, fault_types=FAULT_TYPES,
                           m=m, r_fault_ohm=rf, r_phase_ohm=rp, source_scale=scale,
                           transfer_angle_rad=delta, parallel_state=par, neighbours=nbs,
                           neighbour_states=nb_states, fault_circuit=fault_circuit)
    v_scale = max(np.max(np.abs(getattr(sw, n))) for n in NAMES if n.startswith("v"))
    i_scale = max(np.max(np.abs(getattr(sw, n))) for n in NAMES if n.startswith("i"))
    circuit2_floats = (circ[1] == 1 and par == "isolated") or (
        circ[1] > 1 and nb_states[0] == "isolated")
    for _ in range(12):
        f, i, r, k, ld = (rng.integers(len(FAULT_TYPES)), rng.integers(m.size),
                          rng.integers(rf.size), rng.integers(2), rng.integers(2))
        ref = solve_fault_single(line, SRC_S, SRC_R, v_nominal_v=V_NOM,
                                 fault_type=FAULT_TYPES[f], m=m[i], r_fault_ohm=rf[r],
                                 r_phase_ohm=rp[r], source_scale=tuple(scale[k]),
                                 transfer_angle_rad=delta[ld], parallel_state=par,
                                 neighbours=nbs, neighbour_states=nb_states,
                                 fault_circuit=fault_circuit)
        for name in NAMES:
            if name.endswith("parallel") and circuit2_floats and not shunt:
                continue  # floating circuit 2 (series only: tied at S by the reference)
            got = getattr(sw, name)[f, i, r, k, ld]
            tol = 1e-9 * (v_scale if name.startswith("v") else i_scale)
            np.testing.assert_allclose(got, getattr(ref, name), rtol=0, atol=tol,
                                       err_msg=f"{name} {FAULT_TYPES[f]} m={m[i]}")


KW = dict(v_nominal_v=V_NOM, fault_types=FAULT_TYPES, m=np.linspace(0, 1, 7),
          r_fault_ohm=[0.0, 10.0], source_scale=[0.5, 2.0], transfer_angle_rad=[0.0, 0.3])


def _same(a, b, names=NAMES, tol=1e-10, what=""):
    """Each quantity of sweep a equals b within ``tol`` of b's largest voltage or current."""
    v_scale = max(np.max(np.abs(getattr(b, n))) for n in names if n.startswith("v"))
    i_scale = max(np.max(np.abs(getattr(b, n))) for n in names if n.startswith("i"))
    for name in names:
        np.testing.assert_allclose(
            getattr(a, name), getattr(b, name), rtol=0,
            atol=tol * (v_scale if name.startswith("v") else i_scale), err_msg=what + name)


@pytest.mark.parametrize("shunt", [False, True])
@pytest.mark.parametrize("state", PARALLEL_STATES)
def test_uncoupled_neighbour_is_no_neighbour(shunt, state):
    # Identity: a neighbour with no coupling (its block alone, zero mutual terms) leaves
    # the double circuit's quantities unchanged in each of its states (a circuit that
    # shares nothing induces nothing). Tolerance 1e-10 of the sweep's scale.
    z6, y6 = cross_section([0, 1])
    z3, y3 = cross_section([2])
    z9, y9 = np.zeros((9, 9), complex), np.zeros((9, 9), complex)
    z9[:6, :6], z9[6:, 6:], y9[:6, :6], y9[6:, 6:] = z6, z3, y6, y3
    nine = LineCascade(np.stack([z9] * 3), LENGTHS, np.stack([y9] * 3) if shunt else None)
    six = LineCascade(np.stack([z6] * 3), LENGTHS, np.stack([y6] * 3) if shunt else None)
    for par in PARALLEL_STATES:
        a = solve_fault_sweep(nine, SRC_S, SRC_R, parallel_state=par, neighbours=[ENDS[0]],
                              neighbour_states=[state], **KW)
        b = solve_fault_sweep(six, SRC_S, SRC_R, parallel_state=par, **KW)
        _same(a, b, what=f"{par} ")


@pytest.mark.parametrize("shunt", [False, True])
def test_triple_circuit_both_ways(shunt):
    # Identity: three circuits on one tower over the whole route, all on the line's two
    # buses: a double circuit with a neighbour tied to both buses (no route of its own)
    # equals a single circuit with two such neighbours, and the reference's native form
    # (the same ties) agrees. Tolerance 1e-10 of the sweep's scale.
    z9, y9 = cross_section([0, 1, 2])
    line = LineCascade(np.stack([z9] * 3), LENGTHS, np.stack([y9] * 3) if shunt else None)
    tie = (NeighbourEnd(ZERO, on_line_bus=True), NeighbourEnd(ZERO, on_line_bus=True))
    for fc in (1, 2, 3):
        a = solve_fault_sweep(line, SRC_S, SRC_R, neighbours=[tie], fault_circuit=fc, **KW)
        b = solve_fault_sweep(line, SRC_S, SRC_R, neighbours=[tie, tie], fault_circuit=fc,
                              **KW)
        _same(a, b, what=f"circuit {fc} ")


def test_neighbour_order_does_not_matter():
    # Identity (relabelling): two neighbours given in the other order, with the cascade's
    # circuits permuted the same way, give the same protected-line quantities.
    circ, shared = SINGLE_TWO
    line = cascade(circ, shared, True)
    p = [0, 1, 2, 6, 7, 8, 3, 4, 5]
    swapped = LineCascade(line.z_ohm_per_m[:, p][:, :, p], LENGTHS,
                          line.y_s_per_m[:, p][:, :, p])
    a = solve_fault_sweep(line, SRC_S, SRC_R, neighbours=ENDS[:2],
                          neighbour_states=("earthed", "in_service"), **KW)
    b = solve_fault_sweep(swapped, SRC_S, SRC_R, neighbours=ENDS[1::-1],
                          neighbour_states=("in_service", "earthed"), **KW)
    _same(a, b, ("v_s", "i_s", "v_r", "i_r", "v_f", "i_fault"))


def test_bad_multi_circuit_arguments():
    circ, shared = DOUBLE_ONE
    line = cascade(circ, shared, False)
    kw = dict(v_nominal_v=V_NOM, fault_types=["AG"], m=[0.5], r_fault_ohm=[0.0])
    with pytest.raises(InputError, match="faulted circuit"):
        solve_fault_sweep(line, SRC_S, SRC_R, neighbours=[ENDS[0]],
                          neighbour_states=["earthed"], fault_circuit=3, **kw)
    with pytest.raises(InputError, match="faulted circuit"):
        solve_fault_sweep(line, SRC_S, SRC_R, neighbours=[ENDS[0]], parallel_state="earthed",
                          fault_circuit=2, **kw)
    with pytest.raises(InputError, match="pair of ends"):
        solve_fault_sweep(line, SRC_S, SRC_R, neighbours=[ENDS[0], ENDS[1], ENDS[0]], **kw)
    with pytest.raises(InputError, match="unknown neighbour state"):
        solve_fault_sweep(line, SRC_S, SRC_R, neighbours=[ENDS[0]],
                          neighbour_states=["earthd"], **kw)
    with pytest.raises(InputError, match="3k conductors"):
        LineCascade(np.eye(4)[None] * 1e-4, [1e3])
