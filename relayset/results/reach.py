"""Reach-study results: per relay end and arrangement, the worst reach errors per loop."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from relayset.results.deprecated import alias
from relayset.results.serialize import cplx, polar


def loop_label(loop: str, labels: tuple[str, str, str] | list[str]) -> str:
    """A measuring loop in the study's phase labels, e.g. "AG" -> "L1-G", "AB" -> "L1-L2"."""
    from relayset.physics.measurement import LOOP_PHASES

    ph = LOOP_PHASES[loop]
    return "-".join([labels[p] for p in ph] + (["G"] if len(ph) == 1 else []))


def fault_label(fault_type: str, labels: tuple[str, str, str] | list[str]) -> str:
    """A fault type in the study's phase labels, e.g. "ABG" -> "L1-L2-G" (how the results
    name fault types)."""
    parts = [labels["ABC".index(ch)] for ch in fault_type if ch in "ABC"]
    return "-".join(parts + (["G"] if fault_type.endswith("G") else []))


@dataclass(frozen=True)
class WorstCase:
    """One extreme of the reach error and the case that produced it."""

    error_pct: float
    fault_type: str
    m: float
    r_fault_ohm: float
    source_case: str
    transfer_angle_deg: float
    positions: tuple[str, ...]  #: tower positions of the loop's phases at the fault

    def to_dict(self) -> dict[str, Any]:
        return {
            "error_pct": self.error_pct,
            "fault_type": self.fault_type,
            "location_pct": 100 * self.m,
            "r_fault_ohm": self.r_fault_ohm,
            "source_case": self.source_case,
            "transfer_angle_deg": self.transfer_angle_deg,
            "positions": list(self.positions),
        }


@dataclass(frozen=True)
class LoopSummary:
    """Worst reach errors of one measuring loop (only faults that loop is meant to see)."""

    loop: str  #: in the study's phase labels, e.g. "AG", "R-Y"
    #: worst overreach at the zone 1 reach point, bolted
    worst_overreach_at_zone1_reach: WorstCase | None
    worst_underreach_at_zone1_reach: WorstCase | None
    worst_overreach_on_line: WorstCase | None  #: worst overreach anywhere on the line, bolted
    worst_underreach_on_line: WorstCase | None
    #: bolted, m = 1: what zone 1 must stay short of
    worst_overreach_at_remote_bus: WorstCase | None
    #: worst reactance overreach at the zone 1 reach point for faults with Rf > 0
    worst_reactance_overreach_at_zone1_reach_resistive: WorstCase | None

    # Old names (relayset 0.2), one release.
    over_at_reach = alias("worst_overreach_at_zone1_reach", "over_at_reach")
    under_at_reach = alias("worst_underreach_at_zone1_reach", "under_at_reach")
    over_line = alias("worst_overreach_on_line", "over_line")
    under_line = alias("worst_underreach_on_line", "under_line")
    over_at_remote_bus = alias("worst_overreach_at_remote_bus", "over_at_remote_bus")
    reactance_over_resistive = alias("worst_reactance_overreach_at_zone1_reach_resistive",
                                     "reactance_over_resistive")

    def to_dict(self) -> dict[str, Any]:
        def d(w):
            return None if w is None else w.to_dict()

        return {
            "loop": self.loop,
            "worst_overreach_at_zone1_reach": d(self.worst_overreach_at_zone1_reach),
            "worst_underreach_at_zone1_reach": d(self.worst_underreach_at_zone1_reach),
            "worst_overreach_on_line": d(self.worst_overreach_on_line),
            "worst_underreach_on_line": d(self.worst_underreach_on_line),
            "worst_overreach_at_remote_bus": d(self.worst_overreach_at_remote_bus),
            "worst_reactance_overreach_at_zone1_reach_resistive":
                d(self.worst_reactance_overreach_at_zone1_reach_resistive),
        }


@dataclass(frozen=True)
class ArrangementReach:
    """Reach-error results of one transposition arrangement for one relay end."""

    arrangement: str
    #: The arrangement solved for this one when both are the same line (a one-section plan
    #: is the untransposed line; a plan of three equal cyclic sections is the ideal cycle);
    #: its results are those of that arrangement. None when solved on its own.
    solved_as: str | None
    mutual_compensation: bool
    loops: tuple[LoopSummary, ...]
    worst_bolted_overreach_at_remote_bus_pct: float
    worst_bolted_overreach_on_line_pct: float
    worst_bolted_underreach_on_line_pct: float
    envelope_m: np.ndarray  #: (M,) locations
    envelope_max_pct: np.ndarray  #: (6, M) bolted, max over types/sources/loads, per loop
    envelope_min_pct: np.ndarray
    #: A shared corridor: the neighbouring line's state in this solve (else None).
    neighbour_state: str | None = None

    def to_frame(self):
        """The bolted reach error along the line per loop, a pandas DataFrame."""
        from relayset.frames import envelope_frame

        return envelope_frame(self)

    def to_dict(self) -> dict[str, Any]:
        return {
            "arrangement": self.arrangement,
            "solved_as": self.solved_as,
            "mutual_compensation": self.mutual_compensation,
            "worst_bolted_overreach_at_remote_bus_pct":
                self.worst_bolted_overreach_at_remote_bus_pct,
            "worst_bolted_overreach_on_line_pct": self.worst_bolted_overreach_on_line_pct,
            "worst_bolted_underreach_on_line_pct": self.worst_bolted_underreach_on_line_pct,
            "loops": [lp.to_dict() for lp in self.loops],
            "envelope": {
                "location_pct": (100 * self.envelope_m).tolist(),
                "loops": [lp.loop for lp in self.loops],
                "bolted_reach_error_max_pct": self.envelope_max_pct.tolist(),
                "bolted_reach_error_min_pct": self.envelope_min_pct.tolist(),
            },
            **({} if self.neighbour_state is None
               else {"neighbour_state": self.neighbour_state}),
        }


@dataclass(frozen=True)
class EndReach:
    """Everything the study found for the relay at one line end."""

    end: str
    z1_set_ohm: complex
    k0_set: complex
    k0m_set: complex | None
    zone1_reach_pct: float
    error_budget_pct: float
    recommended_zone1_pct: float
    #: Zone 1 the error budget and the worst overreach alone allow, before the philosophy's
    #: cap [% of the line]; above ``recommended_zone1_pct`` when the cap governs.
    zone1_allowed_by_errors_pct: float
    governing_loop: str
    governing_case: WorstCase | None
    arrangements: tuple[ArrangementReach, ...]

    def arrangement(self, name: str, mutual: bool | None = None) -> ArrangementReach:
        for a in self.arrangements:
            if a.arrangement == name and (mutual is None or a.mutual_compensation == mutual):
                return a
        raise KeyError(name)

    @property
    def ideal_cycle_gain_pct(self) -> float:
        """How much less the remote-bus overreach would be with a full ideal cycle [points]."""
        return (self.arrangement("actual_plan").worst_bolted_overreach_at_remote_bus_pct
                - self.arrangement("ideal_cycle").worst_bolted_overreach_at_remote_bus_pct)

    def to_frame(self):
        """The worst reach errors and their cases, a pandas DataFrame."""
        from relayset.frames import worst_cases_frame

        return worst_cases_frame(self)

    def to_dict(self) -> dict[str, Any]:
        return {
            "end": self.end,
            "z1_set_ohm": cplx(self.z1_set_ohm),
            "k0_set": polar(self.k0_set),
            "k0m_set": None if self.k0m_set is None else polar(self.k0m_set),
            "zone1_reach_pct": self.zone1_reach_pct,
            "error_budget_pct": self.error_budget_pct,
            "recommended_zone1_pct": self.recommended_zone1_pct,
            "zone1_allowed_by_errors_pct": self.zone1_allowed_by_errors_pct,
            "governing_loop": self.governing_loop,
            "governing_case": None if self.governing_case is None
            else self.governing_case.to_dict(),
            "arrangements": [a.to_dict() for a in self.arrangements],
        }


@dataclass(frozen=True)
class ReachStudyResult:
    """The reach study of one line: sweep axes, and per relay end the condensed results."""

    fault_types: tuple[str, ...]
    locations_pct: tuple[float, ...]
    fault_resistances_ohm: tuple[float, ...]
    phase_fault_resistance_ohm: float
    source_cases: tuple[tuple[str, float], ...]
    #: Load cases as transfer angles (S EMF leading R) [deg]; None when they are given as
    #: power flows (then each source case has its own angle, found by a load flow).
    transfer_angles_deg: tuple[float, ...] | None
    #: Load cases as power flows at the relay end, (P [W], Q [var]) each; or None.
    power_flows: tuple[tuple[float, float], ...] | None
    parallel_circuit: str | None
    shunt_capacitance: bool
    source_impedances_ohm: dict[str, dict[str, list[float]]]
    ends: tuple[EndReach, ...]
    cases_solved: int
    notes: tuple[str, ...]
    #: A shared corridor: the neighbouring line's name, shared length and states solved.
    neighbour: dict[str, Any] | None = None
    #: Series capacitor banks, their states, the varistor state's operating point and the
    #: inversion checks (relayset.studies.series_capacitors); None without banks.
    series_capacitors: dict[str, Any] | None = None

    # Old names (relayset 0.2), one release.
    source_impedances = alias("source_impedances_ohm", "source_impedances")
    n_cases = alias("cases_solved", "n_cases")

    @property
    def n_load_cases(self) -> int:
        """Number of load cases (transfer angles or power flows)."""
        return len(self.power_flows if self.power_flows is not None
                   else self.transfer_angles_deg)

    def to_frame(self):
        """The worst reach errors of every end and their cases, a pandas DataFrame."""
        from relayset.frames import worst_cases_frame

        return worst_cases_frame(self)

    def to_dict(self) -> dict[str, Any]:
        return {
            "fault_types": list(self.fault_types),
            "location_step_pct": self.locations_pct[1] - self.locations_pct[0],
            "fault_resistances_ohm": list(self.fault_resistances_ohm),
            "phase_fault_resistance_ohm": self.phase_fault_resistance_ohm,
            "source_cases": [{"name": n, "scale": s} for n, s in self.source_cases],
            "transfer_angles_deg": (None if self.transfer_angles_deg is None
                                    else list(self.transfer_angles_deg)),
            "power_flows": None if self.power_flows is None else [
                {"active_power_w": p, "reactive_power_var": q} for p, q in self.power_flows],
            "parallel_circuit": self.parallel_circuit,
            "shunt_capacitance": self.shunt_capacitance,
            "source_impedances_ohm": self.source_impedances_ohm,
            "cases_solved": self.cases_solved,
            "ends": [e.to_dict() for e in self.ends],
            "notes": list(self.notes),
            **({} if self.neighbour is None else {"neighbour": self.neighbour}),
        } | ({} if self.series_capacitors is None
             else {"series_capacitors": self.series_capacitors})
