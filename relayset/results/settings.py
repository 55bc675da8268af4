"""Settings results: zone reaches, characteristics, checks and warnings of one relay."""

from __future__ import annotations

import cmath
import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from relayset.physics.characteristic import Characteristic, Mho, Quadrilateral
from relayset.results.parameters import K0
from relayset.results.serialize import PER_KM, cplx, polar


@dataclass(frozen=True)
class Check:
    """One pass/fail check of a zone."""

    check_id: str
    passed: bool
    detail: str
    #: False: the check was not carried out or only states a value (printed "not judged",
    #: never "pass"); it does not count as failed
    judged: bool = True


@dataclass(frozen=True)
class SettingWarning:
    """Something the engineer should look at: a rule id, what happened, what to consider."""

    rule_id: str
    message: str
    consider: str


@dataclass(frozen=True)
class ZoneSetting:
    """One zone's reach, delay, characteristic and checks (impedances [ohm], angles [rad])."""

    zone: str  #: "zone1", "zone2", "zone3" or "reverse"
    direction: str
    rule: str
    reach_primary_ohm: complex
    reach_secondary_ohm: complex
    reach_pct: float
    delay_s: float
    shape: str
    infeed_factor: complex | None
    # mho
    char_angle_rad: float | None
    mho_diameter_primary_ohm: float | None
    mho_diameter_secondary_ohm: float | None
    # quadrilateral
    x_reach_primary_ohm: float | None
    x_reach_secondary_ohm: float | None
    r_reach_phase_primary_ohm: float | None
    r_reach_phase_secondary_ohm: float | None
    r_reach_ground_primary_ohm: float | None
    r_reach_ground_secondary_ohm: float | None
    arc_resistance_phase_ohm: float | None
    arc_resistance_ground_ohm: float | None
    # load
    load_reach_pct_of_min: float
    checks: tuple[Check, ...] = ()

    #: Reactance-line tilt τ of a quadrilateral [rad] (0 horizontal; positive tilts it down
    #: toward +R), see :class:`relayset.physics.characteristic.Quadrilateral`.
    reactance_tilt_rad: float = 0.0
    #: Angle δ of a quadrilateral's directional line [rad] (None: perpendicular to the line
    #: angle), see :class:`relayset.physics.characteristic.Quadrilateral`.
    directional_angle_rad: float | None = None
    #: Left blinder offsets of a quadrilateral, phase and ground loops [ohm primary] (None:
    #: the right blinder's), see :class:`relayset.physics.characteristic.Quadrilateral`.
    r_left_phase_primary_ohm: float | None = None
    r_left_ground_primary_ohm: float | None = None

    def characteristic(self, ground: bool, line_angle_rad: float) -> Characteristic:
        """This zone's characteristic as set, in primary ohms, for one kind of loop.

        Parameters
        ----------
        ground : bool
            True for the ground loops, False for the phase loops (a quadrilateral has a
            resistive reach for each; a mho circle is the same for both).
        line_angle_rad : float
            Line angle θ [rad]: the angle of a quadrilateral's blinders.

        Returns
        -------
        Mho or Quadrilateral
        """
        if self.shape == "mho":
            return Mho(self.mho_diameter_primary_ohm, self.char_angle_rad, self.direction)
        r = self.r_reach_ground_primary_ohm if ground else self.r_reach_phase_primary_ohm
        left = self.r_left_ground_primary_ohm if ground else self.r_left_phase_primary_ohm
        return Quadrilateral(self.x_reach_primary_ohm, r, line_angle_rad, r_left_ohm=left,
                             direction=self.direction, tilt_rad=self.reactance_tilt_rad,
                             directional_angle_rad=self.directional_angle_rad)

    def contains(self, z_primary_ohm: complex | np.ndarray, line_angle_rad: float) -> np.ndarray:
        """Whether primary impedances lie inside this zone for either kind of loop [ohm]."""
        return (self.characteristic(False, line_angle_rad).contains(z_primary_ohm)
                | self.characteristic(True, line_angle_rad).contains(z_primary_ohm))

    def reach_scale(self, z_primary_ohm: complex | np.ndarray, line_angle_rad: float
                    ) -> np.ndarray:
        """Reach scale [1] of primary impedances [ohm] for whichever kind of loop (phase or
        ground) reaches them first (``Characteristic.reach_scale``).
        """
        return np.minimum(self.characteristic(False, line_angle_rad).reach_scale(z_primary_ohm),
                          self.characteristic(True, line_angle_rad).reach_scale(z_primary_ohm))

    def region(self, line_angle_rad: float) -> dict[str, Any]:
        """Neutral JSON geometry of the phase- and ground-loop characteristics [ohm]."""
        return {"phase_loops": self.characteristic(False, line_angle_rad).region(),
                "ground_loops": self.characteristic(True, line_angle_rad).region()}


def _left(left: float | None, right: float | None) -> float | None:
    """A quadrilateral's left blinder offset as set (the right one unless given) [ohm]."""
    return right if left is None else left


@dataclass(frozen=True)
class LoadCheck:
    """Minimum load impedance [ohm] and the limits used."""

    z_min_primary_ohm: float
    z_min_secondary_ohm: float
    load_angle_max_rad: float
    encroachment_limit_pct: float
    r_limit_primary_ohm: float | None


@dataclass(frozen=True)
class SourceEnd:
    """SIR and IEEE Std C37.113 line class at one end."""

    end: str  #: substation name
    z_source_ohm: complex
    sir: float
    line_class: str
    role: str = "relay"  #: "relay" (behind the relay) or "remote"


#: The supervision criterion the relay model applies (relay_model.view) and the settings issue.
MUTUAL_SUPERVISION_CRITERION = (
    "k0m added to the ground loops only while the protected circuit's residual current is "
    "at least the parallel circuit's")


@dataclass(frozen=True)
class MutualSupervision:
    """Mutual-compensation supervision as issued (``relay.mutual_compensation_supervision``)."""

    on: bool

    @property
    def criterion(self) -> str:
        return MUTUAL_SUPERVISION_CRITERION if self.on else "k0m added in every case"

    def to_dict(self) -> dict[str, Any]:
        return {"on": self.on, "criterion": self.criterion}


@dataclass(frozen=True)
class SettingsResult:
    """Computed distance-zone settings of the relay at one line end."""

    end: str  #: the relay's substation
    remote_end: str
    line_z1_primary_ohm: complex
    line_z1_secondary_ohm: complex
    line_angle_rad: float
    length_m: float
    secondary_factor: float
    zones: tuple[ZoneSetting, ...]
    k0: K0
    k0m: complex | None
    load: LoadCheck
    sources: tuple[SourceEnd, ...]
    arc_current_a: float | None
    warnings: tuple[SettingWarning, ...] = field(default=())
    #: supervision of mutual compensation, issued with k0m (None: no mutual compensation)
    mutual_supervision: MutualSupervision | None = None
    #: the values on the relay profile's steps, ideal beside settable (None: no profile;
    #: a :class:`relayset.settings.settable.SettableSettings`). With a profile the zones
    #: and k0 above are the settable ones, which the verification judges.
    settable: Any = None

    def zone(self, name: str) -> ZoneSetting:
        """The zone called ``"zone1"``, ``"zone2"``, ``"zone3"`` or ``"reverse"``."""
        for z in self.zones:
            if z.zone == name:
                return z
        raise KeyError(name)

    def warning_ids(self) -> list[str]:
        """The rule ids of the warnings, in order."""
        return [w.rule_id for w in self.warnings]

    def to_frame(self):
        """The zone settings, primary and secondary, a pandas DataFrame."""
        from relayset.frames import settings_frame

        return settings_frame(self)

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready nested data (the conventions of :mod:`relayset.results.serialize`)."""
        zones = {}
        for z in self.zones:
            zones[z.zone] = {
                "direction": z.direction,
                "rule": z.rule,
                "reach_primary_ohm": cplx(z.reach_primary_ohm),
                "reach_primary_magnitude_ohm": abs(z.reach_primary_ohm),
                "reach_secondary_ohm": cplx(z.reach_secondary_ohm),
                "reach_secondary_magnitude_ohm": abs(z.reach_secondary_ohm),
                "reach_angle_deg": math.degrees(cmath.phase(z.reach_primary_ohm)),
                "reach_pct": z.reach_pct,
                "delay_s": z.delay_s,
                "shape": z.shape,
                "infeed_factor": None if z.infeed_factor is None else cplx(z.infeed_factor),
                "char_angle_deg": _deg(z.char_angle_rad),
                "mho_diameter_primary_ohm": z.mho_diameter_primary_ohm,
                "mho_diameter_secondary_ohm": z.mho_diameter_secondary_ohm,
                "x_reach_primary_ohm": z.x_reach_primary_ohm,
                "x_reach_secondary_ohm": z.x_reach_secondary_ohm,
                "r_left_phase_primary_ohm": _left(z.r_left_phase_primary_ohm,
                                                  z.r_reach_phase_primary_ohm),
                "r_left_ground_primary_ohm": _left(z.r_left_ground_primary_ohm,
                                                   z.r_reach_ground_primary_ohm),
                "reactance_tilt_deg": (math.degrees(z.reactance_tilt_rad)
                                       if z.shape == "quadrilateral" else None),
                "directional_angle_deg": _deg(z.directional_angle_rad),
                "r_reach_phase_primary_ohm": z.r_reach_phase_primary_ohm,
                "r_reach_phase_secondary_ohm": z.r_reach_phase_secondary_ohm,
                "r_reach_ground_primary_ohm": z.r_reach_ground_primary_ohm,
                "r_reach_ground_secondary_ohm": z.r_reach_ground_secondary_ohm,
                "arc_resistance_phase_ohm": z.arc_resistance_phase_ohm,
                "arc_resistance_ground_ohm": z.arc_resistance_ground_ohm,
                "region_primary_ohm": z.region(self.line_angle_rad),
                "load_reach_pct_of_min": z.load_reach_pct_of_min,
                "checks": [
                    {"check_id": c.check_id, "passed": c.passed, "detail": c.detail}
                    for c in z.checks
                ],
            }
        out = {
            "end": self.end,
            "remote_end": self.remote_end,
            "line": {
                "z1_primary_ohm": cplx(self.line_z1_primary_ohm),
                "z1_secondary_ohm": cplx(self.line_z1_secondary_ohm),
                "angle_deg": math.degrees(self.line_angle_rad),
                "length_km": self.length_m / PER_KM,
                "secondary_factor": self.secondary_factor,
            },
            "k0": self.k0.to_dict(),
            "k0m": None if self.k0m is None else polar(self.k0m),
            "mutual_compensation_supervision": None if self.mutual_supervision is None
            else self.mutual_supervision.to_dict(),
            "load": {
                "z_min_primary_ohm": self.load.z_min_primary_ohm,
                "z_min_secondary_ohm": self.load.z_min_secondary_ohm,
                "load_angle_max_deg": math.degrees(self.load.load_angle_max_rad),
                "encroachment_limit_pct": self.load.encroachment_limit_pct,
                "r_limit_primary_ohm": self.load.r_limit_primary_ohm,
            },
            "sources": [
                {"end": s.end, "role": s.role, "z_source_ohm": cplx(s.z_source_ohm),
                 "sir": s.sir, "line_class": s.line_class}
                for s in self.sources
            ],
            "arc_current_a": self.arc_current_a,
            "zones": zones,
            "warnings": [
                {"rule_id": w.rule_id, "message": w.message, "consider": w.consider}
                for w in self.warnings
            ],
        }
        if self.settable is not None:  # only with a relay profile (older results unchanged)
            out["settable"] = self.settable.to_dict()
        return out


def _deg(x: float | None) -> float | None:
    return None if x is None else math.degrees(x)
