"""From a validated study to the arrays the physics needs: conductors, positions, sections."""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from relayset.errors import InputError, toml_key
from relayset.inputs import conductors as cond
from relayset.inputs.study_file import Study, study_warnings
from relayset.physics.conductor import bundle_offsets_m

#: Conductors closer than this (surface to surface) are taken as overlapping.
_MIN_CLEARANCE_M = 0.0


@dataclass(frozen=True)
class Wire:
    """One physical wire (a subconductor or an earth wire) at its mean height."""

    x_m: float
    y_m: float
    conductor: cond.ConductorData
    role: str  # "phase" or "shield"
    group: int  # index of the phase position (0..3n-1) or of the shield wire
    label: str  # e.g. "circuit 1, position left, sub 2"
    field: str  # the study-file field that placed it
    grounding: str = "continuous"


@dataclass(frozen=True)
class LineGeometry:
    """Every wire of the line and the plan of transposition, SI."""

    wires: tuple[Wire, ...]
    n_circuits: int
    position_names: tuple[str, ...]  # 3 per circuit, in the file's order
    phase_labels: tuple[tuple[str, str, str], ...]  # per circuit
    section_lengths_m: tuple[float, ...]
    section_orders: tuple[tuple[int, ...], ...]  # per section: phase index at each position
    length_m: float
    frequency_hz: float
    resistivity_ohm_m: float
    earth_model: str
    v_nominal_v: float
    assumptions: tuple[str, ...]
    #: Two-layer earth only: (lower resistivity [ohm m], upper-layer thickness [m]).
    earth_layers: tuple[float, float] | None = None
    #: With [towers.NAME] tables: the towers in order of first use, each one's wires (the
    #: first is ``wires``) and the tower of each section. Empty: one cross-section.
    tower_names: tuple[str, ...] = ()
    tower_wires: tuple[tuple[Wire, ...], ...] = ()
    section_towers: tuple[int, ...] = ()
    tower_position_names: tuple[tuple[str, ...], ...] = ()  #: per tower, like position_names
    #: Per tower: None (overhead) or its cable (relayset.inputs.cable.CableSection); the
    #: cables come after the overhead towers, with no wires.
    tower_cables: tuple = ()
    #: A neighbouring line in a shared corridor (``[[neighbours]]``): its stretch, buses and
    #: routes (the first; ``corridors`` all of them), and their wires on the corridor's
    #: cross-section (neighbour j's phases in groups 3 (n_circuits + j) + 0, 1, 2, its
    #: shield wires in groups 1000 (j + 1) + k).
    corridor: Any = None
    corridor_wires: tuple[Wire, ...] = ()
    corridors: tuple[Any, ...] = ()


def _conductor_props(study: Study, name: str, source: str) -> dict:
    ct = study.conductor_types[name]
    field = f"conductor_types.{name}"
    props: dict = {}
    if ct.code:
        key, entry = cond.lookup(ct.code, field=f"{field}.code", source=source)
        props.update({k: v for k, v in entry.items() if k not in ("aliases", "source")})
        props["_description"] = key
        props["_source"] = entry.get("source", "built-in table")
    explicit = {
        "outside_diameter_m": ct.outside_diameter,
        "gmr_m": ct.gmr,
        "strands_aluminium": ct.strands_aluminium,
        "strands_steel": ct.strands_steel,
        "wire_diameter_aluminium_m": ct.wire_diameter_aluminium,
        "wire_diameter_steel_m": ct.wire_diameter_steel,
        "ac_resistance_ohm_per_m": ct.ac_resistance,
        "ac_resistance_temperature_c": ct.ac_resistance_temperature,
        "dc_resistance_20c_ohm_per_m": ct.dc_resistance_20c,
        "temperature_coefficient_per_k": ct.temperature_coefficient,
        "ac_dc_ratio": ct.ac_dc_ratio,
        "operating_temperature_c": ct.operating_temperature,
    }
    props.update({k: v for k, v in explicit.items() if v is not None})
    if ct.code and any(v is not None for k, v in explicit.items()
                       if k != "operating_temperature_c"):
        props["_description"] = f"{props['_description']} (with explicit overrides)"
    return props


def _conductor_resolver(study: Study, source: str):
    """The conductor data of a [conductor_types] name of ``study``, resolved once."""
    f_hz = study.system.frequency
    resolved: dict[str, cond.ConductorData] = {}

    def conductor(name: str, field: str) -> cond.ConductorData:
        if name not in study.conductor_types:
            from relayset.errors import suggest

            raise InputError(
                "names no entry of [conductor_types]" + suggest(name, study.conductor_types),
                field=field, value=name, source=source,
            )
        if name not in resolved:
            resolved[name] = cond.resolve(
                name, _conductor_props(study, name, source), f_hz,
                field=f"conductor_types.{name}", source=source,
            )
        return resolved[name]

    return conductor


def build_geometry(study: Study, source: str = "<study>") -> LineGeometry:
    """Place every wire, resolve conductor data and check the geometry and the section plan."""
    f_hz = study.system.frequency
    conductor = _conductor_resolver(study, source)
    assumptions = [
        "Conductor height is the average over the span, h - 2/3 * sag (parabolic sag).",
        _earth_assumption(study.system),
        "Subconductors of a bundle share one voltage (bonded at the spacers).",
    ]
    assumptions.extend(study_warnings(study))
    if study.tee is not None:  # three-terminal line (relayset.studies.teed)
        assumptions.append(
            f"Three-terminal line: these parameters are of the line from "
            f"{study.ends[0]} to {study.ends[1]}; the branch from the tee at "
            f"{study.tee.distance / 1e3:g} km to {study.tee.substation} "
            f"({study.tee.length / 1e3:g} km) is built from its own sections in the "
            "three-terminal study ('relayset settings', 'relayset report'), which also "
            "gives the zones of a teed line.")
    if study.series_capacitors:  # lumped elements of the fault study, not of the line
        assumptions.append(
            "Series capacitors (" + ", ".join(b.name for b in study.series_capacitors)
            + "): not part of these line parameters (the line's own Z1, Z0 and k0, which "
            "the relay is set with); the banks enter the fault study, the settings and the "
            "verification ('relayset reach', 'relayset settings', 'relayset report').")
    if study.towers:
        tower_names = tuple(dict.fromkeys(sec.tower for sec in study.line.sections
                                          if sec.cable is None))
        cable_names = tuple(dict.fromkeys(sec.cable for sec in study.line.sections
                                          if sec.cable is not None))
        crossings = [
            ([(f"towers.{toml_key(t)}.positions.{toml_key(c.name)}[{{k}}]",
               study.towers[t].positions[c.name]) for c in study.circuits],
             study.towers[t].shield_wires, f"towers.{toml_key(t)}.shield_wires[{{k}}]")
            for t in tower_names]
        section_towers = tuple((tower_names + cable_names).index(sec.cable or sec.tower)
                               for sec in study.line.sections)
    else:
        cable_names = ()
        tower_names = ()
        crossings = [([(f"circuits[{c}].positions[{{k}}]", circ.positions)
                       for c, circ in enumerate(study.circuits)],
                      study.shield_wires, "shield_wires[{k}]")]
        section_towers = ()
    placed = [_place_wires(study, *cross, conductor, source) for cross in crossings]
    tower_wires = tuple(w for w, _ in placed)
    wires, position_names = placed[0]
    from relayset.inputs.cable import constructions

    cable_positions, cables, cable_notes = constructions(study, cable_names)
    assumptions.extend(cable_notes)
    all_shields = [sw for _, sws, _ in crossings for sw in sws]
    if any(sw.grounding == "segmented" for sw in all_shields):
        assumptions.append(
            "Segmented shield wires (insulated sections, each earthed at one point) carry no "
            "power-frequency current: left out of the series impedance, kept at earth "
            "potential for capacitance.")
    if any(sw.grounding == "none" for sw in all_shields):
        assumptions.append("Insulated shield wires float: no current and no net charge.")
    if any(sw.grounding == "continuous" for sw in all_shields):
        assumptions.append("Continuously earthed shield wires are at zero voltage and are "
                           "eliminated by Kron reduction.")
    if len(tower_names) + len(cable_names) > 1:
        assumptions.append(
            "Sections of different tower types: each section's series impedance and shunt "
            "admittance from its own cross-section; the line's Z1 and Z0 (and k0) that the "
            "relay is set with are the length-weighted totals over all sections, and its "
            "distributed (exact pi) equivalent is that of the length-weighted average line; "
            "the fault simulation cascades the sections as they are.")

    # Section plan.
    n_c = len(study.circuits)
    length = study.line.length
    sections = study.line.sections
    if sections is None:
        lengths = (length,)
        orders = (tuple(range(3 * n_c)),)
    else:
        lengths_l, orders_l = [], []
        for s, sec in enumerate(sections):
            field = f"line.sections[{s}].order"
            if isinstance(sec.order, dict):
                per_circuit = sec.order
                names = [c.name for c in study.circuits]
                for key in per_circuit:
                    if key not in names:
                        from relayset.errors import suggest

                        raise InputError("names no circuit" + suggest(key, names),
                                         field=f"{field}.{key}", source=source)
            else:
                if n_c != 1:
                    raise InputError("a double-circuit section needs an order per circuit, "
                                     "like order = { \"1\" = [...], \"2\" = [...] }",
                                     field=field, value=list(sec.order), source=source)
                per_circuit = {study.circuits[0].name: sec.order}
            order: list[int] = []
            for c, circuit in enumerate(study.circuits):
                o = per_circuit.get(circuit.name)
                f = f"{field}.{circuit.name}" if isinstance(sec.order, dict) else field
                if o is None:
                    raise InputError("has no order for this circuit", field=f, source=source)
                labels = circuit.phase_labels
                missing = [p for p in labels if p not in o]
                if len(o) != 3 or missing or len(set(o)) != 3:
                    from relayset.errors import as_written, quote

                    rule = (f"phase {quote(missing[0])} is missing" if missing
                            else "must list each phase once")
                    raise InputError(f"{rule}; an order names the phase at each of the three "
                                     f"positions, using {as_written(list(labels))}",
                                     field=f, value=list(o), source=source)
                order.extend(3 * c + labels.index(p) for p in o)
            lengths_l.append(sec.length)
            orders_l.append(tuple(order))
        lengths, orders = tuple(lengths_l), tuple(orders_l)

    corridor, corridor_wires, corridors = None, (), ()
    if study.neighbours:
        from relayset.inputs.corridor import corridors_of

        corridors = corridors_of(study)
        nb_placed: list = []
        for corridor in corridors:
            nb_placed.append((corridor, _place_neighbour(
                study, corridor, tower_wires, section_towers, conductor, source, n_c,
                nb_placed)))
            assumptions.append(_neighbour_assumption(corridor))
        corridor = corridors[0]
        corridor_wires = tuple(w for _c, ws in nb_placed for w in ws)

    return LineGeometry(
        corridor=corridor,
        corridor_wires=corridor_wires,
        corridors=corridors,
        wires=tuple(wires),
        n_circuits=n_c,
        position_names=tuple(position_names),
        phase_labels=tuple(c.phase_labels for c in study.circuits),
        section_lengths_m=lengths,
        section_orders=orders,
        length_m=length,
        frequency_hz=f_hz,
        resistivity_ohm_m=study.system.earth_resistivity,
        earth_model=study.system.earth_model,
        v_nominal_v=study.system.nominal_voltage,
        assumptions=tuple(assumptions),
        earth_layers=_earth_layers(study.system),
        tower_names=tower_names + cable_names,
        tower_wires=tower_wires + ((),) * len(cables) if tower_names else (),
        tower_position_names=(tuple(n for _, n in placed) + cable_positions
                              if tower_names else ()),
        section_towers=section_towers,
        tower_cables=(None,) * len(tower_names) + cables if cables else (),
    )


def _neighbour_assumption(corridor) -> str:
    """What the model takes for a neighbouring line (one sentence)."""
    return (f"Neighbouring line {corridor.name} beside the line from "
            f"{corridor.start_m / 1e3:g} km to {corridor.end_m / 1e3:g} km (shared "
            f"{corridor.shared_length_m / 1e3:g} km): mutually coupled over that stretch "
            "only, its phases not transposed there; its routes outside the corridor are "
            "series impedances (their shunt capacitance neglected) and couple with nothing; "
            "its own buses' EMFs are those of the protected line's sources at the same side "
            "(it carries load the same way) and its sources keep their impedance in every "
            "source case." + _neighbour_file_note(corridor.table))


def _neighbour_file_note(nb) -> str:
    """Where a neighbour given by its own study file came from (provenance)."""
    f = nb.file
    if f is None:
        return ""
    place = (f"its tower centre line {nb.offset:g} m from this line's" if nb.offset
             else "on the shared towers (x as in that file)")
    return (f" Its conductors, cross-section and sources are read from {nb.study} (SHA-256 "
            f"{f.sha256}), {place}, its phases as that file's first section places them.")


def _place_wires(study: Study, circuits, shield_wires, shield_field: str, conductor,
                 source: str) -> tuple[tuple[Wire, ...], tuple[str, ...]]:
    """Every wire of one cross-section, checked above ground and clear of each other.

    ``circuits`` holds per circuit (field pattern with ``{k}``, its three positions).
    """
    wires: list[Wire] = []
    position_names: list[str] = []
    for c, (pattern, positions) in enumerate(circuits):
        circuit = study.circuits[c]
        for k, pos in enumerate(positions):
            field = pattern.replace("{k}", str(k))
            data = conductor(pos.conductor, f"{field}.conductor")
            position_names.append(f"{circuit.name}/{pos.name}")
            y0 = pos.mean_height_m
            offsets = np.zeros((1, 2))
            if pos.bundle is not None and pos.bundle.count > 1:
                offsets = bundle_offsets_m(pos.bundle.count, pos.bundle.spacing,
                                           pos.bundle.orientation)
                if pos.bundle.spacing <= 2 * data.radius_m:
                    raise InputError(
                        f"bundle spacing must exceed the conductor diameter "
                        f"({2e3 * data.radius_m:.1f} mm)",
                        field=f"{field}.bundle.spacing", value=f"{pos.bundle.spacing:g} m",
                        source=source)
            for s, (dx, dy) in enumerate(offsets):
                wires.append(Wire(pos.x + dx, y0 + dy, data, "phase", 3 * c + k,
                                  f"circuit {circuit.name}, position {pos.name}"
                                  + (f", subconductor {s + 1}" if len(offsets) > 1 else ""),
                                  field))
    for k, sw in enumerate(shield_wires):
        field = shield_field.replace("{k}", str(k))
        data = conductor(sw.conductor, f"{field}.conductor")
        wires.append(Wire(sw.x, sw.mean_height_m, data, "shield", k,
                          f"shield wire {sw.name or k + 1}", field, sw.grounding))

    # Geometry rules: above ground, no overlap.
    for w in wires:
        if w.y_m - w.conductor.radius_m <= 0:
            raise InputError("conductor would be at or below ground (mean height = height - "
                             "2/3 sag must exceed the conductor radius)",
                             field=w.field, value=f"mean height {w.y_m:.3f} m", source=source)
    for i in range(len(wires)):
        for j in range(i + 1, len(wires)):
            a, b = wires[i], wires[j]
            d = math.hypot(a.x_m - b.x_m, a.y_m - b.y_m)
            if d <= a.conductor.radius_m + b.conductor.radius_m + _MIN_CLEARANCE_M:
                raise InputError(
                    f"overlaps {b.label} ({b.field}); centres {d:.3f} m apart",
                    field=a.field, value=a.label, source=source)
    return tuple(wires), tuple(position_names)


def _place_neighbour(study: Study, corridor, tower_wires, section_towers, conductor,
                     source: str, n_c: int = 1, placed=()) -> tuple[Wire, ...]:
    """A neighbouring line's wires on the corridor's cross-section, checked above ground
    and clear of the protected line's wires on every tower of its shared stretch, and of
    the wires of the neighbours ``placed`` before it where their stretches overlap. A
    neighbour from its own study file takes that file's conductors (its messages name that
    file and its fields)."""
    main_source = source
    nb = corridor.table
    j = corridor.index
    f = nb.file  # its own study file: its conductors and fields are that file's
    if f is not None:
        conductor, source = _conductor_resolver(f.study, f.path), f.path
    out: list[Wire] = []
    for k, pos in enumerate(nb.positions):
        field = f"neighbours[{j}].positions[{k}]" if f is None else f.position_fields[k]
        data = conductor(pos.conductor, f"{field}.conductor")
        offsets = np.zeros((1, 2))
        if pos.bundle is not None and pos.bundle.count > 1:
            offsets = bundle_offsets_m(pos.bundle.count, pos.bundle.spacing,
                                       pos.bundle.orientation)
        for s, (dx, dy) in enumerate(offsets):
            out.append(Wire(pos.x + dx, pos.mean_height_m + dy, data, "phase",
                            3 * (n_c + j) + k,
                            f"neighbour {nb.name}, phase {'ABC'[k]}"
                            + (f", subconductor {s + 1}" if len(offsets) > 1 else ""), field))
    for k, sw in enumerate(nb.shield_wires):
        field = f"neighbours[{j}].shield_wires[{k}]" if f is None else f"shield_wires[{k}]"
        data = conductor(sw.conductor, f"{field}.conductor")
        out.append(Wire(sw.x, sw.mean_height_m, data, "shield", 1000 * (j + 1) + k,
                        f"neighbour {nb.name}, shield wire {sw.name or k + 1}", field,
                        sw.grounding))
    towers = sorted({section_towers[k] for k in shared_sections(corridor, study)}
                    if section_towers else {0})
    for w in out:
        if w.y_m - w.conductor.radius_m <= 0:
            raise InputError("conductor would be at or below ground (mean height = height - "
                             "2/3 sag must exceed the conductor radius)",
                             field=w.field, value=f"mean height {w.y_m:.3f} m", source=source)
    tol = 1e-9 * sum(s.length for s in study.line.sections or ()) or 1e-6
    beside = [w for other, ws in placed
              if min(other.end_m, corridor.end_m) - max(other.start_m, corridor.start_m) > tol
              for w in ws]
    for t in towers:  # clear of the protected line's wires and of each other
        for i, a in enumerate(out):
            for b in [*tower_wires[t], *beside, *out[i + 1:]]:
                d = math.hypot(a.x_m - b.x_m, a.y_m - b.y_m)
                if d <= a.conductor.radius_m + b.conductor.radius_m + _MIN_CLEARANCE_M:
                    if f is not None and b not in out:  # its place is this file's offset
                        key = "offset" if nb.offset is not None else "study"
                        raise InputError(
                            f"places {a.label} ({f.path}: {a.field}) over {b.label} "
                            f"({b.field}); centres {d:.3f} m apart", field=f"neighbours[{j}]."
                            f"{key}", value=corridor.raw_place, source=main_source)
                    raise InputError(f"overlaps {b.label} ({b.field}); centres {d:.3f} m apart",
                                     field=a.field, value=a.label, source=source)
    return tuple(out)


def shared_sections(corridor, study: Study) -> list[int]:
    """Indices of the study's sections that the shared stretch touches."""
    lengths = [s.length for s in study.line.sections] if study.line.sections else [
        study.line.length]
    edges = np.concatenate([[0.0], np.cumsum(lengths)])
    tol = 1e-9 * edges[-1]
    return [k for k in range(len(lengths))
            if edges[k + 1] > corridor.start_m + tol and edges[k] < corridor.end_m - tol]


def _earth_layers(system) -> tuple[float, float] | None:
    if system.earth_model != "two_layer":
        return None
    return (float(system.earth_lower_resistivity), float(system.earth_layer_thickness))


def _earth_assumption(system) -> str:
    if system.earth_model == "two_layer":
        return ("Earth is two horizontal layers: the upper one "
                f"{system.earth_layer_thickness:g} m thick of {system.earth_resistivity:g} "
                f"ohm*m over a half-space of {system.earth_lower_resistivity:g} ohm*m; "
                "earth-return model: two_layer (Carson's integral over layered earth, "
                "integrated numerically); the verification's resistivity sweep scales both "
                "layers alike.")
    return ("Earth is homogeneous with the given resistivity; earth-return model: "
            f"{system.earth_model}.")
