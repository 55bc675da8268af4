r"""The operating envelope the verification sweeps, taken from the study.

A zone is proven only over the conditions it was tested in, so the envelope is built from
what the study itself states, by default:

- **Load.** The listed load cases, plus the stated maximum apparent power
  :math:`S_{max}` at the stated minimum voltage :math:`V_{min}` and load angle
  :math:`\varphi_{max}`, exported at each end in turn (the other end imports it, so each
  relay end sees both directions) at :math:`\pm\varphi_{max}`. The load flow turns
  each into source EMFs for every source case and parallel-circuit state (with the parallel
  circuit out the transfer angle grows). At nominal voltage the same apparent load
  impedance :math:`Z = (V_{min} V_n)^2 / S_{max}` needs :math:`S_{max}/V_{min}^2`; the
  network is linear, so every measured impedance is the same as at :math:`V_{min}`.
- **Fault resistance.** Independent grids for the resistance to ground :math:`R_g` and the
  resistance between phases :math:`R_{ph}`: ground faults through each :math:`R_g`,
  phase faults through each :math:`R_{ph}`, two-phase-to-ground faults through every pair
  (ground resistance alone, phase resistance alone, both), for every zone shape.
- **Earth resistivity.** The study's range, or when none is given
  :data:`DEFAULT_RHO_FACTORS` around its value (common practice, no source: soil surveys
  rarely pin the resistivity down better than a factor of two).

The listed load cases are kept so that the reach study's cases stay among those proven.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from relayset.inputs.study_file import Study
from relayset.physics.arrays import unique_sorted

#: Resistivity range swept when the study gives none, as factors on its value
#: (common practice, no source).
DEFAULT_RHO_FACTORS = (0.5, 2.0)
#: Fractions of each resistive target (arc plus tower footing) in the resistance grids.
RF_FRACTIONS = (0.5, 1.0)
#: Decades of the 1-2-5 series added to the ground-resistance grid up to its largest value
#: [ohm]: the overreach of a two-phase-to-ground fault through ground resistance peaks at a
#: few ohms, between the values a study usually lists (common practice, no source).
SERIES_125 = (1.0, 2.0, 5.0)
#: Fault locations of the sequential-clearing runs [1 from S] (common practice, no source:
#: a coarser grid than the protected line's, the mutual-coupling error of zone 1 varying
#: smoothly along the parallel circuit; both line ends included).
SEQUENTIAL_M = (0.0, 0.5, 1.0)
#: Fault types by the resistance they go through.
GROUND_FAULTS = ("AG", "BG", "CG")
PHASE_FAULTS = ("AB", "BC", "CA", "ABC")
TWO_PHASE_GROUND_FAULTS = ("ABG", "BCG", "CAG")


@dataclass(frozen=True)
class FaultGroup:
    """Fault types solved together, with their (R_g, R_ph) pairs [ohm]."""

    name: str
    fault_types: tuple[str, ...]
    rf_pairs: np.ndarray  #: (Rf, 2): resistance to ground, between phases [ohm]


@dataclass(frozen=True)
class Envelope:
    """What the verification sweeps, from the study (every dimension printed in the notes)."""

    transfer_angles_rad: tuple[float, ...]  #: listed load cases as transfer angles
    listed_flows_va: tuple[complex, ...]  #: listed P + jQ at the relay end [VA]
    envelope_flows_va: tuple[complex, ...]  #: S_max exported at each end in turn [VA]
    ground_ohm: tuple[float, ...]  #: R_g grid [ohm]
    phase_ohm: tuple[float, ...]  #: R_ph grid [ohm]
    both_ohm: tuple[tuple[float, float], ...]  #: (R_g, R_ph) pairs with both non-zero
    resistivities_ohm_m: tuple[float, ...]
    rho_range_given: bool
    load_description: str

    def groups(self, fault_types: tuple[str, ...]) -> tuple[FaultGroup, ...]:
        """The fault types of the study split by the resistance they go through."""
        g, p = np.array(self.ground_ohm), np.array(self.phase_ohm)
        pairs = {
            "ground": np.stack([g, np.zeros_like(g)], axis=1),
            "phase": np.stack([np.zeros_like(p), p], axis=1),
            "two-phase-to-ground": np.array(sorted(
                {(a, 0.0) for a in g} | {(0.0, b) for b in p} | set(self.both_ohm))),
        }
        out = []
        for name, types in (("ground", GROUND_FAULTS), ("phase", PHASE_FAULTS),
                            ("two-phase-to-ground", TWO_PHASE_GROUND_FAULTS)):
            mine = tuple(ft for ft in fault_types if ft in types)
            if mine:
                out.append(FaultGroup(name, mine, pairs[name]))
        return tuple(out)

    @property
    def n_load_cases(self) -> int:
        return (0 if self.listed_flows_va else len(self.transfer_angles_rad)) + len(
            self.listed_flows_va) + 2 * len(self.envelope_flows_va)

    def describe(self, double_circuit: bool = True) -> tuple[str, ...]:
        """The envelope in words, for the notes of the verification and the report (the
        parallel circuit's cases only on a double-circuit line)."""
        rho = ", ".join(f"{r:g}" for r in self.resistivities_ohm_m)
        sequential = (
            "Sequential clearing (double circuits): every fault to ground (ground and "
            "two-phase-to-ground, every fault resistance; the zero-sequence mutual coupling "
            "that makes this case worst acts through the residual current, phase faults on "
            "the parallel circuit are judged with both its breakers closed) on the parallel "
            "circuit at " + ", ".join(f"{100 * x:g}" for x in SEQUENTIAL_M)
            + " % of it with that circuit's breaker open at "
            "one end, then at the other (both circuits in service, the sources' EMFs of the "
            "load flow with both breakers closed), every source case with both sources in "
            "service (with one out the protected circuit carries no fault current or sees "
            "the fault through both circuits) and every load case; zone 1 of both ends "
            "judged.",) if double_circuit else ()
        states = ("every type and fault resistance with both circuits in service, bolted "
                  "faults with the parallel circuit out" if double_circuit else
                  "every type and fault resistance")
        return (
            f"Load envelope: {self.load_description}.",
            "Fault resistance grids: to ground R_g = "
            + ", ".join(f"{r:.4g}" for r in self.ground_ohm) + " Ω; between phases R_ph = "
            + ", ".join(f"{r:.4g}" for r in self.phase_ohm) + " Ω; ground faults through "
            "each R_g, phase faults through each R_ph, two-phase-to-ground faults through "
            "each R_g alone, each R_ph alone, and both together ("
            + ", ".join(f"{a:.4g}/{b:.4g}" for a, b in self.both_ohm) + " Ω).",
            f"Earth resistivity: {rho} Ω·m ("
            + ("the study's range" if self.rho_range_given else
               f"no range given: {DEFAULT_RHO_FACTORS[0]:g} to {DEFAULT_RHO_FACTORS[1]:g} "
               "times the study's value, common practice, no source") + ").",
            *sequential,
            "Lines leaving the buses (the study's lines behind and adjacent lines; the "
            "shortest and the longest at each bus): faults along each, radial from its bus "
            "with its Z1 and Z0 (Z0 = 3 Z1 where none is given, common practice, no source), "
            f"{states}, at the study's earth resistivity, every source "
            "and load case (import and export).",
        )

    def to_dict(self) -> dict:
        return {
            "transfer_angles_deg": [math.degrees(a) for a in self.transfer_angles_rad]
            if not self.listed_flows_va else None,
            "listed_power_flows_mva": [[f.real / 1e6, f.imag / 1e6]
                                       for f in self.listed_flows_va],
            "max_load_exported_at_each_end_mva": [[f.real / 1e6, f.imag / 1e6]
                                                  for f in self.envelope_flows_va],
            "r_ground_ohm": list(self.ground_ohm),
            "r_phase_ohm": list(self.phase_ohm),
            "earth_resistivities_ohm_m": list(self.resistivities_ohm_m),
        }


def max_load_flows(study: Study) -> tuple[complex, ...]:
    """The maximum load exported at an end, at ±φ [VA] (each end in turn; the other end
    then imports it).

    Returns ``S_max / V_min² · e^{±jφ}``: the power at nominal voltage that draws the
    current of S_max at the minimum voltage (see the module notes).
    """
    ld = study.load
    if ld is None:
        return ()
    s = ld.max_apparent_power / ld.min_voltage ** 2
    phi = ld.load_angle_max
    angles = (-phi, phi) if phi > 0 else (0.0,)
    return tuple(s * complex(math.cos(a), math.sin(a)) for a in angles)


def resistivities(study: Study) -> tuple[tuple[float, ...], bool]:
    """Earth resistivities of the sweep [ohm m] and whether the study gave the range."""
    rho = float(study.system.earth_resistivity)
    rng = study.system.earth_resistivity_range
    if rng is not None:
        return tuple(unique_sorted(np.array([rng[0], rho, rng[1]], float)).tolist()), True
    lo, hi = DEFAULT_RHO_FACTORS
    return (rho * lo, rho, rho * hi), False


def resistance_grids(study: Study, targets: list[tuple[float, float]]):
    """Grids of R_g and R_ph and the pairs with both [ohm]: zero, the study's fault
    resistances, a 1-2-5 series up to the largest ground value, and fractions of each
    quadrilateral zone's resistive targets ``(R_g target, R_ph target)``."""
    rs = study.reach_study
    rp0 = float(rs.phase_fault_resistance)
    g = {0.0, *(float(r) for r in rs.fault_resistances)}
    p = {0.0, rp0}
    both = {(float(r), rp0) for r in rs.fault_resistances if r > 0 and rp0 > 0}
    for rg, rp in targets:
        for f in RF_FRACTIONS:
            g.add(rg * f)
            p.add(rp * f)
            if rg > 0 and rp > 0:
                both.add((rg * f, rp * f))
    top = max(g)
    decade = 1.0
    while decade <= top:
        g.update(v * decade for v in SERIES_125 if v * decade <= top)
        decade *= 10
    return tuple(sorted(g)), tuple(sorted(p)), tuple(sorted(both))


def build_envelope(study: Study, targets: list[tuple[float, float]]) -> Envelope:
    """The envelope of a study (see the module notes)."""
    ld = study.load
    angles = tuple(ld.transfer_angles) if ld else (0.0,)
    listed = tuple(complex(f.active_power, f.reactive_power)
                   for f in (ld.power_flows if ld else ()))
    flows = max_load_flows(study)
    rhos, given = resistivities(study)
    g, p, both = resistance_grids(study, targets)
    if ld is None:
        text = ("no [load] table: the transfer angles "
                + ", ".join(f"{math.degrees(a):g}°" for a in angles) + " only")
    else:
        listed_text = (f"{len(listed)} listed power flow(s)" if listed else
                       "listed transfer angles " + ", ".join(f"{math.degrees(a):g}°"
                                                             for a in angles))
        text = (f"{listed_text}, plus the maximum load {ld.max_apparent_power / 1e6:g} MVA "
                f"at {ld.min_voltage:g} pu voltage exported at each end in turn (the other "
                f"imports) at load angles ±{math.degrees(ld.load_angle_max):g}°, turned into "
                "source angles by the "
                "load flow for every source case with both sources and every "
                "parallel-circuit state")
    return Envelope(angles, listed, flows, g, p, both, rhos, given, text)
