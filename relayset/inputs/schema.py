"""A small declarative validation layer: TOML tables into frozen dataclasses.

Why our own: a general validation library cost about 40 % of the command line's start-up
(building ~30 models at each import). The input files need little: typed leaves with bounds
and units, nested tables, lists and tables of tables, unknown keys refused, and rules across
fields. This module does that in plain Python and imports nothing heavy.

A table is a frozen dataclass whose fields are declared with :func:`spec` (the converter of
the TOML value, the default, the TOML key when it differs from the attribute name). A
dataclass may define ``_check(self)`` for rules across its fields; it runs only when every
field of that table is valid, and raises ``ValueError`` with the rule. A converter is either
a node of this module (:class:`Table`, :class:`ListOf`, :class:`MapOf`, :class:`TupleOf`) or
any callable that returns the converted value or raises ``ValueError`` with the rule.

:func:`validate` collects every issue (like a compiler, not stopping at the first) so that
the caller can pick the most telling one: an unknown key first, since a misspelt key also
makes the right key "missing".
"""

from __future__ import annotations

import dataclasses
import datetime as dt
import math
from collections.abc import Callable, Mapping
from typing import Any, NamedTuple

from relayset.errors import quote
from relayset.inputs.limits import MAX_ITEMS

#: Marks a field without a default (the key must be given).
REQUIRED: Any = dataclasses.MISSING

_FAIL = object()  # a converter failed; its issue is already recorded


class Issue(NamedTuple):
    """One defect of the input: where, what kind, the rule and the value found."""

    loc: tuple[str | int, ...]  #: keys and list indices from the root, as in the data
    kind: str  #: "value", "missing" or "unknown"
    rule: str
    value: Any = None
    known: tuple[str, ...] = ()  #: for "unknown": the keys the table has


class KeyRuleError(ValueError):
    """Raised by a table's ``_check`` for a rule about one of its keys: the message then
    names that key and the user's value of it, not the whole table."""

    def __init__(self, key: str, rule: str):
        self.key = key
        super().__init__(rule)


class SchemaError(ValueError):
    """The data breaks one or more rules; ``issues`` in the order they were found."""

    def __init__(self, issues: list[Issue]):
        self.issues = issues
        super().__init__("; ".join(f"{i.loc}: {i.rule}" for i in issues[:3]))

    def first(self) -> Issue:
        """The most telling issue: the first unknown key, else the first issue."""
        return next((i for i in self.issues if i.kind == "unknown"), self.issues[0])


def spec(conv: Any, default: Any = REQUIRED, *, key: str | None = None,
         factory: Callable[[], Any] | None = None) -> Any:
    """A dataclass field read from the TOML key ``key`` (default: the attribute name).

    ``conv`` converts and checks the value; an absent key takes ``default`` (or ``factory()``)
    unchecked, so defaults must already be valid.
    """
    meta = {"conv": conv, "key": key}
    if factory is not None:
        return dataclasses.field(default_factory=factory, metadata=meta)
    return dataclasses.field(default=default, metadata=meta)


# -- nodes -----------------------------------------------------------------------------------

def _run(conv: Any, value: Any, loc: tuple, issues: list[Issue]) -> Any:
    if isinstance(conv, _Node):
        return conv.run(value, loc, issues)
    try:
        return conv(value)
    except ValueError as exc:
        issues.append(Issue(loc, "value", str(exc), value))
        return _FAIL


class _Node:
    """A converter of containers: it records issues with their location itself."""

    def run(self, value: Any, loc: tuple, issues: list[Issue]) -> Any:  # pragma: no cover
        """The converted value, or ``_FAIL`` with the issues appended."""
        raise NotImplementedError


class Table(_Node):
    """A TOML table read into the dataclass ``cls`` (fields declared with :func:`spec`)."""

    def __init__(self, cls: type):
        self.cls = cls
        self._fields: list[tuple[str, str, Any, dataclasses.Field]] | None = None

    @property
    def fields(self) -> list[tuple[str, str, Any, dataclasses.Field]]:
        """(TOML key, attribute name, converter, dataclass field) in declaration order."""
        if self._fields is None:
            self._fields = [(f.metadata.get("key") or f.name, f.name, f.metadata["conv"], f)
                            for f in dataclasses.fields(self.cls) if "conv" in f.metadata]
        return self._fields

    @property
    def keys(self) -> tuple[str, ...]:
        """The keys the table may have, as written in the file."""
        return tuple(k for k, *_ in self.fields)

    def run(self, value: Any, loc: tuple, issues: list[Issue]) -> Any:
        if not isinstance(value, Mapping):
            issues.append(Issue(loc, "value", "must be a table (keys and values)", value))
            return _FAIL
        before = len(issues)
        kwargs = {}
        for key, name, conv, f in self.fields:
            if key in value:
                out = _run(conv, value[key], (*loc, key), issues)
                if out is not _FAIL:
                    kwargs[name] = out
            elif f.default is REQUIRED and f.default_factory is dataclasses.MISSING:
                issues.append(Issue((*loc, key), "missing", "is required but missing"))
        keys = self.keys
        for key in value:
            if key not in keys:
                issues.append(Issue((*loc, key), "unknown", "unknown key", value[key], keys))
        if len(issues) > before:
            return _FAIL
        obj = self.cls(**kwargs)
        check = getattr(obj, "_check", None)
        if check is not None:
            try:
                check()
            except KeyRuleError as exc:
                issues.append(Issue((*loc, exc.key), "value", str(exc), value.get(exc.key)))
                return _FAIL
            except ValueError as exc:
                issues.append(Issue(loc, "value", str(exc), value))
                return _FAIL
        return obj


class Lazy(_Node):
    """A node made on first use by ``make()``: a table declared in a module that itself
    imports this one's caller (e.g. ``[tee]`` in :mod:`relayset.inputs.teed`)."""

    def __init__(self, make: Callable[[], _Node]):
        self._make = make
        self._node: _Node | None = None

    def run(self, value: Any, loc: tuple, issues: list[Issue]) -> Any:
        if self._node is None:
            self._node = self._make()
        return self._node.run(value, loc, issues)


def _too_many(n: int, most: int, what: str) -> str:
    return f"has {n:,} {what}; at most {most:,} (a size limit far above any real line)"


class ListOf(_Node):
    """A TOML list (read as a tuple) of items of one converter; ``after`` checks the whole.

    More than ``max_items`` items are refused before any is read (``what`` names them).
    """

    def __init__(self, item: Any, after: Callable[[tuple], tuple] | None = None, *,
                 max_items: int = MAX_ITEMS, what: str = "entries"):
        self.item, self.after = item, after
        self.max_items, self.what = max_items, what

    def run(self, value: Any, loc: tuple, issues: list[Issue]) -> Any:
        if not isinstance(value, list | tuple):
            issues.append(Issue(loc, "value", "must be a list, like [1, 2]", value))
            return _FAIL
        if len(value) > self.max_items:
            issues.append(Issue(loc, "value", _too_many(len(value), self.max_items, self.what),
                                value))
            return _FAIL
        before = len(issues)
        out = tuple([_run(self.item, v, (*loc, k), issues) for k, v in enumerate(value)])
        if len(issues) > before:
            return _FAIL
        if self.after is not None:
            try:
                return self.after(out)
            except ValueError as exc:  # shown with the list as written, not as converted
                issues.append(Issue(loc, "value", str(exc), value))
                return _FAIL
        return out


class TupleOf(_Node):
    """A TOML list of a fixed length, one converter per place."""

    def __init__(self, *items: Any):
        self.items = items

    def run(self, value: Any, loc: tuple, issues: list[Issue]) -> Any:
        n = len(self.items)
        if not isinstance(value, list | tuple):
            issues.append(Issue(loc, "value", f"must be a list of {n} values", value))
            return _FAIL
        if len(value) != n:
            issues.append(Issue(loc, "value", f"must be a list of {n} values, not "
                                f"{len(value)}", value))
            return _FAIL
        before = len(issues)
        out = tuple([_run(c, v, (*loc, k), issues) for k, (c, v) in enumerate(
            zip(self.items, value, strict=True))])
        return _FAIL if len(issues) > before else out


class MapOf(_Node):
    """A TOML table with keys of the user's choosing (names), each value of one converter;
    more than ``max_items`` names are refused before any is read."""

    def __init__(self, item: Any, key: Callable[[str], str] | None = None, *,
                 max_items: int = MAX_ITEMS, what: str = "entries"):
        self.item, self.key = item, key
        self.max_items, self.what = max_items, what

    def run(self, value: Any, loc: tuple, issues: list[Issue]) -> Any:
        if not isinstance(value, Mapping):
            issues.append(Issue(loc, "value", "must be a table of names and values", value))
            return _FAIL
        if len(value) > self.max_items:
            issues.append(Issue(loc, "value", _too_many(len(value), self.max_items, self.what),
                                value))
            return _FAIL
        before = len(issues)
        out = {}
        for k, v in value.items():
            if self.key is not None:
                _run(self.key, k, (*loc, k), issues)
            out[k] = _run(self.item, v, (*loc, k), issues)
        return _FAIL if len(issues) > before else out


# -- leaves ------------------------------------------------------------------------------------

def _bound_text(b: float) -> str:
    return str(int(b)) if float(b).is_integer() and abs(b) < 1e15 else repr(b)


def check_bounds(x: float, *, gt: float | None = None, ge: float | None = None,
                 lt: float | None = None, le: float | None = None, prefix: str = "must",
                 ) -> None:
    """Raise ``ValueError`` when ``x`` lies outside the bounds (``prefix`` starts the rule)."""
    for bound, ok, words in ((gt, lambda b: x > b, "greater than"),
                             (ge, lambda b: x >= b, "greater than or equal to"),
                             (lt, lambda b: x < b, "less than"),
                             (le, lambda b: x <= b, "less than or equal to")):
        if bound is not None and not ok(bound):
            raise ValueError(f"{prefix} be {words} {_bound_text(bound)}")


def text(value: Any) -> str:
    """Text (a TOML string)."""
    if not isinstance(value, str):
        raise ValueError("must be text in quotes")
    return value


def one_of(*choices: str, prefix: str = "must") -> Callable[[Any], str]:
    """One of the given words, exactly as written."""
    quoted = [quote(c) for c in choices]
    listed = ", ".join(quoted[:-1]) + f" or {quoted[-1]}" if len(quoted) > 1 else quoted[0]

    def conv(value: Any) -> str:
        if not isinstance(value, str) or value not in choices:
            raise ValueError(f"{prefix} be {listed}")
        return value

    return conv


def integer(*, ge: int | None = None, le: int | None = None) -> Callable[[Any], int]:
    """A whole number; an integral float (3.0) or integer text ("3") is read as well."""

    def conv(value: Any) -> int:
        if isinstance(value, bool):
            raise ValueError("must be a whole number, not true/false")
        if isinstance(value, float):
            if not math.isfinite(value):
                raise ValueError("must be a finite whole number")
            if not value.is_integer():
                raise ValueError("must be a whole number (no fractional part)")
            value = int(value)
        elif isinstance(value, str):
            try:
                value = int(value.strip())
            except ValueError:
                raise ValueError("must be a whole number, like 4") from None
        elif not isinstance(value, int):
            raise ValueError("must be a whole number, like 4")
        check_bounds(value, ge=ge, le=le)
        return value

    return conv


_TRUE = {"true", "yes", "on", "t", "y", "1"}
_FALSE = {"false", "no", "off", "f", "n", "0"}


def boolean(value: Any) -> bool:
    """True or false; the words yes/no, on/off and 1/0 are read as well."""
    if isinstance(value, bool):
        return value
    if isinstance(value, str):
        word = value.strip().lower()
        if word in _TRUE or word in _FALSE:
            return word in _TRUE
        raise ValueError("must be true or false")
    if isinstance(value, int | float) and value in (0, 1):
        return bool(value)
    raise ValueError("must be true or false")


def date(value: Any) -> dt.date:
    """A date: a TOML date (or a date-time at midnight), or text YYYY-MM-DD."""
    if isinstance(value, dt.datetime):
        if value.time() != dt.time(0) or value.tzinfo is not None:
            raise ValueError("must be a date, not a date and time")
        return value.date()
    if isinstance(value, dt.date):
        return value
    if isinstance(value, str):
        try:
            return dt.date.fromisoformat(value.strip())
        except ValueError:
            pass
    raise ValueError("must be a date (YYYY-MM-DD)")


def strict_number(value: Any, *, prefix: str = "must") -> float:
    """A TOML integer or float (not true/false, not text), finite, as a float."""
    if isinstance(value, bool) or not isinstance(value, int | float):
        raise ValueError(f"{prefix} be a valid number")
    x = float(value)
    if not math.isfinite(x):
        raise ValueError(f"{prefix} be a finite number")
    return x


# -- the entry points --------------------------------------------------------------------------

_TABLES: dict[type, Table] = {}


def raw_at(data: Any, *path: str | int) -> Any:
    """The user's own value at ``path`` of the raw tables (to echo it in messages); None
    where the path does not exist."""
    for p in path:
        try:
            data = data[p]
        except (KeyError, IndexError, TypeError):
            return None
    return data


def table(cls: type) -> Table:
    """The (cached) :class:`Table` node of a dataclass."""
    node = _TABLES.get(cls)
    if node is None:
        node = _TABLES[cls] = Table(cls)
    return node


def validate(cls: type, data: Any) -> Any:
    """``data`` (nested tables as read from TOML) as an instance of the dataclass ``cls``.

    Raises
    ------
    SchemaError
        With every issue found.
    """
    issues: list[Issue] = []
    out = table(cls).run(data, (), issues)
    if issues:
        raise SchemaError(issues)
    return out


def to_data(obj: Any) -> Any:
    """A validated object as nested plain data, keyed as in the file (dataclasses to dicts)."""
    if dataclasses.is_dataclass(obj) and not isinstance(obj, type):
        return {key: to_data(getattr(obj, name)) for key, name, *_ in table(type(obj)).fields}
    if isinstance(obj, tuple | list):
        return type(obj)(to_data(x) for x in obj)
    if isinstance(obj, dict):
        return {k: to_data(v) for k, v in obj.items()}
    return obj
