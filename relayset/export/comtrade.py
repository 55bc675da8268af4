r"""COMTRADE test cases (IEEE Std C37.111-2013 [1]_): .cfg + binary .dat, secondary values.

One case per test shot (:mod:`relayset.export.testshots`) and one per governing case of the
verification. A governing case is formed from the apparent impedance its governing loop
measured (``VerificationCase.z_apparent_primary_ohm``), under the test shots' test-set
convention: the case is not re-solved, so its healthy-phase quantities and prefault load are
the convention's, not the simulated network's; the loop impedance the relay sees is the
simulated one.

Waveforms (secondary volts and amperes, six analogue channels VA VB VC IA IB IC):

- prefault :data:`PREFAULT_S` of the shot's prefault phasors (nominal voltage, no current);
- fault inception at the rising zero crossing of phase A's prefault voltage (its phase angle
  α = −90° in the cosine reference :math:`x(t) = \mathrm{Re}(\sqrt2 X e^{j(\omega (t-t_0) +
  \alpha)})`): the largest DC offset of an A-G loop of impedance angle near 90°;
- the currents keep their instantaneous value at inception (an R-L circuit), so each carries
  the decaying DC offset

  .. math:: i(t) = i_{ss}(t) + \left(i_{pre}(t_0) - i_{ss}(t_0)\right) e^{-(t-t_0)/\tau},
            \qquad \tau = \frac{X_s}{\omega R_s}

  with :math:`X_s/R_s` of the source behind the relay (positive sequence; no offset where
  the study gives a source without resistance) [2]_; voltages step to their fault phasors;
- sampling rate 4 kHz and length 0.5 s by default, longer where the expected delay needs it
  (prefault + delay + 0.1 s), so a test set playing the file sees the zone operate.

Data file: BINARY (16-bit two's-complement samples, per-channel factor a, offset b = 0,
sample number and timestamp in µs as 32-bit unsigned), the files carry no real time (first
sample 01/01/2000 00:00:00, trigger at inception).

References
----------
.. [1] IEEE Std C37.111-2013, *IEEE/IEC Measuring relays and protection equipment - Part 24:
   Common format for transient data exchange (COMTRADE) for power systems*.
.. [2] IEEE Std C37.113-2015, *IEEE Guide for Protective Relay Applications to Transmission
   Lines* (DC offset of fault current, time constant X/(ωR)).
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass

import numpy as np

#: Prefault length before inception [s].
PREFAULT_S = 0.1
#: Phase A's prefault voltage angle at inception (cosine reference) [rad]: rising zero.
INCEPTION_ANGLE_RAD = -math.pi / 2
#: Time a file runs on after the expected delay [s].
AFTER_DELAY_S = 0.1
_FULL = 32767
_CHANNELS = (("VA", 0, "V"), ("VB", 1, "V"), ("VC", 2, "V"),
             ("IA", 0, "A"), ("IB", 1, "A"), ("IC", 2, "A"))


@dataclass(frozen=True)
class Case:
    """One COMTRADE case: its id (safe file stem), phasors [V, A secondary], what it is."""

    case_id: str
    v_pre: np.ndarray
    i_pre: np.ndarray
    v: np.ndarray
    i: np.ndarray
    delay_s: float | None  #: expected operating delay, None: no operation expected
    kind: str  #: "test shot" or "governing case"
    description: str
    #: the verification case it stands for (``VerificationCase.to_dict()``), governing cases
    source_case: dict | None = None


def shot_cases(shots, basis) -> list[Case]:
    """The cases of the test shots (their ids and phasors)."""
    return [Case(s.shot_id, s.v_pre, np.zeros(3, complex), s.v, s.i, s.expected_delay_s,
                 "test shot", f"{s.zone} {s.loop} {s.ray} {s.side}: {s.expected}")
            for s in shots]


def _slug(text: str) -> str:
    return re.sub(r"[^A-Za-z0-9]+", "-", text).strip("-")[:40] or "x"


def governing_cases(results, settings, basis) -> list[Case]:
    """A case per check of this end whose verification names a governing case.

    Formed from the governing loop's apparent impedance (not re-solved: module notes).
    """
    from relayset.export.testshots import _label, loop_phasors
    from relayset.physics.measurement import LOOPS

    if results.verification is None:
        return []
    try:
        ev = results.verification.end(settings.end)
    except KeyError:
        return []
    out = []
    for c in ev.checks:
        g = c.governing_case
        if g is None:
            continue
        loop = next((lp for lp in LOOPS if _label(lp, basis.phase_labels) == g.loop), None)
        z = complex(g.z_apparent_primary_ohm)
        if loop is None or not (math.isfinite(z.real) and math.isfinite(z.imag)):
            continue
        v_pre, v, i = loop_phasors(loop, z * basis.secondary_factor, basis.k0, basis.v_nom,
                                   basis.i_test)
        out.append(Case(f"{basis.stem}-case-{_slug(c.zone)}-{_slug(c.check_id)}", v_pre,
                        np.zeros(3, complex), v, i, None, "governing case",
                        f"{c.zone}.{c.check_id}: {g.loop} of {g.fault_type} at "
                        f"{g.location_pct:g} %", g.to_dict()))
    return out


def tau_s(basis) -> float:
    """DC-offset time constant X/(ωR) of the source behind the relay [s]; 0 without R."""
    zs = basis.z_source_ohm
    if zs is None or not zs.real > 0:
        return 0.0
    return zs.imag / (2 * math.pi * basis.frequency_hz * zs.real)


def waveforms(v_pre: np.ndarray, i_pre: np.ndarray, v: np.ndarray, i: np.ndarray,
              t: np.ndarray, frequency_hz: float, tau: float) -> np.ndarray:
    """Sampled channels of N cases at once (module notes).

    Parameters
    ----------
    v_pre, i_pre, v, i : (N, 3) complex arrays
        Prefault and fault phasors [V, A rms].
    t : (n,) array
        Sample times from inception [s] (negative before).
    frequency_hz : float
        System frequency [Hz].
    tau : float
        DC-offset time constant [s]; 0: none.

    Returns
    -------
    (N, 6, n) array
        VA VB VC IA IB IC [V, A].
    """
    w = 2 * math.pi * frequency_hz
    rot = math.sqrt(2) * np.exp(1j * (w * t + INCEPTION_ANGLE_RAD))  # (n,)
    after = t >= 0
    pre = np.concatenate([v_pre, i_pre], axis=1)[:, :, None]
    flt = np.concatenate([v, i], axis=1)[:, :, None]
    x = np.where(after, (flt * rot).real, (pre * rot).real)
    if tau > 0:
        a0 = math.sqrt(2) * np.exp(1j * INCEPTION_ANGLE_RAD)
        jump = ((i_pre - i) * a0).real  # i_pre(t0) - i_ss(t0)
        decay = np.where(after, np.exp(-np.maximum(t, 0) / tau), 0.0)
        x[:, 3:, :] += jump[:, :, None] * decay
    return x


def _station(text: str) -> str:
    return re.sub(r"[^A-Za-z0-9 ._-]+", "_", text)[:64] or "relay"


def cfg_text(basis, a: np.ndarray, n: int, sample_rate_hz: float) -> str:
    """The .cfg of one case (IEEE Std C37.111-2013 clause 7), lines ending CR LF."""
    labels = [_station(p) for p in basis.phase_labels]
    lines = [f"{_station(basis.end)},relayset,2013", "6,6A,0D"]
    for k, (name, ph, unit) in enumerate(_CHANNELS):
        ratio = basis.vt_ratio if unit == "V" else basis.ct_ratio
        lines.append(f"{k + 1},{name},{labels[ph]},,{unit},{a[k]:.9g},0,0,{-_FULL},{_FULL},"
                     f"{ratio:.9g},1,S")
    trigger = f"{PREFAULT_S:09.6f}"
    lines += [f"{basis.frequency_hz:g}", "1", f"{sample_rate_hz:g},{n}",
              "01/01/2000,00:00:00.000000", f"01/01/2000,00:00:{trigger}",
              "BINARY", "1", "0,0", "0,0"]
    return "\r\n".join(lines) + "\r\n"


def render(cases: list[Case], basis, *, sample_rate_hz: float = 4000.0,
           duration_s: float = 0.5) -> list[tuple[str, bytes]]:
    """(file name, bytes) of every case's .cfg and .dat, numpy-vectorised by record length.

    Parameters
    ----------
    cases : list of Case
    basis : EndBasis
        The end's ratios, frequency and source.
    sample_rate_hz : float
        Sampling rate [Hz].
    duration_s : float
        Shortest record [s].
    """
    tau = tau_s(basis)
    lengths = [max(duration_s, PREFAULT_S + c.delay_s + AFTER_DELAY_S)
               if c.delay_s is not None else duration_s for c in cases]
    counts = [round(d * sample_rate_hz) for d in lengths]
    out: dict[str, list[tuple[str, bytes]]] = {}
    for n in sorted(set(counts)):
        idx = [k for k, m in enumerate(counts) if m == n]
        t = np.arange(n) / sample_rate_hz - round(PREFAULT_S * sample_rate_hz) / sample_rate_hz
        stack = [np.stack([getattr(cases[k], f) for k in idx]) for f in ("v_pre", "i_pre",
                                                                        "v", "i")]
        x = waveforms(*stack, t, basis.frequency_hz, tau)
        peak = np.abs(x).max(axis=2)
        a = np.where(peak > 0, peak, 1.0) / _FULL  # (N, 6)
        q = np.rint(x / a[:, :, None]).astype("<i2")
        rec = np.empty((len(idx), n), dtype=[("n", "<u4"), ("t", "<u4"), ("x", "<i2", (6,))])
        rec["n"] = np.arange(1, n + 1, dtype=np.uint32)
        rec["t"] = np.rint(np.arange(n) * 1e6 / sample_rate_hz).astype(np.uint32)
        rec["x"] = q.transpose(0, 2, 1)
        for j, k in enumerate(idx):
            cid = cases[k].case_id
            out[cid] = [(f"{cid}.cfg", cfg_text(basis, a[j], n, sample_rate_hz).encode()),
                        (f"{cid}.dat", rec[j].tobytes())]
    return [f for c in cases for f in out[c.case_id]]


def manifest(cases: list[Case], basis, *, sample_rate_hz: float, duration_s: float) -> dict:
    """What the COMTRADE folder of one end holds, for the test-point JSON."""
    return {
        "standard": "IEEE Std C37.111-2013, BINARY data file",
        "folder": f"comtrade/{basis.stem}",
        "sample_rate_hz": sample_rate_hz,
        "duration_s": duration_s,
        "prefault_s": PREFAULT_S,
        "inception": "rising zero crossing of phase A prefault voltage",
        "dc_offset_tau_s": tau_s(basis),
        "governing_cases_formed_from": "the governing loop's apparent impedance under the "
                                       "test-set convention (not re-solved)",
        "cases": [{"id": c.case_id, "kind": c.kind, "description": c.description,
                   **({} if c.source_case is None else {"verification_case": c.source_case})}
                  for c in cases],
    }
