"""Settable values: the ideal settings rounded to a relay profile's steps.

One rule per setting, here (:data:`ROUNDING`): the direction it is rounded in and why.
The settings the verification judges are the rounded ones (applied once, where the settings
become final: :func:`relayset.studies.verification.closing.settle_and_verify`), so its
verdict is about what the relay will do. A rounded value outside the profile's range is a
failed setting-rule check naming the range (``within_profile_range``), never clamped.
"""

from __future__ import annotations

import cmath
import math
from dataclasses import dataclass, replace
from typing import Any

import numpy as np

from relayset.inputs.profile import ZONES, RelayProfile, SettingRange
from relayset.results.parameters import K0
from relayset.results.settings import Check, SettingsResult, ZoneSetting

_ZONE_NAMES = {"zone1": "zone 1", "zone2": "zone 2", "zone3": "zone 3",
               "reverse": "reverse zone"}


def _zone_rules(zone: str) -> dict[str, tuple[str, str]]:
    name = _ZONE_NAMES[zone]
    if zone in ("zone1", "reverse"):
        reach = ("down", f"{name} must not reach further than set: a shorter reach is the "
                 "safe side")
    else:
        reach = ("up", f"{name} must cover the whole line and its share beyond: coverage "
                 "governs, a longer reach is the safe side")
    blinder = ("down", "the load limits the resistive reach" + (
        " (and a narrower zone 1 blinder reaches less far for resistive faults at the "
        "remote bus)" if zone == "zone1" else ""))
    return {
        f"{zone}.reach": reach,
        f"{zone}.resistive_phase": blinder,
        f"{zone}.resistive_ground": blinder,
        f"{zone}.resistive_left_phase": blinder,
        f"{zone}.resistive_left_ground": blinder,
        f"{zone}.reactance_tilt": (
            ("up", "a steeper tilt shortens zone 1 for resistive faults at the remote bus")
            if zone == "zone1" else
            ("down", f"a flatter reactance line keeps {name}'s coverage of resistive faults")),
        f"{zone}.characteristic_angle": ("nearest", "no side is safer; the verification "
                                         "judges the circle as set"),
        f"{zone}.delay": ("up", "a later trip keeps the grading margin (0 s stays 0 s)"),
    }


_K0_DOWN = ("down", "less residual compensation makes the ground loops measure further, so "
            "zone 1 underreaches (its safe side); zones 2 and 3 have margin for one step")
_ANGLE = ("nearest", "no side is safer; the verification judges the angle as set")

#: The rounding rule of every setting: (direction, why). Directions: "down" toward zero,
#: "up" away from zero, "nearest", "check" (the study's value taken as it is; it must lie on
#: the grid and in range).
ROUNDING: dict[str, tuple[str, str]] = {
    **{k: v for z in ZONES for k, v in _zone_rules(z).items()},
    "k0.magnitude": _K0_DOWN,
    "k0.angle": _ANGLE,
    "k0.resistive": _K0_DOWN,
    "k0.reactive": _K0_DOWN,
    "k0.z0_z1_magnitude": _K0_DOWN,
    "k0.z0_z1_angle": _ANGLE,
    "min_operating_current": ("check", "the study's value, which the verification uses"),
}

#: Relative slack when a value already lies on the grid (binary noise must not move a step).
_ON_GRID = 1e-9


def round_to_step(value: float, step: float, direction: str) -> float:
    """``value`` on the grid of multiples of ``step`` [same unit], in ``direction``.

    "down" and "up" are toward and away from zero on the magnitude (a negative angle
    rounded "down" moves toward 0); "nearest" and "check" take the nearest multiple.
    """
    q = value / step
    n = round(q)
    if abs(q - n) <= _ON_GRID * max(1.0, abs(q)) or direction in ("nearest", "check"):
        return _clean(n * step)
    mag = abs(q)
    k = math.floor(mag) if direction == "down" else math.ceil(mag)
    return _clean(math.copysign(k * step, value))


def _clean(x: float) -> float:
    """A multiple of a decimal step without binary noise (0.35000000000000003 -> 0.35)."""
    return float(f"{x:.12g}")


@dataclass(frozen=True)
class SettableValue:
    """One setting: ideal, settable (on the profile's grid) and the rule [secondary unit]."""

    setting_id: str  #: stable identifier (:data:`relayset.inputs.profile.SETTING_UNITS`)
    label: str  #: the profile's label
    unit: str
    ideal: float
    settable: float
    #: the settable value in primary units (ohm settings divided by the secondary factor;
    #: others as secondary)
    primary: float
    min: float
    max: float
    step: float
    direction: str
    rule: str

    @property
    def in_range(self) -> bool:
        tol = _ON_GRID * max(1.0, abs(self.max), abs(self.min))
        return self.min - tol <= self.settable <= self.max + tol

    @property
    def on_grid(self) -> bool:
        """Whether the value is a multiple of the step (always, but for "check" values)."""
        q = self.settable / self.step
        return abs(q - round(q)) <= _ON_GRID * max(1.0, abs(q))

    @property
    def difference(self) -> float:
        return self.settable - self.ideal

    def to_dict(self) -> dict[str, Any]:
        return {"id": self.setting_id, "label": self.label, "unit": self.unit,
                "ideal": self.ideal, "settable": self.settable,
                "difference": self.difference, "primary": self.primary,
                "range": [self.min, self.max], "step": self.step,
                "direction": self.direction, "rule": self.rule, "in_range": self.in_range,
                "on_grid": self.on_grid}


@dataclass(frozen=True)
class SettableSettings:
    """The settable values of one relay end and the profile they follow."""

    profile_name: str  #: the profile's own name; with its SHA-256 it identifies the profile
    profile_sha256: str  #: (the file's path is the study's: input.relay.profile)
    residual_compensation: str
    values: tuple[SettableValue, ...]

    def value(self, setting_id: str) -> SettableValue:
        """The value of ``setting_id``."""
        for v in self.values:
            if v.setting_id == setting_id:
                return v
        raise KeyError(setting_id)

    def to_dict(self) -> dict[str, Any]:
        return {"profile": {"name": self.profile_name, "sha256": self.profile_sha256,
                            "residual_compensation": self.residual_compensation},
                "values": [v.to_dict() for v in self.values]}


class _Rounder:
    def __init__(self, profile: RelayProfile, factor: float):
        self.profile = profile
        self.factor = factor
        self.values: list[SettableValue] = []

    def __call__(self, sid: str, ideal: float, why: str, *, ohm: bool = False) -> float:
        rng: SettingRange = self.profile.setting(sid, why)
        direction, rule = ROUNDING[sid]
        v = ideal if direction == "check" else round_to_step(ideal, rng.step, direction)
        self.values.append(SettableValue(
            sid, rng.label, rng.unit, ideal, v, v / self.factor if ohm else v,
            rng.min, rng.max, rng.step, direction, rule))
        return v


def _zone(z: ZoneSetting, r: _Rounder, profile: RelayProfile, tilt_needed: bool,
          line_angle_rad: float) -> ZoneSetting:
    f = r.factor
    n = z.zone
    what = _ZONE_NAMES[n]
    if z.shape not in profile.characteristics:
        from relayset.errors import InputError

        raise InputError(f"the profile offers no {z.shape} characteristic, which {what} "
                         "uses", field="characteristics", value=list(profile.characteristics),
                         source=profile.source)
    if z.shape == "mho":
        d = r(f"{n}.reach", z.mho_diameter_secondary_ohm, f"{what}'s mho circle",
              ohm=True)
        ratio = d / z.mho_diameter_secondary_ohm
        ang = r(f"{n}.characteristic_angle", math.degrees(z.char_angle_rad),
                f"{what}'s mho circle")
        z = replace(z, mho_diameter_secondary_ohm=d, mho_diameter_primary_ohm=d / f,
                    char_angle_rad=math.radians(ang))
    else:
        x = r(f"{n}.reach", z.x_reach_secondary_ohm, f"{what}'s reactance line", ohm=True)
        ratio = x / z.x_reach_secondary_ohm
        rp = r(f"{n}.resistive_phase", z.r_reach_phase_secondary_ohm,
               f"{what}'s phase-loop blinder", ohm=True)
        rg = r(f"{n}.resistive_ground", z.r_reach_ground_secondary_ohm,
               f"{what}'s ground-loop blinder", ohm=True)
        upd: dict[str, Any] = {}
        for kind, left, right in (("phase", z.r_left_phase_primary_ohm,
                                   z.r_reach_phase_primary_ohm),
                                  ("ground", z.r_left_ground_primary_ohm,
                                   z.r_reach_ground_primary_ohm)):
            sid = f"{n}.resistive_left_{kind}"
            differs = left is not None and not math.isclose(left, right, rel_tol=1e-9)
            # a relay with a left blinder setting of its own is given it (equal to the right
            # one where the zone is symmetric): a file without it leaves the relay's old one
            if differs or sid in profile.settings:
                v = r(sid, (left if left is not None else right) * f,
                      f"{what}'s left blinder" + (" (it differs from the right one)"
                                                  if differs else ""), ohm=True)
                upd[f"r_left_{kind}_primary_ohm"] = v / f
        if profile.reactance_tilt or tilt_needed:
            if z.reactance_tilt_rad and not profile.reactance_tilt:
                from relayset.errors import InputError

                raise InputError(f"is false, but {what}'s reactance line is tilted "
                                 f"({math.degrees(z.reactance_tilt_rad):.4g}°)",
                                 field="reactance_tilt", value=False, source=profile.source)
            t = r(f"{n}.reactance_tilt", math.degrees(z.reactance_tilt_rad),
                  f"{what}'s tilted reactance line")
            upd["reactance_tilt_rad"] = math.radians(t)
        z = replace(z, x_reach_secondary_ohm=x, x_reach_primary_ohm=x / f,
                    r_reach_phase_secondary_ohm=rp, r_reach_phase_primary_ohm=rp / f,
                    r_reach_ground_secondary_ohm=rg, r_reach_ground_primary_ohm=rg / f,
                    **upd)
    delay = r(f"{n}.delay", z.delay_s, f"{what}'s timer")
    z = replace(z, delay_s=delay)
    # The reach the settable zone gives along the ideal target's direction: the target on
    # its boundary (t/s, s the zone's reach scale at t; exact for a circle through the
    # origin and a reactance line, both linear in the point).
    t = z.reach_primary_ohm
    s = float(z.reach_scale(np.array([t]), line_angle_rad)[0])
    k = 1 / s if math.isfinite(s) and s > 0 else ratio
    return replace(z, reach_primary_ohm=t * k, reach_secondary_ohm=t * k * f,
                   reach_pct=z.reach_pct * k)


def _k0(k0: K0, z1: complex, profile: RelayProfile, r: _Rounder) -> K0:
    """k0 in the profile's form, rounded, and its equivalent complex k0 (for the separate
    factors: the k0 that gives the same loop impedance for a fault at the line angle,
    (kr R1 + j kx X1)/Z1)."""
    why = f"the residual compensation ({profile.residual_compensation})"
    form = profile.residual_compensation
    if form == "magnitude_angle":
        m = r("k0.magnitude", abs(k0.k0), why)
        a = r("k0.angle", math.degrees(cmath.phase(k0.k0)), why)
        k = cmath.rect(m, math.radians(a))
    elif form == "resistive_reactive":
        kr = r("k0.resistive", k0.kr, why)
        kx = r("k0.reactive", k0.kx, why)
        k = (kr * z1.real + 1j * kx * z1.imag) / z1
    else:
        m = r("k0.z0_z1_magnitude", abs(k0.z0_over_z1), why)
        a = r("k0.z0_z1_angle", math.degrees(cmath.phase(k0.z0_over_z1)), why)
        k = (cmath.rect(m, math.radians(a)) - 1) / 3
    z0 = z1 * (1 + 3 * k)
    kr = (z0.real - z1.real) / (3 * z1.real)
    kx = (z0.imag - z1.imag) / (3 * z1.imag)
    return K0(k0=k, kr=float(kr), kx=float(kx), z0_over_z1=1 + 3 * k)


def settable_settings(st: SettingsResult, profile: RelayProfile,
                      min_operating_current_a: float, ct_secondary_a: float | None = None
                      ) -> SettingsResult:
    """``st`` with every setting on ``profile``'s grid, the values kept in ``settable``,
    and a failed ``within_profile_range`` check on a zone for each value out of range
    (k0 and the minimum operating current are checked on zone 1: they act on it first).

    ``ct_secondary_a`` is the CT's rated secondary current [A] where the study gives it; it
    must be the profile's nominal current.

    Raises
    ------
    InputError
        The profile lacks a setting or a shape the settings need, or its nominal current is
        not the CT's (named in the profile).
    """

    if ct_secondary_a is not None and not math.isclose(ct_secondary_a,
                                                       profile.nominal_current_a, rel_tol=1e-6):
        from relayset.errors import InputError

        raise InputError(f"does not match the {ct_secondary_a:g} A secondary of the CT at "
                         f"{st.end}", field="nominal_current",
                         value=f"{profile.nominal_current_a:g} A", source=profile.source)
    r = _Rounder(profile, st.secondary_factor)
    zones = [_zone(z, r, profile, tilt_needed=bool(z.reactance_tilt_rad),
                   line_angle_rad=st.line_angle_rad) for z in st.zones]
    k0 = _k0(st.k0, st.line_z1_primary_ohm, profile, r)
    r("min_operating_current", min_operating_current_a, "the minimum operating current")
    values = tuple(r.values)
    out = []
    for z in zones:
        mine = [v for v in values if v.setting_id.startswith(f"{z.zone}.")
                or (z.zone == "zone1" and "." not in v.setting_id)
                or (z.zone == "zone1" and v.setting_id.startswith("k0."))]
        bad = [v for v in mine if not (v.in_range and v.on_grid)]
        detail = ("every value on the profile's steps and within its range" if not bad
                  else "; ".join(
                      f"{v.setting_id} ({v.label}) = {v.settable:.6g} {v.unit} "
                      + (f"outside the range {v.min:g} to {v.max:g} {v.unit}" if not
                         v.in_range else f"not a multiple of the step {v.step:g} {v.unit}")
                      for v in bad))
        out.append(replace(z, checks=(*z.checks, Check("within_profile_range", not bad,
                                                       detail))))
    return replace(st, zones=tuple(out), k0=k0, settable=SettableSettings(
        profile.name, profile.sha256,
        profile.residual_compensation, values))
