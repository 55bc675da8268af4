"""Shared corridors in the pipeline: the neighbouring lines' matrices, the cascade and their
terminals (the study's ``[[neighbours]]``, read by :mod:`relayset.inputs.corridor`).

Each neighbour is one more circuit of the fault solver, after the protected line's one or
two (n = 3 (circuits + neighbours) conductors). Wherever one or more neighbours run beside
the line, each piece's matrices come from the corridor's cross-section there (the protected
line's tower and the conductors of every neighbour present together: Carson's earth
return, shield wires and bundles reduced as for any tower); a neighbour not present on a
piece is a zero-impedance, uncoupled connector there (zero rows and columns: no coupling,
no impedance, no charging), its routes outside the corridor lumped into its terminals
(:class:`relayset.physics.network.NeighbourEnd`), so each coupling acts over the shared
length only.

The states solved (:func:`corridor_states`): every neighbour in service; each neighbour in
turn out and earthed, and out and isolated, with the others in service; and, with more than
one neighbour, all of them out and earthed together (the earthed state is the one whose
induced currents make the ground loops overreach, and they add up). That is 1 + 2N (+1)
states for N neighbours, linear in N instead of the 3^N of every combination: the
combinations left out put two or more neighbours out at once in mixed states, bounded by
the single-neighbour states and the all-earthed one (common practice, no source: outages
of two lines of one corridor at once are planned, not a contingency). A double circuit's
parallel circuit takes its three states with every neighbour in service, and is earthed
too in the all-earthed state.
"""

from __future__ import annotations

import itertools
from dataclasses import dataclass, replace

import numpy as np

from relayset.physics import network, transposition
from relayset.physics.sequence import balanced_phase_matrix, to_sequence
from relayset.results.corridor import CorridorParameters, NeighbourParameters

#: The states of one neighbour, as the parallel circuit's (same names, same solver states):
#: in service, out and earthed at its terminals, out and isolated.
NEIGHBOUR_STATES = network.PARALLEL_STATES


def neighbour_order(n_c: int, j: int) -> list[int]:
    """The conductors of neighbour ``j``'s phases A, B, C (``n_c`` protected circuits; no
    transposition of a neighbour within the corridor: stated in the assumptions)."""
    return [3 * (n_c + j) + k for k in range(3)]


def neighbour_combinations(n: int) -> tuple[tuple[str, ...], ...]:
    """The neighbours' states solved together (see the module notes), all in service
    first."""
    all_in = ("in_service",) * n
    out = [all_in]
    for j in range(n):
        out += [(*all_in[:j], s, *all_in[j + 1:]) for s in NEIGHBOUR_STATES[1:]]
    if n > 1:
        out.append(("earthed",) * n)
    return tuple(out)


@dataclass(frozen=True)
class CorridorState:
    """One state of the parallel circuit (if any) and of every neighbour, with its names."""

    parallel: str  #: the parallel circuit's state ("in_service" for a single circuit)
    neighbours: tuple[str, ...]  #: each neighbour's state
    label: str  #: as a verification case names it ("neighbour earthed", ...)
    reach_label: str  #: as the reach study's arrangement names it (``neighbour_state``)

    @property
    def all_in_service(self) -> bool:
        """Every circuit in service (the state faults on the other circuits are solved in)."""
        return self.parallel == "in_service" and all(s == "in_service"
                                                     for s in self.neighbours)

    def solver_args(self, ends) -> dict:
        """The fault solver's keywords for this state (``ends``: :func:`neighbour_ends`)."""
        return {"parallel_state": self.parallel, "neighbours": ends,
                "neighbour_states": self.neighbours}


def _neighbour_words(states: tuple[str, ...], names: tuple[str, ...]) -> str:
    if len(states) == 1:
        return f"neighbour {states[0]}"
    out = [(names[j], s) for j, s in enumerate(states) if s != "in_service"]
    if not out or (len(out) == len(states) and len({s for _n, s in out}) == 1):
        return f"neighbours {states[0]}"
    return ", ".join(f"neighbour {n} {s}" for n, s in out) + ", the others in_service"


def state_of(parallel: str | None, states: tuple[str, ...],
             names: tuple[str, ...]) -> CorridorState:
    """The state with its names; ``parallel`` None: a single-circuit line."""
    words = _neighbour_words(states, names)
    label = words if parallel is None else f"{words}, parallel {parallel}"
    reach = states[0] if len(states) == 1 else words
    return CorridorState(parallel or "in_service", states, label, reach)


def corridor_states(geo, parallel: str | None = None) -> tuple[CorridorState, ...]:
    """The states solved (see the module notes). ``parallel``: the reach study's one
    parallel-circuit state (None: the verification's, every state of it)."""
    names = tuple(c.name for c in geo.corridors)
    combos = neighbour_combinations(len(names))
    if geo.n_circuits == 1:
        return tuple(state_of(None, c, names) for c in combos)
    if parallel is not None:
        return tuple(state_of(parallel, c, names) for c in combos)
    out = [state_of(p, combos[0], names) for p in network.PARALLEL_STATES]
    out += [state_of("in_service", c, names) for c in combos[1:]]
    out.append(state_of("earthed", ("earthed",) * len(names), names))
    return tuple(out)


def state_by_label(geo, label: str) -> CorridorState:
    """The verification's state that a case names (its ``parallel_state``)."""
    return next(s for s in corridor_states(geo) if s.label == label)


def _wires_of(geo, j: int):
    """Neighbour ``j``'s wires on the cross-section, regrouped as the ``at``-th neighbour."""
    n_c = geo.n_circuits
    for w in geo.corridor_wires:
        if w.role == "phase" and w.group // 3 - n_c == j:
            yield w
        elif w.role == "shield" and w.group // 1000 - 1 == j:
            yield w


def _joint_matrices(geo, tower_wires, t: int, present: tuple[int, ...]):
    """(z, y) by position of tower ``t`` with the neighbours ``present`` beside it, n x n
    for every neighbour of the study (the absent ones' rows and columns zero)."""
    from relayset.studies.parameters import position_matrices

    n_c, n_nb = geo.n_circuits, len(geo.corridors)
    wires = list(tower_wires[t])
    for rank, j in enumerate(present):
        for w in _wires_of(geo, j):
            if w.role == "phase":
                wires.append(replace(w, group=3 * (n_c + rank) + w.group % 3))
            else:
                wires.append(w)
    z_p, y_p = position_matrices(replace(geo, n_circuits=n_c + len(present)), tuple(wires))
    idx = list(range(3 * n_c)) + [c for j in present for c in neighbour_order(n_c, j)]
    n = 3 * (n_c + n_nb)
    z, y = np.zeros((n, n), dtype=complex), np.zeros((n, n), dtype=complex)
    z[np.ix_(idx, idx)], y[np.ix_(idx, idx)] = z_p, y_p
    return z, y


def neighbour_parameters(geo, z_towers, y_towers, z1_line_ohm: complex,
                         z0_line_ohm: complex) -> CorridorParameters:
    """Every neighbour's coupling with the protected line and the corridor's matrices (see
    the module notes).

    ``z_towers``/``y_towers``: the protected line's matrices by position of each tower;
    ``z1_line_ohm``, ``z0_line_ohm``: the protected line's (circuit 1's) whole Z1 and Z0
    [ohm].
    """
    tower_wires = geo.tower_wires or (geo.wires,)
    n_c = geo.n_circuits
    # Every (tower, neighbours present) of the three arrangements' pieces, solved once.
    joint: dict[tuple[int, tuple[int, ...]], tuple[np.ndarray, np.ndarray]] = {}
    for plan in ("actual_plan", "untransposed", "ideal_cycle"):
        for _o, _ln, t, present in corridor_pieces(geo, *_plan(geo, plan)):
            if present and (t, present) not in joint:
                joint[t, present] = _joint_matrices(geo, tower_wires, t, present)
    pieces = corridor_pieces(geo, *_plan(geo, "actual_plan"))
    out = []
    for j, cor in enumerate(geo.corridors):
        towers = tuple(sorted({t for _o, _l, t, pr in pieces if j in pr}))
        mats = [_joint_matrices(geo, tower_wires, t, (j,)) for t in towers]
        lengths = {t: sum(ln for _o, ln, tt, pr in pieces if j in pr and tt == t)
                   for t in towers}
        total = sum(lengths.values())
        keep = list(range(3 * n_c)) + neighbour_order(n_c, j)
        own = neighbour_order(n_c, j)
        z1 = z0 = z0m = 0j
        for t, (zz, _yy) in zip(towers, mats, strict=True):
            seq = to_sequence(zz[np.ix_(own, own)])
            w = lengths[t] / total
            z1 += w * complex(seq[1, 1])
            z0 += w * complex(seq[0, 0])
            z0m += w * complex(to_sequence(zz[np.ix_([0, 1, 2], own)])[0, 0])
        rz1 = cor.route_z1_ohm_per_m if cor.route_z1_ohm_per_m is not None else z1
        rz0 = cor.route_z0_ohm_per_m if cor.route_z0_ohm_per_m is not None else z0
        zm_total = z0m * cor.shared_length_m
        out.append(NeighbourParameters(
            name=cor.name, buses=cor.buses, on_line_bus=cor.on_line_bus,
            start_m=cor.start_m, end_m=cor.end_m, route_lengths_m=cor.route_lengths_m,
            towers=towers,
            z_by_position_ohm_per_m=tuple(m[0][np.ix_(keep, keep)] for m in mats),
            y_by_position_s_per_m=tuple(m[1][np.ix_(keep, keep)] for m in mats),
            z1_ohm_per_m=z1, z0_ohm_per_m=z0, z0m_ohm_per_m=z0m,
            route_z1_ohm_per_m=complex(rz1), route_z0_ohm_per_m=complex(rz0),
            k0m_equivalent=zm_total / (3 * z1_line_ohm),
            coupling_ratio=zm_total / z0_line_ohm))
    return CorridorParameters(neighbours=tuple(out), joint=joint)


def _plan(geo, plan: str):
    from relayset.studies.parameters import plan_sections

    return plan_sections(geo, plan)


def corridor_pieces(geo, orders, lengths, towers):
    """The sections of a plan cut where any shared stretch begins and ends: (order, length
    [m], tower, the neighbours present (indices, ascending)) per piece, from the
    from-substation."""
    cors = geo.corridors or (geo.corridor,)
    edges = np.concatenate([[0.0], np.cumsum(lengths)])
    total = float(edges[-1])
    cuts = sorted({*edges.tolist(), *(c.start_m for c in cors), *(c.end_m for c in cors)})
    out = []
    for a, b in itertools.pairwise(cuts):
        if b - a <= 1e-9 * total:
            continue
        mid = 0.5 * (a + b)
        k = min(int(np.searchsorted(edges, mid)) - 1, len(lengths) - 1)
        present = tuple(j for j, c in enumerate(cors) if c.start_m < mid < c.end_m)
        out.append((list(orders[k]), b - a, towers[k], present))
    return out


def corridor_cascade(geo, params, plan: str, shunt: bool) -> network.LineCascade:
    """The cascade of an arrangement with every neighbour (see the module notes), at the
    resistivity of ``params``."""
    cp = params.corridor
    n_c = geo.n_circuits
    n = 3 * (n_c + len(cp.neighbours))
    rest = list(range(3 * n_c, n))
    z_t, y_t = params.tower_matrices()
    zs, ys, lens = [], [], []
    for order, ln, t, present in corridor_pieces(geo, *_plan(geo, plan)):
        if present:
            zj, yj = cp.joint[t, present]
            z = transposition.to_phase_order(zj, list(order) + rest)
            y = transposition.to_phase_order(yj, list(order) + rest)
        else:
            z = np.zeros((n, n), dtype=complex)
            y = np.zeros((n, n), dtype=complex)
            m = 3 * n_c
            z[:m, :m] = transposition.to_phase_order(z_t[t], order)
            y[:m, :m] = transposition.to_phase_order(y_t[t], order)
        zs.append(z)
        ys.append(y)
        lens.append(ln)
    return network.LineCascade(np.stack(zs), np.array(lens), np.stack(ys) if shunt else None)


#: Points of the shared stretch at which the verification faults a neighbour, as
#: fractions of it (both ends of the stretch included; common practice, no source: the
#: coupling's effect on the protected line's relays varies smoothly along it).
NEIGHBOUR_FAULT_POINTS = (0.0, 0.25, 0.5, 0.75, 1.0)


def neighbour_fault_locations(geo, m: np.ndarray, j: int = 0) -> np.ndarray:
    """Fault locations on neighbour ``j`` [1 of the protected line from its from-end]: the
    :data:`NEIGHBOUR_FAULT_POINTS` of its shared stretch."""
    cor = (geo.corridors or (geo.corridor,))[j]
    a, b = cor.start_m / geo.length_m, cor.end_m / geo.length_m
    return np.clip(a + (b - a) * np.array(NEIGHBOUR_FAULT_POINTS), 0.0, 1.0)


def neighbour_circuit(geo, j: int) -> int:
    """The fault solver's circuit (1-based) of neighbour ``j``."""
    return geo.n_circuits + j + 1


def protected_part(line: network.LineCascade, n_circuits: int = 1) -> network.LineCascade:
    """The protected line's circuits alone (the load flow's line: the neighbours'
    positive-sequence coupling is negligible and their own buses carry their load)."""
    k = 3 * n_circuits
    return network.LineCascade(line.z_ohm_per_m[:, :k, :k], line.length_m,
                               None if line.y_s_per_m is None else line.y_s_per_m[:, :k, :k])


def neighbour_ends(study, params, source: str) -> tuple[
        tuple[network.NeighbourEnd, network.NeighbourEnd], ...]:
    """Every neighbour's terminals at the from side and the to side of the cascade."""
    from relayset.studies.reach import source_from_data

    out = []
    for j, (nbp, cor) in enumerate(zip(params.corridor.neighbours, study.neighbours,
                                       strict=True)):
        pair = []
        for k, bus in enumerate(cor.buses):
            ln = cor.route_lengths[k]
            z = balanced_phase_matrix(nbp.route_z1_ohm_per_m * ln,
                                      nbp.route_z0_ohm_per_m * ln)
            if nbp.on_line_bus[k]:
                pair.append(network.NeighbourEnd(z, on_line_bus=True))
            elif cor.file is not None:  # its own study file's source (messages name it)
                pair.append(network.NeighbourEnd(z, source_from_data(
                    study, cor.sources[bus], f"sources.{bus}", cor.file.path)))
            else:
                pair.append(network.NeighbourEnd(z, source_from_data(
                    study, cor.sources[bus], f"neighbours[{j}].sources.{bus}", source)))
        out.append((pair[0], pair[1]))
    return tuple(out)


def corridor_notes(cp: CorridorParameters, kind: str, double: bool = False) -> str:
    """What the reach study (``kind`` "reach") or the verification ("verification") did
    with the study's neighbouring lines, one paragraph; ``double``: beside a double
    circuit."""
    nbs = cp.neighbours
    one = len(nbs) == 1
    who = (f"{nbs[0].name} beside the line" if one else
           "; ".join(f"{nb.name} beside the line from {nb.start_m / 1e3:g} km to "
                     f"{nb.end_m / 1e3:g} km" for nb in nbs))
    if one and kind == "reach":
        who += f" over {nbs[0].shared_length_m / 1e3:g} km"
    elif one:
        who += f" from {nbs[0].start_m / 1e3:g} km to {nbs[0].end_m / 1e3:g} km"
    coupled = ("mutually coupled there only" if one else
               "each mutually coupled with the line, and with the others where they run "
               "together, over its shared stretch only")
    if one and not double:
        states = ("with it in service, out and earthed at its terminals, and out and "
                  "isolated")
    elif one:
        states = ("with it in service, out and earthed at its terminals, and out and "
                  "isolated (the parallel circuit in service), and with both out and "
                  "earthed" if kind == "verification" else
                  "with it in service, out and earthed at its terminals, and out and "
                  "isolated (the parallel circuit as the study sets it)")
    else:
        states = ("with every neighbour in service, each in turn out and earthed at its "
                  "terminals and out and isolated with the others in service, and all of "
                  "them out and earthed" + (" (the parallel circuit too)" if double
                                            and kind == "verification" else "")
                  + f": {2 * len(nbs) + 2} states of the neighbours instead of the "
                  f"{3 ** len(nbs)} of every combination (two or more lines of one corridor "
                  "out at once in mixed states are bounded by these; common practice, no "
                  "source)" + ("; the parallel circuit also out, earthed or isolated, with "
                               "every neighbour in service" if double
                               and kind == "verification" else ""))
    if kind == "reach":
        gov = ("the worst of the three governs zone 1" if one and not double
               else "the worst state governs zone 1")
        return (f"Shared corridor: {who}, {coupled}; the actual plan solved {states} ({gov}). "
                + ("The relay is not given its residual current (it ends on other buses): "
                   "no mutual compensation for it." if one else
                   "The relay is not given their residual currents (they end on other "
                   "buses): no mutual compensation for them."))
    from_pts = ", ".join(f"{100 * x:g}" for x in NEIGHBOUR_FAULT_POINTS)
    return (f"Shared corridor: {who}, {coupled}; every check is judged {states}. Faults on "
            + ("it" if one else "each") + " (every type and fault resistance, "
            + ("in service" if one else "every line in service")
            + f") at {from_pts} % of the shared stretch are external faults: zone 1 must not "
            "operate. The relay is not given "
            + ("its residual current (it ends on other buses), so there is no mutual "
               "compensation for it." if one else "their residual currents (they end on "
               "other buses), so there is no mutual compensation for them."))
