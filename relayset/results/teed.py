"""Results of a three-terminal (teed) line's reach study and zone 1/zone 2 settings."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from relayset.results.serialize import cplx
from relayset.results.settings import Check, SettingsResult
from relayset.results.verification import AcceptedDeviation


def deviation_name(check_id: str) -> str:
    """How ``[[deviations]]`` names a teed check, "zone.check_id" like a two-ended one: the
    check's zone (the first word of its id) and the rest of the id,
    ``zone2_short_of_next_zone1`` -> ``zone2.short_of_next_zone1``."""
    zone, _, rest = check_id.partition("_")
    return f"{zone}.{rest}"


@dataclass(frozen=True)
class TeedApparent:
    """What a relay measures for bolted faults at one remote terminal, one infeed state.

    Reaches are along the relay's line angle, Re(Z exp(-j theta1)) [ohm], over the fault
    types of the reach study, their meant loops and the source cases.
    """

    remote: str  #: the faulted remote terminal
    infeed: bool  #: the third terminal's source in (True) or disconnected (False)
    min_ohm: float
    max_ohm: float
    min_case: str  #: fault type, loop and source case of the smallest
    max_case: str
    min_z_ohm: complex = 0j  #: the apparent impedance of the smallest case [ohm]
    max_z_ohm: complex = 0j  #: and of the largest [ohm]

    def to_dict(self) -> dict[str, Any]:
        return {"remote": self.remote, "infeed": self.infeed, "min_ohm": self.min_ohm,
                "max_ohm": self.max_ohm, "min_case": self.min_case,
                "max_case": self.max_case, "min_z_ohm": cplx(self.min_z_ohm),
                "max_z_ohm": cplx(self.max_z_ohm)}


@dataclass(frozen=True)
class TeedEndSettings:
    """Zone 1 and zone 2 of the relay at one end of a teed line."""

    end: str
    apparent: tuple[TeedApparent, ...]
    tee_ohm: float  #: Z1 from this end to the tee along the line angle [ohm]
    zone1_pct: float  #: of the nearest remote terminal's apparent impedance without infeed
    zone1_ohm: complex  #: reach at the line angle [ohm]
    zone1_rule: str
    zone2_ohm: complex
    zone2_rule: str
    checks: tuple[Check, ...]  #: the setting rules' (relayset.settings.teed)
    zone1_secondary_ohm: complex = 0j  #: through this end's CT and VT ratios [ohm]
    zone2_secondary_ohm: complex = 0j
    #: the fault simulation's (relayset.studies.verification.teed)
    verification_checks: tuple[Check, ...] = ()
    #: zone 1 and zone 2 as set, the characteristic of each (mho or quadrilateral, the
    #: philosophy's shape), k0, the load check and, with a relay profile, the settable
    #: values: the two-ended settings' results type (their zones' own checks are in
    #: ``checks``, ids prefixed by the zone)
    settings: SettingsResult | None = None

    @property
    def all_checks(self) -> tuple[Check, ...]:
        """The setting rules' checks, then the fault simulation's."""
        return self.checks + self.verification_checks

    def to_dict(self) -> dict[str, Any]:
        return {"end": self.end,
                "zone1_secondary_ohm": cplx(self.zone1_secondary_ohm),
                "zone2_secondary_ohm": cplx(self.zone2_secondary_ohm),
                "apparent": [a.to_dict() for a in self.apparent],
                "tee_ohm": self.tee_ohm, "zone1_pct": self.zone1_pct,
                "zone1_ohm": cplx(self.zone1_ohm), "zone1_rule": self.zone1_rule,
                "zone2_ohm": cplx(self.zone2_ohm), "zone2_rule": self.zone2_rule,
                "checks": [_check(c) for c in self.checks],
                "verification_checks": [_check(c) for c in self.verification_checks]} | (
                    {} if self.settings is None else {"settings": self.settings.to_dict()})


def _check(c: Check) -> dict[str, Any]:
    return {"check_id": c.check_id, "passed": c.passed, "detail": c.detail} | (
        {} if c.judged else {"judged": False})


@dataclass(frozen=True)
class TeedStudyResult:
    """The teed line's reach study, the zones of every relay end and their verification."""

    buses: tuple[str, str, str]  #: from, to, third substation
    tee_distance_m: float
    branch_length_m: float
    z1_set_ohm: complex
    k0_set: complex
    ends: tuple[TeedEndSettings, ...]
    assumptions: tuple[str, ...]
    #: per leg (from, to, third substation to the tee): (length [m], Z1 [ohm], Z0 [ohm]),
    #: sequence impedances of the leg's series matrix as built (Fortescue)
    legs: tuple[tuple[float, complex, complex], ...]
    #: "verified", "verified with accepted deviations" or "failed checks"
    #: (relayset.results.verification.VERDICTS), over the setting rules' and the fault
    #: simulation's checks of every end
    verification: str
    #: failed checks the study accepts (``[[deviations]]``, named by
    #: :func:`deviation_name`): not counted as failed
    deviations: tuple[AcceptedDeviation, ...] = ()

    def accepted(self, end: str, check_id: str) -> AcceptedDeviation | None:
        """The accepted deviation of a failed check at ``end`` (None: not accepted)."""
        name = deviation_name(check_id)
        return next((a for a in self.deviations if a.end == end and a.check == name), None)

    def to_dict(self) -> dict[str, Any]:
        return {"buses": list(self.buses), "tee_distance_m": self.tee_distance_m,
                "branch_length_m": self.branch_length_m, "z1_set_ohm": cplx(self.z1_set_ohm),
                "k0_set": cplx(self.k0_set), "ends": [e.to_dict() for e in self.ends],
                "legs": [{"bus": b, "length_m": ln, "z1_ohm": cplx(z1), "z0_ohm": cplx(z0)}
                         for b, (ln, z1, z0) in zip(self.buses, self.legs, strict=True)],
                "assumptions": list(self.assumptions), "verification": self.verification,
                "accepted_deviations": [a.to_dict() for a in self.deviations]}
