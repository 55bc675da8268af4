"""Unit parsing at the edges: SI and US customary text to SI floats.

Conversion factors are exact by definition (NIST SP 811, Appendix B): 1 ft = 0.3048 m,
1 in = 0.0254 m, 1 mi = 1609.344 m.
"""

from __future__ import annotations

import math

import pytest

from relayset.inputs.units import UnitRuleError, parse_complex, parse_ratio, parse_real


@pytest.mark.parametrize(("text", "kind", "si"), [
    ("28 ft", "length", 28 * 0.3048),
    ("0.0313 ft", "length", 0.0313 * 0.3048),
    ("0.927 in", "length", 0.927 * 0.0254),
    ("84 km", "length", 84e3),
    ("27 mi", "length", 27 * 1609.344),
    ("0.1859 ohm/mi", "resistance_per_length", 0.1859 / 1609.344),
    ("0.1188 ohm/km", "resistance_per_length", 0.1188e-3),
    ("100 ohm*m", "resistivity", 100.0),
    ("132 kV", "voltage", 132e3),
    ("2500 MVA", "power", 2.5e9),
    ("20 Mvar", "power", 2e7),
    ("75 degC", "temperature", 75.0),
    ("30 deg", "angle", math.radians(30)),
    ("0.00403 1/K", "per_kelvin", 0.00403),
])
def test_parse_real(text, kind, si):
    assert parse_real(text, kind) == pytest.approx(si, rel=1e-12)


@pytest.mark.parametrize(("text", "z"), [
    ("1.5 + 12j ohm", 1.5 + 12j),
    ("12j ohm", 12j),
    ("-0.5-4j ohm", -0.5 - 4j),
    ("(2+20j) ohm", 2 + 20j),
    ("5 ohm", 5 + 0j),
])
def test_parse_complex(text, z):
    assert parse_complex(text) == pytest.approx(z, rel=1e-12)


def test_ratios():
    assert parse_ratio("800/1 A") == 800
    assert parse_ratio("132000/110 V") == pytest.approx(1200)
    with pytest.raises(UnitRuleError, match="greater than zero"):
        parse_ratio("0/1 A")
    with pytest.raises(UnitRuleError, match="greater than zero"):
        parse_ratio("-800/1 A")


@pytest.mark.parametrize(("text", "kind", "rule"), [
    ("28 kg", "length", "not a unit of length"),
    ("28", "length", "needs a unit"),
    ("nan m", "length", "finite"),
    ("1e999 m", "length", "finite"),
    ("28 furlongz", "length", "not a known unit"),
    ("ft 28", "length", "not a number"),
])
def test_bad_quantities(text, kind, rule):
    with pytest.raises(UnitRuleError, match=rule):
        parse_real(text, kind)


def test_fast_unit_table_agrees_with_pint():
    """Every unit of the no-pint fast path converts as pint (the general-purpose unit
    library) converts it, to 1e-12 relative."""
    from relayset.inputs.units import FAST_UNITS, KINDS, registry

    ureg = registry()
    for kind, table in FAST_UNITS.items():
        for unit, factor in table.items():
            expected = ureg.Quantity(1.0, unit).to(KINDS[kind] or "").magnitude
            assert factor == pytest.approx(expected, rel=1e-12, abs=0), (kind, unit)


def test_common_units_do_not_load_pint():
    import subprocess
    import sys

    code = ("import sys; from relayset.inputs.study_file import load_study; "
            "from relayset.resources import demo_studies; "
            "[load_study(p) for p in demo_studies()]; print('pint' in sys.modules)")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True).stdout.strip()
    assert out == "False"


@pytest.mark.parametrize("text", ["100 ohm-m", "100 ohm.m", "100 ohm m", "100 Ω·m",
                                  "100 ohm*m", "100 ohms-m", "328.084 ohm-ft"])
def test_resistivity_spellings(text):
    assert parse_real(text, "resistivity") == pytest.approx(100.0, rel=1e-5)


@pytest.mark.parametrize(("text", "kind"), [("21,5 m", "length"), ("1,5 + 12j ohm", "impedance")])
def test_decimal_comma_hint(text, kind):
    parse = parse_complex if kind == "impedance" else parse_real
    with pytest.raises(UnitRuleError, match="decimal comma"):
        parse(text, kind)


def test_decimal_comma_in_ratio():
    with pytest.raises(UnitRuleError, match="decimal comma"):
        parse_ratio("800,5/1 A")
