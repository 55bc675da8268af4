"""Small array helpers shared by the physics and the studies."""

from __future__ import annotations

import numpy as np


def unique_sorted(x) -> np.ndarray:
    """The distinct values of ``x``, flattened and sorted, as ``np.unique(x)`` gives them
    for values without NaN (NaN are kept, not merged; the callers' values are finite).

    ``np.unique`` loads ``numpy.ma`` on first use (some 10 ms of start-up for a command
    that reads one study); sorting and dropping repeated neighbours needs no more.
    """
    a = np.sort(np.asarray(x).ravel())
    if a.size == 0:
        return a
    return a[np.concatenate([[True], a[1:] != a[:-1]])]
