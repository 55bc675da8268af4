"""Setting policy checks: line class by SIR (IEEE Std C37.113 thresholds)."""

from __future__ import annotations

import numpy as np

#: SIR thresholds of IEEE Std C37.113-2015 (from memory): short at or above, long at or below.
SIR_SHORT_MIN = 4.0
SIR_LONG_MAX = 0.5


def line_class(sir_value: float | np.ndarray) -> str | np.ndarray:
    """Line-length class by SIR per IEEE Std C37.113-2015 [2] (thresholds from memory).

    short: SIR >= 4; medium: 0.5 < SIR < 4; long: SIR <= 0.5.

    Parameters
    ----------
    sir_value : float or array
        Source-to-line impedance ratio [1].

    Returns
    -------
    str or ndarray of str
        ``"short"``, ``"medium"`` or ``"long"``.
    """
    s = np.asarray(sir_value, dtype=float)
    out = np.where(s >= SIR_SHORT_MIN, "short", np.where(s <= SIR_LONG_MAX, "long", "medium"))
    return str(out) if out.ndim == 0 else out
