"""Accepted deviations: failed checks the study accepts, and the verdict that follows.

A study's ``[[deviations]]`` entry names a check as the verification JSON names it
(``zone.check_id``), the relay end, the reason, who accepted it and when. Each entry must
name a check that failed at that end: one naming an unknown check or a check that passed is
refused (a stale acceptance must not silently cover a later, different failure). The verdict
is "verified with accepted deviations" when every failed check is accepted, and lists them.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence

from relayset.errors import InputError, suggest
from relayset.inputs.study_file import Study
from relayset.results.verification import AcceptedDeviation, EndVerification


def apply_deviations(study: Study, ends: Sequence[EndVerification], source: str,
                     setting_checks: Mapping[str, Mapping[str, bool]] | None = None
                     ) -> tuple[tuple[EndVerification, ...], tuple[AcceptedDeviation, ...]]:
    """Mark the failed checks the study accepts; refuse entries that accept nothing.

    ``setting_checks`` maps each verified end to its settings' own checks of the zones
    (``"zone.check_id"`` -> passed, e.g. ``"zone2.resistive_load_limit"``): a failed one may
    be accepted as well; it is listed among the accepted deviations, and the one count of
    failed checks (relayset.report.failures) leaves it out.

    Entries for a relay end not verified in this run (``relayset settings`` of one end) are
    left aside: whether they name a failing check is decided where that end is verified.

    Raises
    ------
    InputError
        An entry names a check the verification does not make at that end, or one that
        passed.
    """
    from dataclasses import replace

    by_end = {e.end: e for e in ends}
    accepted: dict[tuple[str, str], AcceptedDeviation] = {}
    for k, dev in enumerate(study.deviations):
        e = by_end.get(dev.end)
        if e is None:
            continue
        names = [c.check for c in e.checks]
        rules = dict((setting_checks or {}).get(dev.end, {}))
        field = f"deviations[{k}].check"
        if dev.check not in names and dev.check not in rules:
            raise InputError(f"is no check of the verification or the settings at {dev.end}"
                             + suggest(dev.check, [*names, *rules]), field=field,
                             value=dev.check, source=source)
        if dev.check in names:
            passed = all(c.passed for c in e.checks if c.check == dev.check)
        else:
            passed = rules[dev.check]
        if passed:
            raise InputError(f"names no failing check: it passed at {dev.end} (remove the "
                             "deviation)", field=field, value=dev.check, source=source)
        if (dev.end, dev.check) in accepted:
            raise InputError(f"is accepted twice at {dev.end}: keep one entry",
                             field=field, value=dev.check, source=source)
        accepted[(dev.end, dev.check)] = AcceptedDeviation(
            dev.check, dev.end, dev.reason, dev.accepted_by, dev.date.isoformat())
    out = []
    for e in ends:
        checks = tuple(replace(c, deviation=accepted[(e.end, c.check)])
                       if not c.passed and (e.end, c.check) in accepted else c
                       for c in e.checks)
        out.append(replace(e, checks=checks))
    return tuple(out), tuple(accepted.values())


def verdict(ends: Sequence[EndVerification], accepted: Sequence[AcceptedDeviation]
            ) -> tuple[str, str]:
    """(verdict, reason) of the checks of every end, accepted deviations counted."""
    failed = [(e.end, c) for e in ends for c in e.checks if not c.passed]
    open_ = [(e, c) for e, c in failed if c.deviation is None]
    if open_:
        reason = f"{len(open_)} check(s) failed: " + "; ".join(
            f"{e} {c.zone} {c.check_id}" for e, c in open_[:4])
        if len(open_) > 4:
            reason += f"; and {len(open_) - 4} more (listed below)"
        if accepted:
            reason += f" ({len(accepted)} more accepted as deviations)"
        return "failed checks", reason
    if accepted:
        # Failed checks of the verification and of the setting rules the study accepts.
        return ("verified with accepted deviations",
                f"every other check passed; {len(accepted)} failed check(s) accepted as "
                "deviations: " + "; ".join(
                    f"{a.end} {a.check} (accepted by {a.accepted_by}, {a.date})"
                    for a in accepted))
    return "verified", "every check passed in every simulated case"
