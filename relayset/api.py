"""The Python API: load a study, compute, get results objects.

Example
-------
>>> import relayset
>>> res = relayset.study_parameters("demo_lines/ashcombe_brenwick_132kv.toml")
>>> res.parameters.circuits[0].z1_ohm_per_m * 1e3   # ohm/km
>>> relayset.matrix_frame(res.parameters, "actual_plan")  # pandas DataFrame, ohm/km
"""

from __future__ import annotations

from pathlib import Path

from relayset.results.study import StudyResults
from relayset.studies import pipeline
from relayset.studies.pipeline import LoadedStudy, relayset_version

__all__ = [
    "LoadedStudy",
    "load_study",
    "matrix_frame",
    "relayset_version",
    "sequence_frame",
    "study_parameters",
    "study_reach",
    "study_settings",
]


def load_study(path: str | Path) -> LoadedStudy:
    """Read and validate a study file: its bytes, their SHA-256, the tables and the model."""
    return pipeline.load(path)


def study_parameters(path: str | Path) -> StudyResults:
    """Line parameters of one study file."""
    return pipeline.run(path)


def study_reach(path: str | Path) -> StudyResults:
    """Line parameters and the reach study of one study file."""
    return pipeline.run(path, reach=True)


def study_settings(path: str | Path) -> StudyResults:
    """Line parameters, reach study and distance-zone settings (one per relay end)."""
    return pipeline.run(path, reach=True, settings=True)


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
