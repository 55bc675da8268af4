"""The Python API: load a study, compute, get results objects.

Example
-------
>>> import relayset
>>> res = relayset.study_parameters("demo_lines/ashcombe_brenwick_132kv.toml")
>>> res.parameters.circuits[0].z1_ohm_per_m * 1e3   # ohm/km
>>> relayset.matrix_frame(res.parameters, "actual_plan")  # pandas DataFrame, ohm/km
"""

from __future__ import annotations

import hashlib
from importlib.metadata import PackageNotFoundError, version
from pathlib import Path
from typing import Any

from relayset.inputs.study_file import Study, parse_study, read_toml
from relayset.results.study import StudyResults
from relayset.studies.geometry import build_geometry
from relayset.studies.parameters import compute_parameters


def relayset_version() -> str:
    try:
        return version("relayset")
    except PackageNotFoundError:  # running from a source tree without installing
        return "0+unknown"


def load_study(path: str | Path) -> tuple[Study, dict[str, Any], str]:
    """Read and validate a study file: the model, the raw tables and the file's SHA-256."""
    raw = read_toml(path)
    digest = hashlib.sha256(Path(path).read_bytes()).hexdigest()
    return parse_study(raw, source=str(path)), raw, digest


def _identity(study: Study) -> dict[str, Any]:
    info = study.study.model_dump()
    if info.get("revision_date") is not None:
        info["revision_date"] = info["revision_date"].isoformat()
    info["nominal_voltage_kv"] = study.system.nominal_voltage / 1e3
    return info


def study_parameters(path: str | Path) -> StudyResults:
    """Line parameters of one study file."""
    study, raw, digest = load_study(path)
    geo = build_geometry(study, str(path))
    params = compute_parameters(geo)
    return StudyResults(
        relayset_version=relayset_version(),
        source_file=str(path),
        source_sha256=digest,
        study_input=raw,
        identity=_identity(study),
        parameters=params,
    )


def _run(path: str | Path, *, reach: bool, settings: bool) -> StudyResults:
    from relayset.studies.reach import run_reach_study
    from relayset.studies.settings import study_philosophy

    study, raw, digest = load_study(path)
    src = str(path)
    geo = build_geometry(study, src)
    params = compute_parameters(geo)
    philosophy = study_philosophy(study, src)
    z1 = philosophy.zone1
    reach_res = run_reach_study(
        study, geo, params, source=src, zone1_reach_pct=z1.reach_pct,
        zone1_max_pct=z1.reach_pct, zone1_margin_pct=z1.min_margin_pct) if reach else None
    settings_res = verification = None
    if settings:
        from relayset.studies.verification import settle_and_verify

        by_end, verification = settle_and_verify(study, geo, params, reach_res, philosophy,
                                                 source=src)
        settings_res = next(iter(by_end.values()))
    return StudyResults(
        relayset_version=relayset_version(),
        source_file=src,
        source_sha256=digest,
        study_input=raw,
        identity=_identity(study),
        parameters=params,
        reach=reach_res,
        settings=settings_res,
        philosophy=philosophy.to_dict() if settings else None,
        verification=verification,
    )


def study_reach(path: str | Path) -> StudyResults:
    """Line parameters and the reach study of one study file."""
    return _run(path, reach=True, settings=False)


def study_settings(path: str | Path) -> StudyResults:
    """Line parameters, reach study and distance-zone settings of one study file."""
    return _run(path, reach=True, settings=True)


def matrix_frame(params, arrangement: str = "actual_plan", *, kind: str = "zabc",
                 per: str = "km"):
    """A pandas DataFrame view of a matrix of the results (complex, per km or per mile).

    Parameters
    ----------
    params : LineParameters
    arrangement : {"untransposed", "actual_plan", "ideal_cycle"}
    kind : {"zabc", "z012", "yabc"}
        Phase impedance [ohm], sequence impedance [ohm] or shunt admittance [S].
    per : {"km", "mi"}
    """
    import pandas as pd

    scale = {"km": 1e3, "mi": 1609.344}[per]
    arr = params.arrangements[arrangement]
    m = {"zabc": arr.zabc_ohm_per_m, "z012": arr.z012_ohm_per_m,
         "yabc": arr.yabc_s_per_m}[kind] * scale
    if kind == "z012":
        names = [f"{c}{s}" for c in range(1, len(params.phase_labels) + 1) for s in "012"]
    else:
        names = [f"{c}{p}" for c, labels in enumerate(params.phase_labels, 1) for p in labels]
    if len(params.phase_labels) == 1:
        names = [n[1:] for n in names]
    return pd.DataFrame(m, index=names, columns=names)


def sequence_frame(params, *, per: str = "km"):
    """A pandas DataFrame of the sequence quantities, one row per circuit."""
    import pandas as pd

    scale = {"km": 1e3, "mi": 1609.344}[per]
    rows = []
    for c in params.circuits:
        rows.append({
            "circuit": c.circuit,
            f"z1_ohm_per_{per}": c.z1_ohm_per_m * scale,
            f"z0_ohm_per_{per}": c.z0_ohm_per_m * scale,
            "line_angle_deg": c.line_angle_deg,
            "k0": c.k0.k0,
            "kr": c.k0.kr,
            "kx": c.k0.kx,
            f"c1_nf_per_{per}": c.c1_f_per_m * 1e9 * scale,
            "z1_ohm": c.z1_ohm,
            "z0_ohm": c.z0_ohm,
        })
    return pd.DataFrame(rows).set_index("circuit")
