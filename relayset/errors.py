"""Input errors that name the file, the field, the value and the rule broken."""

from __future__ import annotations

import difflib
import re
from collections.abc import Iterable

#: Longest error message (without the "relayset: error: " prefix) [characters]: one line
#: that fits a terminal or a log, whatever text the user's file holds.
MESSAGE_LIMIT = 280


#: Longest list or table shown as a message's value [characters]; a longer one is left out
#: (the rule then says what is wrong with it, e.g. how many entries it has).
CONTAINER_LIMIT = 60


class InputError(ValueError):
    """A study, philosophy or conductor input breaks a documented rule.

    The message is always one line: ``FILE: FIELD = VALUE: RULE``. The command line
    prints it and exits with code 2; the Python API lets it propagate.
    """

    def __init__(self, rule: str, *, field: str = "", value: object = None, source: str = ""):
        self.rule = rule
        self.field = field
        self.value = value
        self.source = source
        super().__init__(self._format())

    def _format(self) -> str:
        where = shorten(self.source or "<input>", 80, keep_end=True)
        parts = [where]
        if self.field:
            shown = "" if self.value is None else f" = {_short(self.value)}"
            if isinstance(self.value, list | tuple | dict) and len(
                    as_written(self.value, CONTAINER_LIMIT + 1)) > CONTAINER_LIMIT:
                shown = ""
            field = re.sub(r"[^.\[\]\s]{41,}", lambda m: shorten(m.group(0), 40), self.field)
            parts.append(f"{shorten(field, 100)}{shown}")
        parts.append(shorten_words(self.rule, 40))
        text = " ".join(": ".join(parts).split())  # one line, whatever the text held
        return shorten(text, MESSAGE_LIMIT)

    def located(self, *, source: str | None = None, prefix: str | None = None) -> InputError:
        """Return a copy with the file name set and/or the field path prefixed."""
        field = self.field
        if prefix:
            field = f"{prefix}.{field}" if field else prefix
        return InputError(
            self.rule, field=field, value=self.value, source=source or self.source
        )


def shorten(text: str, limit: int, *, keep_end: bool = False) -> str:
    """``text`` cut to at most ``limit`` characters, marked with "..." where it was cut.

    ``keep_end`` keeps the end (a file name) rather than the start.
    """
    if len(text) <= limit:
        return text
    if keep_end:
        return "..." + text[len(text) - limit + 3:]
    head = (limit - 3) * 2 // 3
    return text[:head] + "..." + text[len(text) - (limit - 3 - head):]


def shorten_words(text: str, limit: int) -> str:
    """Every run of more than ``limit`` non-blank characters in ``text`` shortened."""
    if len(text) <= limit:
        return text
    return re.sub(rf"\S{{{limit + 1},}}", lambda m: shorten(m.group(0), limit), text)


def _short(value: object, limit: int = 60) -> str:
    return shorten(as_written(value, limit + 1), limit)


#: A TOML basic string's escapes for the characters that cannot stand in one line.
_ESCAPES = {'"': '\\"', "\\": "\\\\", "\n": "\\n", "\t": "\\t", "\r": "\\r"}


def as_written(value: object, limit: int = 10_000) -> str:
    """``value`` as it would be written in a TOML file: text in double quotes, numbers as
    written (see :class:`WrittenFloat`), true/false, dates, lists and tables inline.

    Never Python's repr: no ``'x'`` quotes, no ``(1+2j)``. Containers are written only up
    to about ``limit`` characters, so a huge list costs no time.
    """
    if isinstance(value, Written):
        return shorten(value, max(limit, 10))
    if isinstance(value, str):
        body = "".join(_ESCAPES.get(c, c if c.isprintable() else f"\\u{ord(c):04X}")
                       for c in shorten(value, max(limit, 10)))
        return f'"{body}"'
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, WrittenFloat):
        return value.text
    if isinstance(value, float):
        return repr(value)  # also TOML's spelling of inf, -inf and nan
    if isinstance(value, int):
        return str(value) if abs(value) < 10**100 else f"{float(value):g}"
    if isinstance(value, complex):
        return f"{value.real:g}{value.imag:+g}j"
    if hasattr(value, "isoformat"):
        return value.isoformat()
    if isinstance(value, list | tuple):
        out, size = [], 0
        for item in value:
            if size > limit:
                out.append("...")
                break
            out.append(as_written(item, limit - size))
            size += len(out[-1]) + 2
        return "[" + ", ".join(out) + "]"
    if isinstance(value, dict):
        out, size = [], 0
        for key, item in value.items():
            if size > limit:
                out.append("...")
                break
            out.append(f"{toml_key(str(key))} = {as_written(item, limit - size)}")
            size += len(out[-1]) + 2
        return "{ " + ", ".join(out) + " }" if out else "{}"
    return str(value)


_BARE_KEY = re.compile(r"^[A-Za-z0-9_-]+$")


def toml_key(key: str) -> str:
    """A table key as the user would write it in TOML (quoted unless bare)."""
    return key if _BARE_KEY.match(key) else as_written(key)


class InternalError(RuntimeError):
    """A fault of the program, not of the input (the command line says so in one line and
    writes nothing)."""


class Written(str):
    """Text shown in a message exactly as it stands in the file (no quotes added)."""


class WrittenFloat(float):
    """A float read from a TOML file that keeps its text (``1e3``, ``0.50``), so a message
    can show the number exactly as the user wrote it."""

    text: str

    def __new__(cls, text: str) -> WrittenFloat:
        self = super().__new__(cls, text.replace("_", ""))
        self.text = text
        return self

    def __reduce__(self):  # pickles (worker processes) as the number with its text
        return (WrittenFloat, (self.text,))


def suggest(word: str, choices: Iterable[str]) -> str:
    """Return a ' (did you mean ...?)' hint for a mistyped name, or ''."""
    close = difflib.get_close_matches(str(word), list(choices), n=3, cutoff=0.6)
    if not close:
        return ""
    return " (did you mean " + " or ".join(quote(c) for c in close) + "?)"


def quote(word: object) -> str:
    """A name in the prose of a rule, in single quotes (as written, never escaped)."""
    return f"'{word}'"
