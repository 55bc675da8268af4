"""THE results model: every number the console, the JSON, the CSV and the report show.

Frozen dataclasses, SI inside; :mod:`relayset.results.serialize` is the one JSON convention.
"""

from relayset.results.parameters import K0, Arrangement, CircuitSequence, LineParameters
from relayset.results.reach import (
    ArrangementReach,
    EndReach,
    LoopSummary,
    ReachStudyResult,
    WorstCase,
)
from relayset.results.settings import (
    Check,
    LoadCheck,
    SettingsResult,
    SettingWarning,
    SourceEnd,
    ZoneSetting,
)
from relayset.results.study import CAUTION, StudyResults

__all__ = [
    "CAUTION",
    "K0",
    "Arrangement",
    "ArrangementReach",
    "Check",
    "CircuitSequence",
    "EndReach",
    "LineParameters",
    "LoadCheck",
    "LoopSummary",
    "ReachStudyResult",
    "SettingWarning",
    "SettingsResult",
    "SourceEnd",
    "StudyResults",
    "WorstCase",
    "ZoneSetting",
]
