"""The relay basis: the one Z1, k0 and k0m the relay is set with, and where each came from."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from relayset.results.serialize import cplx, polar


@dataclass(frozen=True)
class RelayBasis:
    """Relay ends and the line replica the reach study, the settings and the verification use.

    Resolved once per study: a value given in ``[relay]`` wins, otherwise the ideally
    transposed line's own value is used (``*_given`` says which).
    """

    ends: tuple[str, ...]  #: substations with a relay, in the study's from/to order
    z1_set_ohm: complex  #: line replica Z1 for the whole line [ohm]
    k0_set: complex  #: residual compensation factor (Z0 - Z1)/(3 Z1) [1]
    k0m_set: complex | None  #: mutual compensation factor Z0M/(3 Z1) (double circuit) [1]
    z1_given: bool
    k0_given: bool
    k0m_given: bool
    ct_ratio: float  #: primary/secondary [1]
    vt_ratio: float  #: primary/secondary [1]

    def to_dict(self) -> dict[str, Any]:
        return {
            "ends": list(self.ends),
            "z1_set_ohm": cplx(self.z1_set_ohm),
            "k0_set": polar(self.k0_set),
            "k0m_set": None if self.k0m_set is None else polar(self.k0m_set),
            "z1_from": "study file" if self.z1_given else "line parameters",
            "k0_from": "study file" if self.k0_given else "line parameters",
            "k0m_from": None if self.k0m_set is None
            else ("study file" if self.k0m_given else "line parameters"),
            "ct_ratio": self.ct_ratio,
            "vt_ratio": self.vt_ratio,
        }
