"""The presentation context of the calculation report: formatted text from the results model.

Everything the report prints comes from :class:`relayset.results.StudyResults` and its
``to_dict()`` (the same numbers the JSON export carries). Nothing here computes physics: the
only arithmetic is unit conversion for ``--units us`` and formatting to fixed precision.
The Jinja2 templates in ``templates/report/`` then lay the context out.
"""

from __future__ import annotations

import cmath
import datetime as dt
import math
import re
from dataclasses import dataclass
from typing import Any

#: Printed precision (decimals) of each kind of number; the tests read the PDF at these.
PRECISION = {
    "ohm": 3,  # line and zone impedances [ohm]
    "ohm_per_len": 4,  # per-length impedances [ohm/km or ohm/mi]
    "pu": 3,  # k0, kr, kx, ratios
    "deg": 1,
    "pct": 2,
    "len": 2,
    "cap": 3,  # nF per length
    "s": 2,
}

MI_PER_KM = 1 / 1.609344
FT_PER_M = 1 / 0.3048
IN_PER_MM = 1 / 25.4

#: Output unit systems: labels and factors from the JSON's per-km, km, m and mm values.
UNITS: dict[str, dict[str, Any]] = {
    "si": {"per": "km", "per_km": 1.0, "len": "km", "km": 1.0, "short": "m", "m": 1.0,
           "small": "mm", "mm": 1.0},
    "us": {"per": "mi", "per_km": 1.609344, "len": "mi", "km": MI_PER_KM, "short": "ft",
           "m": FT_PER_M, "small": "in", "mm": IN_PER_MM},
}

PAPERS = {"a4": "A4", "letter": "letter"}

STATUS_TEXT = {"draft": "Draft", "for review": "For review", "approved": "Approved"}

NOT_VERIFIED = "not verified"

ARRANGEMENT_TEXT = {
    "actual_plan": "actual transposition plan",
    "untransposed": "untransposed",
    "ideal_cycle": "ideal transposition cycle",
}

#: Column headers of the per-loop table. The "underreach" extremes are the smallest error
#: found, which is positive when every case overreaches: the header says "smallest".
WORST_KEYS = (
    ("worst_overreach_at_zone1_reach", "largest at Z1 reach"),
    ("worst_underreach_at_zone1_reach", "smallest at Z1 reach"),
    ("worst_overreach_on_line", "largest on line"),
    ("worst_underreach_on_line", "smallest on line"),
    ("worst_overreach_at_remote_bus", "largest at remote bus"),
    ("worst_reactance_overreach_at_zone1_reach_resistive", "largest X error, Rf > 0"),
)


def num(x: Any, digits: int = 3) -> str:
    """A number at fixed decimals, with a real minus sign; '–' when absent or not finite."""
    if x is None or isinstance(x, bool):
        return "–"
    x = float(x)
    if not math.isfinite(x):
        return "–"
    text = f"{x:.{digits}f}"
    if float(text) == 0.0:
        text = text.lstrip("-")  # no "-0.000"
    return text.replace("-", "\u2212")


def cnum(z: Any, digits: int = 3) -> str:
    """A complex value ([re, im] or complex) as 'a + jb'."""
    z = _complex(z)
    if z is None:
        return "–"
    sign = "+" if float(num(z.imag, digits).replace("\u2212", "-")) >= 0 else "\u2212"
    return f"{num(z.real, digits)} {sign} j{num(abs(z.imag), digits)}"


def pnum(z: Any, digits: int = 3, angle_digits: int = 1) -> str:
    """A complex value ([re, im], {magnitude, angle_deg} or complex) as 'r ∠ θ°'."""
    if isinstance(z, dict):
        mag, ang = z["magnitude"], z["angle_deg"]
    else:
        c = _complex(z)
        if c is None:
            return "–"
        mag, ang = abs(c), math.degrees(cmath.phase(c))
    return f"{num(mag, digits)} \u2220 {num(ang, angle_digits)}\u00b0"


def _complex(z: Any) -> complex | None:
    if z is None:
        return None
    if isinstance(z, list | tuple):
        return complex(z[0], z[1])
    return complex(z)


def safe_stem(line_id: str, revision: str) -> str:
    """The report's file stem ``<line_id>_rev<revision>``, with only safe file-name characters."""
    def clean(s: str) -> str:
        return re.sub(r"[^A-Za-z0-9._-]+", "_", str(s)).strip("._") or "line"

    return f"{clean(line_id)}_rev{clean(revision)}"


@dataclass(frozen=True)
class Dates:
    """When the report was generated (SOURCE_DATE_EPOCH, else now); the revision date is
    the study's and printed apart from it."""

    when: dt.datetime  #: UTC, used for the PDF metadata and the attachments

    @property
    def date_text(self) -> str:
        return self.when.date().isoformat()

    @property
    def generated_text(self) -> str:
        """The generation time as printed: date and time to the minute, UTC."""
        return self.when.strftime("%Y-%m-%d %H:%M UTC")

    @property
    def iso(self) -> str:
        return self.when.strftime("%Y-%m-%dT%H:%M:%SZ")


def document_date(identity: dict[str, Any], environ: dict[str, str]) -> Dates:
    """When the report is generated: SOURCE_DATE_EPOCH (the reproducible-builds convention:
    the same input then gives the same bytes) wins, otherwise the time now (UTC, whole
    seconds). The study's revision date is not the document's date: it is printed apart.
    ``relayset verify`` makes a report again at the creation date its PDF records.
    """
    sde = environ.get("SOURCE_DATE_EPOCH", "").strip()
    if sde.isdigit():
        return Dates(dt.datetime.fromtimestamp(int(sde), tz=dt.UTC))
    return Dates(dt.datetime.now(dt.UTC).replace(microsecond=0))


# --------------------------------------------------------------------------- building blocks
def _identity(r, d: dict[str, Any], u: dict[str, Any]) -> dict[str, Any]:
    s = d["study"]
    p = d["parameters"]
    relay = r.input.get("relay", {}) or {}
    return {
        "line_id": s["line_id"],
        "title": s["title"],
        "from_substation": s["from_substation"],
        "to_substation": s["to_substation"],
        "revision": s["revision"],
        "revision_date": s.get("revision_date") or "–",
        "status": s["status"],
        "status_text": STATUS_TEXT.get(s["status"], s["status"]),
        "prepared_by": s.get("prepared_by", ""),
        "checked_by": s.get("checked_by", ""),
        "approved_by": s.get("approved_by", ""),
        "philosophy": s.get("philosophy", "default"),
        "notes": s.get("notes", ""),
        "voltage_kv": num(s["nominal_voltage_kv"], 0),
        "frequency_hz": num(p["frequency_hz"], 0),
        "length": num(p["length_km"] * u["km"], PRECISION["len"]),
        "relay_end": str(relay.get("end", "–")),
        "n_circuits": len(p["circuits"]),
    }


def _revisions(r) -> list[dict[str, str]]:
    rows = []
    for rev in r.input.get("revisions", []) or []:
        date = rev.get("date")
        rows.append({
            "revision": str(rev.get("revision", "")),
            "date": date.isoformat() if hasattr(date, "isoformat") else str(date or ""),
            "description": str(rev.get("description", "")),
            "by": str(rev.get("by", "")),
        })
    return rows


def _input_tables(r, d: dict[str, Any], u: dict[str, Any]) -> dict[str, Any]:
    """The study's inputs as read (the user's own text with units) plus resolved conductors."""
    raw = r.input
    p = d["parameters"]

    def text(v: Any) -> str:
        if isinstance(v, dict):
            return ", ".join(f"{k} = {text(x)}" for k, x in v.items())
        if isinstance(v, list | tuple):
            return ", ".join(text(x) for x in v)
        if isinstance(v, bool):
            return "yes" if v else "no"
        return str(v)

    def kv(table: Any) -> list[tuple[str, str]]:
        if not isinstance(table, dict):
            return []
        return [(str(k), text(v)) for k, v in table.items()]

    conductors = []
    for c in p["conductors"]:
        src = str(c.get("source") or "")
        conductors.append({
            "name": c["name"],
            "description": c["description"],
            "r_ac": num(c["r_ac_ohm_per_km"] * u["per_km"], PRECISION["ohm_per_len"]),
            "gmr": num(c["gmr_mm"] * u["mm"], 2 if u["small"] == "mm" else 3),
            "diameter": num(c["outside_diameter_mm"] * u["mm"], 2 if u["small"] == "mm" else 3),
            "temperature": num(c["operating_temperature_c"], 0),
            "source": src,
            "from_memory": "from memory" in src.lower(),
        })
    positions = []
    # One cross-section ([[circuits]] positions), or one per [towers.NAME] table, the
    # tower's name before the circuit's.
    placed = [(str(circ.get("name", c + 1)), circ.get("positions", []))
              for c, circ in enumerate(raw.get("circuits", []))]
    towers = raw.get("towers") if isinstance(raw.get("towers"), dict) else {}
    placed += [(f"{t} · {cname}", ps) for t, tw in towers.items() if isinstance(tw, dict)
               for cname, ps in (tw.get("positions") or {}).items()]
    for circuit_name, circ_positions in placed:
        for pos in circ_positions:
            b = pos.get("bundle")
            positions.append({
                "circuit": circuit_name,
                "name": str(pos.get("name", "")),
                "x": str(pos.get("x", "")),
                "height": str(pos.get("height", pos.get("average_height", ""))),
                "height_kind": "attachment" if "height" in pos else "average",
                "sag": str(pos.get("sag", "–")),
                "conductor": str(pos.get("conductor", "")),
                "bundle": (f"{b.get('count')} × {b.get('spacing')}"
                           + (f", {b.get('orientation')}" if b.get("orientation") else "")
                           if isinstance(b, dict) else "single"),
            })
    shield_lists = [("", raw.get("shield_wires", []))] + [
        (f"{t} · ", tw.get("shield_wires", [])) for t, tw in towers.items()
        if isinstance(tw, dict)]
    shields = [{
        "name": prefix + str(sw.get("name", k + 1)),
        "x": str(sw.get("x", "")),
        "height": str(sw.get("height", sw.get("average_height", ""))),
        "sag": str(sw.get("sag", "–")),
        "conductor": str(sw.get("conductor", "")),
        "grounding": str(sw.get("grounding", "continuous")),
    } for prefix, sws in shield_lists for k, sw in enumerate(sws)]
    sections = []
    for k, (sec, raw_sec) in enumerate(zip(p["sections"],
                                          (raw.get("line", {}) or {}).get("sections") or
                                          [{}] * len(p["sections"]), strict=False)):
        sections.append({
            "index": k + 1,
            "length": num(sec["length_km"] * u["km"], PRECISION["len"]),
            "order": " ".join(sec["order"]) + (f" (tower {sec['tower']})" if "tower" in sec
                                               else f" (cable {sec['cable']})" if "cable" in sec
                                               else ""),
            "given": text(raw_sec.get("order", "")) if isinstance(raw_sec, dict) else "",
        })
    sources = [(str(name), kv(tab)) for name, tab in (raw.get("sources", {}) or {}).items()]
    adjacent = [(str(a.get("name", "")), text({k: v for k, v in a.items() if k != "name"}))
                for a in raw.get("adjacent_lines", []) or []]
    behind = [(str(a.get("name", "")), text({k: v for k, v in a.items() if k != "name"}))
              for a in raw.get("lines_behind", []) or []]
    return {
        "system": kv(raw.get("system", {})),
        "conductors": conductors,
        "conductor_types": [(str(k), kv(v)) for k, v in raw.get("conductor_types", {}).items()],
        "positions": positions,
        "shields": shields,
        "sections": sections,
        "relay": kv(raw.get("relay", {})),
        "sources": sources,
        "load": kv(raw.get("load", {})),
        "reach_study": kv(raw.get("reach_study", {})),
        "error_budget": kv(raw.get("error_budget", {})),
        "fault_resistance": kv(raw.get("fault_resistance", {})),
        "adjacent": adjacent,
        "behind": behind,
        "cables": [(str(k), kv(v)) for k, v in (raw.get("cables") or {}).items()],
        "tee": kv(raw.get("tee", {})),
    }


def _matrix(m: dict[str, list[list[float]]], scale: float, digits: int) -> list[list[str]]:
    return [[cnum((re_, im_), digits) for re_, im_ in zip(rr, ri, strict=True)]
            for rr, ri in zip(m["re"], m["im"], strict=True)]


def _parameters(d: dict[str, Any], u: dict[str, Any]) -> dict[str, Any]:
    p = d["parameters"]
    k = u["per_km"]
    P = PRECISION

    def scaled(pair: list[float], f: float) -> list[float]:
        return [pair[0] * f, pair[1] * f]

    def mscaled(m: dict, f: float) -> dict:
        return {"re": [[x * f for x in row] for row in m["re"]],
                "im": [[x * f for x in row] for row in m["im"]]}

    labels = p["phase_labels"]
    n_c = len(labels)
    phase_names = [(f"{c + 1}·{lab}" if n_c > 1 else lab)
                   for c, ls in enumerate(labels) for lab in ls]
    seq_names = [(f"{c + 1}·{s}" if n_c > 1 else s) for c in range(n_c) for s in "012"]
    circuits = []
    for c in p["circuits"]:
        circuits.append({
            "circuit": c["circuit"],
            "z1_per": cnum(scaled(c["z1_ohm_per_km"], k), P["ohm_per_len"]),
            "z0_per": cnum(scaled(c["z0_ohm_per_km"], k), P["ohm_per_len"]),
            "z1": cnum(c["z1_ohm"], P["ohm"]),
            "z0": cnum(c["z0_ohm"], P["ohm"]),
            "z1_polar": pnum(c["z1_ohm"], P["ohm"]),
            "z0_polar": pnum(c["z0_ohm"], P["ohm"]),
            "line_angle": num(c["line_angle_deg"], P["deg"] + 1),
            "k0": pnum(c["k0"]["k0"], P["pu"]),
            "k0_mag": num(c["k0"]["k0"]["magnitude"], P["pu"]),
            "k0_ang": num(c["k0"]["k0"]["angle_deg"], P["deg"] + 1),
            "k0_complex": cnum(c["k0"]["k0_complex"], P["pu"]),
            "kr": num(c["k0"]["kr"], P["pu"]),
            "kx": num(c["k0"]["kx"], P["pu"]),
            "z0_over_z1": pnum(c["k0"]["z0_over_z1"], P["pu"]),
            "c1": num(c["c1_nf_per_km"] * k, P["cap"]),
            "c0": num(c["c0_nf_per_km"] * k, P["cap"]),
            "b1": num(c["b1_us_per_km"] * k, P["cap"]),
            "ic_per": num(c["charging_current_a_per_km"] * k, P["cap"]),
            "ic": num(c["charging_current_a"], 1),
            "zc": pnum(c["surge_impedance_ohm"], 1),
            "z1_exact": cnum(c["z1_exact_ohm"], P["ohm"]),
            "z0_exact": cnum(c["z0_exact_ohm"], P["ohm"]),
            "z1_corr": num(c["z1_exact_correction_pct"], P["pct"]),
            "z0_corr": num(c["z0_exact_correction_pct"], P["pct"]),
            "long_line": c["long_line_correction_needed"],
        })
    arrangements = []
    for name, a in p["arrangements"].items():
        arrangements.append({
            "name": name,
            "title": ARRANGEMENT_TEXT.get(name, name),
            "description": a["description"],
            "zabc": _matrix(mscaled(a["zabc_ohm_per_km"], k), 1.0, P["ohm_per_len"]),
            "z012": _matrix(mscaled(a["z012_ohm_per_km"], k), 1.0, P["ohm_per_len"]),
            "m0": [num(x, P["pct"]) for x in a["unbalance_m0_pct"]],
            "m2": [num(x, P["pct"]) for x in a["unbalance_m2_pct"]],
            "z0m": cnum(scaled(a["z0m_ohm_per_km"], k), P["ohm_per_len"])
            if "z0m_ohm_per_km" in a else None,
        })
    return {
        "length": num(p["length_km"] * u["km"], P["len"]),
        "earth_model": p["earth_model"],
        "resistivity": num(p["earth_resistivity_ohm_m"], 0),
        "circuits": circuits,
        "arrangements": arrangements,
        "phase_names": phase_names,
        "seq_names": seq_names,
        "k0m": pnum(p["k0m"], P["pu"]) if p["k0m"] else None,
        "assumptions": list(p["assumptions"]),
        "cables": _cables(p, u),
        "neighbour": _neighbour(p.get("neighbour"), u),
        "neighbours": [_neighbour(nb, u) for nb in p.get("neighbours")
                       or ([p["neighbour"]] if p.get("neighbour") else [])],
    }


def _neighbour(nb: dict[str, Any] | None, u: dict[str, Any]) -> dict[str, Any] | None:
    """A neighbouring line in a shared corridor (results' parameters.neighbour), or None."""
    if nb is None:
        return None
    k, P = u["per_km"], PRECISION

    def per(pair: list[float]) -> str:
        return cnum([pair[0] * k, pair[1] * k], P["ohm_per_len"])

    return {
        "name": nb["name"],
        "buses": [f"{b} (this line's bus)" if own else b
                  for b, own in zip(nb["buses"], nb["on_protected_line_bus"], strict=True)],
        "shared_from": num(nb["shared_from_km"] * u["km"], P["len"]),
        "shared_to": num(nb["shared_to_km"] * u["km"], P["len"]),
        "shared_length": num(nb["shared_length_km"] * u["km"], P["len"]),
        "routes": [num(x * u["km"], P["len"]) for x in nb["route_lengths_km"]],
        "z1": per(nb["z1_ohm_per_km"]), "z0": per(nb["z0_ohm_per_km"]),
        "z0m": per(nb["z0m_ohm_per_km"]),
        "route_z1": per(nb["route_z1_ohm_per_km"]), "route_z0": per(nb["route_z0_ohm_per_km"]),
        "k0m_equivalent": pnum(nb["k0m_equivalent"], P["pu"]),
        "coupling_ratio": pnum(nb["coupling_ratio"], P["pu"]),
    }


def _cables(p: dict[str, Any], u: dict[str, Any]) -> list[dict[str, Any]]:
    """The cable sections' rows (templates/report/cables.html.j2), as the JSON holds them."""
    k, P = u["per_km"], PRECISION
    return [{
        "name": c["name"],
        "bonding": c["bonding"].replace("_", " "),
        "return_paths": c["return_paths"],
        "formation": c["formation"],
        "depth": num(c["depth_m"], 2),
        "length": num(c["length_km"] * u["km"], P["len"]),
        "circuits": [{
            "circuit": circ["circuit"],
            "z1_per": cnum([z1[0] * k, z1[1] * k], P["ohm_per_len"]),
            "z0_per": cnum([z0[0] * k, z0[1] * k], P["ohm_per_len"]),
            "z1": cnum(z1s, P["ohm"]), "z0": cnum(z0s, P["ohm"]),
        } for circ, z1, z0, z1s, z0s in zip(p["circuits"], c["z1_ohm_per_km"],
                                            c["z0_ohm_per_km"], c["z1_ohm"], c["z0_ohm"],
                                            strict=True)],
    } for c in p.get("cables", [])]


def _worst(w: dict[str, Any] | None) -> dict[str, str] | None:
    if w is None:
        return None
    return {
        "error": num(w["error_pct"], PRECISION["pct"]),
        "fault_type": w["fault_type"],
        "location": num(w["location_pct"], 1),
        "rf": num(w["r_fault_ohm"], 1),
        "source_case": w["source_case"],
        "transfer_angle": num(w["transfer_angle_deg"], 1),
        "positions": " / ".join(w["positions"]),
    }


def _zone1_as_set(d: dict[str, Any], e: dict[str, Any]) -> str | None:
    """Zone 1's rule as set at this end when its reach differs from the reach study's
    recommendation, else None."""
    st = next((s for s in ((d.get("settings") or {}).get("ends") or [])
               if s["end"] == e["end"]), None)
    if st is None:
        return None
    z1 = st["zones"]["zone1"]
    return None if z1["reach_pct"] == e["recommended_zone1_pct"] else z1["rule"]


def _reach(d: dict[str, Any]) -> dict[str, Any] | None:
    from relayset.results.reach import fault_label

    q = d.get("reach_study")
    if q is None:
        return None
    P = PRECISION
    ends = []
    for e in q["ends"]:
        arrs = []
        for a in e["arrangements"]:
            loops = []
            for lp in a["loops"]:
                loops.append({"loop": lp["loop"],
                              "worst": [_worst(lp[key]) for key, _ in WORST_KEYS]})
            title = ARRANGEMENT_TEXT.get(a["arrangement"], a["arrangement"])
            if a.get("neighbour_state"):  # one neighbour's bare state, or named states
                ns = a["neighbour_state"].replace("_", " ")
                title += f", {ns}" if ns.startswith("neighbour") else f", neighbour {ns}"
            if e["k0m_set"] is not None:
                title += (", with mutual compensation" if a["mutual_compensation"]
                          else ", without mutual compensation")
            # An arrangement the study solved as another (the same line) has that one's
            # results: said once, not printed twice.
            same = next((b for b in arrs if b["name"] == a["solved_as"]
                         and b["mutual"] == a["mutual_compensation"]), None)
            arrs.append({
                "name": a["arrangement"],
                "title": title,
                "repeat_of": None if same is None else same["title"],
                # the case behind each extreme for the arrangement the relay is judged on
                # (the first: the actual plan, with mutual compensation where it is used);
                # the comparisons give the values (their cases are in the results JSON)
                "with_cases": not arrs,
                "mutual": a["mutual_compensation"],
                "neighbour_state": (a.get("neighbour_state") or "").replace("_", " "),
                "over_remote": num(a["worst_bolted_overreach_at_remote_bus_pct"], P["pct"]),
                "over_line": num(a["worst_bolted_overreach_on_line_pct"], P["pct"]),
                "under_line": num(a["worst_bolted_underreach_on_line_pct"], P["pct"]),
                "loops": loops,
                "envelope": a["envelope"],
            })
        ends.append({
            "end": e["end"],
            "z1_set": cnum(e["z1_set_ohm"], P["ohm"]),
            "k0_set": pnum(e["k0_set"], P["pu"]),
            "k0m_set": pnum(e["k0m_set"], P["pu"]) if e["k0m_set"] else None,
            "zone1_reach": num(e["zone1_reach_pct"], 1),
            "error_budget": num(e["error_budget_pct"], 1),
            "recommended_zone1": num(e["recommended_zone1_pct"], 1),
            # zone 1 as the settings set it, where that differs (e.g. the fault simulation
            # limited it further), so that this section is not read as the setting
            "zone1_as_set": _zone1_as_set(d, e),
            # the philosophy's maximum, not the overreach, sets the recommendation
            "capped": e["zone1_allowed_by_errors_pct"] > e["recommended_zone1_pct"],
            "allowed_by_errors": num(e["zone1_allowed_by_errors_pct"], 1),
            "governing_loop": e["governing_loop"],
            "governing_case": _worst(e["governing_case"]),
            "arrangements": arrs,
        })
    return {
        "fault_types": ", ".join(fault_label(ft, d["parameters"]["phase_labels"][0])
                                 for ft in q["fault_types"]),
        "location_step": num(q["location_step_pct"], 1),
        "fault_resistances": ", ".join(num(x, 1) for x in q["fault_resistances_ohm"]),
        "phase_fault_resistance": num(q["phase_fault_resistance_ohm"], 1),
        "source_cases": ", ".join(f"{c['name']} (× {num(c['scale'], 2)})"
                                  for c in q["source_cases"]),
        "transfer_angles": (None if q["transfer_angles_deg"] is None
                            else ", ".join(num(x, 1) for x in q["transfer_angles_deg"])),
        "flows_at": q["ends"][0]["end"] if q["ends"] else "",
        "power_flows": (None if q["power_flows"] is None else ", ".join(
            f"{num(f['active_power_w'] / 1e6, 1)} MW {'+' if f['reactive_power_var'] >= 0 else '−'}"
            f" {num(abs(f['reactive_power_var']) / 1e6, 1)} Mvar" for f in q["power_flows"])),
        "parallel_circuit": q["parallel_circuit"] or "–",
        "shunt_capacitance": "included" if q["shunt_capacitance"] else "neglected",
        "cases": f"{q['cases_solved']:,}".replace(",", "\u2009"),
        "notes": list(q["notes"]),
        "ends": ends,
        "worst_headers": [h for _, h in WORST_KEYS],
        # the resistive column's cases name their Rf (the others are bolted)
        "worst_resistive": [key.endswith("_resistive") for key, _ in WORST_KEYS],
        # the cases name their transfer angle when there is more than one load case
        "several_loads": len(q["power_flows"] or q["transfer_angles_deg"]) > 1,
        "series_capacitors": _series_capacitors(q.get("series_capacitors")),
    }


def _series_capacitors(c: dict[str, Any] | None) -> dict[str, Any] | None:
    """The series capacitor banks, their states, Z1 with and without them and the
    inversion checks, as the report prints them (relayset.studies.series_capacitors)."""
    if not c:
        return None
    banks = []
    for b in c["banks"]:
        v = b["varistor_state"]
        banks.append({
            "name": b["name"], "place": b["place"], "x_c": num(b["reactance_ohm"], 4),
            "compensation": num(b["compensation_pct"], 3),
            "i_pl": num(b["protective_level_current_a"] / 1e3, 3),
            "i_close_in": num(v["capacitor_current_a"] / 1e3, 3),
            "i_pu": num(v["current_pu_of_protective_level"], 3),
            "z_varistor": cnum(v["impedance_ohm"], 4)})
    return {
        "banks": banks,
        "states": list(c["states"].values()),
        "z1_line": cnum(c["z1_line_ohm"], 4),
        "z1_compensated": [(end, cnum(z, 4)) for end, z in c["z1_compensated_ohm"].items()],
        "inversions": [{"end": i["end"], "kind": i["kind"].replace("_", " "),
                        "exists": i["exists"], "text": _ohm_text(i["text"])}
                       for i in c["inversion_checks"]],
        "notes": list(c["notes"]),
    }


def _zone(name: str, z: dict[str, Any]) -> dict[str, Any]:
    from relayset.settings.context import ZONE_LABELS

    P = PRECISION
    quad = z["shape"] == "quadrilateral"
    return {
        "zone": name,
        "label": ZONE_LABELS.get(name, name),
        "direction": z["direction"],
        "rule": z["rule"],
        "reach_pri": num(z["reach_primary_magnitude_ohm"], P["ohm"]),
        "reach_sec": num(z["reach_secondary_magnitude_ohm"], P["ohm"]),
        "angle": num(z["reach_angle_deg"], P["deg"]),
        "pct": num(z["reach_pct"], 1),
        "delay": num(z["delay_s"], P["s"]),
        "shape": z["shape"],
        "infeed": pnum(z["infeed_factor"], P["pu"]) if z["infeed_factor"] else None,
        "mho_d_pri": None if quad else num(z["mho_diameter_primary_ohm"], P["ohm"]),
        "mho_d_sec": None if quad else num(z["mho_diameter_secondary_ohm"], P["ohm"]),
        "mho_angle": None if quad else num(z["char_angle_deg"], P["deg"]),
        "x_pri": num(z["x_reach_primary_ohm"], P["ohm"]) if quad else None,
        "x_sec": num(z["x_reach_secondary_ohm"], P["ohm"]) if quad else None,
        "rph_pri": num(z["r_reach_phase_primary_ohm"], P["ohm"]) if quad else None,
        "rph_sec": num(z["r_reach_phase_secondary_ohm"], P["ohm"]) if quad else None,
        "rg_pri": num(z["r_reach_ground_primary_ohm"], P["ohm"]) if quad else None,
        "rg_sec": num(z["r_reach_ground_secondary_ohm"], P["ohm"]) if quad else None,
        "load_pct": num(z["load_reach_pct_of_min"], 1),
        "checks": [{"id": c["check_id"], "passed": c["passed"], "detail": c["detail"]}
                   for c in z["checks"]],
    }


def _mutual_supervision(m: dict[str, Any] | None) -> str | None:
    """The issued mutual-compensation supervision in words (None: no mutual compensation)."""
    if not m:
        return None
    return f"{'on' if m.get('on') else 'off'}: {m.get('criterion', '')}"


def _settings_ends(d: dict[str, Any]) -> list[dict[str, Any]]:
    """One block per relay end, in the order of the results (``settings.ends``)."""
    if d.get("settings") is None:
        return []
    from relayset.report.failures import failed_checks
    from relayset.settings.context import ZONE_LABELS

    P = PRECISION
    out = []
    for i, s in enumerate(d["settings"]["ends"]):
        line = s["line"]
        k0 = s["k0"]
        load = s["load"]
        zones = {name: dict(z, label=ZONE_LABELS.get(name, name))
                 for name, z in s["zones"].items()}
        out.append({
            "end": str(s["end"]),
            "remote_end": str(s.get("remote_end", "")),
            "index": i,
            "z1_pri": cnum(line["z1_primary_ohm"], P["ohm"]),
            "z1_sec": cnum(line["z1_secondary_ohm"], P["ohm"]),
            "z1_pri_mag": num(math.hypot(*line["z1_primary_ohm"]), P["ohm"]),
            "z1_sec_mag": num(math.hypot(*line["z1_secondary_ohm"]), P["ohm"]),
            "angle": num(line["angle_deg"], P["deg"]),
            "secondary_factor": num(line["secondary_factor"], 5),
            "k0_mag": num(k0["k0"]["magnitude"], P["pu"]),
            "k0_ang": num(k0["k0"]["angle_deg"], P["deg"]),
            "kr": num(k0["kr"], P["pu"]),
            "kx": num(k0["kx"], P["pu"]),
            "z0z1_mag": num(k0["z0_over_z1"]["magnitude"], P["pu"]),
            "z0z1_ang": num(k0["z0_over_z1"]["angle_deg"], P["deg"]),
            "k0m": None if s["k0m"] is None else pnum(s["k0m"], P["pu"]),
            "mutual_supervision": _mutual_supervision(s.get("mutual_compensation_supervision")),
            "load_zmin_pri": num(load["z_min_primary_ohm"], P["ohm"]),
            "load_zmin_sec": num(load["z_min_secondary_ohm"], P["ohm"]),
            "load_angle": num(load["load_angle_max_deg"], P["deg"]),
            "encroachment_limit": num(load["encroachment_limit_pct"], 1),
            "r_limit": num(load["r_limit_primary_ohm"], P["ohm"]),
            "sources": [{"end": f"{x['end']} ({x.get('role', '')})",
                         "z": cnum(x["z_source_ohm"], P["ohm"]),
                         "sir": num(x["sir"], 2), "line_class": x["line_class"]}
                        for x in s["sources"]],
            "arc_current": num(s["arc_current_a"], 0),
            "zones": [_zone(name, z) for name, z in s["zones"].items()],
            "warnings": [{"rule_id": w["rule_id"], "message": w["message"],
                          "consider": w["consider"]} for w in s["warnings"]],
            "shape_kind": (lambda k: k.pop() if len(k) == 1 else "mixed")(
                {z["shape"] for z in s["zones"].values()}),
            # the one count (relayset.report.failures): setting rules and verification
            "failed_checks": [f for f in failed_checks(d) if f.end == str(s["end"])],
            "settings_dict": {**s, "zones": zones},
            "settable": _settable(s.get("settable")),
        })
    return out


def _settable(st: dict[str, Any] | None) -> dict[str, Any] | None:
    """The settable values on the relay profile's steps, ideal beside settable (text)."""
    if not st:
        return None

    def digits(step: float) -> int:  # as many decimals as the step has, at least 2
        text = f"{step:.10f}".rstrip("0")
        return max(2, len(text.split(".")[1]) if "." in text else 0)

    rows = []
    for v in st["values"]:
        k = digits(v["step"])
        rows.append({"id": v["id"], "label": v["label"], "unit": v["unit"],
                     "ideal": num(v["ideal"], k + 2), "settable": num(v["settable"], k),
                     "difference": num(v["difference"], k + 2),
                     "range": f"{num(v['range'][0], k)} to {num(v['range'][1], k)}",
                     "step": num(v["step"], k), "direction": v["direction"],
                     "ok": v["in_range"] and v["on_grid"]})
    p = st["profile"]
    return {"name": p["name"], "sha256": p["sha256"],
            "form": p["residual_compensation"].replace("_", " "), "rows": rows}


def _reported(c: dict[str, Any]) -> str | None:
    """The sentence of a finding reported without a pass/fail limit, or None."""
    if c.get("result") != "reported":
        return None
    text = str(c.get("requirement", "")).removesuffix(" (reported)")
    return f"{text}; {c['consider']}" if c.get("consider") else text


#: What a margin means (results/verification.py), printed with the verification table.
MARGIN_MEANING = (
    "Margin: how much longer (for a must-not-operate check) or shorter (for a must-operate "
    "check) the zone could be, in % of its reach, before the governing case would change "
    "side; a check passes when its smallest margin over all cases run is at least the "
    "required margin (the verification tolerance). \u2013: no case could change side.")

#: Labels of the relay model's keys (results ``verification.relay_model``), in print order.
RELAY_MODEL_LABELS = (
    ("phase_selection", "phase selection"),
    ("directional", "directional elements"),
    ("min_operating_current_primary_a", "minimum operating current, primary [A]"),
    ("min_operating_current_secondary_a", "minimum operating current, secondary [A]"),
    ("ground_release_current_primary_a", "ground-loop release current, primary [A]"),
    ("ground_release_current_secondary_a", "ground-loop release current, secondary [A]"),
    ("mutual_compensation_supervision", "mutual compensation supervised"),
)


def _ohm_text(text: str) -> str:
    """One notation in the report: "Ω" for ohm and "−" for a minus sign before a digit."""
    text = re.sub(r"\bohm\*m\b", "\u03a9\u00b7m", text)
    text = re.sub(r"\bohms?\b", "\u03a9", text)
    return re.sub(r"(?<![\w.])-(?=\d)", "\u2212", text)


def _state_text(state: str) -> str:
    """The other circuit's state in words: a neighbouring line's ("neighbour earthed") as
    it is, the parallel circuit's after "parallel circuit"."""
    words = state.replace("_", " ")
    return words if state.startswith("neighbour") else f"parallel circuit {words}"


#: The series capacitor states as a case names them.
_CAP_WORDS = {"in_service": "in service", "varistor": "varistor conducting",
              "bypassed": "bypassed"}


def _case_text(g: dict[str, Any]) -> str:
    """A governing fault case in words (everything needed to reproduce it)."""
    where = g["faulted"] if g["faulted"].startswith("behind") else f"on the {g['faulted']}"
    return _ohm_text(
        f"{g['fault_type']} {where} at {num(g['location_pct'], PRECISION['pct'])}"
        f" %, Rf {num(g['r_fault_ohm'], 3)} \u03a9, Rph {num(g.get('r_phase_ohm'), 3)} \u03a9, "
        f"{g['source_case']}, transfer angle {num(g.get('transfer_angle_deg'), 1)}\u00b0, "
        f"{_state_text(g['parallel_state'])}, "
        + (f"series capacitors {_CAP_WORDS.get(g['capacitor_state'], g['capacitor_state'])}, "
           if g.get("capacitor_state") else "") +
        f"{g['earth_resistivity_ohm_m']:g} \u03a9\u00b7m, loop {g['loop']}")


def _relay_model(rm: dict[str, Any] | None) -> list[tuple[str, list[tuple[str, str]]]]:
    """The relay the verification assumes, per end: (end, [(label, value)])."""
    out = []
    for end, model in (rm or {}).items():
        if not isinstance(model, dict):
            continue
        rows = []
        for key, label in RELAY_MODEL_LABELS:
            if key in model:
                v = model[key]
                rows.append((label, "yes" if v is True else "no" if v is False else
                             num(v, 2) if isinstance(v, float) else str(v).replace("_", " ")))
        rows += [(str(k).replace("_", " "), str(v)) for k, v in model.items()
                 if k not in dict(RELAY_MODEL_LABELS)]
        out.append((str(end), rows))
    return out


def _teed(d: dict[str, Any], raw: dict[str, Any], u: dict[str, Any]) -> dict[str, Any] | None:
    """A three-terminal line's part of the report (:func:`relayset.report.teed.teed_context`);
    None for a two-ended line."""
    from relayset.report.teed import teed_context

    return teed_context(d, raw, u)


def _verification(r) -> dict[str, Any]:
    """The verification section: its basis (envelope, relay model, tolerance, what margin
    means) and one row per relay end and check (requirement, cases run and failed, margin
    and required margin, governing case); "not verified" when the study has none."""
    v = getattr(r, "verification", None)
    teed = getattr(r, "teed", None)
    if v is None and teed is not None:  # its checks are printed by the teed section
        return {"verdict": teed.verification, "present": True, "zones": []}
    if v is None:
        return {"verdict": NOT_VERIFIED, "present": False, "zones": []}
    vd = v.to_dict() if hasattr(v, "to_dict") else dict(v)
    zones = []
    # One row per end and check (results/verification.py: ends[].checks[]).
    for e in vd.get("ends", []) or []:
        for c in e.get("checks", []) or []:
            g = c.get("governing_case")
            result = c.get("result", "")
            dev = c.get("accepted_deviation")
            # the study accepts this failure (results/verification.py)
            accepted = (f"accepted deviation ({dev.get('accepted_by', '')}, "
                        f"{dev.get('date', '')}): {dev.get('reason', '')}") if dev else ""
            zones.append({
                "end": str(e.get("end", "")),
                "zone": str(c.get("zone", "")),
                "check_id": str(c.get("check_id", "")),
                "requirement": _ohm_text(str(c.get("requirement", ""))),
                "cases_run": f"{c.get('cases_run', 0):,}".replace(",", "\u2009"),
                "cases_failed": f"{c.get('cases_failed', 0):,}".replace(",", "\u2009"),
                "margin": num(c.get("margin_pct"), PRECISION["pct"]),
                "required": num(c.get("required_margin_pct"), PRECISION["pct"]),
                "result": result,
                "case": _case_text(g) if g else "",
                "consider": _ohm_text(str(c.get("consider", ""))) if result == "FAIL" else "",
                # a finding reported without a pass/fail limit (e.g. zone 3's coverage of
                # the adjacent line at the largest infeed) is printed in full
                "reported": _reported(c),
                "accepted": accepted,
                # kept for readers of the old layout: the failure in one line
                "fails": ([{"case": _case_text(g) if g else str(c.get("requirement", "")),
                            "detail": "; ".join(x for x in (str(c.get("consider", "")),
                                                            accepted) if x)}]
                          if result == "FAIL" else []),
            })
    return {"verdict": str(vd.get("verdict", NOT_VERIFIED)), "present": True, "zones": zones,
            "deviations": [{k: str(x.get(k, "")) for k in
                            ("end", "check", "reason", "accepted_by", "date")}
                           for x in vd.get("accepted_deviations") or []],
            "reason": _ohm_text(str(vd.get("reason", ""))),
            "tolerance": num(vd.get("tolerance_pct"), 1),
            "cases_solved": f"{vd.get('cases_solved', 0):,}".replace(",", "\u2009"),
            "basis": [_ohm_text(str(n)) for n in vd.get("notes", []) or []],
            "relay_model": _relay_model(vd.get("relay_model")),
            "margin_meaning": MARGIN_MEANING}


def build_context(results, *, units: str = "si", paper: str = "a4",
                  environ: dict[str, str] | None = None,
                  results_json: str | None = None) -> dict[str, Any]:
    """The whole presentation context of one report.

    Parameters
    ----------
    results : StudyResults
        The study's results (parameters, reach study and settings).
    units : {"si", "us"}
        Units of lengths and per-length values in the report.
    paper : {"a4", "letter"}
    environ : dict, optional
        Environment (for SOURCE_DATE_EPOCH); defaults to ``os.environ``.
    results_json : str, optional
        The results JSON text (its SHA-256 is printed); made from ``results`` when absent.
    """
    import hashlib
    import os

    from relayset import io
    from relayset.report import plots

    if units not in UNITS:
        raise ValueError(f"units must be one of {', '.join(UNITS)}")
    if paper not in PAPERS:
        raise ValueError(f"paper must be one of {', '.join(PAPERS)}")
    u = UNITS[units]
    d = results.to_dict()
    if results_json is None:
        results_json = io.to_json(d)
    ident = _identity(results, d, u)
    teed = _teed(d, results.input, u)
    if teed is not None:
        ident["relay_end"] = ", ".join(e["end"] for e in teed["ends"])
    dates = document_date(d["study"], dict(os.environ if environ is None else environ))
    verification = _verification(results)
    settings = _settings_ends(d)
    reach = _reach(d)
    from relayset.report.failures import DEFINITION, failed_checks

    failures = failed_checks(d)
    failed = verification["verdict"] == "failed checks" or bool(failures)
    # Only an approved calculation without failed checks is for use.
    not_for_use = ident["status"] != "approved" or failed
    ctx: dict[str, Any] = {
        "id": ident,
        "doc_id": safe_stem(ident["line_id"], ident["revision"]),
        "paper": PAPERS[paper],
        "units": units,
        "u": u,
        "caution": results.caution,
        "version": results.relayset_version,
        "source_file": os.path.basename(results.source_file),
        "source_sha256": results.source_sha256,
        "results_sha256": hashlib.sha256(results_json.encode("utf-8")).hexdigest(),
        "date": dates.date_text,
        "date_iso": dates.iso,
        "revisions": _revisions(results),
        "inputs": _input_tables(results, d, u),
        "params": _parameters(d, u),
        "reach": reach,
        "settings": settings,
        "teed": teed,
        "verification": verification,
        "failed": failed,
        "n_failed": len(failures),
        "failed_definition": DEFINITION,
        "not_for_use": not_for_use,
        "generated": dates.generated_text,
        "when": dates.when,  # one time for the pages, the metadata and the attachments
        "philosophy": _philosophy_rows(d.get("philosophy")),
        "keywords": f"{ident['line_id']}, revision {ident['revision']}, distance protection, "
                    "setting calculation",
    }
    # The archive's hashes also go into the document metadata, so `relayset verify` can check
    # the embedded files against the metadata as well as against the printed page.
    ctx["keywords"] += (f", study file SHA-256 {ctx['source_sha256']}, results JSON SHA-256 "
                        f"{ctx['results_sha256']}")
    # and how the pages were made, so that verify can make them again from the embedded files
    ctx["keywords"] += f", units {units}, paper {paper}"
    ctx["figures"] = plots.figures(results, d, ctx)
    from relayset.export.testshots import report_tables

    ctx["test_points"] = report_tables(results)
    return ctx


def _philosophy_rows(ph: dict[str, Any] | None) -> list[tuple[str, list[tuple[str, str]]]]:
    """The philosophy applied, table by table, values written as in a TOML file."""
    if not ph:
        return []

    def text(v: Any) -> str:
        return ("true" if v else "false") if isinstance(v, bool) else str(v)

    out = []
    for table, values in ph.items():
        if isinstance(values, dict):
            out.append((str(table), [(str(k), text(v)) for k, v in values.items()]))
        else:
            out.append(("", [(str(table), text(values))]))
    return out
