"""Shared fixtures: paths to the demo lines and a helper to write variant study files."""

from __future__ import annotations

import os
import tomllib
from pathlib import Path

import pytest

from relayset.resources import demo_lines_dir

from tomlwrite import dump_toml

DEMO = demo_lines_dir()


@pytest.fixture
def demo_path():
    def get(name: str) -> Path:
        return DEMO / name

    return get


@pytest.fixture
def variant(tmp_path):
    """Write a modified copy of a demo study: variant(name, edit) -> path."""

    def make(name: str, edit, filename: str = "variant.toml") -> Path:
        data = tomllib.loads((DEMO / name).read_text("utf-8"))
        phil = data["study"].get("philosophy", "default")
        if phil != "default":  # keep the demo's relative philosophy path valid from tmp_path
            data["study"]["philosophy"] = str(DEMO / phil)
        edit(data)
        out = tmp_path / filename
        out.write_text(dump_toml(data), "utf-8")
        return out

    return make


# The working tree is what is tested (pyproject's pytest `pythonpath`), in the commands the
# tests start in subprocesses as well, even where another copy of relayset is installed.
_ROOT = str(Path(__file__).resolve().parents[1])
os.environ["PYTHONPATH"] = os.pathsep.join(
    [_ROOT, *[p for p in os.environ.get("PYTHONPATH", "").split(os.pathsep) if p]])
