"""Governing cases of a series-compensated line and of a shared corridor are solved again
with their own state: the banks in the case's capacitor state, the neighbouring line in its
state, faults on the neighbour on circuit 2.

Identity (no outside source): :meth:`CaseSolver.phasors` solves each governing case of the
verification as a batch of one and refuses (``CaseNotReproducedError``) unless its governing
loop measures the verification's apparent impedance within ``replay.Z_RTOL`` (1e-6
relative, floating-point rounding only); the test checks that bound itself as well.
"""

from __future__ import annotations

import numpy as np
import pytest

from relayset import api
from relayset.export import comtrade
from relayset.resources import demo_lines_dir


def _governing(r):
    return [(e.end, c.governing_case) for e in r.verification.ends for c in e.checks
            if c.governing_case is not None]


@pytest.mark.parametrize(("demo", "what"), [
    ("tarrow_hithe_400kv_series_comp.toml", "capacitor_state"),
    ("ashcombe_brenwick_132kv_corridor.toml", "parallel_state"),
])
def test_governing_cases_keep_their_state(demo, what):
    r = api.study_settings(demo_lines_dir() / demo)
    solver = comtrade.case_solver(r)
    cases = _governing(r)
    states = {getattr(g, what) for _e, g in cases}
    assert len(states) >= 2  # the demos' governing cases are in more than one state
    for end, g in cases:
        st = next(s for s in r.settings if s.end == end)
        p = solver.phasors(end, st, g)
        z = complex(g.z_apparent_primary_ohm)
        np.testing.assert_allclose(p.z_loop_ohm, z, rtol=1e-6, atol=0)


def test_a_case_not_reproduced_is_one_line_and_writes_nothing(monkeypatch, tmp_path, capsys):
    # A fault of the program (a governing case that cannot be solved again) is reported in
    # one line, exit 1, with nothing written (export forms every file before writing any).
    from relayset import cli
    from relayset.studies.verification import replay

    def refuse(self, end, st, case):
        raise replay.CaseNotReproducedError("protected line, AG at 0 %: test")

    monkeypatch.setattr(replay.CaseSolver, "phasors", refuse)
    out = tmp_path / "out"
    rc = cli.main(["export", str(demo_lines_dir() / "kessler_oxbow_115kv.toml"),
                   "-o", str(out)])
    err = capsys.readouterr().err
    assert rc == 1
    assert err.count("\n") == 1 and "internal error" in err and "Traceback" not in err
    assert not out.exists() or not any(out.rglob("*"))
