"""Scratch state shared by the setting rules of one calculation: inputs, philosophy, warnings."""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field

from relayset.inputs.philosophy import Philosophy
from relayset.results.settings import SettingWarning
from relayset.settings.inputs import SettingsInputs

#: Zone names used in messages and by every renderer (one place).
ZONE_LABELS = {"zone1": "Zone 1", "zone2": "Zone 2", "zone3": "Zone 3", "reverse": "Reverse zone"}


@dataclass
class RuleContext:
    """Mutable scratch state of one calculation."""

    inputs: SettingsInputs
    ph: Philosophy
    warnings: list[SettingWarning] = field(default_factory=list)

    def warn(self, rule_id: str, message: str, consider: str) -> None:
        self.warnings.append(SettingWarning(rule_id, message, consider))


def pick_line(lines: Sequence[tuple[str, complex]], longest: bool) -> tuple[str, complex]:
    pick = max if longest else min
    return pick(lines, key=lambda nl: abs(nl[1]))
