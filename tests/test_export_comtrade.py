"""COMTRADE test cases (relayset.export.comtrade), read back by an independent reader.

Reader: the `comtrade` package from PyPI (IEEE Std C37.111 parser, not ours). The
fundamental phasors are recovered by a DFT over whole cycles at the end of the record,
where the DC offset (tau = X/(omega R) of the source, IEEE Std C37.113-2015) has decayed;
they must match the shots' phasors within 0.5 % (issue 20). The DC offset is checked by
the current's continuity at inception (R-L circuit) and the closed-form mean of the first
cycle after inception, integral of A exp(-t/tau) over one period T: A tau (1 - exp(-T/tau)).
"""

from __future__ import annotations

import math
import re
from fractions import Fraction

import numpy as np
import pytest
from numpy.testing import assert_allclose

from relayset import api
from relayset.export import comtrade as ours
from relayset.export import testshots
from relayset.resources import demo_lines_dir

comtrade = pytest.importorskip("comtrade")

DEMO = demo_lines_dir()
DEMOS = ("kessler_oxbow_115kv", "elsford_fallowby_230kv_double")  # 60 Hz mho, 50 Hz quad


@pytest.fixture(scope="module")
def exported(tmp_path_factory):
    out = {}
    for n in DEMOS:
        r = api.study_settings(DEMO / f"{n}.toml")
        folder = tmp_path_factory.mktemp(n)
        out[n] = (r, testshots.export_test_cases(r, folder))
    return out


def _whole_cycles(fs: float, f: float) -> int:
    """Samples in the fewest whole cycles holding a whole number of samples."""
    return Fraction(fs / f).limit_denominator(1000).numerator


def _phasors(rec, f: float, fs: float) -> np.ndarray:
    # DFT over whole cycles ending at the last sample, referred to the inception angle:
    # x(t) = Re(sqrt2 X exp(j(w t + alpha))), t from inception (the trigger).
    x = np.asarray(rec.analog, dtype=float)
    n = _whole_cycles(fs, f)
    t = np.asarray(rec.time, dtype=float)[-n:] - rec.trigger_time
    w = 2 * math.pi * f
    return math.sqrt(2) / n * (x[:, -n:] * np.exp(-1j * (w * t + ours.INCEPTION_ANGLE_RAD))
                               ).sum(axis=1)


@pytest.mark.parametrize("name", DEMOS)
def test_read_back_gives_the_phasors(exported, name):
    r, paths = exported[name]
    basis = testshots.end_bases(r)[0]
    shots = {s.shot_id: s for s in testshots.test_shots(r.settings[0], basis)}
    cases = {c.case_id: c for c in ours.shot_cases(list(shots.values()), basis)
             + ours.governing_cases(r, r.settings[0], basis)}
    cfgs = [p for p in paths if p.suffix == ".cfg"]
    # every governing case, and every 7th shot (the reader is slow in pure Python)
    chosen = [p for k, p in enumerate(cfgs) if "-case-" in p.stem or k % 7 == 0]
    assert sum("-case-" in p.stem for p in chosen) >= 3
    f = r.parameters.frequency_hz
    for cfg in chosen:
        rec = comtrade.load(str(cfg), str(cfg.with_suffix(".dat")))
        assert rec.rev_year == "2013" or int(rec.rev_year) == 2013
        n_chan = 7 if basis.k0m is not None else 6  # + the parallel residual (mutual)
        assert rec.analog_count == n_chan and rec.frequency == f
        fs = rec.cfg.sample_rates[0][0]
        assert fs == 4000.0
        assert rec.total_samples >= 2000  # 0.5 s at least
        c = cases[cfg.stem]
        want = np.concatenate([c.v, c.i, [c.in_parallel]])[:n_chan]
        got = _phasors(rec, f, fs)
        i_big = max(np.abs(c.i).max(), abs(c.in_parallel))
        scale = np.concatenate([np.full(3, np.abs(c.v).max()), np.full(4, i_big)])[:n_chan]
        # within 0.5 % of the channel's phasor (of the largest of its kind where it is 0)
        tol = 0.005 * np.where(np.abs(want) > 0, np.abs(want), scale)
        assert np.all(np.abs(got - want) <= tol), (cfg.stem, got, want)


def test_dc_offset_follows_the_source_time_constant(exported):
    # 50 Hz demo: 80 samples a cycle at 4 kHz, so one cycle is a whole number of samples.
    r, paths = exported["elsford_fallowby_230kv_double"]
    basis = testshots.end_bases(r)[0]
    zs = basis.z_source_ohm
    f = r.parameters.frequency_hz
    tau = zs.imag / (2 * math.pi * f * zs.real)  # IEEE Std C37.113-2015: X/(omega R)
    assert_allclose(ours.tau_s(basis), tau, rtol=1e-12, atol=0)
    cfg = next(p for p in paths if p.name.endswith("zone1-AG-line-in.cfg"))
    rec = comtrade.load(str(cfg), str(cfg.with_suffix(".dat")))
    shot = next(s for s in testshots.test_shots(r.settings[0], basis)
                if s.shot_id == cfg.stem)
    ia = np.asarray(rec.analog[3], dtype=float)
    k0 = round(rec.trigger_time * 4000)
    peak = math.sqrt(2) * abs(shot.i[0])
    assert abs(ia[k0]) <= 1e-3 * peak  # continuity: no prefault current, none at inception
    # mean over the first cycle after inception = A tau/T (1 - exp(-T/tau)), A the jump
    a = -(math.sqrt(2) * shot.i[0] * np.exp(1j * ours.INCEPTION_ANGLE_RAD)).real
    period = 1 / f
    mean = a * tau / period * (1 - math.exp(-period / tau))
    assert abs(mean) > 0.3 * peak  # a real offset: inception near the voltage zero
    assert_allclose(ia[k0:k0 + 80].mean(), mean, rtol=0.01, atol=0)


def test_prefault_is_nominal_and_inception_at_the_rising_zero(exported):
    r, paths = exported["elsford_fallowby_230kv_double"]
    basis = testshots.end_bases(r)[0]
    cfg = next(p for p in paths if p.name.endswith("zone2-BC-line-out.cfg"))
    rec = comtrade.load(str(cfg), str(cfg.with_suffix(".dat")))
    x = np.asarray(rec.analog, dtype=float)
    k0 = round(rec.trigger_time * 4000)
    # prefault: VA amplitude sqrt2 Vn, no current; the sample before inception is just below
    # zero and rising (cosine reference, alpha = -90 deg)
    assert_allclose(np.abs(x[0, :k0]).max(), math.sqrt(2) * basis.v_nom, rtol=1e-3, atol=0)
    assert np.all(x[3:, :k0] == 0)
    assert x[0, k0 - 1] < 0 <= x[0, k0 + 1]
    assert abs(x[0, k0]) <= 1e-3 * basis.v_nom


def test_case_ids_are_safe_and_unique(exported):
    for _, paths in exported.values():
        stems = [p.stem for p in paths if p.suffix == ".cfg"]
        assert len(stems) == len(set(stems))
        assert all(re.fullmatch(r"[A-Za-z0-9_-]+", s) for s in stems)
