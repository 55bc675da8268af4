"""The Python API: studies in memory or on disk, computed into results objects.

A :class:`Study` is a study file as read and validated: from a file, from TOML text, from
the tables of a dictionary, or from another study with one value replaced. Each goes
through exactly the checks a file gets on the command line, and a defect is raised as a
:class:`StudyError` carrying the command line's one-line message.

Example
-------
>>> import relayset
>>> study = relayset.Study.from_file("demo_lines/ashcombe_brenwick_132kv.toml")
>>> wet = study.replace("system.earth_resistivity", "30 ohm*m")
>>> res = relayset.study_parameters(wet)
>>> res.parameters.circuits[0].z0_ohm_per_m * 1e3     # ohm/km
>>> res.frames()["parameters"]                        # pandas DataFrames by name
"""

from __future__ import annotations

import copy
import datetime
import re
from collections.abc import Iterator, Mapping
from contextlib import contextmanager
from dataclasses import dataclass, fields
from pathlib import Path
from typing import Any

from relayset.errors import InputError, Written, as_written
from relayset.results.study import StudyResults
from relayset.studies import pipeline
from relayset.studies.pipeline import LoadedStudy, relayset_version

__all__ = [
    "LoadedStudy",
    "Study",
    "StudyError",
    "load_study",
    "matrix_frame",
    "relayset_version",
    "sequence_frame",
    "study_parameters",
    "study_reach",
    "study_settings",
]

#: The name a study held in memory goes by when none is given (in messages and results).
IN_MEMORY = "<study>"


class StudyError(InputError):
    """A study breaks a documented rule: the command line's one-line error, for scripts.

    ``str(error)`` is the message the command line prints (``FILE: FIELD = VALUE: RULE``).

    Attributes
    ----------
    file : str
        The study file's path, or the name a study in memory was given.
    field : str
        The field as the user wrote it (``system.earth_resistivity``,
        ``circuits[0].positions[1].height``); empty when the whole file is meant.
    value : str or None
        The value as the user wrote it (TOML spelling, never a Python repr); None when the
        message names no value (a missing key, a whole file).
    rule : str
        The rule the value breaks.
    """

    def __init__(self, rule: str, *, field: str = "", value: object = None, source: str = ""):
        super().__init__(rule, field=field, value=value, source=source)
        self.file = source
        # As in the message; Written keeps located() from quoting it a second time.
        self.value = None if value is None else Written(as_written(value))

    @classmethod
    def from_input(cls, exc: InputError) -> StudyError:
        """The same error (same message) as a :class:`StudyError`."""
        return cls(exc.rule, field=exc.field, value=exc.value, source=exc.source)


@contextmanager
def _study_errors() -> Iterator[None]:
    """Input errors leave the API as :class:`StudyError` (one line, no traceback chain)."""
    try:
        yield
    except StudyError:
        raise
    except InputError as exc:
        raise StudyError.from_input(exc) from None


@dataclass(frozen=True)
class Study(LoadedStudy):
    """A study as read and validated: its TOML bytes, their SHA-256, the tables and the model.

    Build one with :meth:`from_file`, :meth:`from_toml` or :meth:`from_dict`, and derive
    variants with :meth:`replace`; every path runs the checks a study file gets on the
    command line and raises :class:`StudyError` on the first defect. A study held in memory
    never touches the disk (unless its tables name a philosophy or an adjacent line's study
    file, which are read when the settings are computed). Relative paths inside it are
    taken from the folder of its ``name``.

    Attributes
    ----------
    source : str
        The file's path, or the name given to a study in memory (messages, ``source_file``).
    data : bytes
        The TOML text as UTF-8 bytes; ``source_sha256`` of the results is their SHA-256.
    tables : dict
        The TOML tables as read (what :meth:`replace` edits).
    study : relayset.inputs.study_file.Study
        The validated model (also :attr:`model`).
    """

    @classmethod
    def from_file(cls, path: str | Path) -> Study:
        """Read and validate a study file (TOML, UTF-8)."""
        with _study_errors():
            return cls._of(pipeline.load(path))

    @classmethod
    def from_toml(cls, text: str | bytes, name: str = IN_MEMORY) -> Study:
        """Validate a study's TOML text held in memory.

        Parameters
        ----------
        text : str or bytes
            The TOML text (bytes: UTF-8, with or without a byte-order mark).
        name : str
            What messages and the results call it; a path-like name also sets the folder
            that relative paths inside the study are taken from.
        """
        raw = text.encode("utf-8") if isinstance(text, str) else bytes(text)
        with _study_errors():
            return cls._of(pipeline.load_bytes(raw, name))

    @classmethod
    def from_dict(cls, tables: Mapping[str, Any], name: str = IN_MEMORY) -> Study:
        """Validate a study given as its tables (the dictionary ``tomllib`` would read).

        The tables are written as TOML text (:meth:`to_toml` gives it back) and read as a
        file is, so a study built here is exactly the file that text would be. Values are
        what a study file holds: text with units (``"300 ohm*m"``), numbers, true/false,
        dates, lists and tables; None leaves a key out.
        """
        import tomli_w

        clean = _toml_value(tables, (), name)
        if not isinstance(clean, dict):
            raise StudyError("must be a table of the study's tables (a dict)", source=name)
        return cls.from_toml(tomli_w.dumps(clean), name)

    def replace(self, field: str, value: Any) -> Study:
        """A new validated study with one field set, the rest as it was.

        Parameters
        ----------
        field : str
            The field as it is written in a message: dotted keys, list entries in brackets,
            quoted keys where TOML needs them (``"system.earth_resistivity"``,
            ``"circuits[0].positions[2].height"``, ``'sources."Oxbow Bay".z1'``). Missing
            tables on the way are created.
        value : object
            The value as it would be written in the study file (``"300 ohm*m"``); None
            removes the field.

        Examples
        --------
        >>> for rho in ("10 ohm*m", "100 ohm*m", "1000 ohm*m"):
        ...     relayset.study_parameters(study.replace("system.earth_resistivity", rho))
        """
        path = _parse_field(field, self.source)
        tables = copy.deepcopy(self.tables)
        node: Any = tables
        for i, key in enumerate(path[:-1]):
            try:
                if isinstance(key, int):
                    node = node[key]
                else:
                    node = node.setdefault(key, {}) if isinstance(node, dict) else node[key]
            except (IndexError, KeyError, TypeError):
                raise StudyError(_no_such(path[: i + 1]), field=field, source=self.source
                                 ) from None
        last = path[-1]
        try:
            if value is None:
                if isinstance(node, dict):
                    node.pop(last, None)
                else:
                    del node[last]
            else:
                node[last] = value
        except (IndexError, KeyError, TypeError):
            raise StudyError(_no_such(path), field=field, source=self.source) from None
        return Study.from_dict(tables, self.source)

    def to_toml(self) -> str:
        """The study's TOML text (as read, or as written from the tables)."""
        return self.data.decode("utf-8-sig")

    @property
    def name(self) -> str:
        """The file's path or the in-memory study's name."""
        return self.source

    @property
    def model(self):
        """The validated model (:class:`relayset.inputs.study_file.Study`)."""
        return self.study

    @classmethod
    def _of(cls, loaded: LoadedStudy) -> Study:
        return cls(**{f.name: getattr(loaded, f.name) for f in fields(LoadedStudy)})


_FIELD_PART = re.compile(r'\.?(?:"((?:[^"\\]|\\.)*)"|([A-Za-z0-9_-]+))|\[(\d+)\]')


def _parse_field(field: str, source: str) -> list[str | int]:
    """A field path as written in messages, split into keys and list indices."""
    parts: list[str | int] = []
    pos = 0
    while pos < len(field):
        m = _FIELD_PART.match(field, pos)
        if m is None or (pos == 0 and field.startswith(".")):
            break
        quoted, bare, index = m.groups()
        parts.append(int(index) if index is not None else
                     bare if bare is not None else re.sub(r"\\(.)", r"\1", quoted))
        pos = m.end()
    if pos != len(field) or not parts or isinstance(parts[0], int):
        raise StudyError('is not a field path (write it as in a message: "system.frequency", '
                         '"circuits[0].positions[1].height")', field=field, source=source)
    return parts


def _no_such(path: list[str | int]) -> str:
    shown = "".join(f"[{p}]" if isinstance(p, int) else ("." if i else "") + p
                    for i, p in enumerate(path))
    return f"the study has no {shown} to replace"


def _toml_value(value: Any, loc: tuple[str | int, ...], source: str) -> Any:
    """``value`` as TOML can hold it (numpy scalars as numbers), or a StudyError naming it."""
    from relayset.inputs.study_file import field_path

    if value is None or isinstance(value, str | bool | int | float | datetime.date
                                   | datetime.time):
        return value
    if isinstance(value, Mapping):
        out = {}
        for k, v in value.items():
            if not isinstance(k, str):
                raise StudyError("table keys must be text", field=field_path(loc) or "",
                                 value=str(k), source=source)
            if v is not None:
                out[k] = _toml_value(v, (*loc, k), source)
        return out
    if isinstance(value, list | tuple):
        return [_toml_value(v, (*loc, i), source) for i, v in enumerate(value)]
    shape = getattr(value, "shape", None)
    if shape == () and hasattr(value, "item"):
        return _toml_value(value.item(), loc, source)  # a numpy scalar
    if shape is not None and hasattr(value, "tolist"):
        return _toml_value(value.tolist(), loc, source)  # a numpy array
    rule = ("cannot be written in a study file; write a complex quantity as text with its "
            'unit ("1.5 + 12j ohm")' if isinstance(value, complex)
            else "cannot be written in a study file (text, number, true/false, date, list or "
            "table)")
    shown = value if isinstance(value, complex) else Written(str(value))
    raise StudyError(rule, field=field_path(loc), value=shown, source=source)


def load_study(path: str | Path) -> Study:
    """Read and validate a study file (the same as :meth:`Study.from_file`)."""
    return Study.from_file(path)


def _study(study: Study | LoadedStudy | str | Path) -> LoadedStudy:
    if isinstance(study, LoadedStudy):
        return study
    return Study.from_file(study)


def study_parameters(study: Study | str | Path) -> StudyResults:
    """Line parameters of a study (a :class:`Study` or a study file's path).

    Raises
    ------
    StudyError
        The study breaks a rule (the command line's one-line message).
    """
    with _study_errors():
        return pipeline.run_loaded(_study(study))


def study_reach(study: Study | str | Path) -> StudyResults:
    """Line parameters and the reach study of a study (a :class:`Study` or a path).

    Raises
    ------
    StudyError
        The study breaks a rule, or lacks what the reach study needs.
    """
    with _study_errors():
        return pipeline.run_loaded(_study(study), reach=True)


def study_settings(study: Study | str | Path) -> StudyResults:
    """Line parameters, reach study, distance-zone settings (one per relay end) and their
    verification by fault simulation, of a study (a :class:`Study` or a path). A study
    with a ``[tee]`` (a three-terminal line) gives its zones and their verification in
    ``teed`` (:class:`relayset.results.teed.TeedStudyResult`) instead.

    Raises
    ------
    StudyError
        The study breaks a rule, or lacks what the settings need.
    """
    with _study_errors():
        return pipeline.run_loaded(_study(study), reach=True, settings=True)


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
