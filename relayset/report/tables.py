"""Tables for every renderer (console, CSV, report): labels and units live here, numbers come
from the results model unchanged."""

from __future__ import annotations

import cmath
import math

from relayset.results.settings import SettingsResult
from relayset.results.teed import TeedEndSettings
from relayset.settings.context import ZONE_LABELS


def teed_rows(e: TeedEndSettings) -> list[tuple[str, float | str, str]]:
    """One relay end of a three-terminal line: its zone 1 and zone 2 (reach on the line
    angle, shape) as (name, value, unit) rows, the names of :func:`settings_rows`."""
    rows: list[tuple[str, float | str, str]] = []
    for zone, pri, sec in (("zone1", e.zone1_ohm, e.zone1_secondary_ohm),
                           ("zone2", e.zone2_ohm, e.zone2_secondary_ohm)):
        n = ZONE_LABELS[zone]
        rows += [(f"{n} reach, primary", abs(pri), "Ω"),
                 (f"{n} reach, secondary", abs(sec), "Ω"),
                 (f"{n} reach angle", math.degrees(cmath.phase(pri)), "°"),
                 (f"{n} shape", "mho" if e.settings is None else e.settings.zone(zone).shape,
                  "")]
    return rows


def settings_rows(t: SettingsResult) -> list[tuple[str, float | str, str]]:
    """One relay end's settings as (name, value, unit) rows, descriptive and vendor-neutral."""
    ohm, deg = "Ω", "°"
    k = t.k0
    rows: list[tuple[str, float | str, str]] = [
        ("Line positive-sequence impedance, primary", abs(t.line_z1_primary_ohm), ohm),
        ("Line positive-sequence impedance, secondary", abs(t.line_z1_secondary_ohm), ohm),
        ("Line angle", math.degrees(t.line_angle_rad), deg),
        ("Residual compensation factor k0, magnitude", abs(k.k0), ""),
        ("Residual compensation factor k0, angle", math.degrees(cmath.phase(k.k0)), deg),
        ("Residual compensation, resistive part (R0−R1)/(3R1)", k.kr, ""),
        ("Residual compensation, reactive part (X0−X1)/(3X1)", k.kx, ""),
        ("Zero- to positive-sequence ratio Z0/Z1, magnitude", abs(k.z0_over_z1), ""),
        ("Zero- to positive-sequence ratio Z0/Z1, angle",
         math.degrees(cmath.phase(k.z0_over_z1)), deg),
    ]
    if t.k0m is not None:
        rows += [
            ("Mutual compensation factor k0m, magnitude", abs(t.k0m), ""),
            ("Mutual compensation factor k0m, angle", math.degrees(cmath.phase(t.k0m)),
             deg),
        ]
    if t.mutual_supervision is not None:
        rows += [
            ("Mutual compensation supervision", "on" if t.mutual_supervision.on else "off", ""),
            ("Mutual compensation supervision criterion", t.mutual_supervision.criterion, ""),
        ]
    for z in t.zones:
        n = ZONE_LABELS[z.zone]
        rows += [
            (f"{n} direction", z.direction, ""),
            (f"{n} reach, primary", abs(z.reach_primary_ohm), ohm),
            (f"{n} reach, secondary", abs(z.reach_secondary_ohm), ohm),
            (f"{n} reach angle", math.degrees(cmath.phase(z.reach_primary_ohm)), deg),
            (f"{n} reach, percent of line", z.reach_pct, "%"),
            (f"{n} time delay", z.delay_s, "s"),
        ]
        if z.shape == "mho":
            rows += [
                (f"{n} mho diameter, primary", z.mho_diameter_primary_ohm, ohm),
                (f"{n} mho diameter, secondary", z.mho_diameter_secondary_ohm, ohm),
                (f"{n} mho characteristic angle", math.degrees(z.char_angle_rad), deg),
            ]
        else:
            rows += [
                (f"{n} reactive reach, primary", z.x_reach_primary_ohm, ohm),
                (f"{n} reactive reach, secondary", z.x_reach_secondary_ohm, ohm),
                (f"{n} resistive reach, phase loops, primary", z.r_reach_phase_primary_ohm,
                 ohm),
                (f"{n} resistive reach, phase loops, secondary",
                 z.r_reach_phase_secondary_ohm, ohm),
                (f"{n} resistive reach, ground loops, primary",
                 z.r_reach_ground_primary_ohm, ohm),
                (f"{n} resistive reach, ground loops, secondary",
                 z.r_reach_ground_secondary_ohm, ohm),
                (f"{n} left resistive reach, phase loops, primary",
                 z.characteristic(False, t.line_angle_rad).r_left, ohm),
                (f"{n} left resistive reach, ground loops, primary",
                 z.characteristic(True, t.line_angle_rad).r_left, ohm),
                (f"{n} resistive blinder angle", math.degrees(t.line_angle_rad), deg),
                (f"{n} reactance line tilt", math.degrees(z.reactance_tilt_rad), deg),
                (f"{n} directional line angle",
                 math.degrees(t.line_angle_rad - math.pi / 2 if z.directional_angle_rad is None
                              else z.directional_angle_rad), deg),
            ]
    rows += [
        ("Minimum load impedance, primary", t.load.z_min_primary_ohm, ohm),
        ("Minimum load impedance, secondary", t.load.z_min_secondary_ohm, ohm),
        ("Maximum load angle", math.degrees(t.load.load_angle_max_rad), deg),
    ]
    for s in t.sources:
        rows += [
            (f"Source-to-line impedance ratio (SIR), {s.role} end ({s.end})", s.sir, ""),
            (f"Line class by SIR (IEEE Std C37.113), {s.role} end ({s.end})", s.line_class, ""),
        ]
    return rows
