r"""Series capacitor banks of a study: their states, the varistor state's operating point,
and the conditions for voltage and current inversion.

States (an extra axis of the reach study and the verification, like the parallel
circuit's):

- ``in_service``: every bank is :math:`-jX_C` (varistor not conducting). The worst case for
  zone 1 overreach: the most capacitive reactance in the measured loop.
- ``varistor``: every phase of every bank at Goldsworthy's equivalent impedance
  (:mod:`relayset.physics.series_capacitor`) at its own phase current, per fault type: the
  operating point of a bolted fault of that type just beyond the bank (the side letting
  the larger phase current through), both sources in service at the strongest source case,
  found phase by phase (:func:`~relayset.physics.series_capacitor.per_phase_operating_point`:
  the bank's three phase currents through the network solve, to
  :data:`TOL_PU` of the protective-level current). In a single-phase fault the healthy
  phases carry little current and stay at :math:`-jX_C`; a balanced fault gives the same
  impedance in every phase. Every fault of a type in the reach study and the verification
  sees that type's per-phase impedances: a bounded representation (a fault farther away
  or through resistance lets less current through, leaving the bank nearer its full
  reactance, the in-service state), the conducting varistor's reactance lying between
  :math:`X_C` and 0 for any current.
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

from dataclasses import dataclass, field, replace
from typing import Any

import numpy as np

from relayset.errors import InputError
from relayset.physics import network
from relayset.physics.series_capacitor import PORT_STATES, per_phase_operating_point

#: The capacitor states, each a state of every bank at once.
CAPACITOR_STATES: tuple[str, ...] = ("in_service", "varistor", "bypassed")
STATE_WORDS = {"in_service": "in service (varistor not conducting)",
               "varistor": "varistor conducting phase by phase at the close-in fault "
                           "current of each fault type",
               "bypassed": "bypassed"}
#: What the phasor model of the banks leaves out (the reach study's and the verification's
#: notes; common practice, no source).
MODEL_LIMITS = (
    "The varistor state is one operating point per fault type, each phase of a bank at "
    "Goldsworthy's impedance of its own current in a bolted fault of that type just beyond "
    "the bank (strongest sources): in an unbalanced fault only the faulted phases' "
    "varistors conduct, the healthy phases keep their full reactance; a smaller fault "
    "current leaves a bank nearer its full reactance (the in-service state). On a double-"
    "circuit line the other circuit's bank takes the faulted circuit's phase impedances. "
    "The cases are fundamental-frequency phasors: the "
    "subsynchronous transient of the compensated line (the known cause of zone 1 transient "
    "overreach on such lines), the varistor's energy and the bypass's timing are not "
    "simulated; keep the margin of zone 1 for them or use a relay algorithm made for "
    "compensated lines.")
#: Fraction of the line "just beyond" a bank where its close-in faults are placed [1].
BEYOND = 1e-6
_MAX_ITER = 50
#: Convergence tolerance of the varistor state's operating point, per unit of the
#: protective-level current [1] (every phase current of every bank).
TOL_PU = 1e-6


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
    #: per fault type: the varistor state's impedance of phases A, B, C [ohm] ...
    varistor_z_ohm: dict[str, tuple[complex, complex, complex]] = field(default_factory=dict)
    #: ... the phase currents at that operating point [A] ...
    varistor_i_a: dict[str, tuple[float, float, float]] = field(default_factory=dict)
    #: ... and what each phase's varistor does there (PORT_STATES)
    varistor_status: dict[str, tuple[str, str, str]] = field(default_factory=dict)

    @property
    def i_close_in_a(self) -> float:
        """The largest phase current at the three-phase fault's operating point [A]."""
        return max(self.varistor_i_a.get("ABC", (0.0,)))

    @property
    def z_varistor_ohm(self) -> complex:
        """The impedance of that phase [ohm] (every phase's, a balanced line)."""
        i = self.varistor_i_a.get("ABC")
        if not i:
            return -1j * self.x_c_ohm
        return self.varistor_z_ohm["ABC"][int(np.argmax(i))]

    def phase_impedances(self, state: str, fault_type: str = "ABC") -> np.ndarray:
        """Impedance of phases A, B, C in a state [ohm]; the varistor state's for faults
        of ``fault_type``."""
        if state == "varistor":
            return np.array(self.varistor_z_ohm[fault_type], dtype=complex)
        return np.full(3, {"in_service": -1j * self.x_c_ohm, "bypassed": 0j}[state])

    def to_dict(self, labels: tuple[str, str, str] = ("A", "B", "C")) -> dict[str, Any]:
        """The bank as the results JSON writes it: each fault type under its name in the
        study's phase ``labels`` (e.g. "L1-G"), its phases in the order of the labels."""
        from relayset.results.reach import fault_label
        from relayset.results.serialize import cplx

        per_type = {fault_label(ft, labels): {
            "phase_current_a": list(self.varistor_i_a[ft]),
            "phase_impedance_ohm": [cplx(z) for z in zs],
            "phase_varistor": list(self.varistor_status[ft])}
            for ft, zs in self.varistor_z_ohm.items()}
        return {"name": self.name, "place": self.where, "at_fraction": self.at,
                "reactance_ohm": self.x_c_ohm, "compensation_pct": self.compensation_pct,
                "protective_level_current_a": self.i_protective_a,
                "vt_on_line_side": self.vt_line_side,
                "varistor_state": {"capacitor_current_a": self.i_close_in_a,
                                   "current_pu_of_protective_level":
                                       self.i_close_in_a / self.i_protective_a,
                                   "impedance_ohm": cplx(self.z_varistor_ohm),
                                   "per_fault_type": per_type}}


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
    #: the refusal of the varistor state (its operating point did not converge), raised
    #: where that state is solved, after the study's own checks of the banks
    varistor_error: InputError | None = None
    #: the protected circuit's phase labels (how the JSON names fault types)
    phase_labels: tuple[str, str, str] = ("A", "B", "C")

    def elements(self, n: int, state: str, fault_type: str = "ABC"
                 ) -> tuple[network.SeriesElement, ...]:
        """The banks as solver elements of a line of ``n`` conductors in a state (a bank of
        the same size in every circuit); the varistor state's of ``fault_type`` (see
        :func:`solve_sweep`)."""
        if state == "bypassed":
            return ()
        if state == "varistor" and self.varistor_error is not None:
            raise self.varistor_error
        return tuple(network.SeriesElement(b.at, _phase_matrix(b.phase_impedances(
            state, fault_type), n), b.vt_line_side) for b in self.banks)

    def to_dict(self) -> dict[str, Any]:
        """The banks, states, Z1 with and without them and the inversion checks (JSON)."""
        from relayset.results.serialize import cplx

        return {"banks": [b.to_dict(self.phase_labels) for b in self.banks],
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


def _phase_matrix(z3: np.ndarray, n: int) -> np.ndarray:
    """(n, n) diagonal element matrix of per-phase impedances ``z3`` [ohm]; a second
    circuit's bank (n = 6) takes the same phase impedances."""
    return np.diag(np.tile(np.asarray(z3, dtype=complex), n // 3))


def with_state(line: network.LineCascade, basis: CapacitorBasis | None,
               state: str) -> network.LineCascade:
    """The cascade with the banks in a state (the line itself without banks); the
    varistor state's elements are the three-phase fault's (the load flow's network):
    solve faults with :func:`solve_sweep`, which puts each fault type's in."""
    if basis is None:
        return line
    return network.LineCascade(line.z_ohm_per_m, line.length_m, line.y_s_per_m,
                               basis.elements(line.n_conductors, state))


def solve_sweep(basis: CapacitorBasis | None, state: str, line: network.LineCascade,
                source_s, source_r, *, fault_types, **kw) -> network.FaultSweep:
    """:func:`~relayset.physics.network.solve_fault_sweep` of ``line`` (a cascade from
    :func:`with_state`, or its circuits swapped) with the banks in ``state``: in the
    varistor state each fault type is solved with its own per-phase bank impedances and
    the results are joined along the fault-type axis; the prefault quantities are those of
    ``line`` itself (the three-phase fault's elements: the load flow's network), for every
    fault type alike (other states: one solve)."""
    fault_types = tuple(fault_types)
    if basis is None or state != "varistor" or not line.elements:
        return network.solve_fault_sweep(line, source_s, source_r, fault_types=fault_types,
                                         **kw)
    parts = []
    for ft in fault_types:
        els = basis.elements(line.n_conductors, "varistor", ft)
        ln = network.LineCascade(line.z_ohm_per_m, line.length_m, line.y_s_per_m, tuple(
            replace(e, z_ohm=new.z_ohm) for e, new in zip(line.elements, els, strict=True)))
        parts.append(network.solve_fault_sweep(ln, source_s, source_r, fault_types=[ft],
                                               **kw))
    # The prefault state is the network of ``line`` (the three-phase fault's elements, the
    # load flow's network, as the replay of one case sees it), whatever the fault types.
    pre = next((p for p, ft in zip(parts, fault_types, strict=True) if ft == "ABC"), None)
    if pre is None:
        m0 = np.atleast_1d(np.asarray(kw["m"], dtype=float))[:1]
        zb = kw.get("z_branch_ohm")
        pre = network.solve_fault_sweep(
            line, source_s, source_r, fault_types=fault_types[:1],
            **(kw | {"m": m0, "outputs": (),
                     "z_branch_ohm": None if zb is None else np.asarray(zb)[:1]}))
    names = ("v_s", "i_s", "i_s_parallel", "v_r", "i_r", "i_r_parallel", "v_f", "i_fault",
             "i_f_from_s", "i_f_from_r")
    joined = {k: np.concatenate([getattr(p, k) for p in parts])
              for k in names if getattr(parts[0], k) is not None}
    prefault = {k: getattr(pre, k) for k in ("v_s_pre", "i_s_pre", "i_s_parallel_pre",
                                             "v_r_pre", "i_r_pre", "emf_s_v", "emf_r_v")}
    return replace(parts[0], fault_types=fault_types, **joined, **prefault)


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
    refused = None
    try:
        banks = _varistor_operating_points(banks, study, geo, line, src, source)
    except InputError as exc:
        refused = exc
    basis = CapacitorBasis(tuple(banks), CAPACITOR_STATES, x_l, z1_line, {}, (), (),
                           refused)
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
        *_per_phase_notes(basis, geo.phase_labels[0]),
    )
    return replace(basis, z1_compensated_ohm=z_comp, inversions=inv, notes=notes,
                   phase_labels=tuple(geo.phase_labels[0]))


def _per_phase_notes(basis: CapacitorBasis, labels) -> tuple[str, ...]:
    """Each bank's varistor state in words, for a three-phase and a single-phase fault."""
    if basis.varistor_error is not None:
        return ()
    from relayset.results.reach import fault_label

    out = []
    for b in basis.banks:
        parts = []
        for ft in ("ABC", "AG"):
            i, zs, st = b.varistor_i_a[ft], b.varistor_z_ohm[ft], b.varistor_status[ft]
            parts.append(f"{fault_label(ft, labels)}: " + ", ".join(
                f"{labels[p]} {i[p] / b.i_protective_a:.3g} × I_pl, "
                + (f"{zs[p].real:.4g} {'+' if zs[p].imag >= 0 else '−'} "
                   f"j{abs(zs[p].imag):.4g} Ω" if st[p] != "not_conducting"
                   else "not conducting") for p in range(3)))
        out.append(f"{b.name}, varistor state per phase (bolted fault just beyond the bank, "
                   f"strongest sources; the phase's current in multiples of I_pl and its "
                   f"impedance): " + "; ".join(parts) + ".")
    return tuple(out)


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


def _varistor_operating_points(banks: list[Bank], study, geo, line, src,
                               source: str | None = None) -> list[Bank]:
    """Each bank's per-phase operating point per fault type: a bolted fault of the type just
    beyond the bank (both sides of a mid-line bank; the side whose largest phase current
    is larger), both sources at the strongest source case, the bank's three phases solved
    together through the network (:func:`per_phase_operating_point`, all fault types and
    sides at once) with the other banks at their operating points of that fault type
    (Gauss-Seidel over the banks, to :data:`TOL_PU`). A case that does not converge within
    the iteration's bounds is refused (InputError naming the bank), never returned."""
    ends = study.ends
    cases_k = study.reach_study.source_cases
    scale = np.array([[min(c.scale_at(ends[0]) for c in cases_k),
                       min(c.scale_at(ends[1]) for c in cases_k)]])
    n = line.n_conductors
    fts = network.FAULT_TYPES
    n_b, n_f = len(banks), len(fts)
    z = np.array([[np.full(3, -1j * b.x_c_ohm)] * n_f for b in banks])  # (B, F, 3)
    cur = np.zeros((n_b, n_f, 3))
    stat = np.zeros((n_b, n_f, 3), dtype=int)
    i_pl = np.array([b.i_protective_a for b in banks])

    for _outer in range(_MAX_ITER):
        before = cur.copy()
        for k, b in enumerate(banks):
            places = _close_in_m(b)
            cases = [(f, p) for f in range(n_f) for p in range(len(places))]

            def solve(zc: np.ndarray, k=k, places=places, cases=cases) -> np.ndarray:
                """Bank k's phase currents [A] with its phases at ``zc`` (C, 3) [ohm]:
                the cases whose banks are alike are solved together (one sweep over
                their fault types and places)."""
                groups: dict[bytes, list[int]] = {}
                zz_of = []
                for c, (f, _p) in enumerate(cases):
                    zz = z[:, f].copy()
                    zz[k] = zc[c]
                    zz_of.append(zz)
                    groups.setdefault(zz.tobytes(), []).append(c)
                out = np.empty((len(cases), 3), dtype=complex)
                for rows in groups.values():
                    zz = zz_of[rows[0]]
                    els = tuple(network.SeriesElement(bb.at, _phase_matrix(zz[q], n),
                                                      bb.vt_line_side)
                                for q, bb in enumerate(banks))
                    ln = network.LineCascade(line.z_ohm_per_m, line.length_m,
                                             line.y_s_per_m, els)
                    f_in = sorted({cases[c][0] for c in rows})
                    p_in = sorted({cases[c][1] for c in rows})
                    sw = network.solve_fault_sweep(
                        ln, src[ends[0]], src[ends[1]], v_nominal_v=geo.v_nominal_v,
                        fault_types=[fts[f] for f in f_in],
                        m=np.array([places[p][0] for p in p_in]), r_fault_ohm=[0.0],
                        source_scale=scale, parallel_state="in_service",
                        outputs=("i_f_from_s", "i_f_from_r"))
                    for c in rows:
                        f, p = cases[c]
                        arr = sw.i_f_from_s if places[p][1] == "s" else sw.i_f_from_r
                        out[c] = arr[f_in.index(f), p_in.index(p), 0, 0, 0]
                return out

            op = per_phase_operating_point(solve, np.full(3, b.x_c_ohm),
                                           np.full(3, b.i_protective_a), len(cases),
                                           tol_pu=TOL_PU)
            if not np.all(op.converged):
                c = int(np.argmin(op.converged))
                raise InputError(
                    f"varistor state not modelled: its per-phase operating point for a "
                    f"{fts[cases[c][0]]} fault beyond the bank did not converge to "
                    f"{TOL_PU:g} × I_pl",
                    field=f"series_capacitors[{k}]", value=b.name, source=source)
            for f in range(n_f):
                rows = [c for c, (ff, _p) in enumerate(cases) if ff == f]
                c = max(rows, key=lambda r: float(np.max(op.i_a[r])))
                z[k, f], cur[k, f], stat[k, f] = op.z_ohm[c], op.i_a[c], op.status[c]
        if n_b == 1 or np.all(np.abs(cur - before) <= TOL_PU * i_pl[:, None, None]):
            break
    else:
        raise InputError(
            f"varistor state not modelled: the banks' operating points did not settle to "
            f"{TOL_PU:g} × I_pl within {_MAX_ITER} passes", field="series_capacitors",
            value=len(banks), source=source)
    return [replace(b, varistor_z_ohm={ft: tuple(complex(x) for x in z[k, f])
                                       for f, ft in enumerate(fts)},
                    varistor_i_a={ft: tuple(float(x) for x in cur[k, f])
                                  for f, ft in enumerate(fts)},
                    varistor_status={ft: tuple(PORT_STATES[x] for x in stat[k, f])
                                     for f, ft in enumerate(fts)})
            for k, b in enumerate(banks)]


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
