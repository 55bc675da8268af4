"""``[[series_capacitors]]``: series capacitor banks in the protected line.

A bank sits at a line end (``at`` = the bus) or mid-line (``distance`` from the bus
``measured_from``). Its size is the degree of compensation in % of the line's
positive-sequence reactance, or its reactance; its overvoltage protection is a metal-oxide
varistor whose protective level is given in per unit of the rated capacitor voltage (with
the rated current) or as a current. For a line-end bank, ``vt_side`` says on which side of
the bank the relay's voltage transformer at that bus is. A double-circuit line has a bank
of the same size in each circuit.

Example::

    [[series_capacitors]]
    name = "Midway bank"
    distance = "210 km"
    measured_from = "Alder Cross"
    compensation_pct = 45
    protective_level = 2.3          # per unit of the rated capacitor voltage (peak/peak)
    rated_current = "2.5 kA"        # RMS

Rules across tables (:func:`check_series_capacitors`): the bus is an end of this line, the
place lies on the line, compensation above 0 and at most 100 %.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

from relayset.errors import quote, suggest
from relayset.inputs import units
from relayset.inputs.schema import KeyRuleError, one_of, spec
from relayset.inputs.schema import raw_at as _raw

__all__ = ["MAX_SERIES_CAPACITORS", "SeriesCapacitor", "check_series_capacitors"]

#: At most this many banks in one line (common practice, no source: one or two per line).
MAX_SERIES_CAPACITORS = 4


def _text(v: Any) -> str:
    if not isinstance(v, str) or not v.strip() or len(v) > 100:
        raise ValueError("must be text of 1 to 100 characters")
    return v


def _quantity(kind: str, lo: float, hi: float, show: str, factor: float
              ) -> Callable[[Any], float]:
    def parse(v: Any) -> float:
        x = units.parse_real(v, kind)
        if not lo < x <= hi:
            raise ValueError(f"must be above {lo / factor:g} {show} and at most "
                             f"{hi / factor:g} {show} (plausible range)")
        return x
    return parse


def _percent(v: Any) -> float:
    if isinstance(v, bool) or not isinstance(v, int | float):
        raise ValueError("must be a plain number (% of the line's positive-sequence "
                         "reactance)")
    x = float(v)
    if not (x == x and 0 < x <= 100):
        raise ValueError("must be above 0 and at most 100 % of the line's "
                         "positive-sequence reactance")
    return x


def _pu(v: Any) -> float:
    if isinstance(v, bool) or not isinstance(v, int | float):
        raise ValueError("must be a plain number (per unit of the rated capacitor voltage)")
    x = float(v)
    if not (x == x and 1.0 <= x <= 5.0):
        raise ValueError("must be between 1 and 5 per unit of the rated capacitor voltage "
                         "(plausible range)")
    return x


@dataclass(frozen=True, kw_only=True)
class SeriesCapacitor:
    """One ``[[series_capacitors]]`` table, SI inside."""

    name: str = spec(_text, "")
    #: a line-end bank: the bus it is at
    at: str | None = spec(_text, None)
    #: a mid-line bank: its distance [m] from the bus ``measured_from``
    distance: float | None = spec(_quantity("length", 0.0, 3e6, "km", 1e3), None)
    measured_from: str | None = spec(_text, None)
    #: degree of compensation [% of the line's positive-sequence reactance]
    compensation_pct: float | None = spec(_percent, None)
    #: or the bank's reactance per phase [ohm]
    reactance: float | None = spec(_quantity("impedance", 0.0, 1e4, "ohm", 1.0), None)
    #: varistor protective level [per unit of the rated capacitor voltage] with the rated
    #: current [A, RMS], or the protective-level current [A, RMS] directly
    protective_level: float | None = spec(_pu, None)
    rated_current: float | None = spec(_quantity("current", 0.0, 2e4, "kA", 1e3), None)
    protective_level_current: float | None = spec(
        _quantity("current", 0.0, 1e5, "kA", 1e3), None)
    #: line-end bank: the relay's voltage transformer at that bus on the "bus" or "line"
    #: side of the bank
    vt_side: str = spec(one_of("bus", "line"), "bus")

    def _check(self) -> None:
        if (self.at is None) == (self.distance is None):
            raise ValueError("give either at (a bus, for a line-end bank) or distance with "
                             "measured_from (a mid-line bank)")
        if self.distance is not None and self.measured_from is None:
            raise KeyRuleError("distance", "give measured_from (the bus the distance is "
                               "measured from) with distance")
        if self.at is not None and self.measured_from is not None:
            raise KeyRuleError("measured_from", "belongs to distance (a mid-line bank), "
                               "not to at")
        if (self.compensation_pct is None) == (self.reactance is None):
            raise ValueError("give either compensation_pct or reactance")
        if self.protective_level_current is None:
            if self.protective_level is None or self.rated_current is None:
                raise ValueError("give the varistor's protective level: protective_level "
                                 "with rated_current, or protective_level_current")
        elif self.protective_level is not None:
            raise KeyRuleError("protective_level", "give either protective_level (with "
                               "rated_current) or protective_level_current, not both")

    @property
    def protective_current_a(self) -> float:
        """Protective-level current [A, RMS]: the capacitor current whose peak voltage
        reaches the varistor's protective level."""
        if self.protective_level_current is not None:
            return self.protective_level_current
        return self.protective_level * self.rated_current

    def reactance_ohm(self, x_line1_ohm: float) -> float:
        """The bank's reactance [ohm] on a line of positive-sequence reactance
        ``x_line1_ohm`` [ohm]."""
        if self.reactance is not None:
            return self.reactance
        return self.compensation_pct / 100.0 * x_line1_ohm

    def place(self, ends: tuple[str, str], length_m: float) -> float:
        """Place as a fraction of the line from the first end [1]."""
        if self.at is not None:
            return 0.0 if self.at == ends[0] else 1.0
        x = self.distance / length_m
        return x if self.measured_from == ends[0] else 1.0 - x


def check_series_capacitors(study: Any, data: dict, fail: Callable[..., None]) -> None:
    """The rules of the banks across tables: buses are ends of this line, a mid-line place
    lies inside the line, one bank per bus end, at most :data:`MAX_SERIES_CAPACITORS`."""
    banks = getattr(study, "series_capacitors", ())
    ends = study.ends
    length = study.line.length
    if len(banks) > MAX_SERIES_CAPACITORS:
        fail(f"at most {MAX_SERIES_CAPACITORS} banks in one line", "series_capacitors",
             len(banks))
    seen = {}
    for k, b in enumerate(banks):
        for key in ("at", "measured_from"):
            bus = getattr(b, key)
            if bus is not None and bus not in ends:
                fail(f"names no end of this line (the ends are {quote(ends[0])} and "
                     f"{quote(ends[1])})" + suggest(bus, ends), f"series_capacitors[{k}].{key}",
                     bus)
        if b.distance is not None and not b.distance < length:
            fail(f"must lie inside the line (the line is {_raw(data, 'line', 'length')} long; "
                 "a bank at a bus is given with at)", f"series_capacitors[{k}].distance",
                 _raw(data, "series_capacitors", k, "distance"))
        if b.at is not None:
            if b.at in seen:
                fail(f"a second bank at the same bus (the first is series_capacitors"
                     f"[{seen[b.at]}]); give one bank of the total size",
                     f"series_capacitors[{k}].at", b.at)
            seen[b.at] = k
        elif b.vt_side != "bus":
            fail("belongs to a bank at a bus (at); a mid-line bank has no relay beside it",
                 f"series_capacitors[{k}].vt_side", b.vt_side)
    total = sum(b.compensation_pct or 0.0 for b in banks)
    if total > 100:
        fail(f"the banks add up to {total:g} % compensation; at most 100 % of the line's "
             "positive-sequence reactance", "series_capacitors",
             [_raw(data, "series_capacitors", k, "compensation_pct") for k in range(len(banks))])
