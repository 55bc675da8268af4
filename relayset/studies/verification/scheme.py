r"""Checks that follow the philosophy's zone 2 grading and communication scheme.

What each scheme asks of the zones (IEEE Std C37.113-2015 [1]_, pilot protection):

- **Zone 2 grading.** ``short_of_adjacent_zone1``: zone 2 stays short of the end of the
  adjacent line's zone 1 at the minimum infeed, and its delay exceeds the adjacent zone 1's
  clearing time by the grading margin. ``time_graded``: zone 2 may reach past the adjacent
  zone 1 (it is not failed for that); it stays short of the end of the adjacent line's
  zone 2 at the minimum infeed, and its delay exceeds the adjacent zone 2's delay plus its
  clearing time by the grading margin (the adjacent zone 2 must clear first wherever both
  see a fault).
- **Reverse zone.** Under a blocking scheme, and under permissive overreach with a
  current-reversal guard, the reverse zone at this end must see every fault the remote
  end's zone 2 sees past this bus: along the line angle (the remote zone 2's overreach),
  and on a double circuit every parallel-circuit fault the remote zone 2 operates for (the
  current-reversal case: when the parallel circuit's breakers open in sequence, the healthy
  circuit's current reverses and the blocking or guard must already be in place). Without
  such a scheme the reverse cover is reported, not judged, and current reversal is not
  checked.
- **Permissive underreach.** Zone 1 of the two ends together must cover the whole line:
  every simulated internal fault is inside zone 1 of at least one end with the error
  budget's margin (the end that sees it trips and keys the other).

References
----------
.. [1] IEEE Std C37.113-2015, *IEEE Guide for Protective Relay Applications to
   Transmission Lines*, clauses on pilot schemes (permissive underreaching and
   overreaching transfer trip, directional comparison blocking, current reversal).
"""

from __future__ import annotations

import cmath
import math

import numpy as np

from relayset.inputs.philosophy import Philosophy, SchemePhilosophy, Zone2Philosophy
from relayset.results.settings import SettingsResult, ZoneSetting
from relayset.results.verification import InfeedRange, ZoneVerification
from relayset.studies.verification.relay_model import RelayModel, loop_scale, relay_view
from relayset.studies.verification.simulation import Simulation


def zone2_grading(st: SettingsResult, z2p: Zone2Philosophy, lines, inf: InfeedRange,
                  t: float, remote_bus: str, xc_in_path_ohm: float = 0.0
                  ) -> list[ZoneVerification]:
    """Zone 2 against the adjacent line's protection, as the philosophy grades it.

    Parameters
    ----------
    st : SettingsResult
        The settings of this end.
    z2p : Zone2Philosophy
        The zone 2 rules (grading, adjacent reaches and times).
    lines : list of (str, complex)
        Lines leaving the remote bus, (name, Z1 [ohm]).
    inf : InfeedRange
        The infeed factor at the remote bus over the simulated cases.
    t : float
        Tolerance (the error budget) [%].
    remote_bus : str
    xc_in_path_ohm : float
        X_C of the series capacitor banks in the measured path to the remote bus [ohm]:
        in service they bring the remote bus that much nearer, the furthest zone 2 reaches
        past it (as the setting rule's check takes them).
    """
    theta = st.line_angle_rad
    z_l = st.line_z1_primary_ohm - 1j * xc_in_path_ohm
    banks = (f"; the series capacitors in service bring that bus {xc_in_path_ohm:.4g} Ω "
             "of reactance nearer" if xc_in_path_ohm else "")
    z2 = st.zone("zone2")
    name, zs = min(lines, key=lambda nl: abs(nl[1]))
    out = []
    if z2p.grading == "short_of_adjacent_zone1":
        pct, what, check_id = (z2p.adjacent_zone1_pct, "zone 1",
                               "short_of_adjacent_zone1_at_min_infeed")
        remedy = ("shorten zone 2 (graded at minimum infeed), or grade it in time with the "
                  "adjacent line's zone 2 (philosophy zone2.grading = \"time_graded\" with a "
                  "longer delay)")
        need = z2p.adjacent_zone1_clearing_s + z2p.grading_margin_s
        need_text = (f"the adjacent zone 1 clearing time {z2p.adjacent_zone1_clearing_s:g} s "
                     f"plus the grading margin {z2p.grading_margin_s:g} s")
    else:
        pct, what, check_id = (z2p.adjacent_zone2_pct, "zone 2",
                               "short_of_adjacent_zone2_at_min_infeed")
        remedy = ("shorten zone 2 (it overlaps the adjacent line's zone 3 region at the "
                  "minimum infeed), or raise the adjacent zone 2 reach in the philosophy if "
                  "the adjacent line's zone 2 really reaches further")
        need = (z2p.adjacent_zone2_delay_s + z2p.adjacent_zone1_clearing_s
                + z2p.grading_margin_s)
        need_text = (f"the adjacent zone 2 delay {z2p.adjacent_zone2_delay_s:g} s plus its "
                     f"clearing time {z2p.adjacent_zone1_clearing_s:g} s plus the grading "
                     f"margin {z2p.grading_margin_s:g} s")
    graded = ("short of the adjacent zone 1" if z2p.grading == "short_of_adjacent_zone1"
              else "in time with the adjacent zone 2")
    p = z_l + inf.k_min * pct / 100 * zs
    s2 = float(z2.reach_scale(np.array([p]), theta)[0])
    margin = (s2 - 1) * 100 if math.isfinite(s2) else None
    ok = margin is None or margin >= t - 1e-9
    out.append(ZoneVerification(
        "zone2", check_id,
        f"zone 2 stays short of the end of {what} of '{name}' ({pct:g} % of it, from "
        f"{remote_bus}{banks}) at the minimum infeed K = {abs(inf.k_min):.3g} ({inf.case_min}) "
        f"with {t:g} % margin (philosophy: zone 2 graded {graded})",
        1, 0 if ok else 1, margin, t, ok, None, "" if ok else remedy))
    if z2p.grading != "short_of_adjacent_zone1":
        # A time-graded zone 2 waits for the adjacent zone 2 only where it reaches past the
        # adjacent zone 1; where it stays short of it (margin t at the minimum infeed, where
        # it reaches furthest) the adjacent zone 1 alone clears first.
        p1 = z_l + inf.k_min * z2p.adjacent_zone1_pct / 100 * zs
        s1 = float(z2.reach_scale(np.array([p1]), theta)[0])
        if not math.isfinite(s1) or (s1 - 1) * 100 >= t - 1e-9:
            need = z2p.adjacent_zone1_clearing_s + z2p.grading_margin_s
            need_text = (f"zone 2 stays short of the adjacent zone 1 ({z2p.adjacent_zone1_pct:g} "
                         f"% of '{name}') at the minimum infeed, so it waits only for the "
                         f"adjacent zone 1 clearing time {z2p.adjacent_zone1_clearing_s:g} s "
                         f"plus the grading margin {z2p.grading_margin_s:g} s")
    out.append(delay_check(z2.delay_s, need, need_text))
    return out


def delay_check(delay_s: float, need_s: float, need_text: str) -> ZoneVerification:
    """Zone 2's delay against the time the adjacent protection needs to clear first."""
    margin = (delay_s - need_s) / need_s * 100 if need_s > 0 else None
    ok = delay_s >= need_s - 1e-9
    return ZoneVerification(
        "zone2", "delay_graded_with_adjacent_protection",
        f"zone 2's delay {delay_s:g} s is at least {need_s:g} s: {need_text} (margin in % "
        "of that time)", 1, 0 if ok else 1, margin, 0.0, ok, None,
        "" if ok else f"raise zone 2's delay to at least {need_s:g} s, or shorten zone 2 so "
        "that the adjacent protection it must wait for never sees the same faults")


def reverse_cover(st: SettingsResult, zr: ZoneSetting, remote: SettingsResult, t: float,
                  other: str, scheme: SchemePhilosophy) -> ZoneVerification:
    """The reverse zone covers the remote zone 2's overreach past this bus (along the line
    angle); judged where the scheme needs it, reported otherwise."""
    over = abs(remote.zone("zone2").reach_primary_ohm) - abs(remote.line_z1_primary_ohm)
    judged = scheme.needs_reverse_cover
    if over <= 0:
        return ZoneVerification("reverse", "covers_remote_zone2",
                                f"zone 2 at {other} does not reach past this bus", 0, 0,
                                None, t if judged else None, True, None)
    p = -over * cmath.exp(1j * st.line_angle_rad)
    # phase and ground loops alike must see it: the larger of the two scales
    s = max(float(zr.characteristic(g, st.line_angle_rad).reach_scale(np.array([p]))[0])
            for g in (False, True))
    margin = (1 - s) * 100 if math.isfinite(s) else None
    ok = margin is not None and margin >= t - 1e-9
    why = _scheme_reason(scheme)
    return ZoneVerification(
        "reverse", "covers_remote_zone2",
        f"the reverse zone covers zone 2 of the relay at {other} where it reaches past this "
        f"bus ({over:.4g} Ω along the line angle), phase and ground loops, with {t:g} % "
        f"margin ({why})",
        1, 0 if ok or not judged else 1, margin, t if judged else None, ok or not judged,
        None,
        "" if ok else "lengthen the reverse zone to cover the remote zone 2 overreach with "
        "margin" + ("" if judged else " (reported: the scheme does not need it; it is "
                    "local backup only)"))


def _scheme_reason(scheme: SchemePhilosophy) -> str:
    if scheme.kind == "blocking":
        return "blocking scheme: the reverse zone sends the blocking signal"
    if scheme.needs_reverse_cover:
        return "permissive overreach with current-reversal guard"
    return f"scheme {scheme.kind}: reported, not judged"


def _acc_types():
    # checks.py imports this module; its accumulators come in at call time (no cycle).
    from relayset.studies.verification import checks
    return checks


def current_reversal(sim: Simulation, end: str, st: SettingsResult, remote: SettingsResult,
                     *, t: float, model: RelayModel, remote_model: RelayModel
                     ) -> ZoneVerification:
    """Parallel-circuit faults the remote zone 2 operates for are seen by this end's reverse
    zone (double circuit, blocking or guarded permissive overreach).

    For a fault on the parallel circuit near this end the remote relay of the healthy
    circuit sees it forward in zone 2 and this end sees it behind; when the parallel
    circuit's breakers open in sequence the current in the healthy circuit reverses. The
    blocking signal (or the guard of the permissive overreach scheme) is sent by this end's
    reverse zone, so it must operate in every case where the remote zone 2 may (reach scale
    up to 1 + t), with the margin t.
    """
    ck = _acc_types()
    at_s = end == sim.names[0]
    acc = ck._Acc(True)
    zr, z2r = st.zone("reverse"), remote.zone("zone2")
    k0m = st.k0m if sim.mutual else None
    k0m_r = remote.k0m if sim.mutual else None
    zl = abs(st.line_z1_primary_ohm)
    for run in sim.runs:
        if run.faulted != "parallel":
            continue
        sw = run.sweep
        rfp = np.stack([sw.r_fault_ohm, sw.r_phase_ohm], axis=1)
        v = relay_view(run, at_s, st.k0.k0, k0m, model, line_angle=st.line_angle_rad)
        vr = relay_view(run, not at_s, remote.k0.k0, k0m_r, remote_model,
                  line_angle=remote.line_angle_rad)
        s_rev, w_rev, ins = loop_scale(v, zr, st.line_angle_rad, zl, model, close_in=0.0)
        s2r, _, _ = loop_scale(vr, z2r, remote.line_angle_rad, zl, remote_model)
        sees = s2r <= 1 + t / 100
        acc.add((1 - s_rev) * 100, sees, t,
                ck._describe(v, w_rev, sim.labels, "parallel circuit", rfp), ins)
    return ck._finish(
        "reverse", "covers_current_reversal_on_parallel_circuit",
        f"the reverse zone operates with {t:g} % margin for every parallel-circuit fault "
        f"that zone 2 of the relay at the remote end may operate for (every state, source, "
        "load case and fault resistance): the current-reversal case of the scheme",
        acc, t,
        "lengthen the reverse zone (or widen its resistive reach) until it sees every "
        "parallel-circuit fault the remote zone 2 sees; keep the current-reversal timer "
        "longer than the parallel circuit's sequential clearing")


def zone1_overlap(sim: Simulation, end: str, st: SettingsResult, remote: SettingsResult, *,
                  t: float, tower_ohm: float, model: RelayModel, remote_model: RelayModel
                  ) -> ZoneVerification:
    """Permissive underreach: every internal fault inside zone 1 of at least one end.

    Faults of the protected line with sources at both ends (with one end unfed that end
    sends nothing: a weak-infeed matter), fault resistance up to both zones 1's resistive
    targets; a case is covered where the better of the two ends reaches the margin t.
    """
    ck = _acc_types()
    at_s = end == sim.names[0]
    acc = ck._Acc(True)
    z1, z1r = st.zone("zone1"), remote.zone("zone1")
    k0m = st.k0m if sim.mutual else None
    k0m_r = remote.k0m if sim.mutual else None
    zl = abs(st.line_z1_primary_ohm)
    for run in sim.runs:
        if run.faulted != "protected" or not all(run.sources):
            continue
        sw = run.sweep
        rfp = np.stack([sw.r_fault_ohm, sw.r_phase_ohm], axis=1)
        rf_ax = (None, None, slice(None), None, None)
        mask = (ck.rf_mask(rfp, z1, tower_ohm) & ck.rf_mask(rfp, z1r, tower_ohm))[rf_ax]
        v = relay_view(run, at_s, st.k0.k0, k0m, model, line_angle=st.line_angle_rad)
        vr = relay_view(run, not at_s, remote.k0.k0, k0m_r, remote_model,
                  line_angle=remote.line_angle_rad)
        s, w, ins = loop_scale(v, z1, st.line_angle_rad, zl, model, close_in=0.0)
        sr, _, ins_r = loop_scale(vr, z1r, remote.line_angle_rad, zl, remote_model,
                                  close_in=0.0)
        best = np.minimum(s, sr)
        acc.add((1 - best) * 100, np.broadcast_to(mask, best.shape), t,
                ck._describe(v, w, sim.labels, "protected line", rfp), ins & ins_r)
    return ck._finish(
        "zone1", "overlaps_remote_zone1",
        f"zone 1 here and zone 1 at the remote end together cover every fault on the line "
        f"with {t:g} % margin (permissive underreach: the end that sees the fault in zone 1 "
        "keys the other), fault resistance up to both resistive targets; location and loop "
        "from this end",
        acc, t,
        "lengthen zone 1 at the end that governs (within its no-operation limit at the "
        "remote bus), widen its resistive reach where resistive faults govern, or use a "
        "permissive overreach scheme")


def describe(philosophy: Philosophy) -> str:
    """The grading and scheme the checks follow, in words (for the notes)."""
    z2, sc = philosophy.zone2, philosophy.scheme
    grading = ("short of the adjacent zone 1" if z2.grading == "short_of_adjacent_zone1"
               else "in time with the adjacent zone 2")
    asks = {"none": "no pilot scheme; the reverse zone's cover is reported only",
            "permissive_underreach": "the two zones 1 must overlap",
            "blocking": "the reverse zone must see what the remote zone 2 sees, parallel-"
                        "circuit faults included"}.get(sc.kind)
    if asks is None:
        asks = ("the reverse zone must see what the remote zone 2 sees (current-reversal "
                "guard)" if sc.current_reversal_guard
                else "no current-reversal guard; the reverse zone's cover is reported only")
    return (f"Philosophy: zone 2 graded {grading} (grading margin {z2.grading_margin_s:g} s); "
            f"communication scheme {sc.kind.replace('_', ' ')}: {asks}.")


def scheme_checks(sim: Simulation, end: str, st: SettingsResult, remote: SettingsResult | None,
                  *, philosophy: Philosophy, t: float, tower_ohm: float, model: RelayModel,
                  remote_model: RelayModel, other: str) -> list[ZoneVerification]:
    """Every check the communication scheme asks of this end (see the module notes)."""
    scheme = philosophy.scheme
    if remote is None:
        return []
    out = [reverse_cover(st, st.zone("reverse"), remote, t, other, scheme)]
    double = any(r.faulted == "parallel" for r in sim.runs)
    if scheme.needs_reverse_cover and double:
        out.append(current_reversal(sim, end, st, remote, t=t, model=model,
                                    remote_model=remote_model))
    elif scheme.kind == "permissive_overreach" and double:
        out.append(ZoneVerification(
            "reverse", "current_reversal_unguarded",
            "permissive overreach on a double circuit without a current-reversal guard "
            "(philosophy scheme.current_reversal_guard = false): not checked (reported)",
            0, 0, None, None, True, None,
            "when the parallel circuit's breakers open in sequence the healthy circuit's "
            "current reverses and its two ends may see the fault forward at once; use the "
            "guard (the reverse zone then must see what the remote zone 2 sees)"))
    if scheme.needs_zone1_overlap:
        out.append(zone1_overlap(sim, end, st, remote, t=t, tower_ohm=tower_ohm, model=model,
                                 remote_model=remote_model))
    return out
