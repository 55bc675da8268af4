"""Line-parameter results: frozen dataclasses of every computed line quantity.

One model serves the console summary, the JSON export, the report templates and a later
recomputation check: none of them recomputes anything, they only read these objects (or the
dictionary from :meth:`StudyResults.to_dict`, whose keys carry their units).

Per-unit-length values are stored per metre (SI) and exported per km in JSON.
"""

from __future__ import annotations

import cmath
import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from relayset.physics.longline import LongLineEquivalent
from relayset.results.deprecated import alias
from relayset.results.serialize import PER_KM, cplx, matrix, polar


@dataclass(frozen=True)
class K0:
    """Residual compensation factor k0 = (Z0 - Z1)/(3 Z1) in its three usual forms."""

    k0: complex
    kr: float  #: (R0 - R1)/(3 R1)
    kx: float  #: (X0 - X1)/(3 X1)
    z0_over_z1: complex

    def to_dict(self) -> dict[str, Any]:
        return {
            "k0": polar(self.k0),
            "k0_complex": cplx(self.k0),
            "kr": self.kr,
            "kx": self.kx,
            "z0_over_z1": polar(self.z0_over_z1),
        }


@dataclass(frozen=True)
class CircuitSequence:
    """Sequence quantities of one circuit (diagonal of its Z012; equal for any plan)."""

    circuit: str
    z1_ohm_per_m: complex
    z0_ohm_per_m: complex
    k0: K0
    c1_f_per_m: float
    c0_f_per_m: float
    b1_s_per_m: float  #: positive-sequence shunt susceptance
    charging_current_a_per_m: float  #: positive-sequence, at nominal voltage
    z1_ohm: complex
    z0_ohm: complex
    charging_current_a: float
    positive_long_line: LongLineEquivalent
    zero_long_line: LongLineEquivalent

    @property
    def line_angle_deg(self) -> float:
        return math.degrees(cmath.phase(self.z1_ohm_per_m))

    @property
    def long_line_correction_needed(self) -> bool:
        """True where the exact equivalent differs from the nominal by more than 1 %."""
        return (self.positive_long_line.series_correction_pct > 1.0
                or self.zero_long_line.series_correction_pct > 1.0)

    # Old name (relayset 0.2), one release.
    long_line_flag = alias("long_line_correction_needed", "long_line_flag")

    def to_dict(self) -> dict[str, Any]:
        p, z = self.positive_long_line, self.zero_long_line
        return {
            "circuit": self.circuit,
            "z1_ohm_per_km": cplx(self.z1_ohm_per_m, PER_KM),
            "z0_ohm_per_km": cplx(self.z0_ohm_per_m, PER_KM),
            "z0_over_z1_magnitude": abs(self.z0_ohm_per_m / self.z1_ohm_per_m),
            "line_angle_deg": self.line_angle_deg,
            "k0": self.k0.to_dict(),
            "c1_nf_per_km": self.c1_f_per_m * 1e12,
            "c0_nf_per_km": self.c0_f_per_m * 1e12,
            "b1_us_per_km": self.b1_s_per_m * PER_KM * 1e6,
            "charging_current_a_per_km": self.charging_current_a_per_m * PER_KM,
            "z1_ohm": cplx(self.z1_ohm),
            "z0_ohm": cplx(self.z0_ohm),
            "charging_current_a": self.charging_current_a,
            "surge_impedance_ohm": cplx(p.surge_impedance_ohm),
            "propagation_constant_per_km": cplx(p.propagation_per_m, PER_KM),
            "z1_exact_ohm": cplx(p.z_exact_ohm),
            "z0_exact_ohm": cplx(z.z_exact_ohm),
            "z1_exact_correction_pct": p.series_correction_pct,
            "z0_exact_correction_pct": z.series_correction_pct,
            "long_line_correction_needed": self.long_line_correction_needed,
        }



@dataclass(frozen=True)
class Arrangement:
    """Phase-domain and sequence matrices of the line for one transposition arrangement."""

    name: str  #: "untransposed", "actual_plan" or "ideal_cycle"
    description: str
    zabc_ohm_per_m: np.ndarray  #: (n, n), phase order (circuit 1 then circuit 2)
    yabc_s_per_m: np.ndarray  #: (n, n)
    z012_ohm_per_m: np.ndarray  #: (n, n) block-wise Fortescue transform (off-diagonals kept)
    unbalance_m0: tuple[complex, ...]  #: per circuit
    unbalance_m2: tuple[complex, ...]
    z0m_ohm_per_m: complex | None  #: zero-sequence mutual between circuits (double circuit)

    def to_dict(self) -> dict[str, Any]:
        d: dict[str, Any] = {
            "description": self.description,
            "zabc_ohm_per_km": matrix(self.zabc_ohm_per_m, PER_KM),
            "yabc_us_per_km": matrix(self.yabc_s_per_m, PER_KM * 1e6),
            "z012_ohm_per_km": matrix(self.z012_ohm_per_m, PER_KM),
            "unbalance_m0_pct": [100 * abs(m) for m in self.unbalance_m0],
            "unbalance_m2_pct": [100 * abs(m) for m in self.unbalance_m2],
        }
        if self.z0m_ohm_per_m is not None:
            d["z0m_ohm_per_km"] = cplx(self.z0m_ohm_per_m, PER_KM)
        return d


@dataclass(frozen=True)
class WirePosition:
    """Where one physical wire hangs in the cross-section (for drawings), SI."""

    role: str  #: "phase" or "shield"
    label: str  #: e.g. "circuit 1, position left, subconductor 2" or "shield wire EW1"
    position: str  #: phase position "circuit/position", or the shield wire's name
    x_m: float  #: horizontal offset from the tower centre line
    average_height_m: float  #: average height above ground, h - 2/3 sag
    diameter_m: float
    grounding: str | None  #: shield wires: continuous / segmented / none

    # Old name (relayset 0.2), one release.
    y_m = alias("average_height_m", "y_m")

    def to_dict(self) -> dict[str, Any]:
        return {"role": self.role, "label": self.label, "position": self.position,
                "x_m": self.x_m, "average_height_m": self.average_height_m,
                "diameter_mm": self.diameter_m * 1e3, "grounding": self.grounding}


@dataclass(frozen=True)
class CableSummary:
    """A cable section's construction as computed: which tower index it is, its bonding and
    the return paths assumed, and its sequence impedances (phases ideally transposed)."""

    name: str
    tower: int  #: index in LineParameters.tower_names
    bonding: str
    return_paths: str
    formation: str
    depth_m: float
    spacing_m: float
    length_m: float  #: total length of the sections on this cable
    z1_ohm_per_m: tuple[complex, ...]  #: per circuit
    z0_ohm_per_m: tuple[complex, ...]
    c1_f_per_m: tuple[float, ...]

    @property
    def z1_ohm(self) -> tuple[complex, ...]:
        """Per circuit, Z1 of all the sections on this cable [ohm]."""
        return tuple(z * self.length_m for z in self.z1_ohm_per_m)

    @property
    def z0_ohm(self) -> tuple[complex, ...]:
        """Per circuit, Z0 of all the sections on this cable [ohm]."""
        return tuple(z * self.length_m for z in self.z0_ohm_per_m)

    def to_dict(self) -> dict[str, Any]:
        return {"name": self.name, "bonding": self.bonding, "return_paths": self.return_paths,
                "formation": self.formation, "depth_m": self.depth_m,
                "spacing_m": self.spacing_m, "length_km": self.length_m / 1e3,
                "z1_ohm_per_km": [cplx(z, PER_KM) for z in self.z1_ohm_per_m],
                "z0_ohm_per_km": [cplx(z, PER_KM) for z in self.z0_ohm_per_m],
                "z1_ohm": [cplx(z) for z in self.z1_ohm],
                "z0_ohm": [cplx(z) for z in self.z0_ohm],
                "c1_nf_per_km": [c * 1e12 for c in self.c1_f_per_m]}


@dataclass(frozen=True)
class LineParameters:
    """Everything the line-parameter engine computed for one study."""

    length_m: float
    frequency_hz: float
    earth_resistivity_ohm_m: float
    earth_model: str
    v_nominal_v: float
    positions: tuple[str, ...]  #: tower position names, "circuit/position"
    phase_labels: tuple[tuple[str, str, str], ...]
    section_lengths_m: tuple[float, ...]
    section_orders: tuple[tuple[str, ...], ...]  #: phase label at each position, per section
    conductors: tuple[Any, ...]  #: ConductorData of each type used
    z_by_position_ohm_per_m: np.ndarray  #: (n, n) by position, shields and bundles reduced
    y_by_position_s_per_m: np.ndarray
    arrangements: dict[str, Arrangement]
    circuits: tuple[CircuitSequence, ...]
    k0m: complex | None  #: Z0M / (3 Z1) of the actual plan (double circuit)
    assumptions: tuple[str, ...]
    wires: tuple[WirePosition, ...] = ()  #: every wire of the (first section's) cross-section
    #: Sections on different towers ([towers.NAME]): the towers in order of first use, the
    #: tower of each section and each tower's matrices by position (the first is
    #: z_by_position). Empty: one cross-section over the whole line.
    tower_names: tuple[str, ...] = ()
    section_towers: tuple[int, ...] = ()
    z_by_tower_ohm_per_m: tuple[np.ndarray, ...] = ()
    y_by_tower_s_per_m: tuple[np.ndarray, ...] = ()
    #: A neighbouring line in a shared corridor
    #: (:class:`relayset.results.corridor.NeighbourParameters`), or None.
    neighbour: Any = None
    cables: tuple[CableSummary, ...] = ()  #: the cable sections' constructions
    #: Every neighbouring line and the corridor's matrices
    #: (:class:`relayset.results.corridor.CorridorParameters`; ``neighbour`` is its first).
    corridor: Any = None

    def cable_at(self, k: int) -> CableSummary | None:
        """The cable of tower index ``k`` (None: an overhead tower)."""
        return next((c for c in self.cables if c.tower == k), None)

    def tower_sequence(self, k: int) -> tuple[tuple[complex, complex], ...]:
        """Per circuit (Z1, Z0) [ohm/m] of tower k's cross-section, phases ideally
        transposed within it (the diagonal of its sequence matrix)."""
        from relayset.physics.sequence import to_sequence

        z = self.tower_matrices()[0][k]
        out = []
        for c in range(len(self.phase_labels)):
            z012 = to_sequence(z[3 * c:3 * c + 3, 3 * c:3 * c + 3])
            out.append((complex(z012[1, 1]), complex(z012[0, 0])))
        return tuple(out)

    def _section_tower(self, k: int) -> dict[str, Any]:
        if not self.tower_names:
            return {}
        t = self.section_towers[k]
        cable = self.cable_at(t)
        where = ({"tower": self.tower_names[t]} if cable is None
                 else {"cable": cable.name, "bonding": cable.bonding})
        return {**where,
                "z1_ohm_per_km": [cplx(z1, PER_KM) for z1, _ in self.tower_sequence(t)],
                "z0_ohm_per_km": [cplx(z0, PER_KM) for _, z0 in self.tower_sequence(t)]}

    def tower_matrices(self) -> tuple[tuple[np.ndarray, ...], tuple[np.ndarray, ...]]:
        """Series impedance and shunt admittance by position of each tower [ohm/m, S/m]."""
        if self.z_by_tower_ohm_per_m:
            return self.z_by_tower_ohm_per_m, self.y_by_tower_s_per_m
        return (self.z_by_position_ohm_per_m,), (self.y_by_position_s_per_m,)

    # Old names (relayset 0.2), one release.
    resistivity_ohm_m = alias("earth_resistivity_ohm_m", "resistivity_ohm_m")
    position_names = alias("positions", "position_names")
    z_position_ohm_per_m = alias("z_by_position_ohm_per_m", "z_position_ohm_per_m")
    y_position_s_per_m = alias("y_by_position_s_per_m", "y_position_s_per_m")

    def to_frame(self):
        """The parameters per circuit as a pandas DataFrame (per km, as the JSON)."""
        from relayset.frames import parameters_frame

        return parameters_frame(self)

    def to_dict(self) -> dict[str, Any]:
        return {
            "length_km": self.length_m / 1e3,
            "frequency_hz": self.frequency_hz,
            "earth_resistivity_ohm_m": self.earth_resistivity_ohm_m,
            "earth_model": self.earth_model,
            "nominal_voltage_kv": self.v_nominal_v / 1e3,
            "positions": list(self.positions),
            "phase_labels": [list(p) for p in self.phase_labels],
            "sections": [
                {"length_km": ln / 1e3, "order": list(o), **self._section_tower(k)}
                for k, (ln, o) in enumerate(zip(self.section_lengths_m, self.section_orders,
                                                strict=True))
            ],
            "conductors": [
                {
                    "name": c.name,
                    "description": c.description,
                    "r_ac_ohm_per_km": c.r_ac_ohm_per_m * PER_KM,
                    "gmr_mm": c.gmr_m * 1e3,
                    "outside_diameter_mm": 2e3 * c.radius_m,
                    "operating_temperature_c": c.operating_temperature_c,
                    "source": c.source,
                }
                for c in self.conductors
            ],
            "z_by_position_ohm_per_km": matrix(self.z_by_position_ohm_per_m, PER_KM),
            "circuits": [c.to_dict() for c in self.circuits],
            "k0m": None if self.k0m is None else polar(self.k0m),
            "arrangements": {k: a.to_dict() for k, a in self.arrangements.items()},
            "assumptions": list(self.assumptions),
            "wires": [w.to_dict() for w in self.wires],
            **({} if self.neighbour is None else {"neighbour": self.neighbour.to_dict()}),
            **({"neighbours": [nb.to_dict() for nb in self.corridor.neighbours]}
               if self.corridor is not None and len(self.corridor.neighbours) > 1 else {}),
            **({"cables": [c.to_dict() for c in self.cables]} if self.cables else {}),
        }
