"""The one pipeline: read the file once, hash those bytes, parse, resolve the relay once, then
geometry -> parameters -> reach study -> settings. Nothing here prints or writes."""

from __future__ import annotations

import hashlib
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Any

from relayset._version import relayset_version
from relayset.inputs.schema import to_data
from relayset.inputs.study_file import (
    Study,
    check_reach_inputs,
    check_settings_inputs,
    loads_toml,
    parse_study,
    read_bytes,
)
from relayset.results.study import StudyResults
from relayset.studies.geometry import build_geometry
from relayset.studies.parameters import compute_parameters

if TYPE_CHECKING:
    from relayset.results.parameters import LineParameters

__all__ = ["LoadedStudy", "identity", "line_parameters", "load", "load_bytes",
           "relayset_version", "run", "run_loaded"]


@dataclass(frozen=True)
class LoadedStudy:
    """A study file as read: its bytes, their SHA-256, the TOML tables and the model."""

    source: str
    data: bytes
    sha256: str
    tables: dict[str, Any]
    study: Study


def load(path: str | Path) -> LoadedStudy:
    """Read a study file once and validate it; the hash is of exactly the bytes parsed."""
    return load_bytes(read_bytes(path), str(path))


def load_bytes(data: bytes, source: str) -> LoadedStudy:
    """Validate a study's TOML bytes exactly as a file's (``source`` names it in messages
    and is the base of its relative paths)."""
    tables = loads_toml(data, source)
    return LoadedStudy(source, data, hashlib.sha256(data).hexdigest(), tables,
                       parse_study(tables, source=source))


def identity(study: Study) -> dict[str, Any]:
    """The study's identity block (line id, title, ends, revision, names, voltage)."""
    info = to_data(study.study)
    if info.get("revision_date") is not None:
        info["revision_date"] = info["revision_date"].isoformat()
    info["nominal_voltage_kv"] = study.system.nominal_voltage / 1e3
    return info


def line_parameters(path: str | Path) -> LineParameters:
    """The line parameters of a study file (e.g. an adjacent line's)."""
    loaded = load(path)
    return compute_parameters(build_geometry(loaded.study, loaded.source))


def run(path: str | Path, *, reach: bool = False, settings: bool = False) -> StudyResults:
    """Compute a study: parameters always, the reach study and settings on request."""
    return run_loaded(load(path), reach=reach, settings=settings)


def run_loaded(loaded: LoadedStudy, *, reach: bool = False, settings: bool = False
               ) -> StudyResults:
    """Compute a study already read and validated (a file's, or one held in memory)."""
    reach = reach or settings  # zone 1 follows the reach study
    study, src = loaded.study, loaded.source
    geo = build_geometry(study, src)
    params = compute_parameters(geo)
    relay = philosophy = reach_res = settings_res = teed = None
    teed_reach = None
    if reach and study.tee is not None and not settings:  # relayset.studies.teed_reach
        from relayset.studies.relay import resolve_relay
        from relayset.studies.teed_reach import run_teed_reach

        check_reach_inputs(study, src)
        relay = resolve_relay(study, params)
        teed_reach = run_teed_reach(study, geo, params, relay, source=src)
        reach = False  # the two-ended reach study does not run
    if reach and study.tee is not None:  # three-terminal line: relayset.studies.teed
        from relayset.studies.relay import resolve_relay
        from relayset.studies.settings import study_philosophy
        from relayset.studies.teed import run_teed_study

        check_reach_inputs(study, src)
        relay = resolve_relay(study, params)
        philosophy = study_philosophy(study, src)
        teed = run_teed_study(study, geo, params, relay, philosophy, source=src)
        reach = settings = False  # the two-ended steps do not run
    if reach:
        # Imported here: `relayset params` needs none of the study steps below.
        from relayset.studies.reach import run_reach_study
        from relayset.studies.relay import resolve_relay
        from relayset.studies.settings import study_philosophy

        (check_settings_inputs if settings else check_reach_inputs)(study, src)
        relay = resolve_relay(study, params)
        philosophy = study_philosophy(study, src)
        reach_res = run_reach_study(study, geo, params, relay, philosophy, source=src)
    verification = None
    if settings:
        from relayset.studies.verification import settle_and_verify

        # Settings closed by fault simulation (zone 1, infeed, reverse zone), then verified.
        settings_res, verification = settle_and_verify(study, geo, params, relay, reach_res,
                                                       philosophy, source=src)
    return StudyResults(
        relayset_version=relayset_version(),
        source_file=src,
        source_sha256=loaded.sha256,
        input=loaded.tables,
        study=identity(study),
        parameters=params,
        relay=relay,
        reach_study=reach_res,
        settings=settings_res,
        philosophy=philosophy.to_dict() if settings or teed is not None else None,
        verification=verification,
        teed=teed,
        teed_reach=teed_reach,
    )
