"""The neutral setting file of one relay end (``relayset-settings/1``), JSON and CSV.

One record per setting: its stable identifier (:data:`relayset.inputs.profile.SETTING_UNITS`),
the profile's label, the value to set (secondary, on the profile's grid), the unit, the
secondary and primary values, the ideal value and the difference, the range and step, and
the rounding rule it came from (:data:`relayset.settings.settable.ROUNDING`). The file also
carries the SHA-256 of the study file and of the results JSON it was taken from (the
``.json`` written beside it, exactly as ``relayset report`` writes it).
"""

from __future__ import annotations

import hashlib
import re
from pathlib import Path
from typing import Any

from relayset.errors import InputError

SETTINGS_SCHEMA = "relayset-settings/1"

#: Columns of the CSV (after line id, revision and relay end).
CSV_COLUMNS = ("id", "label", "value", "unit", "secondary", "primary", "ideal", "difference",
               "min", "max", "step", "direction", "in_range", "on_grid", "rule")


def results_json(results) -> str:
    """The results JSON text, as ``relayset report`` and ``settings --json`` write it."""
    from relayset import io

    return io.to_json(results.to_dict())


def setting_records(results, results_text: str) -> list[dict[str, Any]]:
    """The ``relayset-settings/1`` document of each relay end of ``results``.

    Raises
    ------
    InputError
        The study names no relay profile (``relay.profile``).
    """
    from relayset._version import relayset_version
    from relayset.export.teed import end_settings

    ends = end_settings(results)  # a teed line's ends too (relayset.export.teed)
    if not ends or any(st.settable is None for st in ends):
        raise InputError('the study names no relay profile: add profile = "PATH" to [relay] '
                         "for a setting file", field="relay.profile",
                         source=str(results.source_file))
    digest = hashlib.sha256(results_text.encode("utf-8")).hexdigest()
    ident = results.study
    verdict = (results.teed.verification if results.teed is not None else
               None if results.verification is None else results.verification.verdict)
    from relayset.inputs.study_file import parse_study

    study = parse_study(results.input, source=str(results.source_file))
    out = []
    for st in ends:
        ct, vt = study.relay.ratios(st.end)
        recs = []
        for v in st.settable.values:
            d = v.to_dict()
            recs.append({**d, "value": v.settable, "secondary": v.settable})
        out.append({
            "schema": SETTINGS_SCHEMA,
            "relayset_version": relayset_version(),
            "line_id": ident["line_id"],
            "revision": ident["revision"],
            "relay_end": st.end,
            "remote_end": st.remote_end,
            "ct_ratio": float(ct),
            "vt_ratio": float(vt),
            "profile": st.settable.to_dict()["profile"],
            "study_sha256": results.source_sha256,
            "results_sha256": digest,
            "verdict": str(verdict),
            "settings": recs,
        })
    return out


def to_csv(doc: dict[str, Any]) -> bytes:
    """The CSV of one setting document (UTF-8 with BOM, 12 significant digits, text cells
    neutralised for spreadsheets), like ``relayset settings --csv``."""
    import csv
    import io as _io

    from relayset.io import CSV_DIGITS, csv_bytes, spreadsheet_text

    def cell(x: Any) -> str:
        if isinstance(x, bool):
            return "true" if x else "false"
        if isinstance(x, int | float):
            return format(float(x), f".{CSV_DIGITS}g")
        return spreadsheet_text(str(x))

    buf = _io.StringIO()
    w = csv.writer(buf, lineterminator="\r\n")
    w.writerow(["line_id", "revision", "relay_end", *CSV_COLUMNS])
    lead = [cell(doc["line_id"]), cell(str(doc["revision"])), cell(doc["relay_end"])]
    for r in doc["settings"]:
        row = {**r, "min": r["range"][0], "max": r["range"][1]}
        w.writerow([*lead, *(cell(row[c]) for c in CSV_COLUMNS)])
    return csv_bytes(buf.getvalue())


#: Name prefix of the relay profile embedded in a report (verify tells it from the
#: philosophy by it); embedded setting files end in :data:`EMBEDDED_SETTINGS_SUFFIX`.
PROFILE_PREFIX = "relay_profile."
EMBEDDED_SETTINGS_SUFFIX = "_settings.json"


def is_setting_attachment(name: str) -> bool:
    """Whether a report's embedded file is its relay profile or a setting file."""
    return name.startswith(PROFILE_PREFIX) or name.endswith(EMBEDDED_SETTINGS_SUFFIX)


def profile_attachment(results) -> tuple[str, bytes] | None:
    """The relay profile to embed in a report: (name, bytes), None without a profile.

    Raises
    ------
    InputError
        The profile changed after the settings were computed from it.
    """
    from relayset.export.teed import end_settings
    from relayset.inputs.profile import study_profile

    ends = end_settings(results)  # a teed line's ends too
    if not ends or ends[0].settable is None:
        return None
    rel = (results.input or {}).get("relay") or {}
    prof = study_profile(rel.get("profile"), str(results.source_file))
    if prof is None:
        return None
    if prof.sha256 != ends[0].settable.profile_sha256:
        raise InputError("changed after the settings were computed; run the report again",
                         source=prof.source)
    return f"{PROFILE_PREFIX}{Path(prof.source).name}", Path(prof.source).read_bytes()


def embedded_setting_files(results, results_text: str, doc_id: str
                           ) -> list[tuple[str, bytes]]:
    """(name, bytes) of each relay end's setting file (JSON) for a report's attachments."""
    from relayset import io

    return [(f"{end_stem(doc_id, d['relay_end'])}.json", io.to_json(d).encode("utf-8"))
            for d in setting_records(results, results_text)]


def end_stem(stem: str, end: str) -> str:
    """File stem of one relay end's setting file: ``<line>_rev<r>_<end>_settings``."""
    clean = re.sub(r"[^A-Za-z0-9._-]+", "_", end).strip("._") or "end"
    return f"{stem}_{clean}_settings"


def setting_files(results) -> list[tuple[str, bytes]]:
    """(file name, bytes) of the results JSON and of each end's setting file (JSON, CSV)."""
    from relayset import io
    from relayset.report.context import safe_stem

    text = results_json(results)
    stem = safe_stem(results.study["line_id"], results.study["revision"])
    files = [(f"{stem}.json", text.encode("utf-8"))]
    for doc in setting_records(results, text):
        s = end_stem(stem, doc["relay_end"])
        files.append((f"{s}.json", io.to_json(doc).encode("utf-8")))
        files.append((f"{s}.csv", to_csv(doc)))
    return files


def export(paths, out_dir: str | Path) -> tuple[list[Path], int]:
    """``relayset export``: compute each study, then write every file (or none).

    Writes per study the results JSON and per relay end the setting file (JSON and CSV),
    the test points and the COMTRADE cases (:mod:`relayset.export.testshots`; a
    three-terminal line's: :mod:`relayset.export.teed`).
    Returns the files written and the number of failed checks
    (:func:`relayset.report.failures.failed_checks`, the report's one count).
    """
    from relayset import io
    from relayset.export.testshots import shot_and_case_files
    from relayset.report.failures import failed_checks
    from relayset.studies import pipeline

    out = Path(out_dir)
    loaded = [pipeline.load(p) for p in paths]
    runs = [pipeline.run_loaded(ld, settings=True) for ld in loaded]
    outputs = []  # every file of every study formed first, then written together
    for res in runs:
        outputs += [("-o", out / name, data) for name, data in setting_files(res)]
        if res.teed is not None:  # a three-terminal line: relayset.export.teed
            from relayset.export.teed import shot_and_case_files as teed_files

            outputs += teed_files(res, out)
        else:
            outputs += shot_and_case_files(res, out)
    io.write_all(outputs)
    return [Path(p) for _, p, _ in outputs], sum(len(failed_checks(r.to_dict()))
                                                 for r in runs)
