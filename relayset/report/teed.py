"""A three-terminal (teed) line's console summary and its part of the report.

:func:`teed_summary` is the plain text ``relayset settings`` prints, built from
:class:`relayset.results.teed.TeedStudyResult`; :func:`teed_context` is what the report's
teed macros (templates/report/teed.html.j2) read, built from the results JSON's ``teed``
with the two-ended report's formatters. No arithmetic beyond unit display. User text (the
substation names) is printed as the study gives it on a console, escaped in HTML.
"""

from __future__ import annotations

import cmath
import math
from typing import Any

from relayset.io import visible_text
from relayset.results.teed import TeedStudyResult


def _shapes(res: TeedStudyResult) -> str:
    shapes = sorted({z.shape for e in res.ends if e.settings is not None
                     for z in e.settings.zones}) or ["mho"]
    return " and ".join(shapes)


def _characteristic(z) -> str:
    """A zone's characteristic as set, primary ohms (the ZoneSetting's own values)."""
    if z.shape == "mho":
        return (f"mho, diameter {z.mho_diameter_primary_ohm:.4g} ohm at "
                f"{math.degrees(z.char_angle_rad):.2f} deg")
    lp, lg = (r if v is None else v for v, r in (
        (z.r_left_phase_primary_ohm, z.r_reach_phase_primary_ohm),
        (z.r_left_ground_primary_ohm, z.r_reach_ground_primary_ohm)))
    return (f"quadrilateral, X reach {z.x_reach_primary_ohm:.4g} ohm, right blinders: "
            f"phase loops {z.r_reach_phase_primary_ohm:.4g} ohm, ground loops "
            f"{z.r_reach_ground_primary_ohm:.4g} ohm; left: {lp:.4g} and {lg:.4g} ohm")


def teed_summary(res: TeedStudyResult, source: str) -> str:
    """The summary ``relayset settings`` prints for a teed line."""
    b = [visible_text(x) for x in res.buses]
    angle = math.degrees(cmath.phase(res.z1_set_ohm))
    out = [
        "=" * 80,
        f"{visible_text(source)}: three-terminal line {b[0]} - {b[1]}, tee at "
        f"{res.tee_distance_m / 1e3:.4g} km from {b[0]}, branch of "
        f"{res.branch_length_m / 1e3:.4g} km to {b[2]}",
        f"Relay Z1 = {abs(res.z1_set_ohm):.4g} ohm at {angle:.2f} deg (primary); "
        f"{_shapes(res)} zones, reaches on the line angle",
        "=" * 80,
    ]
    for bus, (length, z1, z0) in zip(b, res.legs, strict=True):
        out.append(f"Leg {bus} - tee: {length / 1e3:.4g} km, Z1 = {z1.real:.4g} + "
                   f"j{z1.imag:.4g} ohm, Z0 = {z0.real:.4g} + j{z0.imag:.4g} ohm")
    for e in res.ends:
        out.append(f"Relay at {visible_text(e.end)} (tee {e.tee_ohm:.4g} ohm away)")
        out.append("  remote terminal      infeed   apparent reach along the line angle")
        for a in e.apparent:
            out.append(f"  {visible_text(a.remote)[:20]:20s} {'in ' if a.infeed else 'out'}"
                       f"      {a.min_ohm:8.4g} to {a.max_ohm:8.4g} ohm")
        for z, pri, sec, rule in (("1", e.zone1_ohm, e.zone1_secondary_ohm, e.zone1_rule),
                                  ("2", e.zone2_ohm, e.zone2_secondary_ohm, e.zone2_rule)):
            out.append(f"  Zone {z}  {abs(pri):8.4g} ohm primary, {abs(sec):8.4g} ohm "
                       f"secondary: {visible_text(rule)}")
            if e.settings is not None:
                out.append(f"          {_characteristic(e.settings.zone('zone' + z))}")
        if e.settings is not None:
            out += [f"  Warning {w.rule_id}: {visible_text(w.message)}"
                    for w in e.settings.warnings]
        for c in e.all_checks:
            mark = "n/j " if not c.judged else "pass" if c.passed else "FAIL"
            acc = None if c.passed else res.accepted(e.end, c.check_id)
            out.append(f"  [{mark}] {c.check_id}: "
                       f"{visible_text(c.detail)}"
                       + ("" if acc is None else
                          f" [accepted as a deviation ({acc.check}) by "
                          f"{visible_text(acc.accepted_by)}, {acc.date}: "
                          f"{visible_text(acc.reason)}]"))
    out.append("Assumptions:")
    out += [f"  - {a}" for a in res.assumptions]
    out.append(f"Verdict: {res.verification}")
    return "\n".join(out) + "\n"


def teed_context(d: dict[str, Any], raw: dict[str, Any], u: dict[str, Any]
                 ) -> dict[str, Any] | None:
    """A three-terminal line (results ``teed``, relayset.studies.teed): the legs, the tee,
    per relay end the apparent impedances of the remote terminals, zone 1 and zone 2 with
    their rules, the checks and the verdict; None for a two-ended line."""
    t = d.get("teed")
    if t is None:
        return None
    from relayset.report.context import (
        PRECISION,
        _complex,
        _ohm_text,
        _settable,
        _zone,
        cnum,
        num,
        pnum,
    )
    from relayset.report.failures import failed_checks

    P = PRECISION
    buses = [str(b) for b in t["buses"]]
    tee_in = raw.get("tee") if isinstance(raw.get("tee"), dict) else {}
    sources = raw.get("sources") if isinstance(raw.get("sources"), dict) else {}
    if tee_in.get("grounded_transformer_z0") is not None:
        third = ("a grounded-star transformer only (a zero-sequence source, Z0 = "
                 f"{tee_in['grounded_transformer_z0']})")
    elif buses[2] in sources:
        third = "a source ([sources] above)"
    else:
        third = "no source: the branch ends open"

    from relayset.results.teed import deviation_name

    accepted = {(str(a.get("end")), str(a.get("check"))): a
                for a in t.get("accepted_deviations", []) or []}

    def check(c: dict[str, Any], end: str) -> dict[str, Any]:
        a = None if c["passed"] else accepted.get((end, deviation_name(str(c["check_id"]))))
        return {"id": str(c["check_id"]), "passed": bool(c["passed"]),
                "judged": bool(c.get("judged", True)),
                "detail": _ohm_text(str(c["detail"])),
                "accepted": None if a is None else
                f"accepted as a deviation ({a['check']}) by {a['accepted_by']}, {a['date']}: "
                f"{a['reason']}"}

    def zone(label: str, pri: Any, sec: Any, rule: str) -> dict[str, str]:
        return {"label": label, "pri": num(abs(_complex(pri)), P["ohm"]),
                "sec": num(abs(_complex(sec)), P["ohm"]),
                "angle": num(math.degrees(cmath.phase(_complex(pri))), P["deg"]),
                "rule": _ohm_text(rule)}

    from relayset.settings.context import ZONE_LABELS

    failures = failed_checks(d)
    ends = []
    for e in t["ends"]:
        ends.append({
            "end": str(e["end"]),
            "tee": num(e["tee_ohm"], P["ohm"]),
            "apparent": [{"remote": str(a["remote"]), "infeed": "in" if a["infeed"] else "out",
                          "min": num(a["min_ohm"], P["ohm"]), "max": num(a["max_ohm"], P["ohm"]),
                          "min_case": str(a["min_case"]), "max_case": str(a["max_case"])}
                         for a in e["apparent"]],
            "zone1_pct": num(e["zone1_pct"], 1),
            "zones": [zone(ZONE_LABELS["zone1"], e["zone1_ohm"], e["zone1_secondary_ohm"],
                           e["zone1_rule"]),
                      zone(ZONE_LABELS["zone2"], e["zone2_ohm"], e["zone2_secondary_ohm"],
                           e["zone2_rule"])],
            "checks": [check(c, str(e["end"])) for c in e["checks"]],
            "verification_checks": [check(c, str(e["end"])) for c in e["verification_checks"]],
            "failed_checks": [f for f in failures if f.end == str(e["end"])],
            **_zone_parts(e.get("settings"), _zone, _settable, num, P),
            "rx": rx_figure(e),
        })
    return {
        "buses": buses, "third": third,
        "tee_distance": num(t["tee_distance_m"] / 1e3 * u["km"], P["len"]),
        "branch_length": num(t["branch_length_m"] / 1e3 * u["km"], P["len"]),
        "z1_set": cnum(t["z1_set_ohm"], P["ohm"]), "z1_set_polar": pnum(t["z1_set_ohm"], P["ohm"]),
        "k0_set": pnum(t["k0_set"], P["pu"]),
        "legs": [{"bus": str(leg["bus"]),
                  "length": num(leg["length_m"] / 1e3 * u["km"], P["len"]),
                  "z1": cnum(leg["z1_ohm"], P["ohm"]), "z0": cnum(leg["z0_ohm"], P["ohm"])}
                 for leg in t["legs"]],
        "ends": ends,
        "assumptions": [_ohm_text(str(a)) for a in t["assumptions"]],
        "verdict": str(t["verification"]),
    }


def _zone_parts(st: dict[str, Any] | None, zone, settable, num, P) -> dict[str, Any]:
    """One teed end's zones as the two-ended report prints them (its formatters: the
    characteristic of each zone, the settable values, the warnings, the load basis)."""
    if not st:  # results written before the zones carried their characteristics
        return {"characteristics": [], "settable": None, "warnings": [], "shape": "mho",
                "load": None}
    zones = [zone(name, z) for name, z in st["zones"].items()]
    load = st["load"]
    return {
        "characteristics": zones,
        "settable": settable(st.get("settable")),
        "warnings": [{"rule_id": w["rule_id"], "message": w["message"],
                      "consider": w["consider"]} for w in st["warnings"]],
        "shape": " and ".join(sorted({z["shape"] for z in zones})),
        "k0": (f"{num(st['k0']['k0']['magnitude'], P['pu'])} ∠ "
               f"{num(st['k0']['k0']['angle_deg'], P['deg'])}°"),
        "load": {"zmin": num(load["z_min_primary_ohm"], P["ohm"]),
                 "angle": num(load["load_angle_max_deg"], P["deg"]),
                 "limit": num(load["encroachment_limit_pct"], 1),
                 "r_limit": num(load["r_limit_primary_ohm"], P["ohm"]),
                 "arc_current": num(st["arc_current_a"], 0)},
    }


def rx_figure(e: dict[str, Any]) -> str | None:
    """The R-X diagram of one teed end (results JSON ``teed.ends[]``), drawn by the
    two-ended report's :func:`relayset.report.plots.rx_svg`: the end's zones as set (each
    through its characteristic's region), the relay's Z1, the load region, and the
    apparent impedances of the remote terminals, bolted faults, smallest and largest along
    the line angle with the infeed out (open squares) and in (filled); None for results
    written before the zones carried their characteristics."""
    st = e.get("settings")
    if not st:
        return None
    from relayset.report.plots import rx_svg
    from relayset.settings.context import ZONE_LABELS

    zones = {name: dict(z, label=ZONE_LABELS.get(name, name))
             for name, z in st["zones"].items()}
    points = []
    for a in e["apparent"]:
        for which, key, case in (("smallest", "min_z_ohm", "min_case"),
                                 ("largest", "max_z_ohm", "max_case")):
            if a.get(key) is not None:
                points.append((f"{a['remote']}, infeed {'in' if a['infeed'] else 'out'}, "
                               f"{which} ({a[case]})", complex(*a[key]), bool(a["infeed"])))
    return rx_svg({"settings_dict": {**st, "zones": zones}}, None, points)
