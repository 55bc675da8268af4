"""`pytest` tests the working tree, not an installed copy (pyproject's pytest `pythonpath`
and tests/conftest.py for the commands started in subprocesses)."""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import relayset

ROOT = Path(__file__).resolve().parents[1]


def test_the_working_tree_is_imported():
    assert Path(relayset.__file__).resolve().is_relative_to(ROOT / "relayset")


def test_subprocesses_import_the_working_tree(tmp_path):
    out = subprocess.run([sys.executable, "-c", "import relayset; print(relayset.__file__)"],
                         capture_output=True, text=True, check=True, cwd=tmp_path)
    assert Path(out.stdout.strip()).resolve().is_relative_to(ROOT / "relayset")
