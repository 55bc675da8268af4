"""Verify an archived report: embedded files against the printed hashes and the metadata, and
the results against a recomputation with the installed relayset.

Tolerance of the recomputation: a quantity still matches when
``|new - archived| <= ATOL + RTOL * |archived|``; RTOL = 1e-6 (six significant figures, far
tighter than any printed value) and ATOL = 1e-9 in the quantity's own unit (values that are
zero in theory).
"""

from __future__ import annotations

import hashlib
import re
import tempfile
from dataclasses import dataclass, field
from pathlib import Path

from relayset.archive.pdf import Archive, read_archive
from relayset.archive.quantities import close, numeric_leaves, results_quantities
from relayset.errors import InputError

RTOL = 1e-6
ATOL = 1e-9
#: Keys that legitimately differ between the archive and the recomputation.
IGNORED = ("source_file", "relayset_version")


@dataclass(frozen=True)
class Check:
    """One check of an archived report."""

    what: str
    passed: bool
    detail: str = ""


@dataclass
class Verification:
    """All checks of one archived report."""

    source: str
    checks: list[Check] = field(default_factory=list)
    recorded_version: str | None = None
    installed_version: str | None = None

    @property
    def passed(self) -> bool:
        return bool(self.checks) and all(c.passed for c in self.checks)


def _sha(b: bytes) -> str:
    return hashlib.sha256(b).hexdigest()


def check_hashes(a: Archive) -> list[Check]:
    """Embedded files against the hashes printed in the report, stored in its metadata and
    recorded in the results."""
    checks = []
    study = a.study_name()
    results = a.results()
    meta = a.metadata_hashes()
    if study is None:
        return [Check("embedded study file", False, "not found among the embedded files")]
    s_hash, r_hash = _sha(a.attachments[study]), _sha(a.results_bytes)
    for label, name, got, printed_label in (
            ("study file", study, s_hash, "SHA-256 of the study file"),
            ("results JSON", a.results_name, r_hash, "SHA-256 of the results JSON")):
        printed = a.printed(printed_label)
        if printed is None:
            checks.append(Check(f"{label} SHA-256 printed in the report", False,
                                "no printed SHA-256 found in the page text"))
        else:
            checks.append(Check(f"{label} SHA-256 printed in the report", printed == got,
                                f"{name}: {got}" + ("" if printed == got
                                                    else f" but the report prints {printed}")))
        if meta:
            checks.append(Check(f"{label} SHA-256 in the metadata", got in meta,
                                "found" if got in meta else f"{got} not in the metadata"))
    rec = results.get("source_sha256")
    checks.append(Check("study file SHA-256 recorded in the results", rec == s_hash,
                        "equal" if rec == s_hash else f"results record {rec}, file is {s_hash}"))
    return checks


def _place_inputs(a: Archive, folder: Path) -> Path:
    """Write the embedded study (and its philosophy where the study names it) into ``folder``."""
    import tomllib

    name = a.study_name()
    assert name is not None
    data = a.attachments[name]
    try:
        tables = tomllib.loads(data.decode("utf-8"))
    except (tomllib.TOMLDecodeError, UnicodeDecodeError):
        raise InputError("the embedded study file is not valid TOML", field=name,
                         source=a.source) from None
    phil = str((tables.get("study") or {}).get("philosophy", "default"))
    ups = Path(phil).parts.count("..")
    study_dir = folder.joinpath(*["s"] * (ups + 1))
    study_dir.mkdir(parents=True)
    study_path = study_dir / name
    study_path.write_bytes(data)
    if phil != "default" and not Path(phil).is_absolute():
        others = [n for n in a.attachments
                  if n.endswith(".toml") and n != name]
        wanted = Path(phil).name
        pick = next((n for n in others if n in (wanted, f"philosophy_{wanted}")), None)
        if pick is None and len(others) == 1:
            pick = others[0]
        if pick is not None:
            target = (study_dir / phil).resolve()
            target.parent.mkdir(parents=True, exist_ok=True)
            target.write_bytes(a.attachments[pick])
    return study_path


def recompute(a: Archive) -> tuple[list[Check], str]:
    """Recompute the embedded study with the installed relayset and compare the results."""
    from relayset.io import to_json
    from relayset.studies import pipeline

    archived = a.results()
    with tempfile.TemporaryDirectory(prefix="relayset-verify-") as tmp:
        path = _place_inputs(a, Path(tmp))
        try:
            new = pipeline.run(path, reach="reach_study" in archived,
                               settings="settings" in archived).to_dict()
        except InputError as exc:
            msg = str(exc).replace(str(path.parent) + "/", "")
            return [Check("recomputation", False, f"the embedded study fails: {msg}")], ""
    import json

    new = json.loads(to_json(new))  # the same JSON round trip as the archive
    checks = []
    for (sec, label, old), (_, _, now) in zip(results_quantities(archived),
                                              results_quantities(new), strict=False):
        ok = close(now, old, RTOL, ATOL) if old is not None and now is not None else now == old
        checks.append(Check(f"{sec}: {label}", ok, f"archived {_show(old)}, now {_show(now)}"))
    if len(results_quantities(archived)) != len(results_quantities(new)):
        checks.append(Check("results: quantities", False, "the recomputation has a different "
                            "set of quantities (ends, zones or circuits)"))
    # every other number in the results: counted, the first few named
    old_l = {k: v for k, v in numeric_leaves(archived).items() if k not in IGNORED}
    new_l = {k: v for k, v in numeric_leaves(new).items() if k not in IGNORED}
    bad = [k for k in sorted(old_l.keys() | new_l.keys())
           if k not in old_l or k not in new_l or not close(new_l[k], old_l[k], RTOL, ATOL)]
    checks.append(Check(f"all {len(old_l)} values of the results JSON", not bad,
                        "all within tolerance" if not bad else
                        f"{len(bad)} differ, e.g. " + ", ".join(bad[:3])))
    return checks, str(new.get("relayset_version"))


def _show(v) -> str:
    if isinstance(v, complex):
        return f"{v.real:.6g}{v.imag:+.6g}j"
    if isinstance(v, float):
        return f"{v:.6g}"
    return str(v)


def verify_report(path: str | Path) -> Verification:
    """Every check of one archived report (InputError when it is not a relayset report)."""
    a = read_archive(path)
    v = Verification(str(path))
    v.checks += check_hashes(a)
    v.recorded_version = str(a.results().get("relayset_version"))
    checks, v.installed_version = recompute(a)
    v.checks += checks
    return v


def format_verification(v: Verification, *, all_checks: bool = False) -> str:
    """The printed verdict of one report: hash checks, then each quantity (failures always)."""
    lines = [f"{v.source}: {'MATCHES' if v.passed else 'DOES NOT MATCH'}",
             f"  tolerance: |now - archived| <= {ATOL:g} + {RTOL:g} x |archived|; "
             f"archived with relayset {v.recorded_version}, recomputed with "
             f"{v.installed_version or 'the installed version'}"]
    for c in v.checks:
        if all_checks or not c.passed or not re.match(r"(results|settings): ", c.what):
            lines.append(f"  {'ok  ' if c.passed else 'FAIL'} {c.what}: {c.detail}")
    n = sum(1 for c in v.checks if re.match(r"(results|settings): ", c.what))
    bad = sum(1 for c in v.checks if re.match(r"(results|settings): ", c.what) and not c.passed)
    lines.append(f"  {n - bad} of {n} named quantities match" + ("" if all_checks else
                                                               " (--all lists each)"))
    return "\n".join(lines) + "\n"
