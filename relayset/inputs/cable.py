"""``[cables.NAME]`` tables: single-core cable sections of a line, parsed and checked.

A line section names either a ``tower`` (an overhead section) or a ``cable``. A cable table
gives one single-core cable (core, insulation, metallic sheath or screen, jacket) and how
the three cables of each circuit lie (flat or trefoil, depth, spacing) and are bonded.
Units at the edge as in the rest of the study file; SI inside. Nothing heavy is imported
here (the study file imports this module); :func:`resolve` imports the physics lazily.
"""

from __future__ import annotations

import itertools
import math
import re
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

from relayset.errors import suggest, toml_key
from relayset.inputs import schema, units
from relayset.inputs.schema import KeyRuleError, spec

#: Deepest plausible burial [m]: direct-buried and ducted cables lie at about 0.8-2 m;
#: horizontal drillings under rivers reach some metres. Deeper is taken for a typing slip
#: (common practice, no source).
MAX_DEPTH_M = 10.0

#: Resistivity at 20 degC [ohm m] and its temperature coefficient at 20 degC [1/K]:
#: IEC 60287-1-1, Table 1 (values from memory); rho(T) = rho_20 (1 + alpha (T - 20)).
MATERIALS: dict[str, tuple[float, float]] = {
    "copper": (1.7241e-8, 3.93e-3),
    "aluminium": (2.8264e-8, 4.03e-3),
    "lead": (21.4e-8, 4.0e-3),
}
CORE_MATERIALS = ("copper", "aluminium")
SHEATH_MATERIALS = ("copper", "aluminium", "lead")

_AREA = re.compile(rf"^\s*({units.NUMBER})\s*(mm2|mm\^2|mm²|m2|m\^2|m²)\s*$")


def _length(*, gt: float = 0.0, le: float, show: tuple[str, float] = ("mm", 1e-3)
            ) -> Callable[[Any], float]:
    unit, factor = show

    def parse(v: Any) -> float:
        x = units.parse_real(v, "length")
        if not x > gt:
            raise ValueError(f"must be greater than {gt / factor:g} {unit}")
        if not x <= le:
            raise ValueError(f"must be at most {le / factor:g} {unit} (plausible range)")
        return x

    return parse


def _area(v: Any) -> float:
    """A cross-section like "630 mm2" [m^2]."""
    m = _AREA.match(v) if isinstance(v, str) else None
    if m is None:
        raise ValueError("must be an area like \"630 mm2\"")
    x = float(m.group(1)) * (1e-6 if m.group(2).startswith("mm") else 1.0)
    if not 1e-6 <= x <= 1e-2:
        raise ValueError("must lie between 1 mm2 and 10000 mm2 (plausible range)")
    return x


def _permittivity(v: Any) -> float:
    x = schema.strict_number(v)
    if x < 1.0:
        raise ValueError("a relative permittivity is at least 1 (that of vacuum)")
    if x > 100.0:
        raise ValueError("must be at most 100 (plausible range)")
    return x


def _depth(v: Any) -> float:
    x = units.parse_real(v, "length")
    if not x > 0:
        raise ValueError("must be greater than 0 m (a burial depth)")
    if x > MAX_DEPTH_M:
        raise ValueError(f"must be at most {MAX_DEPTH_M:g} m: deeper burial is implausible "
                         "for a cable section (plausibility limit: common practice, no source)")
    return x


def _resistivity(v: Any) -> float:
    x = units.parse_real(v, "resistivity")
    if not 1e-9 <= x <= 1e-5:
        raise ValueError("must lie between 1e-9 and 1e-5 ohm*m (a metal)")
    return x


def _temperature(v: Any) -> float:
    x = units.parse_real(v, "temperature")
    if not -40.0 <= x <= 250.0:
        raise ValueError("must lie between -40 degC and 250 degC")
    return x


def _res_per_length(v: Any) -> float:
    x = units.parse_real(v, "resistance_per_length")
    if not 1e-6 <= x <= 1e-2:
        raise ValueError("must lie between 0.001 and 10 ohm/km (plausible range)")
    return x


_Radius = _length(le=0.2)

#: Longest plausible minor section of a cross-bonded cable [m] (some hundred metres to a
#: few km between joint bays; common practice, no source).
MAX_MINOR_SECTION_M = 5e3


def _minor_sections(v: Any) -> tuple[float, float, float]:
    """The three minor sections of a major section, e.g. ["480 m", "500 m", "520 m"]."""
    if not isinstance(v, list) or len(v) != 3:
        raise ValueError("must be a list of the three minor sections' lengths of a major "
                         "section, like [\"480 m\", \"500 m\", \"520 m\"]")
    out = []
    for x in v:
        q = units.parse_real(x, "length")
        if not 0 < q <= MAX_MINOR_SECTION_M:
            raise ValueError(f"each minor section must be above 0 m and at most "
                             f"{MAX_MINOR_SECTION_M / 1e3:g} km (plausible range)")
        out.append(q)
    return tuple(out)


def _offset(v: Any) -> float:
    x = units.parse_real(v, "length")
    if not -5.0 <= x <= 5.0:
        raise ValueError("must lie between -5 m and 5 m of the cables' centre (plausible "
                         "range)")
    return x


@dataclass(frozen=True, kw_only=True)
class ContinuityConductorData:
    """``earth_continuity_conductor = {...}`` of a single-point bonded cable: a bare or
    insulated round conductor laid with the cables and earthed at both ends."""

    cross_section: float = spec(_area)
    material: str = spec(schema.one_of(*CORE_MATERIALS), "copper")
    x: float = spec(_offset)  #: from the centre of the cable group (of both, two circuits)
    depth: float | None = spec(_depth, None)  #: default the cables' depth
#: The radii from the axis outwards, in the order they must grow.
RADII = ("core_radius", "insulation_inner_radius", "insulation_outer_radius",
         "sheath_inner_radius", "sheath_outer_radius", "jacket_outer_radius")


@dataclass(frozen=True, kw_only=True)
class Cable:
    """``[cables.NAME]``: one single-core cable and how the cables of a circuit lie.

    The core is taken as a solid round conductor; its resistivity follows from the DC
    resistance when given (else the material's and the cross-section), so that the DC
    resistance is right (Gustavsen et al. 2005). A wire screen is entered as the tube of
    the same cross-section (its radii and the wires' resistivity).
    """

    core_material: str = spec(schema.one_of(*CORE_MATERIALS))
    core_cross_section: float | None = spec(_area, None)
    core_radius: float | None = spec(_Radius, None)
    core_dc_resistance: float | None = spec(_res_per_length, None)  #: at 20 degC
    operating_temperature: float = spec(_temperature, 20.0)  #: the core's [degC]
    #: the sheath's (screen's) temperature [degC]; default the core's operating temperature
    #: (an upper bound: the heat flows outwards from the core through the sheath)
    sheath_temperature: float | None = spec(_temperature, None)
    #: The insulation proper (between the semiconducting screens); when given, its
    #: permittivity is corrected for the screens (Gustavsen et al. 2005).
    insulation_inner_radius: float | None = spec(_Radius, None)
    insulation_outer_radius: float | None = spec(_Radius, None)
    insulation_permittivity: float = spec(_permittivity)
    sheath_inner_radius: float = spec(_Radius)
    sheath_outer_radius: float = spec(_Radius)
    sheath_material: str | None = spec(schema.one_of(*SHEATH_MATERIALS), None)
    #: or the sheath's resistivity at its temperature (taken as given, not corrected)
    sheath_resistivity: float | None = spec(_resistivity, None)
    jacket_outer_radius: float = spec(_Radius)
    #: Polyethylene oversheath about 2.3 (common practice, no source).
    jacket_permittivity: float = spec(_permittivity, 2.3)
    depth: float = spec(_depth)  #: to the axis (flat) or the group's centre (trefoil)
    formation: str = spec(schema.one_of("flat", "trefoil"))
    spacing: float | None = spec(_length(le=5.0, show=("m", 1.0)), None)  #: between axes
    circuit_spacing: float | None = spec(_length(le=50.0, show=("m", 1.0)), None)
    bonding: str = spec(schema.one_of("both_ends", "single_point", "cross_bonded"))
    #: single-point bonding: the earth continuity conductor that carries the return current
    earth_continuity_conductor: ContinuityConductorData | None = spec(
        schema.table(ContinuityConductorData), None)
    #: cross-bonding: the lengths of the three minor sections of each major section, in
    #: order (default three equal ones: the ideal cross-bonding)
    minor_sections: tuple[float, float, float] | None = spec(_minor_sections, None)

    def _check(self) -> None:
        if self.core_radius is None and self.core_cross_section is None:
            raise KeyRuleError("core_radius", "give core_radius or core_cross_section")
        if (self.sheath_material is None) == (self.sheath_resistivity is None):
            raise KeyRuleError("sheath_resistivity",
                               "give either sheath_material or sheath_resistivity")
        if (self.insulation_inner_radius is None) != (self.insulation_outer_radius is None):
            missing = ("insulation_inner_radius" if self.insulation_inner_radius is None
                       else "insulation_outer_radius")
            raise KeyRuleError(missing, "give both insulation radii or neither")
        radii = [(k, getattr(self, k)) for k in RADII]
        radii[0] = ("core_radius", self.core_radius_m)
        given = [(k, r) for k, r in radii if r is not None]
        for (k0, r0), (k1, r1) in itertools.pairwise(given):
            # The semiconducting screens may be of no thickness; metal and insulation not.
            strict = (k0, k1) not in (("insulation_outer_radius", "sheath_inner_radius"),
                                      ("core_radius", "insulation_inner_radius"))
            if r1 < r0 or (strict and r1 == r0):
                bound = "greater than" if strict else "at least"
                raise KeyRuleError(k1, f"radii out of order: must be {bound} {k0} "
                                   f"({1e3 * r0:g} mm); the radii grow from the axis outwards")
        s = self.spacing_m
        if s < 2 * self.jacket_outer_radius * (1 - 1e-9):
            raise KeyRuleError("spacing", "the cables would overlap: the spacing between axes "
                               f"must be at least the jacket's diameter "
                               f"({2e3 * self.jacket_outer_radius:g} mm)")
        if self.earth_continuity_conductor is not None and self.bonding != "single_point":
            raise KeyRuleError("earth_continuity_conductor", "goes with single-point bonding "
                               "(with both-ends or cross-bonding the sheaths carry the "
                               "return current)")
        if self.minor_sections is not None and self.bonding != "cross_bonded":
            raise KeyRuleError("minor_sections", "go with cross-bonding (bonding = "
                               "\"cross_bonded\")")
        top = self.depth - (s / math.sqrt(3) if self.formation == "trefoil" else 0.0)
        if top - self.jacket_outer_radius <= 0:
            raise KeyRuleError("depth", "the cables would stick out of the ground (the "
                               "uppermost cable's jacket must lie below the surface)")

    @property
    def core_radius_m(self) -> float:
        """The core's radius [m]: as given, else that of a solid round core."""
        if self.core_radius is not None:
            return self.core_radius
        return math.sqrt(self.core_cross_section / math.pi)

    @property
    def spacing_m(self) -> float:
        """Distance between the axes [m]: as given, else touching (jacket to jacket)."""
        return self.spacing if self.spacing is not None else 2 * self.jacket_outer_radius


@dataclass(frozen=True)
class CableSection:
    """A cable resolved for the physics: the design (SI), the layout and the bonding."""

    name: str
    design: Any  #: relayset.physics.cable.CableDesign
    formation: str
    spacing_m: float
    depth_m: float
    bonding: str
    n_circuits: int
    circuit_spacing_m: float
    position_names: tuple[str, str, str]
    notes: tuple[str, ...]
    ecc: Any = None  #: relayset.physics.cable.ContinuityConductor, or None
    #: cross-bonding: the three minor sections' lengths [m] (None: three equal ones)
    minor_sections_m: tuple[float, float, float] | None = None

    @property
    def return_paths_key(self) -> str:
        """The key of :data:`relayset.physics.cable.RETURN_PATHS` for this cable."""
        return self.bonding + ("_ecc" if self.ecc is not None else
                               "_minor" if self.minor_sections_m is not None else "")


def resolve(name: str, cable: Cable, n_circuits: int) -> CableSection:
    """The cable of ``[cables.NAME]`` for the physics (resistivities at temperature)."""
    from relayset.physics.cable import CableDesign, ContinuityConductor, cable_positions

    rho20, alpha = MATERIALS[cable.core_material]
    r1 = cable.core_radius_m
    notes = []
    if cable.core_dc_resistance is not None:
        rho20 = cable.core_dc_resistance * math.pi * r1 * r1
        notes.append(f"Cable {name}: the core's resistivity follows from its DC resistance "
                     "(a solid round core of the given radius with that DC resistance).")
    elif cable.core_cross_section is not None:
        rho20 = rho20 * math.pi * r1 * r1 / cable.core_cross_section
    rho_core = rho20 * (1 + alpha * (cable.operating_temperature - 20.0))
    t_sheath = (cable.sheath_temperature if cable.sheath_temperature is not None
                else cable.operating_temperature)
    if cable.sheath_resistivity is not None:
        rho_sheath = cable.sheath_resistivity
        notes.append(f"Cable {name}: the sheath's resistivity as given "
                     f"({cable.sheath_resistivity:.4g} ohm*m, taken at its temperature).")
    else:
        s20, s_alpha = MATERIALS[cable.sheath_material]
        rho_sheath = s20 * (1 + s_alpha * (t_sheath - 20.0))
        notes.append(
            f"Cable {name}: core at {cable.operating_temperature:g} degC, {cable.sheath_material} "
            f"sheath at {t_sheath:g} degC"
            + (" (the core's temperature: an upper bound, no sheath_temperature given)"
               if cable.sheath_temperature is None else "")
            + "; resistivities rho_20 (1 + alpha (T - 20)) with IEC 60287-1-1 Table 1 "
            "(values from memory).")
    eps = cable.insulation_permittivity
    if cable.insulation_inner_radius is not None:
        # The semiconducting screens: the same capacitance between core and sheath with the
        # insulation's permittivity raised (Gustavsen et al. 2005).
        eps *= (math.log(cable.sheath_inner_radius / r1)
                / math.log(cable.insulation_outer_radius / cable.insulation_inner_radius))
    design = CableDesign(
        core_radius_m=r1, core_resistivity_ohm_m=rho_core,
        sheath_inner_radius_m=cable.sheath_inner_radius,
        sheath_outer_radius_m=cable.sheath_outer_radius,
        sheath_resistivity_ohm_m=rho_sheath, jacket_radius_m=cable.jacket_outer_radius,
        insulation_permittivity=eps, jacket_permittivity=cable.jacket_permittivity)
    _, _, names = cable_positions(cable.formation, 1.0, 1.0)
    ecc = None
    e = cable.earth_continuity_conductor
    if e is not None:  # at 20 degC: it carries no load current
        ecc = ContinuityConductor(
            radius_m=math.sqrt(e.cross_section / math.pi),
            resistivity_ohm_m=MATERIALS[e.material][0], x_m=e.x,
            depth_m=e.depth if e.depth is not None else cable.depth)
        notes.append(f"Cable {name}: earth continuity conductor {1e6 * e.cross_section:g} mm2 "
                     f"{e.material}, a solid round conductor at 20 degC, earthed at both "
                     "ends.")
    if cable.minor_sections is not None:
        ms = ", ".join(f"{x:g} m" for x in cable.minor_sections)
        notes.append(f"Cable {name}: cross-bonded with minor sections of {ms}: each major "
                     "section the cascade of its three minor sections with the sheaths "
                     "rotated at each joint (the sheath of one position continuing in the "
                     "next position of the formation's order), every major section alike.")
    return CableSection(name, design, cable.formation, cable.spacing_m, cable.depth,
                        cable.bonding, n_circuits, cable.circuit_spacing or 0.0, names,
                        tuple(notes), ecc, cable.minor_sections)


def check_cable_section(study: Any, sec: Any, field: str, fail: Callable[..., None]
                        ) -> None:
    """The rules of one section on a cable (the line's or a tee branch's), named as the
    user wrote ``field``: overhead or cable, not both; a cable of ``[cables]``."""
    cables = study.cables
    if sec.tower is not None:
        fail("a section is either overhead or cable: give tower or cable, not both",
             f"{field}.cable", sec.cable)
    if sec.cable not in cables:
        fail("names no cable of [cables]" + (" (cables: " + ", ".join(cables) + ")"
                                             if cables else ": the study has none")
             + suggest(sec.cable, cables), f"{field}.cable", sec.cable)


def check_cables(study: Any, data: dict, fail: Callable[..., None]) -> None:
    """The rules tying ``[cables.NAME]`` to the line: each section names exactly one of a
    tower and a cable, a cable of [cables]; with cable sections the overhead sections are on
    [towers.NAME] tables; a double-circuit line gives the cables' circuit spacing."""
    cables = study.cables
    sections = study.line.sections or ()
    used = [s for s, sec in enumerate(sections) if sec.cable is not None]
    for t in cables:
        if t in study.towers:
            fail("a cable and a tower must not share a name", f"cables.{toml_key(t)}")
    for s in used:
        check_cable_section(study, sections[s], f"line.sections[{s}]", fail)
    if not used:
        return
    if len(used) == len(sections):  # before asking for towers: none would help
        fail("a line of cable sections only is not modelled yet: the line model is built on "
             "an overhead section's cross-section, which this line does not have",
             "line.sections")
        return
    if not study.towers:
        fail("with cable sections, give the overhead sections' cross-sections as "
             "[towers.NAME] tables and a tower per overhead section", "towers")
    n_c = len(study.circuits)
    for name in dict.fromkeys(sections[s].cable for s in used):
        cable = cables[name]
        field = f"cables.{toml_key(name)}"
        raw = data.get("cables", {}).get(name, {})
        if n_c == 2 and cable.circuit_spacing is None:
            fail("is required: the line has two circuits (the distance between the centres "
                 "of the two cable groups)", f"{field}.circuit_spacing")
        if n_c == 1 and cable.circuit_spacing is not None:
            fail("goes only with a double-circuit line", f"{field}.circuit_spacing",
                 raw.get("circuit_spacing"))
        if cable.minor_sections is not None:
            laid = math.fsum(sections[s].length for s in used if sections[s].cable == name)
            major = math.fsum(cable.minor_sections)
            if major > laid * (1 + 1e-9):
                fail(f"the major section ({major:g} m, the sum of the minor sections) is "
                     f"longer than the cable's sections in the line ({laid:g} m)",
                     f"{field}.minor_sections", raw.get("minor_sections"))
        e = cable.earth_continuity_conductor
        if e is not None:  # laid beside the cables, not through one
            from relayset.physics.cable import cable_positions

            xs, ds, _ = cable_positions(cable.formation, cable.spacing_m, cable.depth, n_c,
                                        cable.circuit_spacing or 0.0)
            depth = e.depth if e.depth is not None else cable.depth
            clear = cable.jacket_outer_radius + math.sqrt(e.cross_section / math.pi)
            if min(math.hypot(x - e.x, d - depth) for x, d in zip(xs, ds, strict=True)) < clear:
                fail(f"the earth continuity conductor would lie inside a cable: at least "
                     f"{clear:.3g} m from every cable's axis", f"{field}.earth_continuity_"
                     "conductor.x", (raw.get("earth_continuity_conductor") or {}).get("x"))
        if n_c == 2:
            width = (2 if cable.formation == "flat" else 1) * cable.spacing_m
            least = width + 2 * cable.jacket_outer_radius
            if cable.circuit_spacing < least * (1 - 1e-9):
                fail(f"the two circuits' cables would overlap: at least {least:.3g} m",
                     f"{field}.circuit_spacing", raw.get("circuit_spacing"))


def cable_rule_names() -> tuple[str, ...]:
    """The keys of a ``[cables.NAME]`` table, as written (for the JSON Schema)."""
    return schema.table(Cable).keys


def json_schema() -> dict[str, Any]:
    """JSON Schema (draft 2020-12) of the ``[cables]`` tables: names to tables of the
    known keys (values as text or numbers; relayset checks them)."""
    keys = cable_rule_names()
    required = [k for k, _, _, f in schema.table(Cable).fields
                if f.default is schema.REQUIRED]
    table = {"type": "object", "properties": {k: {} for k in keys},
             "required": required, "additionalProperties": False}
    for k in ("core_material", "sheath_material", "formation", "bonding"):
        conv = {"core_material": CORE_MATERIALS, "sheath_material": SHEATH_MATERIALS,
                "formation": ("flat", "trefoil"),
                "bonding": ("both_ends", "single_point", "cross_bonded")}[k]
        table["properties"][k] = {"enum": list(conv)}
    for k in ("insulation_permittivity", "jacket_permittivity"):
        table["properties"][k] = {"type": "number", "minimum": 1}
    return {"type": "object", "additionalProperties": table,
            "description": "single-core cable sections, named by line.sections[].cable; "
                           f"depth at most {MAX_DEPTH_M:g} m"}


__all__ = ["Cable", "CableSection", "check_cables", "json_schema", "resolve"]


def constructions(study: Any, names: tuple[str, ...]
                  ) -> tuple[tuple[tuple[str, ...], ...], tuple[CableSection, ...], list[str]]:
    """The cables named by the sections (``names``, in order of first use): per cable its
    position names (``"circuit/position"``, like a tower's), the resolved cable, and the
    assumptions to state."""
    n_c = len(study.circuits)
    resolved = tuple(resolve(n, study.cables[n], n_c) for n in names)
    positions = tuple(tuple(f"{c.name}/{p}" for c in study.circuits for p in cs.position_names)
                      for cs in resolved)
    notes = [n for cs in resolved for n in cs.notes]
    if resolved:
        upper = " (the upper layer's)" if study.system.earth_model == "two_layer" else ""
        notes.append(
            "Cable sections: series impedance of buried single-core cables by Ametani's "
            "formulation (internal impedances of the core and the tubular sheath by "
            "Schelkunoff's formulas, earth return by Pollaczek's integral evaluated "
            f"numerically over homogeneous earth of the study's resistivity{upper}); shunt "
            "admittance of the insulation with the sheaths at earth potential; the core a "
            "solid round conductor (skin effect of a solid core, no proximity effect); the "
            "core's and the sheath's resistivities at their temperatures (a warm sheath's "
            "higher resistance raises R0 of sheath-return bondings).")
    from relayset.physics.cable import RETURN_PATHS

    for cs in resolved:
        notes.append(f"Cable {cs.name}: sheaths {cs.bonding.replace('_', ' ')}; "
                     f"zero-sequence return through {RETURN_PATHS[cs.return_paths_key]}.")
    return positions, resolved, notes
