r"""The relay behind the proof: what the verification assumes a distance relay does.

Every choice is a field of :class:`RelayModel`, read from the study's ``[relay]`` table
(defaults stated there and printed with the verification):

- **Directional elements** [1]_. Unbalanced faults: negative-sequence directional,
  forward where :math:`\mathrm{Re}(V_2 \bar I_2 e^{-j\theta}) < 0` (for a fault in front
  :math:`V_2 = -Z_{2,behind} I_2`), with no threshold on :math:`I_2`. Balanced faults:
  positive-sequence directional polarised by the prefault (memory) voltage, forward where
  :math:`\mathrm{Re}(V_{1,pre} \bar I_1 e^{-j\theta}) > 0`. The phase selector tells the
  two apart (modelled as ideal: it knows the fault type).
- **Phase selection.** ``faulted_loops``: only the loops meant for the fault type are
  released (ground loop for a ground fault, the phase loop for a phase fault, the phase loop
  and both ground loops for a two-phase-to-ground fault, the three phase loops for a
  three-phase fault); ``all_loops``: all six loops measure every fault.
- **Release currents.** A loop measures only when its phase currents reach the minimum
  operating current; ground loops only when the residual current :math:`|I_a+I_b+I_c|`
  reaches the ground release current. Both are given in secondary amperes and turned into
  primary through the CT ratio. Cases below them are sensitivity findings, not trips.
- **Mutual compensation** (double circuits) with supervision: the parallel circuit's
  residual current is added (:math:`k_{0m}`) only while the protected circuit's own
  residual current is at least as large, so that a fault on the parallel circuit leaves
  the protected circuit's ground loops uncompensated.

Close-in bolted faults whose loop voltage vanishes (|Z| below 0.1 % of the line) are left
to the memory-polarised characteristic and judged as inside a forward zone.

References
----------
.. [1] IEEE Std C37.113-2015, *IEEE Guide for Protective Relay Applications to
   Transmission Lines*, directional supervision and polarization of distance elements.
"""

from __future__ import annotations

import cmath
import math
from dataclasses import dataclass, field, replace

import numpy as np

from relayset.physics import measurement
from relayset.physics.faults import check_fault_type
from relayset.physics.sequence import fortescue_inverse
from relayset.results.settings import ZoneSetting
from relayset.studies.verification.simulation import (
    Run,
    infeed_samples,
    largest_phase_current,
    lighten,
)

#: Below this fraction of |Z_line| a loop impedance is left to memory polarization [1].
Z_SMALL = 1e-3
LOOPS = measurement.LOOPS
GROUND = measurement.GROUND_LOOPS
_A_INV = fortescue_inverse()

PHASE_SELECTIONS = ("faulted_loops", "all_loops")


@dataclass(frozen=True)
class RelayModel:
    """The relay the verification simulates (see the module notes)."""

    phase_selection: str = "faulted_loops"
    min_current_primary_a: float = 0.0  #: minimum operating phase current [A primary]
    ground_release_primary_a: float = 0.0  #: residual current releasing ground loops [A]
    mutual_supervision: bool = True
    min_current_secondary_a: float = 0.0  #: as given [A secondary]
    ground_release_secondary_a: float = 0.0

    def loops_for(self, fault_type: str) -> tuple[str, ...]:
        return LOOPS if self.phase_selection == "all_loops" else \
            measurement.loops_for_fault(fault_type)

    def describe(self, mutual: bool) -> str:
        sel = ("only the loops meant for the fault type (phase selection)"
               if self.phase_selection == "faulted_loops" else "all six loops")
        text = (f"Relay model: {sel} measure; negative-sequence directional for unbalanced "
                "faults and positive-sequence directional polarised by the prefault voltage "
                "for balanced faults, no threshold on I2; minimum operating current "
                f"{self.min_current_secondary_a:g} A secondary "
                f"({self.min_current_primary_a:.4g} A primary) in each phase of a loop; "
                f"ground loops released above {self.ground_release_secondary_a:g} A "
                f"secondary residual current ({self.ground_release_primary_a:.4g} A primary)")
        if mutual:
            text += ("; mutual compensation " + (
                "supervised: applied only while the protected circuit's residual current is "
                "at least the parallel circuit's" if self.mutual_supervision
                else "applied in every case (no supervision)"))
        return text + "."

    def to_dict(self) -> dict:
        return {"phase_selection": self.phase_selection,
                "min_operating_current_secondary_a": self.min_current_secondary_a,
                "min_operating_current_primary_a": self.min_current_primary_a,
                "ground_release_current_secondary_a": self.ground_release_secondary_a,
                "ground_release_current_primary_a": self.ground_release_primary_a,
                "mutual_compensation_supervision": self.mutual_supervision,
                "directional": "negative-sequence (unbalanced), positive-sequence memory "
                               "polarised (balanced)"}


def _sequence(x: np.ndarray, k: int) -> np.ndarray:
    """Sequence component k (0, 1, 2) of phase phasors on the last axis (Fortescue)."""
    a = _A_INV[k]  # element-wise: a matmul with a 3-vector loops slowly over many cases
    return x[..., 0] * a[0] + x[..., 1] * a[1] + x[..., 2] * a[2]


def forward(v: np.ndarray, i: np.ndarray, v_pre: np.ndarray, fault_types, theta: float
            ) -> np.ndarray:
    """Directional decision per case (F, M, Rf, K, L): True where the relay sees forward.

    ``v_pre`` (K, L, 3) is the relay bus's prefault voltage (the memory voltage).
    """
    rot = cmath.exp(-1j * theta)
    v2, i2 = _sequence(v, 2), _sequence(i, 2)
    out = (v2 * np.conj(i2) * rot).real < 0
    balanced = [f for f, ft in enumerate(fault_types) if _balanced(ft)]
    if balanced:
        v1m = _sequence(v_pre, 1)  # (K, L)
        i1 = _sequence(i[balanced], 1)
        out[balanced] = (v1m * np.conj(i1) * rot).real > 0
    return out


def _balanced(fault_type: str) -> bool:
    """A fault of all three phases without ground: no negative sequence to polarise with."""
    phases, ground = check_fault_type(fault_type)
    return len(phases) == 3 and not ground


@dataclass(frozen=True, eq=False)
class View:
    """The relay at one end looking at one run: loops, release, direction.

    ``loops`` holds each loop's impedance only for the fault types whose phase selection
    releases it, ``meant[loop]`` (no zone ever judges the others): axis 0 of
    ``loops[loop]`` runs over ``meant[loop]``. The view depends on the relay (k0, k0m,
    model, line angle) but not on the zone settings, so one view serves every zone and
    every revision of the settings.
    """

    run: Run
    loops: dict[str, np.ndarray]  #: (len(meant), M, Rf, K, L) apparent impedance [ohm]
    released: dict[str, np.ndarray]  #: (F, M, Rf, K, L) loop measures (release currents)
    m_end: np.ndarray  #: (M,) location from the end [1]
    mutual: np.ndarray | bool  #: mutual compensation applied, per case
    forward: np.ndarray  #: (F, M, Rf, K, L)
    meant: dict[str, list[int]] = field(default_factory=dict)  #: fault types per loop

    def at_locations(self, index: np.ndarray) -> View:
        """The view restricted to the fault locations ``index`` (axis 1)."""
        mut = self.mutual[:, index] if isinstance(self.mutual, np.ndarray) else self.mutual
        return replace(self, loops={k: v[:, index] for k, v in self.loops.items()},
                       released={k: v[:, index] for k, v in self.released.items()},
                       m_end=self.m_end[index], mutual=mut, forward=self.forward[:, index])

    def loop_at(self, loop: str, idx: tuple[int, ...]) -> complex:
        """The impedance of ``loop`` at the full case index ``(f, m, rf, k, l)`` [ohm]."""
        f, *rest = idx
        return complex(self.loops[loop][(self.meant[loop].index(int(f)), *rest)])


def _meant(model: RelayModel, fault_types) -> dict[str, list[int]]:
    """Per loop, the fault-type indices it is released for (phase selection)."""
    return {loop: [f for f, ft in enumerate(fault_types) if loop in model.loops_for(ft)]
            for loop in LOOPS}


def relay_quantities(run: Run, at_s: bool, *, behind: bool = False
                     ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """The relay's bus voltages, its circuit's currents and the parallel circuit's currents
    (F, M, Rf, K, L, 3) at S (``at_s``) or R in ``run`` (faults behind: at its own bus)."""
    sw = run.sweep
    if run.faulted == "parallel":
        # The protected circuit is circuit 2 of the swapped line; its parallel is the faulted.
        return ((sw.v_s, sw.i_s_parallel, sw.i_s) if at_s
                else (sw.v_r, sw.i_r_parallel, sw.i_r))
    if behind:
        # A fault at the relay's own bus: the relay current is what arrives from the line.
        return ((sw.v_s, -sw.i_f_from_r, sw.i_s_parallel) if at_s
                else (sw.v_r, -sw.i_f_from_s, sw.i_r_parallel))
    return ((sw.v_s, sw.i_s, sw.i_s_parallel) if at_s
            else (sw.v_r, sw.i_r, sw.i_r_parallel))


def view(run: Run, at_s: bool, k0: complex, k0m: complex | None, model: RelayModel, *,
         behind: bool = False, line_angle: float = math.radians(80.0),
         m_index: np.ndarray | None = None) -> View:
    """What the relay at S (``at_s``) or R measures in ``run`` (see the module notes).

    ``m_index`` restricts the view to those fault locations of the sweep (the checks that
    judge one location, e.g. the own bus, then measure nothing else).
    """
    sw = run.sweep
    v_pre = sw.v_s_pre if at_s else sw.v_r_pre
    v, i, ip = relay_quantities(run, at_s, behind=behind)
    m = sw.m
    if m_index is not None:
        v, i, ip, m = v[:, m_index], i[:, m_index], ip[:, m_index], m[m_index]
    # Out of service the parallel circuit's CTs carry no current (isolated from the bus).
    # (beside neighbouring lines the state also names theirs: "..., parallel in_service")
    use_m = k0m is not None and (run.state == "in_service"
                                 or run.state.endswith(", parallel in_service"))
    meant = _meant(model, sw.fault_types)
    res = i.sum(axis=-1)
    res_p = ip.sum(axis=-1) if use_m else None
    mutual: np.ndarray | bool = False
    if use_m:
        mutual = np.abs(res) >= np.abs(res_p) if model.mutual_supervision else True
    loops = {}
    with np.errstate(divide="ignore", invalid="ignore"):
        for name in LOOPS:
            idx = meant[name]
            ph = measurement.LOOP_PHASES[name]
            if name in GROUND:
                p = ph[0]
                comp = k0 * res[idx]
                if use_m:
                    with_m = comp + k0m * res_p[idx]
                    comp = (np.where(mutual[idx], with_m, comp)
                            if isinstance(mutual, np.ndarray) else with_m)
                loops[name] = v[idx, ..., p] / (i[idx, ..., p] + comp)
            else:
                x, y = ph
                loops[name] = ((v[idx, ..., x] - v[idx, ..., y])
                               / (i[idx, ..., x] - i[idx, ..., y]))
    ok = np.abs(i) >= model.min_current_primary_a
    ground_ok = np.abs(res) >= model.ground_release_primary_a
    released = {}
    for name in LOOPS:
        idx = list(measurement.LOOP_PHASES[name])
        r = np.all(ok[..., idx], axis=-1)
        released[name] = r & ground_ok if name in GROUND else r
    return View(run, loops, released, m if at_s else 1.0 - m, mutual,
                forward(v, i, v_pre, sw.fault_types, line_angle), meant)


def _own_bus(run: Run, at_s: bool) -> np.ndarray:
    """Indices of the sweep's locations at the relay's own bus."""
    return np.flatnonzero(np.isclose(run.sweep.m, 0.0 if at_s else 1.0))


def relay_view(run: Run, at_s: bool, k0: complex, k0m: complex | None, model: RelayModel,
               *, line_angle: float, behind: bool = False) -> View | None:
    """The view of ``run`` by the relay at S (``at_s``) or R: the one kept when the run was
    measured (:class:`Measure`), else formed from its phase quantities. Faults behind the
    relay are viewed at its own bus only (None: the sweep has no location there)."""
    key = (at_s, complex(k0), None if k0m is None else complex(k0m), model, behind,
           float(line_angle))
    if key in run.views:
        return run.views[key]
    if run.measured:
        raise RuntimeError("this run was measured for another relay (k0, k0m, model)")
    if behind:
        own = _own_bus(run, at_s)
        if not own.size:
            return None
        return view(run, at_s, k0, k0m, model, behind=True, line_angle=line_angle,
                    m_index=own)
    return view(run, at_s, k0, k0m, model, line_angle=line_angle)


@dataclass(frozen=True)
class Measure:
    """Measure each run as it is solved for the relays given, then drop its phase
    quantities (see :mod:`.simulation`): per relay ``(at_s, k0, k0m, model, line angle)``
    the view of the protected-line faults, of the faults at the own bus (behind) and of the
    parallel-circuit faults with and without mutual compensation, and the infeed samples;
    at the ends of ``infeed_only`` the infeed samples alone.
    """

    relays: tuple[tuple[bool, complex, complex | None, RelayModel, float], ...]
    #: Ends (True: S) whose infeed samples alone are kept (no relay judged there).
    infeed_only: tuple[bool, ...] = ()

    def __call__(self, run: Run) -> Run:
        # The views point to a bare light run, the returned run holds the views: no
        # reference cycle, so a finished simulation is freed at once.
        bare = lighten(run)
        light = replace(bare, views={}, infeed={})
        for at_s, k0, k0m, model, theta in self.relays:
            wanted = ([(k0m, False), (k0m, True)] if run.faulted in ("protected", "branch")
                      else [(k0m, False)] if run.open_at  # sequential clearing: as set
                      else [(k0m, False), (None, False)])
            for km, behind in wanted:
                v = relay_view(run, at_s, k0, km, model, line_angle=theta, behind=behind)
                key = (at_s, complex(k0), None if km is None else complex(km), model, behind,
                       float(theta))
                light.views[key] = None if v is None else replace(v, run=bare)
            light.infeed[at_s] = infeed_samples(run, at_s)
            if run.faulted == "protected":
                light.i_max[at_s] = largest_phase_current(run, at_s)
        for at_s in self.infeed_only:
            light.infeed[at_s] = infeed_samples(run, at_s)
        return light


@dataclass(frozen=True, eq=False)
class Scale:
    """A zone against a view: reach scales of the released loops (see :func:`loop_scale`)."""

    scale: np.ndarray  #: smallest reach scale, vanishing loops never operating (inf)
    which: np.ndarray  #: index into LOOPS of the loop giving ``scale``
    scale_in: np.ndarray  #: the same with vanishing loops operating (scale 0)
    which_in: np.ndarray
    insensitive: np.ndarray  #: no loop released for lack of current


def zone_scale(vw: View, zone: ZoneSetting, theta: float, z_line: float, model: RelayModel
               ) -> Scale:
    """Smallest reach scale over the released loops per case, and which loop gives it, in
    both readings of close-in faults whose loop impedance vanishes (memory polarisation
    decides them): operating (scale 0, where the zone must operate) and not operating
    (scale inf, where it must not); and where no loop was released for lack of current.
    """
    shape = vw.forward.shape
    best = np.full(shape, np.inf)
    # Where no loop operates at any reach, the case is named by the first loop meant for
    # its fault type (a loop judged for that fault, never one the relay ignores).
    first = np.zeros(shape[0], dtype=int)
    for j, loop in reversed(list(enumerate(LOOPS))):
        first[vw.meant[loop]] = j
    which = np.broadcast_to(first.reshape((-1,) + (1,) * (len(shape) - 1)), shape).copy()
    zero = np.zeros(shape, dtype=bool)  # some loop operates at scale 0 (vanishing included)
    which0 = which.copy()  # the first such loop
    meant_any = np.zeros(shape, dtype=bool)
    released_any = np.zeros(shape, dtype=bool)
    for j, loop in enumerate(LOOPS):
        idx = vw.meant[loop]
        if not idx:
            continue
        z = vw.loops[loop]
        s = zone.characteristic(loop in GROUND, theta).reach_scale(z)
        fwd = vw.forward[idx]
        ok = (fwd if zone.direction == "forward" else ~fwd) & vw.released[loop][idx]
        small = ~(np.abs(z) >= Z_SMALL * z_line)  # NaN (no loop current) counts as vanishing
        s = np.where(ok & ~small, s, np.inf)
        meant_any[idx] = True
        released_any[idx] |= vw.released[loop][idx]
        sub = best[idx]
        better = s < sub
        best[idx] = np.where(better, s, sub)
        which[idx] = np.where(better, j, which[idx])
        z0 = (s == 0) | (ok & small)
        zsub = zero[idx]
        which0[idx] = np.where(z0 & ~zsub, j, which0[idx])
        zero[idx] = zsub | z0
    return Scale(best, which, np.where(zero, 0.0, best), np.where(zero, which0, which),
                 meant_any & ~released_any)


def loop_scale(vw: View, zone: ZoneSetting, theta: float, z_line: float, model: RelayModel,
               close_in: float = math.inf) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Smallest reach scale over the released loops per case, which loop gives it, and
    where no loop was released for lack of current (sensitivity).

    ``close_in`` is the scale given to loops whose impedance vanishes (memory polarization
    decides them): 0 where the zone must operate, inf where it must not.
    """
    sc = zone_scale(vw, zone, theta, z_line, model)
    if close_in == 0.0:
        return sc.scale_in, sc.which_in, sc.insensitive
    if close_in == math.inf:
        return sc.scale, sc.which, sc.insensitive
    raise ValueError("close_in is 0 (operates) or inf (does not)")
