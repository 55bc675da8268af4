"""The infeed factor a zone beyond the remote bus is stretched by."""

from __future__ import annotations

from relayset.physics import zones as zp
from relayset.settings.context import ZONE_LABELS, RuleContext


def infeed(w: RuleContext, zone: str, mode: str, factor: float) -> tuple[complex, str]:
    i = w.inputs
    if mode == "given":
        return complex(factor), f"infeed factor {factor:g} (given)"
    if i.infeed_range is not None:
        # Simulated range: zone 2 graded at the least infeed, zone 3 sized at the most.
        k = i.infeed_range[0] if zone == "zone2" else i.infeed_range[1]
        which = "minimum" if zone == "zone2" else "maximum"
        return complex(k), f"infeed factor {abs(k):.3g} ({which} of the simulated cases)"
    if i.source_z1_relay_ohm is None or i.source_z1_remote_ohm is None:
        w.warn(
            f"{zone}_infeed_not_computed",
            f"{ZONE_LABELS[zone]}: infeed factor set to 'computed' but the source impedance at "
            "the relay end or the remote end is not given; K = 1 (no infeed) used",
            "give both source impedances, or set the infeed factor in the philosophy",
        )
        return 1.0 + 0j, "infeed factor 1 (sources not given)"
    k = complex(zp.infeed_factor(i.source_z1_relay_ohm, i.z1_line_ohm, i.source_z1_remote_ohm))
    return k, f"infeed factor {abs(k):.3g} (computed from the sources)"
