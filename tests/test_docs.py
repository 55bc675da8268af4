"""The documentation cannot rot: the example in docs/ runs in the suite, and the API
reference is generated from the docstrings (pdoc) with every public name documented."""

from __future__ import annotations

import importlib.util
import inspect
import runpy
from pathlib import Path

import pytest

import relayset

DOCS = Path(__file__).resolve().parents[1] / "docs"


def test_example_tour_runs(capsys):
    ns = runpy.run_path(str(DOCS / "examples" / "python_api_tour.py"), run_name="__main__")
    out = capsys.readouterr().out
    assert "must be at least 0.1 ohm*m" in out  # the refused value, as the CLI says it
    sweep = ns["sweep"]
    assert len(sweep) == 9 and sweep["k0_magnitude"].is_monotonic_increasing
    plans = ns["plans_table"]["worst_overreach_at_remote_bus_pct"]
    # Identity: an ideally transposed line is exactly the Z1/k0 model, so a bolted fault
    # measures without reach error (the reach study's ideal-cycle identity, DEVELOPERS.md).
    assert abs(plans["ideal cycle (3 x 80/3 km)"]) < 1e-6
    # The untransposed line strays most (common practice, no source).
    assert plans.idxmax() == "untransposed"
    reg = ns["register"]
    n_demos = len(list((DOCS.parent / "demo_lines").glob("*.toml")))  # one line per demo
    assert reg["line_id"].nunique() == n_demos and reg["error"].isna().all()
    from relayset.results.verification import VERDICTS

    assert set(reg["verification"]) <= set(VERDICTS)


def _build_reference():
    spec = importlib.util.spec_from_file_location("make_reference",
                                                  DOCS / "make_reference.py")
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    return mod


def test_reference_is_generated(tmp_path):
    index = _build_reference().build(tmp_path / "ref")
    assert index.is_file()
    api = (tmp_path / "ref" / "relayset" / "api.html").read_text("utf-8")
    for anchor in ("Study.from_file", "Study.from_toml", "Study.from_dict", "Study.replace",
                   "StudyError", "study_settings"):
        assert f'id="{anchor}"' in api, anchor
    results = (tmp_path / "ref" / "relayset" / "results.html").read_text("utf-8")
    assert 'id="StudyResults.frames"' in results and 'id="SettingsResult.to_frame"' in results


def _public(obj):
    for name, member in vars(obj).items():
        if not name.startswith("_") and (inspect.isfunction(member)
                                         or isinstance(member, classmethod | property)):
            yield name, member


@pytest.mark.parametrize("name", relayset.__all__)
def test_every_public_name_is_documented(name):
    obj = getattr(relayset, name)
    assert (inspect.getdoc(obj) or "").strip(), name
    if inspect.isclass(obj):
        for attr, member in _public(obj):
            doc = inspect.getdoc(member.__func__ if isinstance(member, classmethod)
                                 else member)
            assert (doc or "").strip(), f"{name}.{attr}"
