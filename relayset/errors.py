"""Input errors that name the file, the field, the value and the rule broken."""

from __future__ import annotations

import difflib
from collections.abc import Iterable


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
        where = self.source or "<input>"
        parts = [where]
        if self.field:
            shown = "" if self.value is None else f" = {_short(self.value)}"
            parts.append(f"{self.field}{shown}")
        parts.append(self.rule)
        return ": ".join(parts).replace("\n", " ")

    def located(self, *, source: str | None = None, prefix: str | None = None) -> InputError:
        """Return a copy with the file name set and/or the field path prefixed."""
        field = self.field
        if prefix:
            field = f"{prefix}.{field}" if field else prefix
        return InputError(
            self.rule, field=field, value=self.value, source=source or self.source
        )


def _short(value: object, limit: int = 60) -> str:
    text = repr(value) if isinstance(value, str) else str(value)
    return text if len(text) <= limit else text[: limit - 3] + "..."


def suggest(word: str, choices: Iterable[str]) -> str:
    """Return a ' (did you mean ...?)' hint for a mistyped name, or ''."""
    close = difflib.get_close_matches(str(word), list(choices), n=3, cutoff=0.6)
    if not close:
        return ""
    return " (did you mean " + " or ".join(repr(c) for c in close) + "?)"
