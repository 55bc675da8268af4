"""The one JSON convention of the results model: units in keys, complex as [re, im].

Complex values are ``[re, im]``; polar values ``{magnitude, angle_deg}``; matrices
``{re: rows, im: rows}``; per-length values per km. Every ``to_dict`` of the results model
uses these helpers and nothing else, so the same quantity is written the same way everywhere.
"""

from __future__ import annotations

import cmath
import math

import numpy as np

PER_KM = 1e3


def cplx(z: complex, scale: float = 1.0) -> list[float]:
    """A complex number as [re, im] (JSON has no complex type)."""
    z = complex(z) * scale
    return [float(z.real), float(z.imag)]


def polar(z: complex) -> dict[str, float]:
    """A complex number as {magnitude, angle_deg}."""
    return {"magnitude": float(abs(z)), "angle_deg": float(math.degrees(cmath.phase(z)))}


def matrix(m: np.ndarray, scale: float = 1.0) -> dict[str, list[list[float]]]:
    """A complex matrix as {"re": rows, "im": rows}."""
    m = np.asarray(m, dtype=complex) * scale
    return {"re": m.real.tolist(), "im": m.imag.tolist()}
