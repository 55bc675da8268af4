"""THE results model: every number the console, the JSON, the CSV and the report show.

Frozen dataclasses, SI inside; :mod:`relayset.results.serialize` is the one JSON convention.
The names below are imported on first use, so that importing one results module (as
``relayset params`` does) does not load the others.
"""

from __future__ import annotations

from typing import Any

_WHERE = {
    "K0": "parameters", "Arrangement": "parameters", "CircuitSequence": "parameters",
    "LineParameters": "parameters",
    "ArrangementReach": "reach", "EndReach": "reach", "LoopSummary": "reach",
    "ReachStudyResult": "reach", "WorstCase": "reach",
    "Check": "settings", "LoadCheck": "settings", "SettingsResult": "settings",
    "SettingWarning": "settings", "SourceEnd": "settings", "ZoneSetting": "settings",
    "CAUTION": "study", "StudyResults": "study",
}

__all__ = sorted(_WHERE)


def __getattr__(name: str) -> Any:
    if name in _WHERE:
        import importlib

        return getattr(importlib.import_module(f"relayset.results.{_WHERE[name]}"), name)
    raise AttributeError(f"module 'relayset.results' has no attribute {name!r}")
