"""Quantities at the edges: parse "28 ft", "0.1859 ohm/mi", "1.5 + 12j ohm" into SI floats.

Everything inside relayset is SI (m, ohm, S, F, H, Hz, V, A, W, VA, K for temperature
differences, degree Celsius for temperatures). Text quantities from input files are parsed
here with pint, which knows SI and US customary units; pint is imported on first use so
that the command line starts fast.
"""

from __future__ import annotations

import math
import re
from functools import lru_cache
from typing import Any

from relayset.errors import quote

# Each kind names the SI unit it is stored in; the parser checks dimensionality against it.
KINDS: dict[str, str] = {
    "length": "m",
    "resistance": "ohm",
    "impedance": "ohm",
    "resistance_per_length": "ohm/m",
    "resistivity": "ohm*m",
    "voltage": "V",
    "current": "A",
    "frequency": "Hz",
    "power": "VA",
    "angle": "rad",
    "temperature": "degC",
    "per_kelvin": "1/K",
    "capacitance_per_length": "F/m",
    "dimensionless": "",
}

#: A decimal number as written in a study file (regular expression, no groups).
NUMBER = _NUM = r"[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?"
_REAL = re.compile(rf"^\s*({_NUM})\s*(.*?)\s*$")
_DECIMAL_COMMA = re.compile(r"^\s*[+-]?\d+,\d+")

_MI, _FT = 1609.344, 0.3048  # exact by definition (NIST SP 811, Appendix B)
_DEG = math.pi / 180.0

#: SI factors of the units study files use most, so that the common case needs no pint
#: (building pint's registry costs 0.2-0.4 s). Every entry is checked against pint in
#: tests/test_units.py; anything not listed here goes to pint.
FAST_UNITS: dict[str, dict[str, float]] = {
    "length": {"m": 1.0, "mm": 1e-3, "cm": 1e-2, "km": 1e3, "ft": _FT, "in": 0.0254,
               "mi": _MI, "yd": 0.9144},
    "resistance": {"ohm": 1.0, "kohm": 1e3},
    "impedance": {"ohm": 1.0, "kohm": 1e3},
    "resistance_per_length": {"ohm/m": 1.0, "ohm/km": 1e-3, "ohm/mi": 1 / _MI,
                              "ohm/ft": 1 / _FT, "ohm/kft": 1 / (1e3 * _FT)},
    "resistivity": {"ohm*m": 1.0},
    "voltage": {"V": 1.0, "kV": 1e3, "MV": 1e6},
    "current": {"A": 1.0, "kA": 1e3},
    "frequency": {"Hz": 1.0},
    "power": {"VA": 1.0, "kVA": 1e3, "MVA": 1e6, "GVA": 1e9, "W": 1.0, "kW": 1e3, "MW": 1e6,
              "GW": 1e9, "var": 1.0, "kvar": 1e3, "Mvar": 1e6},
    "angle": {"deg": _DEG, "degree": _DEG, "degrees": _DEG, "rad": 1.0},
    "temperature": {"degC": 1.0},
    "per_kelvin": {"1/K": 1.0},
    "dimensionless": {"pu": 1.0},
}

# Spellings engineers use that pint reads otherwise ("ohm-m" would be ohm minus metre).
_ALIASES = [
    (re.compile(r"(?i)\b(ohms?|Ω)\s*[-.·⋅]\s*(m|ft)\b"), r"ohm*\2"),
    (re.compile(r"(?i)\bohms\b|Ω"), "ohm"),
]


def _normalise_unit(unit: str) -> str:
    for pattern, repl in _ALIASES:
        unit = pattern.sub(repl, unit)
    return unit.strip()


@lru_cache(maxsize=1)
def registry() -> Any:
    """The one pint registry relayset uses (built once, on first use)."""
    import pint

    ureg = pint.UnitRegistry(autoconvert_offset_to_baseunit=True)
    ureg.define("var = volt_ampere")  # reactive power, same dimension as VA
    ureg.define("pu = 1 = p.u.")
    return ureg


class UnitRuleError(ValueError):
    """A text quantity breaks a unit rule; the message is the rule, for an InputError."""


def _to_si(magnitude: float, unit: str, kind: str) -> float:
    target = KINDS[kind]
    unit = _normalise_unit(unit)
    fast = FAST_UNITS[kind].get(unit)
    if fast is not None:
        return magnitude * fast
    if unit == "":
        if kind == "dimensionless":
            return float(magnitude)
        raise UnitRuleError(f"needs a unit of {kind.replace('_', ' ')} (for example "
                            f"'{target_example(kind)}')")
    ureg = registry()
    try:
        q = ureg.Quantity(magnitude, unit)
    except Exception as exc:  # pint raises several error types for unknown units
        raise UnitRuleError(f"unit {quote(unit)} is not a known unit"
                            + _unit_hint(unit, kind)) from exc
    try:
        return float(q.to(target).magnitude) if target else float(q.to("").magnitude)
    except Exception as exc:
        raise UnitRuleError(
            f"unit {quote(unit)} is not a unit of {kind.replace('_', ' ')} "
            f"(expected like '{target}')"
        ) from exc


def _unit_hint(unit: str, kind: str) -> str:
    if unit.startswith(","):
        return " (use a decimal point, not a decimal comma)"
    from relayset.errors import suggest

    return suggest(unit, FAST_UNITS[kind]) or f" (for example '{target_example(kind)}')"


def target_example(kind: str) -> str:
    """A unit of the kind to show in messages."""
    return {"angle": "deg", "voltage": "kV", "power": "MVA"}.get(kind, KINDS[kind] or "pu")


def _decimal_comma(text: str) -> None:
    if _DECIMAL_COMMA.match(text):
        raise UnitRuleError("uses a decimal comma; write the number with a decimal point "
                            f"(like {quote(text.strip().replace(',', '.', 1))})")


def _finite(x: float) -> float:
    if not math.isfinite(x):
        raise UnitRuleError("must be a finite number (NaN and infinity are not allowed)")
    return x


def parse_real(value: Any, kind: str) -> float:
    """Parse a real quantity to SI.

    Parameters
    ----------
    value : str or number
        Text such as ``"28 ft"``; a bare number is accepted only for dimensionless kinds.
    kind : str
        A key of :data:`KINDS`.

    Returns
    -------
    float
        The value in the kind's SI unit.
    """
    if isinstance(value, bool):
        raise UnitRuleError("must be a number with a unit, not true/false")
    if isinstance(value, int | float):
        return _finite(_to_si(float(value), "", kind))
    if not isinstance(value, str):
        raise UnitRuleError(f"must be text like '10 {KINDS[kind]}'")
    text = value.strip()
    if text.lower() in {"nan", "inf", "-inf", "+inf"} or re.match(r"^[+-]?(nan|inf)\b", text, re.I):
        raise UnitRuleError("must be a finite number (NaN and infinity are not allowed)")
    _decimal_comma(text)
    m = _REAL.match(text)
    if not m:
        raise UnitRuleError("is not a number followed by a unit (like "
                            f"'10 {target_example(kind)}')")
    return _finite(_to_si(float(m.group(1)), m.group(2), kind))


def parse_complex(value: Any, kind: str = "impedance") -> complex:
    """Parse a complex quantity such as ``"1.5 + 12j ohm"`` or ``"12j ohm"`` to SI."""
    if isinstance(value, int | float) and not isinstance(value, bool):
        return complex(parse_real(value, kind))
    if not isinstance(value, str):
        raise UnitRuleError("must be text like '1.5 + 12j ohm'")
    text = value.strip()
    if re.search(r"(nan|inf)", text, re.I):
        raise UnitRuleError("must be a finite number (NaN and infinity are not allowed)")
    _decimal_comma(text)
    # The number is the longest leading run that Python's complex() accepts; the rest is the unit.
    m = re.match(r"^[\s\d.eE+\-jJ()]*", text)
    head = m.group(0) if m else ""
    number = None
    for cut in range(len(head), 0, -1):
        try:
            number = complex(head[:cut].replace(" ", ""))
        except ValueError:
            continue
        unit = text[cut:].strip()
        break
    if number is None:
        raise UnitRuleError("is not a complex number with a unit (like '1.5 + 12j ohm')")
    scale = _to_si(1.0, unit, kind)
    return complex(_finite(number.real * scale), _finite(number.imag * scale))


def parse_ratio(value: Any) -> float:
    """Parse an instrument-transformer ratio such as ``"800/1 A"`` or ``"132000/110 V"``.

    Returns
    -------
    float
        Primary over secondary (dimensionless). Both sides must be positive.
    """
    if isinstance(value, int | float) and not isinstance(value, bool):
        ratio = float(value)
    elif isinstance(value, str):
        _decimal_comma(value)
        m = re.match(rf"^\s*({_NUM})\s*(?:/|:)\s*({_NUM})\s*([A-Za-z]*)\s*$", value)
        if not m:
            raise UnitRuleError("is not a ratio like '800/1 A' or '132000/110 V'")
        prim, sec = float(m.group(1)), float(m.group(2))
        if prim <= 0 or sec <= 0:
            raise UnitRuleError("both sides of a ratio must be greater than zero")
        ratio = prim / sec
    else:
        raise UnitRuleError("is not a ratio like '800/1 A'")
    ratio = _finite(ratio)
    if ratio <= 0:
        raise UnitRuleError("a ratio must be greater than zero")
    return ratio
