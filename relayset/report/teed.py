"""The console summary of a three-terminal (teed) line's zones and their verification.

Plain text built from :class:`relayset.results.teed.TeedStudyResult`; no arithmetic beyond
unit display (primary ohms, the reaches as magnitude at the line angle). User text (the
substation names) is printed as the study gives it, on a console.
"""

from __future__ import annotations

import cmath
import math

from relayset.io import visible_text
from relayset.results.teed import TeedStudyResult


def teed_summary(res: TeedStudyResult, source: str) -> str:
    """The summary ``relayset settings`` prints for a teed line."""
    b = [visible_text(x) for x in res.buses]
    angle = math.degrees(cmath.phase(res.z1_set_ohm))
    out = [
        "=" * 80,
        f"{visible_text(source)}: three-terminal line {b[0]} - {b[1]}, tee at "
        f"{res.tee_distance_m / 1e3:.4g} km from {b[0]}, branch of "
        f"{res.branch_length_m / 1e3:.4g} km to {b[2]}",
        f"Relay Z1 = {abs(res.z1_set_ohm):.4g} ohm at {angle:.2f} deg (primary); "
        "mho zones at the line angle",
        "=" * 80,
    ]
    for bus, (length, z1, z0) in zip(b, res.legs, strict=True):
        out.append(f"Leg {bus} - tee: {length / 1e3:.4g} km, Z1 = {z1.real:.4g} + "
                   f"j{z1.imag:.4g} ohm, Z0 = {z0.real:.4g} + j{z0.imag:.4g} ohm")
    for e in res.ends:
        out.append(f"Relay at {visible_text(e.end)} (tee {e.tee_ohm:.4g} ohm away)")
        out.append("  remote terminal      infeed   apparent reach along the line angle")
        for a in e.apparent:
            out.append(f"  {visible_text(a.remote)[:20]:20s} {'in ' if a.infeed else 'out'}"
                       f"      {a.min_ohm:8.4g} to {a.max_ohm:8.4g} ohm")
        for z, pri, sec, rule in (("1", e.zone1_ohm, e.zone1_secondary_ohm, e.zone1_rule),
                                  ("2", e.zone2_ohm, e.zone2_secondary_ohm, e.zone2_rule)):
            out.append(f"  Zone {z}  {abs(pri):8.4g} ohm primary, {abs(sec):8.4g} ohm "
                       f"secondary: {visible_text(rule)}")
        for c in e.all_checks:
            mark = "n/j " if not c.judged else "pass" if c.passed else "FAIL"
            out.append(f"  [{mark}] {c.check_id}: "
                       f"{visible_text(c.detail)}")
    out.append("Assumptions:")
    out += [f"  - {a}" for a in res.assumptions]
    out.append(f"Verdict: {res.verification}")
    return "\n".join(out) + "\n"
