"""The study file: a validated, frozen model of one TOML line study.

Quantities are text with units ("28 ft", "0.1859 ohm/mi", "100 ohm*m"), converted to SI as
they are read. Every rule a file can break raises :class:`relayset.errors.InputError` with
the file, the dotted field, the value and the rule.
"""

from __future__ import annotations

import datetime as dt
import math
import tomllib
from pathlib import Path
from typing import Annotated, Any, Literal

from pydantic import BaseModel, BeforeValidator, ConfigDict, Field, ValidationError, model_validator

from relayset.errors import InputError, suggest
from relayset.inputs import units

SCHEMA = "relayset-study/1"


def _quantity(kind: str, *, gt: float | None = None, ge: float | None = None, what: str = ""):
    """An SI float parsed from text with units, with an optional bound."""

    def parse(v: Any) -> float:
        x = units.parse_real(v, kind)
        if gt is not None and not x > gt:
            raise ValueError(f"must be greater than {gt:g} {units.KINDS[kind]}{what}")
        if ge is not None and not x >= ge:
            raise ValueError(f"must be at least {ge:g} {units.KINDS[kind]}{what}")
        return x

    return Annotated[float, BeforeValidator(parse)]


def _complex_quantity(kind: str = "impedance"):
    return Annotated[complex, BeforeValidator(lambda v: units.parse_complex(v, kind))]


def _number(*, gt: float | None = None, ge: float | None = None):
    def parse(v: Any) -> float:
        if isinstance(v, bool) or not isinstance(v, int | float):
            raise ValueError("must be a plain number")
        x = float(v)
        if not math.isfinite(x):
            raise ValueError("must be a finite number")
        if gt is not None and not x > gt:
            raise ValueError(f"must be greater than {gt:g}")
        if ge is not None and not x >= ge:
            raise ValueError(f"must be at least {ge:g}")
        return x

    return Annotated[float, BeforeValidator(parse)]


Length = _quantity("length", gt=0)
LengthAny = _quantity("length")
NonNegLength = _quantity("length", ge=0)
ResPerLength = _quantity("resistance_per_length", gt=0)
Temperature = _quantity("temperature", gt=-273.15)
Angle = _quantity("angle")
Power = _quantity("power", gt=0)
Resistance = _quantity("resistance", ge=0)
ComplexOhm = _complex_quantity()


class _Model(BaseModel):
    model_config = ConfigDict(frozen=True, extra="forbid")


class StudyInfo(_Model):
    line_id: str
    title: str
    from_substation: str
    to_substation: str
    revision: str = "A"
    revision_date: dt.date | None = None
    status: Literal["draft", "for review", "approved"] = "draft"
    prepared_by: str = ""
    checked_by: str = ""
    approved_by: str = ""
    philosophy: str = "default"
    notes: str = ""

    @model_validator(mode="after")
    def _check_signatures(self) -> StudyInfo:
        # Who signs: a calculation for review names its preparer; an approved one also its
        # checker and approver.
        needed = {"for review": ("prepared_by",),
                  "approved": ("prepared_by", "checked_by", "approved_by")}.get(self.status, ())
        missing = [f for f in needed if not getattr(self, f).strip()]
        if missing:
            raise ValueError(f"status {self.status!r} needs a name in "
                             + " and ".join(missing))
        return self


class SystemData(_Model):
    nominal_voltage: _quantity("voltage", gt=0)  # type: ignore[valid-type]
    frequency: _quantity("frequency", gt=0)  # type: ignore[valid-type]
    earth_resistivity: _quantity("resistivity", gt=0)  # type: ignore[valid-type]
    earth_model: str = "carson"
    # Uncertainty of the resistivity [low, high], swept by the verification (k0 moves with it).
    earth_resistivity_range: tuple[_quantity("resistivity", gt=0),  # type: ignore[valid-type]
                                   _quantity("resistivity", gt=0)] | None = None  # type: ignore[valid-type]

    @model_validator(mode="after")
    def _check_range(self) -> SystemData:
        r = self.earth_resistivity_range
        if r is not None and not r[0] <= self.earth_resistivity <= r[1]:
            raise ValueError(
                f"earth_resistivity_range [{r[0]:g}, {r[1]:g}] ohm*m must run from low to "
                f"high and contain earth_resistivity = {self.earth_resistivity:g} ohm*m")
        return self

    @model_validator(mode="after")
    def _check(self) -> SystemData:
        from relayset.physics.earth import EARTH_MODELS

        if self.earth_model not in EARTH_MODELS:
            raise ValueError(
                f"earth_model {self.earth_model!r} is not one of {', '.join(EARTH_MODELS)}"
                + suggest(self.earth_model, EARTH_MODELS)
            )
        if self.frequency not in (50.0, 60.0):
            raise ValueError(f"frequency must be 50 Hz or 60 Hz, not {self.frequency:g} Hz")
        return self


class ConductorType(_Model):
    code: str | None = None
    outside_diameter: Length | None = None  # type: ignore[valid-type]
    gmr: Length | None = None  # type: ignore[valid-type]
    strands_aluminium: int | None = Field(default=None, ge=1)
    strands_steel: int | None = Field(default=None, ge=0)
    wire_diameter_aluminium: Length | None = None  # type: ignore[valid-type]
    wire_diameter_steel: Length | None = None  # type: ignore[valid-type]
    ac_resistance: ResPerLength | None = None  # type: ignore[valid-type]
    ac_resistance_temperature: Temperature | None = None  # type: ignore[valid-type]
    dc_resistance_20c: ResPerLength | None = None  # type: ignore[valid-type]
    temperature_coefficient: _quantity("per_kelvin", ge=0) | None = None  # type: ignore[valid-type]
    ac_dc_ratio: _number(ge=1.0) | None = None  # type: ignore[valid-type]
    operating_temperature: Temperature | None = None  # type: ignore[valid-type]


class Bundle(_Model):
    count: int = Field(ge=1, le=8)
    spacing: Length  # type: ignore[valid-type]
    orientation: Angle = 0.0  # type: ignore[valid-type]


class _Placed(_Model):
    """A conductor hung at a position on the tower."""

    x: LengthAny  # type: ignore[valid-type]
    height: LengthAny | None = None  # type: ignore[valid-type]
    sag: NonNegLength = 0.0  # type: ignore[valid-type]
    average_height: LengthAny | None = None  # type: ignore[valid-type]
    conductor: str

    @model_validator(mode="after")
    def _check_height(self) -> _Placed:
        if (self.height is None) == (self.average_height is None):
            raise ValueError("give either height (with sag) or average_height")
        if self.average_height is not None and self.sag:
            raise ValueError("sag goes with height (attachment), not with average_height")
        return self

    @property
    def mean_height_m(self) -> float:
        """Average height over the span: h - 2/3 sag for a parabolic sag curve."""
        if self.average_height is not None:
            return self.average_height
        return self.height - 2.0 * self.sag / 3.0


class Position(_Placed):
    name: str
    bundle: Bundle | None = None


class Circuit(_Model):
    name: str
    phase_labels: tuple[str, str, str] = ("A", "B", "C")
    positions: tuple[Position, Position, Position]


class ShieldWire(_Placed):
    name: str = ""
    grounding: Literal["continuous", "segmented", "none"] = "continuous"


class Section(_Model):
    length: Length  # type: ignore[valid-type]
    order: tuple[str, ...] | dict[str, tuple[str, ...]]


class LineData(_Model):
    length: Length  # type: ignore[valid-type]
    sections: tuple[Section, ...] | None = None


class K0Setting(_Model):
    magnitude: _number(ge=0)  # type: ignore[valid-type]
    angle: Angle = 0.0  # type: ignore[valid-type]


class RelayData(_Model):
    end: str
    ct_ratio: Annotated[float, BeforeValidator(units.parse_ratio)]
    vt_ratio: Annotated[float, BeforeValidator(units.parse_ratio)]
    z1_set: ComplexOhm | None = None  # type: ignore[valid-type]
    k0_set: K0Setting | None = None
    k0m_set: K0Setting | None = None


class SourceData(_Model):
    z1: ComplexOhm | None = None  # type: ignore[valid-type]
    z0: ComplexOhm | None = None  # type: ignore[valid-type]
    fault_level_3ph: Power | None = None  # type: ignore[valid-type]
    fault_level_1ph: Power | None = None  # type: ignore[valid-type]
    x_over_r: _number(gt=0) | None = None  # type: ignore[valid-type]
    z0_over_z1: _number(gt=0) | None = None  # type: ignore[valid-type]

    @model_validator(mode="after")
    def _check(self) -> SourceData:
        if self.z1 is not None:
            if self.z0 is None:
                raise ValueError("z1 needs z0 as well")
            for name, z in (("z1", self.z1), ("z0", self.z0)):
                if z.real < 0:
                    raise ValueError(f"{name} has a negative resistance ({z.real:g} ohm)")
                if z.imag <= 0:
                    raise ValueError(f"{name} must have a positive (inductive) reactance")
        elif self.fault_level_3ph is not None:
            if self.x_over_r is None:
                raise ValueError("fault_level_3ph needs x_over_r")
            if self.fault_level_1ph is None and self.z0_over_z1 is None:
                raise ValueError("fault_level_3ph needs fault_level_1ph or z0_over_z1")
        else:
            raise ValueError("give z1 and z0, or fault_level_3ph with x_over_r")
        return self


class PowerFlow(_Model):
    """A prefault load case: power into the line at the relay end (from end for "both")."""

    active_power: _quantity("power")  # type: ignore[valid-type]
    reactive_power: _quantity("power") = 0.0  # type: ignore[valid-type]


class LoadData(_Model):
    max_apparent_power: Power  # type: ignore[valid-type]
    min_voltage: _quantity("dimensionless", gt=0) = 0.9  # type: ignore[valid-type]
    load_angle_max: Angle = math.radians(30.0)  # type: ignore[valid-type]
    transfer_angles: tuple[Angle, ...] = (0.0,)  # type: ignore[valid-type]
    power_flows: tuple[PowerFlow, ...] = ()

    @model_validator(mode="after")
    def _check(self) -> LoadData:
        if not 0 <= self.load_angle_max < math.pi / 2:
            raise ValueError(f"load_angle_max must be at least 0 deg and below 90 deg, not "
                             f"{math.degrees(self.load_angle_max):g} deg")
        return self


class SourceCase(_Model):
    name: str
    scale: _number(gt=0)  # type: ignore[valid-type]


class ReachStudyData(_Model):
    fault_types: tuple[str, ...] = ("AG", "BG", "CG", "AB", "BC", "CA", "ABG", "BCG", "CAG",
                                    "ABC")
    location_step_pct: _number(gt=0) = 1.0  # type: ignore[valid-type]
    locations_pct: tuple[_number(), ...] | None = None  # type: ignore[valid-type]
    fault_resistances: tuple[Resistance, ...] = (0.0, 5.0, 10.0, 20.0)  # type: ignore[valid-type]
    phase_fault_resistance: Resistance = 0.0  # type: ignore[valid-type]
    source_cases: tuple[SourceCase, ...] = (
        SourceCase(name="strong", scale=0.5),
        SourceCase(name="nominal", scale=1.0),
        SourceCase(name="weak", scale=2.0),
    )
    parallel_circuit: Literal["in_service", "earthed", "isolated"] | None = None
    mutual_compensation: bool = True
    shunt_capacitance: bool = False
    zone1_reach_pct: _number(gt=0) | None = None  # type: ignore[valid-type]


class ErrorBudget(_Model):
    """Measurement and data errors in percent of reach (defaults: common practice, no source)."""

    ct_pct: _number(ge=0) = 1.0  # type: ignore[valid-type]
    vt_pct: _number(ge=0) = 1.0  # type: ignore[valid-type]
    relay_pct: _number(ge=0) = 5.0  # type: ignore[valid-type]
    line_data_pct: _number(ge=0) = 3.0  # type: ignore[valid-type]

    @property
    def total_pct(self) -> float:
        return self.ct_pct + self.vt_pct + self.relay_pct + self.line_data_pct


class AdjacentLine(_Model):
    name: str
    z1: ComplexOhm | None = None  # type: ignore[valid-type]
    study: str | None = None
    #: the substation of this line the adjacent line leaves (default: for adjacent_lines the
    #: relay's remote end, for lines_behind the relay's own end; needed when relay.end is both)
    bus: str | None = None

    @model_validator(mode="after")
    def _check(self) -> AdjacentLine:
        if (self.z1 is None) == (self.study is None):
            raise ValueError("give either z1 or study (a path to the adjacent line's study file)")
        return self


class FaultResistanceData(_Model):
    tower_footing_resistance: Resistance = 10.0  # type: ignore[valid-type]
    arc_length: Length | None = None  # type: ignore[valid-type]


class Study(_Model):
    """A whole study file, validated, SI inside."""

    schema_: str = Field(default=SCHEMA, alias="schema")
    study: StudyInfo
    system: SystemData
    conductor_types: dict[str, ConductorType]
    circuits: tuple[Circuit] | tuple[Circuit, Circuit]
    shield_wires: tuple[ShieldWire, ...] = ()
    line: LineData
    relay: RelayData | None = None
    sources: dict[str, SourceData] = Field(default_factory=dict)
    load: LoadData | None = None
    reach_study: ReachStudyData = ReachStudyData()
    error_budget: ErrorBudget = ErrorBudget()
    adjacent_lines: tuple[AdjacentLine, ...] = ()
    lines_behind: tuple[AdjacentLine, ...] = ()
    fault_resistance: FaultResistanceData = FaultResistanceData()

    model_config = ConfigDict(frozen=True, extra="forbid", populate_by_name=True)


def _resolve_model(loc: tuple, root: type[BaseModel]) -> type[BaseModel] | None:
    """The model class that owns the last key of ``loc`` (for unknown-key suggestions)."""
    import typing

    model: Any = root
    for part in loc[:-1]:
        if isinstance(part, int):
            continue
        if not (isinstance(model, type) and issubclass(model, BaseModel)):
            return None
        field = model.model_fields.get(part) or next(
            (f for f in model.model_fields.values() if f.alias == part), None
        )
        if field is None:
            return None
        ann = field.annotation
        # Unwrap Optional / tuple / dict down to a model class.
        for _ in range(4):
            args = [a for a in typing.get_args(ann) if a is not type(None) and a is not Ellipsis]
            if isinstance(ann, type) and issubclass(ann, BaseModel):
                break
            if not args:
                break
            ann = args[-1]
        model = ann
    if isinstance(model, type) and issubclass(model, BaseModel):
        return model
    return None


def format_validation_error(exc: ValidationError, source: str, root: type[BaseModel]):
    """The first pydantic error as one :class:`InputError` (file, field, value, rule)."""
    err = exc.errors()[0]
    loc = tuple(err.get("loc", ()))
    field = ".".join(str(p) if not isinstance(p, int) else f"[{p}]" for p in loc)
    field = field.replace(".[", "[")
    value = err.get("input")
    kind = err.get("type", "")
    if kind == "extra_forbidden":
        owner = _resolve_model(loc, root)
        known = [f.alias or n for n, f in owner.model_fields.items()] if owner else []
        rule = "unknown key" + (suggest(str(loc[-1]), known) or (
            f"; valid keys: {', '.join(known)}" if known else ""))
        return InputError(rule, field=field, source=source)
    if kind == "missing":
        return InputError("is required but missing", field=field, source=source)
    msg = err.get("msg", "is not valid")
    msg = msg.removeprefix("Value error, ").removeprefix("Assertion failed, ")
    if isinstance(value, dict | list):
        value = None
    return InputError(msg, field=field, value=value, source=source)


def read_bytes(path: str | Path) -> bytes:
    """The bytes of an input file, read once (the archive hashes exactly what was parsed)."""
    p = Path(path)
    if not p.is_file():
        raise InputError("file does not exist", source=str(path))
    return p.read_bytes()


def loads_toml(data: bytes, source: str) -> dict:
    """Parse TOML bytes; bad TOML or text that is not UTF-8 is an InputError naming the file."""
    try:
        return tomllib.loads(data.decode("utf-8"))
    except tomllib.TOMLDecodeError as exc:
        raise InputError(f"is not valid TOML ({exc})", source=source) from None
    except UnicodeDecodeError:
        raise InputError("is not UTF-8 text", source=source) from None


def read_toml(path: str | Path) -> dict:
    """Read a TOML file; a missing file or bad TOML is an InputError naming the file."""
    return loads_toml(read_bytes(path), str(path))


def parse_study(data: dict, source: str = "<study>") -> Study:
    """Validate a study dictionary (as read from TOML) into a :class:`Study`."""
    try:
        study = Study.model_validate(data)
    except ValidationError as exc:
        raise format_validation_error(exc, source, Study) from None
    if study.schema_ != SCHEMA:
        raise InputError(f"unsupported schema; this version reads {SCHEMA!r}",
                         field="schema", value=study.schema_, source=source)
    return study


def load_study(path: str | Path) -> Study:
    """Read and validate a study file."""
    return parse_study(read_toml(path), source=str(path))
