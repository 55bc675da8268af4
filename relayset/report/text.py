"""Console summaries rendered from templates/ with Jinja2 (presentation lives there)."""

from __future__ import annotations

import cmath
import math
from typing import Any

from relayset.resources import templates_dir

#: Output unit systems: label and factor from per-metre values.
UNIT_SYSTEMS: dict[str, dict[str, Any]] = {
    "si": {"per": "km", "per_m": 1e3, "len": "km", "len_m": 1e-3},
    "us": {"per": "mi", "per_m": 1609.344, "len": "mi", "len_m": 1 / 1609.344},
}


def _env():
    import jinja2

    env = jinja2.Environment(
        loader=jinja2.FileSystemLoader(str(templates_dir())),
        autoescape=False,  # plain-text console output; HTML templates use autoescape
        undefined=jinja2.StrictUndefined,
        trim_blocks=True,
        lstrip_blocks=True,
        keep_trailing_newline=True,
    )
    env.filters["c"] = fmt_complex
    env.filters["p"] = fmt_polar
    env.filters["f"] = fmt_float
    return env


def fmt_complex(z: complex, digits: int = 4) -> str:
    z = complex(z)
    sign = "+" if z.imag >= 0 else "-"
    return f"{z.real:.{digits}f} {sign} j{abs(z.imag):.{digits}f}"


def fmt_polar(z: complex, digits: int = 4) -> str:
    z = complex(z)
    return f"{abs(z):.{digits}f} at {math.degrees(cmath.phase(z)):.2f} deg"


def fmt_float(x: float, digits: int = 3) -> str:
    if x is None or (isinstance(x, float) and not math.isfinite(x)):
        return "-"
    if abs(x) < 0.5 * 10.0**-digits:
        x = 0.0  # no "-0.00"
    return f"{x:.{digits}f}"


def render(template: str, **context: Any) -> str:
    return _env().get_template(template).render(**context)


def params_summary(results, unit_system: str = "si") -> str:
    """The readable parameter summary of one study."""
    u = UNIT_SYSTEMS[unit_system]
    p = results.parameters
    return render("params.txt.j2", r=results, p=p, u=u, zip=zip)


def reach_summary(results, unit_system: str = "si") -> str:
    """The reach-study table of one study."""
    return render("reach.txt.j2", r=results, u=UNIT_SYSTEMS[unit_system])


def settings_summary(results, unit_system: str = "si") -> str:
    """The settings table and warnings of one study."""
    return render("settings.txt.j2", r=results, u=UNIT_SYSTEMS[unit_system])
