"""The built-in conductor table and the resolution of a conductor type to its electrical data."""

from __future__ import annotations

import math
import tomllib
from dataclasses import dataclass
from functools import lru_cache
from importlib import resources

from relayset.errors import InputError, suggest


@dataclass(frozen=True)
class ConductorData:
    """Electrical data of one conductor type at its operating temperature (SI)."""

    name: str  #: the type's name in the study file
    description: str  #: code word or "explicit properties"
    r_ac_ohm_per_m: float  #: AC resistance at the operating temperature [ohm/m]
    gmr_m: float  #: geometric mean radius [m]
    radius_m: float  #: outside radius [m]
    operating_temperature_c: float  #: [degC]
    source: str  #: where the data came from
    notes: tuple[str, ...] = ()  #: assumptions made on the way


@lru_cache(maxsize=1)
def builtin_table() -> dict[str, dict]:
    """The shipped table (relayset/data/conductors.toml), keyed by code word."""
    text = resources.files("relayset").joinpath("data/conductors.toml").read_text("utf-8")
    return tomllib.loads(text).get("conductor", {})


def lookup(code: str, *, field: str, source: str) -> tuple[str, dict]:
    """Find a conductor by code word or alias (case-insensitive)."""
    table = builtin_table()
    names: dict[str, str] = {}
    for key, entry in table.items():
        names[key.lower()] = key
        for alias in entry.get("aliases", []):
            names[str(alias).lower()] = key
    key = names.get(code.strip().lower())
    if key is None:
        choices = list(table) + [a for e in table.values() for a in e.get("aliases", [])]
        raise InputError(
            "unknown conductor code" + (suggest(code, choices) or "; run 'relayset conductors'"),
            field=field,
            value=code,
            source=source,
        )
    return key, table[key]


def resolve(
    name: str,
    props: dict,
    frequency_hz: float,
    *,
    field: str,
    source: str,
) -> ConductorData:
    """Turn table or explicit properties into :class:`ConductorData`.

    ``props`` holds SI values with these keys (all optional but see the rules):
    ``outside_diameter_m``, ``gmr_m``, ``strands_aluminium``, ``strands_steel``,
    ``wire_diameter_aluminium_m``, ``wire_diameter_steel_m``, ``ac_resistance_ohm_per_m``,
    ``ac_resistance_temperature_c``, ``dc_resistance_20c_ohm_per_m``,
    ``temperature_coefficient_per_k``, ``ac_dc_ratio``, ``operating_temperature_c``.
    """
    # Imported here: `relayset conductors` lists the table without loading numpy.
    from relayset.physics import conductor as cphys

    notes: list[str] = []
    diameter = props.get("outside_diameter_m")
    if diameter is None:
        raise InputError("an outside diameter is required", field=f"{field}.outside_diameter",
                         source=source)
    radius = diameter / 2
    alpha = props.get("temperature_coefficient_per_k", 0.00403)
    t_op = props.get("operating_temperature_c")
    # GMR: given, or from the stranding geometry.
    gmr = props.get("gmr_m")
    if gmr is None:
        n_al, n_st = props.get("strands_aluminium"), props.get("strands_steel", 0)
        d_al, d_st = props.get("wire_diameter_aluminium_m"), props.get("wire_diameter_steel_m")
        layers = cphys.ALUMINIUM_LAYERS.get((n_al, n_st)) if n_al else None
        if layers is None or d_al is None:
            raise InputError(
                "needs gmr, or strands_aluminium/strands_steel of a known construction "
                f"({', '.join(f'{a}/{s}' for a, s in cphys.ALUMINIUM_LAYERS)}) and "
                "wire_diameter_aluminium",
                field=f"{field}.gmr",
                source=source,
            )
        if n_st and d_st is None:
            raise InputError("stranding with steel needs wire_diameter_steel",
                             field=f"{field}.wire_diameter_steel", source=source)
        core = {0: 0.0, 1: (d_st or 0) / 2, 7: 1.5 * (d_st or 0), 19: 2.5 * (d_st or 0)}[n_st]
        gmr = cphys.gmr_from_stranding(layers, d_al / 2, core)
        notes.append(f"{name}: GMR {gmr * 1e3:.3f} mm from {n_al}/{n_st} stranding "
                     "(steel core carries no current)")
    if gmr >= radius:
        raise InputError(f"GMR must be smaller than the outside radius ({radius * 1e3:.2f} mm)",
                         field=f"{field}.gmr", value=f"{gmr * 1e3:.3f} mm", source=source)
    # Resistance at the operating temperature.
    r_ac_ref = props.get("ac_resistance_ohm_per_m")
    if r_ac_ref is not None:
        t_ref = props.get("ac_resistance_temperature_c", 20.0)
        t = t_ref if t_op is None else t_op
        r_ac = cphys.resistance_at_temperature(r_ac_ref, t_ref, t, alpha)
        if t != t_ref:
            notes.append(f"{name}: AC resistance corrected from {t_ref:g} to {t:g} degC "
                         f"(alpha = {alpha:g} 1/K)")
    else:
        r_dc20 = props.get("dc_resistance_20c_ohm_per_m")
        if r_dc20 is None:
            raise InputError("needs ac_resistance (with its temperature) or dc_resistance_20c",
                             field=f"{field}.ac_resistance", source=source)
        t = 20.0 if t_op is None else t_op
        r_dc = cphys.resistance_at_temperature(r_dc20, 20.0, t, alpha)
        ratio = props.get("ac_dc_ratio")
        if ratio is None:
            ratio = cphys.skin_effect_ratio(r_dc, radius, frequency_hz)
            notes.append(f"{name}: AC/DC ratio {ratio:.4f} from the solid round-wire skin "
                         "effect at the system frequency")
        r_ac = r_dc * ratio
    if not (math.isfinite(r_ac) and r_ac > 0):
        raise InputError("resistance at the operating temperature must be positive",
                         field=f"{field}.operating_temperature", value=t, source=source)
    return ConductorData(
        name=name,
        description=props.get("_description", "explicit properties"),
        r_ac_ohm_per_m=float(r_ac),
        gmr_m=float(gmr),
        radius_m=float(radius),
        operating_temperature_c=float(t),
        source=props.get("_source", "study file"),
        notes=tuple(notes),
    )
