"""Fault simulation of a three-terminal (teed) line's zone 1 and zone 2.

The settings of :mod:`relayset.studies.teed` (zone 1 and zone 2 as set: the
:class:`~relayset.results.settings.ZoneSetting` of each, its characteristic the
philosophy's shape, mho or quadrilateral, on a relay profile's steps where the study names
one; reaches from :mod:`relayset.settings.teed`) are judged by the relay model of the two-ended
verification (:mod:`.relay_model`: loops released by phase selection, release currents,
directional elements, close-in faults) on faults solved by the teed solver
(:mod:`relayset.physics.teed`), with every infeed state (all sources in, each terminal's
source out, each two out), on a double-circuit line each state of the untapped parallel
circuit (in service, out and earthed, out and isolated), and the reach study's source
cases, fault types and resistances:

- zone 1 must not operate for any fault at either remote terminal (on the line side of its
  current transformer) or along the lines beyond it (``[[adjacent_lines]]`` with their bus);
- zone 2, graded short of the next zone 1, must not operate for faults from that zone 1's
  reach on along those lines;
- zone 2 must operate for every bolted fault along the three legs;
- zone 1 coverage: the share of the bolted faults along the legs zone 1 trips (stated, not
  judged: the rest is cleared by zone 2 or a communication scheme).
"""

from __future__ import annotations

import itertools
import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from relayset.physics.network import FaultSweep, Source
from relayset.physics.sequence import balanced_phase_matrix
from relayset.physics.teed import (
    ENDS,
    TeedLine,
    TeedSweep,
    parallel_label,
    parallel_states,
    solve_teed_sweep,
)
from relayset.results.reach import fault_label, loop_label
from relayset.results.settings import Check, ZoneSetting
from relayset.studies.verification.relay_model import (
    GROUND,
    LOOPS,
    Z_SMALL,
    RelayModel,
    Run,
    view,
    zone_scale,
)

#: Fault locations along each leg, fraction from its bus to the tee [1].
LEG_LOCATIONS = np.linspace(0.0, 1.0, 21)


@dataclass(frozen=True)
class TeedVerdict:
    """The simulation's checks at one relay end and the numbers they judge."""

    checks: tuple[Check, ...]
    zone1_remote_scale: float  #: smallest zone 1 reach scale, remote-terminal faults [1]
    zone2_internal_scale: float  #: largest zone 2 reach scale, bolted faults on the legs [1]
    zone1_coverage_pct: float  #: share of bolted faults on the legs zone 1 trips [%]


def _as_run(sw: TeedSweep, end: str, case_names: tuple[str, ...], state: str = "none"
            ) -> Run:
    """The teed sweep as the relay at ``end`` sees it, in the two-ended run's shape (that
    end in the place of bus S), for :func:`.relay_model.view`; ``state`` the parallel
    circuit's (a double circuit), "none" on a single circuit."""
    zeros = np.zeros_like(sw.i[end]) if sw.i_parallel is None else sw.i_parallel[end]
    k = sw.emf_v.shape[1]
    fs = FaultSweep(
        fault_types=sw.fault_types, m=sw.m, r_fault_ohm=sw.r_fault_ohm,
        r_phase_ohm=sw.r_phase_ohm, source_scale=np.ones((k, 2)), emf_s_v=sw.emf_v[0],
        emf_r_v=sw.emf_v[1], parallel_state="in_service", v_s=sw.v[end], i_s=sw.i[end],
        i_s_parallel=zeros, v_r=None, i_r=None, i_r_parallel=None, v_f=sw.v_f,
        i_fault=sw.i_fault, i_f_from_s=None, i_f_from_r=None, v_s_pre=sw.v_pre[end],
        i_s_pre=sw.i_pre[end], i_s_parallel_pre=np.zeros_like(sw.i_pre[end]))
    return Run(fs, "protected", state, case_names, 0.0, (True, True))


#: The infeed states: the terminals disconnected (none; each one; each two, the relay's
#: own source then feeding alone).
STATES = ((), (0,), (1,), (2,), (0, 1), (0, 2), (1, 2))


def _states(lines, terminals, buses):
    """(earth label, line, open terminals, terminals, state label, parallel state, the
    parallel state as the relay model reads it) of every network: a double circuit's
    parallel circuit in each of its states."""
    for (earth, line), out in itertools.product(lines, STATES):
        if any(terminals[k] is None for k in out):
            continue  # already open: the same network as a smaller state
        terms = [None if k in out else t for k, t in enumerate(terminals)]
        if not any(isinstance(t, Source) for t in terms):
            continue
        label = ("all sources in" if not out else "no source at "
                 + " and ".join(buses[k] for k in out)) + f", {earth}"
        for ps in parallel_states(line):
            run_state = ps if line.n_conductors == 6 else "none"  # k0m: in service only
            yield (earth, line, out, terms, label + parallel_label(line, ps), ps,
                   run_state)


def terminal_blinder_needs(
    lines: Sequence[tuple[str, TeedLine]], terminals, relay_ends: tuple[int, ...],
    *, v_nominal_v: float, fault_types, source_scale: np.ndarray,
    case_names: tuple[str, ...], k0: complex, line_angle_rad: float, z_line_ohm: float,
    models: dict[int, RelayModel], buses: tuple[str, str, str],
    emf_v: tuple[np.ndarray, np.ndarray, np.ndarray] | None = None,
    k0m: complex | None = None,
) -> dict[tuple[int, bool], tuple[float, float]]:
    """Right and left blinder offsets (:func:`relayset.settings.teed.blinder_offset_ohm`,
    the left one of -Z) [ohm] that hold every bolted fault at each remote terminal as the
    relay at each end measures it, per (end, ground loops): over the verification's networks
    (every infeed state and earth resistivity), source and load cases, the meant loops the
    relay releases, forward. The third terminal's infeed turns these impedances off the line
    angle, either way, so a quadrilateral zone 2 set from the arc alone would miss them;
    this is the teed line's counterpart of the two-ended closing's resistive need
    (:mod:`.closing`)."""
    from relayset.settings.teed import blinder_offset_ohm

    need: dict[tuple[int, bool], tuple[float, float]] = {}
    for _, line, out, terms, _, ps, run_state in _states(lines, terminals, buses):
        for y in range(3):
            sw = solve_teed_sweep(line, terms, v_nominal_v=v_nominal_v, fault_leg=ENDS[y],
                                  fault_types=fault_types, m=[0.0], r_fault_ohm=[0.0],
                                  source_scale=source_scale, emf_v=emf_v,
                                  parallel_state=ps, parallel_currents=k0m is not None)
            for x in relay_ends:
                if x in out or x == y:
                    continue
                vw = view(_as_run(sw, ENDS[x], case_names, run_state), True, k0,
                          k0m if x != 2 else None, models[x], line_angle=line_angle_rad)
                for loop in LOOPS:
                    idx = vw.meant[loop]
                    if not idx:
                        continue
                    z = vw.loops[loop]
                    z = z[vw.forward[idx] & vw.released[loop][idx]
                          & (np.abs(z) >= Z_SMALL * z_line_ohm)]
                    if z.size:
                        g = loop in GROUND
                        off = blinder_offset_ohm(z, line_angle_rad)
                        right, left = need.get((x, g), (0.0, 0.0))
                        need[x, g] = (max(right, float(np.max(off))),
                                      max(left, float(np.max(-off))))
    return need


def verify_teed(
    lines: Sequence[tuple[str, TeedLine]], terminals, relay_ends: tuple[int, ...],
    zones: dict[int, tuple[ZoneSetting, ZoneSetting]],
    *, v_nominal_v: float, fault_types, r_fault_ohm, source_scale: np.ndarray,
    case_names: tuple[str, ...], k0: complex, line_angle_rad: float, z_line_ohm: float,
    k0m: complex | None = None,
    models: dict[int, RelayModel], buses: tuple[str, str, str],
    beyond: dict[int, list[tuple[str, complex, complex]]] | None = None,
    next_zone1_pct: float | None = None,
    emf_v: tuple[np.ndarray, np.ndarray, np.ndarray] | None = None,
    load_names: tuple[str, ...] = ("no load",),
    k0_by_end: dict[int, complex] | None = None,
    phase_labels: tuple[str, str, str] = ("A", "B", "C"),
) -> dict[int, TeedVerdict]:
    """Checks and their numbers per relay end (index into :data:`~relayset.physics.teed.ENDS`).

    ``lines`` holds the line at each earth resistivity, with a label; ``emf_v`` the
    phase-A EMFs of the load cases, per terminal (L,), named by ``load_names``.
    ``zones[x]`` is (zone 1, zone 2) at end x as set (each tested through its
    ``characteristic``, the one object of :mod:`relayset.physics.characteristic`),
    ``phase_labels`` name the phases in the cases' labels as the study does;
    ``models[x]`` the relay model there and ``k0_by_end[x]`` the k0 it is set with
    (default ``k0``: a relay profile's steps may round it). ``beyond[y]`` lists the lines
    leaving bus y (name, Z1, Z0 [ohm]); faults along them (a series branch from the bus,
    carrying the fault current only) are judged by the relays at the other ends: zone 1
    must stay out, and with ``next_zone1_pct`` (zone 2 graded short of the next zone 1)
    zone 2 must not operate from that share of each line on. The relay at bus y itself
    looks behind for them and is not judged.
    """
    rf = np.unique(np.concatenate([[0.0], np.asarray(r_fault_ohm, dtype=float)]))
    worst1 = {x: (math.inf, "") for x in relay_ends}  # smallest zone 1 scale, remote bus
    worst2 = {x: (0.0, "") for x in relay_ends}  # largest zone 2 scale, bolted internal
    cover = {x: [0, 0] for x in relay_ends}  # zone 1 trips, cases
    next2 = {x: (math.inf, "") for x in relay_ends}  # smallest zone 2 scale past next zone 1
    beyond = beyond or {}
    p_next = None if next_zone1_pct is None else next_zone1_pct / 100.0
    fracs = np.unique(np.array([0.25, 0.5, 1.0] + ([p_next] if p_next else [])))
    zone_1 = {x: zones[x][0] for x in relay_ends}
    zone_2 = {x: zones[x][1] for x in relay_ends}
    k0s = {x: (k0_by_end or {}).get(x, k0) for x in relay_ends}
    for _, line, out, terms, state, ps, run_state in _states(lines, terminals, buses):
        for leg in range(3):
            sw = solve_teed_sweep(line, terms, v_nominal_v=v_nominal_v, fault_leg=ENDS[leg],
                                  fault_types=fault_types, m=LEG_LOCATIONS, r_fault_ohm=rf,
                                  source_scale=source_scale, emf_v=emf_v,
                                  parallel_state=ps,
                                  parallel_currents=k0m is not None)
            for x in relay_ends:
                if x in out:
                    continue  # the relay's own source out: not this relay's case
                model = models[x]
                vw = view(_as_run(sw, ENDS[x], case_names, run_state), True, k0s[x],
                          k0m if x != 2 else None, model, line_angle=line_angle_rad)

                def label(idx, loop, leg=leg, state=state, sw=sw):
                    f, mi, ri, k, ld = idx
                    return (f"{fault_label(sw.fault_types[f], phase_labels)} fault, loop "
                            f"{loop_label(LOOPS[loop], phase_labels)}, "
                            f"{_where(buses, leg, float(sw.m[mi]))}, Rf = {rf[ri]:g} ohm, "
                            f"source case {case_names[k]}, {load_names[ld]}, {state}")

                if leg != x:  # faults at the remote bus (m = 0 of that leg)
                    s1 = zone_scale(vw.at_locations(np.array([0])), zone_1[x],
                                    line_angle_rad, z_line_ohm, model)
                    j = np.unravel_index(int(np.argmin(s1.scale)), s1.scale.shape)
                    if s1.scale[j] < worst1[x][0]:
                        worst1[x] = (float(s1.scale[j]), label(j, int(s1.which[j])))
                # bolted faults along the leg (rf index 0 is 0 ohm); close-in operate
                s2 = zone_scale(vw, zone_2[x], line_angle_rad, z_line_ohm, model)
                a2 = s2.scale_in[:, :, :1]
                j = np.unravel_index(int(np.argmax(a2)), a2.shape)
                if a2[j] > worst2[x][0]:
                    worst2[x] = (float(a2[j]), label(j, int(s2.which_in[:, :, :1][j])))
                s1in = zone_scale(vw, zone_1[x], line_angle_rad, z_line_ohm, model)
                cover[x][0] += int(np.count_nonzero(s1in.scale_in[:, :, :1] <= 1.0))
                cover[x][1] += s1in.scale_in[:, :, :1].size
        for y, lines in beyond.items():  # faults along the lines leaving bus y
            if not lines:
                continue
            where = [(name, float(f)) for name, _, _ in lines for f in fracs]
            z_b = np.stack([balanced_phase_matrix(f * z1, f * z0)
                            for _, z1, z0 in lines for f in fracs])
            sw = solve_teed_sweep(line, terms, v_nominal_v=v_nominal_v, fault_leg=ENDS[y],
                                  fault_types=fault_types, m=np.zeros(len(where)),
                                  r_fault_ohm=rf, source_scale=source_scale, z_branch_ohm=z_b,
                                  emf_v=emf_v, parallel_state=ps,
                                  parallel_currents=k0m is not None)
            for x in relay_ends:
                if x in out or x == y:
                    continue
                model = models[x]
                vw = view(_as_run(sw, ENDS[x], case_names, run_state), True, k0s[x],
                          k0m if x != 2 else None, model, line_angle=line_angle_rad)

                def blabel(idx, loop, y=y, state=state, where=where, sw=sw):
                    f, mi, ri, k, ld = idx
                    name, frac = where[mi]
                    return (f"{fault_label(sw.fault_types[f], phase_labels)} fault, loop "
                            f"{loop_label(LOOPS[loop], phase_labels)}, {100 * frac:.0f} "
                            f"% along '{name}' beyond {buses[y]}, Rf = {rf[ri]:g} ohm, "
                            f"source case {case_names[k]}, {load_names[ld]}, {state}")

                s1 = zone_scale(vw, zone_1[x], line_angle_rad, z_line_ohm, model)
                j = np.unravel_index(int(np.argmin(s1.scale)), s1.scale.shape)
                if s1.scale[j] < worst1[x][0]:
                    worst1[x] = (float(s1.scale[j]), blabel(j, int(s1.which[j])))
                if p_next is None:
                    continue
                past = np.flatnonzero([fr >= p_next - 1e-12 for _, fr in where])
                s2 = zone_scale(vw.at_locations(past), zone_2[x], line_angle_rad, z_line_ohm,
                                model)
                j = np.unravel_index(int(np.argmin(s2.scale)), s2.scale.shape)
                if s2.scale[j] < next2[x][0]:
                    lab = blabel((j[0], past[j[1]], *j[2:]), int(s2.which[j]))
                    next2[x] = (float(s2.scale[j]), lab)
    out_checks = {}
    for x in relay_ends:
        s1, c1 = worst1[x]
        s2, c2 = worst2[x]
        ok1 = s1 > 1.0
        ok2 = s2 <= 1.0
        share = 100.0 * cover[x][0] / max(cover[x][1], 1)
        s3, c3 = next2[x]
        has_lines = any(beyond.get(y) for y in range(3) if y != x)
        if p_next is None or not has_lines:
            why = ("zone 2 is time graded" if p_next is None
                   else "no line beyond the remote terminals given")
            grading = Check("zone2_stays_short_of_next_zone1", True,
                            f"not simulated: {why}", judged=False)
        else:
            ok3 = s3 > 1.0
            grading = Check(
                "zone2_stays_short_of_next_zone1", ok3,
                f"smallest zone 2 reach scale {s3:.3g} for faults from {100 * p_next:g} % "
                f"along the lines beyond the remote terminals ({c3})"
                + ("" if ok3 else "; zone 2 reaches into the next line's zone 1: grade it "
                   "in time with the next zone 2, or shorten it"))
        out_checks[x] = TeedVerdict((
            Check("zone1_no_remote_terminal_trip", ok1,
                  f"zone 1 {'stays out' if ok1 else 'operates'}: smallest reach scale "
                  f"{s1:.3g} for faults at and beyond the remote terminals ({c1})"
                  + ("" if ok1 else "; zone 1 overreaches a remote terminal: reduce it")),
            Check("zone2_covers_all_legs", ok2,
                  f"largest reach scale {s2:.3g} of zone 2 over the bolted faults along the "
                  f"three legs ({c2})"
                  + ("" if ok2 else "; zone 2 does not reach that fault: it needs more "
                     "reach, or a communication scheme covers it")),
            Check("zone1_coverage", True,
                  f"zone 1 trips {share:.3g} % of the bolted faults along the three legs "
                  "(stated, not judged)", judged=False),
            grading,
        ), s1, s2, share)
    return out_checks


def _where(buses: tuple[str, str, str], leg: int, m: float) -> str:
    if m == 0.0:
        return f"at {buses[leg]}"
    if m == 1.0:
        return "at the tee"
    return f"{100 * m:.0f} % of the leg from {buses[leg]} to the tee"
