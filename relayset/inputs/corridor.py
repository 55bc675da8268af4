"""Shared corridors: the rules of a ``[[neighbours]]`` table and its stretch along the line.

A neighbouring line runs beside the protected line (one or two circuits) over one stretch
of its route, with its own buses and sources. On that stretch its conductors hang on the
corridor's cross-section (positions from the protected line's tower centre line) and are
mutually coupled with the protected line and with every other neighbour there; outside it
they are not there at all. relayset models each neighbour as one more circuit of the fault
solver after the protected line's (:class:`relayset.physics.network.NeighbourEnd`): coupled
matrices over the shared stretches, zero-impedance connectors elsewhere, and its routes
outside the corridor lumped into its terminals.

This module holds what the file says (checked here, one line per defect) in SI:
:func:`check_neighbours` (called by :func:`relayset.inputs.study_file.check_study`) and
:func:`corridors_of` (each neighbour's stretch, buses and routes).
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Any

from relayset.errors import InputError, as_written, quote, suggest, toml_key
from relayset.inputs.study_file import Neighbour, SourceData, Study, _in_users_unit, _raw

#: Centres of a neighbour's conductor and a protected conductor closer than this [m] are
#: taken as the same place (a copied position): the smallest real clearance is metres.
COINCIDENT_M = 0.05


@dataclass(frozen=True)
class Corridor:
    """A neighbouring line as the study states it, SI."""

    name: str
    start_m: float  #: where the shared stretch begins, from the from-substation [m]
    end_m: float  #: where it ends [m]
    buses: tuple[str, str]  #: its bus on the from-substation's side, on the to side
    on_line_bus: tuple[bool, bool]  #: that bus is the protected line's bus at that end
    route_lengths_m: tuple[float, float]  #: its route outside the corridor at each end [m]
    route_z1_ohm_per_m: complex | None  #: None: its own Z1 in the corridor
    route_z0_ohm_per_m: complex | None
    sources: dict[str, SourceData]  #: its own buses' sources
    table: Neighbour  #: the table as read (positions, shield wires)
    index: int = 0  #: its place in [[neighbours]] (field names neighbours[index])

    @property
    def raw_place(self) -> str:
        """What places it on the cross-section, as a message shows it: its own study file's
        offset, or that file."""
        nb = self.table
        if nb.offset is not None:
            return f"{nb.offset:g} m"
        return nb.study or ""

    @property
    def shared_length_m(self) -> float:
        """Length of the shared stretch [m]."""
        return self.end_m - self.start_m


def _sections(study: Study) -> list[float]:
    secs = study.line.sections
    return [s.length for s in secs] if secs else [study.line.length]


def corridors_of(study: Study) -> tuple[Corridor, ...]:
    """The study's neighbouring lines, in the file's order; the file was checked on
    reading."""
    ends = study.ends
    out = []
    for j, nb in enumerate(study.neighbours):
        start, end = _stretch(study, j)
        end = min(end, study.line.length)  # within the rounding the check allows
        out.append(Corridor(
            name=nb.name, start_m=float(start), end_m=float(end), buses=nb.buses,
            on_line_bus=(nb.buses[0] == ends[0], nb.buses[1] == ends[1]),
            route_lengths_m=nb.route_lengths, route_z1_ohm_per_m=nb.route_z1,
            route_z0_ohm_per_m=nb.route_z0, sources=dict(nb.sources), table=nb, index=j))
    return tuple(out)


def _shared_sections(study: Study, j: int) -> list[int]:
    """The indices of the sections neighbour ``j`` runs beside (its stretch already checked
    to lie on the line)."""
    secs = study.line.sections or ()
    nb = study.neighbours[j]
    if nb.sections is not None:
        return [k for k in nb.sections if k < len(secs)]
    edges = [0.0]
    for sec in secs:
        edges.append(edges[-1] + sec.length)
    start, end = nb.start, nb.start + nb.length
    return [k for k in range(len(secs)) if edges[k + 1] > start and edges[k] < end]


def _stretch(study: Study, j: int) -> tuple[float, float]:
    """Where the shared stretch of neighbour ``j`` begins and ends, from the
    from-substation [m] (its sections already checked to exist)."""
    nb = study.neighbours[j]
    if nb.sections is not None:
        lengths = _sections(study)
        return (math.fsum(lengths[:min(nb.sections)]),
                math.fsum(lengths[:max(nb.sections) + 1]))
    return nb.start, nb.start + nb.length


def _shared_towers(study: Study, j: int) -> set[str]:
    """The towers of the sections neighbour ``j`` runs beside."""
    secs = study.line.sections or ()
    return {secs[k].tower for k in _shared_sections(study, j)}


def check_neighbours(study: Study, data: dict, fail: Callable[..., None]) -> None:
    """The rules of ``[[neighbours]]`` that tie it to the rest of the study; ``fail(rule,
    field, value)`` raises the one-line error."""
    ends = study.ends
    for j, nb in enumerate(study.neighbours):
        at = f"neighbours[{j}]"

        def raw(*path: Any, j=j) -> Any:
            return _raw(data, "neighbours", j, *path)

        for k, other in enumerate(study.neighbours[:j]):
            if other.name == nb.name:
                fail(f"is the name of neighbours[{k}] too: each neighbouring line is named "
                     "once (its states are reported by name)", f"{at}.name", nb.name)
        lengths = _sections(study)
        if nb.sections is not None:
            for k, s in enumerate(nb.sections):
                if s >= len(lengths):
                    fail(f"names no section of the line (it has {len(lengths)} section(s), "
                         f"line.sections[0] to line.sections[{len(lengths) - 1}])",
                         f"{at}.sections[{k}]", raw("sections", k))
            idx = sorted(nb.sections)
            if len(set(idx)) != len(idx) or idx[-1] - idx[0] != len(idx) - 1:
                fail("must list consecutive sections, each once: a neighbouring line runs "
                     "beside one stretch of the route", f"{at}.sections", raw("sections"))
        else:
            total = study.line.length
            end = nb.start + nb.length
            if end > total * (1 + 1e-9) + 1e-3:
                raw_len = _raw(data, "line", "length")
                fail(f"the shared stretch would end {_in_users_unit(end, raw('length'))} from "
                     f"{quote(ends[0])}, beyond the line's end ({raw_len}); it must lie on "
                     "the line", f"{at}.length", raw("length"))
        # Its conductors must hang somewhere else than the protected line's (on the towers
        # of the stretch it shares).
        own = [(f"circuits[{c}].positions[{k}]", p) for c, circ in enumerate(study.circuits)
               for k, p in enumerate(circ.positions)]
        secs = study.line.sections or ()
        for k in _shared_sections(study, j):
            if secs[k].cable is not None:
                where = ("sections", f"{at}.sections") if nb.sections is not None else (
                    "start", f"{at}.start")
                fail(f"runs beside line.sections[{k}], a cable section; a neighbouring line "
                     "is coupled with overhead sections only", where[1], raw(where[0]))
        shared = _shared_towers(study, j)
        own += [(f"towers.{toml_key(t)}.positions.{toml_key(c)}[{k}]", p)
                for t, tw in study.towers.items() if t in shared
                for c, ps in tw.positions.items() for k, p in enumerate(ps)]
        def where(k: int, nb=nb, at=at, raw=raw) -> tuple[str, str, Any]:
            """(what it is, field, value) of neighbour position k in messages: this file's
            position, or the offset placing its own study file's."""
            if nb.file is None:
                return "", f"{at}.positions[{k}].x", raw("positions", k, "x")
            key = "offset" if nb.offset is not None else "study"
            return (f"its {nb.file.position_fields[k]} ", f"{at}.{key}", raw(key))

        for k, p in enumerate(nb.positions):
            for field, q in own:
                if math.hypot(p.x - q.x, p.mean_height_m - q.mean_height_m) < COINCIDENT_M:
                    what, f_, v_ = where(k)
                    fail(f"{what}coincides with the protected line's conductor at {field}: place "
                         "the neighbour on the cross-section, x from this line's centre "
                         "line", f_, v_)
        # ... and elsewhere than another neighbour's where their stretches overlap.
        a0, a1 = _stretch(study, j)
        for i, other in enumerate(study.neighbours[:j]):
            b0, b1 = _stretch(study, i)
            if min(a1, b1) - max(a0, b0) <= 1e-9 * study.line.length:
                continue
            for k, p in enumerate(nb.positions):
                for kk, q in enumerate(other.positions):
                    if math.hypot(p.x - q.x, p.mean_height_m - q.mean_height_m) < COINCIDENT_M:
                        what, f_, v_ = where(k)
                        fail(f"{what}coincides with neighbours[{i}].positions[{kk}], where "
                             "both neighbours run beside the line; give each its own place "
                             "on the corridor's cross-section", f_, v_)
        # Buses: each end on the protected line's bus at that side or on a bus of its own.
        b0, b1 = nb.buses
        if b0 == b1:
            fail("must name two different buses", f"{at}.buses[1]", b1)
        for k, bus in enumerate(nb.buses):
            if bus == ends[1 - k]:
                fail(f"is the protected line's bus at the other end: the neighbour's end "
                     f"beside {quote(ends[k])} is on {quote(ends[k])} or a bus of its own",
                     f"{at}.buses[{k}]", bus)
            if bus != ends[k] and bus not in nb.sources:
                known = [ends[k], *nb.sources]
                fail(f"names no bus: give its source as [{at}.sources.{toml_key(bus)}] or "
                     f"use {quote(ends[k])}, the protected line's bus"
                     + suggest(bus, known), f"{at}.buses[{k}]", bus)
        # A bus of this line lies at the line's end: over no route of its own the
        # neighbour cannot reach it from a stretch that ends short of that end (the model
        # would join it to the bus through a zero impedance).
        start, end = _stretch(study, j)
        gaps = (start, study.line.length - end)
        for k, bus in enumerate(nb.buses):
            if bus == ends[k] and nb.route_lengths[k] == 0 and gaps[k] > 1.0:
                given = raw("route_lengths", k)
                gap = _in_users_unit(gaps[k], _raw(data, "line", "length"))
                fail(("" if given is not None else "not given (0 km): ")
                     + f"the shared stretch ends {gap} from {quote(bus)}, this line's bus "
                     "where the neighbour ends: give the length of its own route from the "
                     "stretch to that bus",
                     f"{at}.route_lengths" + ("" if given is None else f"[{k}]"), given)
        for key in nb.sources:
            if key in ends:
                fail(f"is a bus of the protected line: its source is [sources."
                     f"{toml_key(key)}]", f"{at}.sources.{toml_key(key)}",
                     raw("sources", key))
            if key not in nb.buses:
                fail(f"names no bus of this neighbouring line (its buses are "
                     f"{as_written(list(nb.buses))})" + suggest(key, nb.buses),
                     f"{at}.sources.{toml_key(key)}", raw("sources", key))


# -- A neighbour given by its own study file ----------------------------------------------


@dataclass(frozen=True, eq=False)
class NeighbourFile:
    """A neighbouring line's own study file as read (``study`` in ``[[neighbours]]``)."""

    path: str  #: the file as messages name it
    sha256: str  #: of exactly the bytes parsed (provenance: the report's assumptions)
    study: Study  #: that file, validated as a study of its own
    #: its fields of the positions of phases A, B, C (as its first section orders them)
    position_fields: tuple[str, str, str]


def read_neighbour_files(study: Study, data: dict, source: str) -> Study:
    """The study with each ``[[neighbours]]`` that names its own study file filled in from
    that file: its positions (phases A, B, C as its first section places them, x moved by
    ``offset``), shield wires, buses (unless given) and the sources of its own buses.

    That file is hostile until read: the size and nesting limits of a study file, then the
    whole study file's rules, every message naming that file and its field; it may not
    name neighbouring lines of its own (no recursion), and nothing in it decides where
    anything is written. Its path is relative to this study file's folder.
    """
    import hashlib

    from relayset.inputs.study_file import loads_toml, parse_study, read_bytes

    main = Path(source)
    ends = study.ends
    out = []
    for j, nb in enumerate(study.neighbours):
        if nb.study is None:
            out.append(nb)
            continue
        at = f"neighbours[{j}]"

        def fail(rule: str, field: str, value: Any = None, src: str = source) -> None:
            raise InputError(rule, field=field, value=value, source=src)

        p = Path(nb.study)
        if not p.is_absolute():
            p = main.parent / p
        if p.is_file() and main.is_file() and p.resolve() == main.resolve():
            fail("names this study file itself: a neighbour's study file is the other "
                 "line's", f"{at}.study", nb.study)
        if not p.is_file():
            fail("neighbour study file does not exist", f"{at}.study", nb.study)
        path = str(p)
        raw = read_bytes(p)  # size limit first; messages name that file
        tables = loads_toml(raw, path)  # nesting depth, then TOML
        if isinstance(tables, dict) and tables.get("neighbours"):
            # named from this study (the field the user wrote), not from inside that file
            fail("names a study file that lists neighbouring lines of its own: a neighbour's "
                 "file may not (no recursion); give every neighbour in this study",
                 f"{at}.study", nb.study)
        other = parse_study(tables, path)
        if len(other.circuits) != 1:
            fail("a neighbour's study file describes a single-circuit line (a neighbouring "
                 "double circuit is not modelled)", "circuits", None, path)
        for key, what in (("towers", "[towers]"), ("series_capacitors", "series capacitors"),
                          ("tee", "[tee]")):
            if getattr(other, key):
                fail(f"a neighbour's study file gives one cross-section, without {what}: "
                     "give the corridor's stretch only", key, None, path)
        for key in ("nominal_voltage", "frequency"):
            if getattr(other.system, key) != getattr(study.system, key):
                fail(f"differs from the protected line's ({_raw(data, 'system', key)}): the "
                     "neighbour is solved with the protected line's voltage and frequency",
                     f"system.{key}", _raw(tables, "system", key), path)
        own = (other.study.from_substation, other.study.to_substation)
        buses = nb.buses or own
        for k, bus in enumerate(buses):
            if bus not in own:
                fail(f"is not a substation of {path} (its ends are "
                     f"{as_written(list(own))})" + suggest(bus, own), f"{at}.buses[{k}]", bus)
        for bus in buses:
            if bus not in ends and bus not in other.sources:
                fail(f"has no [sources.{toml_key(bus)}]: the neighbour's bus {quote(bus)} is "
                     f"not a bus of {source}, so its source comes from this file", "sources",
                     None, path)
        c = other.circuits[0]
        secs = other.line.sections
        order = (secs[0].order if secs and not isinstance(secs[0].order, dict)
                 else c.phase_labels)
        idx = [list(order).index(lab) for lab in c.phase_labels]
        off = nb.offset or 0.0
        out.append(replace(
            nb, buses=tuple(buses),
            positions=tuple(replace(c.positions[i], x=c.positions[i].x + off) for i in idx),
            shield_wires=tuple(replace(w, x=w.x + off) for w in other.shield_wires),
            sources={b: other.sources[b] for b in buses if b not in ends},
            file=NeighbourFile(path, hashlib.sha256(raw).hexdigest(), other,
                               tuple(f"circuits[0].positions[{i}]" for i in idx))))
    return replace(study, neighbours=tuple(out))
