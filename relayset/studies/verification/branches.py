r"""Faults on the lines leaving the two buses: along the line behind a relay, and on the
adjacent lines beyond its remote bus.

Model (stated in the notes)
---------------------------
Each such line is radial from its bus: no source and no load at its far end, no shunt
admittance, balanced, with its :math:`Z_1` and :math:`Z_0` (the study's ``z0`` where given,
a study file's own :math:`Z_0`, else :math:`Z_0 = 3 Z_1`, :data:`Z0_OVER_Z1_DEFAULT`,
common practice, no source). A fault at a fraction x of such a line is then a fault at the
bus through the series branch :math:`Z_b = x\,A\,\mathrm{diag}(Z_0, Z_1, Z_1)\,A^{-1}`
(the line's phase impedance matrix), which carries the fault current only. The solver takes
it exactly: the fault constraints see :math:`Z_{th} + Z_b`
(:func:`relayset.physics.network.solve_fault_sweep`, ``z_branch_ohm``); extending the
cascade would give the same currents for this model and cost a second line model.

What is judged (per relay end, every fault type, fault resistance, source and load case
of the envelope, the line in service at the study's earth resistivity):

- **behind**: faults along the shortest line at the relay's own bus, under import and
  export: zones 1 to 3 must not operate; how far along it the reverse zone operates for
  every bolted fault is reported;
- **beyond**: faults on the adjacent lines at the remote bus: zone 1 must not operate; where
  the philosophy grades zone 2 short of the adjacent zone 1, zone 2 must not operate for a
  bolted fault at that zone 1's reach on the shortest adjacent line (the smallest infeed of
  the sweep governs); how far along the longest adjacent line zone 3 operates for every
  bolted fault is reported.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np

from relayset.inputs.study_file import Study

#: Z0/Z1 of a line behind or beyond when the study gives no Z0 (common practice, no source).
Z0_OVER_Z1_DEFAULT = 3.0
#: Fractions of a line's length at which faults are simulated (plus, on the shortest line
#: at a bus, the adjacent zone 1 reach of the philosophy); x = 0, the bus, anchors the
#: coverage interpolation.
BRANCH_X = (0.0, 0.25, 0.5, 1.0)


@dataclass(frozen=True)
class BranchLine:
    """A line leaving a bus of the protected line, as the verification models it."""

    bus: str
    name: str
    z1_ohm: complex
    z0_ohm: complex
    z0_given: bool
    fractions: tuple[float, ...]  #: where along it faults are simulated [1]


def _lines(study: Study, source: str) -> list[tuple[str, str, complex, complex | None]]:
    """(bus, name, Z1, Z0 or None) of every line of adjacent_lines and lines_behind."""
    from relayset.studies.settings import study_lines

    names = study.ends
    relay_end = study.relay.end if study.relay and study.relay.end in names else names[0]
    return study_lines(study, relay_end, source)


def branch_lines(study: Study, source: str) -> tuple[BranchLine, ...]:
    """The lines simulated at each bus: the shortest (|Z1|) and the longest."""
    from relayset.studies.settings import study_philosophy

    a = study_philosophy(study, source).zone2.adjacent_zone1_pct / 100
    lines = _lines(study, source)
    out = []
    for bus in study.ends:
        at = [ln for ln in lines if ln[0] == bus]
        if not at:
            continue
        short = min(at, key=lambda ln: abs(ln[2]))
        long_ = max(at, key=lambda ln: abs(ln[2]))
        for ln in (short,) if short is long_ else (short, long_):
            x = set(BRANCH_X) | ({a} if ln is short and 0 < a <= 1 else set())
            z0 = ln[3] if ln[3] is not None else Z0_OVER_Z1_DEFAULT * ln[2]
            out.append(BranchLine(bus, ln[1], complex(ln[2]), complex(z0), ln[3] is not None,
                                  tuple(sorted(x))))
    return tuple(out)


def describe(lines: tuple[BranchLine, ...]) -> tuple[str, ...]:
    """The lines behind and beyond as simulated, in words (notes of the verification)."""
    if not lines:
        return ("Faults along lines leaving the buses: none simulated (the study lists no "
                "adjacent lines or lines behind).",)
    parts = [f"'{b.name}' at {b.bus} (Z1 {b.z1_ohm.real:.4g}{b.z1_ohm.imag:+.4g}j Ω, Z0 "
             f"{b.z0_ohm.real:.4g}{b.z0_ohm.imag:+.4g}j Ω"
             + ("" if b.z0_given else f", Z0 = {Z0_OVER_Z1_DEFAULT:g} Z1 assumed: none given, "
                "common practice, no source")
             + "; at " + ", ".join(f"{100 * x:g}" for x in b.fractions) + " % of it)"
             for b in lines]
    return ("Faults along the lines leaving the buses (the shortest and the longest at each "
            "bus), every type and fault resistance, every source and load case (import and "
            "export), the line in service at the study's earth resistivity: "
            + "; ".join(parts) + ". Each is modelled radial from its bus (no infeed or load "
            "at its far end, no shunt capacitance): a fault along it is the bus fault through "
            "the line's series phase impedance matrix from Z1 and Z0, exact for that model.",)


# --------------------------------------------------------------------------- checks


def branch_checks(sim, end: str, st, *, study: Study, tolerance_pct: float, model,
                  source: str) -> list:
    """The checks of the faults along the lines behind and beyond (see the module notes)."""
    from relayset.results.verification import ZoneVerification
    from relayset.studies.settings import study_philosophy
    from relayset.studies.verification.checks import _Acc, _describe, _finish
    from relayset.studies.verification.relay_model import relay_view, zone_scale

    runs = [r for r in sim.runs if r.faulted == "branch"]
    if not runs:
        return []
    names = sim.names
    at_s = end == names[0]
    own, other = (names[0], names[1]) if at_s else (names[1], names[0])
    theta = st.line_angle_rad
    zl = abs(st.line_z1_primary_ohm)
    t = tolerance_pct
    k0m = st.k0m if sim.mutual else None
    labels = sim.labels
    phil = study_philosophy(study, source)
    a = phil.zone2.adjacent_zone1_pct / 100
    grade = phil.zone2.check_adjacent_zone1
    z1, z2, z3, zr = (st.zone(n) for n in ("zone1", "zone2", "zone3", "reverse"))
    acc = {k: _Acc(False) for k in ("behind", "z1_beyond", "z2_grading")}
    # per (line name, x): covered by the zone in every bolted case so far
    # per (line name, x): the largest reach scale of bolted faults there (coverage)
    rev_cover: dict[tuple[str, float], float] = {}
    z3_cover: dict[tuple[str, float], float] = {}
    # Per bus the lines in the order simulated: the shortest first, then the longest.
    lines_at: dict[str, list[str]] = {b: [] for b in names}
    for bus, nm, _x in runs[0].branch:
        if nm not in lines_at[bus]:
            lines_at[bus].append(nm)
    for run in runs:
        sw = run.sweep
        rfp = np.stack([sw.r_fault_ohm, sw.r_phase_ohm], axis=1)
        bolted = np.all(rfp == 0, axis=1)[None, None, :, None, None]
        info = run.branch  # per location: (bus, line name, fraction)

        def describer(vw, which, locs, what, rfp=rfp, info=info):
            d = _describe(vw, which, labels, what, rfp)

            def fn(idx):
                bus, nm, x = info[locs[idx[1]]]
                return replace(d(idx), location_pct=100 * x,
                               faulted=f"line '{nm}' from {bus} ({what})")
            return fn

        own_locs = [k for k, b in enumerate(info) if b[0] == own]
        rem_locs = [k for k, b in enumerate(info) if b[0] == other]
        if own_locs:
            vb = relay_view(run, at_s, st.k0.k0, k0m, model, line_angle=theta, behind=True)
            for zone in (z1, z2, z3):
                sb = zone_scale(vb, zone, theta, zl, model)
                acc["behind"].add((sb.scale - 1) * 100, np.ones(sb.scale.shape, bool), t,
                                  describer(vb, sb.which, own_locs, "behind the relay"),
                                  sb.insensitive)
            # the reverse zone sees a fault behind fed from the line: the far end's source
            short = [j for j, k in enumerate(own_locs) if info[k][1] == lines_at[own][0]]
            if run.sources[1 if at_s else 0] and short:
                sr = zone_scale(vb.at_locations(np.array(short)), zr, theta, zl, model)
                _worst(rev_cover, sr, bolted, [own_locs[j] for j in short], info,
                       lines_at[own][0])
        if rem_locs:
            v = relay_view(run, at_s, st.k0.k0, k0m, model, line_angle=theta
                           ).at_locations(np.array(rem_locs))
            s1 = zone_scale(v, z1, theta, zl, model)
            acc["z1_beyond"].add((s1.scale - 1) * 100, np.ones(s1.scale.shape, bool), t,
                                 describer(v, s1.which, rem_locs, "beyond the remote bus"),
                                 s1.insensitive)
            at_a = np.array([info[k][1] == lines_at[other][0] and math.isclose(info[k][2], a)
                             for k in rem_locs])[None, :, None, None, None]
            if grade and np.any(at_a):
                sel = np.flatnonzero(at_a.ravel())
                locs2 = [rem_locs[j] for j in sel]
                v2 = v.at_locations(sel)
                s2 = zone_scale(v2, z2, theta, zl, model)
                acc["z2_grading"].add((s2.scale - 1) * 100, bolted, t,
                                      describer(v2, s2.which, locs2,
                                                "beyond the remote bus"), s2.insensitive)
            long_ = [j for j, k in enumerate(rem_locs) if info[k][1] == lines_at[other][-1]]
            if run.sources[0 if at_s else 1] and long_:  # no source behind: no current
                s3 = zone_scale(v.at_locations(np.array(long_)), z3, theta, zl, model)
                _worst(z3_cover, s3, bolted, [rem_locs[j] for j in long_], info,
                       lines_at[other][-1])
    out = []
    if acc["behind"].n_run:
        out.append(_finish(
            "forward", "no_operation_along_line_behind",
            f"zones 1 to 3 do not operate for faults along the line behind the relay "
            f"({', '.join(lines_at[own])}), every type and resistance, import and export, "
            f"with {t:g} % margin", acc["behind"], t,
            "check the directional element and the left blinder"))
    if rev_cover:
        out.append(_reported("reverse", "reach_along_line_behind", rev_cover,
                             "the reverse zone operates for every bolted fault", ZoneVerification))
    if acc["z1_beyond"].n_run:
        out.append(_finish(
            "zone1", "no_operation_on_adjacent_lines",
            f"zone 1 does not operate for faults on the adjacent lines beyond {other} "
            f"({', '.join(lines_at[other])}), every type and resistance, with {t:g} % "
            "margin", acc["z1_beyond"], t, "shorten zone 1"))
    if acc["z2_grading"].n_run:
        out.append(_finish(
            "zone2", "short_of_adjacent_zone1_simulated",
            f"zone 2 does not operate for bolted faults at {100 * a:g} % of the shortest "
            f"adjacent line '{lines_at[other][0]}' (its zone 1 reach) in any "
            f"simulated case (the smallest infeed governs) with {t:g} % margin",
            acc["z2_grading"], t,
            "shorten zone 2 (graded at minimum infeed), or grade it in time with the adjacent "
            "line's zone 2"))
    if z3_cover:
        out.append(_reported("zone3", "coverage_of_adjacent_line_simulated", z3_cover,
                             "zone 3 operates for every bolted fault", ZoneVerification))
    return out


def _worst(cover: dict, sc, bolted: np.ndarray, locs: list[int], info, name: str) -> None:
    """Largest reach scale over the bolted, measured cases per point of line ``name``."""
    s = np.where(bolted & ~sc.insensitive, sc.scale_in, -np.inf)
    for j, k in enumerate(locs):
        key = info[k][1:]
        if key[0] == name:
            cover[key] = max(cover.get(key, -np.inf), float(np.max(s[:, j])))


def coverage(points: list[tuple[float, float]]) -> tuple[float, float | None]:
    """Fraction of a line a zone covers from its simulated points (x, worst reach scale):
    up to the first point outside (scale > 1), interpolated linearly in the reach scale
    from the last point inside where the outside point has a finite scale. Returns the
    fraction and, where it could not be interpolated, the first point outside (the
    coverage lies between them)."""
    reach, prev = 0.0, None
    for x, s in sorted(points):
        if not s <= 1.0:
            if prev is None:
                return 0.0, None
            if math.isfinite(s):
                x0, s0 = prev
                return x0 + (1.0 - s0) / (s - s0) * (x - x0), None
            return reach, x
        reach, prev = x, (x, s)
    return reach, None


def _reported(zone: str, check_id: str, cover: dict, what: str, ZoneVerification):
    """Coverage along one line (reported, not judged)."""
    name = next(iter(cover))[0]
    xs = sorted(x for (_n, x) in cover)
    reach, upper = coverage([(x, cover[(name, x)]) for x in xs])
    text = (f"up to {100 * reach:.3g} %" if upper is None else
            f"up to between {100 * reach:.3g} % and {100 * upper:.3g} %")
    return ZoneVerification(
        zone, check_id,
        f"{what} {text} of '{name}' in every simulated case (simulated at "
        + ", ".join(f"{100 * x:g}" for x in xs) + " % of it, linear in the reach scale "
        "between them; reported)", len(xs), 0, 100 * reach - 100.0, None, True, None, "")
