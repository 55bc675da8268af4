"""Resistive reach of a quadrilateral: arc current and the load rays it is checked along."""

from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np

from relayset.settings.inputs import SettingsInputs


def arc_current(i: SettingsInputs) -> float | None:
    if i.arc_current_a is not None:
        return i.arc_current_a
    if i.source_z1_relay_ohm is None:
        return None
    # Phase-to-phase fault at the remote bus fed from the relay end alone: the smallest
    # current and so the largest arc resistance the zones must cover.
    return i.v_nominal_ll_v / abs(2 * (i.source_z1_relay_ohm + i.z1_line_ohm))


def load_rays(phi_max: float, extra: Sequence[float] = ()) -> np.ndarray:
    """Ray angles of the load ranges (export around 0, import around π) [rad].

    The distance from the origin to a straight edge is largest at the edge's ends, so a
    dense grid plus the shape's corner (or mho diameter) angles inside the ranges gives the
    largest reach over the range exactly.
    """
    fwd = np.linspace(-phi_max, phi_max, 721)
    rays = [fwd, np.pi + fwd]
    for a in extra:
        for centre in (0.0, np.pi):
            d = math.remainder(a - centre, 2 * math.pi)
            if abs(d) <= phi_max:
                rays.append(np.array([centre + d]))
    return np.concatenate(rays)
