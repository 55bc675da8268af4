"""Results of shared corridors: each neighbouring line's coupling with the protected line."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from relayset.results.serialize import PER_KM, cplx, matrix, polar


@dataclass(frozen=True)
class NeighbourParameters:
    """A neighbouring line beside the protected line over part of its route.

    The matrices by position hold the protected line's three positions, then the
    neighbour's phases A, B, C, on the corridor's cross-section (one per tower of the
    shared stretch, in the order of ``tower_names``).
    """

    name: str
    buses: tuple[str, str]
    on_line_bus: tuple[bool, bool]  #: its bus at that side is the protected line's
    start_m: float
    end_m: float
    route_lengths_m: tuple[float, float]
    #: per tower of the shared stretch (index into LineParameters.tower_matrices())
    towers: tuple[int, ...]
    z_by_position_ohm_per_m: tuple[np.ndarray, ...]  #: (6, 6) per tower
    y_by_position_s_per_m: tuple[np.ndarray, ...]
    z1_ohm_per_m: complex  #: the neighbour's own Z1 in the corridor (length-weighted)
    z0_ohm_per_m: complex
    #: zero-sequence mutual impedance with the protected line in the corridor
    z0m_ohm_per_m: complex
    route_z1_ohm_per_m: complex  #: of its routes outside the corridor
    route_z0_ohm_per_m: complex
    #: Z0M over the shared length / (3 Z1 of the whole protected line): the mutual
    #: compensation a relay measuring the neighbour's residual current would need
    k0m_equivalent: complex
    #: Z0M over the shared length / Z0 of the whole protected line: the share of the
    #: ground loop's zero-sequence impedance the coupling can add or take away
    coupling_ratio: complex

    @property
    def shared_length_m(self) -> float:
        """Length of the shared stretch [m]."""
        return self.end_m - self.start_m

    def to_dict(self) -> dict[str, Any]:
        return {
            "name": self.name,
            "buses": list(self.buses),
            "on_protected_line_bus": list(self.on_line_bus),
            "shared_from_km": self.start_m / 1e3,
            "shared_to_km": self.end_m / 1e3,
            "shared_length_km": self.shared_length_m / 1e3,
            "route_lengths_km": [x / 1e3 for x in self.route_lengths_m],
            "z1_ohm_per_km": cplx(self.z1_ohm_per_m, PER_KM),
            "z0_ohm_per_km": cplx(self.z0_ohm_per_m, PER_KM),
            "z0m_ohm_per_km": cplx(self.z0m_ohm_per_m, PER_KM),
            "route_z1_ohm_per_km": cplx(self.route_z1_ohm_per_m, PER_KM),
            "route_z0_ohm_per_km": cplx(self.route_z0_ohm_per_m, PER_KM),
            "k0m_equivalent": polar(self.k0m_equivalent),
            "coupling_ratio": polar(self.coupling_ratio),
            "relay_given_k0m": False,
            "z_by_position_ohm_per_km": [matrix(z, PER_KM)
                                         for z in self.z_by_position_ohm_per_m],
        }


@dataclass(frozen=True)
class CorridorParameters:
    """Every neighbouring line of the study and the corridor's matrices.

    ``joint`` holds, per (tower index, neighbours present beside it), the series impedance
    [ohm/m] and shunt admittance [S/m] matrices by position of the protected line's
    positions and then every neighbour's phases A, B, C in the study's order (rows and
    columns of a neighbour not present zero): the cascade's pieces
    (:func:`relayset.studies.corridor.corridor_cascade`).
    """

    neighbours: tuple[NeighbourParameters, ...]
    joint: dict[tuple[int, tuple[int, ...]], tuple[np.ndarray, np.ndarray]]
