"""Line parameters of a study: primitive matrices, reductions, transposition, sequences."""

from __future__ import annotations

import itertools
import math

import numpy as np

from relayset.physics import impedance, shunt, transposition
from relayset.physics.longline import long_line_equivalent
from relayset.physics.sequence import (
    residual_compensation,
    residual_compensation_split,
    to_sequence,
    unbalance_factors,
)
from relayset.results.parameters import (
    K0,
    Arrangement,
    CableSummary,
    CircuitSequence,
    LineParameters,
    WirePosition,
)
from relayset.studies.geometry import LineGeometry


def position_matrices(geo: LineGeometry, wires=None) -> tuple[np.ndarray, np.ndarray]:
    """Series impedance [ohm/m] and shunt admittance [S/m] by phase position.

    ``wires``: one tower's cross-section (default: the first section's, ``geo.wires``).

    Order of elimination: continuously earthed shield wires by Kron reduction, then the
    subconductors of each bundle by bundle reduction. Segmented and insulated shield wires
    carry no series current; for capacitance, segmented ones are at earth potential and
    insulated ones float.
    """
    wires = geo.wires if wires is None else wires
    phase_idx = [i for i, w in enumerate(wires) if w.role == "phase"]
    earthed_series = [i for i, w in enumerate(wires)
                      if w.role == "shield" and w.grounding == "continuous"]
    earthed_shunt = [i for i, w in enumerate(wires)
                     if w.role == "shield" and w.grounding in ("continuous", "segmented")]
    floating_shunt = [i for i, w in enumerate(wires)
                      if w.role == "shield" and w.grounding == "none"]
    n_pos = 3 * geo.n_circuits
    groups = [[k for k, i in enumerate(phase_idx) if wires[i].group == g] for g in range(n_pos)]

    def arrays(idx):
        sel = [wires[i] for i in idx]
        return (np.array([w.x_m for w in sel]), np.array([w.y_m for w in sel]), sel)

    x, y, sel = arrays(phase_idx + earthed_series)
    z_prim = impedance.primitive_impedance_ohm_per_m(
        x, y, [w.conductor.gmr_m for w in sel], [w.conductor.r_ac_ohm_per_m for w in sel],
        geo.frequency_hz, geo.resistivity_ohm_m, geo.earth_model, geo.earth_layers)
    z_sub = impedance.kron_reduce(z_prim, len(phase_idx))
    z_pos = impedance.bundle_reduce(z_sub, groups)

    order = phase_idx + earthed_shunt + floating_shunt
    x, y, sel = arrays(order)
    p = shunt.potential_coefficients_m_per_f(x, y, [w.conductor.radius_m for w in sel])
    n_ph = len(phase_idx)
    floating = list(range(n_ph + len(earthed_shunt), len(order)))
    c_sub = shunt.capacitance_f_per_m(p, n_ph, floating)
    c_pos = shunt.bundle_reduce_capacitance(c_sub, groups)
    y_pos = 1j * 2 * math.pi * geo.frequency_hz * c_pos
    return 0.5 * (z_pos + z_pos.T), 0.5 * (y_pos + y_pos.T)


def construction_matrices(geo: LineGeometry, k: int) -> tuple[np.ndarray, np.ndarray]:
    """Series impedance [ohm/m] and shunt admittance [S/m] by position of tower ``k``: its
    wires' (:func:`position_matrices`), or its buried cables' with the sheaths eliminated
    by their bonding (:func:`relayset.physics.cable.cable_section_matrices`)."""
    cable = geo.tower_cables[k] if geo.tower_cables else None
    if cable is None:
        return position_matrices(geo, geo.tower_wires[k])
    from relayset.physics.cable import cable_section_matrices

    return cable_section_matrices(
        cable.design, cable.formation, cable.spacing_m, cable.depth_m, cable.bonding,
        geo.frequency_hz, geo.resistivity_ohm_m, cable.n_circuits, cable.circuit_spacing_m,
        cable.ecc, cable.minor_sections_m)


def _cable_summaries(geo: LineGeometry, z_towers, y_towers) -> tuple[CableSummary, ...]:
    """Each cable's construction and its sequence impedances, phases ideally transposed."""
    from relayset.physics.cable import RETURN_PATHS
    from relayset.physics.sequence import to_sequence

    out = []
    for k, cable in enumerate(geo.tower_cables):
        if cable is None:
            continue
        blocks = [(to_sequence(z_towers[k][3 * c:3 * c + 3, 3 * c:3 * c + 3]),
                   to_sequence(y_towers[k][3 * c:3 * c + 3, 3 * c:3 * c + 3]))
                  for c in range(geo.n_circuits)]
        length = math.fsum(ln for ln, t in zip(geo.section_lengths_m, geo.section_towers,
                                               strict=True) if t == k)
        omega = 2 * math.pi * geo.frequency_hz
        out.append(CableSummary(
            cable.name, k, cable.bonding, RETURN_PATHS[cable.return_paths_key], cable.formation,
            cable.depth_m, cable.spacing_m, length,
            tuple(complex(z[1, 1]) for z, _ in blocks), tuple(complex(z[0, 0]) for z, _ in blocks),
            tuple(float(y[1, 1].imag) / omega for _, y in blocks)))
    return tuple(out)


def _block_sequence(m: np.ndarray, n_c: int) -> np.ndarray:
    out = np.empty_like(m, dtype=complex)
    for a in range(n_c):
        for b in range(n_c):
            out[3 * a:3 * a + 3, 3 * b:3 * b + 3] = to_sequence(m[3 * a:3 * a + 3,
                                                                  3 * b:3 * b + 3])
    return out


def _arrangement(name, description, z_sections, y_sections, lengths, n_c) -> Arrangement:
    zabc = transposition.weighted_average(z_sections, lengths)
    yabc = transposition.weighted_average(y_sections, lengths)
    z012 = _block_sequence(zabc, n_c)
    m0, m2 = [], []
    for c in range(n_c):
        a, b = unbalance_factors(z012[3 * c:3 * c + 3, 3 * c:3 * c + 3])
        m0.append(a)
        m2.append(b)
    z0m = complex(z012[0, 3]) if n_c == 2 else None
    return Arrangement(name, description, zabc, yabc, z012, tuple(m0), tuple(m2), z0m)


def plan_sections(geo: LineGeometry, plan: str
                  ) -> tuple[list[list[int]], list[float], list[int]]:
    """The sections of an arrangement: phase orders, lengths [m] and tower indices.

    ``actual_plan`` is the study's plan. ``untransposed`` holds the first section's order,
    ``ideal_cycle`` rotates it cyclically in three equal parts of the length. With several
    tower types every stretch keeps its own tower (the sections cut where needed).
    """
    orders = [list(o) for o in geo.section_orders]
    lengths = [float(v) for v in geo.section_lengths_m]
    towers = list(geo.section_towers) or [0] * len(orders)
    if plan == "actual_plan":
        return orders, lengths, towers
    cycle = transposition.cyclic_orders(orders[0], geo.n_circuits)
    if len(geo.tower_names) <= 1:
        if plan == "untransposed":
            return orders[:1], [geo.length_m], [0]
        return cycle, [geo.length_m / 3] * 3, [0] * 3
    if plan == "untransposed":
        return [orders[0]] * len(orders), lengths, towers
    # The same route (each stretch on its own towers) with the phases rotated at one and two
    # thirds of the length: the sections cut at those two points.
    edges = np.concatenate([[0.0], np.cumsum(lengths)])
    total = float(edges[-1])
    cuts = sorted({*edges.tolist(), total / 3, 2 * total / 3})
    out_o, out_l, out_t = [], [], []
    for a, b in itertools.pairwise(cuts):
        if b - a <= 1e-9 * total:
            continue
        mid = 0.5 * (a + b)
        k = min(int(np.searchsorted(edges, mid)) - 1, len(lengths) - 1)
        out_o.append(cycle[min(int(3 * mid / total), 2)])
        out_l.append(b - a)
        out_t.append(towers[k])
    return out_o, out_l, out_t


def section_stack(z_towers, orders, towers) -> np.ndarray:
    """Phase-ordered matrices of the sections, (S, n, n), each from its tower's matrix by
    position (``z_towers``: one per tower)."""
    return np.stack([transposition.to_phase_order(z_towers[t], o)
                     for o, t in zip(orders, towers, strict=True)])


def compute_parameters(geo: LineGeometry) -> LineParameters:
    """All line parameters of a study's geometry (pure computation)."""
    z_pos, y_pos = position_matrices(geo)
    n_c = geo.n_circuits
    lengths = np.array(geo.section_lengths_m)
    orders = [list(o) for o in geo.section_orders]
    arrangements = {}
    z_towers: tuple[np.ndarray, ...] = ()
    y_towers: tuple[np.ndarray, ...] = ()
    if len(geo.tower_names) > 1:
        mats = [(z_pos, y_pos)] + [construction_matrices(geo, k)
                                   for k in range(1, len(geo.tower_names))]
        z_towers = tuple(m[0] for m in mats)
        y_towers = tuple(m[1] for m in mats)
        for name, description in (
                ("untransposed", "first section's phase order held over the whole line, "
                                 "each section on its own towers"),
                ("actual_plan", f"the transposition plan of the study ({len(orders)} "
                                "section(s), each on its own towers)"),
                ("ideal_cycle", "three equal parts of the line, phases rotated "
                                "cyclically, each stretch on its own towers")):
            ords, lens, tws = plan_sections(geo, name)
            arrangements[name] = _arrangement(
                name, description, section_stack(z_towers, ords, tws),
                section_stack(y_towers, ords, tws), lens, n_c)
    else:
        def stack(orders_):
            return (transposition.section_matrices(z_pos, orders_),
                    transposition.section_matrices(y_pos, orders_))

        zs, ys = stack(orders[:1])
        arrangements["untransposed"] = _arrangement(
            "untransposed", "first section's phase order held over the whole line", zs, ys,
            [1.0], n_c)
        zs, ys = stack(orders)
        arrangements["actual_plan"] = _arrangement(
            "actual_plan", f"the transposition plan of the study ({len(orders)} section(s))",
            zs, ys, lengths, n_c)
        zs, ys = stack(transposition.cyclic_orders(orders[0], n_c))
        arrangements["ideal_cycle"] = _arrangement(
            "ideal_cycle", "three equal sections, phases rotated cyclically", zs, ys,
            [1.0, 1.0, 1.0], n_c)

    plan = arrangements["actual_plan"]
    omega = 2 * math.pi * geo.frequency_hz
    v_ph = geo.v_nominal_v / math.sqrt(3)
    circuits = []
    for c in range(n_c):
        blk = slice(3 * c, 3 * c + 3)
        z012 = plan.z012_ohm_per_m[blk, blk]
        y012 = _block_sequence(plan.yabc_s_per_m, n_c)[blk, blk]
        z1, z0 = complex(z012[1, 1]), complex(z012[0, 0])
        y1, y0 = complex(y012[1, 1]), complex(y012[0, 0])
        kr, kx = residual_compensation_split(z1, z0)
        circuits.append(CircuitSequence(
            circuit=geo.position_names[3 * c].split("/")[0],
            z1_ohm_per_m=z1,
            z0_ohm_per_m=z0,
            k0=K0(residual_compensation(z1, z0), kr, kx, z0 / z1),
            c1_f_per_m=y1.imag / omega,
            c0_f_per_m=y0.imag / omega,
            b1_s_per_m=y1.imag,
            charging_current_a_per_m=v_ph * y1.imag,
            z1_ohm=z1 * geo.length_m,
            z0_ohm=z0 * geo.length_m,
            charging_current_a=v_ph * y1.imag * geo.length_m,
            positive_long_line=long_line_equivalent(z1, y1, geo.length_m),
            zero_long_line=long_line_equivalent(z0, y0, geo.length_m),
        ))
    k0m = None
    if n_c == 2 and plan.z0m_ohm_per_m is not None:
        k0m = plan.z0m_ohm_per_m / (3 * circuits[0].z1_ohm_per_m)
    neighbour = corridor = None
    if geo.corridor is not None:  # shared corridors: the neighbours' coupling
        from relayset.studies.corridor import neighbour_parameters

        corridor = neighbour_parameters(geo, z_towers or (z_pos,), y_towers or (y_pos,),
                                        circuits[0].z1_ohm, circuits[0].z0_ohm)
        neighbour = corridor.neighbours[0]
    labels = geo.phase_labels
    cables = _cable_summaries(geo, z_towers, y_towers)
    section_orders = tuple(
        tuple(labels[i // 3][i % 3] for i in o) for o in geo.section_orders)
    conductors = tuple({w.conductor.name: w.conductor
                        for ws in (geo.tower_wires or (geo.wires,)) for w in ws}.values())
    return LineParameters(
        length_m=geo.length_m,
        frequency_hz=geo.frequency_hz,
        earth_resistivity_ohm_m=geo.resistivity_ohm_m,
        earth_model=geo.earth_model,
        v_nominal_v=geo.v_nominal_v,
        positions=geo.position_names,
        phase_labels=geo.phase_labels,
        section_lengths_m=geo.section_lengths_m,
        section_orders=section_orders,
        conductors=conductors,
        z_by_position_ohm_per_m=z_pos,
        y_by_position_s_per_m=y_pos,
        tower_names=geo.tower_names,
        section_towers=geo.section_towers,
        z_by_tower_ohm_per_m=z_towers,
        y_by_tower_s_per_m=y_towers,
        cables=cables,
        arrangements=arrangements,
        circuits=tuple(circuits),
        k0m=k0m,
        neighbour=neighbour,
        corridor=corridor,
        assumptions=geo.assumptions + tuple(n for c in conductors for n in c.notes),
        wires=tuple(
            WirePosition(w.role, w.label,
                         geo.position_names[w.group] if w.role == "phase"
                         else w.label.removeprefix("shield wire "),
                         float(w.x_m), float(w.y_m), 2 * w.conductor.radius_m,
                         w.grounding if w.role == "shield" else None)
            for w in geo.wires),
    )
