"""The reach study's sweep: identical arrangements solved once, absurd requests refused."""

from __future__ import annotations

import numpy as np
import pytest

from relayset.api import study_reach
from relayset.cli import main
from relayset.physics import network

DEMO_1C = "ashcombe_brenwick_132kv.toml"


def _one_section(data):
    data["line"].pop("sections", None)
    data["relay"]["end"] = "both"
    data.setdefault("reach_study", {})["shunt_capacitance"] = True


def _count_sweeps(monkeypatch) -> list[int]:
    calls = [0]
    real = network.solve_fault_sweep

    def counting(*args, **kwargs):
        calls[0] += 1
        return real(*args, **kwargs)

    monkeypatch.setattr(network, "solve_fault_sweep", counting)
    return calls


def test_one_section_line_reports_the_same_sweep_for_actual_and_untransposed(
        variant, monkeypatch):
    # Identity: a line of one section has no transposition, so its actual plan is the
    # untransposed line: solved once (2 sweeps, not 3) and reported with identical numbers.
    calls = _count_sweeps(monkeypatch)
    res = study_reach(variant(DEMO_1C, _one_section)).reach_study
    assert calls[0] == 2
    for end in res.ends:
        act, unt = end.arrangement("actual_plan"), end.arrangement("untransposed")
        assert act.to_dict()["loops"] == unt.to_dict()["loops"]
        np.testing.assert_array_equal(act.envelope_max_pct, unt.envelope_max_pct)
        ideal = end.arrangement("ideal_cycle")
        assert not np.array_equal(act.envelope_max_pct, ideal.envelope_max_pct)
        assert (act.solved_as, unt.solved_as, ideal.solved_as) == (None, "actual_plan", None)


def test_ideal_plan_is_reported_as_the_ideal_cycle(demo_path, monkeypatch):
    # The demo's plan is a full cycle of three equal sections (9 mi each of 27 mi), i.e.
    # the ideal cycle itself; one sweep serves both names.
    calls = _count_sweeps(monkeypatch)
    res = study_reach(demo_path("kessler_oxbow_115kv.toml")).reach_study
    assert calls[0] == 2
    end = res.ends[0]
    act, ideal = end.arrangement("actual_plan"), end.arrangement("ideal_cycle")
    np.testing.assert_array_equal(act.envelope_min_pct, ideal.envelope_min_pct)
    assert (act.solved_as, ideal.solved_as) == (None, "actual_plan")
    assert end.arrangement("untransposed").solved_as is None


@pytest.mark.parametrize("step", [0.005, 0.0001])
def test_tiny_location_step_is_refused_with_one_line(variant, capsys, step):
    # Rule (issue 9): a step below 0.01 % or more than 10 million cases is refused with a
    # one-line error naming the study field, exit code 2, no traceback.
    def edit(data):
        data.setdefault("reach_study", {})["location_step_pct"] = step

    path = variant(DEMO_1C, edit)
    assert main(["reach", str(path)]) == 2
    err = capsys.readouterr().err.strip()
    assert "reach_study.location_step_pct" in err
    assert len(err.splitlines()) == 1
    assert "Traceback" not in err


def test_too_many_cases_are_refused(variant, capsys):
    # 0.02 % step (allowed) with 30 fault resistances: 5001 locations x 10 types x 30
    # resistances x 3 sources x 2 loads x 3 arrangements = 27 million cases > 10 million.
    def edit(data):
        data.setdefault("reach_study", {})["location_step_pct"] = 0.02
        data["reach_study"]["fault_resistances"] = [f"{r} ohm" for r in range(0, 60, 2)]

    assert main(["reach", str(variant(DEMO_1C, edit))]) == 2
    err = capsys.readouterr().err.strip()
    assert "reach_study.location_step_pct" in err and "10,000,000" in err


def test_chunked_sweep_condenses_to_the_same_results(demo_path, monkeypatch):
    # Consistency: condensing the sweep in chunks of a few locations gives the worst cases
    # and envelopes of the sweep condensed at once (errors to 1e-9 relative; the location
    # of each worst case is the same unless two cases tie to rounding).
    import relayset.studies.reach as reach

    path = demo_path("elsford_fallowby_230kv_double.toml")
    whole = study_reach(path).reach_study
    monkeypatch.setattr(reach, "CHUNK_CASES", 1000)  # a few locations per chunk
    calls = _count_sweeps(monkeypatch)
    chunked = study_reach(path).reach_study
    assert calls[0] > 20  # many chunks per arrangement
    for e1, e2 in zip(whole.ends, chunked.ends, strict=True):
        for a1, a2 in zip(e1.arrangements, e2.arrangements, strict=True):
            np.testing.assert_allclose(a2.envelope_max_pct, a1.envelope_max_pct, rtol=1e-9,
                                       atol=1e-9)
            for l1, l2 in zip(a1.loops, a2.loops, strict=True):
                for w1, w2 in zip(l1.to_dict().values(), l2.to_dict().values(), strict=True):
                    if isinstance(w1, dict):
                        assert w2["error_pct"] == pytest.approx(w1["error_pct"], rel=1e-9,
                                                                abs=1e-9)


def test_too_many_cases_at_one_location_are_refused(variant, capsys):
    # Rule (memory bound): one location is the smallest chunk of the sweep, so the cases
    # at one location are limited to 200 000: 10 types x 100 resistances x 100 source
    # cases x 2 loads is the most; 1 more source case is refused naming the table.
    def edit(data):
        rs = data.setdefault("reach_study", {})
        rs["fault_resistances"] = [f"{r} ohm" for r in range(100)]
        rs["source_cases"] = [{"name": f"c{k}", "scale": 1.0} for k in range(101)]

    assert main(["reach", str(variant(DEMO_1C, edit))]) == 2
    err = capsys.readouterr().err.strip()
    assert "reach_study" in err and "202,000 fault cases at each location" in err


def _reference_extremes(v, i, ip, cond):
    """Each loop's extremes and envelopes over the whole sweep, found one loop at a time with
    numpy's own np.nanargmax / np.nanargmin / np.nanmax / np.nanmin on that loop's fault
    types (the plain way, the reference)."""
    import warnings

    from relayset.physics import measurement
    from relayset.studies.reach import LOOPS

    rb, rr = cond.rb, cond.rr
    comp = {"i_parallel": ip[:, :, rb] if cond.mutual else None, "k0m": cond.k0m_set or 0}
    zb = measurement.loop_impedances(v[:, :, rb], i[:, :, rb], cond.k0_set, **comp)
    j, jr = cond.i_reach, cond.i_remote
    zr = measurement.loop_impedances(v[:, j, rr], i[:, j, rr], cond.k0_set,
                                     i_parallel=ip[:, j, rr] if cond.mutual else None,
                                     k0m=cond.k0m_set or 0)
    out, env = {}, {}
    for lp in LOOPS:
        fs = np.array([f for f, ft in enumerate(cond.ftypes)
                       if lp in measurement.loops_for_fault(ft)], dtype=int)
        with np.errstate(all="ignore"):
            along, _ = measurement.reach_error_pct(zb[lp][fs], cond.m[None, :, None, None, None],
                                                   cond.z1_set)
            _, react = measurement.reach_error_pct(zr[lp][fs], cond.m[j], cond.z1_set)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)
            env[lp] = (np.nanmax(along, axis=(0, 2, 3, 4)) if fs.size else None,
                       np.nanmin(along, axis=(0, 2, 3, 4)) if fs.size else None)

        def on_line(ix, fs=fs):
            return (fs[ix[0]], ix[1], rb[ix[2]], ix[3], ix[4])

        def at_point(ix, fs=fs, k=j):
            return (fs[ix[0]], k, rb[ix[1]], ix[2], ix[3])

        def at_remote(ix, fs=fs):
            return (fs[ix[0]], jr, rb[ix[1]], ix[2], ix[3])

        def resistive(ix, fs=fs):
            return (fs[ix[0]], j, rr[ix[1]], ix[2], ix[3])

        picks = {"over_line": (along, True, on_line), "under_line": (along, False, on_line),
                 "over_at_reach": (along[:, j], True, at_point),
                 "under_at_reach": (along[:, j], False, at_point),
                 "over_at_remote_bus": (along[:, jr], True, at_remote),
                 "reactance_over_resistive": (react, True, resistive)}
        for pick, (a, largest, to_global) in picks.items():
            if fs.size == 0:
                out[(lp, pick)] = (False, None, None)
                continue
            try:
                k = int(np.nanargmax(a) if largest else np.nanargmin(a))
            except ValueError:  # all NaN
                out[(lp, pick)] = (bool(np.isfinite(a).any()), None, None)
                continue
            ix = np.unravel_index(k, a.shape)
            out[(lp, pick)] = (bool(np.isfinite(a).any()), float(a.flat[k]),
                               tuple(int(x) for x in to_global(ix)))
    return out, env


@pytest.mark.parametrize("seed", range(8))
def test_condensing_all_loops_at_once_equals_numpy_per_loop(seed):
    """The condenser takes the six loops' extremes and envelopes in one pass per chunk of
    locations, the fault types a loop is not meant for masked with NaN. Reference: numpy's
    np.nanargmax/np.nanargmin/np.nanmax/np.nanmin on each loop's own fault types over the
    whole sweep, one loop at a time. Random measurements with repeated values (ties: the
    first in C order must win, also across chunks), zero loop currents (inf/NaN errors),
    loops no fault type is meant for, relays at either end, with and without mutual
    compensation; the sweep condensed whole and in chunks of 3, 2 and 4 locations."""
    from types import SimpleNamespace

    from relayset.studies.reach import LOOPS, _Condenser

    rng = np.random.default_rng(seed)
    ftypes = [("AG", "BG", "CG", "AB", "BC", "CA", "ABG", "BCG", "CAG", "ABC"),
              ("AG", "CG", "ABG"), ("ABC", "AG")][seed % 3]
    n_f, n_m, n_rf, n_k, n_l = len(ftypes), 9, 3, 2, 2
    rf = np.array([0.0, 5.0, 10.0])
    m = np.linspace(0.0, 1.0, n_m)
    shape = (n_f, n_m, n_rf, n_k, n_l, 3)
    # coarse values so that many cases measure the same impedance
    v = (rng.integers(1, 4, shape) + 1j * rng.integers(0, 3, shape)) * 1e4
    i = (rng.integers(0, 3, shape) + 1j * rng.integers(-2, 2, shape)) * 1e2
    i[rng.random(shape) < 0.05] = 0.0  # loops that see no current
    ip = rng.normal(size=shape) * 10 + 0j
    at_s = seed % 4 < 2
    for chunks in ([(0, n_m)], [(0, 3), (3, 5), (5, n_m)], [(0, 4), (4, 8), (8, n_m)]):
        cond = _Condenser(at_s, seed % 2 == 1, 3 + 30j, 0.6 - 0.05j,
                          0.3 if seed % 2 else None, 75.0, ftypes, rf, m)
        with np.errstate(all="ignore"):
            for start, stop in chunks:
                part = {k: a[:, start:stop] for k, a in (("v", v), ("i", i), ("ip", ip))}
                sw = (SimpleNamespace(v_s=part["v"], i_s=part["i"], i_s_parallel=part["ip"])
                      if at_s else
                      SimpleNamespace(v_r=part["v"], i_r=part["i"], i_r_parallel=part["ip"]))
                cond.add(sw, start)
        ref, env = _reference_extremes(v, i, ip, cond)
        for (lp, pick), (has_finite, val, idx) in ref.items():
            got = cond.best[(lp, pick)]
            assert got[0] == has_finite, (lp, pick)
            if val is None:
                assert got[1] is None, (lp, pick)
                continue
            assert got[2] == idx, (lp, pick, got, idx, chunks)
            assert got[1] == val or (np.isnan(got[1]) and np.isnan(val)), (lp, pick)
        for n, lp in enumerate(LOOPS):
            want_max, want_min = env[lp]
            if want_max is None:
                assert np.isnan(cond.env_max[n]).all() and np.isnan(cond.env_min[n]).all()
                continue
            np.testing.assert_array_equal(cond.env_max[n], want_max)
            np.testing.assert_array_equal(cond.env_min[n], want_min)


def test_extremes_of_all_loops_equal_numpy_on_each_loops_own_types():
    """Crafted edge cases of the masked extreme: a loop whose values are only -inf and NaN
    (np.nanargmax counts NaN as -inf and answers the first element of the loop's own types,
    not a masked type before it), only +inf for the minimum, all NaN, ties. Reference:
    np.nanargmax / np.nanargmin on each loop's own fault types."""
    from relayset.studies.reach import _extremes

    nan, inf = np.nan, np.inf
    # (loop, fault type, case): loop 0 meant for types 1, 2; loop 1 for 0, 2; loop 2 for 2
    meant = np.array([[False, True, True], [True, False, True], [False, False, True]])
    rows = [
        [[nan, nan], [-inf, nan], [nan, -inf]],   # only -inf and NaN
        [[inf, nan], [nan, nan], [nan, inf]],     # only +inf and NaN
        [[nan, nan], [nan, nan], [nan, nan]],     # all NaN
        [[nan, nan], [2.0, 1.0], [2.0, nan]],     # a tie for the largest
        [[1.0, -inf], [nan, nan], [nan, -3.0]],
    ]
    for a0 in rows:
        for a1 in rows:
            a = np.array([a0, a1, rows[3]], dtype=float)
            a[~meant] = nan
            first = np.argmax(meant, axis=1) * a.shape[2]
            for largest in (True, False):
                has, val, idx = _extremes(a, first, largest)
                for lp in range(3):
                    own = np.flatnonzero(meant[lp])
                    sub = a[lp][own]
                    assert has[lp] == bool(np.isfinite(sub).any())
                    try:
                        k = int(np.nanargmax(sub) if largest else np.nanargmin(sub))
                    except ValueError:
                        assert idx[lp] == -1 and np.isnan(val[lp])
                        continue
                    f, c = np.unravel_index(k, sub.shape)
                    assert idx[lp] == own[f] * a.shape[2] + c, (a, lp, largest)
                    assert np.array_equal(val[lp], sub[f, c], equal_nan=True)


def test_a_chunk_of_only_nan_and_infinities_gives_way_to_a_later_number():
    """Across chunks: the first chunk of the AG loop holds only NaN and -inf, so np.nanargmax
    answers its first element, a NaN; the second chunk holds 3 and 2. Condensed whole,
    np.nanargmax over [NaN, -inf, 3, 2] answers 3 (the reference); the chunks must too."""
    from relayset.studies.reach import LOOPS, _Condenser

    m = np.linspace(0.0, 1.0, 4)
    cond = _Condenser(True, False, 3 + 30j, 0.6, None, 80.0, ("AG",), np.array([0.0]), m)
    whole = np.full((len(LOOPS), 1, 4), np.nan)
    whole[0, 0] = [np.nan, -np.inf, 3.0, 2.0]
    want = int(np.nanargmax(whole[0, 0]))
    for start, stop in ((0, 2), (2, 4)):
        cond._offer("over_line", whole[:, :, start:stop], True,
                    lambda ix, start=start: (int(ix[0]), start + int(ix[1])))
    assert cond.best[("AG", "over_line")][1:] == [3.0, (0, want)]
