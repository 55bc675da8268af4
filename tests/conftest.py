"""Shared fixtures: paths to the demo lines and a helper to write variant study files."""

from __future__ import annotations

import tomllib
from pathlib import Path

import pytest

from relayset.resources import demo_lines_dir

DEMO = demo_lines_dir()


def _dump_toml(data: dict) -> str:
    """Minimal TOML writer for test variants (tables, arrays of tables, scalars, inline)."""

    def val(v):
        if isinstance(v, bool):
            return "true" if v else "false"
        if isinstance(v, str):
            return '"' + v.replace("\\", "\\\\").replace('"', '\\"') + '"'
        if isinstance(v, int | float):
            return repr(v)
        if isinstance(v, list | tuple):
            return "[" + ", ".join(val(x) for x in v) + "]"
        if isinstance(v, dict):
            return "{ " + ", ".join(f'"{k}" = {val(x)}' for k, x in v.items()) + " }"
        if hasattr(v, "isoformat"):
            return v.isoformat()
        raise TypeError(type(v))

    lines: list[str] = []

    def table(prefix: str, d: dict):
        scalars = {k: v for k, v in d.items()
                   if not isinstance(v, dict) and not (isinstance(v, list) and v
                                                       and all(isinstance(x, dict) for x in v))}
        if prefix:
            lines.append(f"[{prefix}]")
        for k, v in scalars.items():
            lines.append(f'"{k}" = {val(v)}')
        for k, v in d.items():
            name = f'{prefix}."{k}"' if prefix else f'"{k}"'
            if isinstance(v, dict):
                table(name, v)
            elif isinstance(v, list) and v and all(isinstance(x, dict) for x in v):
                for item in v:
                    lines.append(f"[[{name}]]")
                    for kk, vv in item.items():
                        lines.append(f'"{kk}" = {val(vv)}')

    table("", data)
    return "\n".join(lines) + "\n"


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
        edit(data)
        out = tmp_path / filename
        out.write_text(_dump_toml(data), "utf-8")
        return out

    return make
