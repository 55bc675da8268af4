"""Distance-zone settings of a study: gather each relay end's inputs, apply the philosophy."""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass, replace
from pathlib import Path

from relayset.errors import InputError
from relayset.inputs.philosophy import Philosophy, default_philosophy, load_philosophy
from relayset.inputs.study_file import Study, check_settings_inputs
from relayset.results.parameters import LineParameters
from relayset.results.reach import ReachStudyResult
from relayset.results.relay import RelayBasis
from relayset.results.settings import MutualSupervision, SettingsResult
from relayset.settings.compute import compute_settings
from relayset.settings.inputs import SettingsInputs
from relayset.settings.simulated import (
    WIDENED_ZONES,
    SimulationSummary,
    infeed_range,
    resistive_widening,
    reverse_cover_ohm,
    zone1_limit,
    zone1_shape,
)
from relayset.studies.geometry import LineGeometry
from relayset.studies.reach import build_source
from relayset.studies.series_capacitors import x_c_in_path_ohm

#: Insulator flashover length per kV of nominal voltage for the ground-fault arc when the
#: study gives none [m/kV] (common practice, no source: about 1.3 m at 132 kV).
INSULATOR_M_PER_KV = 0.01


def study_philosophy(study: Study, source: str) -> Philosophy:
    """The philosophy the study names: "default", or a path relative to the study file."""
    name = study.study.philosophy
    if name == "default":
        return default_philosophy()
    path = Path(name)
    if not path.is_absolute():
        path = Path(source).parent / path
    if not path.is_file():
        raise InputError("philosophy file does not exist", field="study.philosophy",
                         value=name, source=source)
    return load_philosophy(path)


def study_lines(study: Study, relay_end: str, source: str
                ) -> list[tuple[str, str, complex, complex | None]]:
    """Every line of ``adjacent_lines`` and ``lines_behind`` as (bus, name, Z1, Z0 or None)
    [ohm]: Z1 (and Z0) as given, or from the line's own study file. A line without a bus is
    at the relay's remote bus (adjacent) or its own (behind)."""
    from relayset.studies.pipeline import line_parameters

    names = study.ends
    other = names[1] if relay_end == names[0] else names[0]
    out = []
    for which, default_bus in (("adjacent_lines", other), ("lines_behind", relay_end)):
        for k, line in enumerate(getattr(study, which)):
            bus = line.bus or default_bus  # the bus rules are checked when the file is read
            if line.z1 is not None:
                out.append((bus, line.name, line.z1, line.z0))
                continue
            path = Path(line.study)
            if not path.is_absolute():
                path = Path(source).parent / path
            if not path.is_file():
                raise InputError("adjacent line study file does not exist",
                                 field=f"{which}[{k}].study", value=line.study, source=source)
            c = line_parameters(path).circuits[0]
            out.append((bus, line.name, c.z1_ohm, c.z0_ohm))
    return out


def _lines_at(study: Study, relay_end: str, *, remote: bool, source: str
              ) -> list[tuple[str, complex]]:
    """Lines leaving the relay's remote bus (``remote``) or its own bus, as (name, Z1)."""
    names = study.ends
    want = (names[1] if relay_end == names[0] else names[0]) if remote else relay_end
    return [(name, z1) for bus, name, z1, _ in study_lines(study, relay_end, source)
            if bus == want]


@dataclass(frozen=True)
class ArcLengths:
    """Arc lengths of the resistive reach and whether each is the default [m]."""

    phase_m: float
    phase_given: bool
    ground_m: float
    ground_given: bool

    def describe(self) -> str:
        """The arc lengths and where each came from, in words (for notes and reports)."""
        phase = ("study input fault_resistance.arc_length" if self.phase_given
                 else "default: the smallest phase spacing")
        ground = ("study input fault_resistance.ground_arc_length" if self.ground_given
                  else f"default: {INSULATOR_M_PER_KV:g} m per kV of nominal voltage, "
                  "insulator flashover length")
        return (f"Arc lengths: phase {self.phase_m:.3g} m ({phase}), ground "
                f"{self.ground_m:.3g} m ({ground})")


def arc_lengths(study: Study, geo: LineGeometry) -> ArcLengths:
    """The arc lengths the resistive reach uses: the study's, else the defaults."""
    fr = study.fault_resistance
    return ArcLengths(
        phase_m=fr.arc_length if fr.arc_length is not None else _phase_spacing_m(geo),
        phase_given=fr.arc_length is not None,
        ground_m=(fr.ground_arc_length if fr.ground_arc_length is not None
                  else INSULATOR_M_PER_KV * geo.v_nominal_v / 1e3),
        ground_given=fr.ground_arc_length is not None,
    )


def _phase_spacing_m(geo: LineGeometry) -> float:
    """The smallest phase spacing of the protected circuit, over every tower type."""
    spacings = []
    for wires in geo.tower_wires or (geo.wires,):
        centres = {}
        for w in wires:
            if w.role == "phase" and w.group < 3:
                centres.setdefault(w.group, []).append((w.x_m, w.y_m))
        pts = [tuple(sum(c) / len(v) for c in zip(*v, strict=True)) for v in centres.values()]
        spacings += [math.dist(a, b) for i, a in enumerate(pts) for b in pts[i + 1:]]
    return min(spacings)


def run_settings(study: Study, geo: LineGeometry, params: LineParameters, relay: RelayBasis,
                 reach: ReachStudyResult | None, philosophy: Philosophy, *,
                 source: str, ends: tuple[str, ...] | None = None,
                 simulated: Mapping[str, SimulationSummary] | None = None,
                 widened_zones: tuple[str, ...] = WIDENED_ZONES
                 ) -> tuple[SettingsResult, ...]:
    """Settings of the relay at each of ``relay.ends`` (or ``ends``), in that order.

    ``simulated`` holds, per end, what the verification's fault simulation found (a
    :class:`relayset.settings.simulated.SimulationSummary`); the rules of
    :mod:`relayset.settings.simulated` turn it into the zone 1 limit (the zone 1 rule
    applies the stricter of it and the reach study's), the infeed range, the resistive
    widening of ``widened_zones`` and the reverse zone's cover.
    """
    check_settings_inputs(study, source)
    names = study.ends
    out = []
    for end in ends or relay.ends:
        other = names[1] if end == names[0] else names[0]
        rec = worst = None
        er = None if reach is None else next((e for e in reach.ends if e.end == end), None)
        if er is not None:
            rec = er.recommended_zone1_pct
            # Worst-case zone 1 overreach in % of its setting: error budget + untransposition.
            e = er.arrangement("actual_plan").worst_bolted_overreach_at_remote_bus_pct
            worst = er.error_budget_pct + max(0.0, e)
        sim = (simulated or {}).get(end)
        sim_rec, sim_over = ((None, None) if sim is None
                             else zone1_limit(sim, philosophy) or (None, None))
        src_relay = build_source(study, end, source)
        src_remote = build_source(study, other, source)
        fr = study.fault_resistance
        arcs = arc_lengths(study, geo)
        circ = params.circuits[0]
        try:
            inputs = SettingsInputs(
                end=end,
                remote_end=other,
                z1_line_ohm=relay.z1_set_ohm,
                z0_line_ohm=circ.z0_ohm,
                k0=relay.k0_set,
                k0_line=circ.k0.k0,
                z1_line_computed_ohm=circ.z1_ohm,
                length_m=geo.length_m,
                ct_ratio=study.relay.ratios(end)[0],
                vt_ratio=study.relay.ratios(end)[1],
                v_nominal_ll_v=geo.v_nominal_v,
                s_max_va=study.load.max_apparent_power,
                v_min_pu=study.load.min_voltage,
                load_angle_max_rad=study.load.load_angle_max,
                k0m=relay.k0m_set,
                adjacent_lines=_lines_at(study, end, remote=True, source=source),
                reverse_lines=_lines_at(study, end, remote=False, source=source),
                source_z1_relay_ohm=None if src_relay is None else src_relay.z1_ohm,
                source_z1_remote_ohm=None if src_remote is None else src_remote.z1_ohm,
                arc_length_phase_m=arcs.phase_m,
                arc_length_ground_m=arcs.ground_m,
                tower_footing_ohm=fr.tower_footing_resistance,
                recommended_zone1_pct=rec,
                worst_overreach_pct=worst,
                simulated_zone1_pct=sim_rec,
                simulated_overreach_pct=sim_over,
                infeed_range=None if sim is None else infeed_range(sim, philosophy),
                reverse_cover_ohm=None if sim is None else reverse_cover_ohm(sim),
                resistive_need_ohm=(None if sim is None
                                    else resistive_widening(sim, widened_zones)),
                zone1_shape=(0.0, 1.0) if sim is None else zone1_shape(sim),
                series_xc_in_path_ohm=x_c_in_path_ohm(
                    None if reach is None else reach.series_capacitors, end),
            )
            res = compute_settings(inputs, philosophy)
        except InputError as exc:
            raise _in_study_terms(exc, source) from None
        if res.k0m is not None:  # issued with k0m, as the verification's relay applies it
            res = replace(res, mutual_supervision=MutualSupervision(
                study.relay.mutual_compensation_supervision))
        out.append(_warn_unfed_remote_end(res, other) if src_remote is None else res)
    return tuple(out)


def _warn_unfed_remote_end(res: SettingsResult, other: str) -> SettingsResult:
    """A study without a source at the remote end describes a line fed from the relay end
    only (an open or load-only bus). That is legitimate, but no remote infeed flows into the
    fault resistance, which makes zone 1's overreach at the remote bus and every infeed-
    dependent reach look better than with even a weak source there, so the settings say so.
    (The relay end itself needs a source: the study file is refused without one.)"""
    from dataclasses import replace

    from relayset.results.settings import SettingWarning

    return replace(res, warnings=(*res.warnings, SettingWarning(
        "no_source_at_remote_end",
        f"The study gives no source at {other} (the remote end): the line is treated as fed "
        f"from this end only, {other} open or carrying load alone; no infeed from {other}, "
        "and transfer angles between the ends have no effect",
        f"add [sources.\"{other}\"] if the bus has any source: even a weak one feeds the "
        "fault resistance and so changes zone 1's overreach at the remote bus, the zone 2 "
        "and 3 reaches and the resistive coverage",
    )))


#: Names of the settings inputs in the study file, for error messages.
_STUDY_FIELDS = {
    "ct_ratio": "relay.ct_ratio",
    "vt_ratio": "relay.vt_ratio",
    "z1_line_ohm": "relay.z1_set",
    "k0": "relay.k0_set",
    "s_max_va": "load.max_apparent_power",
    "v_min_pu": "load.min_voltage",
    "load_angle_max_rad": "load.load_angle_max",
    "adjacent_lines": "adjacent_lines",
    "reverse_lines": "lines_behind",
    "tower_footing_ohm": "fault_resistance.tower_footing_resistance",
    "arc_length_phase_m": "fault_resistance.arc_length",
    "arc_length_ground_m": "fault_resistance.ground_arc_length",
}


def _in_study_terms(exc: InputError, source: str) -> InputError:
    """The settings error re-addressed to the study file and its field."""
    if exc.source and exc.source != "<settings inputs>" and exc.source != source:
        return exc  # an error in another file (an adjacent line's study) stays against it
    base, bracket, rest = exc.field.partition("[")
    field = _STUDY_FIELDS.get(base, base) + bracket + rest
    return InputError(exc.rule, field=field, value=exc.value, source=source)
