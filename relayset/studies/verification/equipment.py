r"""The relay's instruments against the line: CT rating and the smallest fault current.

- **CT rating.** The maximum load current, the study's maximum apparent power at its
  minimum voltage,

  .. math:: I_{load,max} = \frac{S_{max}}{\sqrt{3}\, V_{min}\, V_n},

  must not exceed the CT's rated primary current times its continuous thermal rating factor
  (IEEE Std C57.13 [1]_ rating factors 1.0 to 4.0; default 1.0, common practice, no source).
  The rated primary current is the primary side of ``relay.ct_ratio`` as written
  (``"1200/1 A"``: 1200 A); a ratio given as a bare number carries no rating, and the check
  is then reported, not judged.
- **Minimum fault current.** The smallest relay current of the faults on the protected line
  the relay must see: every simulated internal fault (every location, source case, load case,
  parallel-circuit state and earth resistivity) with the source behind the relay in service
  and a fault resistance up to zone 2's resistive target (bolted faults for a mho zone 2).
  The largest phase current of each case must reach the relay model's minimum operating
  current (``relay.min_operating_current`` through the CT ratio); the cases in which no loop
  meant for the fault type is released are counted as below the minimum current (the same
  count as zone 2's coverage check, over the same cases).

References
----------
.. [1] IEEE Std C57.13-2016, *IEEE Standard Requirements for Instrument Transformers*,
   continuous thermal current rating factors.
"""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np

from relayset.inputs.study_file import Study
from relayset.results.settings import SettingsResult
from relayset.results.verification import ZoneVerification
from relayset.studies.verification.relay_model import RelayModel, loop_scale, relay_view
from relayset.studies.verification.simulation import Simulation, largest_phase_current


def max_load_current_a(study: Study) -> float:
    """The study's maximum load current at its minimum voltage [A]."""
    ld = study.load
    return ld.max_apparent_power / (math.sqrt(3) * ld.min_voltage
                                    * study.system.nominal_voltage)


def ct_rating(study: Study, end: str) -> ZoneVerification:
    """The CT at ``end`` carries the maximum load current continuously (see the notes)."""
    i_load = max_load_current_a(study)
    relay = study.relay
    primary = relay.ct_primary_a(end)
    rf = relay.ct_rating_factor
    what = (f"the maximum load current {i_load:.4g} A ({study.load.max_apparent_power / 1e6:g} "
            f"MVA at {study.load.min_voltage:g} pu voltage)")
    if primary is None:
        return ZoneVerification(
            "relay", "ct_rating_carries_max_load",
            f"{what} against the CT rating: not judged, relay.ct_ratio is a bare ratio with "
            "no rated primary current (reported)", 1, 0, None, None, True, None,
            "write relay.ct_ratio as primary/secondary (e.g. \"1200/1 A\") so that the rating "
            "is checked")
    rating = primary * rf
    margin = (rating / i_load - 1) * 100
    ok = rating >= i_load * (1 - 1e-9)
    return ZoneVerification(
        "relay", "ct_rating_carries_max_load",
        f"{what} is at most the CT's rated primary current {primary:g} A times its continuous "
        f"rating factor {rf:g} ({rating:.4g} A); margin in % of the load current",
        1, 0 if ok else 1, margin, 0.0, ok, None,
        "" if ok else f"choose a CT (or a tap of a multi-ratio CT) rated at least "
        f"{i_load / rf:.4g} A primary, or one with a higher continuous rating factor "
        "(relay.ct_rating_factor, from the CT's nameplate), and recompute the secondary "
        "settings")


def min_fault_current(sim: Simulation, end: str, st: SettingsResult, *, model: RelayModel,
                      tower_ohm: float, below: int) -> ZoneVerification:
    """The smallest relay current of the internal faults against the minimum operating
    current (see the module notes). ``below`` is the count of those faults no loop meant for
    the fault type measures (zone 2's coverage check counts them over the same cases)."""
    from relayset.studies.verification import checks as ck

    at_s = end == sim.names[0]
    z2 = st.zone("zone2")
    i_set = model.min_current_primary_a
    acc = ck._Acc(True)
    worst = None  # (run, index, rf pairs) of the smallest current
    for run in sim.runs:
        if run.faulted != "protected" or not run.sources[0 if at_s else 1]:
            continue
        sw = run.sweep
        rfp = np.stack([sw.r_fault_ohm, sw.r_phase_ohm], axis=1)
        i_rel = largest_phase_current(run, at_s)  # (F, M, Rf, K, L)
        mask = np.broadcast_to(ck.rf_mask(rfp, z2, tower_ohm)[None, None, :, None, None],
                               i_rel.shape)
        margin = (np.where(mask, i_rel, np.inf) / i_set - 1) * 100 if i_set > 0 \
            else np.full(i_rel.shape, np.inf)
        acc.n_run += int(np.count_nonzero(mask))
        acc.n_fail += int(np.count_nonzero(mask & (margin < -1e-9)))
        if not np.any(mask):
            continue
        idx = np.unravel_index(int(np.argmin(margin)), margin.shape)
        if worst is None or margin[idx] < acc.worst:
            acc.worst = float(margin[idx])
            worst = (run, idx, rfp)
    if worst is not None:  # the governing case measured as the relay does: one view only
        run, idx, rfp = worst
        k0m = st.k0m if sim.mutual else None
        v = relay_view(run, at_s, st.k0.k0, k0m, model, line_angle=st.line_angle_rad)
        _, which, _ = loop_scale(v, z2, st.line_angle_rad, abs(st.line_z1_primary_ohm), model,
                                 close_in=0.0)
        acc.case = ck._describe(v, which, sim.labels, "protected line", rfp)(idx)
    chk = ck._finish(
        "relay", "fault_current_above_min_operating",
        f"every fault on the protected line that zone 2 must see (fault resistance up to its "
        f"resistive target, source behind the relay in service) gives the relay a phase "
        f"current of at least the minimum operating current {model.min_current_secondary_a:g} "
        f"A secondary ({i_set:.4g} A primary); margin in % of that current",
        acc, 0.0,
        "raise the fault current the relay sees (a stronger source case is not a remedy: "
        "the weakest one governs), lower the relay's minimum operating current if the relay "
        "allows, or rely on the remote end and a pilot scheme (weak-infeed logic) for "
        "these faults")
    if i_set <= 0:
        chk = replace(chk, margin_pct=None)
    return replace(chk, cases_below_min_current=below)


def equipment_checks(sim: Simulation, end: str, st: SettingsResult, *, study: Study,
                     model: RelayModel, below: int) -> list[ZoneVerification]:
    """The CT rating and the minimum fault current of the relay at ``end`` (``below``: see
    :func:`min_fault_current`)."""
    out = []
    if study.relay is not None and study.load is not None:
        out.append(ct_rating(study, end))
    out.append(min_fault_current(sim, end, st, model=model, below=below,
                                 tower_ohm=study.fault_resistance.tower_footing_resistance))
    return out
