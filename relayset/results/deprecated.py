"""Old attribute names of the results model, kept one release as deprecated aliases.

The results objects use the JSON's names (one vocabulary in the README, the JSON and
Python); an old name still reads the same value, with a :class:`DeprecationWarning`.
"""

from __future__ import annotations

import warnings


def alias(new: str, old: str, until: str = "0.4") -> property:
    """A read-only attribute ``old`` that returns ``new`` and warns once per call site."""

    def get(self):
        warnings.warn(f"{type(self).__name__}.{old} is deprecated and goes in relayset "
                      f"{until}; use .{new} (the JSON's name)", DeprecationWarning,
                      stacklevel=2)
        return getattr(self, new)

    return property(get, doc=f"Deprecated alias of ``{new}`` (removed in relayset {until}).")
