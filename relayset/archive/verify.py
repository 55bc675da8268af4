"""Verify an archived report: embedded files against the hashes the report carries, and the
results against a recomputation with the installed relayset.

Hashes: the SHA-256 of the embedded study file is checked against the value printed in the
page text after "SHA-256 of the study file" and against ``source_sha256`` in the embedded
results JSON; the SHA-256 of the embedded results JSON against the value printed after
"SHA-256 of the results JSON". Each of these references is required: a reference that is
missing fails the check, like one that differs. The PDF metadata (document information and
XMP) is checked too: reports store both SHA-256 in their keywords; a PDF whose metadata
carries none is said so in the verdict rather than passed silently. An embedded file for
which the report carries no reference (the philosophy file) is named as not checked by
hash; its content still meets the recomputation, which compares the philosophy applied.

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


#: The labels the report prints before each SHA-256 (templates/report/report.html.j2).
PRINTED_STUDY = "SHA-256 of the study file"
PRINTED_RESULTS = "SHA-256 of the results JSON"


@dataclass(frozen=True)
class Check:
    """One check of an archived report (``passed`` None: nothing to check, said so)."""

    what: str
    passed: bool | None
    detail: str = ""

    @property
    def mark(self) -> str:
        return {True: "ok  ", False: "FAIL", None: "--  "}[self.passed]


@dataclass
class Verification:
    """All checks of one archived report."""

    source: str
    checks: list[Check] = field(default_factory=list)
    recorded_version: str | None = None
    installed_version: str | None = None

    @property
    def passed(self) -> bool:
        return bool(self.checks) and all(c.passed is not False for c in self.checks)


def _sha(b: bytes) -> str:
    return hashlib.sha256(b).hexdigest()


def _against(label: str, got: str, ref: str | None, where: str) -> Check:
    """``got`` against one reference value: equal passes, different or missing fails."""
    what = f"{label} SHA-256 against {where}"
    if ref is None:
        return Check(what, False, "missing: the report carries no such value")
    if ref != got:
        return Check(what, False, f"differs: the file is {got}, {where} gives {ref}")
    return Check(what, True, "equal")


def check_hashes(a: Archive) -> list[Check]:
    """The SHA-256 of each embedded file against every reference value the report carries."""
    study = a.study_name()
    if study is None:
        return [Check("embedded study file", False, "not found among the embedded files")]
    results = a.results()
    s_hash, r_hash = _sha(a.attachments[study]), _sha(a.results_bytes)
    rec = results.get("source_sha256")
    checks = [
        Check(f"study file {study}", None, f"SHA-256 {s_hash}"),
        _against("study file", s_hash, a.printed(PRINTED_STUDY),
                 f'the page text ("{PRINTED_STUDY}")'),
        _against("study file", s_hash, rec if isinstance(rec, str) and rec else None,
                 "the embedded results JSON (source_sha256)"),
        Check(f"results JSON {a.results_name}", None, f"SHA-256 {r_hash}"),
        _against("results JSON", r_hash, a.printed(PRINTED_RESULTS),
                 f'the page text ("{PRINTED_RESULTS}")'),
    ]
    meta = a.metadata_hashes()
    if meta:
        for label, got in (("study file", s_hash), ("results JSON", r_hash)):
            checks.append(Check(f"{label} SHA-256 against the PDF metadata", got in meta,
                                "found" if got in meta else
                                f"{got} is not among the {len(meta)} SHA-256 stored there"))
    else:
        checks.append(Check("PDF metadata", None, "carries no SHA-256 (document information "
                            "and XMP): nothing to check there"))
    for name in sorted(a.attachments):
        if name not in (study, a.results_name):
            checks.append(Check(f"embedded {name}", None, "the report carries no SHA-256 "
                                "of it: not checked by hash (the recomputation uses it)"))
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
    both = sorted(old_l.keys() & new_l.keys())
    differ = [k for k in both if not close(new_l[k], old_l[k], RTOL, ATOL)]
    added = sorted(new_l.keys() - old_l.keys())
    dropped = sorted(old_l.keys() - new_l.keys())
    # A later relayset may add results (compared from then on) or change a key's form; the
    # values both versions give must agree. The same version must give the same keys.
    same_version = archived.get("relayset_version") == new.get("relayset_version")
    bad = differ + (dropped if same_version else [])
    detail = ("all within tolerance" if not differ else
              f"{len(differ)} differ, e.g. " + ", ".join(differ[:3]))
    if dropped:
        detail += (f"; {len(dropped)} archived values are no longer in the results"
                   + ("" if same_version else " of this version (not compared)")
                   + ", e.g. " + ", ".join(dropped[:3]))
    if added:
        detail += (f"; {len(added)} values are new in this version's results (not in the "
                   "archive, not compared), e.g. " + ", ".join(added[:3]))
    checks.append(Check(f"all {len(both)} values both results give", not bad, detail))
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


def _is_quantity(c: Check) -> bool:
    return re.match(r"(results|settings): ", c.what) is not None


def format_verification(v: Verification, *, all_checks: bool = False) -> str:
    """The printed verdict of one report: what each hash was checked against, then each
    quantity of the recomputation (failures always, every one with ``all_checks``)."""
    lines = [f"{v.source}: {'MATCHES' if v.passed else 'DOES NOT MATCH'}",
             "  hashes of the embedded files, and what each was checked against:"]
    hashes = [c for c in v.checks if not _is_quantity(c) and c.what != "recomputation"
              and not c.what.startswith("all ")]
    for c in hashes:
        if c.passed is None and c.detail.startswith("SHA-256 "):
            lines.append(f"    {c.what}: {c.detail}")  # the file and its hash
        else:
            lines.append(f"      {c.mark} {c.what}: {c.detail}")
    lines.append(f"  recomputation: |now - archived| <= {ATOL:g} + {RTOL:g} x |archived|; "
                 f"archived with relayset {v.recorded_version}, recomputed with "
                 f"{v.installed_version or 'the installed version'}")
    for c in v.checks:
        if c in hashes:
            continue
        if all_checks or not c.passed or not _is_quantity(c):
            lines.append(f"    {c.mark} {c.what}: {c.detail}")
    n = sum(1 for c in v.checks if _is_quantity(c))
    bad = sum(1 for c in v.checks if _is_quantity(c) and not c.passed)
    lines.append(f"  {n - bad} of {n} named quantities match" + ("" if all_checks else
                                                               " (--all lists each)"))
    return "\n".join(lines) + "\n"
