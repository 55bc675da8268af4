"""Which unit system a study file is written in, so its summaries come back in the same units."""

from __future__ import annotations

import re
from typing import Any

#: Length units that mark a study written in US customary units.
_US_LENGTH = re.compile(r"(?i)\b(mi|mile|miles|ft|foot|feet|kft|in|inch|inches|yd)\b")


def study_unit_system(tables: dict[str, Any]) -> str:
    """``"us"`` when the line length is written in US customary units, else ``"si"``."""
    length = (tables.get("line") or {}).get("length")
    if isinstance(length, str) and _US_LENGTH.search(length):
        return "us"
    return "si"
