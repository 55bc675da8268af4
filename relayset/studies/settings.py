"""Distance-zone settings of a study: gather the inputs, apply the philosophy."""

from __future__ import annotations

import math
from dataclasses import replace
from pathlib import Path

from relayset.errors import InputError
from relayset.inputs.philosophy import Philosophy, default_philosophy, load_philosophy
from relayset.inputs.study_file import Study
from relayset.results.parameters import LineParameters
from relayset.results.reach import ReachStudyResult
from relayset.results.settings import SettingsResult
from relayset.settings.compute import compute_settings
from relayset.settings.inputs import SettingsInputs
from relayset.studies.geometry import LineGeometry
from relayset.studies.reach import build_source

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


def _adjacent(study: Study, which: str, source: str) -> list[tuple[str, complex]]:
    from relayset.api import study_parameters

    out = []
    for k, line in enumerate(getattr(study, which)):
        if line.z1 is not None:
            out.append((line.name, line.z1))
            continue
        path = Path(line.study)
        if not path.is_absolute():
            path = Path(source).parent / path
        if not path.is_file():
            raise InputError("adjacent line study file does not exist",
                             field=f"{which}[{k}].study", value=line.study, source=source)
        other = study_parameters(path).parameters
        out.append((line.name, other.circuits[0].z1_ohm))
    return out


def _phase_spacing_m(geo: LineGeometry) -> float:
    centres = {}
    for w in geo.wires:
        if w.role == "phase" and w.group < 3:
            centres.setdefault(w.group, []).append((w.x_m, w.y_m))
    pts = [tuple(sum(c) / len(v) for c in zip(*v, strict=True)) for v in centres.values()]
    return min(math.dist(a, b) for i, a in enumerate(pts) for b in pts[i + 1:])


def run_settings(study: Study, geo: LineGeometry, params: LineParameters,
                 reach: ReachStudyResult | None, philosophy: Philosophy, *,
                 source: str, end: str | None = None,
                 zone1_limit: tuple[float, float] | None = None,
                 infeed_range: tuple[complex, complex] | None = None,
                 reverse_cover_ohm: float | None = None) -> SettingsResult:
    """Settings of the relay at ``end`` (default ``relay.end``, the first when "both").

    ``zone1_limit`` (recommended reach [%], worst overreach [% of setting]) and
    ``infeed_range`` (K min, K max) come from the verification's fault simulation; the
    stricter of the reach study's and the simulation's zone 1 limits applies.
    """
    if study.relay is None:
        raise InputError("settings need a [relay] table (end, CT and VT ratios)",
                         field="relay", source=source)
    if study.load is None:
        raise InputError("settings need a [load] table (maximum load, minimum voltage)",
                         field="load", source=source)
    names = (study.study.from_substation, study.study.to_substation)
    if end is None:
        end = names[0] if study.relay.end == "both" else study.relay.end
    other = names[1] if end == names[0] else names[0]
    circ = params.circuits[0]
    k0 = None
    if study.relay.k0_set is not None:
        import cmath

        k0 = cmath.rect(study.relay.k0_set.magnitude, study.relay.k0_set.angle)
    src_relay = build_source(study, end, source)
    src_remote = build_source(study, other, source)
    rec = worst = None
    er = None if reach is None else next((e for e in reach.ends if e.end == end), None)
    if er is not None:
        rec = er.recommended_zone1_pct
        # Worst-case zone 1 overreach in % of its setting: error budget + untransposition.
        e = er.arrangement("actual_plan").worst_bolted_overreach_at_remote_bus_pct
        worst = er.error_budget_pct + max(0.0, e)
    if zone1_limit is not None:
        rec = zone1_limit[0] if rec is None else min(rec, zone1_limit[0])
        worst = zone1_limit[1] if worst is None else max(worst, zone1_limit[1])
    fr = study.fault_resistance
    try:
        inputs = _inputs(study, geo, params, circ, k0, src_relay, src_remote, rec, worst, fr,
                         source, end)
        if infeed_range is not None or reverse_cover_ohm is not None:
            inputs = replace(inputs, infeed_range=infeed_range,
                             reverse_cover_ohm=reverse_cover_ohm)
        return compute_settings(inputs, philosophy)
    except InputError as exc:
        raise _in_study_terms(exc, source) from None


def _inputs(study, geo, params, circ, k0, src_relay, src_remote, rec, worst, fr, source,
            end):
    # adjacent_lines leave the to-substation, lines_behind the from-substation: a relay at
    # the to-substation grades on the lines behind the from-substation relay.
    ahead, behind = "adjacent_lines", "lines_behind"
    if end == study.study.to_substation:
        ahead, behind = behind, ahead
    return SettingsInputs(
        z1_line_ohm=study.relay.z1_set if study.relay.z1_set is not None else circ.z1_ohm,
        z0_line_ohm=circ.z0_ohm,
        length_m=geo.length_m,
        ct_ratio=study.relay.ct_ratio,
        vt_ratio=study.relay.vt_ratio,
        v_nominal_ll_v=geo.v_nominal_v,
        s_max_va=study.load.max_apparent_power,
        v_min_pu=study.load.min_voltage,
        load_angle_max_rad=study.load.load_angle_max,
        k0=k0,
        k0m=params.k0m,
        adjacent_lines=_adjacent(study, ahead, source),
        reverse_lines=_adjacent(study, behind, source),
        source_z1_relay_ohm=None if src_relay is None else src_relay.z1_ohm,
        source_z1_remote_ohm=None if src_remote is None else src_remote.z1_ohm,
        arc_length_phase_m=fr.arc_length or _phase_spacing_m(geo),
        arc_length_ground_m=INSULATOR_M_PER_KV * geo.v_nominal_v / 1e3,
        tower_footing_ohm=fr.tower_footing_resistance,
        recommended_zone1_pct=rec,
        worst_overreach_pct=worst,
    )


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
}


def _in_study_terms(exc: InputError, source: str) -> InputError:
    """The settings error re-addressed to the study file and its field."""
    base, bracket, rest = exc.field.partition("[")
    field = _STUDY_FIELDS.get(base, base) + bracket + rest
    return InputError(exc.rule, field=field, value=exc.value, source=source)
