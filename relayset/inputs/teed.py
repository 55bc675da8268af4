"""The ``[tee]`` table of a study file: a branch leaving the line to a third substation.

.. code-block:: toml

    [tee]
    distance = "18 km"              # along the line from study.from_substation
    substation = "Third"            # the substation at the branch's far end
    sections = [                    # the branch, from the tee to the third substation,
      { length = "9 km", order = ["A", "B", "C"] },  # written as the line's sections
    ]                               # (with [towers.NAME] tables: tower = or cable = each)
    # grounded_transformer_z0 = "1 + 12j ohm"  # the third substation has only a
    #                                          # grounded-star transformer (no source)

The third substation's source is ``[sources."Third"]`` like the other buses'; without it
(and without ``grounded_transformer_z0``) the branch ends open. ``[relay] end`` may name
the third substation, or ``"all"`` for relays at all three ends. On a double-circuit line
the first circuit of ``[[circuits]]`` (the protected one) is tapped and the second runs
through the tee untapped; the branch carries the tapped circuit only (its sections' orders
name it, on the named towers with the second circuit's positions empty). This module
declares the table and checks it against the rest of the study (:func:`check_tee`, called
from :func:`relayset.inputs.study_file.check_study`).
"""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

from relayset.errors import quote, suggest, toml_key
from relayset.inputs import limits
from relayset.inputs.cable import check_cable_section
from relayset.inputs.schema import ListOf, spec, table
from relayset.inputs.study_file import (
    ComplexOhm,
    LineLength,
    Section,
    _non_empty,
    _raw,
    _table,
    _text,
)

#: ``relay.end`` for relays at all three ends of a teed line.
ALL_ENDS = "all"


@_table
class TeeData:
    """``[tee]``: where the branch leaves the line, its sections and its substation."""

    distance: float = spec(LineLength)
    substation: str = spec(_text(100, min_len=1))
    sections: tuple[Section, ...] = spec(ListOf(
        table(Section), _non_empty, max_items=limits.MAX_SECTIONS, what="sections"))
    grounded_transformer_z0: complex | None = spec(ComplexOhm, None)

    @property
    def length(self) -> float:
        """Length of the branch [m]."""
        return sum(s.length for s in self.sections)


def check_tee(study: Any, data: dict, fail: Callable[..., None]) -> None:
    """Rules of ``[tee]`` against the rest of the study (``fail(rule, field, value)``)."""
    tee = study.tee
    ends = study.ends
    length = study.line.length
    raw_d = _raw(data, "tee", "distance")
    if not tee.distance < length:
        fail(f"must lie inside the line, between 0 and {_raw(data, 'line', 'length')} from "
             f"{quote(ends[0])}", "tee.distance", raw_d)
    if tee.substation in ends:
        fail("must be a third substation, not an end of the line (the ends are "
             f"{quote(ends[0])} and {quote(ends[1])})", "tee.substation", tee.substation)
    if tee.grounded_transformer_z0 is not None:
        z = tee.grounded_transformer_z0
        if z.real < 0 or z.imag <= 0:
            fail("must have R >= 0 and X > 0", "tee.grounded_transformer_z0",
                 _raw(data, "tee", "grounded_transformer_z0"))
        if tee.substation in study.sources:
            fail(f"give either [sources.{toml_key(tee.substation)}] or "
                 "tee.grounded_transformer_z0 (a grounded transformer only), not both",
                 "tee.grounded_transformer_z0", _raw(data, "tee", "grounded_transformer_z0"))
    names = [c.name for c in study.circuits]
    teed = names[0]  # the protected circuit is tapped; a parallel circuit runs through
    for s, sec in enumerate(tee.sections):
        field = f"tee.sections[{s}]"
        for key in sec.order if isinstance(sec.order, dict) else ():
            if key not in names:
                fail("names no circuit" + suggest(key, names), f"{field}.order.{toml_key(key)}",
                     _raw(data, "tee", "sections", s, "order", key))
            elif key != teed:
                fail(f"the branch carries the tapped circuit {quote(teed)} only (circuit "
                     f"{quote(key)} runs through the tee): give the order of {quote(teed)}",
                     f"{field}.order.{toml_key(key)}",
                     _raw(data, "tee", "sections", s, "order", key))
        if sec.cable is not None:  # a cable section (relayset.inputs.cable)
            _check_branch_cable(study, sec, field, fail)
            continue
        if study.towers and sec.tower is None:
            fail("is required: the study has [towers.NAME] tables (towers: "
                 + ", ".join(study.towers) + ")", f"{field}.tower")
        if sec.tower is not None and sec.tower not in study.towers:
            known = ", ".join(study.towers) or "none"
            fail(f"names no tower of [towers] (towers: {known})"
                 + suggest(sec.tower, study.towers), f"{field}.tower", sec.tower)
    _check_branch_cable_tables(study, data, fail)


def _check_branch_cable(study: Any, sec: Any, field: str, fail: Callable[..., None]) -> None:
    """A branch section on a cable: the rules of the line's cable sections
    (:func:`relayset.inputs.cable.check_cables`), named as written in ``[tee]``."""
    check_cable_section(study, sec, field, fail)
    if not study.towers:  # without them the branch's wires would stand in for the cable
        fail("with cable sections, give the overhead sections' cross-sections as "
             "[towers.NAME] tables and a tower per overhead section", "towers")


def _check_branch_cable_tables(study: Any, data: dict, fail: Callable[..., None]) -> None:
    """The ``[cables.NAME]`` rules (circuit spacing, earth continuity conductor) of cables
    laid on the branch only: those of the line's cables are checked with the line."""
    import dataclasses

    from relayset.inputs.cable import check_cables

    on_line = {sec.cable for sec in study.line.sections or () if sec.cable is not None}
    extra = tuple(sec for sec in study.tee.sections
                  if sec.cable is not None and sec.cable in study.cables
                  and sec.cable not in on_line and sec.tower is None)
    if not extra or not study.towers:
        return
    # The line's overhead sections and the branch's cables (one overhead section at
    # least, so only the tables' own rules can fail, each field naming its [cables.NAME]),
    # on the branch's one circuit.
    overhead = tuple(sec for sec in study.line.sections or () if sec.cable is None)
    line = dataclasses.replace(study.line, sections=(*overhead, *extra))
    check_cables(dataclasses.replace(study, line=line, circuits=study.circuits[:1]), data,
                 fail)


def buses(study: Any) -> tuple[str, ...]:
    """The substations of the line: its two ends and, with a tee, the third."""
    tee = getattr(study, "tee", None)
    return study.ends + ((tee.substation,) if tee is not None else ())
