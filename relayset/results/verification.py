"""Verification results: each zone as set, tested by fault simulation of the real line.

A check holds the cases it ran, the smallest margin it found and, when it fails, the case
that governs it. Margins are in percent of the zone's reach: how much longer (must not
operate) or shorter (must operate) the zone could be before the governing case changes side.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from relayset.results.serialize import cplx

VERDICTS = ("verified", "verified with accepted deviations", "failed checks", "not verified")


@dataclass(frozen=True)
class AcceptedDeviation:
    """A failed check the study accepts (``[[deviations]]``): who, when and why."""

    check: str  #: "zone.check_id", e.g. "zone2.covers_whole_line"
    end: str  #: the relay end
    reason: str
    accepted_by: str
    date: str  #: ISO date

    def to_dict(self) -> dict[str, Any]:
        return {"check": self.check, "end": self.end, "reason": self.reason,
                "accepted_by": self.accepted_by, "date": self.date}


@dataclass(frozen=True)
class VerificationCase:
    """One simulated fault case, as the engineer needs it to reproduce the result."""

    fault_type: str  #: in the study's phase labels, e.g. "A-B-G"
    faulted: str  #: "protected line", "parallel circuit", "behind the relay", "adjacent line"
    location_pct: float  #: along the faulted circuit from the relay end [% of the line]
    r_fault_ohm: float  #: resistance to ground [ohm]
    r_phase_ohm: float  #: resistance between phases [ohm]
    source_case: str
    transfer_angle_deg: float  #: prefault load case (S EMF leads R EMF) [deg]
    parallel_state: str  #: "in_service", "earthed", "isolated" or "none" (single circuit)
    earth_resistivity_ohm_m: float
    loop: str  #: the measuring loop that governs, in the study's phase labels
    z_apparent_primary_ohm: complex  #: what that loop measures [ohm]
    mutual_compensation: bool
    #: series capacitor state ("in_service", "varistor", "bypassed"); None without banks
    capacitor_state: str | None = None

    def to_dict(self) -> dict[str, Any]:
        return {
            "fault_type": self.fault_type,
            "faulted": self.faulted,
            "location_pct": self.location_pct,
            "r_fault_ohm": self.r_fault_ohm,
            "r_phase_ohm": self.r_phase_ohm,
            "source_case": self.source_case,
            "transfer_angle_deg": self.transfer_angle_deg,
            "parallel_state": self.parallel_state,
            "earth_resistivity_ohm_m": self.earth_resistivity_ohm_m,
            "loop": self.loop,
            "z_apparent_primary_ohm": cplx(self.z_apparent_primary_ohm),
            "mutual_compensation": self.mutual_compensation,
        } | ({} if self.capacitor_state is None
             else {"capacitor_state": self.capacitor_state})


@dataclass(frozen=True)
class ZoneVerification:
    """One requirement on one zone at one end, and what the simulation found."""

    zone: str  #: "zone1", "zone2", "zone3", "reverse"
    check_id: str
    requirement: str  #: what must hold, in words
    cases_run: int
    cases_failed: int
    margin_pct: float | None  #: smallest margin found [% of reach]; None: no case can flip
    required_margin_pct: float | None  #: margin to reach [%]; None: reported, not judged
    passed: bool
    governing_case: VerificationCase | None
    consider: str = ""  #: what to do when it fails
    #: cases left out because no loop reached the relay's release currents (sensitivity)
    cases_below_min_current: int = 0
    #: the study's acceptance of this check's failure, if any
    deviation: AcceptedDeviation | None = None

    @property
    def check(self) -> str:
        """The check's name as deviations and the JSON name it: "zone.check_id"."""
        return f"{self.zone}.{self.check_id}"

    def to_dict(self) -> dict[str, Any]:
        return {
            "zone": self.zone,
            "check_id": self.check_id,
            "requirement": self.requirement,
            "cases_run": self.cases_run,
            "cases_failed": self.cases_failed,
            "margin_pct": self.margin_pct,
            "required_margin_pct": self.required_margin_pct,
            "result": ("reported" if self.required_margin_pct is None
                       else "pass" if self.passed else "FAIL"),
            "governing_case": None if self.governing_case is None
            else self.governing_case.to_dict(),
            "consider": self.consider,
            "cases_below_min_current": self.cases_below_min_current,
            "accepted_deviation": None if self.deviation is None else self.deviation.to_dict(),
        }


@dataclass(frozen=True)
class InfeedRange:
    """Infeed factor K at the remote bus over the simulated cases (phase loops, bolted)."""

    k_min: complex
    k_max: complex
    case_min: str
    case_max: str

    def to_dict(self) -> dict[str, Any]:
        return {"k_min": cplx(self.k_min), "k_min_magnitude": abs(self.k_min),
                "k_max": cplx(self.k_max), "k_max_magnitude": abs(self.k_max),
                "case_min": self.case_min, "case_max": self.case_max}


@dataclass(frozen=True)
class EndVerification:
    """Every check of the zones of the relay at one end."""

    end: str
    checks: tuple[ZoneVerification, ...]
    infeed: InfeedRange | None
    zone1_limit_pct: float | None  #: longest zone 1 the external cases allow [% of line]

    @property
    def passed(self) -> bool:
        return all(c.passed for c in self.checks)

    def check(self, zone: str, check_id: str) -> ZoneVerification:
        for c in self.checks:
            if c.zone == zone and c.check_id == check_id:
                return c
        raise KeyError((zone, check_id))

    def to_dict(self) -> dict[str, Any]:
        return {
            "end": self.end,
            "result": "pass" if self.passed else "FAIL",
            "zone1_limit_pct": self.zone1_limit_pct,
            "infeed": None if self.infeed is None else self.infeed.to_dict(),
            "checks": [c.to_dict() for c in self.checks],
        }


@dataclass(frozen=True)
class VerificationResult:
    """The verdict on the settings of a study and the evidence behind it."""

    verdict: str  #: one of :data:`VERDICTS`
    reason: str  #: why, in one sentence
    tolerance_pct: float  #: margin every check must reach [% of reach]
    ends: tuple[EndVerification, ...]
    parallel_states: tuple[str, ...]
    source_cases: tuple[str, ...]
    earth_resistivities_ohm_m: tuple[float, ...]
    cases_solved: int
    notes: tuple[str, ...] = ()
    envelope: dict[str, Any] | None = None  #: what was swept (load, resistances, rho)
    relay_model: dict[str, Any] | None = None  #: per end, the relay the proof assumes
    deviations: tuple[AcceptedDeviation, ...] = ()  #: failed checks the study accepts
    #: series capacitor states solved (empty without banks) and the banks' basis
    capacitor_states: tuple[str, ...] = ()
    series_capacitors: dict[str, Any] | None = None

    @property
    def failures(self) -> list[tuple[str, ZoneVerification]]:
        """Failed checks, accepted deviations included."""
        return [(e.end, c) for e in self.ends for c in e.checks if not c.passed]

    @property
    def unaccepted_failures(self) -> list[tuple[str, ZoneVerification]]:
        """Failed checks the study does not accept as deviations."""
        return [(e, c) for e, c in self.failures if c.deviation is None]

    def end(self, name: str) -> EndVerification:
        for e in self.ends:
            if e.end == name:
                return e
        raise KeyError(name)

    def to_frame(self):
        """The checks with their governing cases, a pandas DataFrame."""
        from relayset.frames import verification_checks_frame

        return verification_checks_frame(self)

    def to_dict(self) -> dict[str, Any]:
        return {
            "verdict": self.verdict,
            "reason": self.reason,
            "tolerance_pct": self.tolerance_pct,
            "parallel_states": list(self.parallel_states),
            "source_cases": list(self.source_cases),
            "earth_resistivities_ohm_m": list(self.earth_resistivities_ohm_m),
            "cases_solved": self.cases_solved,
            "ends": [e.to_dict() for e in self.ends],
            "notes": list(self.notes),
            "envelope": self.envelope,
            "relay_model": self.relay_model,
            "accepted_deviations": [d.to_dict() for d in self.deviations],
        } | ({} if not self.capacitor_states else {
            "capacitor_states": list(self.capacitor_states),
            "series_capacitors": self.series_capacitors})
