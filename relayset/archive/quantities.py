"""The named quantities of a results JSON that verify and compare report one by one."""

from __future__ import annotations

import math
from typing import Any

ZONES = ("zone1", "zone2", "zone3", "reverse")


class ShapeError(ValueError):
    """A results JSON whose keys are not of the types relayset writes."""

    def __init__(self, where: str, rule: str):
        self.where, self.rule = where, rule
        super().__init__(f"{where}: {rule}")


def _table(d: dict[str, Any], key: str, where: str) -> dict[str, Any]:
    """``d[key]`` as a table: absent or null is empty, another type is a ShapeError."""
    v = d.get(key)
    if v is None:
        return {}
    if not isinstance(v, dict):
        raise ShapeError(f"{where}{key}", "must be an object")
    return v


def _rows(d: dict[str, Any], key: str, where: str) -> list[dict[str, Any]]:
    """``d[key]`` as a list of tables: absent or null is empty, another type a ShapeError."""
    v = d.get(key)
    if v is None:
        return []
    if not isinstance(v, list):
        raise ShapeError(f"{where}{key}", "must be an array")
    for i, row in enumerate(v):
        if not isinstance(row, dict):
            raise ShapeError(f"{where}{key}[{i}]", "must be an object")
    return v


def _end(e: dict[str, Any], where: str) -> str:
    if not isinstance(e.get("end"), str):
        raise ShapeError(f"{where}.end", "must be a text (the end's name)")
    return e["end"]


def _real(v: Any) -> bool:
    return isinstance(v, int | float) and not isinstance(v, bool)


def _num(v: Any) -> float | complex | None:
    if isinstance(v, bool) or v is None:
        return None
    if isinstance(v, int | float):
        return float(v)
    if isinstance(v, list | tuple) and len(v) == 2 and all(_real(x) for x in v):
        return complex(v[0], v[1])
    if isinstance(v, dict) and _real(v.get("magnitude")) and _real(v.get("angle_deg")):
        return _num([v["magnitude"] * math.cos(math.radians(v["angle_deg"])),
                     v["magnitude"] * math.sin(math.radians(v["angle_deg"]))])
    return None


def results_quantities(d: dict[str, Any]) -> list[tuple[str, str, float | complex | None]]:
    """(section, name with unit, value) of the key results and settings of a results JSON.

    Raises
    ------
    ShapeError
        A table, list or end name read here is of another type (a value that is not a
        number is read as missing).
    """
    out: list[tuple[str, str, float | complex | None]] = []
    for k, c in enumerate(_rows(_table(d, "parameters", ""), "circuits", "parameters.")):
        name = f"circuit {k + 1}"
        for key, label in (("z1_ohm", "Z1 [ohm]"), ("z0_ohm", "Z0 [ohm]"),
                           ("z1_ohm_per_km", "Z1 [ohm/km]"), ("z0_ohm_per_km", "Z0 [ohm/km]"),
                           ("c1_nf_per_km", "C1 [nF/km]"), ("c0_nf_per_km", "C0 [nF/km]"),
                           ("charging_current_a", "charging current [A]"),
                           ("surge_impedance_ohm", "surge impedance [ohm]")):
            out.append(("results", f"{name} {label}", _num(c.get(key))))
        k0 = _table(c, "k0", f"parameters.circuits[{k}].")
        out.append(("results", f"{name} k0 [-]", _num(k0.get("k0"))))
    where = "reach_study.ends"
    for i, e in enumerate(_rows(_table(d, "reach_study", ""), "ends", "reach_study.")):
        end = _end(e, f"{where}[{i}]")
        out.append(("results", f"{end} recommended zone 1 [%]",
                    _num(e.get("recommended_zone1_pct"))))
        case = _table(e, "governing_case", f"{where}[{i}].")
        out.append(("results", f"{end} worst overreach at remote bus [%]",
                    _num(case.get("error_pct"))))
    where = "settings.ends"
    for i, e in enumerate(_rows(_table(d, "settings", ""), "ends", "settings.")):
        at = f"{where}[{i}]."
        end = _end(e, at[:-1])
        out.append(("settings", f"{end} line Z1 secondary [ohm]",
                    _num(_table(e, "line", at).get("z1_secondary_ohm"))))
        out.append(("settings", f"{end} k0 [-]", _num(_table(e, "k0", at).get("k0"))))
        zones = _table(e, "zones", at)
        for z in ZONES:
            zone = _table(zones, z, f"{at}zones.")
            for key, label in (("reach_primary_ohm", "reach primary [ohm]"),
                               ("reach_secondary_ohm", "reach secondary [ohm]"),
                               ("reach_pct", "reach [% of line]"), ("delay_s", "delay [s]"),
                               ("r_reach_ground_secondary_ohm",
                                "resistive reach, ground, secondary [ohm]"),
                               ("r_reach_phase_secondary_ohm",
                                "resistive reach, phase, secondary [ohm]")):
                if zone.get(key) is not None:
                    out.append(("settings", f"{end} {z} {label}", _num(zone.get(key))))
        warnings = e.get("warnings", [])
        if not isinstance(warnings, list):
            raise ShapeError(f"{at}warnings", "must be an array")
        out.append(("settings", f"{end} warnings [count]", float(len(warnings))))
    where = "teed.ends"  # a three-terminal line's zones (relayset.results.teed)
    for i, e in enumerate(_rows(_table(d, "teed", ""), "ends", "teed.")):
        end = _end(e, f"{where}[{i}]")
        for z in ("zone1", "zone2"):
            out.append(("settings", f"{end} {z} reach primary [ohm]", _num(e.get(f"{z}_ohm"))))
            out.append(("settings", f"{end} {z} reach secondary [ohm]",
                        _num(e.get(f"{z}_secondary_ohm"))))
    return out


#: The study identity keys compare prints (change table and change sheet).
STUDY_KEYS = ("line_id", "title", "revision", "revision_date", "status", "prepared_by",
              "checked_by", "approved_by")


def check_results_shape(d: dict[str, Any]) -> None:
    """Every table, list and key verify and compare read from a results JSON is of the type
    relayset writes (:class:`ShapeError` naming the first that is not)."""
    import datetime as dt

    results_quantities(d)
    for key in ("input", "verification", "philosophy", "relay"):
        _table(d, key, "")
    study = d.get("study")
    if not isinstance(study, dict):
        raise ShapeError("study", "must be an object (the study's identity)")
    for key in STUDY_KEYS:
        v = study.get(key)
        if v is not None and not isinstance(v, str | int | float):
            raise ShapeError(f"study.{key}", "must be a text")
    rev = study.get("revision_date")
    if rev:
        try:
            dt.date.fromisoformat(str(rev))
        except ValueError:
            raise ShapeError("study.revision_date", "must be a date (YYYY-MM-DD)") from None


def nesting_depth(obj: Any) -> int:
    """How deep lists and dicts are nested in ``obj`` (a scalar is 0), without recursion."""
    deepest, stack = 0, [(obj, 1)]
    while stack:
        x, depth = stack.pop()
        if isinstance(x, dict | list):
            deepest = max(deepest, depth)
            stack.extend((v, depth + 1) for v in (x.values() if isinstance(x, dict) else x))
    return deepest


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
