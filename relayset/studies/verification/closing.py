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
from relayset.physics.arrays import unique_sorted
from relayset.results.parameters import LineParameters
from relayset.results.settings import SettingsResult
from relayset.results.verification import VerificationResult
from relayset.studies.geometry import LineGeometry
from relayset.studies.verification.checks import (
    check_tolerance,
    infeed_range,
    relay_model_at,
    resistive_targets,
    rf_mask,
    verify_settings,
    worst_remote_bus_scale,
    zone1_limit_pct,
)
from relayset.studies.verification.envelope import build_envelope, resistivities
from relayset.studies.verification.relay_model import GROUND, LOOPS, Z_SMALL, RelayModel, view
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
            system = replace(study.system, earth_resistivity=r)
            other = replace(study, system=system)
            out[float(r)] = compute_parameters(build_geometry(other, source))
    return out


def settle_and_verify(study: Study, geo: LineGeometry, params: LineParameters, relay,
                      reach, philosophy, *, source: str
                      ) -> tuple[tuple[SettingsResult, ...], VerificationResult]:
    """Settings of every relay end, closed by simulation, and their verification.

    1. Preliminary settings at both ends (the rules of :mod:`relayset.settings`); the end
       the study does not ask for is needed for its zone 2 (the reverse zone must cover it).
    2. A first simulation of the faults at both buses (every parallel-circuit state, source
       and load case, the resistive targets) gives per end the worst zone 1 overreach and
       the infeed range at the remote bus.
    3. Final settings: zone 1 limited by that overreach (the zone 1 rule of
       :func:`relayset.settings.zone1.recommended_zone1_pct`, with the tolerance), infeed
       from the simulation, reverse zone covering the other end's zone 2.
    4. The verification of the final settings of the ends the study asks for.
    """
    from relayset.settings.zone1 import recommended_zone1_pct
    from relayset.studies.settings import run_settings

    names = (study.study.from_substation, study.study.to_substation)
    t = check_tolerance(study.error_budget.total_pct, source)
    wanted = tuple(relay.ends)
    study = _lines_on_their_buses(study)

    def settings_at(simulated):
        out = {}
        for end in names:
            try:
                out[end] = run_settings(study, geo, params, relay, reach, philosophy,
                                        source=source, ends=(end,),
                                        simulated=simulated)[0]
            except InputError:
                if end in wanted:
                    raise
        return out

    prelim = settings_at({})
    by_rho = params_by_resistivity(study, geo, params, source)
    m0 = [0.0, 1.0]
    for end, st in prelim.items():  # where zone 1 must still operate, seen from each end
        x = st.zone("zone1").reach_pct / 100 * (1 - t / 100)
        m0.append(x if end == names[0] else 1 - x)
    env0 = build_envelope(study, resistive_targets(study, list(prelim.values())))
    sim0 = simulate(study, geo, by_rho, env0, m=unique_sorted(m0), source=source,
                    parallel=False)
    models = {end: relay_model_at(study, end) for end in names}
    st_tower = study.fault_resistance.tower_footing_resistance
    needs = {end: _resistive_needs(sim0, end, st, t, st_tower, models[end])
             for end, st in prelim.items()}
    # Zone 2's blinder is widened for remote infeed into the fault resistance (time-graded,
    # load permitting). Zone 1's is not: a wider zone 1 blinder admits resistive faults at
    # the remote bus and must then be shorter; what it would take is reported instead.
    simulated: dict[str, dict] = {
        end: {"resistive_need_ohm": {k: v for k, v in need.items() if k != "zone1"}}
        for end, need in needs.items()}
    wide = settings_at({end: {"resistive_need_ohm": need} for end, need in needs.items()})
    z1p = philosophy.zone1
    overreach: dict[str, float] = {}
    advice: dict[str, tuple[float, float | None]] = {}
    for end, st in prelim.items():
        sim_end = simulated[end]
        if end in wide and "zone1" in needs[end]:
            z1w = wide[end].zone("zone1")
            advice[end] = (z1w.r_reach_ground_primary_ohm,
                           zone1_limit_pct(sim0, end, wide[end], t, z1p.min_margin_pct,
                                           models[end]))
        s_min = worst_remote_bus_scale(sim0, end, st, models[end])
        if s_min is not None:
            # The worst case appears at s_min x reach (fraction of the line) though it sits
            # at the remote bus: the zone overreaches by e % of its setting.
            e = (100 / (s_min * st.zone("zone1").reach_pct) - 1) * 100
            b = t + t * max(0.0, e) / 100  # tolerance applied on top of the overreach
            rec = recommended_zone1_pct(e, b, z1p.reach_pct, z1p.min_margin_pct)
            if rec > 0:
                sim_end["zone1_limit"] = (rec, b + max(0.0, e))
                overreach[end] = e
        if philosophy.zone2.infeed == "computed" or philosophy.zone3.infeed == "computed":
            inf = infeed_range(sim0, end)
            if inf is not None:
                sim_end["infeed_range"] = (inf.k_min, inf.k_max)
    del sim0  # its solves are large; the verification below makes its own
    final = settings_at(simulated)
    # The reverse zone of each end covers the other end's zone 2 past this bus.
    again = False
    for end in final:
        other = names[1] if end == names[0] else names[0]
        if other not in final:
            continue
        rem = final[other]
        over = abs(rem.zone("zone2").reach_primary_ohm) - abs(rem.line_z1_primary_ohm)
        cover = over / (1 - t / 100) * (1 + 1e-6)
        if over > 0 and cover > abs(final[end].zone("reverse").reach_primary_ohm):
            simulated[end]["reverse_cover_ohm"] = cover
            again = True
    if again:
        final = settings_at(simulated)
    for end, st in final.items():
        if st.zone("zone1").reach_pct < prelim[end].zone("zone1").reach_pct - 1e-9 and (
                end in overreach):
            from relayset.results.settings import SettingWarning

            final[end] = replace(st, warnings=(*st.warnings, SettingWarning(
                "zone1_limited_by_simulation",
                f"Zone 1 at most {simulated[end]['zone1_limit'][0]:.4g} % of the line: the "
                "worst fault at the remote bus over every parallel-circuit state, source and "
                f"load case and fault resistance overreaches by {overreach[end]:.3g} % of the "
                "setting",
                "review the governing case in the verification; a pilot scheme restores "
                "instantaneous coverage of the line end")))
    ver = verify_settings(study, geo, by_rho, final, source=source,
                          zone2_adjacent_zone1_pct=philosophy.zone2.adjacent_zone1_pct,
                          philosophy=philosophy, ends=wanted)
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
        for run in sim.runs:
            if run.faulted != "protected" or not run.sources[0 if at_s else 1]:
                continue
            sw = run.sweep
            v = view(run, at_s, st.k0.k0, k0m, model, line_angle=theta)
            rfp = np.stack([sw.r_fault_ohm, sw.r_phase_ohm], axis=1)
            rf_ok = rf_mask(rfp, zone, tower_ohm)[None, None, :, None, None]
            m_ok = (v.m_end <= lim + 1e-9)[None, :, None, None, None]
            for loop in LOOPS:
                idx = [f for f, ft in enumerate(sw.fault_types) if loop in model.loops_for(ft)]
                if not idx:
                    continue
                z = v.loops[loop][idx]
                ok = (rf_ok & m_ok & v.forward[idx] & v.released[loop][idx]
                      & (np.abs(z) >= Z_SMALL * zl)
                      & (z.imag <= zone.x_reach_primary_ohm)
                      & (math.cos(theta) * z.real + math.sin(theta) * z.imag >= 0))
                if np.any(ok):
                    off = z.real - z.imag / math.tan(theta)
                    ground = loop in GROUND
                    need[ground] = max(need[ground], float(np.max(off[ok])))
        out[name] = (need[False], need[True])
    return out


