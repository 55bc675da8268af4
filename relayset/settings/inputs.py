"""The data one relay's settings are computed from, validated (SI)."""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from relayset.errors import InputError

_SOURCE = "<settings inputs>"


def _real(name: str, value: Any, *, gt: float | None = None, ge: float | None = None,
          lt: float | None = None) -> float:
    if isinstance(value, bool) or not isinstance(value, int | float | np.floating | np.integer):
        raise InputError("must be a number", field=name, value=value, source=_SOURCE)
    x = float(value)
    if not math.isfinite(x):
        raise InputError("must be a finite number", field=name, value=value, source=_SOURCE)
    if gt is not None and not x > gt:
        raise InputError(f"must be greater than {gt:g}", field=name, value=x, source=_SOURCE)
    if ge is not None and not x >= ge:
        raise InputError(f"must be at least {ge:g}", field=name, value=x, source=_SOURCE)
    if lt is not None and not x < lt:
        raise InputError(f"must be less than {lt:g}", field=name, value=x, source=_SOURCE)
    return x


def _cplx(name: str, value: Any, *, inductive: bool = False) -> complex:
    if isinstance(value, bool) or not isinstance(value, int | float | complex | np.number):
        raise InputError("must be a complex number", field=name, value=value, source=_SOURCE)
    z = complex(value)
    if not (math.isfinite(z.real) and math.isfinite(z.imag)):
        raise InputError("must be finite", field=name, value=value, source=_SOURCE)
    if inductive and not (z.real >= 0 and z.imag > 0):
        raise InputError(
            "must have R >= 0 and X > 0 (an inductive line or source impedance)",
            field=name, value=z, source=_SOURCE,
        )
    return z


def _lines(name: str, value: Any) -> tuple[tuple[str, complex], ...]:
    if isinstance(value, str | bytes) or not isinstance(value, Sequence):
        raise InputError("must be a list of (name, z1_ohm) pairs", field=name, value=value,
                         source=_SOURCE)
    out = []
    for i, item in enumerate(value):
        if not (isinstance(item, Sequence) and len(item) == 2 and isinstance(item[0], str)
                and item[0].strip()):
            raise InputError("must be a (name, z1_ohm) pair", field=f"{name}[{i}]", value=item,
                             source=_SOURCE)
        out.append((item[0], _cplx(f"{name}[{i}].z1_ohm", item[1], inductive=True)))
    return tuple(out)


@dataclass(frozen=True)
class SettingsInputs:
    """Line, instrument-transformer, load, network and reach-study data for one relay.

    Parameters
    ----------
    z1_line_ohm, z0_line_ohm : complex
        Positive-sequence replica the relay is set with and zero-sequence impedance of the
        whole protected line [ohm].
    length_m : float
        Line length [m].
    ct_ratio, vt_ratio : float
        Instrument-transformer ratios, primary over secondary [1] (e.g. 800/1, 132000/110).
    v_nominal_ll_v : float
        Nominal line-to-line voltage [V].
    s_max_va : float
        Largest three-phase load through the line [VA].
    v_min_pu : float
        Lowest operating voltage at that load [pu of nominal].
    load_angle_max_rad : float
        Largest load (power-factor) angle of the load range [rad], 0 <= angle < π/2.
    k0 : complex, optional
        Residual compensation factor the relay is set with [1]; default ``k0_line``.
    z1_line_computed_ohm : complex, optional
        The line's Z1 from its parameters [ohm], what a given replica is compared with.
    k0_line : complex, optional
        The line's own k0 [1], what a given ``k0`` is compared with; default
        (Z0 − Z1)/(3 Z1) of ``z0_line_ohm`` and ``z1_line_ohm``.
    end, remote_end : str
        Names of the relay's end and the remote end (for messages and results).
    k0m : complex, optional
        Mutual compensation factor of a double-circuit line, Z0m/(3 Z1) [1]; reported only.
    adjacent_lines : sequence of (name, z1_ohm)
        Lines leaving the remote bus [ohm].
    reverse_lines : sequence of (name, z1_ohm)
        Lines leaving the relay bus behind the relay [ohm].
    source_z1_relay_ohm, source_z1_remote_ohm : complex, optional
        Positive-sequence source impedance behind the relay and behind the remote bus [ohm].
    arc_current_a : float, optional
        Fault current through the arc [A] (quadrilateral); see the module notes for the default.
    arc_length_phase_m, arc_length_ground_m : float, optional
        Arc lengths for phase faults (phase spacing) and ground faults (insulator flashover
        length) [m]; needed for a quadrilateral characteristic.
    tower_footing_ohm : float
        Tower footing resistance added to ground-fault resistance [ohm].
    recommended_zone1_pct : float, optional
        Zone 1 reach recommended by the untransposition reach study [% of the line].
    worst_overreach_pct : float, optional
        Worst-case zone 1 overreach behind it, error budget included [% of the zone 1
        setting].
    simulated_zone1_pct, simulated_overreach_pct : float, optional
        The same from the fault simulation at the remote bus (every source, load and
        parallel-circuit case and fault resistance) [% of the line], [% of the setting];
        the stricter recommendation applies.
    infeed_range : (complex, complex), optional
        Smallest and largest infeed factor K at the remote bus found by fault simulation
        (source cases, parallel circuit) [1]; with ``infeed = "computed"`` zone 2 is graded
        at the smallest and zone 3 sized at the largest.
    resistive_need_ohm : dict, optional
        Per zone, (phase, ground) resistive reach the simulated faults with remote infeed
        into the fault resistance need [ohm]; a quadrilateral's blinder reaches at least
        this far (times the philosophy's resistive margin), load permitting.
    reverse_cover_ohm : float, optional
        How far past the relay bus, along the line angle, the remote end's zone 2 reaches,
        with the verification tolerance [ohm]; the reverse zone reaches at least this far.
    series_xc_in_path_ohm : float
        Reactance of the series capacitor banks in the relay's measured path to the remote
        bus, in service [ohm], >= 0 (0: none); zone 2's check against the adjacent zone 1
        takes the remote bus that much nearer (the bank in service is its worst case).
    zone1_shape : (float, float)
        Reactance-line tilt [rad], in [0, π/4] (positive: down toward +R), and widening of
        the resistive reach [1], >= 1, of a quadrilateral zone 1, chosen from the simulated
        remote-bus faults (:func:`relayset.settings.simulated.zone1_shape`); (0, 1) without
        a simulation.
    """

    z1_line_ohm: complex
    z0_line_ohm: complex
    length_m: float
    ct_ratio: float
    vt_ratio: float
    v_nominal_ll_v: float
    s_max_va: float
    v_min_pu: float
    load_angle_max_rad: float
    k0: complex | None = None
    k0_line: complex | None = None
    z1_line_computed_ohm: complex | None = None
    k0m: complex | None = None
    adjacent_lines: Sequence[tuple[str, complex]] = ()
    reverse_lines: Sequence[tuple[str, complex]] = ()
    source_z1_relay_ohm: complex | None = None
    source_z1_remote_ohm: complex | None = None
    arc_current_a: float | None = None
    arc_length_phase_m: float | None = None
    arc_length_ground_m: float | None = None
    tower_footing_ohm: float = 0.0
    recommended_zone1_pct: float | None = None
    worst_overreach_pct: float | None = None
    simulated_zone1_pct: float | None = None
    simulated_overreach_pct: float | None = None
    end: str = "relay"
    remote_end: str = "remote"
    infeed_range: tuple[complex, complex] | None = None
    reverse_cover_ohm: float | None = None
    resistive_need_ohm: dict[str, tuple[float, float]] | None = None
    zone1_shape: tuple[float, float] = (0.0, 1.0)
    series_xc_in_path_ohm: float = 0.0

    def __post_init__(self) -> None:
        def put(name: str, value: Any) -> None:
            object.__setattr__(self, name, value)

        put("z1_line_ohm", _cplx("z1_line_ohm", self.z1_line_ohm, inductive=True))
        z0 = _cplx("z0_line_ohm", self.z0_line_ohm, inductive=True)
        put("z0_line_ohm", z0)
        put("length_m", _real("length_m", self.length_m, gt=0))
        put("ct_ratio", _real("ct_ratio", self.ct_ratio, gt=0))
        put("vt_ratio", _real("vt_ratio", self.vt_ratio, gt=0))
        put("v_nominal_ll_v", _real("v_nominal_ll_v", self.v_nominal_ll_v, gt=0))
        put("s_max_va", _real("s_max_va", self.s_max_va, gt=0))
        put("v_min_pu", _real("v_min_pu", self.v_min_pu, gt=0, lt=2))
        put("load_angle_max_rad",
            _real("load_angle_max_rad", self.load_angle_max_rad, ge=0, lt=math.pi / 2))
        if self.k0 is not None:
            k0 = _cplx("k0", self.k0)
            if abs(1 + 3 * k0) == 0:
                raise InputError("must not equal -1/3", field="k0", value=k0, source=_SOURCE)
            put("k0", k0)
        if self.z1_line_computed_ohm is not None:
            put("z1_line_computed_ohm", _cplx("z1_line_computed_ohm",
                                              self.z1_line_computed_ohm, inductive=True))
        if self.k0_line is not None:
            put("k0_line", _cplx("k0_line", self.k0_line))
        if self.k0m is not None:
            put("k0m", _cplx("k0m", self.k0m))
        put("adjacent_lines", _lines("adjacent_lines", self.adjacent_lines))
        put("reverse_lines", _lines("reverse_lines", self.reverse_lines))
        for name in ("source_z1_relay_ohm", "source_z1_remote_ohm"):
            if getattr(self, name) is not None:
                put(name, _cplx(name, getattr(self, name), inductive=True))
        for name in ("arc_current_a", "arc_length_phase_m", "arc_length_ground_m"):
            if getattr(self, name) is not None:
                put(name, _real(name, getattr(self, name), gt=0))
        put("tower_footing_ohm", _real("tower_footing_ohm", self.tower_footing_ohm, ge=0))
        put("series_xc_in_path_ohm",
            _real("series_xc_in_path_ohm", self.series_xc_in_path_ohm, ge=0))
        tilt, widen = self.zone1_shape
        put("zone1_shape", (_real("zone1_shape", tilt, ge=0, lt=math.pi / 4 + 1e-12),
                            _real("zone1_shape", widen, ge=1)))
        if self.recommended_zone1_pct is not None:
            put("recommended_zone1_pct",
                _real("recommended_zone1_pct", self.recommended_zone1_pct, gt=0, lt=100))
        if self.worst_overreach_pct is not None:
            put("worst_overreach_pct",
                _real("worst_overreach_pct", self.worst_overreach_pct, gt=-100))
        if self.simulated_zone1_pct is not None:
            put("simulated_zone1_pct",
                _real("simulated_zone1_pct", self.simulated_zone1_pct, gt=0, lt=100))
        if self.simulated_overreach_pct is not None:
            put("simulated_overreach_pct",
                _real("simulated_overreach_pct", self.simulated_overreach_pct, gt=-100))
