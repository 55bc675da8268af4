"""Per-case reference fault solver for the tests (not part of the package).

Plain modified nodal analysis [1]_ with a node at every section boundary and at the fault
point, and the exact nodal matrix of each uniform section from an eigendecomposition. It
shares nothing with the batched solver in :mod:`relayset.physics.network` except input
checks and the fault constraints, so agreement between the two is an independent check.

References
----------
.. [1] C. W. Ho, A. E. Ruehli and P. A. Brennan, "The modified nodal approach to network
   analysis," IEEE Trans. Circuits Syst., vol. 22, no. 6, pp. 504-509, 1975.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from relayset.errors import InputError
from relayset.physics.faults import fault_constraints
from relayset.physics.network import (
    LineCascade,
    Source,
    _balanced,
    _check_locations,
    _check_scale,
    _check_sources,
    _check_state,
    _emfs,
)

# Relative distance below which a fault location is taken to sit on a section boundary.
_SNAP_REL = 1e-9


@dataclass(frozen=True, eq=False)
class FaultCase:
    """Results of :func:`solve_fault_single`: the fields of
    :class:`~relayset.physics.network.FaultSweep` for one case, each a (3,) complex array
    [V or A]."""

    v_s: np.ndarray
    i_s: np.ndarray
    i_s_parallel: np.ndarray
    v_r: np.ndarray
    i_r: np.ndarray
    i_r_parallel: np.ndarray
    v_f: np.ndarray
    i_fault: np.ndarray
    i_f_from_s: np.ndarray
    i_f_from_r: np.ndarray

def _matrix_function(mat: np.ndarray, func) -> np.ndarray:
    """f(M) for a diagonalisable matrix by eigendecomposition."""
    w, vec = np.linalg.eig(mat)
    return vec @ np.diag(func(w)) @ np.linalg.inv(vec)


def _cosh_sqrt(w: np.ndarray) -> np.ndarray:
    return np.cosh(np.sqrt(w))


def _sinhc_sqrt(w: np.ndarray) -> np.ndarray:
    s = np.sqrt(w)
    small = np.abs(s) < 1e-6
    safe = np.where(small, 1.0, s)
    return np.where(small, 1 + w / 6, np.sinh(safe) / safe)


def _segment_nodal(z: np.ndarray, y: np.ndarray | None, length: float) -> np.ndarray:
    """Nodal admittance (2n, 2n) of a uniform segment [S]: currents into it at its two ends."""
    zl = z * length
    if y is None:
        yi = np.linalg.inv(zl)
        return np.block([[yi, -yi], [-yi, yi]])
    yl = y * length
    a = _matrix_function(zl @ yl, _cosh_sqrt)
    b = _matrix_function(zl @ yl, _sinhc_sqrt) @ zl
    c = yl @ _matrix_function(zl @ yl, _sinhc_sqrt)
    d = _matrix_function(yl @ zl, _cosh_sqrt)
    b_inv = np.linalg.inv(b)
    return np.block([[d @ b_inv, c - d @ b_inv @ a], [-b_inv, b_inv @ a]])


def solve_fault_single(
    line: LineCascade,
    source_s: Source | None,
    source_r: Source | None,
    *,
    v_nominal_v: float,
    fault_type: str,
    m: float,
    r_fault_ohm: float,
    r_phase_ohm: float = 0.0,
    source_scale: float | tuple[float, float] = 1.0,
    transfer_angle_rad: float = 0.0,
    parallel_state: str = "in_service",
    emf_v: tuple[complex, complex] | None = None,
    z_branch_ohm: np.ndarray | None = None,
    neighbour: tuple | None = None,
    fault_circuit: int = 1,
    neighbours: tuple | None = None,
    neighbour_states: tuple | None = None,
) -> FaultCase:
    """Solve one fault case by plain modified nodal analysis [3]_ (reference for tests).

    Nodes: bus S, bus R, and the n conductors at every section boundary and at the fault
    point. Unknowns besides node voltages: source branch currents (V + Zs I = E), current
    transformer branches between each bus and the line ends (zero-impedance, their
    currents are the relay currents), earthing branches of an earthed circuit 2 and the
    fault currents (exact fault constraints). Series-only with circuit 2 isolated, circuit
    2 floats; it is tied to ground at the S end only, which closes no current path.

    Parameters are those of :func:`~relayset.physics.network.solve_fault_sweep` for one
    case (scalars); ``z_branch_ohm`` (3, 3) is a series branch stamped as its nodal
    admittance between the fault point and three extra nodes where the fault sits.
    ``neighbour`` (one :class:`~relayset.physics.network.NeighbourEnd` per end): circuit
    2 is a line on buses of its own, stamped as a coupled route branch (V_from - V_to =
    Z I) from its bus (the line's bus, a bus of its own behind its source with the EMF of
    the line's source at that end, or ground when earthed) to the line's end nodes;
    ``fault_circuit`` 2 faults circuit 2. ``neighbours`` (pairs of ends) and
    ``neighbour_states``: any number of neighbours, the last circuits of the line (after
    the protected line's one or two), each stamped that way in its own state; the line
    has n = 3k conductors. ``fault_circuit`` c faults circuit c (1-based).

    Returns
    -------
    FaultCase
    """
    if neighbour is not None:  # the older form: circuit 2 of six, in parallel_state
        neighbours, neighbour_states = (neighbour,), (parallel_state,)
        parallel_state = "in_service"
    neighbours = tuple(neighbours or ())
    neighbour_states = tuple(neighbour_states or ("in_service",) * len(neighbours))
    n_circ = line.n_conductors // 3
    has_par = n_circ - len(neighbours) == 2
    if not has_par and n_circ != len(neighbours) + 1:
        raise InputError("one pair of ends per neighbour", field="neighbours")
    if not has_par and parallel_state != "in_service":
        raise InputError("no parallel circuit", field="parallel_state", value=parallel_state)
    if n_circ <= 2:
        _check_state(line, parallel_state, None, open_end=True)
    _check_sources(source_s, source_r, None)
    m_arr = _check_locations(m, None)
    if m_arr.size != 1:
        raise InputError("one fault location", field="m", value=m_arr.tolist())
    m = float(m_arr[0])
    scale = _check_scale(np.atleast_1d(source_scale)[None, :] if np.ndim(source_scale)
                         else source_scale, None)[0]
    e_s_arr, e_r_arr = _emfs(v_nominal_v, transfer_angle_rad,
                             None if emf_v is None else (np.array([emf_v[0]]),
                                                         np.array([emf_v[1]])), 1, None)
    e_s, e_r = _balanced(e_s_arr[0, 0]), _balanced(e_r_arr[0, 0])
    p_v, p_i = fault_constraints(fault_type, r_fault_ohm, r_phase_ohm)

    z, y = line.z_ohm_per_m, line.y_s_per_m
    n = line.n_conductors
    length = line.total_length_m
    edges = np.concatenate([[0.0], np.cumsum(line.length_m)])
    x_f = m * length
    # Points along the line: every section edge, both sides of each lumped series element
    # (two points at one place, the element between them) and the fault point.
    el_at = {}
    for e in line.elements:
        el_at.setdefault(float(e.at * edges[-1]), []).append(e)
    places = sorted({*edges.tolist(), *el_at})
    near = int(np.argmin(np.abs(np.array(places) - x_f)))
    if abs(places[near] - x_f) <= _SNAP_REL * length:
        x_f = places[near]
    else:
        places = sorted([*places, x_f])
    positions, links, first_at = [], [], {}
    for x in places:
        if positions:  # a uniform segment from the previous place
            sec = int(np.searchsorted(edges, positions[-1], side="right") - 1)
            links.append(("seg", x - positions[-1], min(sec, len(line.length_m) - 1)))
        first_at[x] = len(positions)
        positions.append(x)
        for e in el_at.get(x, ()):
            links.append(("el", e.z_ohm, None))
            positions.append(x)
    last_at = {x: (first_at[x] + len(el_at.get(x, ()))) for x in places}
    # A fault exactly at an element: the bus side at a line end, else the S side.
    j_f = last_at[x_f] if x_f == places[-1] else first_at[x_f]
    n_pos = len(positions)
    n_line = n_pos * n
    bus_s, bus_r = n_line, n_line + 3
    n_nodes = n_line + 6 + (3 if z_branch_ohm is not None else 0)
    branch_nodes = [n_line + 6 + c for c in range(3)]
    first_nb = 2 if has_par else 1  # 0-based circuit of the first neighbour
    nb_bus = {}  # (end, neighbour) -> first node of that neighbour's own bus
    for jn, (ends_j, st_j) in enumerate(zip(neighbours, neighbour_states, strict=True)):
        for end, nb in enumerate(ends_j):
            if st_j == "in_service" and not nb.on_line_bus and nb.source is not None:
                nb_bus[end, jn] = n_nodes
                n_nodes += 3

    def node(j: int, c: int) -> int:
        return j * n + c

    # Branches: (from node or -1 for ground, to node or -1, impedance or None, emf)
    # "Ammeter" branch: V_to - V_from = 0. Source branch: V_bus + Zs I = E, I into bus.
    branches: list[tuple[str, list[int], list[int]]] = []
    ct = {f"{e}{c}": [] for e in "sr" for c in range(1, n_circ + 1)}
    last = n_pos - 1

    def add_ammeter(key: str, frm: list[int], to: list[int]) -> None:
        ct[key] = list(range(len(branches), len(branches) + 3))
        for a_, b_ in zip(frm, to, strict=True):
            branches.append(("amm", [a_], [b_]))

    # Sequential clearing: circuit 1's breaker at one bus is open, i.e. no branch there.
    if parallel_state != "faulted_open_at_s":
        add_ammeter("s1", [bus_s + c for c in range(3)], [node(0, c) for c in range(3)])
    if parallel_state != "faulted_open_at_r":
        add_ammeter("r1", [bus_r + c for c in range(3)], [node(last, c) for c in range(3)])
    routes = []  # (first branch index, 3x3 impedance)

    def add_route(key: str, frm: list[int], to: list[int], z_route: np.ndarray) -> None:
        routes.append((len(branches), np.asarray(z_route, dtype=complex)))
        add_ammeter(key, frm, to)

    for jn, (ends_j, st_j) in enumerate(zip(neighbours, neighbour_states, strict=True)):
        cn = first_nb + jn  # 0-based circuit
        for end, j in enumerate((0, last)):
            nb = ends_j[end]
            key = f"{'sr'[end]}{cn + 1}"
            to = [node(j, 3 * cn + c) for c in range(3)]
            line_bus = (bus_s, bus_r)[end]
            if st_j == "in_service" and nb.on_line_bus:
                add_route(key, [line_bus + c for c in range(3)], to, nb.z_route_ohm)
            elif (end, jn) in nb_bus:
                add_route(key, [nb_bus[end, jn] + c for c in range(3)], to, nb.z_route_ohm)
            elif st_j == "earthed":
                add_route(key, [-1] * 3, to, nb.z_route_ohm)
            elif st_j == "isolated" and end == 0 and y is None:
                add_ammeter(key, [-1] * 3, to)  # floating, series only: no current path
    if has_par:
        if parallel_state in ("in_service", "faulted_open_at_s", "faulted_open_at_r"):
            add_ammeter("s2", [bus_s + c for c in range(3)], [node(0, 3 + c) for c in range(3)])
            add_ammeter("r2", [bus_r + c for c in range(3)],
                        [node(last, 3 + c) for c in range(3)])
        elif parallel_state == "earthed" or y is None:
            add_ammeter("s2", [-1] * 3, [node(0, 3 + c) for c in range(3)])
            if parallel_state == "earthed":
                add_ammeter("r2", [-1] * 3, [node(last, 3 + c) for c in range(3)])
    n_amm = len(branches)
    src = []
    for bus, source, k, emf in ((bus_s, source_s, 0, e_s), (bus_r, source_r, 1, e_r)):
        if source is not None:
            src.append((bus, source.phase_matrix(scale[k]), emf))
        for jn, ends_j in enumerate(neighbours):  # its own source: not scaled, same EMF
            if (k, jn) in nb_bus:
                src.append((nb_bus[k, jn], ends_j[k].source.phase_matrix(), emf))
    n_unk = n_nodes + n_amm + 3 * len(src) + 3
    mat = np.zeros((n_unk, n_unk), dtype=complex)
    rhs = np.zeros(n_unk, dtype=complex)

    seg_y = []
    for j, (kind, a, sec) in enumerate(links):
        if kind == "seg":
            yy = _segment_nodal(z[sec], None if y is None else y[sec], a)
        else:  # lumped series element: nodal admittance of its impedance
            ye = np.linalg.inv(a)
            yy = np.block([[ye, -ye], [-ye, ye]])
        seg_y.append(yy)
        idx = [node(j, c) for c in range(n)] + [node(j + 1, c) for c in range(n)]
        mat[np.ix_(idx, idx)] += yy
    row = n_nodes
    for _kind, frm, to in branches:  # current flows from 'frm' to 'to'
        f_, t_ = frm[0], to[0]
        if f_ >= 0:
            mat[f_, row] += 1.0
            mat[row, f_] -= 1.0
        mat[t_, row] -= 1.0
        mat[row, t_] += 1.0
        row += 1
    for first, z_route in routes:  # V_from - V_to = Z I: V_to - V_from + Z I = 0
        rr = [n_nodes + first + c for c in range(3)]
        mat[np.ix_(rr, rr)] += z_route
    src_rows = []
    for bus, zsrc, emf in src:
        cols = list(range(row, row + 3))
        src_rows.append(cols)
        for c in range(3):
            mat[bus + c, row + c] -= 1.0  # source current enters the bus
            mat[row + c, bus + c] = 1.0
        mat[np.ix_(cols, cols)] = zsrc
        rhs[cols] = emf
        row += 3
    off = 3 * (fault_circuit - 1)
    f_nodes = [node(j_f, off + c) for c in range(3)]
    v_nodes = f_nodes  # the line point (v_f)
    if z_branch_ohm is not None:
        yb = np.linalg.inv(np.asarray(z_branch_ohm, dtype=complex))
        idx = f_nodes + branch_nodes
        mat[np.ix_(idx, idx)] += np.block([[yb, -yb], [-yb, yb]])
        f_nodes = branch_nodes
    f_cols = list(range(row, row + 3))
    for c in range(3):
        mat[f_nodes[c], row + c] += 1.0  # fault current leaves the fault node
    mat[np.ix_(f_cols, f_nodes)] = p_v
    mat[np.ix_(f_cols, f_cols)] = p_i
    sol = np.linalg.solve(mat, rhs)

    volt = sol[:n_nodes]

    def current(key: str) -> np.ndarray:
        idx = ct.get(key)
        return sol[[n_nodes + i for i in idx]] if idx else np.zeros(3, dtype=complex)

    def seg_currents(j: int) -> np.ndarray:
        idx = [node(j, c) for c in range(n)] + [node(j + 1, c) for c in range(n)]
        return seg_y[j] @ volt[idx]  # into the segment at its S end (:n) and R end (n:)

    end_s, end_r = f"s{fault_circuit}", f"r{fault_circuit}"
    i_from_s = -seg_currents(j_f - 1)[n + off:n + off + 3] if j_f > 0 else current(end_s)
    i_from_r = -seg_currents(j_f)[off:off + 3] if j_f < last else current(end_r)
    v_s, v_r = volt[bus_s:bus_s + 3], volt[bus_r:bus_r + 3]
    for e in line.elements:  # a relay VT on the line side of an element at its bus
        if e.vt_line_side:  # (of the circuit on the bus: circuit 2 where 1 is open there)
            j = 1 if e.at == 0.0 else last - 1
            off_e = 3 * (parallel_state == ("faulted_open_at_s" if e.at == 0.0
                                            else "faulted_open_at_r"))
            if e.at == 0.0:
                v_s = volt[[node(j, off_e + c) for c in range(3)]]
            else:
                v_r = volt[[node(j, off_e + c) for c in range(3)]]
    return FaultCase(
        v_s=v_s,
        i_s=current("s1"),
        i_s_parallel=current("s2"),
        v_r=v_r,
        i_r=current("r1"),
        i_r_parallel=current("r2"),
        v_f=volt[v_nodes],
        i_fault=sol[f_cols],
        i_f_from_s=i_from_s,
        i_f_from_r=i_from_r,
    )


# --------------------------------------------------------------------------------------
# Three-terminal (teed) line, one or two circuits (reference for tests/test_teed_lines.py)
# --------------------------------------------------------------------------------------


@dataclass(frozen=True, eq=False)
class TeedCase:
    """Results of :func:`solve_teed_single` per end name ("S", "R", "T"): the bus voltage,
    circuit 1's current into the line and circuit 2's (zeros where there is none), each a
    (3,) complex array [V or A]; and the fault currents (3,) [A]."""

    v: dict
    i: dict
    i_parallel: dict
    i_fault: np.ndarray


def solve_teed_single(
    legs: tuple,
    terminals: tuple,
    emf_v: tuple[complex, complex, complex],
    *,
    fault_leg: str,
    m: float,
    fault_type: str,
    r_fault_ohm: float,
    r_phase_ohm: float = 0.0,
    parallel_state: str = "in_service",
    fault_circuit: int = 1,
    transformer_z0: dict | None = None,
    elements: tuple = ((), (), ()),
) -> TeedCase:
    """One fault on a teed line by plain modified nodal analysis [1]_ (reference for tests).

    ``legs``: three (z (S, n, n) [ohm/m], y (S, n, n) [S/m] or None, lengths (S,) [m]),
    from bus S, R and T to the tee, sections in order from the bus; n = 6 on the S and R
    legs of a double-circuit line (circuit 1, then circuit 2), 3 on the branch. Nodes:
    the three buses, every conductor at every section boundary and at the fault point,
    the tee (circuit 1 shared by the three legs, circuit 2 by the legs from S and R only).
    Zero-impedance branches between each bus and its leg's end carry the relay currents
    (circuit 1, and circuit 2 in service; circuit 2 earthed: a branch to ground at both
    ends; isolated: nothing, and series-only a tie to ground at the S end, which closes
    no current path). ``terminals``: a Source (its Norton equivalent, EMF ``emf_v`` of
    phase A, positive sequence), or None (open; with ``transformer_z0[end]`` a
    grounded-star transformer, admittance P0/Z0 to ground). The fault: current unknowns
    leaving the faulted circuit's nodes at ``m`` of the faulted leg from its bus, with the
    exact fault constraints. ``elements`` per leg: (distance from its bus [m], impedance
    matrix (n, n) [ohm], VT on the line side) of lumped series elements, each stamped as
    a branch V_a - V_b = Z_e I between its bus-side and far-side nodes (a fault at its
    place sits on the bus side; the relay's voltage of a VT on the line side of an element
    at the bus is the far-side node's).
    """
    from relayset.physics.sequence import fortescue_matrix

    ends = ("S", "R", "T")
    transformer_z0 = transformer_z0 or {}
    n_of = [z.shape[-1] for z, _, _ in legs]
    two = max(n_of) == 6
    count = 0

    def new(k: int) -> list[int]:
        nonlocal count
        out = list(range(count, count + k))
        count += k
        return out

    bus = {e: new(3) for e in ends}
    tee = new(6 if two else 3)
    leg_nodes, leg_parts, lumped, vt_nodes = [], [], [], {}
    f_leg = ends.index(fault_leg)
    f_nodes = None
    for k, (z, y, lengths) in enumerate(legs):
        n = n_of[k]
        edges = np.concatenate([[0.0], np.cumsum(lengths)])
        tol = _SNAP_REL * edges[-1]
        cuts = list(edges)
        x_f = m * edges[-1]
        for x in ([x_f] if k == f_leg else []) + [el[0] for el in elements[k]]:
            if all(abs(x - c) > tol for c in cuts):
                cuts = sorted([*cuts, x])
        # node sets per boundary: the bus side and the far side (apart at an element)
        nodes = [new(n) for _ in cuts[:-1]] + [tee[:n]]  # the last boundary is the tee
        far = list(nodes)
        for x, z_e, vt_line in elements[k]:
            j = int(np.argmin([abs(c - x) for c in cuts]))
            far[j] = new(n)
            lumped.append((nodes[j], far[j], np.asarray(z_e, dtype=complex)))
            if vt_line and j == 0:
                vt_nodes[ends[k]] = far[j][:3]
        parts = []
        for j in range(len(cuts) - 1):
            sec = int(np.searchsorted(edges, 0.5 * (cuts[j] + cuts[j + 1])) - 1)
            parts.append((far[j], nodes[j + 1],
                          _segment_nodal(z[sec], None if y is None else y[sec],
                                         cuts[j + 1] - cuts[j])))
        leg_nodes.append(nodes)
        leg_parts.append(parts)
        if k == f_leg:  # a fault at an element's place: on its bus side
            j = int(np.argmin([abs(c - x_f) for c in cuts]))
            off = 3 * (fault_circuit - 1)
            f_nodes = nodes[j][off:off + 3]
    n_nodes = count
    # Zero-impedance branches: (from node or None for ground, to node), current to "to".
    branches = []
    for k, e in enumerate(ends):
        end_nodes = leg_nodes[k][0]
        for c in range(3):
            branches.append((bus[e][c], end_nodes[c]))
        if n_of[k] == 6:
            for c in range(3):
                if parallel_state == "in_service":
                    branches.append((bus[e][c], end_nodes[3 + c]))
                elif parallel_state == "earthed":
                    branches.append((None, end_nodes[3 + c]))
    isolated_tie = (two and parallel_state == "isolated"
                    and all(y is None for _, y, _ in legs))
    n_lumped = sum(len(a) for a, _, _ in lumped)
    size = n_nodes + len(branches) + 3 + (3 if isolated_tie else 0) + n_lumped
    mat = np.zeros((size, size), dtype=complex)
    rhs = np.zeros(size, dtype=complex)
    for k in range(3):
        for a_ids, b_ids, yy in leg_parts[k]:
            ids = a_ids + b_ids
            mat[np.ix_(ids, ids)] += yy
    col = size - n_lumped
    for a_ids, b_ids, z_e in lumped:  # V_a - V_b - Z_e I = 0, I from a to b
        cols = list(range(col, col + len(a_ids)))
        col += len(a_ids)
        mat[np.ix_(cols, a_ids)] += np.eye(len(a_ids))
        mat[np.ix_(cols, b_ids)] -= np.eye(len(a_ids))
        mat[np.ix_(cols, cols)] -= z_e
        mat[np.ix_(a_ids, cols)] += np.eye(len(a_ids))
        mat[np.ix_(b_ids, cols)] -= np.eye(len(a_ids))
    a_pos = fortescue_matrix()[:, 1]
    for k, e in enumerate(ends):
        term = terminals[k]
        b = bus[e]
        if isinstance(term, Source):
            ys = np.linalg.inv(term.phase_matrix())
            mat[np.ix_(b, b)] += ys
            rhs[b] += ys @ (emf_v[k] * a_pos)
        elif e in transformer_z0:
            mat[np.ix_(b, b)] += np.full((3, 3), 1.0 / 3.0) / transformer_z0[e]
    for q, (a_node, b_node) in enumerate(branches):
        col = n_nodes + q
        # V_b - V_a = 0; the current leaves a (the bus or ground) and enters b
        mat[col, b_node] += 1.0
        mat[b_node, col] -= 1.0  # KCL at b: the current enters b (stamped as a source)
        if a_node is not None:
            mat[col, a_node] -= 1.0
            mat[a_node, col] += 1.0
    fc = n_nodes + len(branches)
    p_v, p_i = fault_constraints(fault_type, r_fault_ohm, r_phase_ohm)
    for c in range(3):
        mat[f_nodes[c], fc + c] += 1.0  # the fault current leaves the node
    mat[np.ix_(range(fc, fc + 3), f_nodes)] = p_v
    mat[fc:fc + 3, fc:fc + 3] = p_i
    if isolated_tie:  # circuit 2 floats: tie it to ground at the S end (no current path)
        s_end = leg_nodes[0][0]
        for c in range(3):
            col = fc + 3 + c
            mat[col, s_end[3 + c]] = 1.0
            mat[s_end[3 + c], col] = -1.0
    sol = np.linalg.solve(mat, rhs)
    v, i, i_par = {}, {}, {}
    for k, e in enumerate(ends):
        v[e] = sol[vt_nodes[e]] if e in vt_nodes else sol[bus[e]]  # the relay's VT
        cur = [sol[n_nodes + q] for q, (_, b_node) in enumerate(branches)
               if b_node in leg_nodes[k][0]]
        i[e] = np.array(cur[:3])
        i_par[e] = np.array(cur[3:6]) if len(cur) == 6 else np.zeros(3, dtype=complex)
    return TeedCase(v, i, i_par, sol[fc:fc + 3])
