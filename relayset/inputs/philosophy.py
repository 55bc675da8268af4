"""Setting philosophy: the utility's rules for distance-zone reaches, delays and shapes.

A philosophy is a TOML file (see ``relayset/data/philosophy_default.toml`` for every key and
its default). A file may be partial; missing keys take the default. The loaded
:class:`Philosophy` is frozen and validated; bad input raises
:class:`relayset.errors.InputError` naming the file, the dotted key, the value and the rule.
"""

# No ``from __future__ import annotations``: pydantic would compile every field's annotation
# from its text at each start-up.
import copy
import tomllib
from collections.abc import Mapping
from functools import lru_cache
from importlib import resources
from pathlib import Path
from typing import Annotated, Any, Literal

from pydantic import BaseModel, ConfigDict, Field, ValidationError

from relayset.errors import InputError, suggest

Pct = Annotated[float, Field(gt=0, allow_inf_nan=False)]
FractionPct = Annotated[float, Field(gt=0, le=100, allow_inf_nan=False)]
NonNeg = Annotated[float, Field(ge=0, allow_inf_nan=False)]
Seconds = Annotated[float, Field(ge=0, allow_inf_nan=False)]
Factor = Annotated[float, Field(gt=0, allow_inf_nan=False)]
Degrees = Annotated[float, Field(gt=0, le=90, allow_inf_nan=False)]
Infeed = Literal["given", "computed"]

DEFAULT_FILE = "philosophy_default.toml"


class _Part(BaseModel):
    model_config = ConfigDict(frozen=True, extra="forbid", strict=True)


class Zone1Philosophy(_Part):
    """Zone 1: forward underreach."""

    reach_pct: Annotated[float, Field(gt=0, lt=100, allow_inf_nan=False)]
    reduce_to_reach_study: bool
    min_margin_pct: Annotated[float, Field(ge=0, lt=100, allow_inf_nan=False)]
    delay_s: Seconds


class Zone2Philosophy(_Part):
    """Zone 2: forward overreach covering the line end."""

    rule: Literal["line_pct", "line_plus_adjacent", "max_of_both"]
    reach_pct: Pct
    adjacent_pct: Pct
    check_adjacent_zone1: bool
    adjacent_zone1_pct: FractionPct
    infeed: Infeed
    infeed_factor: Factor
    delay_s: Seconds


class Zone3Philosophy(_Part):
    """Zone 3: remote backup."""

    rule: Literal["line_plus_adjacent", "line_pct"]
    reach_pct: Pct
    adjacent_pct: Pct
    infeed: Infeed
    infeed_factor: Factor
    delay_s: Seconds
    max_reach_pct: Pct  #: cap of the reach along the line angle [% of the line]


class ReversePhilosophy(_Part):
    """Reverse-looking zone."""

    rule: Literal["line_pct", "behind_pct"]
    reach_pct: Pct
    behind_pct: Pct
    delay_s: Seconds


class CharacteristicPhilosophy(_Part):
    """Zone shape: mho (angle "line" or degrees) or quadrilateral."""

    shape: Literal["mho", "quadrilateral"]
    mho_angle_deg: Literal["line"] | Degrees


class ResistivePhilosophy(_Part):
    """Resistive reach of quadrilateral zones."""

    wind_speed_m_per_s: NonNeg
    arc_time_s: Literal["zone_delay"] | Seconds
    margin_pct: NonNeg
    load_limit_pct: FractionPct


class LoadPhilosophy(_Part):
    """Load-encroachment limit."""

    encroachment_limit_pct: FractionPct


class Philosophy(_Part):
    """A complete, validated setting philosophy (frozen)."""

    zone1: Zone1Philosophy
    zone2: Zone2Philosophy
    zone3: Zone3Philosophy
    reverse: ReversePhilosophy
    characteristic: CharacteristicPhilosophy
    resistive: ResistivePhilosophy
    load: LoadPhilosophy

    def to_dict(self) -> dict[str, Any]:
        """The philosophy as nested plain data (the same keys as the TOML file)."""
        return self.model_dump()

    def with_changes(self, changes: Mapping[str, Any], source: str = "<changes>") -> "Philosophy":
        """A new philosophy with some keys replaced (validated like a file)."""
        return _build(_merge(self.model_dump(), changes, source), source)


# Messages for fields whose pydantic message would not name every allowed form.
_RULES: dict[str, str] = {
    "characteristic.mho_angle_deg": "must be 'line' or a number of degrees (0 < angle <= 90)",
    "resistive.arc_time_s": "must be 'zone_delay' or a number of seconds >= 0",
}


def _default_text() -> str:
    return resources.files("relayset").joinpath("data").joinpath(DEFAULT_FILE).read_text("utf-8")


@lru_cache(maxsize=1)
def _default_data() -> dict[str, Any]:
    return tomllib.loads(_default_text())


def _merge(base: dict[str, Any], user: Mapping[str, Any], source: str, path: str = "") -> dict:
    """Deep-merge ``user`` over ``base``, refusing keys that ``base`` does not have."""
    out = copy.deepcopy(base)
    if not isinstance(user, Mapping):
        raise InputError("must be a table", field=path or "<top>", value=user, source=source)
    for key, value in user.items():
        dotted = f"{path}.{key}" if path else key
        if key not in base:
            kind = "table" if not path else "key"
            raise InputError(
                f"unknown {kind}{suggest(key, base)}", field=dotted, value=value, source=source
            )
        if isinstance(base[key], dict):
            if not isinstance(value, Mapping):
                raise InputError(
                    f"must be a table of keys ({', '.join(base[key])})",
                    field=dotted,
                    value=value,
                    source=source,
                )
            out[key] = _merge(base[key], value, source, dotted)
        else:
            out[key] = value
    return out


def _field_path(loc: tuple[Any, ...]) -> str:
    """Dotted key from a pydantic error location, dropping union branch labels."""
    parts: list[str] = []
    model: Any = Philosophy
    for item in loc:
        fields = getattr(model, "model_fields", None)
        if not fields or item not in fields:
            break
        parts.append(str(item))
        model = fields[item].annotation
    return ".".join(parts)


def _build(data: dict[str, Any], source: str) -> Philosophy:
    try:
        ph = Philosophy.model_validate(data)
    except ValidationError as exc:
        err = exc.errors()[0]
        field = _field_path(err["loc"])
        rule = _RULES.get(field, err["msg"].replace("Input should", "must"))
        raise InputError(rule, field=field, value=err.get("input"), source=source) from None
    _check_rules(ph, source)
    return ph


def _check_rules(ph: Philosophy, source: str) -> None:
    """Rules across keys: zones reach further and wait longer in order 1, 2, 3."""
    z1, z2, z3 = ph.zone1, ph.zone2, ph.zone3
    order = [
        ("zone2.reach_pct", z2.reach_pct, z1.reach_pct, "zone1.reach_pct"),
        ("zone3.reach_pct", z3.reach_pct, z2.reach_pct, "zone2.reach_pct"),
        ("zone3.adjacent_pct", z3.adjacent_pct, z2.adjacent_pct, "zone2.adjacent_pct"),
        ("zone3.max_reach_pct", z3.max_reach_pct, z3.reach_pct, "zone3.reach_pct"),
    ]
    for field, value, below, name in order:
        if value <= below:
            raise InputError(
                f"must be greater than {name} = {below:g} (zones reach further in order 1, 2, 3)",
                field=field,
                value=value,
                source=source,
            )
    # Each zone must wait for the faster one in front of it to clear the fault first.
    delays = [("zone2.delay_s", z2.delay_s, z1.delay_s, "zone1.delay_s"),
              ("zone3.delay_s", z3.delay_s, z2.delay_s, "zone2.delay_s")]
    for field, value, below, name in delays:
        if value <= below:
            raise InputError(
                f"must be greater than {name} = {below:g} (time delays increase with the zone)",
                field=field,
                value=value,
                source=source,
            )


def philosophy_from_dict(data: Mapping[str, Any], source: str = "<philosophy>") -> Philosophy:
    """Validate a (possibly partial) philosophy given as nested tables.

    Parameters
    ----------
    data : mapping
        Tables and keys as in the philosophy file; missing keys take the default.
    source : str
        Name shown in error messages (a file path, or a table of a study file).

    Returns
    -------
    Philosophy
    """
    return _build(_merge(_default_data(), data, source), source)


def load_philosophy(path: str | Path) -> Philosophy:
    """Read and validate a philosophy TOML file (partial files take the defaults).

    Raises
    ------
    InputError
        The file is missing or not valid TOML, or a key or value breaks a rule.
    """
    source = str(path)
    try:
        raw = Path(path).read_bytes()
    except FileNotFoundError:
        raise InputError("philosophy file not found", source=source) from None
    except OSError as exc:
        rule = f"cannot read the philosophy file ({exc.strerror})"
        raise InputError(rule, source=source) from None
    from relayset.inputs.study_file import loads_toml

    data = loads_toml(raw, source)  # byte-order mark accepted, duplicate keys named
    return philosophy_from_dict(data, source)


@lru_cache(maxsize=1)
def default_philosophy() -> Philosophy:
    """The philosophy of ``relayset/data/philosophy_default.toml``."""
    return _build(copy.deepcopy(_default_data()), f"<default {DEFAULT_FILE}>")
