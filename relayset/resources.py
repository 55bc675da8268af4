"""Where the shipped templates and demo lines are, in a wheel or in a source checkout."""

from __future__ import annotations

from pathlib import Path

_PKG = Path(__file__).resolve().parent


def _shipped(name: str) -> Path:
    inside = _PKG / "_shipped" / name  # non-editable install: copied into the wheel
    if inside.is_dir():
        return inside
    return _PKG.parent / name  # source checkout or editable install


def templates_dir() -> Path:
    """The folder of Jinja2 templates."""
    return _shipped("templates")


def demo_lines_dir() -> Path:
    """The folder of shipped demo studies."""
    return _shipped("demo_lines")


def demo_studies() -> list[Path]:
    """Every shipped demo study, sorted by file name."""
    return sorted(demo_lines_dir().glob("*.toml"))
