"""relayset: overhead-line parameters, untransposition reach study and distance-zone settings.

Every result must be reviewed and approved by a licensed professional engineer; local codes,
the utility's setting philosophy and the relay manufacturer's instructions prevail.

The public API is imported lazily so that ``relayset --help`` starts fast.
"""

from __future__ import annotations

_API = {
    "Study": "relayset.api",
    "StudyError": "relayset.api",
    "load_study": "relayset.api",
    "study_parameters": "relayset.api",
    "study_reach": "relayset.api",
    "study_settings": "relayset.api",
    "matrix_frame": "relayset.api",
    "sequence_frame": "relayset.api",
    "InputError": "relayset.errors",
    "list_earth_models": "relayset.physics.earth",
}

__all__ = sorted(_API)


def __getattr__(name: str) -> object:  # "object", not typing.Any: --help loads no typing
    if name in _API:
        import importlib

        return getattr(importlib.import_module(_API[name]), name)
    raise AttributeError(f"module 'relayset' has no attribute {name!r}")
