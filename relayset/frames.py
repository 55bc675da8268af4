"""pandas DataFrames of the results: one table per kind of result, named as the JSON is.

Every frame reads the results objects (:mod:`relayset.results`) through their JSON form
(``to_dict()``), so a frame and the JSON export hold the same numbers; its columns are
the JSON's keys with their units (``z1_ohm_per_km``, ``reach_secondary_ohm``,
``location_pct``), a nested JSON key joined with dots (``governing_case.fault_type``).
Where the JSON writes a complex number as ``[re, im]`` or ``{magnitude, angle_deg}``, the
frame holds it as a complex number. pandas is imported only when a frame is made.

:func:`frames` gives every frame of a study by name; each part of the results also has its
own ``to_frame()``.
"""

from __future__ import annotations

import cmath
import math
from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:
    import pandas as pd

    from relayset.results.parameters import LineParameters
    from relayset.results.reach import ArrangementReach, EndReach, ReachStudyResult
    from relayset.results.settings import SettingsResult
    from relayset.results.study import StudyResults
    from relayset.results.verification import VerificationResult

__all__ = ["envelope_frame", "frames", "parameters_frame", "reach_errors_frame",
           "setting_checks_frame", "settings_frame", "verification_checks_frame", "warnings_frame",
           "worst_cases_frame"]

def _frame(rows: list[dict[str, Any]], columns: list[str] | None = None) -> pd.DataFrame:
    import pandas as pd

    return pd.DataFrame(rows, columns=columns)


def _value(v: Any) -> Any:
    """A JSON value as a frame holds it: [re, im] and {magnitude, angle_deg} as complex."""
    if isinstance(v, dict) and set(v) == {"magnitude", "angle_deg"}:
        return cmath.rect(v["magnitude"], math.radians(v["angle_deg"]))
    if (isinstance(v, list) and len(v) == 2
            and all(isinstance(x, int | float) and not isinstance(x, bool) for x in v)):
        return complex(v[0], v[1])
    return v


def _flat(d: dict[str, Any], prefix: str = "", skip: tuple[str, ...] = ()) -> dict[str, Any]:
    """One row from a JSON object: nested objects joined with dots, complex values as
    complex numbers. The JSON (``to_dict``) is the one source of every number here."""
    out: dict[str, Any] = {}
    for k, v in d.items():
        if k in skip:
            continue
        v = _value(v)
        if isinstance(v, dict):
            out.update(_flat(v, f"{prefix}{k}."))
        else:
            out[f"{prefix}{k}"] = v
    return out


def parameters_frame(params: LineParameters) -> pd.DataFrame:
    """The line parameters per circuit (the JSON's ``parameters.circuits[]``), per km."""
    d = params.to_dict()
    basis = {k: d[k] for k in ("length_km", "earth_resistivity_ohm_m", "frequency_hz")}
    return _frame([{**_flat(c), **basis} for c in d["circuits"]])


def _arrangement_keys(end: str, a: dict[str, Any]) -> dict[str, Any]:
    keys = {"end": end, "arrangement": a["arrangement"], "solved_as": a["solved_as"],
            "mutual_compensation": a["mutual_compensation"]}
    if "neighbour_state" in a:  # a shared corridor: the neighbouring line's state
        keys["neighbour_state"] = a["neighbour_state"]
    return keys


def _with_state(columns: list[str], reach) -> list[str]:
    """The columns, with the neighbouring line's state after the arrangement's keys when the
    study has a shared corridor."""
    if getattr(reach, "neighbour", None) is None:
        return columns
    k = columns.index("mutual_compensation") + 1
    return [*columns[:k], "neighbour_state", *columns[k:]]


_ENVELOPE_KEYS = ["end", "arrangement", "solved_as", "mutual_compensation"]
_ENVELOPE_COLUMNS = ["loop", "location_pct", "bolted_reach_error_max_pct",
                     "bolted_reach_error_min_pct"]


def _envelope_rows(a: dict[str, Any], keys: dict[str, Any]) -> list[dict[str, Any]]:
    env = a["envelope"]
    return [{**keys, "loop": loop, "location_pct": x,
             "bolted_reach_error_max_pct": env["bolted_reach_error_max_pct"][i][j],
             "bolted_reach_error_min_pct": env["bolted_reach_error_min_pct"][i][j]}
            for i, loop in enumerate(env["loops"]) for j, x in enumerate(env["location_pct"])]


def reach_errors_frame(reach: ReachStudyResult) -> pd.DataFrame:
    """The bolted reach error along the line per end, arrangement, loop and location: the
    JSON's ``reach_study.ends[].arrangements[].envelope`` in long form (one row per point).
    """
    rows = []
    for end in reach.ends:
        for a in end.to_dict()["arrangements"]:
            rows.extend(_envelope_rows(a, _arrangement_keys(end.end, a)))
    return _frame(rows, _with_state([*_ENVELOPE_KEYS, *_ENVELOPE_COLUMNS], reach))


def envelope_frame(arrangement: ArrangementReach) -> pd.DataFrame:
    """One arrangement's bolted reach error along the line per loop (long form)."""
    return _frame(_envelope_rows(arrangement.to_dict(), {}), _ENVELOPE_COLUMNS)


_WORST_COLUMNS = [*_ENVELOPE_KEYS, "loop", "extreme", "error_pct", "fault_type",
                  "location_pct", "r_fault_ohm", "source_case", "transfer_angle_deg",
                  "positions"]


def worst_cases_frame(reach: ReachStudyResult | EndReach) -> pd.DataFrame:
    """The worst reach errors per end, arrangement, loop and extreme (the JSON's
    ``…arrangements[].loops[]``), each with the case behind it; ``extreme`` is the JSON key
    (``worst_overreach_at_remote_bus`` …)."""
    ends = reach.ends if hasattr(reach, "ends") else (reach,)
    rows = []
    for end in ends:
        for a in end.to_dict()["arrangements"]:
            keys = _arrangement_keys(end.end, a)
            for lp in a["loops"]:
                for extreme, case in lp.items():
                    if extreme != "loop" and case is not None:
                        rows.append({**keys, "loop": lp["loop"], "extreme": extreme,
                                     **case, "positions": "/".join(case["positions"])})
    corridor = any("neighbour_state" in r for r in rows)
    return _frame(rows, _with_state(_WORST_COLUMNS, reach) if hasattr(reach, "ends")
                  else [*_WORST_COLUMNS[:4], "neighbour_state", *_WORST_COLUMNS[4:]]
                  if corridor else _WORST_COLUMNS)


def _ends(settings: SettingsResult | tuple[SettingsResult, ...]) -> tuple[SettingsResult, ...]:
    return tuple(settings) if isinstance(settings, tuple | list) else (settings,)


def settings_frame(settings: SettingsResult | tuple[SettingsResult, ...]) -> pd.DataFrame:
    """The zone settings per end and zone, primary and secondary (the JSON's
    ``settings.ends[].zones``; ``line.*`` the end's line basis, ``line.secondary_factor``
    the CT ratio over the VT ratio). The zone's geometry (``region_primary_ohm``) and its
    checks (:func:`setting_checks_frame`) are left out."""
    rows = []
    for s in _ends(settings):
        d = s.to_dict()
        line = _flat(d["line"], "line.")
        for zone, z in d["zones"].items():
            rows.append({"end": d["end"], "zone": zone,
                         **_flat(z, skip=("checks", "region_primary_ohm")), **line})
    return _frame(rows)


def setting_checks_frame(settings: SettingsResult | tuple[SettingsResult, ...]
                         ) -> pd.DataFrame:
    """The setting rules' checks per end and zone (the JSON's ``…zones.*.checks[]``)."""
    rows = [{"end": d["end"], "zone": zone, **c}
            for d in (s.to_dict() for s in _ends(settings))
            for zone, z in d["zones"].items() for c in z["checks"]]
    return _frame(rows, ["end", "zone", "check_id", "passed", "detail"])


def warnings_frame(settings: SettingsResult | tuple[SettingsResult, ...]) -> pd.DataFrame:
    """The warnings per end (the JSON's ``settings.ends[].warnings[]``)."""
    rows = [{"end": d["end"], **w}
            for d in (s.to_dict() for s in _ends(settings)) for w in d["warnings"]]
    return _frame(rows, ["end", "rule_id", "message", "consider"])


_CASE_KEYS = ["fault_type", "faulted", "location_pct", "r_fault_ohm", "r_phase_ohm",
              "source_case", "transfer_angle_deg", "parallel_state", "earth_resistivity_ohm_m",
              "loop", "z_apparent_primary_ohm", "mutual_compensation"]
_CHECK_KEYS = ["end", "zone", "check_id", "requirement", "cases_run", "cases_failed",
               "cases_below_min_current", "margin_pct", "required_margin_pct", "result",
               "consider"]


def verification_checks_frame(verification: VerificationResult) -> pd.DataFrame:
    """The verification's checks per end and zone with their governing cases (the JSON's
    ``verification.ends[].checks[]``; the governing case, the one case a check keeps, in
    the ``governing_case.*`` columns, empty where there is none)."""
    rows = []
    for e in verification.to_dict()["ends"]:
        for c in e["checks"]:
            g = c["governing_case"] or {}
            rows.append({"end": e["end"], **_flat(c, skip=("governing_case",)),
                         **{f"governing_case.{k}": _value(g.get(k)) for k in _CASE_KEYS}})
    return _frame(rows, [*_CHECK_KEYS, *(f"governing_case.{k}" for k in _CASE_KEYS)])


def frames(results: StudyResults) -> dict[str, pd.DataFrame]:
    """Every result of a study as a DataFrame, by name.

    ``parameters`` always; ``reach_errors`` and ``worst_cases`` with a reach study;
    ``settings``, ``setting_checks`` and ``warnings`` with settings; ``verification_checks``
    with a verification.
    """
    out = {"parameters": parameters_frame(results.parameters)}
    if results.reach_study is not None:
        out["reach_errors"] = reach_errors_frame(results.reach_study)
        out["worst_cases"] = worst_cases_frame(results.reach_study)
    if results.settings is not None:
        out["settings"] = settings_frame(results.settings)
        out["setting_checks"] = setting_checks_frame(results.settings)
        out["warnings"] = warnings_frame(results.settings)
    if results.verification is not None:
        out["verification_checks"] = verification_checks_frame(results.verification)
    return out
