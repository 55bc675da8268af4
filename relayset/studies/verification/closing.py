"""Settings closed by the fault simulation, then verified (the order of the steps).

The simulation's findings that feed back into the settings (zone 1 limit, infeed range,
resistive widening, reverse cover) are applied by the setting rules in
:mod:`relayset.settings`; this module only runs the steps in order.
"""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np

from relayset.errors import InputError
from relayset.inputs.study_file import Study
from relayset.results.parameters import LineParameters
from relayset.results.settings import SettingsResult
from relayset.results.verification import VerificationResult
from relayset.studies.geometry import LineGeometry
from relayset.studies.verification.checks import (
    check_tolerance,
    infeed_range,
    measure_for,
    measured_ends,
    relay_model_at,
    remote_bus_views,
    resistive_targets,
    rf_mask,
    verification_grid,
    verify_settings,
    worst_remote_bus_scale,
    zone1_limit_pct,
)
from relayset.studies.verification.envelope import build_envelope, resistivities
from relayset.studies.verification.relay_model import (
    GROUND,
    LOOPS,
    Z_SMALL,
    RelayModel,
    relay_view,
)
from relayset.studies.verification.simulation import Simulation, simulate


def params_by_resistivity(study: Study, geo: LineGeometry, params: LineParameters,
                          source: str) -> dict[float, LineParameters]:
    """Line parameters at the study's resistivity and at the ends of its uncertainty range.

    The relay keeps the k0 of its settings while the line's own k0 moves with the earth
    resistivity, so the verification solves the line at each of them.
    """
    from relayset.studies.geometry import build_geometry
    from relayset.studies.parameters import compute_parameters

    rho = study.system.earth_resistivity
    out = {float(rho): params}
    for r in resistivities(study)[0]:
        if float(r) not in out:
            out[float(r)] = compute_parameters(build_geometry(study_at_resistivity(study, r),
                                                              source))
    return out


def study_at_resistivity(study: Study, r: float) -> Study:
    """The study with the earth resistivity ``r`` [ohm m] (a two-layer earth's lower layer
    scaled alike)."""
    rho = study.system.earth_resistivity
    system = replace(study.system, earth_resistivity=r)
    if system.earth_lower_resistivity is not None:  # two layers: both scale alike
        system = replace(system, earth_lower_resistivity=(
            system.earth_lower_resistivity * r / rho))
    return replace(study, system=system)


def settle_and_verify(study: Study, geo: LineGeometry, params: LineParameters, relay,
                      reach, philosophy, *, source: str
                      ) -> tuple[tuple[SettingsResult, ...], VerificationResult]:
    """Settings of every relay end, closed by simulation, and their verification.

    1. Preliminary settings at both ends (the rules of :mod:`relayset.settings`); the end
       the study does not ask for is needed for its zone 2 (the reverse zone must cover it).
    2. The simulation over the envelope (solved once, measured for both ends' relays)
       gives per end a typed :class:`relayset.settings.simulated.SimulationSummary`: the
       worst zone 1 overreach at the remote bus, the infeed range, the resistive reach the
       simulated faults need.
    3. Final settings: the setting rules of :mod:`relayset.settings.simulated` turn the
       summary into the zone 1 limit, the infeed, the resistive widening and the reverse
       zone covering the other end's zone 2.
    4. The verification of the final settings of the ends the study asks for, on the same
       simulation (the final zone 1 points solved on top).
    """
    from relayset.inputs.profile import study_profile
    from relayset.settings.simulated import (
        WIDENED_ZONES,
        ResistiveNeed,
        SimulationSummary,
        zone1_limit,
    )
    from relayset.studies.settings import run_settings

    # The relay profile is read before anything is computed (bad input stops at once).
    profile = study_profile(study.relay.profile, source)
    names = (study.study.from_substation, study.study.to_substation)
    t = check_tolerance(study.error_budget.total_pct, source)
    wanted = tuple(relay.ends)
    study = _lines_on_their_buses(study)

    def settings_at(simulated, widened=WIDENED_ZONES):
        out = {}
        for end in names:
            try:
                out[end] = run_settings(study, geo, params, relay, reach, philosophy,
                                        source=source, ends=(end,), simulated=simulated,
                                        widened_zones=widened)[0]
            except InputError:
                if end in wanted:
                    raise
        return out

    prelim = settings_at({})
    by_rho = params_by_resistivity(study, geo, params, source)
    # One simulation serves the closing and the verification: the fault currents do not
    # depend on the settings, only the zones' judgement does. It covers the verification's
    # grid with the preliminary zone 1 points, and is measured for both ends' relays
    # (k0, k0m and relay model, which the closing does not change).
    m_sim = verification_grid(prelim, names, t)
    env0 = build_envelope(study, resistive_targets(study, list(prelim.values())))
    # (the end the study does not ask for is not judged: its infeed alone is needed, unless
    # the scheme's checks need its relay's view as well: current reversal, zone 1 overlap)
    measure = measure_for(study, geo, prelim, measured_ends(philosophy, wanted, names))
    sim0 = simulate(study, geo, by_rho, env0, m=m_sim, source=source, measure=measure)
    models = {end: relay_model_at(study, end) for end in names}
    st_tower = study.fault_resistance.tower_footing_resistance
    # What the simulation found per end, typed; the setting rules in relayset.settings
    # (relayset.settings.simulated) decide what follows from it.
    summary: dict[str, SimulationSummary] = {}
    for end, st in prelim.items():
        inf = infeed_range(sim0, end)
        if end not in wanted:  # its zone 2 (for this end's reverse zone) needs the infeed
            summary[end] = SimulationSummary(
                tolerance_pct=t, infeed_range=None if inf is None else (inf.k_min, inf.k_max))
            continue
        need = _resistive_needs(sim0, end, st, t, st_tower, models[end])
        summary[end] = SimulationSummary(
            tolerance_pct=t,
            infeed_range=None if inf is None else (inf.k_min, inf.k_max),
            resistive_needs=tuple(ResistiveNeed(z, ph, g) for z, (ph, g) in need.items()),
            zone1_shape_scales=zone1_shape_scales(sim0, end, st, models[end]))
    # Zone 1 with its reactance line tilted and its blinder widened (the shape the
    # remote-bus faults allow), then its limit from the worst remote-bus fault against it.
    tilted = settings_at(summary)
    for end, st in tilted.items():
        if end not in wanted:
            continue
        summary[end] = replace(summary[end],
                               remote_bus_scale=worst_remote_bus_scale(sim0, end, st,
                                                                       models[end]),
                               zone1_reach_pct=st.zone("zone1").reach_pct)
    # What zone 1 could reach with its blinder widened too (reported, not set).
    wide = settings_at(summary, widened=("zone1", *WIDENED_ZONES))
    advice: dict[str, tuple[float, float | None]] = {}
    for end in prelim:
        if end in wide and any(n.zone == "zone1" for n in summary[end].resistive_needs):
            z1w = wide[end].zone("zone1")
            advice[end] = (z1w.r_reach_ground_primary_ohm,
                           zone1_limit_pct(sim0, end, wide[end], t,
                                           philosophy.zone1.min_margin_pct, models[end]))
    final = settings_at(summary)
    # The reverse zone of each end covers the other end's zone 2 past this bus.
    again = False
    for end in final:
        other = names[1] if end == names[0] else names[0]
        if other not in final:
            continue
        rem = final[other]
        over = abs(rem.zone("zone2").reach_primary_ohm) - abs(rem.line_z1_primary_ohm)
        if over > 0:
            summary[end] = replace(summary[end], remote_zone2_overreach_ohm=over)
            again = True
    if again:
        final = settings_at(summary)
    for end, st in final.items():
        lim = zone1_limit(summary[end], philosophy)
        if lim is not None and (
                st.zone("zone1").reach_pct < prelim[end].zone("zone1").reach_pct - 1e-9):
            from relayset.results.settings import SettingWarning

            final[end] = replace(st, warnings=(*st.warnings, SettingWarning(
                "zone1_limited_by_simulation",
                f"Zone 1 at most {lim[0]:.4g} % of the line: the "
                "worst fault at the remote bus over every "
                + ("parallel-circuit state, " if geo.n_circuits == 2 else "")
                + "source and load case and fault resistance overreaches by "
                f"{summary[end].zone1_overreach_pct():.3g} % of the setting",
                "review the governing case in the verification; a pilot scheme restores "
                "instantaneous coverage of the line end")))
    final = _inversion_warnings(reach, final)
    if profile is not None:  # the settings become final: on the relay's steps
        from relayset.settings.settable import settable_settings

        def ct_secondary(end):
            primary = study.relay.ct_primary_a(end)
            return None if primary is None else primary / study.relay.ratios(end)[0]

        mop = study.relay.min_operating_current
        final = {end: settable_settings(st, profile, mop, ct_secondary(end))
                 if end in wanted else st for end, st in final.items()}
    # The verification reuses the simulation, with the final zone 1 points solved on top
    # (solved afresh only if the final settings changed what the envelope sweeps).
    env = build_envelope(study, resistive_targets(study, list(final.values())))
    same_relays = measure_for(study, geo, final,
                              measured_ends(philosophy, wanted, names)) == measure
    sim = None
    if env == env0 and same_relays:
        m_new = verification_grid(final, names, t)
        extra = m_new[~np.isclose(m_new[:, None], m_sim[None, :], rtol=0, atol=1e-12
                                  ).any(axis=1)]
        sim = sim0 if not extra.size else sim0.joined(simulate(
            study, geo, by_rho, env0, m=extra, source=source, sequential=False, branches=False,
            measure=measure))
    del sim0
    ver = verify_settings(study, geo, by_rho, final, source=source,
                          zone2_adjacent_zone1_pct=philosophy.zone2.adjacent_zone1_pct,
                          philosophy=philosophy, ends=wanted, envelope=env,
                          simulation=sim)
    ends = []
    for e in ver.ends:
        checks = list(e.checks)
        for k, c in enumerate(checks):
            if (c.zone, c.check_id) == ("zone1", "operates_for_internal_faults") and (
                    not c.passed and e.end in advice):
                r_g, lim = advice[e.end]
                checks[k] = replace(c, consider=c.consider + (
                    f"; widened for the simulated infeed (ground blinder {r_g:.4g} Ω) zone 1 "
                    f"could reach only {lim:g} % of the line" if lim is not None else ""))
        ends.append(replace(e, checks=tuple(checks)))
    ver = replace(ver, ends=tuple(ends))
    return tuple(final[e] for e in wanted), ver


def _inversion_warnings(reach, final: dict) -> dict:
    """Voltage and current inversion found by the series capacitor study
    (relayset.studies.series_capacitors) as warnings of the settings at that end."""
    caps = getattr(reach, "series_capacitors", None) if reach is not None else None
    if not caps:
        return final
    from relayset.results.settings import SettingWarning

    consider = {
        "voltage_inversion": "use memory-polarised or positive-sequence-polarised "
        "directional elements, and check zone 1 does not rely on the faulted-phase voltage "
        "for faults just beyond the bank",
        "current_inversion": "directional elements see the fault as reverse: rely on a pilot "
        "scheme with current-reversal logic, or reconsider the bank's size or place",
        "reverse_fault_seen_forward": "take the relay's voltage from the bus side of the "
        "bank, or keep the forward zones' reactive reach below X_C with a directional "
        "element polarised from the bus side; the verification's faults behind the relay "
        "show whether a zone operates"}
    out = dict(final)
    for end, st in final.items():
        found = [i for i in caps["inversion_checks"] if i["end"] == end and i["exists"]]
        if found:
            out[end] = replace(st, warnings=(*st.warnings, *(SettingWarning(
                f"series_capacitor_{i['kind']}", i["text"], consider[i["kind"]])
                for i in found)))
    return out


def _lines_on_their_buses(study: Study) -> Study:
    """The study with every adjacent line and line behind tied to the bus it leaves.

    A line without ``bus`` is relative to the study's relay end (adjacent lines leave its
    remote bus, lines behind its own). The verification also sets the other end (its zone 2
    is what the reverse zone must cover), so the buses are fixed here once.
    """
    if study.relay is None or study.relay.end not in study.ends:
        return study
    own = study.relay.end
    remote = study.ends[1] if own == study.ends[0] else study.ends[0]
    update = {}
    for which, bus in (("adjacent_lines", remote), ("lines_behind", own)):
        lines = getattr(study, which)
        if any(line.bus is None for line in lines):
            update[which] = tuple(line if line.bus is not None
                                  else replace(line, bus=bus) for line in lines)
    return replace(study, **update) if update else study


def _remote_bus_points(sim: Simulation, end: str, st: SettingsResult, model: RelayModel
                       ) -> dict[bool, np.ndarray]:
    """Per kind of loop (True: ground), the apparent impedances [ohm] of every simulated
    fault at the remote bus that a loop released for it measures, seen forward."""
    out: dict[bool, list[np.ndarray]] = {True: [], False: []}
    for v in remote_bus_views(sim, end, st, model):
        for loop in LOOPS:
            idx = v.meant[loop]
            if idx:
                z = v.loops[loop]
                ok = v.forward[idx] & v.released[loop][idx] & np.isfinite(z)
                out[loop in GROUND].append(z[ok])
    return {g: np.concatenate(z) if z else np.zeros(0, complex) for g, z in out.items()}


def zone1_shape_scales(sim: Simulation, end: str, st: SettingsResult, model: RelayModel
                       ) -> tuple[tuple[float, float, float], ...]:
    """The worst remote-bus fault's reach scale of a quadrilateral zone 1 against its
    reactance-line tilt and the widening of its resistive reach: ``((τ [rad], f, s), ...)``
    over :data:`relayset.settings.simulated.TILT_GRID_DEG` and
    :data:`~relayset.settings.simulated.BLINDER_FACTORS`, with s the scale relative to the
    line (zone 1 at 100 % of the line, its reactance line through Z_L) and the widened
    reach capped at the load limit. Empty for a mho zone 1."""
    from relayset.settings.simulated import BLINDER_FACTORS, TILT_GRID_DEG
    from relayset.settings.zone1 import tilted_x_reach

    z1 = st.zone("zone1")
    if z1.shape != "quadrilateral":
        return ()
    theta = st.line_angle_rad
    pts = _remote_bus_points(sim, end, st, model)
    zl = st.line_z1_primary_ohm
    cap = st.load.r_limit_primary_ohm or math.inf
    out = []
    # Widening moves the right blinder only (the settings keep the left one).
    left_ph = z1.characteristic(False, theta).r_left
    left_g = z1.characteristic(True, theta).r_left
    for f in BLINDER_FACTORS:
        r_ph = max(z1.r_reach_phase_primary_ohm, min(f * z1.r_reach_phase_primary_ohm, cap))
        r_g = max(z1.r_reach_ground_primary_ohm, min(f * z1.r_reach_ground_primary_ohm, cap))

        def scales(deg, z, g, r_ph=r_ph, r_g=r_g):
            tau = math.radians(deg)
            zone = replace(z1, reactance_tilt_rad=tau,
                           x_reach_primary_ohm=tilted_x_reach(zl, tau),
                           r_reach_phase_primary_ohm=r_ph, r_reach_ground_primary_ohm=r_g,
                           r_left_phase_primary_ohm=left_ph, r_left_ground_primary_ohm=left_g)
            return zone.characteristic(g, theta).reach_scale(z)

        # A point's scale (X + R tan τ)/(X_L + R_L tan τ) is monotonic in tan τ (the
        # blinders do not move with τ), so it is least at an end of the tilt range: a point
        # whose smaller end value exceeds some point's larger one never governs.
        lo, hi = TILT_GRID_DEG[0], TILT_GRID_DEG[-1]
        ends = {g: (scales(lo, z, g), scales(hi, z, g)) for g, z in pts.items() if z.size}
        bound = min((float(np.min(np.maximum(a, b))) for a, b in ends.values()),
                    default=math.inf)
        kept = {g: pts[g][np.minimum(a, b) <= bound] for g, (a, b) in ends.items()}
        for deg in TILT_GRID_DEG:
            worst = min((float(np.min(scales(deg, z, g))) for g, z in kept.items()
                         if z.size), default=math.inf)
            out.append((math.radians(deg), f, worst))
    return tuple(out)


def _resistive_needs(sim: Simulation, end: str, st: SettingsResult, tolerance_pct: float,
                     tower_ohm: float, model: RelayModel) -> dict[str, tuple[float, float]]:
    """Blinder offset (phase, ground loops) each quadrilateral zone needs to operate for the
    simulated resistive faults it must cover, remote infeed included [ohm]."""
    at_s = end == sim.names[0]
    theta = st.line_angle_rad
    zl = abs(st.line_z1_primary_ohm)
    k0m = st.k0m if sim.mutual else None
    out = {}
    for name in ("zone1", "zone2"):
        zone = st.zone(name)
        if zone.shape != "quadrilateral":
            continue
        lim = (zone.reach_pct / 100 * (1 - tolerance_pct / 100) if name == "zone1"
               else 1.0)
        need = {True: 0.0, False: 0.0}
        # The zone as set but for its right blinder: the faults the blinder alone misses.
        unbounded_right = {}
        for g in (False, True):
            ch = zone.characteristic(g, theta)
            unbounded_right[g] = replace(ch, r_reach_ohm=1e6 * (zl + ch.r_left),
                                         r_left_ohm=ch.r_left)
        for run in sim.runs:
            if run.faulted != "protected" or not run.sources[0 if at_s else 1]:
                continue
            sw = run.sweep
            v = relay_view(run, at_s, st.k0.k0, k0m, model, line_angle=theta)
            rfp = np.stack([sw.r_fault_ohm, sw.r_phase_ohm], axis=1)
            rf_ok = rf_mask(rfp, zone, tower_ohm)[None, None, :, None, None]
            m_ok = (v.m_end <= lim + 1e-9)[None, :, None, None, None]
            for loop in LOOPS:
                idx = v.meant[loop]
                if not idx:
                    continue
                z = v.loops[loop]
                z = z[rf_ok & m_ok & v.forward[idx] & v.released[loop][idx]
                      & (np.abs(z) >= Z_SMALL * zl)]
                z = z[unbounded_right[loop in GROUND].contains(z)]
                if z.size:
                    off = z.real - z.imag / math.tan(theta)
                    ground = loop in GROUND
                    need[ground] = max(need[ground], float(np.max(off)))
        out[name] = (need[False], need[True])
    return out


