"""The study file: a validated, frozen model of one TOML line study.

Quantities are text with units ("28 ft", "0.1859 ohm/mi", "100 ohm*m"), converted to SI as
they are read. Every rule a file can break raises :class:`relayset.errors.InputError` with
the file, the dotted field, the value and the rule. The tables are frozen dataclasses read by
:mod:`relayset.inputs.schema` (each field's converter given with ``spec``); rules that tie
fields of one table together are its ``_check`` method, rules across tables
:func:`check_study`.
"""

from __future__ import annotations

import dataclasses
import datetime as dt
import math
import re
import tomllib
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from relayset.errors import InputError, Written, WrittenFloat, quote, suggest, toml_key
from relayset.inputs import limits, schema, units
from relayset.inputs.cable import Cable, check_cables
from relayset.inputs.schema import KeyRuleError, ListOf, MapOf, TupleOf, spec, table
from relayset.inputs.series_capacitor import (
    MAX_SERIES_CAPACITORS,
    SeriesCapacitor,
    check_series_capacitors,
)
from relayset.inputs.toml_depth import nesting_depth

SCHEMA = "relayset-study/1"


_DEG = math.pi / 180.0


def _quantity(kind: str, *, gt: float | None = None, ge: float | None = None,
              le: float | None = None, lt: float | None = None,
              show: tuple[str, float] | None = None) -> Callable[[Any], float]:
    """An SI float parsed from text with units, within bounds (SI) shown in ``show`` units.

    The upper bounds are plausibility limits (far beyond any real line, well inside what the
    numerics handle), so that a typing slip gets a message instead of nonsense results.
    """
    unit, factor = show or (units.target_example(kind), 1.0)

    def fmt(x: float) -> str:
        return f"{x / factor:g} {unit}".strip()

    def parse(v: Any) -> float:
        x = units.parse_real(v, kind)
        _bounds(x, gt, ge, le, lt, fmt)
        return x

    return parse


def _bounds(x, gt, ge, le, lt, fmt) -> None:
    if gt is not None and not x > gt:
        raise ValueError(f"must be greater than {fmt(gt)}")
    if ge is not None and not x >= ge:
        raise ValueError(f"must be at least {fmt(ge)}")
    if le is not None and not x <= le:
        raise ValueError(f"must be at most {fmt(le)} (plausible range)")
    if lt is not None and not x < lt:
        raise ValueError(f"must be less than {fmt(lt)}")


def _complex_quantity(kind: str = "impedance", *, min_abs: float = 1e-3,
                      max_abs: float = 1e4, inductive: bool = False
                      ) -> Callable[[Any], complex]:
    """A complex SI quantity whose magnitude lies in [min_abs, max_abs] [ohm]; with
    ``inductive`` also R >= 0 and X > 0 (a line's impedance)."""

    def parse(v: Any) -> complex:
        z = units.parse_complex(v, kind)
        if not min_abs <= abs(z) <= max_abs:
            raise ValueError(f"must have a magnitude between {min_abs:g} and {max_abs:g} ohm "
                             "(plausible range)")
        if inductive and not (z.real >= 0 and z.imag > 0):
            raise ValueError("must have R >= 0 and X > 0 (an inductive line impedance)")
        return z

    return parse


def _number(*, gt: float | None = None, ge: float | None = None, le: float | None = None,
            lt: float | None = None, unit: str = "", rule: str = "") -> Callable[[Any], float]:
    """A plain number within bounds; ``rule`` replaces the bound messages when given."""

    def parse(v: Any) -> float:
        if isinstance(v, str) and units._DECIMAL_COMMA.match(v):
            raise ValueError("uses a decimal comma; write a number with a decimal point")
        if isinstance(v, bool) or not isinstance(v, int | float):
            raise ValueError("must be a plain number")
        x = float(v)
        if not math.isfinite(x):
            raise ValueError("must be a finite number")
        try:
            _bounds(x, gt, ge, le, lt, lambda b: f"{b:g}{unit}")
        except ValueError:
            if rule:
                raise ValueError(rule) from None
            raise
        return x

    return parse


def _text(max_len: int = 100, *, min_len: int = 0) -> Callable[[Any], str]:
    def check(v: Any) -> str:
        v = schema.text(v)
        if len(v) > max_len:
            raise ValueError(f"is too long ({len(v)} characters; at most {max_len})")
        if len(v) < min_len:
            raise ValueError("must not be empty")
        return v

    return check


def _path_text(v: Any) -> str:
    """A file path as text: short enough for any file system, no NUL character."""
    v = schema.text(v)
    if "\0" in v or len(v) > 1024 or any(len(p) > 255 for p in v.replace("\\", "/").split("/")):
        raise ValueError("is not a usable file path (at most 1024 characters, 255 per "
                         "folder or file name)")
    return v


def _non_empty(v: tuple) -> tuple:
    if len(v) == 0:
        raise ValueError("must not be empty: give at least one entry")
    return v


def _orientation(v: Any) -> float:
    """Bundle orientation: an angle, or "horizontal" (0 deg) / "vertical" (90 deg)."""
    if isinstance(v, str) and v.strip().lower() in ("horizontal", "vertical"):
        v = "0 deg" if v.strip().lower() == "horizontal" else "90 deg"
    return units.parse_real(v, "angle")


def _order(v: Any) -> tuple[str, ...] | dict[str, tuple[str, ...]]:
    """A section order: a list of phase labels, or one such list per circuit name."""
    def labels(x: Any) -> tuple[str, ...]:
        if not isinstance(x, list | tuple) or not all(isinstance(p, str) for p in x):
            raise ValueError("must be a list of phase labels, like [\"A\", \"B\", \"C\"]")
        return tuple(x)

    if isinstance(v, dict):
        return {str(k): labels(x) for k, x in v.items()}
    return labels(v)


Name = _text(100)


def PersonName(v: Any) -> str:
    """Who prepared, checked or approved: empty (nobody yet), or a name of at least two
    letters ("x" or "-" names nobody)."""
    v = Name(v)
    if v.strip() and sum(c.isalpha() for c in v) < 2:
        raise ValueError("must name a person (at least two letters)")
    return v


Length = _quantity("length", gt=0)
ResPerLength = _quantity("resistance_per_length", ge=1e-6, le=0.1, show=("ohm/km", 1e-3))
Temperature = _quantity("temperature", ge=-70.0, le=300.0)
Angle = _quantity("angle", ge=-360 * _DEG, le=360 * _DEG, show=("deg", _DEG))
Resistance = _quantity("resistance", ge=0, le=1e3)
ComplexOhm = _complex_quantity()
LineOhm = _complex_quantity(inductive=True)
LocationPct = _number(ge=0, le=100, rule="fault locations must lie between 0 and 100 % of the "
                      "line")
# Conductor and tower dimensions.
XPosition = _quantity("length", ge=-100.0, le=100.0)
Height = _quantity("length", gt=0, le=400.0)
Sag = _quantity("length", ge=0, le=200.0)
Diameter = _quantity("length", ge=1e-3, le=0.2, show=("mm", 1e-3))
WireDiameter = _quantity("length", ge=1e-4, le=0.02, show=("mm", 1e-3))
LineLength = _quantity("length", gt=0, le=3e6, show=("km", 1e3))
Power = _quantity("power", gt=0, le=1e11, show=("MVA", 1e6))
_FaultLevelPower = _quantity("power", ge=1e6, le=1e12, show=("MVA", 1e6))


def FaultLevel(v: Any) -> float:
    """A fault level is an apparent power, written in VA (W or var are other quantities)."""
    if isinstance(v, str) and re.search(r"(?i)(?<![a-z])[kmg]?(w|var)\s*$", v.strip()):
        raise ValueError("a fault level is an apparent power: give it in MVA (or VA, kVA, "
                         "GVA), not W or var")
    return _FaultLevelPower(v)
SignedPower = _quantity("power", ge=-1e11, le=1e11, show=("MW", 1e6))

# Every table: frozen, keyword-only (fields with and without defaults mix freely).
_table = dataclass(frozen=True, kw_only=True)


@_table
class StudyInfo:
    """``[study]``: what the calculation is, who signs it, which philosophy applies."""

    line_id: str = spec(_text(100, min_len=1))
    title: str = spec(_text(200))
    from_substation: str = spec(_text(100, min_len=1))
    to_substation: str = spec(_text(100, min_len=1))
    revision: str = spec(Name, "A")
    revision_date: dt.date | None = spec(schema.date, None)
    status: str = spec(schema.one_of("draft", "for review", "approved"), "draft")
    prepared_by: str = spec(PersonName, "")
    checked_by: str = spec(PersonName, "")
    approved_by: str = spec(PersonName, "")
    philosophy: str = spec(_path_text, "default")
    notes: str = spec(_text(10_000), "")

    def _check(self) -> None:
        # Who signs: a calculation for review names its preparer; an approved one also its
        # checker and approver.
        needed = {"for review": ("prepared_by",),
                  "approved": ("prepared_by", "checked_by", "approved_by")}.get(self.status, ())
        missing = [f for f in needed if not getattr(self, f).strip()]
        if missing:
            raise KeyRuleError(missing[0], f"must name who signs: status {quote(self.status)} "
                          "needs a name in " + " and ".join(missing))


@_table
class Revision:
    """One entry of the revision history (``[[revisions]]``), printed in the report."""

    revision: str = spec(schema.text)
    date: dt.date = spec(schema.date)
    description: str = spec(schema.text, "")
    by: str = spec(schema.text, "")


@_table
class SystemData:
    """``[system]``: voltage, frequency and the earth the line runs over."""

    nominal_voltage: float = spec(_quantity("voltage", ge=1e3, le=1.5e6, show=("kV", 1e3)))
    frequency: float = spec(_quantity("frequency", gt=0))
    # Sea water (about 0.2 ohm*m) to dry rock (about 1e4 ohm*m), with room on both sides.
    earth_resistivity: float = spec(_quantity("resistivity", ge=0.1, le=1e5))
    earth_model: str = spec(schema.text, "carson")
    # Uncertainty of the resistivity [low, high], swept by the verification (k0 moves with it).
    earth_resistivity_range: tuple[float, float] | None = spec(TupleOf(
        _quantity("resistivity", gt=0), _quantity("resistivity", gt=0)), None)
    # Two-layer earth: earth_resistivity is the upper layer's, over this lower half-space.
    earth_lower_resistivity: float | None = spec(_quantity("resistivity", ge=0.1, le=1e5), None)
    earth_layer_thickness: float | None = spec(_quantity("length", gt=0, le=1e4), None)

    def _check(self) -> None:
        two = self.earth_model == "two_layer"
        for name in ("earth_lower_resistivity", "earth_layer_thickness"):
            if two and getattr(self, name) is None:
                raise KeyRuleError(name, "is needed with earth_model \"two_layer\"")
            if not two and getattr(self, name) is not None:
                raise KeyRuleError(name, "goes only with earth_model \"two_layer\" (this "
                                   f"study's is \"{self.earth_model}\")")
        r = self.earth_resistivity_range
        if r is not None and not r[0] <= self.earth_resistivity <= r[1]:
            raise KeyRuleError("earth_resistivity_range", "must run from low to high and contain "
                          f"earth_resistivity ({self.earth_resistivity:g} ohm*m)")
        from relayset.physics.earth_models import EARTH_MODELS

        if self.earth_model not in EARTH_MODELS:
            raise KeyRuleError("earth_model", f"is not one of {', '.join(EARTH_MODELS)}"
                          + suggest(self.earth_model, EARTH_MODELS))
        if self.frequency not in (50.0, 60.0):
            raise KeyRuleError("frequency", "must be 50 Hz or 60 Hz")


@_table
class ConductorType:
    """``[conductor_types.NAME]``: a table code, or the conductor's own data."""

    code: str | None = spec(Name, None)
    outside_diameter: float | None = spec(Diameter, None)
    gmr: float | None = spec(_quantity("length", ge=1e-4, le=0.1, show=("mm", 1e-3)), None)
    strands_aluminium: int | None = spec(schema.integer(ge=1, le=500), None)
    strands_steel: int | None = spec(schema.integer(ge=0, le=200), None)
    wire_diameter_aluminium: float | None = spec(WireDiameter, None)
    wire_diameter_steel: float | None = spec(WireDiameter, None)
    ac_resistance: float | None = spec(ResPerLength, None)
    ac_resistance_temperature: float | None = spec(Temperature, None)
    dc_resistance_20c: float | None = spec(ResPerLength, None)
    temperature_coefficient: float | None = spec(_quantity("per_kelvin", ge=0, le=0.01), None)
    ac_dc_ratio: float | None = spec(_number(ge=1.0, le=2.0), None)
    operating_temperature: float | None = spec(Temperature, None)


@_table
class Bundle:
    """Subconductors of one phase position: count, spacing [m], orientation [rad]."""

    count: int = spec(schema.integer(ge=1, le=8))
    spacing: float = spec(_quantity("length", gt=0, le=3.0))
    #: Rotation of the subconductor polygon [rad]; 0 ("horizontal"): a twin bundle lies
    #: horizontally; 90 deg ("vertical"): one above the other. See bundle_offsets_m.
    orientation: float = spec(_orientation, 0.0)

    def _check(self) -> None:
        if not abs(self.orientation) <= 2 * math.pi:
            raise KeyRuleError("orientation", "must lie between -360 deg and 360 deg")


@_table
class _Placed:
    """A conductor hung at a position on the tower."""

    x: float = spec(XPosition)
    height: float | None = spec(Height, None)
    sag: float = spec(Sag, 0.0)
    average_height: float | None = spec(Height, None)
    conductor: str = spec(Name)

    def _check(self) -> None:
        if self.height is not None and self.average_height is not None:
            raise KeyRuleError("average_height", "give either height (with sag) or average_height, "
                          "not both")
        if self.height is None and self.average_height is None:
            raise ValueError("give either height (with sag) or average_height")
        if self.average_height is not None and self.sag:
            raise KeyRuleError("sag", "goes with height (attachment), not with average_height")

    @property
    def mean_height_m(self) -> float:
        """Average height over the span: h - 2/3 sag for a parabolic sag curve."""
        if self.average_height is not None:
            return self.average_height
        return self.height - 2.0 * self.sag / 3.0


@_table
class Position(_Placed):
    """A phase position of a circuit."""

    name: str = spec(Name)
    bundle: Bundle | None = spec(table(Bundle), None)


def _three_labels(v: tuple[str, ...]) -> tuple[str, ...]:
    if len(v) != 3 or len(set(v)) != 3:
        raise ValueError("must be three different phase labels, like [\"A\", \"B\", \"C\"]")
    if any(len(p) > 20 or not p.strip() for p in v):
        raise ValueError("each phase label must be 1 to 20 characters")
    return v


def _three_positions(v: tuple) -> tuple:
    if len(v) != 3:
        raise ValueError(f"a circuit needs exactly three positions, one per phase (found "
                         f"{len(v)})")
    return v


@_table
class Circuit:
    """``[[circuits]]``: three phase positions and their labels."""

    name: str = spec(_text(50, min_len=1))
    phase_labels: tuple[str, ...] = spec(ListOf(schema.text, _three_labels), ("A", "B", "C"))
    #: Empty when the study's [towers] tables carry the positions (checked in check_study).
    positions: tuple[Position, ...] = spec(ListOf(table(Position), _three_positions), ())


def _one_or_two(v: tuple) -> tuple:
    if not 1 <= len(v) <= 2:
        raise ValueError(f"give one or two [[circuits]] (found {len(v)})")
    return v


@_table
class ShieldWire(_Placed):
    """``[[shield_wires]]``: an earth wire and how it is earthed."""

    name: str = spec(Name, "")
    grounding: str = spec(schema.one_of("continuous", "segmented", "none"), "continuous")


@_table
class Tower:
    """``[towers.NAME]``: one tower type's cross-section: three positions per circuit (keyed
    by the circuit's name) and its shield wires."""

    positions: dict[str, tuple[Position, ...]] = spec(MapOf(
        ListOf(table(Position), _three_positions), _text(50, min_len=1), max_items=2,
        what="circuits"))
    shield_wires: tuple[ShieldWire, ...] = spec(ListOf(
        table(ShieldWire), max_items=limits.MAX_SHIELD_WIRES, what="shield wires"), ())


@_table
class Section:
    """One transposition section: its length, the phase order along it and (with
    ``[towers]`` tables) the tower it is built on."""

    length: float = spec(LineLength)
    order: tuple[str, ...] | dict[str, tuple[str, ...]] = spec(_order)
    tower: str | None = spec(_text(100, min_len=1), None)
    cable: str | None = spec(_text(100, min_len=1), None)  #: a [cables.NAME] (not overhead)


@_table
class LineData:
    """``[line]``: length and the transposition plan."""

    length: float = spec(LineLength)
    sections: tuple[Section, ...] | None = spec(ListOf(
        table(Section), _non_empty, max_items=limits.MAX_SECTIONS, what="sections"), None)


@_table
class K0Setting:
    """A residual (or mutual) compensation factor as set on the relay."""

    magnitude: float = spec(_number(ge=0, le=10))
    angle: float = spec(Angle, 0.0)


def _ratio(v: Any, unit: str, what: str) -> float:
    if isinstance(v, str):
        m = re.match(rf"^\s*{units.NUMBER}\s*[/:]\s*{units.NUMBER}\s*([A-Za-z]*)\s*$", v)
        written = m.group(1) if m else ""
        if written and written.upper() != unit.upper() and not (
                unit == "V" and written.lower() == "kv"):
            raise ValueError(f"a {what} ratio is in {unit}, not {written}")
    r = units.parse_ratio(v)
    if r > 1e5:
        raise ValueError("must be at most 100000 (plausible range)")
    if r < 1:
        raise ValueError(f"a {what} steps down: write primary/secondary (ratio at least 1)")
    return r


class CtRatio(float):
    """A CT ratio (primary over secondary) that remembers its primary rating [A].

    Written as ``"1200/1 A"`` or ``"1200/5"`` the primary is the rated primary current
    (1200 A); a bare number is the ratio alone, with no rating to check the load against.
    """

    primary_a: float | None

    def __new__(cls, ratio: float, primary_a: float | None) -> CtRatio:
        obj = super().__new__(cls, ratio)
        obj.primary_a = primary_a
        return obj

    def __reduce__(self):  # pickled (fleet workers) with its rating
        return (CtRatio, (float(self), self.primary_a))


def _ct_ratio(v: Any) -> CtRatio:
    r = _ratio(v, "A", "CT")
    primary = None
    if isinstance(v, str):
        m = re.match(rf"^\s*({units.NUMBER})\s*[/:]", v)
        primary = float(m.group(1)) if m else None
    return CtRatio(r, primary)


def _vt_ratio(v: Any) -> float:
    return _ratio(v, "V", "VT")


#: Plausible VT secondary voltage at nominal primary voltage [V] (common practice, no source).
VT_SECONDARY_MIN_V, VT_SECONDARY_MAX_V = 56.0, 250.0


@_table
class EndTransformers:
    """Instrument-transformer ratios of the relay at one end, where they differ."""

    ct_ratio: float | None = spec(_ct_ratio, None)
    vt_ratio: float | None = spec(_vt_ratio, None)


SecondaryCurrent = _quantity("current", ge=0, le=50)


@_table
class RelayData:
    """``[relay]``: where the relay sits, its CT/VT ratios and given settings."""

    end: str = spec(_text(100, min_len=1))
    ct_ratio: float = spec(_ct_ratio)
    vt_ratio: float = spec(_vt_ratio)
    z1_set: complex | None = spec(LineOhm, None)
    k0_set: K0Setting | None = spec(table(K0Setting), None)
    k0m_set: K0Setting | None = spec(table(K0Setting), None)
    #: ``[relay.at.SUBSTATION]``: CT/VT ratios of the relay at that end, if not the above.
    at: dict[str, EndTransformers] = spec(MapOf(table(EndTransformers)), factory=dict)
    # The relay model of the verification (relayset.studies.verification.relay_model).
    #: loops that measure a fault: those meant for its type, or all six
    phase_selection: str = spec(schema.one_of("faulted_loops", "all_loops"), "faulted_loops")
    #: minimum operating current in each phase of a loop [A secondary] (common practice,
    #: no source: 5 % of a 1 A input; lower is the stricter test in both directions)
    min_operating_current: float = spec(SecondaryCurrent, 0.05)
    #: residual current that releases the ground loops [A secondary] (as above)
    ground_release_current: float = spec(SecondaryCurrent, 0.05)
    #: mutual compensation only while the own residual current is the larger
    mutual_compensation_supervision: bool = spec(schema.boolean, True)
    #: continuous thermal current rating factor of the CTs (IEEE Std C57.13 rating factors
    #: 1.0 to 4.0; 1.0 the common practice default, no source)
    ct_rating_factor: float = spec(_number(ge=1, le=4), 1.0)
    #: relay profile file (``relayset-relay-profile/1``, relative to the study): the
    #: settings are rounded to its steps and verified as rounded (relayset.inputs.profile)
    profile: str | None = spec(_text(1000, min_len=1), None)

    def ct_primary_a(self, end: str) -> float | None:
        """Rated primary current of the CT at ``end`` [A]; None where only a ratio is given."""
        own = self.at.get(end)
        ct = own.ct_ratio if own is not None and own.ct_ratio is not None else self.ct_ratio
        return getattr(ct, "primary_a", None)

    def ratios(self, end: str) -> tuple[float, float]:
        """(CT ratio, VT ratio) of the relay at ``end``."""
        own = self.at.get(end)
        ct = own.ct_ratio if own is not None and own.ct_ratio is not None else self.ct_ratio
        vt = own.vt_ratio if own is not None and own.vt_ratio is not None else self.vt_ratio
        return ct, vt


@_table
class SourceData:
    """``[sources.END]``: the source behind one end (impedances or fault levels)."""

    z1: complex | None = spec(ComplexOhm, None)
    z0: complex | None = spec(ComplexOhm, None)
    fault_level_3ph: float | None = spec(FaultLevel, None)
    fault_level_1ph: float | None = spec(FaultLevel, None)
    x_over_r: float | None = spec(_number(ge=0.1, le=500), None)
    z0_over_z1: float | None = spec(_number(ge=0.05, le=20), None)

    def _check(self) -> None:
        if self.z1 is not None:
            if self.z0 is None:
                raise KeyRuleError("z1", "needs z0 as well")
            for name, z in (("z1", self.z1), ("z0", self.z0)):
                if z.real < 0:
                    raise KeyRuleError(name, f"has a negative resistance ({z.real:g} ohm)")
                if z.imag <= 0:
                    raise KeyRuleError(name, "must have a positive (inductive) reactance")
        elif self.fault_level_3ph is not None:
            if self.x_over_r is None:
                raise KeyRuleError("fault_level_3ph", "needs x_over_r")
            if self.fault_level_1ph is None and self.z0_over_z1 is None:
                raise KeyRuleError("fault_level_3ph", "needs fault_level_1ph or z0_over_z1")
        else:
            raise ValueError("give z1 and z0, or fault_level_3ph with x_over_r")


@_table
class PowerFlow:
    """A prefault load case: power into the line at the relay end (from end for "both")."""

    active_power: float = spec(SignedPower)
    reactive_power: float = spec(SignedPower, 0.0)


TransferAngle = _quantity("angle", ge=-90 * _DEG, le=90 * _DEG, show=("deg", _DEG))


def _apparent(v: Any) -> float:
    """An apparent power is written in VA; W (real power) is a different quantity."""
    if isinstance(v, str) and re.search(r"(?i)(?<![a-z])[kmg]?w\s*$", v.strip()):
        raise ValueError("an apparent power is in VA, kVA or MVA, not W (the load's "
                         "current follows from VA; give P and Q under power_flows)")
    return Power(v)


@_table
class LoadData:
    """``[load]``: the heaviest load the zones must not see."""

    max_apparent_power: float = spec(_apparent)
    min_voltage: float = spec(_quantity("dimensionless", ge=0.5, le=1.2, show=("pu", 1.0)), 0.9)
    load_angle_max: float = spec(Angle, math.radians(30.0))
    transfer_angles: tuple[float, ...] = spec(ListOf(
        TransferAngle, _non_empty, max_items=limits.MAX_SWEEP_VALUES, what="load cases"),
        (0.0,))
    power_flows: tuple[PowerFlow, ...] = spec(ListOf(
        table(PowerFlow), max_items=limits.MAX_SWEEP_VALUES, what="load cases"), ())

    def _check(self) -> None:
        if not 0 <= self.load_angle_max < math.pi / 2:
            raise KeyRuleError("load_angle_max", "must be at least 0 deg and below 90 deg, not "
                               f"{math.degrees(self.load_angle_max):g} deg")


@_table
class SourceCase:
    """A source strength case of the reach study (factors on the source impedances)."""

    name: str = spec(Name)
    scale: float = spec(_number(ge=0.01, le=100), 1.0)
    #: Per-end factors, e.g. ``at = {Elsford = 2.0}`` (weak there); ends not named: ``scale``.
    at: dict[str, float] = spec(MapOf(_number(ge=0.01, le=100)), factory=dict)

    def scale_at(self, end: str) -> float:
        """The factor on the source impedance at ``end`` [1]."""
        return float(self.at.get(end, self.scale))


#: Finest fault-location step [% of the line]: 10 000 locations, already far finer than any
#: reach setting resolution (the reach study also limits its total case count).
MIN_LOCATION_STEP_PCT = 0.01


Zone1Pct = _number(gt=0, lt=100, rule="must be between 0 and 100 % of the line")


@_table
class ReachStudyData:
    """``[reach_study]``: which faults, where, through which resistances."""

    fault_types: tuple[str, ...] = spec(ListOf(
        _text(10), _non_empty, max_items=limits.MAX_FAULT_TYPES, what="fault types"), (
        "AG", "BG", "CG", "AB", "BC", "CA", "ABG", "BCG", "CAG", "ABC"))
    location_step_pct: float = spec(_number(ge=MIN_LOCATION_STEP_PCT, le=50, unit=" %"), 1.0)
    locations_pct: tuple[float, ...] | None = spec(ListOf(
        LocationPct, _non_empty, max_items=limits.MAX_LOCATIONS, what="fault locations"),
        None)
    fault_resistances: tuple[float, ...] = spec(ListOf(
        Resistance, max_items=limits.MAX_SWEEP_VALUES, what="fault resistances"),
        (0.0, 5.0, 10.0, 20.0))
    phase_fault_resistance: float = spec(Resistance, 0.0)
    source_cases: tuple[SourceCase, ...] = spec(ListOf(
        table(SourceCase), _non_empty, max_items=limits.MAX_SWEEP_VALUES,
        what="source cases"), (
        SourceCase(name="strong", scale=0.5),
        SourceCase(name="nominal", scale=1.0),
        SourceCase(name="weak", scale=2.0),
    ))
    parallel_circuit: str | None = spec(schema.one_of("in_service", "earthed", "isolated"),
                                        None)
    mutual_compensation: bool = spec(schema.boolean, True)
    shunt_capacitance: bool = spec(schema.boolean, False)
    zone1_reach_pct: float | None = spec(Zone1Pct, None)


@_table
class ErrorBudget:
    """Measurement and data errors in percent of reach (defaults: common practice, no source)."""

    ct_pct: float = spec(_number(ge=0, le=50), 1.0)
    vt_pct: float = spec(_number(ge=0, le=50), 1.0)
    relay_pct: float = spec(_number(ge=0, le=50), 5.0)
    line_data_pct: float = spec(_number(ge=0, le=50), 3.0)

    @property
    def total_pct(self) -> float:
        return self.ct_pct + self.vt_pct + self.relay_pct + self.line_data_pct


@_table
class AdjacentLine:
    """A line leaving a bus of this one: its z1, or its own study file."""

    name: str = spec(_text(200))
    z1: complex | None = spec(LineOhm, None)
    #: zero-sequence impedance with z1 (default in the verification: 3 z1, stated there)
    z0: complex | None = spec(LineOhm, None)
    study: str | None = spec(_path_text, None)
    #: the substation of this line the adjacent line leaves (default: for adjacent_lines the
    #: relay's remote end, for lines_behind the relay's own end; needed when relay.end is both)
    bus: str | None = spec(_text(100), None)

    def _check(self) -> None:
        if self.z1 is not None and self.study is not None:
            raise KeyRuleError("study", "give either z1 or study (a path to the adjacent line's "
                          "study file), not both")
        if self.z1 is None and self.study is None:
            raise ValueError("give either z1 or study (a path to the adjacent line's study file)")
        if self.z0 is not None and self.study is not None:
            raise KeyRuleError("z0", "give z0 only with z1 (a study file gives its own Z0)")


@_table
class FaultResistanceData:
    """``[fault_resistance]``: tower footing and arc lengths."""

    tower_footing_resistance: float = spec(Resistance, 10.0)
    #: phase-to-phase arc length (default: the smallest phase spacing)
    arc_length: float | None = spec(_quantity("length", gt=0, le=100.0), None)
    #: ground-fault arc length (default: 0.01 m per kV, the insulator flashover length)
    ground_arc_length: float | None = spec(_quantity("length", gt=0, le=100.0), None)


def _said(max_len: int) -> Callable[[Any], str]:
    """Text that says something: not empty, not only spaces."""
    base = _text(max_len, min_len=1)

    def check(v: Any) -> str:
        v = base(v)
        if not v.strip():
            raise ValueError("must not be blank")
        return v

    return check


def _reason(v: Any) -> str:
    """Why a failed check is accepted: words, not a mark ("x", "-", "ok")."""
    v = _said(2000)(v)
    if sum(c.isalpha() for c in v) < 5:
        raise ValueError("must say why the failure is accepted (at least five letters)")
    return v


def _accepter(v: Any) -> str:
    """Who accepted a deviation: a person's name, at least two letters."""
    v = _said(100)(v)
    return PersonName(v)


def _check_name(v: Any) -> str:
    """A check as the verification JSON names it: zone and check id, "zone2.covers_whole_line"."""
    v = _text(200, min_len=1)(v)
    if not re.fullmatch(r"[a-z0-9_]+\.[a-z0-9_]+", v):
        raise ValueError("must name a check as the verification does, zone and check id "
                         "joined by a dot (e.g. \"zone2.covers_whole_line\")")
    return v


@_table
class Deviation:
    """``[[deviations]]``: a failed check of the verification accepted, with who and why."""

    check: str = spec(_check_name)
    end: str = spec(_text(100, min_len=1))  #: the relay end whose check failed
    reason: str = spec(_reason)
    accepted_by: str = spec(_accepter)
    date: dt.date = spec(schema.date)


RouteLength = _quantity("length", ge=0, le=3e6, show=("km", 1e3))
NeighbourOffset = _quantity("length", ge=-1000.0, le=1000.0)
ZPerLength = _complex_quantity("resistance_per_length", min_abs=1e-7, max_abs=0.1)


#: Most neighbouring lines of one study: each is one more circuit of the fault solver, and
#: its states multiply the reach study's and the verification's solves (see
#: relayset.studies.corridor.neighbour_combinations).
MAX_NEIGHBOURS = 4


@_table
class Neighbour:
    """``[[neighbours]]``: another line beside this one over part of its route (a shared
    corridor), with its own buses and sources (:mod:`relayset.inputs.corridor`)."""

    name: str = spec(_text(200, min_len=1))
    #: its three phases (A, B, C in this order) on the corridor's cross-section, x from the
    #: protected line's tower centre line (or from its own study file: ``study``)
    positions: tuple[Position, ...] = spec(ListOf(table(Position), _three_positions), ())
    shield_wires: tuple[ShieldWire, ...] = spec(ListOf(
        table(ShieldWire), max_items=limits.MAX_SHIELD_WIRES, what="shield wires"), ())
    #: the protected line's sections it runs beside (as numbered in line.sections[k]) ...
    sections: tuple[int, ...] | None = spec(ListOf(schema.integer(ge=0, le=10_000),
                                                   _non_empty), None)
    #: ... or the stretch it runs beside: from ``start`` (from the from-substation), ``length``
    start: float | None = spec(RouteLength, None)
    length: float | None = spec(LineLength, None)
    #: its bus beside the from-substation's side and beside the to-substation's side
    #: (default with ``study``: that file's from- and to-substation)
    buses: tuple[str, str] = spec(TupleOf(_text(100, min_len=1), _text(100, min_len=1)),
                                  None)
    #: its route outside the corridor at each end (to each bus)
    route_lengths: tuple[float, float] = spec(TupleOf(RouteLength, RouteLength), (0.0, 0.0))
    #: Z1 and Z0 per length of those routes (default: its own, from the corridor)
    route_z1: complex | None = spec(ZPerLength, None)
    route_z0: complex | None = spec(ZPerLength, None)
    #: the sources of its own buses (not needed for a bus of the protected line)
    sources: dict[str, SourceData] = spec(MapOf(table(SourceData), _text(100)), factory=dict)
    #: its own study file (a path relative to this file's folder), giving its conductors,
    #: cross-section and sources instead of positions, shield_wires and sources
    study: str | None = spec(_path_text, None)
    #: with ``study``: its tower centre line's distance from this line's, added to the x of
    #: its file's positions (default 0 m: on the shared towers, x as in its file)
    offset: float | None = spec(NeighbourOffset, None)
    #: that file as read (relayset.inputs.corridor.NeighbourFile; set on reading, not a key)
    file: Any = dataclasses.field(default=None, compare=False, repr=False)

    def _check(self) -> None:
        if self.study is not None:
            for key in ("positions", "shield_wires", "sources"):
                if getattr(self, key):
                    raise KeyRuleError(key, "comes from its study file (study): give one or "
                                       "the other")
        else:
            if not self.positions:
                raise ValueError("give its three positions, or its own study file as study")
            if self.buses is None:
                raise ValueError("give its two buses (buses), or its own study file as study")
            if self.offset is not None:
                raise KeyRuleError("offset", "goes with study (its own study file's "
                                   "cross-section)")
        if self.sections is None and self.start is None:
            raise ValueError("give the sections it runs beside, or start and length")
        if self.sections is not None and (self.start is not None or self.length is not None):
            raise KeyRuleError("start", "give either sections or start and length, not both")
        if (self.start is None) != (self.length is None):
            raise KeyRuleError("length" if self.length is None else "start",
                               "goes with start (or length): give both")
        if (self.route_z1 is None) != (self.route_z0 is None):
            raise KeyRuleError("route_z0" if self.route_z0 is None else "route_z1",
                               "give route_z1 and route_z0 together")


def _tee_table() -> schema.Table:
    from relayset.inputs.teed import TeeData  # declared there; it reads this module's Section

    return table(TeeData)


@_table
class Study:
    """A whole study file, validated, SI inside."""

    schema_: str = spec(schema.text, SCHEMA, key="schema")
    study: StudyInfo = spec(table(StudyInfo))
    revisions: tuple[Revision, ...] = spec(ListOf(table(Revision)), ())
    system: SystemData = spec(table(SystemData))
    conductor_types: dict[str, ConductorType] = spec(MapOf(
        table(ConductorType), _text(100), max_items=limits.MAX_CONDUCTOR_TYPES,
        what="conductor types"))
    circuits: tuple[Circuit, ...] = spec(ListOf(table(Circuit), _one_or_two))
    shield_wires: tuple[ShieldWire, ...] = spec(ListOf(
        table(ShieldWire), max_items=limits.MAX_SHIELD_WIRES, what="shield wires"), ())
    towers: dict[str, Tower] = spec(MapOf(table(Tower), _text(100, min_len=1),
                                          max_items=limits.MAX_TOWERS, what="towers"),
                                    factory=dict)
    cables: dict[str, Cable] = spec(MapOf(table(Cable), _text(100, min_len=1),
                                          max_items=limits.MAX_TOWERS, what="cables"),
                                    factory=dict)
    line: LineData = spec(table(LineData))
    relay: RelayData | None = spec(table(RelayData), None)
    sources: dict[str, SourceData] = spec(MapOf(table(SourceData), _text(100)), factory=dict)
    load: LoadData | None = spec(table(LoadData), None)
    reach_study: ReachStudyData = spec(table(ReachStudyData), factory=ReachStudyData)
    error_budget: ErrorBudget = spec(table(ErrorBudget), factory=ErrorBudget)
    adjacent_lines: tuple[AdjacentLine, ...] = spec(ListOf(
        table(AdjacentLine), max_items=limits.MAX_ADJACENT_LINES, what="lines"), ())
    lines_behind: tuple[AdjacentLine, ...] = spec(ListOf(
        table(AdjacentLine), max_items=limits.MAX_ADJACENT_LINES, what="lines"), ())
    fault_resistance: FaultResistanceData = spec(table(FaultResistanceData),
                                                 factory=FaultResistanceData)
    deviations: tuple[Deviation, ...] = spec(ListOf(table(Deviation), what="deviations"), ())
    neighbours: tuple[Neighbour, ...] = spec(ListOf(
        table(Neighbour), max_items=MAX_NEIGHBOURS, what="neighbouring lines"), ())
    #: series capacitor banks in the line (relayset.inputs.series_capacitor)
    series_capacitors: tuple[SeriesCapacitor, ...] = spec(ListOf(
        table(SeriesCapacitor), max_items=MAX_SERIES_CAPACITORS, what="banks"), ())
    #: ``[tee]``: a third terminal (:class:`relayset.inputs.teed.TeeData`)
    tee: Any = spec(schema.Lazy(_tee_table), None)

    @property
    def ends(self) -> tuple[str, str]:
        """The substations at the two ends: (from, to)."""
        return (self.study.from_substation, self.study.to_substation)

    @property
    def relay_ends(self) -> tuple[str, ...]:
        """The end(s) the relay sits at ("both" means both)."""
        if self.relay is None:
            return ()
        if self.tee is not None and self.relay.end == "all":
            return (*self.ends, self.tee.substation)
        return self.ends if self.relay.end == "both" else (self.relay.end,)


#: The top-level keys of a study file, as written.
TOP_KEYS: tuple[str, ...] = table(Study).keys


_key = toml_key


def field_path(loc: tuple[str | int, ...]) -> str:
    """The dotted field path of a validation issue, as the user wrote it in the file."""
    out = ""
    for part in loc:
        out += f"[{part}]" if isinstance(part, int) else ("." if out else "") + _key(part)
    return out


def _input_error(issue: schema.Issue, source: str) -> InputError:
    """One validation issue as an :class:`InputError` (file, field as written, value, rule)."""
    field = field_path(issue.loc)
    if issue.kind == "unknown":
        known = issue.known
        rule = "unknown key" + (suggest(str(issue.loc[-1]), known) or (
            f"; valid keys: {', '.join(known)}" if known else ""))
        return InputError(rule, field=field, value=issue.value, source=source)
    if issue.kind == "missing":
        return InputError("is required but missing", field=field, source=source)
    return InputError(issue.rule, field=field, value=issue.value, source=source)


def _duplicate_key(text: str, exc: tomllib.TOMLDecodeError, source: str) -> InputError | None:
    """A key or table given twice, named by its dotted path (TOML forbids it)."""
    if "overwrite" not in str(exc) and "twice" not in str(exc):
        return None
    line_no = getattr(exc, "lineno", None)
    if line_no is None:
        m = re.search(r"line (\d+)", str(exc))
        line_no = int(m.group(1)) if m else None
    if not line_no:
        return None
    lines = text.splitlines()
    table = ""
    for ln in lines[: line_no - 1]:
        h = re.match(r"^\s*\[\[?\s*([^\]]+?)\s*\]\]?\s*(#.*)?$", ln)
        if h:
            table = h.group(1)
    here = lines[line_no - 1] if line_no <= len(lines) else ""
    h = re.match(r"^\s*\[\[?\s*([^\]]+?)\s*\]\]?", here)
    key, _, written = here.partition("=")
    key = h.group(1) if h else key.strip()
    field = key if h or not table else f"{table}.{key}"
    value = None if h else Written(written.strip())
    return InputError(f"is given twice (line {line_no}); keep one", field=field or "?",
                      value=value, source=source)


def read_toml(path: str | Path) -> dict:
    """Read a TOML file; a missing file or bad TOML is an InputError naming the file.

    A UTF-8 byte-order mark (as some editors write it) is accepted.
    """
    return loads_toml(read_bytes(path), str(path))


def read_bytes(path: str | Path) -> bytes:
    """The bytes of an input file, read once (the archive hashes exactly what was parsed);
    an InputError says why they cannot be read, or that the file is larger than any study
    (:data:`~relayset.inputs.limits.MAX_FILE_BYTES`)."""
    p = Path(path)
    try:
        if p.is_dir():
            raise InputError("is a folder, not a study file", source=str(path))
        return read_at_most(p, str(path))
    except FileNotFoundError:
        raise InputError("file does not exist", source=str(path)) from None
    except OSError as exc:
        raise InputError(f"cannot be read ({exc.strerror or exc})", source=str(path)) from None


def read_at_most(path: Path, source: str) -> bytes:
    """The bytes of ``path``, refused (InputError) beyond the input file size limit.

    Reads one byte past the limit rather than trusting the size the file system gives, so
    that a device or a growing file is refused as well.
    """
    with open(path, "rb") as f:
        raw = f.read(limits.MAX_FILE_BYTES + 1)
    _check_size(raw, source)
    return raw


def _check_size(raw: bytes | str, source: str) -> None:
    if len(raw) > limits.MAX_FILE_BYTES:
        raise InputError(f"is larger than {limits.MAX_FILE_BYTES // 1024} KiB, the most an "
                         "input file may be (a line study is a few KB); is it the right file?",
                         source=source)


def loads_toml(raw: bytes, source: str) -> dict:
    """Decode (UTF-8, optional byte-order mark) and parse TOML bytes.

    Bad TOML or text that is not UTF-8 is an InputError naming the file; a key given twice
    is named by its dotted path. A file over the size limit, or nesting deeper than
    :data:`~relayset.inputs.limits.MAX_DEPTH`, is refused before it is parsed. Floats keep
    their text (:class:`~relayset.errors.WrittenFloat`) for messages.
    """
    _check_size(raw, source)
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError:
        raise InputError("is not UTF-8 text", source=source) from None
    deep = nesting_depth(text, limits.MAX_DEPTH)
    if deep is not None:
        _, line, key = deep
        raise InputError(
            f"nests tables, lists and dotted keys more than {limits.MAX_DEPTH} levels deep "
            f"(line {line}); a line study needs 6", field=key or f"line {line}", source=source)
    try:
        return tomllib.loads(text, parse_float=WrittenFloat)
    except tomllib.TOMLDecodeError as exc:
        dup = _duplicate_key(text, exc, source)
        if dup is not None:
            raise dup from None
        raise InputError(f"is not valid TOML ({exc})", source=source) from None
    except (RecursionError, MemoryError):  # the depth scan should have caught it first
        raise InputError("is too large or nests too deep to read", source=source) from None


def parse_study(data: dict, source: str = "<study>") -> Study:
    """Validate a study dictionary (as read from TOML) into a :class:`Study`.

    Field rules are checked by the model, then every rule that ties fields together
    (:func:`check_study`).
    """
    try:
        study = schema.validate(Study, data)
    except schema.SchemaError as exc:
        # An unknown key first: a misspelt key also makes the right key "missing", and the
        # misspelling is what the user has to fix.
        raise _input_error(exc.first(), source) from None
    if study.schema_ != SCHEMA:
        raise InputError(f"unsupported schema; this version reads {quote(SCHEMA)}",
                         field="schema", value=study.schema_, source=source)
    if any(nb.study is not None for nb in study.neighbours):
        # a neighbour's own study file: read (hostile until then) before the rules
        from relayset.inputs.corridor import read_neighbour_files

        study = read_neighbour_files(study, data, source)
    check_study(study, data, source)
    return study


def load_study(path: str | Path) -> Study:
    """Read and validate a study file."""
    return parse_study(read_toml(path), source=str(path))


# -- Rules that tie fields together ---------------------------------------------------------

_raw = schema.raw_at  # the user's own text at a path of the raw tables


def _in_users_unit(si: float, example: Any) -> str:
    """``si`` [m] written in the unit of the user's text ``example`` (like "80 km")."""
    unit = "km"
    if isinstance(example, str):
        m = re.match(r"^\s*[+-]?[\d.eE+-]+\s*(.*?)\s*$", example)
        if m and m.group(1):
            unit = m.group(1)
    try:
        factor = units.parse_real(f"1 {unit}", "length")
    except ValueError:
        unit, factor = "km", 1e3
    return f"{si / factor:.6g} {unit}"


def check_study(study: Study, data: dict, source: str) -> None:
    """Every rule of the study file that ties two or more fields together.

    Raises
    ------
    InputError
        Naming the field as the user wrote it and the user's own value.
    """
    ends = study.ends

    def fail(rule: str, field: str, value: Any = None) -> None:
        raise InputError(rule, field=field, value=value, source=source)

    no_end = f"names no end of this line (the ends are {quote(ends[0])} and {quote(ends[1])})"
    if study.tee is not None:  # a third substation (relayset.inputs.teed)
        from relayset.inputs.teed import buses, check_tee

        check_tee(study, data, fail)
        ends = buses(study)
        no_end = "names no substation of this line (" + ", ".join(map(quote, ends)) + ")"
    if ends[0] == ends[1]:
        fail("must differ from study.from_substation", "study.to_substation", ends[1])
    if study.relay is not None:
        # VT secondaries are about 57.7-240 V (100-120 V line to line, or that over sqrt 3;
        # 240 V in a few grids): common practice, no source. The bounds allow a VT primary a
        # little off the nominal voltage; outside them the ratio or the voltage is wrong.
        vts = [(("relay",), study.relay.vt_ratio)]
        vts += [(("relay", "at", end), t.vt_ratio) for end, t in study.relay.at.items()
                if t.vt_ratio is not None]
        for path, vt in vts:
            v_sec = study.system.nominal_voltage / vt
            if not VT_SECONDARY_MIN_V <= v_sec <= VT_SECONDARY_MAX_V:
                fail(f"gives {v_sec:.4g} V on the secondary at the nominal "
                     f"{_raw(data, 'system', 'nominal_voltage')}; VT secondaries are "
                     f"{VT_SECONDARY_MIN_V:g}-{VT_SECONDARY_MAX_V:g} V: check the ratio "
                     "against the line voltage", ".".join((*path, "vt_ratio")),
                     _raw(data, *path, "vt_ratio"))
    names = [c.name for c in study.circuits]
    if len(set(names)) != len(names):
        fail("the two circuits need different names", "circuits[1].name", names[1])
    for s, sec in enumerate(study.line.sections or ()):
        for key in sec.order if isinstance(sec.order, dict) else ():
            if key not in names:
                fail("names no circuit" + suggest(key, names),
                     f"line.sections[{s}].order.{_key(key)}",
                     _raw(data, "line", "sections", s, "order", key))
    check_cables(study, data, fail)
    _check_towers(study, data, fail)
    placed = [(f"circuits[{c}].positions[{k}]", ("circuits", c, "positions", k), pos)
              for c, circ in enumerate(study.circuits) for k, pos in enumerate(circ.positions)]
    placed += [(f"shield_wires[{k}]", ("shield_wires", k), sw)
               for k, sw in enumerate(study.shield_wires)]
    for t, tower in study.towers.items():
        placed += [(f"towers.{_key(t)}.positions.{_key(c)}[{k}]",
                    ("towers", t, "positions", c, k), pos)
                   for c, positions in tower.positions.items()
                   for k, pos in enumerate(positions)]
        placed += [(f"towers.{_key(t)}.shield_wires[{k}]", ("towers", t, "shield_wires", k), sw)
                   for k, sw in enumerate(tower.shield_wires)]
    for field, path, p in placed:
        if p.height is not None and p.sag >= p.height:
            fail(f"must be less than the attachment height ({_raw(data, *path, 'height')}): "
                 "the conductor would touch the ground at mid-span", f"{field}.sag",
                 _raw(data, *path, "sag"))

    # The transposition plan covers the whole line.
    sections = study.line.sections
    if sections is not None:
        total = sum(s.length for s in sections)
        length = study.line.length
        if abs(total - length) > 1e-6 * length + 1e-3:
            raw_len = _raw(data, "line", "length")
            fail(f"section lengths add up to {_in_users_unit(total, raw_len)} but the line is "
                 f"{raw_len} long", "line.sections",
                 [_raw(data, "line", "sections", k, "length") for k in range(len(sections))])

    if study.relay is not None:
        end = study.relay.end
        # a teed line: "all" three ends, or "both" ends of the line (the third substation
        # may have no source of its own, only a grounded transformer)
        every = ("all", "both") if study.tee is not None else ("both",)
        if end not in every and end not in ends:
            fail(f"is not an end of this line; use {', '.join(map(quote, ends))} or "
                 + " or ".join(f"'{e}'" for e in every) + suggest(end, ends), "relay.end",
                 end)
        for key in study.relay.at:
            if key not in ends:
                fail(no_end + suggest(key, ends), f"relay.at.{_key(key)}",
                     _raw(data, "relay", "at", key))
    for k, dev in enumerate(study.deviations):
        if dev.end not in study.relay_ends:
            where = ", ".join(quote(e) for e in study.relay_ends) or "none: no [relay] table"
            fail(f"names no relay end of this study (relay ends: {where})"
                 + suggest(dev.end, study.relay_ends), f"deviations[{k}].end", dev.end)
    for key in study.sources:
        if key not in ends:
            fail(no_end + suggest(key, ends), f"sources.{_key(key)}", _raw(data, "sources", key))

    rs = study.reach_study
    for k, case in enumerate(rs.source_cases):
        for key in case.at:
            if key not in ends:
                fail(no_end + suggest(key, ends), f"reach_study.source_cases[{k}].at.{_key(key)}",
                     _raw(data, "reach_study", "source_cases", k, "at", key))
    if len(study.circuits) == 1 and rs.parallel_circuit is not None:
        fail("the line has one circuit, so there is no parallel circuit to set",
             "reach_study.parallel_circuit", rs.parallel_circuit)
    if "fault_types" in (data.get("reach_study") or {}):
        # Imported only when the file lists fault types (the solver pulls in scipy).
        from relayset.physics.network import FAULT_TYPES

        for k, ft in enumerate(rs.fault_types):
            if ft not in FAULT_TYPES:
                fail("unknown fault type; use " + ", ".join(FAULT_TYPES)
                     + suggest(ft, FAULT_TYPES), f"reach_study.fault_types[{k}]", ft)
    for which in ("adjacent_lines", "lines_behind"):
        for k, line in enumerate(getattr(study, which)):
            if line.bus is not None and line.bus not in ends:
                fail("is not an end of this line" + suggest(line.bus, ends),
                     f"{which}[{k}].bus", line.bus)
    if study.neighbours:  # the shared corridor's rules (imported only when there is one)
        from relayset.inputs.corridor import check_neighbours

        check_neighbours(study, data, fail)
    check_series_capacitors(study, data, fail)
    if study.tee is not None:  # the teed solver takes overhead and cable sections
        others = [(f"{what}[0].name", getattr(study, what)[0].name)
                  for what in ("neighbours", "series_capacitors") if getattr(study, what)]
        if others:
            fail("a three-terminal line ([tee]) is modelled without a neighbouring line or "
                 "series capacitors", *others[0])
    if study.neighbours and study.series_capacitors:
        fail("a shared corridor ([[neighbours]]) and series capacitors are not modelled "
             "together: give the compensated line without its neighbour, or the corridor "
             "without the banks", "series_capacitors[0].name", study.series_capacitors[0].name)
    if study.load is not None and study.load.power_flows:
        missing = [e for e in ends if e not in study.sources]
        if missing:
            fail(f"load cases given as power flows need sources at both ends (none at "
                 f"{quote(missing[0])})", "load.power_flows")


def check_reach_inputs(study: Study, source: str) -> None:
    """What the reach study needs beyond a valid file: a relay, and a source behind it."""
    if study.relay is None:
        raise InputError("the reach study needs a [relay] table (end, CT and VT ratios)",
                         field="relay", source=source)
    ends = study.ends
    if not any(e in study.sources for e in ends):
        raise InputError(f"give a source for {quote(ends[0])} or {quote(ends[1])} (or both)",
                         field="sources", source=source)
    tee = study.tee
    for end in study.relay_ends:
        if (end not in study.sources and tee is not None and end == tee.substation
                and tee.grounded_transformer_z0 is not None):
            # Adding the source the message below asks for is refused beside the transformer.
            others = " or ".join(quote(e) for e in study.ends)
            raise InputError(
                f"the relay at {quote(end)} has only a grounded-star transformer behind it "
                "(tee.grounded_transformer_z0: zero-sequence current for ground faults only), "
                f"which is not modelled as a relay end; name {others} instead",
                field="relay.end", value=study.relay.end, source=source)
        if end not in study.sources:
            raise InputError(
                f"the relay at {quote(end)} has no source behind it, so it would measure no fault "
                f"current; add a [sources.{_key(end)}] table", field="relay.end",
                value=study.relay.end, source=source)


def check_settings_inputs(study: Study, source: str) -> None:
    """What the settings need beyond the reach study: a [load] table, and with a relay at
    both ends the bus each adjacent line leaves."""
    check_reach_inputs(study, source)
    if study.load is None:
        raise InputError("settings need a [load] table (maximum load, minimum voltage)",
                         field="load", source=source)
    if study.relay is not None and study.relay.end == "both":
        ends = study.ends
        for which in ("adjacent_lines", "lines_behind"):
            for k, line in enumerate(getattr(study, which)):
                if line.bus is None:
                    raise InputError(
                        f"say which end the line leaves ({quote(ends[0])} or {quote(ends[1])}): "
                        "relay.end is 'both'", field=f"{which}[{k}].bus", source=source)


def _check_towers(study: Study, data: dict, fail: Callable[..., None]) -> None:
    """Either the one cross-section of [[circuits]] and [[shield_wires]], or [towers.NAME]
    tables named by every section; every tower carries every circuit."""
    names = [c.name for c in study.circuits]
    sections = study.line.sections or ()
    if not study.towers:
        for c, circ in enumerate(study.circuits):
            if not circ.positions:
                fail("is required (or give [towers.NAME] tables and a tower per section)",
                     f"circuits[{c}].positions")
        for s, sec in enumerate(sections):
            if sec.tower is not None:
                fail("names no tower: the study has no [towers.NAME] tables",
                     f"line.sections[{s}].tower", sec.tower)
        return
    for c, circ in enumerate(study.circuits):
        if circ.positions:
            fail("must be left out: with [towers.NAME] tables the positions are on the towers",
                 f"circuits[{c}].positions")
    if study.shield_wires:
        fail("must be left out: with [towers.NAME] tables the shield wires are on the towers",
             "shield_wires")
    if not sections:
        fail("must list the sections, each with its tower, when the study has [towers.NAME] "
             "tables", "line.sections")
    for s, sec in enumerate(sections):
        if sec.cable is not None:  # a cable section (relayset.inputs.cable)
            continue
        if sec.tower is None:
            fail("is required: the study has [towers.NAME] tables (towers: "
                 + ", ".join(study.towers) + ")", f"line.sections[{s}].tower")
        if sec.tower not in study.towers:
            fail("names no tower of [towers] (towers: " + ", ".join(study.towers) + ")"
                 + suggest(sec.tower, study.towers), f"line.sections[{s}].tower", sec.tower)
    for t, tower in study.towers.items():
        for key in tower.positions:
            if key not in names:
                fail("names no circuit" + suggest(key, names),
                     f"towers.{_key(t)}.positions.{_key(key)}",
                     _raw(data, "towers", t, "positions", key))
        missing = [n for n in names if n not in tower.positions]
        if missing:
            fail(f"carries no circuit {quote(missing[0])}: every tower carries every circuit "
                 "of [[circuits]]; a circuit on part of the route only ends on buses of its "
                 "own: give it as a [[neighbours]] line over the sections it shares",
                 f"towers.{_key(t)}.positions")


def study_warnings(study: Study) -> tuple[str, ...]:
    """Things that are allowed but probably wrong, one sentence each."""
    out = []
    crossings = [("", [p for c in study.circuits for p in c.positions], study.shield_wires)]
    crossings += [(f"towers.{_key(t)}.", [p for ps in tw.positions.values() for p in ps],
                   tw.shield_wires) for t, tw in study.towers.items()]
    for prefix, positions, shield_wires in crossings:
        if not positions:
            continue
        top = max(p.mean_height_m for p in positions)
        for k, sw in enumerate(shield_wires):
            if sw.mean_height_m < top:
                out.append(
                    f"Warning: shield wire {sw.name or k + 1} ({prefix}shield_wires[{k}]) hangs "
                    f"at {sw.mean_height_m:.2f} m mean height, below the highest phase "
                    f"conductor ({top:.2f} m); earth wires normally run above the phases: "
                    "check the heights.")
    return tuple(out)
