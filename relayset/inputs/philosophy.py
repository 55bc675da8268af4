"""Setting philosophy: the utility's rules for distance-zone reaches, delays and shapes.

A philosophy is a TOML file (see ``relayset/data/philosophy_default.toml`` for every key and
its default). A file may be partial; missing keys take the default. The loaded
:class:`Philosophy` is frozen and validated; bad input raises
:class:`relayset.errors.InputError` naming the file, the dotted key, the value and the rule.
"""

import copy
import tomllib
from collections.abc import Callable, Mapping
from dataclasses import dataclass
from functools import lru_cache
from importlib import resources
from pathlib import Path
from typing import Any

from relayset.errors import InputError, suggest
from relayset.inputs import schema
from relayset.inputs.schema import spec

DEFAULT_FILE = "philosophy_default.toml"


def _number(*, gt: float | None = None, ge: float | None = None, lt: float | None = None,
            le: float | None = None) -> Callable[[Any], float]:
    """A TOML number (not text, not true/false), finite, within bounds, as a float."""

    def conv(value: Any) -> float:
        x = schema.strict_number(value, prefix="must")
        schema.check_bounds(x, gt=gt, ge=ge, lt=lt, le=le, prefix="must")
        return x

    return conv


def _word_or_number(word: str, number: Callable[[Any], float], rule: str):
    """``word`` as written, or a number: for keys whose default follows another key."""

    def conv(value: Any) -> str | float:
        if value == word and isinstance(value, str):
            return value
        try:
            return number(value)
        except ValueError:
            raise ValueError(rule) from None

    return conv


def _boolean(value: Any) -> bool:
    if not isinstance(value, bool):
        raise ValueError("must be a valid boolean")
    return value


Pct = _number(gt=0)
FractionPct = _number(gt=0, le=100)
NonNeg = _number(ge=0)
Seconds = _number(ge=0)
Factor = _number(gt=0)
Infeed = schema.one_of("given", "computed", prefix="must")
#: How zone 2 is graded with the protection of the adjacent lines.
ZONE2_GRADINGS = ("short_of_adjacent_zone1", "time_graded")
#: Communication schemes (plain words; see the default philosophy file).
SCHEMES = ("none", "permissive_underreach", "permissive_overreach", "blocking")


@dataclass(frozen=True, kw_only=True)
class Zone1Philosophy:
    """Zone 1: forward underreach."""

    reach_pct: float = spec(_number(gt=0, lt=100))
    reduce_to_reach_study: bool = spec(_boolean)
    min_margin_pct: float = spec(_number(ge=0, lt=100))
    delay_s: float = spec(Seconds)


@dataclass(frozen=True, kw_only=True)
class Zone2Philosophy:
    """Zone 2: forward overreach covering the line end."""

    rule: str = spec(schema.one_of("line_pct", "line_plus_adjacent", "max_of_both",
                                   prefix="must"))
    reach_pct: float = spec(Pct)
    adjacent_pct: float = spec(Pct)
    check_adjacent_zone1: bool = spec(_boolean)
    adjacent_zone1_pct: float = spec(FractionPct)
    infeed: str = spec(Infeed)
    infeed_factor: float = spec(Factor)
    delay_s: float = spec(Seconds)
    #: "short_of_adjacent_zone1" or "time_graded" (against the adjacent line's zone 2)
    grading: str = spec(schema.one_of(*ZONE2_GRADINGS, prefix="must"))
    grading_margin_s: float = spec(Seconds)  #: coordination time interval [s]
    adjacent_zone1_clearing_s: float = spec(Seconds)  #: adjacent zone 1 + breaker [s]
    adjacent_zone2_pct: float = spec(Pct)  #: adjacent zone 2 reach [% of that line]
    adjacent_zone2_delay_s: float = spec(Seconds)  #: adjacent zone 2 delay [s]


@dataclass(frozen=True, kw_only=True)
class Zone3Philosophy:
    """Zone 3: remote backup."""

    rule: str = spec(schema.one_of("line_plus_adjacent", "line_pct", prefix="must"))
    reach_pct: float = spec(Pct)
    adjacent_pct: float = spec(Pct)
    infeed: str = spec(Infeed)
    infeed_factor: float = spec(Factor)
    delay_s: float = spec(Seconds)
    max_reach_pct: float = spec(Pct)  #: cap of the reach along the line angle [% of the line]


@dataclass(frozen=True, kw_only=True)
class ReversePhilosophy:
    """Reverse-looking zone."""

    rule: str = spec(schema.one_of("line_pct", "behind_pct", prefix="must"))
    reach_pct: float = spec(Pct)
    behind_pct: float = spec(Pct)
    delay_s: float = spec(Seconds)


@dataclass(frozen=True, kw_only=True)
class CharacteristicPhilosophy:
    """Zone shape: mho (angle "line" or degrees) or quadrilateral."""

    shape: str = spec(schema.one_of("mho", "quadrilateral", prefix="must"))
    mho_angle_deg: str | float = spec(_word_or_number(
        "line", _number(gt=0, le=90),
        "must be 'line' or a number of degrees (0 < angle <= 90)"))


@dataclass(frozen=True, kw_only=True)
class ResistivePhilosophy:
    """Resistive reach of quadrilateral zones."""

    wind_speed_m_per_s: float = spec(NonNeg)
    arc_time_s: str | float = spec(_word_or_number(
        "zone_delay", Seconds, "must be 'zone_delay' or a number of seconds >= 0"))
    margin_pct: float = spec(NonNeg)
    load_limit_pct: float = spec(FractionPct)


@dataclass(frozen=True, kw_only=True)
class LoadPhilosophy:
    """Load-encroachment limit."""

    encroachment_limit_pct: float = spec(FractionPct)


@dataclass(frozen=True, kw_only=True)
class SchemePhilosophy:
    """The communication scheme the zones work in (what the verification asks of them)."""

    kind: str = spec(schema.one_of(*SCHEMES, prefix="must"))
    #: permissive overreach: the reverse zone holds off the permissive trip after a current
    #: reversal on a double circuit
    current_reversal_guard: bool = spec(_boolean)

    @property
    def needs_reverse_cover(self) -> bool:
        """The reverse zone must see every fault the remote zone 2 sees past this bus."""
        return self.kind == "blocking" or (
            self.kind == "permissive_overreach" and self.current_reversal_guard)

    @property
    def needs_zone1_overlap(self) -> bool:
        """Zone 1 of the two ends together must cover the whole line."""
        return self.kind == "permissive_underreach"


@dataclass(frozen=True, kw_only=True)
class Philosophy:
    """A complete, validated setting philosophy (frozen)."""

    zone1: Zone1Philosophy = spec(schema.table(Zone1Philosophy))
    zone2: Zone2Philosophy = spec(schema.table(Zone2Philosophy))
    zone3: Zone3Philosophy = spec(schema.table(Zone3Philosophy))
    reverse: ReversePhilosophy = spec(schema.table(ReversePhilosophy))
    characteristic: CharacteristicPhilosophy = spec(schema.table(CharacteristicPhilosophy))
    resistive: ResistivePhilosophy = spec(schema.table(ResistivePhilosophy))
    load: LoadPhilosophy = spec(schema.table(LoadPhilosophy))
    scheme: SchemePhilosophy = spec(schema.table(SchemePhilosophy))

    def to_dict(self) -> dict[str, Any]:
        """The philosophy as nested plain data (the same keys as the TOML file)."""
        return schema.to_data(self)

    def with_changes(self, changes: Mapping[str, Any], source: str = "<changes>") -> "Philosophy":
        """A new philosophy with some keys replaced (validated like a file)."""
        return _build(_merge(self.to_dict(), _reconcile(changes), source), source)


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


def _reconcile(user: Mapping[str, Any]) -> Mapping[str, Any]:
    """``zone2.grading`` and the older ``zone2.check_adjacent_zone1`` say one thing: where a
    file writes only one of them, the other follows it (files written before ``grading``
    existed keep their meaning: ``check_adjacent_zone1 = false`` is a time-graded zone 2)."""
    z2 = user.get("zone2") if isinstance(user, Mapping) else None
    if not isinstance(z2, Mapping) or ("grading" in z2) == ("check_adjacent_zone1" in z2):
        return user
    z2 = dict(z2)
    if "grading" in z2:
        if z2["grading"] in ZONE2_GRADINGS:
            z2["check_adjacent_zone1"] = z2["grading"] == "short_of_adjacent_zone1"
    elif isinstance(z2["check_adjacent_zone1"], bool):
        z2["grading"] = ("short_of_adjacent_zone1" if z2["check_adjacent_zone1"]
                         else "time_graded")
    return {**user, "zone2": z2}


def _build(data: dict[str, Any], source: str) -> Philosophy:
    try:
        ph = schema.validate(Philosophy, data)
    except schema.SchemaError as exc:
        issue = exc.first()  # every key is known after _merge: a value breaks a rule
        field = ".".join(str(k) for k in issue.loc)
        raise InputError(issue.rule, field=field, value=issue.value, source=source) from None
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
    if z2.check_adjacent_zone1 != (z2.grading == "short_of_adjacent_zone1"):
        raise InputError(
            f"contradicts zone2.check_adjacent_zone1 = {str(z2.check_adjacent_zone1).lower()} "
            "(a zone 2 short of the adjacent zone 1 is checked against it; a time-graded one "
            "is not): write one of the two", field="zone2.grading", value=z2.grading,
            source=source)
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
    return _build(_merge(_default_data(), _reconcile(data), source), source)


def load_philosophy(path: str | Path) -> Philosophy:
    """Read and validate a philosophy TOML file (partial files take the defaults).

    Raises
    ------
    InputError
        The file is missing or not valid TOML, or a key or value breaks a rule.
    """
    from relayset.inputs.study_file import loads_toml, read_at_most

    source = str(path)
    try:
        raw = read_at_most(Path(path), source)  # refused beyond the input size limit
    except FileNotFoundError:
        raise InputError("philosophy file not found", source=source) from None
    except OSError as exc:
        rule = f"cannot read the philosophy file ({exc.strerror})"
        raise InputError(rule, source=source) from None
    data = loads_toml(raw, source)  # byte-order mark accepted, duplicate keys named
    return philosophy_from_dict(data, source)


@lru_cache(maxsize=1)
def default_philosophy() -> Philosophy:
    """The philosophy of ``relayset/data/philosophy_default.toml``."""
    return _build(copy.deepcopy(_default_data()), f"<default {DEFAULT_FILE}>")
