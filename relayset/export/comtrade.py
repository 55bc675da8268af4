r"""COMTRADE test cases (IEEE Std C37.111-2013 [1]_): .cfg + binary .dat, secondary values.

One case per test shot (:mod:`relayset.export.testshots`, the test-set convention) and one
per governing case of the verification. A governing case carries the network's own
phasors at the relay for that case: the case is solved again on its own with the
verification's fault solver (:class:`relayset.studies.verification.replay.CaseSolver`:
same line, resistivity, sources, load flow, parallel-circuit or open-end state and line
behind or beyond), so its prefault load, healthy phases and current magnitudes are the
network's, and its governing loop measures the apparent impedance the verification
reported. Its phasors are referred to phase A's prefault voltage at the relay at 0° (a
common rotation: every loop impedance stays as it is).

Waveforms (secondary volts and amperes, analogue channels VA VB VC IA IB IC; where the
relay uses mutual compensation (double circuit) a seventh, ``IN parallel``, the parallel
circuit's residual current at the relay end, through the relay's own CT ratio: zero in a
test shot, the network's in a governing case):

- prefault :data:`PREFAULT_S` of the case's prefault phasors (a test shot: nominal voltage,
  no current; a governing case: the network with the case's load flow);
- fault inception at the rising zero crossing of phase A's prefault voltage (its phase angle
  α = −90° in the cosine reference :math:`x(t) = \mathrm{Re}(\sqrt2 X e^{j(\omega (t-t_0) +
  \alpha)})`): the largest DC offset of an A-G loop of impedance angle near 90°;
- the currents keep their instantaneous value at inception (an R-L circuit), so each carries
  the decaying DC offset

  .. math:: i(t) = i_{ss}(t) + \left(i_{pre}(t_0) - i_{ss}(t_0)\right) e^{-(t-t_0)/\tau},
            \qquad \tau = \frac{X_s}{\omega R_s}

  with :math:`X_s/R_s` of the source behind the relay (positive sequence; no offset where
  the study gives a source without resistance) [2]_ (the same for a governing case: its
  phasors are the network's steady fault state, the offset the formula's); voltages step to
  their fault phasors;
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
#: Analogue channels: name, phase (index into the phase labels, None: residual), unit.
_CHANNELS = (("VA", 0, "V"), ("VB", 1, "V"), ("VC", 2, "V"),
             ("IA", 0, "A"), ("IB", 1, "A"), ("IC", 2, "A"))
#: The parallel circuit's residual current, where the relay uses mutual compensation.
PARALLEL_CHANNEL = ("IN parallel", None, "A")


def channels(basis) -> tuple[tuple[str, int | None, str], ...]:
    """The analogue channels of an end's files (a seventh where it has mutual compensation)."""
    return _CHANNELS + ((PARALLEL_CHANNEL,) if basis.k0m is not None else ())


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
    #: the parallel circuit's residual current, prefault and fault [A secondary]
    in_parallel_pre: complex = 0j
    in_parallel: complex = 0j


def shot_cases(shots, basis) -> list[Case]:
    """The cases of the test shots (their ids and phasors)."""
    return [Case(s.shot_id, s.v_pre, np.zeros(3, complex), s.v, s.i, s.expected_delay_s,
                 "test shot", f"{s.zone} {s.loop} {s.ray} {s.side}: {s.expected}")
            for s in shots]


def _slug(text: str) -> str:
    return re.sub(r"[^A-Za-z0-9]+", "-", text).strip("-")[:40] or "x"


def governing_cases(results, settings, basis, solver=None) -> list[Case]:
    """A case per check of this end whose verification names a governing case, with the
    network's phasors at the relay (the case solved again, see the module notes).

    ``solver`` (:class:`~relayset.studies.verification.replay.CaseSolver`) is the study's,
    shared by its ends; formed here when not given.
    """
    if results.verification is None:
        return []
    try:
        ev = results.verification.end(settings.end)
    except KeyError:
        return []
    checks = [c for c in ev.checks if c.governing_case is not None]
    if not checks:
        return []
    if solver is None:
        solver = case_solver(results)
    out = []
    for c in checks:
        g = c.governing_case
        p = solver.phasors(settings.end, settings, g)
        # secondary, referred to phase A's prefault voltage at 0° (the files' inception
        # is at its rising zero; a common rotation leaves every loop impedance as it is)
        ref = np.exp(-1j * np.angle(p.v_pre[0]))
        vt, ct = basis.vt_ratio / ref, basis.ct_ratio / ref
        out.append(Case(f"{basis.stem}-case-{_slug(c.zone)}-{_slug(c.check_id)}",
                        p.v_pre / vt, p.i_pre / ct, p.v / vt, p.i / ct, None,
                        "governing case", f"{c.zone}.{c.check_id}: {g.loop} of "
                        f"{g.fault_type} at {g.location_pct:g} %", g.to_dict(),
                        complex(p.i_parallel_pre.sum()) / ct,
                        complex(p.i_parallel.sum()) / ct))
    return out


def case_solver(results):
    """The verification's case solver for a study's results."""
    from relayset.inputs.study_file import parse_study
    from relayset.studies.verification.replay import CaseSolver

    src = str(results.source_file)
    return CaseSolver(parse_study(results.input, source=src), src)


def tau_s(basis) -> float:
    """DC-offset time constant X/(ωR) of the source behind the relay [s]; 0 without R."""
    zs = basis.z_source_ohm
    if zs is None or not zs.real > 0:
        return 0.0
    return zs.imag / (2 * math.pi * basis.frequency_hz * zs.real)


def waveforms(pre: np.ndarray, flt: np.ndarray, t: np.ndarray, frequency_hz: float,
              tau: float, currents: slice = slice(3, None)) -> np.ndarray:
    """Sampled channels of N cases at once (module notes).

    Parameters
    ----------
    pre, flt : (N, C) complex arrays
        Prefault and fault phasors of each channel [V, A rms].
    t : (n,) array
        Sample times from inception [s] (negative before).
    frequency_hz : float
        System frequency [Hz].
    tau : float
        DC-offset time constant [s]; 0: none.
    currents : slice
        The current channels (they carry the DC offset).

    Returns
    -------
    (N, C, n) array
        The channels [V, A].
    """
    w = 2 * math.pi * frequency_hz
    rot = math.sqrt(2) * np.exp(1j * (w * t + INCEPTION_ANGLE_RAD))  # (n,)
    after = t >= 0
    x = np.where(after, (flt[:, :, None] * rot).real, (pre[:, :, None] * rot).real)
    if tau > 0:
        a0 = math.sqrt(2) * np.exp(1j * INCEPTION_ANGLE_RAD)
        jump = ((pre[:, currents] - flt[:, currents]) * a0).real  # i_pre(t0) - i_ss(t0)
        decay = np.where(after, np.exp(-np.maximum(t, 0) / tau), 0.0)
        x[:, currents, :] += jump[:, :, None] * decay
    return x


def _station(text: str) -> str:
    return re.sub(r"[^A-Za-z0-9 ._-]+", "_", text)[:64] or "relay"


def cfg_text(basis, a: np.ndarray, n: int, sample_rate_hz: float) -> str:
    """The .cfg of one case (IEEE Std C37.111-2013 clause 7), lines ending CR LF."""
    labels = [_station(p) for p in basis.phase_labels]
    chans = channels(basis)
    lines = [f"{_station(basis.end)},relayset,2013", f"{len(chans)},{len(chans)}A,0D"]
    for k, (name, ph, unit) in enumerate(chans):
        ratio = basis.vt_ratio if unit == "V" else basis.ct_ratio
        lines.append(f"{k + 1},{name},{'N' if ph is None else labels[ph]},,{unit},"
                     f"{a[k]:.9g},0,0,{-_FULL},{_FULL},{ratio:.9g},1,S")
    trigger = f"{PREFAULT_S:09.6f}"
    lines += [f"{basis.frequency_hz:g}", "1", f"{sample_rate_hz:g},{n}",
              "01/01/2000,00:00:00.000000", f"01/01/2000,00:00:{trigger}",
              "BINARY", "1", "0,0", "0,0"]
    return "\r\n".join(lines) + "\r\n"


def _phasor_rows(case: Case, n_chan: int) -> tuple[np.ndarray, np.ndarray]:
    """(prefault, fault) phasors of a case's channels."""
    pre = [*case.v_pre, *case.i_pre, case.in_parallel_pre][:n_chan]
    flt = [*case.v, *case.i, case.in_parallel][:n_chan]
    return np.array(pre, dtype=complex), np.array(flt, dtype=complex)


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
    n_chan = len(channels(basis))
    lengths = [max(duration_s, PREFAULT_S + c.delay_s + AFTER_DELAY_S)
               if c.delay_s is not None else duration_s for c in cases]
    counts = [round(d * sample_rate_hz) for d in lengths]
    out: dict[str, list[tuple[str, bytes]]] = {}
    for n in sorted(set(counts)):
        idx = [k for k, m in enumerate(counts) if m == n]
        t = np.arange(n) / sample_rate_hz - round(PREFAULT_S * sample_rate_hz) / sample_rate_hz
        rows = [_phasor_rows(cases[k], n_chan) for k in idx]
        pre, flt = np.stack([r[0] for r in rows]), np.stack([r[1] for r in rows])
        x = waveforms(pre, flt, t, basis.frequency_hz, tau)
        peak = np.abs(x).max(axis=2)
        a = np.where(peak > 0, peak, 1.0) / _FULL  # (N, C)
        q = np.rint(x / a[:, :, None]).astype("<i2")
        rec = np.empty((len(idx), n), dtype=[("n", "<u4"), ("t", "<u4"),
                                             ("x", "<i2", (n_chan,))])
        rec["n"] = np.arange(1, n + 1, dtype=np.uint32)
        rec["t"] = np.rint(np.arange(n) * 1e6 / sample_rate_hz).astype(np.uint32)
        rec["x"] = q.transpose(0, 2, 1)
        for j, k in enumerate(idx):
            cid = cases[k].case_id
            out[cid] = [(f"{cid}.cfg", cfg_text(basis, a[j], n, sample_rate_hz).encode()),
                        (f"{cid}.dat", rec[j].tobytes())]
    return [f for c in cases for f in out[c.case_id]]


def _phasors(c: Case, basis) -> dict:
    """A governing case's secondary phasors, [rms, angle deg] per phase label."""
    def polar(z: complex) -> list[float]:
        z = complex(z)
        return [abs(z), math.degrees(math.atan2(z.imag, z.real)) if z != 0 else 0.0]

    lab = basis.phase_labels
    out = {key: {lab[k]: polar(arr[k]) for k in range(3)}
           for key, arr in (("prefault_v", c.v_pre), ("prefault_i", c.i_pre), ("v", c.v),
                            ("i", c.i))}
    if basis.k0m is not None:
        out["in_parallel_prefault"] = polar(c.in_parallel_pre)
        out["in_parallel"] = polar(c.in_parallel)
    return out


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
        "channels": [name for name, _ph, _u in channels(basis)],
        "governing_cases_formed_from": "the network's phasors at the relay: each case solved "
                                       "again with the verification's fault solver (its "
                                       "line, sources, load flow and state), prefault and "
                                       "fault",
        "cases": [{"id": c.case_id, "kind": c.kind, "description": c.description,
                   **({} if c.source_case is None else {"verification_case": c.source_case,
                                                        "phasors_secondary": _phasors(c,
                                                                                      basis)})}
                  for c in cases],
    }
