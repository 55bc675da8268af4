"""Shared fixtures: paths to the demo lines and a helper to write variant study files."""

from __future__ import annotations

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
