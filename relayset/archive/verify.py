"""Verify an archived report: embedded files against the hashes the report carries, and the
results against a recomputation with the installed relayset.

Hashes: the SHA-256 of the embedded study file is checked against the value printed in the
page text after "SHA-256 of the study file" and against ``source_sha256`` in the embedded
results JSON; the SHA-256 of the embedded results JSON against the value printed after
"SHA-256 of the results JSON". Each of these references is required: a reference that is
missing fails the check, like one that differs. The PDF metadata (document information and
XMP) is checked too: reports store both SHA-256 in their keywords; a PDF whose metadata
carries none is said so in the verdict rather than passed silently. The embedded relay
profile and each relay end's setting file: their SHA-256 against the value printed after
"SHA-256 of the relay profile NAME" / "SHA-256 of the setting file NAME" and against the
metadata; the profile's also against the SHA-256 each end's settable values record in the
results JSON, and each setting file's own ``study_sha256`` and ``results_sha256`` against
the embedded study file and results JSON. An embedded file for which the report carries no
reference (the philosophy file) is named as not checked by hash; its content still meets
the recomputation, which compares the philosophy applied.

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
from pathlib import Path, PurePosixPath

from relayset.archive.pdf import MAX_NESTING, Archive, read_archive
from relayset.archive.quantities import close, nesting_depth, numeric_leaves, results_quantities
from relayset.errors import InputError

RTOL = 1e-6
ATOL = 1e-9
#: Keys that legitimately differ between the archive and the recomputation.
IGNORED = ("source_file", "relayset_version")


#: The names the embedded study and philosophy get in verify's private temporary folder:
#: chosen here, never taken from the PDF.
STUDY_FILE = "study.toml"
PHILOSOPHY_FILE = "philosophy.toml"
#: ... and the embedded relay profile
PROFILE_FILE = "profile.toml"

#: The labels the report prints before each SHA-256 (templates/report/report.html.j2);
#: the profile's and each setting file's are followed by the file's embedded name.
PRINTED_STUDY = "SHA-256 of the study file"
PRINTED_RESULTS = "SHA-256 of the results JSON"
PRINTED_PROFILE = "SHA-256 of the relay profile"
PRINTED_SETTINGS = "SHA-256 of the setting file"


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
    signatures: list = field(default_factory=list)  #: archive.signatures.Signature
    signed_status: str | None = None  #: what the signatures give (None: not checked)

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
    from relayset.export.setting_file import PROFILE_PREFIX, is_setting_attachment

    for name in sorted(a.attachments):
        if name in (study, a.results_name):
            continue
        if not is_setting_attachment(name):
            checks.append(Check(f"embedded {name}", None, "the report carries no SHA-256 "
                                "of it: not checked by hash (the recomputation uses it)"))
            continue
        profile = name.startswith(PROFILE_PREFIX)
        checks += _embedded_checks(a, name, profile, results, meta, s_hash, r_hash)
    return checks


def _embedded_checks(a: Archive, name: str, profile: bool, results: dict, meta: set[str],
                     s_hash: str, r_hash: str) -> list[Check]:
    """The relay profile or a setting file: its SHA-256 against the page text and the PDF
    metadata; a profile's also against the results JSON (each end's settable values record
    it), a setting file's own references against the study file and results JSON."""
    got = _sha(a.attachments[name])
    label = f"{'relay profile' if profile else 'setting file'} {name}"
    printed = f"{PRINTED_PROFILE if profile else PRINTED_SETTINGS} {name}"
    out = [Check(label, None, f"SHA-256 {got}"),
           _against(label, got, a.printed(printed), f'the page text ("{printed}")')]
    if meta:
        out.append(Check(f"{label} SHA-256 against the PDF metadata", got in meta,
                         "found" if got in meta else
                         f"{got} is not among the {len(meta)} SHA-256 stored there"))
    if profile:
        recorded = _recorded_profile_hashes(results)
        where = "the embedded results JSON (settings.ends[].settable.profile.sha256)"
        if len(set(recorded)) > 1:
            out.append(Check(f"{label} SHA-256 against {where}", False,
                             "the ends record different profiles: " + ", ".join(recorded)))
        else:
            out.append(_against(label, got, recorded[0] if recorded else None, where))
        return out
    refs = _setting_file_references(a.attachments[name])
    for key, want, what in (("study_sha256", s_hash, "study file"),
                            ("results_sha256", r_hash, "results JSON")):
        ref = refs.get(key)
        if ref is None:
            out.append(Check(f"{label}: its {key}", False, "missing: the setting file "
                             "carries no such value"))
        else:
            out.append(Check(f"{label}: its {key}", ref == want,
                             f"equal to the embedded {what}'s" if ref == want else
                             f"differs: it gives {ref}, the embedded {what} is {want}"))
    return out


def _recorded_profile_hashes(results: dict) -> list[str]:
    """The profile SHA-256 each relay end of the results JSON records (hostile JSON)."""
    st = results.get("settings")
    ends = st.get("ends") if isinstance(st, dict) else None
    teed = results.get("teed")  # a three-terminal line: each end's own settings
    if ends is None and isinstance(teed, dict) and isinstance(teed.get("ends"), list):
        ends = [e.get("settings") for e in teed["ends"] if isinstance(e, dict)]
    out = []
    for e in ends if isinstance(ends, list) else []:
        sv = e.get("settable") if isinstance(e, dict) else None
        prof = sv.get("profile") if isinstance(sv, dict) else None
        h = prof.get("sha256") if isinstance(prof, dict) else None
        if isinstance(h, str) and h:
            out.append(h)
    return out


def _setting_file_references(data: bytes) -> dict[str, str]:
    """The SHA-256 a setting file records of its study and results (none if unreadable)."""
    import json

    try:
        doc = json.loads(data.decode("utf-8"))
    except (ValueError, UnicodeDecodeError, RecursionError):
        return {}
    if not isinstance(doc, dict):
        return {}
    return {k: v for k in ("study_sha256", "results_sha256")
            if isinstance(v := doc.get(k), str)}


def _toml_tables(data: bytes, name: str, source: str) -> dict:
    """An embedded TOML file, parsed, within the nesting limit (InputError otherwise)."""
    import tomllib

    rule = "the embedded file is not valid TOML"
    try:
        tables = tomllib.loads(data.decode("utf-8-sig"))
    except RecursionError:
        tables = None
        rule = f"the embedded file is nested more than {MAX_NESTING} deep"
    except (tomllib.TOMLDecodeError, UnicodeDecodeError):
        tables = None
    if tables is not None and nesting_depth(tables) > MAX_NESTING:
        tables, rule = None, f"the embedded file is nested more than {MAX_NESTING} deep"
    if tables is None:
        raise InputError(rule, field=name, source=source)
    return tables


def _embedded_philosophy(a: Archive, study: str, named: str) -> str | None:
    """The embedded file that is the philosophy the study names (by its name, else the one
    other TOML file); the name only chooses among the embedded files, never a path."""
    from relayset.export.setting_file import is_setting_attachment

    others = [n for n in a.attachments if n.endswith(".toml") and n != study
              and not is_setting_attachment(n)]
    wanted = PurePosixPath(named.replace("\\", "/")).name
    pick = next((n for n in others if n in (wanted, f"philosophy_{wanted}")), None)
    return pick if pick is not None or len(others) != 1 else others[0]


def _not_recomputed(why: str) -> tuple[list[Check], str, None]:
    return [Check("recomputation", False, why)], "", None


def recompute(a: Archive) -> tuple[list[Check], str, object]:
    """Recompute the embedded study with the installed relayset and compare the results.

    The embedded files are written only into a private temporary folder (mode 0700), under
    names chosen here (:data:`STUDY_FILE`, :data:`PHILOSOPHY_FILE`); a name in the PDF or a
    path in the embedded study never decides where anything is written or read. A study
    that names its philosophy file is pointed at the embedded philosophy (the one edit of
    its text); the recomputed results then carry the study's own philosophy name and
    SHA-256 again, so that only computed values are compared.

    Returns the checks, the installed version and the recomputed results (named as the
    archive names them: :func:`relayset.archive.pages.patched_results`), None when the
    study could not be recomputed.
    """
    import os

    from relayset.archive.pages import patched_results
    from relayset.fleet.jobs import effective_study_text
    from relayset.io import to_json
    from relayset.studies import pipeline

    archived = a.results()
    study = a.study_name()
    if study is None:
        raise InputError("no embedded study file: not a complete relayset report",
                         source=a.source)
    data = a.attachments[study]
    tables = _toml_tables(data, study, a.source)
    info = tables.get("study") if isinstance(tables.get("study"), dict) else {}
    for key in ("adjacent_lines", "lines_behind"):
        rows = tables.get(key) if isinstance(tables.get(key), list) else []
        for i, row in enumerate(rows):
            if isinstance(row, dict) and "study" in row:
                return _not_recomputed(f"the embedded study names another line's study file "
                                       f"({key}[{i}].study), which the report does not embed")
    phil = info.get("philosophy", "default")
    with tempfile.TemporaryDirectory(prefix="relayset-verify-") as tmp:
        folder = Path(tmp).resolve()  # mkdtemp: readable by this user only
        text = data
        if isinstance(phil, str) and phil != "default":
            pick = _embedded_philosophy(a, study, phil)
            if pick is None:
                return _not_recomputed("the embedded study names a philosophy file, and the "
                                       "report embeds none that is it")
            _toml_tables(a.attachments[pick], pick, a.source)
            (folder / PHILOSOPHY_FILE).write_bytes(a.attachments[pick])
            try:
                text = effective_study_text(data.decode("utf-8-sig"), folder, folder,
                                            status=None,
                                            philosophy=folder / PHILOSOPHY_FILE).encode()
            except InputError:
                return _not_recomputed("the embedded study's philosophy could not be pointed "
                                       "at the embedded philosophy file")
        relay = tables.get("relay") if isinstance(tables.get("relay"), dict) else {}
        prof = relay.get("profile")
        if isinstance(prof, str):  # pointed at the embedded relay profile
            from relayset.export.setting_file import PROFILE_PREFIX
            from relayset.inputs.profile import with_profile

            pick = next((n for n in sorted(a.attachments) if n.startswith(PROFILE_PREFIX)),
                        None)
            if pick is None:
                return _not_recomputed("the embedded study names a relay profile, and the "
                                       "report embeds none")
            name = PROFILE_FILE  # our own name: names inside the PDF decide nothing
            (folder / name).write_bytes(a.attachments[pick])
            try:
                text = with_profile(text.decode("utf-8-sig"), str(folder / name)).encode()
            except ValueError:
                return _not_recomputed("the embedded study's relay profile could not be "
                                       "pointed at the embedded profile")
        path = folder / STUDY_FILE
        path.write_bytes(text)
        try:
            res = pipeline.run(path, reach="reach_study" in archived,
                               settings="settings" in archived or "teed" in archived)
            new = res.to_dict()
        except InputError as exc:
            msg = str(exc).replace(str(path), study).replace(str(folder) + os.sep, "")
            return _not_recomputed(f"the embedded study fails: {msg}")
    import json

    new = json.loads(to_json(new))  # the same JSON round trip as the archive
    if isinstance(prof, str) and isinstance((new.get("input") or {}).get("relay"), dict):
        new["input"]["relay"]["profile"] = prof
    # what the edit of the study's text changed: its SHA-256 and its philosophy's name
    new["source_sha256"] = _sha(data)
    for where in (new.get("study"), (new.get("input") or {}).get("study")):
        if isinstance(where, dict) and "philosophy" in where:
            where["philosophy"] = phil
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
    return checks, str(new.get("relayset_version")), patched_results(
        res, study, _sha(data), phil, profile=prof if isinstance(prof, str) else None)


def _show(v) -> str:
    if isinstance(v, complex):
        return f"{v.real:.6g}{v.imag:+.6g}j"
    if isinstance(v, float):
        return f"{v:.6g}"
    return str(v)


def check_updates(a: Archive, sigs: list | None) -> Check:
    """Nothing but signatures appended after the report was written (``sigs`` None: the
    signatures could not be read, pyHanko missing)."""
    from relayset.archive.pages import revision_ends

    ends = revision_ends(a.data)
    if not ends:
        return Check("updates after the report was written", False,
                     "the file has no end-of-file marker: truncated or not as written")
    tail = a.data[ends[-1]:]
    problems = []
    if tail.strip(b"\x00\r\n\t ") != b"":
        problems.append(f"{len(tail)} bytes follow the last end-of-file marker")
    if len(ends) > 1:
        if sigs is None:
            problems.append(f"{len(ends) - 1} update(s) appended; telling signatures from "
                            "other changes needs pyHanko (pip install pyhanko)")
        else:
            signed = {s.revision_end for s in sigs}
            for k, end in enumerate(ends[1:], start=2):
                if end not in signed:
                    problems.append(f"revision {k} (bytes {ends[k - 2]}-{end}) is not a "
                                    "signature: a change after the report was written")
    if problems:
        return Check("updates after the report was written", False, "; ".join(problems))
    n = len(ends) - 1
    return Check("updates after the report was written", True,
                 "none" if n == 0 else f"{n}, each a signature")


def _signature_checks(a: Archive, trust) -> tuple[list | None, list[Check]]:
    """The report's signatures (None without pyHanko) and a check of each one."""
    from relayset.archive import signatures as sg
    from relayset.archive.pages import revision_ends

    if not sg.available():
        if len(revision_ends(a.data)) > 1:
            return None, []
        return None, [Check("signatures", None, "none (reading them needs pyHanko: pip "
                            "install pyhanko)")]
    try:
        sigs = sg.read_signatures(a.data, trust)
    except Exception as exc:  # the library's, on a hostile file
        return [], [Check("signatures", False, f"cannot be read ({exc})")]
    if not sigs:
        return sigs, [Check("signatures", None, "none")]
    checks = []
    for s in sigs:
        role = s.role or f"field {s.field} (no relayset role)"
        trust_text = ("no trust anchor given (--trust): not checked" if s.trusted is None
                      else "chains to the trust anchor" if s.trusted
                      else "does NOT chain to the trust anchor")
        detail = (f"signed by {s.signer} at {s.time} (the signer's clock, not a trusted "
                  f"timestamp); {'intact' if s.intact else 'NOT intact'}, "
                  f"{'valid' if s.valid else 'NOT valid'}; "
                  f"{'covers the whole file' if s.whole else 'later updates follow'}; "
                  f"changes after it: {s.later_changes}; {trust_text}")
        checks.append(Check(f"signature {role}", s.ok, detail))
    return sigs, checks


def verify_report(path: str | Path, *, trust=None, renderer=None) -> Verification:
    """Every check of one archived report (InputError when it is not a relayset report).

    ``trust``: PEM or DER certificates of trust anchors for the signatures. ``renderer``:
    the PDF renderer to re-create the pages with (:class:`relayset.report.build.PdfHelper`).
    """
    from relayset.archive import signatures as sg
    from relayset.archive.pages import check_pages

    a = read_archive(path)
    v = Verification(str(path))
    v.recorded_version = str(a.results().get("relayset_version"))
    sigs, sig_checks = _signature_checks(a, trust)
    v.checks.append(check_updates(a, sigs))
    v.checks += sig_checks
    v.signatures = sigs or []
    if sigs is not None:
        v.signed_status = sg.signed_status(v.signatures)
    study = a.study_name()
    if study is None:
        v.checks.append(Check("embedded study file", False, "not among the embedded files "
                              f"({', '.join(sorted(a.attachments))}): removed after the "
                              "report was written, or not a complete relayset report; "
                              "nothing recomputed"))
        return v
    v.checks += check_hashes(a)
    checks, v.installed_version, res = recompute(a)
    v.checks += checks
    if res is None:
        v.checks.append(Check("printed pages", False, "not compared: the embedded study "
                              "could not be recomputed"))
    elif v.recorded_version != v.installed_version:
        v.checks.append(Check("printed pages", None, f"not compared: written by relayset "
                              f"{v.recorded_version}, this is {v.installed_version}, whose "
                              "pages may differ; verify with the version that wrote it"))
    else:
        v.checks += check_pages(a, res, study, signed=bool(v.signatures), renderer=renderer)
    return v


#: The checks of the file itself (printed first), by the start of their name.
FILE_CHECKS = ("updates after", "signature", "printed pages", "report as written",
               "annotations", "metadata", "embedded study file")


def _is_quantity(c: Check) -> bool:
    return re.match(r"(results|settings): ", c.what) is not None


def _is_file_check(c: Check) -> bool:
    return c.what.startswith(FILE_CHECKS)


def format_verification(v: Verification, *, all_checks: bool = False) -> str:
    """The printed verdict of one report: the file (updates, signatures, pages, annotations,
    metadata), what each hash was checked against, then each quantity of the recomputation
    (failures always, every one with ``all_checks``)."""
    lines = [f"{v.source}: {'MATCHES' if v.passed else 'DOES NOT MATCH'}"]
    if v.signed_status is not None:
        lines.append(f"  signed status: {v.signed_status} (the last of prepared, checked, "
                     "approved whose signature holds; approved only with a valid approved "
                     "signature)")
    lines.append("  the file, its pages and its signatures:")
    for c in v.checks:
        if _is_file_check(c):
            lines.append(f"      {c.mark} {c.what}: {c.detail}")
    hashes = [c for c in v.checks if not _is_quantity(c) and not _is_file_check(c)
              and c.what != "recomputation" and not c.what.startswith("all ")]
    if hashes:
        lines.append("  hashes of the embedded files, and what each was checked against:")
    for c in hashes:
        if c.passed is None and c.detail.startswith("SHA-256 "):
            lines.append(f"    {c.what}: {c.detail}")  # the file and its hash
        else:
            lines.append(f"      {c.mark} {c.what}: {c.detail}")
    if v.installed_version is None:
        return "\n".join(lines) + "\n"
    lines.append(f"  recomputation: |now - archived| <= {ATOL:g} + {RTOL:g} x |archived|; "
                 f"archived with relayset {v.recorded_version}, recomputed with "
                 f"{v.installed_version or 'the installed version'}")
    for c in v.checks:
        if c in hashes or _is_file_check(c):
            continue
        if all_checks or not c.passed or not _is_quantity(c):
            lines.append(f"    {c.mark} {c.what}: {c.detail}")
    n = sum(1 for c in v.checks if _is_quantity(c))
    bad = sum(1 for c in v.checks if _is_quantity(c) and not c.passed)
    lines.append(f"  {n - bad} of {n} named quantities match" + ("" if all_checks else
                                                               " (--all lists each)"))
    return "\n".join(lines) + "\n"
