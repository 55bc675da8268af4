"""The named quantities of a results JSON that verify and compare report one by one."""

from __future__ import annotations

import math
from typing import Any

ZONES = ("zone1", "zone2", "zone3", "reverse")


def _num(v: Any) -> float | complex | None:
    if isinstance(v, bool) or v is None:
        return None
    if isinstance(v, int | float):
        return float(v)
    if isinstance(v, list | tuple) and len(v) == 2 and all(
            isinstance(x, int | float) for x in v):
        return complex(v[0], v[1])
    if isinstance(v, dict) and "magnitude" in v and "angle_deg" in v:
        return _num([v["magnitude"] * math.cos(math.radians(v["angle_deg"])),
                     v["magnitude"] * math.sin(math.radians(v["angle_deg"]))])
    return None


def results_quantities(d: dict[str, Any]) -> list[tuple[str, str, float | complex | None]]:
    """(section, name with unit, value) of the key results and settings of a results JSON."""
    out: list[tuple[str, str, float | complex | None]] = []
    for k, c in enumerate(d.get("parameters", {}).get("circuits", [])):
        name = f"circuit {k + 1}"
        for key, label in (("z1_ohm", "Z1 [ohm]"), ("z0_ohm", "Z0 [ohm]"),
                           ("z1_ohm_per_km", "Z1 [ohm/km]"), ("z0_ohm_per_km", "Z0 [ohm/km]"),
                           ("c1_nf_per_km", "C1 [nF/km]"), ("c0_nf_per_km", "C0 [nF/km]"),
                           ("charging_current_a", "charging current [A]"),
                           ("surge_impedance_ohm", "surge impedance [ohm]")):
            out.append(("results", f"{name} {label}", _num(c.get(key))))
        out.append(("results", f"{name} k0 [-]", _num((c.get("k0") or {}).get("k0"))))
    for e in (d.get("reach_study") or {}).get("ends", []):
        out.append(("results", f"{e['end']} recommended zone 1 [%]",
                    _num(e.get("recommended_zone1_pct"))))
        out.append(("results", f"{e['end']} worst overreach at remote bus [%]",
                    _num((e.get("governing_case") or {}).get("error_pct"))))
    for e in (d.get("settings") or {}).get("ends", []):
        end = e["end"]
        out.append(("settings", f"{end} line Z1 secondary [ohm]",
                    _num(e.get("line", {}).get("z1_secondary_ohm"))))
        out.append(("settings", f"{end} k0 [-]", _num((e.get("k0") or {}).get("k0"))))
        for z in ZONES:
            zone = e.get("zones", {}).get(z)
            if not zone:
                continue
            for key, label in (("reach_primary_ohm", "reach primary [ohm]"),
                               ("reach_secondary_ohm", "reach secondary [ohm]"),
                               ("reach_pct", "reach [% of line]"), ("delay_s", "delay [s]"),
                               ("r_reach_ground_secondary_ohm",
                                "resistive reach, ground, secondary [ohm]"),
                               ("r_reach_phase_secondary_ohm",
                                "resistive reach, phase, secondary [ohm]")):
                if zone.get(key) is not None:
                    out.append(("settings", f"{end} {z} {label}", _num(zone.get(key))))
        out.append(("settings", f"{end} warnings [count]",
                    float(len(e.get("warnings", [])))))
    return out


def numeric_leaves(obj: Any, prefix: str = "") -> dict[str, Any]:
    """Every leaf of a JSON tree by its path (``a.b[2].c``)."""
    out: dict[str, Any] = {}
    if isinstance(obj, dict):
        for k, v in obj.items():
            out.update(numeric_leaves(v, f"{prefix}.{k}" if prefix else str(k)))
    elif isinstance(obj, list):
        for i, v in enumerate(obj):
            out.update(numeric_leaves(v, f"{prefix}[{i}]"))
    else:
        out[prefix] = obj
    return out


def close(a: Any, b: Any, rtol: float, atol: float) -> bool:
    """Equal within ``|a - b| <= atol + rtol |b|`` for numbers; equal otherwise."""
    if isinstance(a, bool) or isinstance(b, bool) or not (
            isinstance(a, int | float | complex) and isinstance(b, int | float | complex)):
        return a == b
    return abs(a - b) <= atol + rtol * abs(b)


def pct_change(old: Any, new: Any) -> float | None:
    """Percent change of the magnitude, new against old [%] (None when not defined)."""
    if not isinstance(old, int | float | complex) or not isinstance(new, int | float | complex):
        return None
    if isinstance(old, bool) or isinstance(new, bool) or abs(old) == 0:
        return None
    return (abs(new) - abs(old)) / abs(old) * 100.0
