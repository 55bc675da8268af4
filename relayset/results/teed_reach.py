"""Results of the reach study of a three-terminal (teed) line (``relayset reach``).

Per relay end, per remote terminal (the path from the relay through the tee to it) and
per infeed state of the third terminal (on a double-circuit line also per state of the
untapped parallel circuit, and with the parallel circuit in service with and without the
relay's mutual compensation): what the loops meant for each fault type measure
for bolted faults along the path, and their reach errors, defined as the two-ended reach
study's (:mod:`relayset.results.reach`) with the path in place of the line.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from relayset.results.serialize import cplx, polar


@dataclass(frozen=True)
class TeedWorstCase:
    """One extreme of a reach error along a path and the case that produced it."""

    error_pct: float
    fault_type: str  #: in the study's phase labels
    location_pct: float  #: of the path from the relay end [%]
    distance_m: float  #: from the relay end along the path [m]
    leg: str  #: the faulted leg, named by its bus (the relay's own leg up to the tee)
    #: the source case's name; on a double-circuit line followed by the parallel circuit's
    #: state (", parallel circuit earthed") and ", mutual compensation" where measured so
    source_case: str
    apparent_ohm: complex  #: the loop's measured impedance, primary [ohm]

    def to_dict(self) -> dict[str, Any]:
        return {"error_pct": self.error_pct, "fault_type": self.fault_type,
                "location_pct": self.location_pct, "distance_km": self.distance_m / 1e3,
                "leg": self.leg, "source_case": self.source_case,
                "apparent_ohm": cplx(self.apparent_ohm)}


#: The picks of every loop (the JSON keys), in order.
TEED_PICKS = ("worst_overreach_on_path", "worst_underreach_on_path",
              "worst_overreach_at_remote_terminal", "worst_untransposition_overreach_on_path",
              "worst_untransposition_underreach_on_path")


@dataclass(frozen=True)
class TeedLoopSummary:
    """Worst reach errors of one measuring loop on one path (only the fault types the
    loop is meant for; bolted faults)."""

    loop: str  #: in the study's phase labels, e.g. "A-G"
    worst_overreach_on_path: TeedWorstCase | None
    worst_underreach_on_path: TeedWorstCase | None
    #: bolted, at the remote terminal: what zone 1 must stay short of (infeed out)
    worst_overreach_at_remote_terminal: TeedWorstCase | None
    #: the part of the reach error due to the line's transposition: the error on the
    #: actual line less the error of the same case on the ideally transposed line
    worst_untransposition_overreach_on_path: TeedWorstCase | None
    worst_untransposition_underreach_on_path: TeedWorstCase | None

    def to_dict(self) -> dict[str, Any]:
        return {"loop": self.loop} | {
            k: None if getattr(self, k) is None else getattr(self, k).to_dict()
            for k in TEED_PICKS}


@dataclass(frozen=True)
class TeedPathReach:
    """Faults along the path from one relay end to one remote terminal, one infeed state
    (and on a double-circuit line one state of the parallel circuit and of the relay's
    mutual compensation)."""

    remote: str  #: the remote terminal at the path's end
    third: str  #: the third terminal, whose infeed is in or out
    infeed: bool  #: the third terminal's source (or grounded transformer) in
    #: the untapped parallel circuit of a double-circuit line: "in_service", "earthed" or
    #: "isolated" (network.PARALLEL_STATES); None on a single circuit
    parallel_circuit: str | None
    #: the relay measures with k0m too (its parallel circuit in service)
    mutual_compensation: bool
    length_m: float  #: relay end to tee to remote terminal [m]
    tee_location_pct: float  #: where the tee lies on the path [%]
    #: Z1 of the path, the sum of its legs' (ideally transposed: the diagonal of each
    #: section's Z012) [ohm]
    z1_path_ohm: complex
    loops: tuple[TeedLoopSummary, ...]
    worst_bolted_overreach_at_remote_terminal_pct: float
    worst_bolted_overreach_on_path_pct: float
    worst_bolted_underreach_on_path_pct: float
    worst_untransposition_overreach_on_path_pct: float
    worst_untransposition_underreach_on_path_pct: float
    #: the meant loops' apparent impedances along the relay's line angle for bolted faults
    #: at the tee and at the remote terminal, (min, max) over fault types, loops and source
    #: cases [ohm]
    apparent_at_tee_ohm: tuple[float, float]
    apparent_at_remote_terminal_ohm: tuple[float, float]
    envelope_location_pct: np.ndarray  #: (M,) along the path
    envelope_max_pct: np.ndarray  #: (6, M) bolted reach error, max over types and cases
    envelope_min_pct: np.ndarray
    apparent_max_ohm: np.ndarray  #: (6, M) along the line angle, max over types and cases
    apparent_min_ohm: np.ndarray
    untransposition_max_pct: np.ndarray  #: (6, M)
    untransposition_min_pct: np.ndarray

    def to_dict(self) -> dict[str, Any]:
        def rows(a: np.ndarray) -> list:
            return [[None if not np.isfinite(x) else float(x) for x in r] for r in a]

        return {
            "remote": self.remote, "third": self.third, "infeed": self.infeed,
            "parallel_circuit": self.parallel_circuit,
            "mutual_compensation": self.mutual_compensation,
            "length_km": self.length_m / 1e3, "tee_location_pct": self.tee_location_pct,
            "z1_path_ohm": cplx(self.z1_path_ohm),
            "worst_bolted_overreach_at_remote_terminal_pct":
                self.worst_bolted_overreach_at_remote_terminal_pct,
            "worst_bolted_overreach_on_path_pct": self.worst_bolted_overreach_on_path_pct,
            "worst_bolted_underreach_on_path_pct": self.worst_bolted_underreach_on_path_pct,
            "worst_untransposition_overreach_on_path_pct":
                self.worst_untransposition_overreach_on_path_pct,
            "worst_untransposition_underreach_on_path_pct":
                self.worst_untransposition_underreach_on_path_pct,
            "apparent_at_tee_ohm": {"min": self.apparent_at_tee_ohm[0],
                                    "max": self.apparent_at_tee_ohm[1]},
            "apparent_at_remote_terminal_ohm": {
                "min": self.apparent_at_remote_terminal_ohm[0],
                "max": self.apparent_at_remote_terminal_ohm[1]},
            "loops": [lp.to_dict() for lp in self.loops],
            "envelope": {
                "location_pct": [float(x) for x in self.envelope_location_pct],
                "loops": [lp.loop for lp in self.loops],
                "bolted_reach_error_max_pct": rows(self.envelope_max_pct),
                "bolted_reach_error_min_pct": rows(self.envelope_min_pct),
                "apparent_along_line_angle_max_ohm": rows(self.apparent_max_ohm),
                "apparent_along_line_angle_min_ohm": rows(self.apparent_min_ohm),
                "untransposition_error_max_pct": rows(self.untransposition_max_pct),
                "untransposition_error_min_pct": rows(self.untransposition_min_pct),
            },
        }


@dataclass(frozen=True)
class TeedEndReach:
    """Everything the teed reach study found for the relay at one end."""

    end: str
    z1_set_ohm: complex
    k0_set: complex
    tee_ohm: complex  #: Z1 of the relay's own leg, bus to tee (ideally transposed) [ohm]
    #: per remote terminal, infeed in then out (on a double circuit per parallel state, in
    #: service with k0 then with k0m, earthed, isolated)
    paths: tuple[TeedPathReach, ...]
    #: the mutual compensation the relay measures with while its parallel circuit is in
    #: service (an end of a double circuit), None: none
    k0m_set: complex | None = None

    def path(self, remote: str, infeed: bool, parallel_circuit: str | None = None,
             mutual_compensation: bool = False) -> TeedPathReach:
        """The path to ``remote`` with the third terminal's infeed in or out (and, on a
        double-circuit line, the parallel circuit's state and the mutual compensation)."""
        for p in self.paths:
            if (p.remote == remote and p.infeed == infeed
                    and p.parallel_circuit == parallel_circuit
                    and p.mutual_compensation == mutual_compensation):
                return p
        raise KeyError((remote, infeed, parallel_circuit, mutual_compensation))

    def to_dict(self) -> dict[str, Any]:
        return {"end": self.end, "z1_set_ohm": cplx(self.z1_set_ohm),
                "k0_set": polar(self.k0_set),
                "k0m_set": None if self.k0m_set is None else polar(self.k0m_set),
                "tee_ohm": cplx(self.tee_ohm),
                "paths": [p.to_dict() for p in self.paths]}


@dataclass(frozen=True)
class TeedReachResult:
    """The reach study of a three-terminal line: sweep axes and, per relay end, its paths."""

    buses: tuple[str, str, str]  #: from, to, third substation
    tee_distance_m: float
    branch_length_m: float
    fault_types: tuple[str, ...]
    location_step_pct: float  #: of each path
    source_cases: tuple[str, ...]  #: the reach study's, by name
    shunt_capacitance: bool
    ends: tuple[TeedEndReach, ...]
    cases_solved: int
    notes: tuple[str, ...]

    def end(self, name: str) -> TeedEndReach:
        """The results of the relay at ``name``."""
        for e in self.ends:
            if e.end == name:
                return e
        raise KeyError(name)

    def to_dict(self) -> dict[str, Any]:
        return {"buses": list(self.buses), "tee_distance_km": self.tee_distance_m / 1e3,
                "branch_length_km": self.branch_length_m / 1e3,
                "fault_types": list(self.fault_types),
                "location_step_pct": self.location_step_pct,
                "fault_resistances_ohm": [0.0],
                "source_cases": list(self.source_cases),
                "shunt_capacitance": self.shunt_capacitance,
                "cases_solved": self.cases_solved,
                "ends": [e.to_dict() for e in self.ends], "notes": list(self.notes)}
