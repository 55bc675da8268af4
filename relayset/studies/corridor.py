"""Shared corridors in the pipeline: the neighbouring line's matrices, its cascade and its
terminals (the study's ``[[neighbours]]``, read by :mod:`relayset.inputs.corridor`).

The neighbour is circuit 2 of the six-conductor fault solver. Over the shared stretch each
section's 6x6 matrices come from the corridor's cross-section (the protected line's tower
and the neighbour's conductors together: Carson's earth return, shield wires and bundles
reduced as for any tower); elsewhere circuit 2 is a zero-impedance, uncoupled connector
(zero rows and columns: no coupling, no impedance, no charging), its routes outside the
corridor lumped into its terminals (:class:`relayset.physics.network.NeighbourEnd`), so
the coupling acts over the shared length only.
"""

from __future__ import annotations

import itertools
from dataclasses import replace

import numpy as np

from relayset.physics import network, transposition
from relayset.physics.sequence import balanced_phase_matrix, to_sequence
from relayset.results.corridor import NeighbourParameters

#: The neighbour's phases A, B, C are conductors 3, 4, 5 in every section (no
#: transposition of the neighbour within the corridor: stated in the assumptions).
NEIGHBOUR_ORDER = [3, 4, 5]
#: The neighbour's states, as the parallel circuit's (same names, same solver states):
#: in service, out and earthed at its terminals, out and isolated.
NEIGHBOUR_STATES = network.PARALLEL_STATES


def neighbour_parameters(geo, z_towers, y_towers, z1_line_ohm: complex,
                         z0_line_ohm: complex) -> NeighbourParameters:
    """The neighbour's coupling with the protected line (see the module notes).

    ``z_towers``/``y_towers``: the protected line's matrices by position of each tower;
    ``z1_line_ohm``, ``z0_line_ohm``: the protected line's whole Z1 and Z0 [ohm].
    """
    from relayset.studies.parameters import position_matrices

    cor = geo.corridor
    two = replace(geo, n_circuits=2)
    tower_wires = geo.tower_wires or (geo.wires,)
    pieces = corridor_pieces(geo, *_plan(geo, "actual_plan"))
    towers = tuple(sorted({t for _o, _l, t, shared in pieces if shared}))
    mats = [position_matrices(two, tuple(tower_wires[t]) + geo.corridor_wires)
            for t in towers]
    lengths = {t: sum(ln for _o, ln, tt, sh in pieces if sh and tt == t) for t in towers}
    total = sum(lengths.values())
    z1 = z0 = z0m = 0j
    for t, (z6, _y6) in zip(towers, mats, strict=True):
        seq = to_sequence(z6[3:, 3:])
        w = lengths[t] / total
        z1 += w * complex(seq[1, 1])
        z0 += w * complex(seq[0, 0])
        z0m += w * complex(to_sequence(z6[:3, 3:])[0, 0])
    rz1 = cor.route_z1_ohm_per_m if cor.route_z1_ohm_per_m is not None else z1
    rz0 = cor.route_z0_ohm_per_m if cor.route_z0_ohm_per_m is not None else z0
    zm_total = z0m * cor.shared_length_m
    return NeighbourParameters(
        name=cor.name, buses=cor.buses, on_line_bus=cor.on_line_bus, start_m=cor.start_m,
        end_m=cor.end_m, route_lengths_m=cor.route_lengths_m, towers=towers,
        z_by_position_ohm_per_m=tuple(m[0] for m in mats),
        y_by_position_s_per_m=tuple(m[1] for m in mats),
        z1_ohm_per_m=z1, z0_ohm_per_m=z0, z0m_ohm_per_m=z0m,
        route_z1_ohm_per_m=complex(rz1), route_z0_ohm_per_m=complex(rz0),
        k0m_equivalent=zm_total / (3 * z1_line_ohm), coupling_ratio=zm_total / z0_line_ohm)


def _plan(geo, plan: str):
    from relayset.studies.parameters import plan_sections

    return plan_sections(geo, plan)


def corridor_pieces(geo, orders, lengths, towers):
    """The sections of a plan cut where the shared stretch begins and ends: (order,
    length [m], tower, shared) per piece, from the from-substation."""
    cor = geo.corridor
    edges = np.concatenate([[0.0], np.cumsum(lengths)])
    total = float(edges[-1])
    cuts = sorted({*edges.tolist(), cor.start_m, cor.end_m})
    out = []
    for a, b in itertools.pairwise(cuts):
        if b - a <= 1e-9 * total:
            continue
        mid = 0.5 * (a + b)
        k = min(int(np.searchsorted(edges, mid)) - 1, len(lengths) - 1)
        out.append((list(orders[k]), b - a, towers[k], cor.start_m < mid < cor.end_m))
    return out


def corridor_cascade(geo, params, plan: str, shunt: bool) -> network.LineCascade:
    """The six-conductor cascade of an arrangement with the neighbour (see the module
    notes), at the resistivity of ``params``."""
    nbp = params.neighbour
    z_t, y_t = params.tower_matrices()
    zs, ys, lens = [], [], []
    for order, ln, t, shared in corridor_pieces(geo, *_plan(geo, plan)):
        if shared:
            j = nbp.towers.index(t)
            o6 = list(order) + NEIGHBOUR_ORDER
            z = transposition.to_phase_order(nbp.z_by_position_ohm_per_m[j], o6)
            y = transposition.to_phase_order(nbp.y_by_position_s_per_m[j], o6)
        else:
            z = np.zeros((6, 6), dtype=complex)
            y = np.zeros((6, 6), dtype=complex)
            z[:3, :3] = transposition.to_phase_order(z_t[t], order)
            y[:3, :3] = transposition.to_phase_order(y_t[t], order)
        zs.append(z)
        ys.append(y)
        lens.append(ln)
    return network.LineCascade(np.stack(zs), np.array(lens), np.stack(ys) if shunt else None)


#: Points of the shared stretch at which the verification faults the neighbour, as
#: fractions of it (both ends of the stretch included; common practice, no source: the
#: coupling's effect on the protected line's relays varies smoothly along it).
NEIGHBOUR_FAULT_POINTS = (0.0, 0.25, 0.5, 0.75, 1.0)


def neighbour_fault_locations(geo, m: np.ndarray) -> np.ndarray:
    """Fault locations on the neighbour [1 of the protected line from its from-end]: the
    :data:`NEIGHBOUR_FAULT_POINTS` of the shared stretch."""
    cor = geo.corridor
    a, b = cor.start_m / geo.length_m, cor.end_m / geo.length_m
    return np.clip(a + (b - a) * np.array(NEIGHBOUR_FAULT_POINTS), 0.0, 1.0)


def protected_part(line: network.LineCascade) -> network.LineCascade:
    """The protected circuit alone (the load flow's line: the neighbour's positive-sequence
    coupling is negligible and its own buses carry its load)."""
    return network.LineCascade(line.z_ohm_per_m[:, :3, :3], line.length_m,
                               None if line.y_s_per_m is None else line.y_s_per_m[:, :3, :3])


def neighbour_ends(study, params, source: str) -> tuple[network.NeighbourEnd,
                                                        network.NeighbourEnd]:
    """The neighbour's terminals at the from side and the to side of the cascade."""
    from relayset.studies.reach import source_from_data

    nbp = params.neighbour
    cor = study.neighbours[0]
    out = []
    for k, bus in enumerate(cor.buses):
        ln = cor.route_lengths[k]
        z = balanced_phase_matrix(nbp.route_z1_ohm_per_m * ln, nbp.route_z0_ohm_per_m * ln)
        if nbp.on_line_bus[k]:
            out.append(network.NeighbourEnd(z, on_line_bus=True))
        else:
            out.append(network.NeighbourEnd(z, source_from_data(
                study, cor.sources[bus], f"neighbours[0].sources.{bus}", source)))
    return out[0], out[1]
