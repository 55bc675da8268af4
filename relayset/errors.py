"""Input errors that name the file, the field, the value and the rule broken."""

from __future__ import annotations

import difflib
import re
from collections.abc import Iterable

#: Longest error message (without the "relayset: error: " prefix) [characters]: one line
#: that fits a terminal or a log, whatever text the user's file holds.
MESSAGE_LIMIT = 280


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
    if isinstance(value, str):
        return repr(shorten(value, limit - 2))
    return shorten(str(value), limit)


def suggest(word: str, choices: Iterable[str]) -> str:
    """Return a ' (did you mean ...?)' hint for a mistyped name, or ''."""
    close = difflib.get_close_matches(str(word), list(choices), n=3, cutoff=0.6)
    if not close:
        return ""
    return " (did you mean " + " or ".join(repr(c) for c in close) + "?)"
