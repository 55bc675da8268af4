r"""Series capacitor banks of a study: their states, the varistor state's operating point,
and the conditions for voltage and current inversion.

States (an extra axis of the reach study and the verification, like the parallel
circuit's):

- ``in_service``: every bank is :math:`-jX_C` (varistor not conducting). The worst case for
  zone 1 overreach: the most capacitive reactance in the measured loop.
- ``varistor``: every bank is Goldsworthy's equivalent impedance
  (:mod:`relayset.physics.series_capacitor`) at the current of a bolted three-phase fault
  just beyond it (the larger of either side), both sources in service at the strongest
  source case, found as the fixed point, by bisection (the bank's impedance sets the current,
  which sets the impedance). The same impedance in all three phases: a bounded
  representation, the conducting varistor's reactance lying between :math:`X_C` and 0 for
  any current, so its reach effect is bounded by the other two states; this state adds
  what they lack, the varistor's resistance.
- ``bypassed``: every bank shorted (its bypass breaker or gap closed). The worst case for
  zone 2 underreach: the line's full reactance.

Inversion (the conditions are those of the positive-sequence reactances of the network,
common practice, no source):

- voltage inversion at a relay: a fault just beyond a bank in its measured path with
  :math:`X_C` (of the banks between the VT and the fault) above the line reactance between
  them: the relay's voltage leads its current the wrong way (a bank at its own end with the
  VT on the bus side always has it);
- current inversion at a relay: :math:`X_C` above the source reactance behind the relay
  plus the line reactance to the fault: the fault current from that end leads the voltage
  (capacitive) and flows as if the fault were behind.
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from typing import Any

import numpy as np

from relayset.physics import network
from relayset.physics.series_capacitor import GOLDSWORTHY_RANGE, goldsworthy_impedance_pu

#: The capacitor states, each a state of every bank at once.
CAPACITOR_STATES: tuple[str, ...] = ("in_service", "varistor", "bypassed")
STATE_WORDS = {"in_service": "in service (varistor not conducting)",
               "varistor": "varistor conducting at the close-in fault current",
               "bypassed": "bypassed"}
#: What the phasor model of the banks leaves out (the reach study's and the verification's
#: notes; common practice, no source).
MODEL_LIMITS = (
    "The varistor state is one operating point, the same "
    "impedance in every phase, Goldsworthy's at the current of a bolted three-phase fault "
    "just beyond the bank (strongest sources); in an unbalanced fault only the faulted "
    "phases' varistors conduct, and a smaller fault current leaves a bank nearer its full "
    "reactance (the in-service state). The cases are fundamental-frequency phasors: the "
    "subsynchronous transient of the compensated line (the known cause of zone 1 transient "
    "overreach on such lines), the varistor's energy and the bypass's timing are not "
    "simulated; keep the margin of zone 1 for them or use a relay algorithm made for "
    "compensated lines.")
#: Fraction of the line "just beyond" a bank where its close-in faults are placed [1].
BEYOND = 1e-6
_MAX_ITER = 50


@dataclass(frozen=True)
class Bank:
    """One bank as the study uses it (SI)."""

    name: str
    at: float  #: place, fraction of the line from the first end [1]
    where: str  #: the place in words
    x_c_ohm: float
    compensation_pct: float  #: of the line's positive-sequence reactance
    i_protective_a: float  #: protective-level current (RMS)
    vt_line_side: bool
    i_close_in_a: float = 0.0  #: bank current at the varistor state's fixed point
    z_varistor_ohm: complex = 0j  #: Goldsworthy impedance at that current

    def impedance(self, state: str) -> complex:
        """Per-phase impedance of the bank in a state [ohm]."""
        return {"in_service": -1j * self.x_c_ohm, "varistor": self.z_varistor_ohm,
                "bypassed": 0j}[state]

    def to_dict(self) -> dict[str, Any]:
        """The bank as the results JSON writes it."""
        from relayset.results.serialize import cplx

        return {"name": self.name, "place": self.where, "at_fraction": self.at,
                "reactance_ohm": self.x_c_ohm, "compensation_pct": self.compensation_pct,
                "protective_level_current_a": self.i_protective_a,
                "vt_on_line_side": self.vt_line_side,
                "varistor_state": {"capacitor_current_a": self.i_close_in_a,
                                   "current_pu_of_protective_level":
                                       self.i_close_in_a / self.i_protective_a,
                                   "impedance_ohm": cplx(self.z_varistor_ohm)}}


@dataclass(frozen=True)
class Inversion:
    """One inversion condition found (or looked for) at a relay end."""

    end: str
    #: "voltage_inversion", "current_inversion" or "reverse_fault_seen_forward"
    kind: str
    exists: bool
    text: str

    def to_dict(self) -> dict[str, Any]:
        """The condition as the results JSON writes it."""
        return {"end": self.end, "kind": self.kind, "exists": self.exists, "text": self.text}


@dataclass(frozen=True)
class CapacitorBasis:
    """The banks, their states and what they mean for each relay end."""

    banks: tuple[Bank, ...]
    states: tuple[str, ...]
    x_line1_ohm: float
    #: per relay end: the line's Z1 and the Z1 seen to the remote bus with every bank in
    #: service [ohm] (the remote bus beyond any bank at that end)
    z1_line_ohm: complex
    z1_compensated_ohm: dict[str, complex]
    inversions: tuple[Inversion, ...]
    notes: tuple[str, ...]

    def elements(self, n: int, state: str) -> tuple[network.SeriesElement, ...]:
        """The banks as solver elements of a line of ``n`` conductors in a state (a bank of
        the same size in every circuit)."""
        if state == "bypassed":
            return ()
        return tuple(network.SeriesElement(b.at, np.eye(n) * b.impedance(state),
                                           b.vt_line_side) for b in self.banks)

    def to_dict(self) -> dict[str, Any]:
        """The banks, states, Z1 with and without them and the inversion checks (JSON)."""
        from relayset.results.serialize import cplx

        return {"banks": [b.to_dict() for b in self.banks],
                "states": {s: STATE_WORDS[s] for s in self.states},
                "line_x1_ohm": self.x_line1_ohm,
                "z1_line_ohm": cplx(self.z1_line_ohm),
                "z1_compensated_ohm": {e: cplx(z) for e, z in self.z1_compensated_ohm.items()},
                "inversion_checks": [i.to_dict() for i in self.inversions],
                "notes": list(self.notes)}


def x_c_in_path_ohm(caps: dict[str, Any] | None, end: str) -> float:
    """X_C of the banks in the measured path from ``end`` to the remote bus [ohm], from a
    basis as the results carry it (:meth:`CapacitorBasis.to_dict`); 0 without banks."""
    if not caps:
        return 0.0
    return max(0.0, float(caps["line_x1_ohm"]) - float(caps["z1_compensated_ohm"][end][1]))


def with_state(line: network.LineCascade, basis: CapacitorBasis | None,
               state: str) -> network.LineCascade:
    """The cascade with the banks in a state (the line itself without banks)."""
    if basis is None:
        return line
    return network.LineCascade(line.z_ohm_per_m, line.length_m, line.y_s_per_m,
                               basis.elements(line.n_conductors, state))


def _where(bank) -> str:
    if bank.at is not None:
        return f"at {bank.at} (relay VT on the {bank.vt_side} side)"
    return f"{bank.distance / 1e3:.6g} km from {bank.measured_from}"


def capacitor_basis(study, geo, params, line: network.LineCascade, src: dict,
                    source: str) -> CapacitorBasis | None:
    """The banks of a study with the varistor state's operating point and the inversion
    conditions; None when the study has no bank.

    Parameters
    ----------
    study, geo, params
        The validated study, its geometry and line parameters.
    line : LineCascade
        The actual plan's cascade without banks (at the study's resistivity).
    src : dict
        Source (or None) per end.
    """
    if not study.series_capacitors:
        return None
    ends = study.ends
    z1_line = complex(params.circuits[0].z1_ohm)
    x_l = z1_line.imag
    banks = []
    for k, b in enumerate(study.series_capacitors):
        x_c = b.reactance_ohm(x_l)
        banks.append(Bank(b.name or f"bank {k + 1}", b.place(ends, study.line.length),
                          _where(b), x_c, 100 * x_c / x_l,
                          b.protective_current_a, b.vt_side == "line"))
    banks = _varistor_fixed_point(banks, study, geo, line, src)
    basis = CapacitorBasis(tuple(banks), CAPACITOR_STATES, x_l, z1_line, {}, (), ())
    z_comp = {e: z1_line - 1j * sum(b.x_c_ohm for b in banks if _in_path(b, e == ends[0]))
              for e in ends}
    inv = _inversions(basis, study, src, x_l)
    notes = (
        "Series capacitor states: " + "; ".join(STATE_WORDS[s] for s in CAPACITOR_STATES)
        + ". The full capacitor is the worst case for zone 1 overreach, the bypassed bank "
        "for zone 2 underreach; the varistor state lies between them in reactance and adds "
        "the varistor's resistance.",
        "Varistor model: D. L. Goldsworthy, \"A linearized model for MOV-protected series "
        "capacitors,\" IEEE Trans. Power Systems, PWRS-2(4), 1987 (coefficients from memory, "
        "checked against a time-domain computation within 0.05 of X_C).",
        MODEL_LIMITS,
    )
    return replace(basis, z1_compensated_ohm=z_comp, inversions=inv, notes=notes)


def _in_path(bank: Bank, at_s: bool) -> bool:
    """Whether a bank lies between the relay's VT and the remote bus."""
    own = bank.at == (0.0 if at_s else 1.0)
    return not (own and bank.vt_line_side)


def _close_in_m(bank: Bank) -> list[tuple[float, str]]:
    """Fault places just beyond a bank (fraction from S) and the side the current comes
    from through the bank ("s": from S, "r": from R)."""
    if bank.at == 0.0:
        return [(BEYOND, "s")]
    if bank.at == 1.0:
        return [(1.0 - BEYOND, "r")]
    return [(min(bank.at + BEYOND, 1.0), "s"), (bank.at, "r")]


def _varistor_fixed_point(banks: list[Bank], study, geo, line, src) -> list[Bank]:
    """Each bank's current for a bolted three-phase fault just beyond it (both sides of a
    mid-line bank, the larger phase current), every bank at Goldsworthy's impedance of its
    own current: the fixed point, bank by bank (Gauss-Seidel over the banks, to 0.1 % of
    the protective-level current).

    For one bank with the others held, the current the bank lets through falls as its own
    current rises (the varistor takes reactance out and adds resistance), so the fixed
    point is found by bisection between the protective level and the fit's upper end
    rather than by iterating the map, which oscillates where the impedance falls steeply
    just above the level. A bank whose current with its full capacitor stays below the
    level does not conduct (its full capacitor, that current); one that lets more than the
    fit's upper end through is held at the fit's value there (the module's bounded
    representation); one with no fixed point above the level (the current it lets through
    just above the level is below it) is held at the level.
    """
    ends = study.ends
    cases = study.reach_study.source_cases
    scale = np.array([[min(c.scale_at(ends[0]) for c in cases),
                       min(c.scale_at(ends[1]) for c in cases)]])
    n = line.n_conductors
    places = [p for b in banks for p in _close_in_m(b)]

    def currents(z: list[complex]) -> list[float]:
        """The banks' currents [A] with the banks at impedances ``z`` [ohm]."""
        els = tuple(network.SeriesElement(b.at, np.eye(n) * zk, b.vt_line_side)
                    for b, zk in zip(banks, z, strict=True))
        ln = network.LineCascade(line.z_ohm_per_m, line.length_m, line.y_s_per_m, els)
        sw = network.solve_fault_sweep(
            ln, src[ends[0]], src[ends[1]], v_nominal_v=geo.v_nominal_v,
            fault_types=["ABC"], m=np.array([p for p, _ in places]), r_fault_ohm=[0.0],
            source_scale=scale, parallel_state="in_service",
            outputs=("i_f_from_s", "i_f_from_r"))
        out, j = [], 0
        for b in banks:
            i_b = 0.0
            for _p, side in _close_in_m(b):
                arr = sw.i_f_from_s if side == "s" else sw.i_f_from_r
                i_b = max(i_b, float(np.max(np.abs(arr[0, j, 0, 0, 0]))))
                j += 1
            out.append(i_b)
        return out

    def gold(i: float, b: Bank) -> complex:
        return complex(goldsworthy_impedance_pu(i / b.i_protective_a)) * b.x_c_ohm

    lo_pu, hi_pu = GOLDSWORTHY_RANGE
    z = [-1j * b.x_c_ohm for b in banks]
    cur = currents(z)
    at = list(cur)  # each bank's current: the fixed point, or the bound it is held at
    for _ in range(_MAX_ITER):
        before = list(at)
        for k, b in enumerate(banks):
            def through(i: float, k=k, b=b) -> list[float]:
                zz = list(z)
                zz[k] = gold(i, b)
                return currents(zz)

            z[k] = -1j * b.x_c_ohm
            full = currents(z)
            lo, hi = lo_pu * b.i_protective_a, hi_pu * b.i_protective_a
            if full[k] <= lo:  # the varistor does not conduct
                cur = full
                at[k] = full[k]
                continue
            lo_in = lo * (1 + 1e-9)
            if through(lo_in)[k] <= lo_in:
                i_star = lo_in  # no fixed point above the level: held at it
            elif through(hi)[k] >= hi:
                i_star = hi  # beyond the fit: its value at the upper end
            else:
                a_, c_ = lo_in, hi
                while c_ - a_ > 1e-4 * b.i_protective_a:
                    mid = 0.5 * (a_ + c_)
                    if through(mid)[k] > mid:
                        a_ = mid
                    else:
                        c_ = mid
                i_star = 0.5 * (a_ + c_)
            z[k] = gold(i_star, b)
            at[k] = i_star
            cur = currents(z)
        if all(abs(x - y) <= 1e-3 * b.i_protective_a
               for x, y, b in zip(at, before, banks, strict=True)):
            break
    return [replace(b, i_close_in_a=i, z_varistor_ohm=zk)
            for b, i, zk in zip(banks, at, z, strict=True)]


def _inversions(basis: CapacitorBasis, study, src, x_l: float) -> tuple[Inversion, ...]:
    """Voltage and current inversion per relay end, for a fault just beyond each bank
    (every bank in service)."""
    ends = study.ends
    out = []
    cases = study.reach_study.source_cases
    for e in study.relay_ends:
        at_s = e == ends[0]
        for b in basis.banks:
            if b.vt_line_side and b.at == (0.0 if at_s else 1.0):
                # The bank behind the relay's VT (its own bus, VT on the line side): a fault
                # on the bus behind the relay drives the current from the line through the
                # bank, so the VT sees V = jX_C I: a reverse fault measured forward.
                out.append(Inversion(e, "reverse_fault_seen_forward", True, (
                    f"{b.name}: at {e}'s own bus with the relay's VT on the line side: a "
                    f"fault on the bus behind the relay is measured at +j{b.x_c_ohm:.4g} Ω, "
                    "forward and inductive; zones reaching further than X_C operate for it "
                    "unless the directional element sees through the bank")))
            d = b.at if at_s else 1.0 - b.at  # relay to bank [fraction of the line]
            # banks from the relay's bus up to and including this one
            between = [c for c in basis.banks
                       if (c.at if at_s else 1.0 - c.at) <= d + 1e-12]
            x_path = sum(c.x_c_ohm for c in between if _in_path(c, at_s))
            x_line = d * x_l
            v_inv = x_path > x_line
            out.append(Inversion(e, "voltage_inversion", v_inv, (
                f"{b.name}: fault just beyond it seen from {e}: X_C in the measured path "
                f"{x_path:.4g} Ω {'>' if v_inv else '≤'} line reactance {x_line:.4g} Ω to it"
                + (": voltage inversion, the loop reactance is negative (directional and "
                   "zone 1 must not rely on the measured voltage)" if v_inv else
                   ": no voltage inversion"))))
            s = src.get(e)
            if s is None:
                continue
            k_min = min(c.scale_at(e) for c in cases)
            x_s = s.z1_ohm.imag * k_min
            x_c_all = sum(c.x_c_ohm for c in between)
            c_inv = x_c_all > x_s + x_line
            out.append(Inversion(e, "current_inversion", c_inv, (
                f"{b.name}: fault just beyond it fed from {e}: X_C {x_c_all:.4g} Ω "
                f"{'>' if c_inv else '≤'} source reactance {x_s:.4g} Ω (strongest source "
                f"case) + line reactance {x_line:.4g} Ω"
                + (": current inversion, the fault current from this end is capacitive "
                   "(directional elements see a reverse fault)" if c_inv else
                   ": no current inversion"))))
    return tuple(out)


def describe_state(state: str, short: bool = False) -> str:
    """A capacitor state in words (``short``: a few words)."""
    if short:
        return {"varistor": "varistor conducting"}.get(state, state.replace("_", " "))
    return STATE_WORDS.get(state, state)
