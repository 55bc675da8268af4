"""The one count of failed checks: the report's cover, its sections, the register, and the
exit code of `report` and `batch` all use it.

A failed check is a check that did not pass, of either kind, counted per relay end:

- a setting-rule check of a zone (the settings' own checks, e.g. the resistive reach against
  the load limit), section "Settings" of the report;
- a verification check by fault simulation (results ``verification.ends[].checks[]`` with
  result "FAIL"), section "Verification". A finding reported without a pass/fail limit
  is not a check that can fail. A failed check the study accepts as a deviation
  (``[[deviations]]``, its ``accepted_deviation`` set) is listed as accepted, not counted.

A three-terminal line (results ``teed.ends[]``) counts the same two kinds: its setting
rules' ``checks`` and its fault simulation's ``verification_checks`` that did not pass; the
zone is the one the check's id begins with (``zone1_...``, ``zone2_...``); one the study
accepts (``teed.accepted_deviations``, named ``zone.rest_of_the_id``) is not counted.
"""

from __future__ import annotations

from typing import Any, NamedTuple

#: The definition, printed where the count is.
DEFINITION = ("failed checks count, per relay end, the setting-rule checks of the zones and "
              "the verification checks by fault simulation that did not pass (a finding "
              "reported without a limit, and a failed check the study accepts as a deviation, "
              "are not counted)")


class FailedCheck(NamedTuple):
    end: str
    zone: str
    check_id: str
    kind: str  #: "setting rule" or "verification"


def failed_checks(d: dict[str, Any]) -> list[FailedCheck]:
    """Every failed check of a study, from its results dictionary (``to_dict()``)."""
    out = []
    accepted = {(str(x.get("end")), str(x.get("check")))
                for x in (d.get("verification") or {}).get("accepted_deviations", []) or []}
    for end in (d.get("settings") or {}).get("ends", []) or []:
        for zone, z in (end.get("zones") or {}).items():
            out += [FailedCheck(str(end.get("end")), str(zone), str(c.get("check_id")),
                                "setting rule")
                    for c in z.get("checks", []) or [] if c.get("passed") is False
                    and (str(end.get("end")), f"{zone}.{c.get('check_id')}") not in accepted]
    for end in (d.get("verification") or {}).get("ends", []) or []:
        out += [FailedCheck(str(end.get("end")), str(c.get("zone")), str(c.get("check_id")),
                            "verification")
                for c in end.get("checks", []) or []
                if c.get("result") == "FAIL" and not c.get("accepted_deviation")]
    teed = d.get("teed") or {}
    from relayset.results.teed import deviation_name

    accepted |= {(str(x.get("end")), str(x.get("check")))
                 for x in teed.get("accepted_deviations", []) or []}
    for end in teed.get("ends", []) or []:
        for key, kind in (("checks", "setting rule"), ("verification_checks", "verification")):
            out += [FailedCheck(str(end.get("end")), str(c.get("check_id")).split("_")[0],
                                str(c.get("check_id")), kind)
                    for c in end.get(key, []) or [] if c.get("passed") is False
                    and (str(end.get("end")), deviation_name(str(c.get("check_id"))))
                    not in accepted]
    return out


def count_at(d: dict[str, Any], end: str) -> int:
    """Failed checks at one relay end."""
    return sum(1 for f in failed_checks(d) if f.end == end)
