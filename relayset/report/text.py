"""Console summaries rendered from templates/ with Jinja2 (presentation lives there).

Templates do no arithmetic: unit conversions are the methods of :class:`OutputUnits`, and
every other number comes from the results model as it is.
"""

from __future__ import annotations

import cmath
import math
import os
from dataclasses import dataclass
from functools import lru_cache
from pathlib import Path
from typing import Any

from relayset.resources import templates_dir

MILE_M = 1609.344  # exact, international mile


@dataclass(frozen=True)
class OutputUnits:
    """The output unit system of a summary: SI (per km) or US customary (per mile)."""

    name: str  #: "si" or "us"
    per: str  #: "km" or "mi"
    metres: float  #: metres in one ``per`` unit

    def length(self, x_m: float) -> float:
        """A length [m] in km or miles."""
        return x_m / self.metres

    def per_length(self, x_per_m: Any) -> Any:
        """A per-metre quantity (complex or real) per km or per mile."""
        return x_per_m * self.metres

    def nf_per_length(self, c_f_per_m: float) -> float:
        """A capacitance [F/m] in nF per km or per mile."""
        return c_f_per_m * 1e9 * self.metres


UNIT_SYSTEMS = {
    "si": OutputUnits("si", "km", 1e3),
    "us": OutputUnits("us", "mi", MILE_M),
}


def _cache_dir() -> Path | None:
    """The user's cache folder for compiled templates, or None where there is none."""
    base = os.environ.get("XDG_CACHE_HOME")
    if not base and os.name == "nt":
        base = os.environ.get("LOCALAPPDATA")
    if base and not os.path.isabs(base):
        base = None  # a relative path is ignored (XDG Base Directory Specification)
    try:
        root = Path(base) if base else Path.home() / ".cache"
    except RuntimeError:  # no home folder
        return None
    return root / "relayset" / "templates"


def _fingerprint(env) -> str:
    """What the compiled code of a template depends on besides its source: the Jinja2
    version and the environment's syntax and compile options."""
    import hashlib

    import jinja2

    opts = (jinja2.__version__, env.block_start_string, env.block_end_string,
            env.variable_start_string, env.variable_end_string, env.comment_start_string,
            env.comment_end_string, env.line_statement_prefix, env.line_comment_prefix,
            env.trim_blocks, env.lstrip_blocks, env.newline_sequence, env.keep_trailing_newline,
            env.autoescape, env.optimized, env.finalize is not None, sorted(env.extensions))
    return hashlib.sha256(repr(opts).encode()).hexdigest()[:16]


@lru_cache(maxsize=4)
def _bytecode_cache(fingerprint: str):
    """A cache of the compiled console templates in the user's cache folder.

    Compiling a template costs 20-40 ms per process. Jinja2 keys the cached code by the
    template's path and checks it against the checksum of its source and the Python version;
    the file name adds ``fingerprint`` (:func:`_fingerprint`), so an edited template, another
    Jinja2 or other environment options are compiled afresh. The cache is only an accelerator:
    an unwritable, foreign or corrupt cache silently falls back to compiling, with identical
    output. Compiled code is executed, so a folder that others can write to is never used.
    """
    import jinja2

    folder = _cache_dir()
    if folder is None:
        return None
    try:
        folder.mkdir(mode=0o700, parents=True, exist_ok=True)
        st = folder.stat()
        if os.name != "nt" and (st.st_uid != os.getuid() or st.st_mode & 0o022):
            return None
    except OSError:
        return None

    class QuietCache(jinja2.FileSystemBytecodeCache):
        def load_bytecode(self, bucket) -> None:
            try:
                super().load_bytecode(bucket)
            except Exception:  # unreadable or corrupt: compile instead
                bucket.reset()

        def dump_bytecode(self, bucket) -> None:
            try:
                super().dump_bytecode(bucket)
            except OSError:  # full or read-only: just no cache
                pass

    return QuietCache(str(folder), f"%s-{fingerprint}.cache")


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
    env.filters["pct"] = fmt_pct_of
    env.bytecode_cache = _bytecode_cache(_fingerprint(env))
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


def fmt_pct_of(ratio: complex | float, digits: int = 3) -> str:
    """The magnitude of a ratio in percent (e.g. an unbalance factor)."""
    return fmt_float(100 * abs(ratio), digits)


def render(template: str, **context: Any) -> str:
    return _env().get_template(template).render(**context)


def _context(results, unit_system: str) -> dict[str, Any]:
    return {"r": results, "p": results.parameters, "u": UNIT_SYSTEMS[unit_system], "zip": zip}


def params_summary(results, unit_system: str = "si") -> str:
    """The readable parameter summary of one study."""
    return render("params.txt.j2", **_context(results, unit_system))


def reach_summary(results, unit_system: str = "si") -> str:
    """The reach-study table of one study."""
    return render("reach.txt.j2", **_context(results, unit_system))


def settings_summary(results, unit_system: str = "si") -> str:
    """The settings table and warnings of one study, one block per relay end (a
    three-terminal line: :func:`relayset.report.teed.teed_summary`)."""
    if getattr(results, "teed", None) is not None:
        from relayset.report.teed import teed_summary

        return teed_summary(results.teed, results.source_file)
    # Imported here: the setting tables load the settings package, which params/reach skip.
    from relayset.report.tables import settings_rows
    from relayset.settings.context import ZONE_LABELS

    return render("settings.txt.j2", **_context(results, unit_system),
                  zone_labels=ZONE_LABELS, settings_rows=settings_rows)
