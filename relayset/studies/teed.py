"""Reach study and zone 1/zone 2 settings of a three-terminal (teed) line.

From a study with a ``[tee]`` table (:mod:`relayset.inputs.teed`): the line is split at the
tee, the branch is built from its own sections like the line's, and the three legs are
solved together (:mod:`relayset.physics.teed`). For each relay end, bolted faults of the
reach study's types at each remote terminal are solved with the third terminal's source in
and out, over the source cases; the meant loops' apparent impedances along the line angle
give zone 1 (short of the nearest remote terminal without infeed) and zone 2 (covering the
farthest with infeed) by the rules of :mod:`relayset.settings.teed`, and the zones are then
verified by fault simulation (:mod:`relayset.studies.verification.teed`).
"""

from __future__ import annotations

import cmath
import dataclasses
import itertools
import math

import numpy as np

from relayset.errors import InputError
from relayset.inputs.philosophy import Philosophy
from relayset.inputs.profile import study_profile
from relayset.inputs.study_file import Study, check_settings_inputs
from relayset.physics import measurement
from relayset.physics.network import LineCascade, Source
from relayset.physics.sequence import to_sequence
from relayset.physics.teed import (
    ENDS,
    GroundedTransformer,
    TeedLine,
    parallel_label,
    parallel_states,
    solve_teed_sweep,
)
from relayset.results.parameters import LineParameters
from relayset.results.reach import fault_label, loop_label
from relayset.results.relay import RelayBasis
from relayset.results.settings import MutualSupervision, SettingsResult
from relayset.results.teed import (
    TeedApparent,
    TeedEndSettings,
    TeedStudyResult,
    deviation_name,
)
from relayset.settings.inputs import SettingsInputs
from relayset.settings.resistive import arc_current
from relayset.settings.teed import (
    teed_checks,
    teed_zone1_ohm,
    teed_zone1_pct,
    teed_zone2_ohm,
    teed_zone_settings,
    zone_checks,
)
from relayset.studies.geometry import LineGeometry, build_geometry
from relayset.studies.parameters import compute_parameters
from relayset.studies.reach import build_source, line_cascade
from relayset.studies.settings import _in_study_terms, arc_lengths

ASSUMPTIONS = (
    "Three-terminal line: bolted faults at each remote terminal (on the line side of its "
    "current transformer), no prefault load (all source EMFs at nominal voltage, in phase).",
    "Infeed out: the third terminal's source disconnected; infeed in: every source in; each "
    "bus takes every uniform source case of the reach study independently (the strongest "
    "infeed, the relay's source weak and the third terminal's strong, included), then the "
    "cases given per bus.",
    "Reaches along the relay's line angle, Re(Z exp(-j theta1)), of the loops meant for each "
    "fault type, with the relay's Z1 and k0.",
)


def run_teed(loaded) -> TeedStudyResult:
    """The reach study and zone 1/zone 2 of a study read by
    :func:`relayset.studies.pipeline.load` (or ``load_bytes``) that has a ``[tee]``: the
    ``teed`` part of :func:`relayset.studies.pipeline.run_loaded` with settings."""
    from relayset.studies.pipeline import run_loaded

    if loaded.study.tee is None:
        raise InputError("the study has no [tee] table (not a three-terminal line)",
                         field="tee", source=loaded.source)
    return run_loaded(loaded, settings=True).teed


#: How the zones are verified (stated with the results).
VERIFIED = ("Verified by fault simulation on the teed solver with the relay model of the "
            "two-ended verification (relayset.studies.verification.teed): the zones as set "
            "(the philosophy's shape, mho or quadrilateral, through the characteristic "
            "each zone is drawn with; on the relay profile's steps where the study names "
            "one); every infeed state (all sources in, each source out, each two out), "
            "the source cases above (each bus strong, nominal or weak independently), the "
            "reach study's fault types and resistances; faults along the three "
            "legs (5 % steps), at each remote terminal and along the lines beyond it that "
            "name their bus (Z0 = 3 Z1 where none is given); the earth-resistivity range "
            "(the relay keeps its k0); load: the first bus leading the others by each "
            "transfer angle of [load]. A quadrilateral zone 2's blinders hold every bolted "
            "remote-terminal fault of these cases (the infeed turns them off the line angle), "
            "times the resistive margin, load permitting; a quadrilateral zone 1 is not "
            "tilted or shortened by the simulated resistive faults as on a two-ended line "
            "(where remote infeed into the fault resistance makes it overreach, its check "
            "fails and says so). Not simulated: power-flow load cases.")


def teed_line(study: Study, geo: LineGeometry, params: LineParameters, shunt: bool,
              source: str) -> TeedLine:
    """The study's line split at the tee, with the branch from its own sections (its tower
    geometry and phase orders read as the line's). On a double-circuit line the legs from
    the two ends carry both circuits (circuit 2 runs through the tee untapped) and the
    branch carries circuit 1 alone: its towers' wires without circuit 2's positions."""
    tee = study.tee
    main = line_cascade(geo, params, "actual_plan", shunt)
    sections = tee.sections
    teed = study.circuits[0]
    # The geometry places the wires of an overhead section; a branch of cable sections
    # only gets the line's first overhead section appended, dropped from its cascade.
    anchor = () if any(sec.cable is None for sec in sections) else tuple(
        dataclasses.replace(sec, order=sec.order[teed.name])
        if isinstance(sec.order, dict) else sec
        for sec in study.line.sections if sec.cable is None)[:1]
    branch_study = dataclasses.replace(
        study, tee=None, circuits=(teed,),
        line=dataclasses.replace(study.line, sections=(*sections, *anchor),
                                 length=math.fsum(sec.length for sec in (*sections, *anchor))))
    try:
        geo_b = build_geometry(branch_study, source)
    except InputError as exc:  # the branch's sections are named as written in [tee]
        raise InputError(exc.rule, field=exc.field.replace("line.sections", "tee.sections"),
                         value=exc.value, source=exc.source) from None
    branch = line_cascade(geo_b, compute_parameters(geo_b), "actual_plan", shunt)
    if anchor:
        n = len(sections)
        branch = LineCascade(branch.z_ohm_per_m[:n], branch.length_m[:n],
                             None if branch.y_s_per_m is None else branch.y_s_per_m[:n])
    return TeedLine.from_line(main, tee.distance, branch)


def teed_line_notes(study: Study) -> tuple[str, ...]:
    """What :func:`teed_line` assumed beyond the line's own parameters: the untapped
    parallel circuit of a double-circuit line, and the branch's cables."""
    notes = []
    if len(study.circuits) == 2:
        c1, c2 = (c.name for c in study.circuits)
        a, b = study.ends
        notes.append(
            f"Double-circuit line: circuit {c1} is tapped at the tee; circuit {c2} runs "
            f"through it untapped between {a} and {b}, on their buses in service, and is "
            "taken in each of its states (in service, out and earthed at both ends, out and "
            "isolated; reach_study.parallel_circuit does not narrow them) in the reach "
            "study and the verification; the branch carries circuit "
            f"{c1} alone, on its towers without circuit {c2}'s wires. Faults on circuit "
            f"{c2} itself are not simulated. "
            + (f"The relays at {a} and {b} measure with k0 and also with k0m while the "
               "parallel circuit is in service (both count: its supervision may block "
               f"it); the relay at {study.tee.substation} has no parallel circuit."
               if study.reach_study.mutual_compensation else
               "The relays measure with k0 only (no mutual compensation)."))
    on_line = {sec.cable for sec in study.line.sections or ()}
    names = tuple(dict.fromkeys(sec.cable for sec in study.tee.sections
                                if sec.cable is not None and sec.cable not in on_line))
    if names:
        from relayset.inputs.cable import constructions

        one = dataclasses.replace(study, circuits=study.circuits[:1])
        notes += [f"Branch to {study.tee.substation}: {n}" if n[:1].isupper() else n
                  for n in constructions(one, names)[2]]
    return tuple(notes)


def teed_loop_sets(sweeps, end: str, k0: complex, k0m: complex | None) -> list:
    """(parallel state, label, loop impedances) the relay at ``end`` measures in each
    ``(state, sweep)``: with k0; and, at an end of a double circuit (S or R) with its
    parallel circuit in service and the relays' k0m (``None``: not used), with mutual
    compensation too (its supervision may block it, so both count)."""
    out = []
    for ps, sw in sweeps:
        v, i = sw.v[end], sw.i[end]
        out.append((ps, "", measurement.loop_impedances(v, i, k0)))
        if k0m is not None and ps == "in_service" and end != ENDS[2] and sw.i_parallel:
            out.append((ps, ", mutual compensation", measurement.loop_impedances(
                v, i, k0, i_parallel=sw.i_parallel[end], k0m=k0m)))
    return out


def teed_terminals(study: Study, source: str) -> tuple:
    """The terminals at the from, to and third substation (Source, transformer or None)."""
    buses = (*study.ends, study.tee.substation)
    terms = [build_source(study, b, source) for b in buses]
    if study.tee.grounded_transformer_z0 is not None:
        terms[2] = GroundedTransformer(study.tee.grounded_transformer_z0)
    return tuple(terms)


def teed_source_cases(study: Study, buses: tuple[str, str, str],
                      sourced: tuple[bool, bool, bool] = (True, True, True)
                      ) -> tuple[np.ndarray, tuple[str, ...]]:
    """Source scales (K, 3) at the three buses and the cases' names: each bus with a source
    (``sourced``) takes every uniform case of the reach study independently (the infeed
    ratio is largest with the relay's own source weak and the third terminal's strong,
    which no uniform case forms; as the two-ended verification pairs the ends), then the
    cases the study gives per bus as they are. A bus without a source (a grounded
    transformer, or none) is neither varied nor named: nothing there scales."""
    cases = study.reach_study.source_cases
    uniform = [c for c in cases if not c.at]
    scales, names = [], []
    for combo in itertools.product(uniform, repeat=sum(sourced)):
        it = iter(combo)
        picked = [next(it) if s else None for s in sourced]
        scales.append([1.0 if c is None else c.scale for c in picked])
        names.append(combo[0].name if all(c is combo[0] for c in combo) else
                     ", ".join(f"{b} {c.name}" for b, c in zip(buses, picked, strict=True)
                               if c is not None))
    for c in cases:
        if c.at:
            scales.append([c.scale_at(b) for b in buses])
            names.append(c.name)
    return np.array(scales, dtype=float), tuple(names)


def _end_settings(study: Study, relay: RelayBasis, philosophy: Philosophy, circ, arcs,
                  x: int, buses: tuple[str, str, str], length_m: float, source: str,
                  zone1: tuple[complex, str], zone2: tuple[complex, str], z_path: complex,
                  zone2_need: tuple[tuple[float, float], tuple[float, float]],
                  profile) -> SettingsResult:
    """Zone 1 and zone 2 of the relay at ``buses[x]`` with their characteristics
    (:func:`relayset.settings.teed.teed_zone_settings`), on the relay profile's steps where
    the study names one (:func:`relayset.settings.settable.settable_settings`).
    ``z_path`` is the Z1 to the farthest remote terminal [ohm]: the arc current of the
    resistive reach is the two-ended rule's (:func:`relayset.settings.resistive.arc_current`,
    phase-to-phase fault fed from the relay end alone) on that path. ``zone2_need`` holds
    the (right, left) blinder offsets of the phase and the ground loops [ohm] the bolted
    remote-terminal faults need
    (:func:`relayset.studies.verification.teed.terminal_blinder_needs`): a quadrilateral
    zone 2 is widened to them by the two-ended rule (``SettingsInputs.resistive_need_ohm``,
    the left blinder alike)."""
    end = buses[x]
    src = build_source(study, end, source)
    ct, vt = study.relay.ratios(end)
    fr = study.fault_resistance
    try:
        inputs = SettingsInputs(
            end=end, remote_end=" and ".join(b for k, b in enumerate(buses) if k != x),
            z1_line_ohm=relay.z1_set_ohm, z0_line_ohm=circ.z0_ohm, k0=relay.k0_set,
            k0_line=circ.k0.k0, length_m=length_m, ct_ratio=ct, vt_ratio=vt,
            v_nominal_ll_v=study.system.nominal_voltage,
            s_max_va=study.load.max_apparent_power, v_min_pu=study.load.min_voltage,
            load_angle_max_rad=study.load.load_angle_max,
            source_z1_relay_ohm=None if src is None else src.z1_ohm,
            arc_length_phase_m=arcs.phase_m, arc_length_ground_m=arcs.ground_m,
            tower_footing_ohm=fr.tower_footing_resistance,
            resistive_need_ohm={"zone2": (zone2_need[0][0], zone2_need[1][0])},
            # the relays at the double circuit's two ends measure with k0m too (the one at
            # the third substation has no parallel circuit)
            k0m=(relay.k0m_set if x != 2 and len(study.circuits) == 2
                 and study.reach_study.mutual_compensation else None))
        if src is not None:
            inputs = dataclasses.replace(inputs, arc_current_a=arc_current(
                dataclasses.replace(inputs, z1_line_ohm=z_path)))
        st = teed_zone_settings(inputs, philosophy, zone1, zone2,
                                (zone2_need[0][1], zone2_need[1][1]))
        if st.k0m is not None:  # issued with k0m, as the verification's relay applies it
            st = dataclasses.replace(st, mutual_supervision=MutualSupervision(
                study.relay.mutual_compensation_supervision))
    except InputError as exc:
        raise _in_study_terms(exc, source) from None
    if profile is None:
        return st
    from relayset.settings.settable import settable_settings

    primary = study.relay.ct_primary_a(end)
    return settable_settings(st, profile, study.relay.min_operating_current,
                             None if primary is None else primary / ct)


def _along(z: np.ndarray, theta: float) -> np.ndarray:
    return (z * complex(math.cos(theta), -math.sin(theta))).real


def run_teed_study(study: Study, geo: LineGeometry, params: LineParameters,
                   relay: RelayBasis, philosophy: Philosophy, *, source: str
                   ) -> TeedStudyResult:
    """Apparent impedances and zone 1/zone 2 of every relay end of a teed line."""
    check_settings_inputs(study, source)
    profile = study_profile(study.relay.profile, source)  # read before the work
    rs = study.reach_study
    buses = (*study.ends, study.tee.substation)
    line = teed_line(study, geo, params, rs.shunt_capacitance, source)
    terms = teed_terminals(study, source)
    scales, case_names = teed_source_cases(
        study, buses, tuple(t is not None and not isinstance(t, GroundedTransformer)
                            for t in terms))
    v_nom = study.system.nominal_voltage
    theta = cmath.phase(relay.z1_set_ohm)
    k0 = relay.k0_set
    k0m = relay.k0m_set if rs.mutual_compensation else None  # a double circuit's relays
    ftypes = rs.fault_types
    labels = tuple(study.circuits[0].phase_labels)  # cases named in the study's phases
    fn = {"source_scale": "reach_study.source_cases", "fault_types": "reach_study.fault_types"}

    # (relay end x, remote y, infeed) -> (min, max, min case, max case, min Z, max Z)
    seen: dict[tuple[int, int, bool], tuple] = {}
    for y in range(3):
        for out in (None, *[z for z in range(3) if z != y]):
            t = list(terms)
            if out is not None:
                t[out] = None
            if not any(isinstance(s, Source) for s in t):
                continue
            sws = [(ps, solve_teed_sweep(line, t, v_nominal_v=v_nom, fault_leg=ENDS[y],
                                         fault_types=ftypes, m=[0.0], r_fault_ohm=[0.0],
                                         source_scale=scales, field_names=fn,
                                         parallel_state=ps,
                                         parallel_currents=k0m is not None))
                   for ps in parallel_states(line)]  # a double circuit: each state
            for x in range(3):
                if x == y or (out is not None and out == x) or buses[x] not in relay.ends:
                    continue
                infeed = out is None
                best = [math.inf, -math.inf, "", "", 0j, 0j]
                for (ps, how, loops), (f, ft) in itertools.product(
                        teed_loop_sets(sws, ENDS[x], k0, k0m), enumerate(ftypes)):
                    for lp in measurement.loops_for_fault(ft):
                        zs = loops[lp][f, 0, 0, :, 0]  # over source cases
                        a = _along(zs, theta)
                        for k, val in enumerate(a):
                            if not math.isfinite(val):
                                continue
                            label = (f"fault {fault_label(ft, labels)}, loop "
                                     f"{loop_label(lp, labels)}, source case {case_names[k]}"
                                     + parallel_label(line, ps) + how)
                            if val < best[0]:
                                best[0], best[2], best[4] = float(val), label, complex(zs[k])
                            if val > best[1]:
                                best[1], best[3], best[5] = float(val), label, complex(zs[k])
                seen[x, y, infeed] = tuple(best)

    # Fault simulation of the zones (imported here: the reach alone needs none of it).
    from relayset.studies.verification.checks import relay_model_at
    from relayset.studies.verification.closing import study_at_resistivity
    from relayset.studies.verification.envelope import resistivities
    from relayset.studies.verification.teed import terminal_blinder_needs, verify_teed

    lines = []
    for r in resistivities(study)[0]:  # the relay keeps its k0 while the line's moves
        if float(r) == float(study.system.earth_resistivity):
            lines.append((f"earth {r:g} ohm*m", line))
            continue
        st = study_at_resistivity(study, r)
        g = build_geometry(st, source)
        lines.append((f"earth {r:g} ohm*m",
                      teed_line(st, g, compute_parameters(g), rs.shunt_capacitance, source)))
    # Load: bus S leads R and T by each transfer angle of [load] (none: no load).
    angles = study.load.transfer_angles if study.load is not None else (0.0,)
    e = v_nom / math.sqrt(3)
    emf = (np.array([cmath.rect(e, a) for a in angles]), np.full(len(angles), e + 0j),
           np.full(len(angles), e + 0j))
    loads = tuple(f"{buses[0]} leading by {math.degrees(a):g} deg" for a in angles)
    judged = tuple(x for x in range(3) if buses[x] in relay.ends)
    models = {x: relay_model_at(study, buses[x]) for x in judged}
    envelope = dict(v_nominal_v=v_nom, fault_types=ftypes, source_scale=scales,
                    case_names=case_names, line_angle_rad=theta,
                    z_line_ohm=abs(relay.z1_set_ohm), models=models, buses=buses, emf_v=emf)
    # a quadrilateral zone 2 holds the bolted remote-terminal faults as the infeed turns them
    need = (terminal_blinder_needs(lines, terms, judged, k0=k0, k0m=k0m, **envelope)
            if philosophy.characteristic.shape == "quadrilateral" else {})
    zones: dict[int, tuple] = {}  # end -> (zone 1, zone 2) ZoneSettings as set
    budget = study.error_budget.total_pct
    z1ph = philosophy.zone1
    pct1 = teed_zone1_pct(budget, z1ph.reach_pct, z1ph.min_margin_pct)
    unit = cmath.rect(1.0, theta)
    circ = params.circuits[0]
    arcs = arc_lengths(study, geo)
    z1_legs = [complex(to_sequence(leg.z_total_ohm[:3, :3])[1, 1]) for leg in line.legs]
    results = []
    for x in range(3):
        if buses[x] not in relay.ends:
            continue
        remotes = [y for y in range(3) if y != x]
        apparent = tuple(TeedApparent(buses[y], inf, *seen[x, y, inf])
                         for y in remotes for inf in (True, False) if (x, y, inf) in seen)
        no_inf = [(seen[x, y, False][0], y) for y in remotes if (x, y, False) in seen]
        with_inf = [(seen[x, y, True][1], y) for y in remotes if (x, y, True) in seen]
        if not no_inf or not with_inf:
            raise InputError("the relay measures no remote-terminal fault (no loop current)",
                             field="relay.end", value=buses[x], source=source)
        near, y_near = min(no_inf)
        far, y_far = max(with_inf)
        z1_ohm = teed_zone1_ohm(near, pct1)
        z2_ohm = teed_zone2_ohm(far, philosophy.zone2.reach_pct)
        tee_ohm = float(_along(np.array(z1_legs[x]), theta))
        next_z1 = []
        for y in remotes:
            for adj in study.adjacent_lines:
                if adj.bus == buses[y] and adj.z1 is not None and (x, y, False) in seen:
                    reach = philosophy.zone2.adjacent_zone1_pct / 100 * abs(adj.z1)
                    next_z1.append((buses[y], adj.name, seen[x, y, False][0] + reach))
        st = _end_settings(
            study, relay, philosophy, circ, arcs, x, buses, geo.length_m, source,
            (z1_ohm * unit, f"{pct1:g} % of the apparent impedance of the nearest remote "
             f"terminal {buses[y_near]} with the infeed out ({near:.4g} ohm)"),
            (z2_ohm * unit, f"{max(philosophy.zone2.reach_pct, 100.0):g} % of the apparent "
             f"impedance of the farthest remote terminal {buses[y_far]} with the infeed in "
             f"({far:.4g} ohm)"),
            # the arc current: the two-ended rule on the path to the farthest terminal
            z1_legs[x] + max((z1_legs[y] for y in remotes), key=abs),
            tuple(need.get((x, g), (0.0, 0.0)) for g in (False, True)), profile)
        own, st = zone_checks(st)
        z1, z2 = st.zone("zone1"), st.zone("zone2")
        zones[x] = (z1, z2)
        results.append(TeedEndSettings(
            end=buses[x], apparent=apparent, tee_ohm=tee_ohm, zone1_pct=pct1,
            zone1_ohm=z1.reach_primary_ohm, zone1_rule=z1.rule,
            zone2_ohm=z2.reach_primary_ohm, zone2_rule=z2.rule,
            checks=teed_checks(abs(z1.reach_primary_ohm), abs(z2.reach_primary_ohm), tee_ohm,
                               next_z1 if philosophy.zone2.grading == "short_of_adjacent_zone1"
                               else None) + own,
            zone1_secondary_ohm=z1.reach_secondary_ohm,
            zone2_secondary_ohm=z2.reach_secondary_ohm, settings=st))
    sim = verify_teed(
        lines, terms, judged, zones, load_names=loads, r_fault_ohm=rs.fault_resistances,
        k0=k0, k0m=k0m, phase_labels=labels,
        k0_by_end={x: e.settings.k0.k0 for x, e in zip(judged, results, strict=True)},
        beyond={y: [(a.name, a.z1, a.z0 if a.z0 is not None else 3 * a.z1)
                    for a in study.adjacent_lines if a.bus == buses[y] and a.z1 is not None]
                for y in range(3)},
        next_zone1_pct=(philosophy.zone2.adjacent_zone1_pct
                        if philosophy.zone2.grading == "short_of_adjacent_zone1" else None),
        **envelope)
    results = [dataclasses.replace(e, verification_checks=sim[x].checks)
               for e, x in zip(results, judged, strict=True)]
    accepted = teed_deviations(study, results, source)
    names = {(a.end, a.check) for a in accepted}
    failed = sum(not c.passed and (e.end, deviation_name(c.check_id)) not in names
                 for e in results for c in e.all_checks)
    from relayset.studies.verification.deviations import verdict

    return TeedStudyResult(
        buses=buses, tee_distance_m=study.tee.distance, branch_length_m=study.tee.length,
        z1_set_ohm=relay.z1_set_ohm, k0_set=k0, ends=tuple(results),
        assumptions=(*ASSUMPTIONS, VERIFIED, *teed_line_notes(study)),
        legs=tuple((leg.total_length_m, complex(to_sequence(leg.z_total_ohm[:3, :3])[1, 1]),
                    complex(to_sequence(leg.z_total_ohm[:3, :3])[0, 0])) for leg in line.legs),
        verification="failed checks" if failed else verdict((), accepted)[0],
        deviations=accepted)


def teed_deviations(study: Study, ends, source: str) -> tuple:
    """The study's ``[[deviations]]`` applied to the teed checks by the two-ended rule
    (:func:`relayset.studies.verification.deviations.apply_deviations`): each must name a
    check that failed at a relay end of this run ("zone.check_id",
    :func:`relayset.results.teed.deviation_name`), or the study is refused in one line."""
    from relayset.results.verification import EndVerification
    from relayset.studies.verification.deviations import apply_deviations

    checks: dict[str, dict[str, bool]] = {}
    for e in ends:
        own = checks.setdefault(e.end, {})
        for c in e.all_checks:
            if c.judged:  # a check that was not carried out is never a deviation
                name = deviation_name(c.check_id)
                own[name] = own.get(name, True) and c.passed
    return apply_deviations(study, [EndVerification(e.end, (), None, None) for e in ends],
                            source, checks)[1]
