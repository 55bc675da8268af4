r"""Phase-domain short-circuit solver for a two-ended, single- or double-circuit line.

The network is bus S -- protected line -- bus R. Each bus has a Thevenin source (balanced
EMF behind a balanced 3x3 phase impedance built from Z1 and Z0) or no source (open end).
The line is a cascade of sections, each given as a series impedance matrix per metre (and
optionally a shunt admittance matrix per metre), already in phase order. With n = 3k
conductors, conductors 0-2 are circuit 1 (the protected one), 3-5 circuit 2 and so on:
circuit 2 is the parallel circuit of a double-circuit line, and every circuit after the
protected line's is a neighbouring line on buses of its own (a shared corridor,
:class:`NeighbourEnd`; without a parallel circuit the first neighbour is circuit 2).

Method
------
Every line part is represented by its chain (ABCD) matrix

.. math:: \begin{bmatrix}V_0\\I_0\end{bmatrix} = \Phi
          \begin{bmatrix}V_x\\I_x\end{bmatrix},\qquad
          \Phi = \exp\begin{bmatrix}0 & Z\ell\\ Y\ell & 0\end{bmatrix}

which is the exact solution of the multiconductor telegraph equations
:math:`dV/dx = -ZI`, :math:`dI/dx = -YV` for a uniform section of length :math:`\ell` [1]_.
Series-only sections reduce to :math:`\Phi = [[1, Z\ell],[0, 1]]`. Because chain matrices
stay finite for zero length, faults at m = 0 and m = 1 need no special case.

Each line end obeys n linear terminal equations :math:`G_v V + G_i I = g` (source
:math:`V + Z_s I = E`, open end :math:`I = 0`, earthed end :math:`V = 0`, both circuits
on one bus :math:`V_1 = V_2`, a neighbour's route to a bus :math:`V_1 - V_j = Z_{route}
I_j`). With the chain matrices these become equations in the
voltages and currents at the fault point; together with Kirchhoff's current law there
they give a 3n x 3n linear system per (location, source case). One batched solve yields
the prefault state for every load case and the response to a unit fault current injected
at each phase, i.e. the 3x3 Thevenin matrix :math:`Z_{th}` at the fault.

Faults are written as exact linear constraints :math:`P_v V_F + P_i I_f = 0` (valid for
zero resistance, so bolted faults need no resistance floor), and with
:math:`V_F = V_{pre} - Z_{th} I_f` every fault type and resistance is one batched 3x3
solve:

.. math:: (P_i - P_v Z_{th})\, I_f = -P_v V_{pre}.

All relay-end quantities follow by superposition. Fault models live in
:mod:`relayset.physics.faults`, the chain matrices in :mod:`relayset.physics.chain` and the
prefault load flow in :mod:`relayset.physics.loadflow`; the test suite checks this solver
against an independent per-case modified nodal analysis (``tests/reference_solver.py``).

References
----------
.. [1] C. R. Paul, *Analysis of Multiconductor Transmission Lines*, 2nd ed. Hoboken, NJ,
   USA: Wiley, 2008, ch. 7 (chain-parameter matrix).
.. [2] C. L. Fortescue, "Method of symmetrical co-ordinates applied to the solution of
   polyphase networks," Trans. AIEE, vol. 37, pp. 1027-1140, 1918.
"""

from __future__ import annotations

import math
from collections.abc import Collection, Mapping, Sequence
from dataclasses import dataclass

import numpy as np

from relayset.errors import InputError, suggest
from relayset.physics.chain import element_fault_chain_products, fault_chain_products
from relayset.physics.faults import (
    FAULT_TYPES,
    check_fault_type,
    check_resistance,
    fault_currents,
)
from relayset.physics.sequence import balanced_phase_matrix, fortescue_matrix

__all__ = [
    "FAULT_TYPES", "OPEN_END_STATES", "PARALLEL_STATES", "FaultSweep", "LineCascade",
    "NeighbourEnd", "SeriesElement", "Source", "solve_fault_sweep",
]

PARALLEL_STATES: tuple[str, ...] = ("in_service", "earthed", "isolated")
#: Most circuits in one cascade (the protected line's one or two and its neighbours).
MAX_CIRCUITS = 8
#: Sequential clearing (double-circuit lines, fault solver only): both circuits in service
#: but the faulted circuit 1 open at bus S, or at bus R (its breaker there has tripped);
#: circuit 2 stays on both buses. Circuit 1's current at the open end is zero.
OPEN_END_STATES: tuple[str, ...] = ("faulted_open_at_s", "faulted_open_at_r")


def _name(field: str, field_names: Mapping[str, str] | None) -> str:
    """Caller's field name for one of our parameter names (the lead maps them to file paths)."""
    if field_names and field in field_names:
        return field_names[field]
    return field


# --------------------------------------------------------------------------------------
# Network data
# --------------------------------------------------------------------------------------


@dataclass(frozen=True)
class Source:
    """Thevenin source behind a balanced impedance.

    Parameters
    ----------
    z1_ohm : complex
        Positive- (= negative-) sequence source impedance [ohm], real part >= 0.
    z0_ohm : complex
        Zero-sequence source impedance [ohm], real part >= 0.
    """

    z1_ohm: complex
    z0_ohm: complex

    def __post_init__(self) -> None:
        for name in ("z1_ohm", "z0_ohm"):
            z = complex(getattr(self, name))
            if not (math.isfinite(z.real) and math.isfinite(z.imag)):
                raise InputError("source impedance must be finite", field=name, value=z)
            if z.real < 0:
                raise InputError(
                    "source resistance must not be negative", field=name, value=z
                )
            object.__setattr__(self, name, z)

    @classmethod
    def from_fault_levels(
        cls,
        v_nominal_v: float,
        s3ph_va: float,
        x_over_r: float,
        s1ph_va: float | None = None,
        z0_over_z1: complex | None = None,
    ) -> Source:
        r"""Source impedances from three-phase and single-phase fault levels.

        .. math:: |Z_1| = \frac{V^2}{S_{3ph}},\qquad |2Z_1 + Z_0| = \frac{3V^2}{S_{1ph}}

        with :math:`S = \sqrt3\,V\,I` (no voltage factor) and the same angle
        :math:`\arctan(X/R)` for Z1 and Z0. Give exactly one of ``s1ph_va`` or
        ``z0_over_z1``.

        Parameters
        ----------
        v_nominal_v : float
            Nominal line-to-line voltage [V].
        s3ph_va : float
            Three-phase fault level [VA].
        x_over_r : float
            X/R ratio of the source [1], > 0 (``inf`` for a pure reactance).
        s1ph_va : float, optional
            Single-phase-to-ground fault level [VA].
        z0_over_z1 : complex, optional
            Ratio Z0/Z1 [1]; a real ratio keeps the angle of Z1.
        """
        for name, value in (("v_nominal_v", v_nominal_v), ("s3ph_va", s3ph_va)):
            if not (math.isfinite(value) and value > 0):
                raise InputError("must be a positive number", field=name, value=value)
        if not (x_over_r > 0) or math.isnan(x_over_r):
            raise InputError("X/R must be positive", field="x_over_r", value=x_over_r)
        if (s1ph_va is None) == (z0_over_z1 is None):
            raise InputError(
                "give exactly one of the single-phase fault level or Z0/Z1",
                field="s1ph_va",
                value=s1ph_va,
            )
        angle = math.atan(x_over_r)
        unit = complex(math.cos(angle), math.sin(angle))
        z1 = v_nominal_v**2 / s3ph_va * unit
        if s1ph_va is not None:
            if not (math.isfinite(s1ph_va) and s1ph_va > 0):
                raise InputError("must be a positive number", field="s1ph_va", value=s1ph_va)
            z0_mag = 3 * v_nominal_v**2 / s1ph_va - 2 * abs(z1)
            if z0_mag < 0:
                raise InputError(
                    "single-phase fault level above 1.5 times the three-phase level "
                    "needs a negative Z0",
                    field="s1ph_va",
                    value=s1ph_va,
                )
            z0 = z0_mag * unit
        else:
            z0 = complex(z0_over_z1) * z1
        return cls(z1_ohm=z1, z0_ohm=z0)

    def phase_matrix(self, scale: float | np.ndarray = 1.0) -> np.ndarray:
        """Balanced 3x3 phase impedance [ohm] times ``scale`` (broadcast, shape (..., 3, 3))."""
        scale = np.asarray(scale, dtype=float)
        return balanced_phase_matrix(self.z1_ohm * scale, self.z0_ohm * scale)


@dataclass(frozen=True, eq=False)
class NeighbourEnd:
    """One end of circuit 2 when it is a neighbouring line on buses of its own (a shared
    corridor) rather than the protected line's parallel circuit.

    Circuit 2 leaves the cascade at this end through its route outside the corridor (a
    lumped series impedance) to its own bus. In service, that bus is the protected line's
    bus at this end (``on_line_bus``) or a bus of its own behind ``source``, whose EMF is
    the protected line's source EMF at the same end (the neighbour carries load the same
    way). Earthed (out of service), it is earthed at its own terminals, beyond its route:
    :math:`V_2 + Z_{route} I_2 = 0`. Isolated: :math:`I_2 = 0`.

    Parameters
    ----------
    z_route_ohm : (3, 3) complex array
        Series phase impedance of its route outside the corridor at this end [ohm]; zero
        where its bus is at the corridor's end.
    source : Source or None
        The Thevenin source of its own bus (not scaled by the source cases); None with
        ``on_line_bus`` False: an open end.
    on_line_bus : bool
        Its bus is the protected line's bus at this end (fed by that bus's source).
    """

    z_route_ohm: np.ndarray
    source: Source | None = None
    on_line_bus: bool = False

    def __post_init__(self) -> None:
        z = np.array(self.z_route_ohm, dtype=complex)
        if z.shape != (3, 3) or not np.all(np.isfinite(z)):
            raise InputError("the route impedance must be a finite 3x3 matrix",
                             field="z_route_ohm", value=z.shape)
        if np.max(np.abs(z - z.T)) > 1e-9 * max(float(np.max(np.abs(z))), 1e-300):
            raise InputError("the route impedance must be symmetric", field="z_route_ohm")
        if self.on_line_bus and self.source is not None:
            raise InputError("an end on the protected line's bus takes that bus's source",
                             field="source")
        z.setflags(write=False)
        object.__setattr__(self, "z_route_ohm", z)


@dataclass(frozen=True, eq=False)
class SeriesElement:
    r"""A lumped series element in the line (a series capacitor bank).

    Its chain matrix :math:`[[1, Z_e],[0, 1]]` sits between the uniform sections at its
    place (:func:`~relayset.physics.chain.element_fault_chain_products`, where the side of
    a fault exactly at its place is stated).

    Parameters
    ----------
    at : float
        Place as a fraction of the line from bus S [1], in [0, 1] (0, 1: at a bus).
    z_ohm : (n, n) complex array
        Impedance matrix [ohm], n the line's conductors (a bank: ``-jX_C`` on the diagonal
        of each compensated phase; zero rows for an uncompensated circuit).
    vt_line_side : bool
        For an element at a bus: the relay's voltage transformer there is on the line side
        of the element, so the sweep's voltage at that end is the line-side voltage.
    """

    at: float
    z_ohm: np.ndarray
    vt_line_side: bool = False

    def __post_init__(self) -> None:
        at = float(self.at)
        if not (0.0 <= at <= 1.0):
            raise InputError("element place must be a fraction of the line in [0, 1]",
                             field="at", value=at)
        z = np.array(self.z_ohm, dtype=complex)
        if z.ndim != 2 or z.shape[0] != z.shape[1] or not np.all(np.isfinite(z)):
            raise InputError("element impedance must be a finite square matrix",
                             field="z_ohm", value=z.shape)
        if self.vt_line_side and 0.0 < at < 1.0:
            raise InputError("a voltage transformer side belongs to an element at a bus",
                             field="vt_line_side", value=at)
        z.setflags(write=False)
        object.__setattr__(self, "at", at)
        object.__setattr__(self, "z_ohm", z)


@dataclass(frozen=True, eq=False)
class LineCascade:
    """Protected line as a cascade of uniform sections, matrices in phase order.

    Parameters
    ----------
    z_ohm_per_m : (S, n, n) complex array
        Series impedance matrix of each section [ohm/m]; n = 3k: circuit 1 A, B, C, then
        circuit 2 A, B, C and so on (see the module notes). Symmetric (reciprocal line).
    length_m : (S,) float array
        Section lengths [m], > 0, in order from bus S to bus R.
    y_s_per_m : (S, n, n) complex array, optional
        Shunt admittance matrix of each section [S/m] (j·omega·C). None: series-only.
    elements : tuple of SeriesElement, optional
        Lumped series elements (series capacitor banks) in the cascade.
    """

    z_ohm_per_m: np.ndarray
    length_m: np.ndarray
    y_s_per_m: np.ndarray | None = None
    elements: tuple[SeriesElement, ...] = ()

    def __post_init__(self) -> None:
        z = np.array(self.z_ohm_per_m, dtype=complex)
        if z.ndim == 2:
            z = z[None]
        if (z.ndim != 3 or z.shape[1] != z.shape[2] or z.shape[1] % 3
                or not 3 <= z.shape[1] <= 3 * MAX_CIRCUITS):
            raise InputError(
                "series impedance must have shape (sections, n, n) with n = 3k conductors "
                f"(k circuits, 1 to {MAX_CIRCUITS})",
                field="z_ohm_per_m",
                value=z.shape,
            )
        length = np.atleast_1d(np.array(self.length_m, dtype=float))
        if length.shape != (z.shape[0],):
            raise InputError(
                f"need one length per section ({z.shape[0]})", field="length_m",
                value=length.shape,
            )
        if not np.all(np.isfinite(length)) or np.any(length <= 0):
            raise InputError("section lengths must be positive", field="length_m",
                             value=length.tolist())
        _check_matrix(z, "z_ohm_per_m")
        y = None
        if self.y_s_per_m is not None:
            y = np.array(self.y_s_per_m, dtype=complex)
            if y.ndim == 2:
                y = y[None]
            if y.shape != z.shape:
                raise InputError(
                    f"shunt admittance must have the shape of the impedance {z.shape}",
                    field="y_s_per_m", value=y.shape,
                )
            _check_matrix(y, "y_s_per_m")
            y.setflags(write=False)
        for el in self.elements:
            if el.z_ohm.shape != z.shape[1:]:
                raise InputError(f"element impedance must have shape {z.shape[1:]}",
                                 field="elements", value=el.z_ohm.shape)
        object.__setattr__(self, "elements", tuple(self.elements))
        z.setflags(write=False)
        length.setflags(write=False)
        object.__setattr__(self, "z_ohm_per_m", z)
        object.__setattr__(self, "length_m", length)
        object.__setattr__(self, "y_s_per_m", y)

    @property
    def n_conductors(self) -> int:
        """Number of phase conductors n (3k for k circuits)."""
        return int(self.z_ohm_per_m.shape[1])

    @property
    def total_length_m(self) -> float:
        """Length of the whole line [m]."""
        return float(np.sum(self.length_m))

    @property
    def z_total_ohm(self) -> np.ndarray:
        """Series impedance matrix of the whole line, (n, n) [ohm]."""
        return np.einsum("s,sij->ij", self.length_m, self.z_ohm_per_m)


def _check_matrix(a: np.ndarray, field: str) -> None:
    if not np.all(np.isfinite(a)):
        raise InputError("matrix entries must be finite", field=field)
    scale = np.max(np.abs(a))
    if scale == 0 or np.max(np.abs(a - np.swapaxes(a, -1, -2))) > 1e-9 * scale:
        raise InputError("matrix must be symmetric and non-zero (reciprocal line)",
                         field=field)


# --------------------------------------------------------------------------------------
# Results
# --------------------------------------------------------------------------------------


@dataclass(frozen=True, eq=False)
class FaultSweep:
    """Results of :func:`solve_fault_sweep`.

    Fault quantities have axes ``(fault_type, m, r_fault, source_case, load_case, phase)``
    (phase A, B, C); prefault quantities ``(source_case, load_case, phase)``. Voltages are
    phase-to-ground phasors [V], currents phasors [A]; ``i_*`` at the line ends flow into
    the line from that bus, ``i_f_from_*`` flow into the fault point along circuit 1 from
    that side, ``i_fault`` flows from the fault point into the fault. Results left out by
    the ``outputs`` argument of :func:`solve_fault_sweep` are None.
    """

    fault_types: tuple[str, ...]
    m: np.ndarray  #: (M,) fault locations [1], fraction of the line from S
    r_fault_ohm: np.ndarray  #: (Rf,) [ohm]
    r_phase_ohm: np.ndarray  #: (Rf,) [ohm]
    source_scale: np.ndarray  #: (K, 2) factors on source S and source R impedances [1]
    emf_s_v: np.ndarray  #: (K, L) phase-A EMF of source S [V]
    emf_r_v: np.ndarray  #: (K, L) phase-A EMF of source R [V]
    parallel_state: str
    v_s: np.ndarray | None  #: bus S voltages
    i_s: np.ndarray | None  #: circuit-1 currents at S
    i_s_parallel: np.ndarray | None  #: circuit-2 currents at S (zeros for n = 3 / isolated)
    v_r: np.ndarray | None
    i_r: np.ndarray | None
    i_r_parallel: np.ndarray | None
    v_f: np.ndarray | None  #: circuit-1 voltages at the fault point
    i_fault: np.ndarray
    i_f_from_s: np.ndarray | None
    i_f_from_r: np.ndarray | None
    v_s_pre: np.ndarray  #: (K, L, 3) prefault bus S voltages
    i_s_pre: np.ndarray  #: (K, L, 3) prefault circuit-1 currents at S
    i_s_parallel_pre: np.ndarray  #: (K, L, 3)
    #: (K, L, 3) prefault bus R voltages (the memory voltage of a relay at R)
    v_r_pre: np.ndarray | None = None
    #: (K, L, 3) prefault circuit-1 currents at R (into the line)
    i_r_pre: np.ndarray | None = None

    @property
    def transfer_angle_rad(self) -> np.ndarray:
        """(K, L) angle by which the S EMF leads the R EMF [rad], per source and load case
        (the load case's transfer angle, also where it came from a power flow)."""
        return np.angle(self.emf_s_v) - np.angle(self.emf_r_v)



# --------------------------------------------------------------------------------------
# Shared input handling
# --------------------------------------------------------------------------------------


def _balanced(e_a: np.ndarray) -> np.ndarray:
    """Positive-sequence phase set (..., 3) from phase-A phasors."""
    return np.asarray(e_a, dtype=complex)[..., None] * fortescue_matrix()[:, 1]


def _check_state(line: LineCascade, parallel_state: str, fn: Mapping[str, str] | None,
                 open_end: bool = False) -> None:
    """Validate the parallel-circuit state; ``open_end``: the fault solver's sequential
    clearing states (:data:`OPEN_END_STATES`) are allowed too."""
    known = PARALLEL_STATES + (OPEN_END_STATES if open_end else ())
    if parallel_state not in known:
        raise InputError(
            f"unknown parallel circuit state; use one of {', '.join(known)}"
            + suggest(str(parallel_state), known),
            field=_name("parallel_state", fn),
            value=parallel_state,
        )
    if line.n_conductors == 3 and parallel_state != "in_service":
        raise InputError(
            "a single-circuit line has no parallel circuit; leave the state at its default",
            field=_name("parallel_state", fn),
            value=parallel_state,
        )


def _check_branch(z_b: np.ndarray, n_m: int, fn: Mapping[str, str] | None) -> np.ndarray:
    """Series branch matrices (M, 3, 3) [ohm]: finite, symmetric, passive diagonal."""
    z = np.asarray(z_b, dtype=complex)
    if z.shape != (n_m, 3, 3):
        raise InputError(f"branch impedance must have shape ({n_m}, 3, 3), one per location",
                         field=_name("z_branch_ohm", fn), value=z.shape)
    if not np.all(np.isfinite(z)):
        raise InputError("branch impedance must be finite", field=_name("z_branch_ohm", fn))
    scale = max(float(np.max(np.abs(z))), 1e-300)
    if (np.max(np.abs(z - np.swapaxes(z, -1, -2))) > 1e-9 * scale
            or np.any(np.diagonal(z, axis1=-2, axis2=-1).real < 0)):
        raise InputError("branch impedance must be symmetric with non-negative resistance",
                         field=_name("z_branch_ohm", fn))
    return z


def _check_locations(m: np.ndarray | float, fn: Mapping[str, str] | None) -> np.ndarray:
    m = np.atleast_1d(np.asarray(m, dtype=float))
    if m.ndim != 1 or not np.all(np.isfinite(m)) or np.any((m < 0) | (m > 1)):
        bad = m[~((m >= 0) & (m <= 1))]
        raise InputError(
            "fault locations must be fractions of the line in [0, 1]",
            field=_name("m", fn),
            value=bad.tolist() if bad.size else m.shape,
        )
    return m


def _check_scale(source_scale: np.ndarray | float, fn: Mapping[str, str] | None) -> np.ndarray:
    sc = np.asarray(source_scale, dtype=float)
    if sc.ndim == 0:
        sc = sc.reshape(1)
    if sc.ndim == 1:
        sc = np.stack([sc, sc], axis=-1)
    if sc.ndim != 2 or sc.shape[1] != 2:
        raise InputError(
            "source scale must have shape (cases,) or (cases, 2)",
            field=_name("source_scale", fn), value=sc.shape,
        )
    if not np.all(np.isfinite(sc)) or np.any(sc < 0):
        raise InputError(
            "source impedance factors must be finite and >= 0",
            field=_name("source_scale", fn), value=sc.tolist(),
        )
    return sc


def _check_sources(
    source_s: Source | None, source_r: Source | None, fn: Mapping[str, str] | None
) -> None:
    if source_s is None and source_r is None:
        raise InputError(
            "the line needs a source at one end at least",
            field=_name("source_s", fn), value=None,
        )


def _emfs(
    v_nominal_v: float,
    transfer_angle_rad: np.ndarray | float,
    emf_v: tuple[np.ndarray, np.ndarray] | None,
    n_cases: int,
    fn: Mapping[str, str] | None,
) -> tuple[np.ndarray, np.ndarray]:
    if not (math.isfinite(v_nominal_v) and v_nominal_v > 0):
        raise InputError("nominal voltage must be positive", field=_name("v_nominal_v", fn),
                         value=v_nominal_v)
    if emf_v is not None:
        e_s, e_r = (np.asarray(e, dtype=complex) for e in emf_v)
        e_s, e_r = np.broadcast_arrays(np.atleast_1d(e_s), np.atleast_1d(e_r))
        if e_s.ndim == 1:
            e_s, e_r = e_s[None], e_r[None]
        if e_s.ndim != 2 or e_s.shape[0] not in (1, n_cases):
            raise InputError("EMFs must have shape (load,) or (source cases, load)",
                             field=_name("emf_v", fn), value=e_s.shape)
        if not (np.all(np.isfinite(e_s)) and np.all(np.isfinite(e_r))):
            raise InputError("EMFs must be finite", field=_name("emf_v", fn))
        shape = (n_cases, e_s.shape[1])
        return np.broadcast_to(e_s, shape).copy(), np.broadcast_to(e_r, shape).copy()
    delta = np.atleast_1d(np.asarray(transfer_angle_rad, dtype=float))
    if delta.ndim != 1 or not np.all(np.isfinite(delta)):
        raise InputError("transfer angles must be a finite 1-D list",
                         field=_name("transfer_angle_rad", fn), value=delta.tolist())
    e = v_nominal_v / math.sqrt(3)
    e_s = np.broadcast_to(e * np.exp(1j * delta), (n_cases, delta.size)).copy()
    e_r = np.full((n_cases, delta.size), e, dtype=complex)
    return e_s, e_r


def _vt_line_side(line: LineCascade, t: np.ndarray, n: int, m: np.ndarray,
                  idx: np.ndarray) -> None:
    """Rows of the end voltages moved to the line side of a bus element whose relay VT is
    there (in place on the result rows ``t``, unknowns ``x = [V_F, I_L, I_R]``). For a
    fault beyond the element the current into the line flows through it first:
    :math:`V_{line} = V_{bus} - Z_e I`. For a fault at the bus (between the current
    transformer and the element) the element carries the current from the line into the
    fault: :math:`V_{line} = V_F + Z_e I_{R}` at S (:math:`V_F + Z_e I_{L}` at R). ``idx``:
    the conductors solved."""
    for el in line.elements:
        if not el.vt_line_side:
            continue
        ze = el.z_ohm[np.ix_(idx, idx)]
        at_s = el.at == 0.0
        v0, i0 = (0, n) if at_s else (2 * n, 3 * n)
        bus = (m == 0.0) if at_s else (m == 1.0)
        t[~bus, v0:v0 + n] -= ze @ t[~bus, i0:i0 + n]
        t[bus, v0:v0 + n] = 0.0
        t[bus, v0:v0 + n, 0:n] = np.eye(n)
        c0 = 2 * n if at_s else n  # the current from the line side into the fault
        t[bus, v0:v0 + n, c0:c0 + n] = ze


def _kept_circuits(line: LineCascade, states: Sequence[str], faulted: int) -> list[int]:
    """The circuits actually solved (0-based), ``states`` the state of each circuit after
    the first. Series-only, an isolated circuit other than the faulted one carries no
    current (no closed path: no charging, both ends open) and its floating voltages are of
    no interest, so it is dropped (exact: its zero current induces nothing)."""
    if line.y_s_per_m is not None:
        return list(range(len(states) + 1))
    return [0] + [c + 1 for c, st in enumerate(states)
                  if st != "isolated" or c + 1 == faulted]


# --------------------------------------------------------------------------------------
# Batched solver
# --------------------------------------------------------------------------------------


def _terminal(
    n: int,
    state: str,
    z_src: np.ndarray | None,
    emf: np.ndarray,
    z_ref: float,
    neighbour: NeighbourEnd | None = None,
    *,
    circuits: Sequence[tuple[str, NeighbourEnd | None]] | None = None,
) -> tuple[np.ndarray, np.ndarray]:
    """Terminal equations ``G @ [V; I] = g`` at one line end.

    Parameters: z_src (K, 3, 3) or None (open end), emf (K, L, 3). Returns G (K, n, 2n)
    and g (K, L, n). Current-only rows are multiplied by ``z_ref`` [ohm] so that every row
    is in volts (better pivoting).

    ``circuits`` gives, for every circuit after circuit 1 (n/3 - 1 of them), its state and
    its :class:`NeighbourEnd` at this end (None: the parallel circuit, on this bus when in
    service). ``state`` "open": circuit 1's breaker at this end is open (I1 = 0) and the
    parallel circuit alone is on the bus. Without ``circuits`` (the older form): six
    conductors take circuit 2 as the parallel circuit in ``state``, or as ``neighbour``
    in ``state`` where one is given.
    """
    if circuits is None:
        if n == 3:
            circuits = ()
        elif neighbour is not None:
            circuits, state = ((state, neighbour),), "in_service"
        else:
            circuits = (("in_service" if state == "open" else state, None),)
    n_k, n_l = emf.shape[:2]
    g_mat = np.zeros((n_k, n, 2 * n), dtype=complex)
    g_vec = np.zeros((n_k, n_l, n), dtype=complex)
    eye = np.eye(3)

    def v(c: int) -> slice:  # columns of circuit c's voltages (0-based circuit)
        return slice(3 * c, 3 * c + 3)

    def i(c: int) -> slice:  # columns of its currents
        return slice(n + 3 * c, n + 3 * c + 3)

    # Circuits on the bus itself (circuit 1 unless its breaker is open, the parallel
    # circuit in service) and neighbours tied to it through their routes.
    on_bus = [0] if state != "open" else []
    tied = []
    for c, (st, nb) in enumerate(circuits, start=1):
        if nb is None and st == "in_service":
            on_bus.append(c)
        elif nb is not None and nb.on_line_bus and st == "in_service":
            tied.append(c)
    ref = on_bus[0]
    if z_src is None:  # no source: the currents into the bus sum to zero
        for c in on_bus + tied:
            g_mat[:, v(ref), i(c)] = z_ref * eye
    else:  # V_bus + Zs (sum of I) = E
        g_mat[:, v(ref), v(ref)] = eye
        for c in on_bus + tied:
            g_mat[:, v(ref), i(c)] = z_src
        g_vec[..., v(ref)] = emf
    if state == "open":
        g_mat[:, v(0), i(0)] = z_ref * eye  # I1 = 0: the faulted circuit's breaker is open
    for c in on_bus[1:]:  # V_bus - V_c = 0
        g_mat[:, v(c), v(ref)] = eye
        g_mat[:, v(c), v(c)] = -eye
    for c, (st, nb) in enumerate(circuits, start=1):
        if c in on_bus:
            continue
        if c in tied:  # V_bus - V_c - Z_route I_c = 0
            g_mat[:, v(c), v(ref)] = eye
            g_mat[:, v(c), v(c)] = -eye
            g_mat[:, v(c), i(c)] = -nb.z_route_ohm
        elif nb is None:  # the parallel circuit out: earthed V = 0, isolated I = 0
            if st == "earthed":
                g_mat[:, v(c), v(c)] = eye
            else:
                g_mat[:, v(c), i(c)] = z_ref * eye
        elif st == "earthed":  # earthed at its own terminals, beyond its route
            g_mat[:, v(c), v(c)] = eye
            g_mat[:, v(c), i(c)] = nb.z_route_ohm
        elif st == "in_service" and nb.source is not None:  # V + (Z_route + Zs') I = E
            g_mat[:, v(c), v(c)] = eye
            g_mat[:, v(c), i(c)] = nb.z_route_ohm + nb.source.phase_matrix()
            g_vec[..., v(c)] = emf
        else:  # isolated, or an open end
            g_mat[:, v(c), i(c)] = z_ref * eye
    return g_mat, g_vec


def _circuit_states(
    line: LineCascade,
    parallel_state: str,
    neighbour: tuple[NeighbourEnd, NeighbourEnd] | None,
    neighbours: Sequence[tuple[NeighbourEnd, NeighbourEnd]] | None,
    neighbour_states: Sequence[str] | None,
    fn: Mapping[str, str] | None,
) -> tuple[str, list[tuple[str, tuple[NeighbourEnd, NeighbourEnd] | None]]]:
    """The state of circuit 1 (in service, or open at one end) and, per later circuit, its
    state and its ends (None: the parallel circuit), from the solver's arguments."""
    k = len(line.z_ohm_per_m[0]) // 3
    if neighbour is not None:  # the older form: circuit 2 of six is the neighbour
        if neighbours is not None:
            raise InputError("give neighbour or neighbours, not both",
                             field=_name("neighbour", fn))
        if k != 2 or len(neighbour) != 2 or parallel_state not in PARALLEL_STATES:
            raise InputError("a neighbouring line is circuit 2 of a six-conductor cascade, "
                             "in one of the states " + ", ".join(PARALLEL_STATES),
                             field=_name("neighbour", fn), value=parallel_state)
        neighbours, neighbour_states, parallel_state = (neighbour,), (parallel_state,), \
            "in_service"
    nbs = tuple(neighbours or ())
    sts = tuple(neighbour_states or ("in_service",) * len(nbs))
    n_par = k - 1 - len(nbs)
    if n_par not in (0, 1) or len(sts) != len(nbs) or any(len(e) != 2 for e in nbs):
        raise InputError(f"{k} circuit(s): the protected line's one or two and one pair of "
                         "ends and one state per neighbouring line",
                         field=_name("neighbours", fn), value=len(nbs))
    for st in sts:
        if st not in PARALLEL_STATES:
            raise InputError("unknown neighbour state; use one of "
                             + ", ".join(PARALLEL_STATES) + suggest(str(st), PARALLEL_STATES),
                             field=_name("neighbour_states", fn), value=st)
    if n_par == 0 and parallel_state != "in_service":
        raise InputError("a single-circuit line has no parallel circuit; leave the state at "
                         "its default", field=_name("parallel_state", fn),
                         value=parallel_state)
    first = parallel_state if parallel_state in OPEN_END_STATES else "in_service"
    par = "in_service" if parallel_state in OPEN_END_STATES else parallel_state
    later: list = [(par, None)] * n_par + list(zip(sts, nbs, strict=True))
    return first, later


def solve_fault_sweep(
    line: LineCascade,
    source_s: Source | None,
    source_r: Source | None,
    *,
    v_nominal_v: float,
    fault_types: Sequence[str],
    m: np.ndarray,
    r_fault_ohm: np.ndarray,
    r_phase_ohm: np.ndarray | float = 0.0,
    source_scale: np.ndarray | float = 1.0,
    transfer_angle_rad: np.ndarray | float = 0.0,
    parallel_state: str = "in_service",
    emf_v: tuple[np.ndarray, np.ndarray] | None = None,
    field_names: Mapping[str, str] | None = None,
    outputs: Collection[str] | None = None,
    z_branch_ohm: np.ndarray | None = None,
    neighbour: tuple[NeighbourEnd, NeighbourEnd] | None = None,
    fault_circuit: int = 1,
    neighbours: Sequence[tuple[NeighbourEnd, NeighbourEnd]] | None = None,
    neighbour_states: Sequence[str] | None = None,
) -> FaultSweep:
    """Solve every combination of fault type, location, resistance, source and load case.

    Parameters
    ----------
    line : LineCascade
        The protected line (phase order, circuit 1 faulted).
    source_s, source_r : Source or None
        Sources at bus S and bus R; None is an open end. One at least.
    v_nominal_v : float
        Nominal line-to-line voltage [V]; EMF magnitude is ``v_nominal_v/sqrt(3)``.
    fault_types : sequence of str
        Fault types from :data:`FAULT_TYPES`.
    m : (M,) array
        Fault locations on circuit 1 as fractions of the line from S [1], in [0, 1].
    r_fault_ohm : (Rf,) array
        Fault resistances to ground [ohm], >= 0.
    r_phase_ohm : float or (Rf,) array
        Phase-to-phase fault resistance [ohm], >= 0; an array pairs element-wise with
        ``r_fault_ohm`` (same r_fault axis).
    source_scale : (K,) or (K, 2) array
        Source cases: factor on both source impedances, or separate factors on the S and
        R source impedances [1], >= 0 (0 = infinite bus).
    transfer_angle_rad : (L,) array
        Load cases: angle by which the S EMF leads the R EMF [rad] (positive: power flows
        S to R). Both EMFs have the nominal magnitude.
    parallel_state : str
        The parallel circuit's state (double-circuit lines only): one of
        :data:`PARALLEL_STATES`, or
        one of :data:`OPEN_END_STATES` (sequential clearing: both circuits in service,
        the faulted circuit 1 open at one end). The EMFs are then those given (e.g. of the
        load flow with both circuits closed): the sources do not change while a breaker
        opens, the prefault state solved is the network with the breaker open.
    emf_v : (e_s, e_r), optional
        Phase-A EMF phasors [V], shape (L,) or (K, L), e.g. from
        :func:`~relayset.physics.loadflow.emfs_for_load`; replaces ``transfer_angle_rad``.
    field_names : mapping, optional
        Names to use in :class:`~relayset.errors.InputError` for the parameters above
        (e.g. ``{"m": "reach_study.fault_locations"}``).
    outputs : collection of str, optional
        Per-case results to form, from :data:`SWEEP_OUTPUTS` (default all); the others are
        None in the result. ``i_fault`` and the prefault quantities are always formed.
    z_branch_ohm : (M, 3, 3) complex array, optional
        Per location, the phase impedance matrix [ohm] of a series branch between the line
        point and the fault (e.g. a stretch of a radial line leaving a bus, carrying the
        fault current only): the fault is then at the branch's far end. Exact for a
        series branch without shunt admittance and without source or load beyond it:
        with :math:`V_{F'} = V_F - Z_b I_f = V_{pre} - (Z_{th} + Z_b) I_f` the fault
        constraints see the Thevenin matrix :math:`Z_{th} + Z_b`. ``v_f`` stays the line
        point's voltage; ``i_fault`` is the branch current into the fault.
    neighbour : (NeighbourEnd, NeighbourEnd), optional
        Six conductors only (the older form of ``neighbours``): circuit 2 is a neighbouring
        line on its own buses (a shared corridor), at the S end and at the R end of the
        cascade; ``parallel_state`` is its state (:data:`PARALLEL_STATES`).
    fault_circuit : int
        The circuit faulted at ``m``, 1 (default) to n/3 (a later one: in service, e.g. a
        neighbouring line's fault, external to the protected circuit 1). ``v_f``,
        ``i_f_from_s`` and ``i_f_from_r`` are then that circuit's.
    neighbours : sequence of (NeighbourEnd, NeighbourEnd), optional
        The neighbouring lines (shared corridors), one pair of ends (S, R) each: the last
        circuits of the cascade in this order, after the protected line's one or two.
        The relay quantities stay circuit 1's; ``i_*_parallel`` are circuit 2's.
    neighbour_states : sequence of str, optional
        The state of each neighbour (:data:`PARALLEL_STATES`; default all in service).

    Returns
    -------
    FaultSweep
        Arrays with axes (fault_type, m, r_fault, source_case, load_case, phase).
    """
    fn = field_names
    known = PARALLEL_STATES + OPEN_END_STATES
    if parallel_state not in known:
        _check_state(line, parallel_state, fn, open_end=True)
    first, later = _circuit_states(line, parallel_state, neighbour, neighbours,
                                   neighbour_states, fn)
    _check_sources(source_s, source_r, fn)
    ftypes = tuple(fault_types)
    if not ftypes:
        raise InputError("give one fault type at least", field=_name("fault_types", fn))
    for ft in ftypes:
        check_fault_type(ft, _name("fault_types", fn))
    m = _check_locations(m, fn)
    rf = np.atleast_1d(check_resistance(r_fault_ohm, _name("r_fault_ohm", fn)))
    rp = check_resistance(r_phase_ohm, _name("r_phase_ohm", fn))
    if rf.ndim != 1 or rp.ndim > 1 or (rp.ndim == 1 and rp.shape != rf.shape):
        raise InputError("phase resistance must be one value or one per fault resistance",
                         field=_name("r_phase_ohm", fn), value=np.shape(rp))
    rp = np.broadcast_to(rp, rf.shape).copy()
    scale = _check_scale(source_scale, fn)
    e_s, e_r = _emfs(v_nominal_v, transfer_angle_rad, emf_v, scale.shape[0], fn)
    z_b = None if z_branch_ohm is None else _check_branch(z_branch_ohm, m.size, fn)
    n_circ = len(later) + 1
    if (not isinstance(fault_circuit, (int, np.integer)) or not 1 <= fault_circuit <= n_circ
            or (fault_circuit > 1 and later[fault_circuit - 2][0] != "in_service")):
        raise InputError(f"the faulted circuit is 1, or another of the {n_circ} circuits "
                         "in service", field=_name("fault_circuit", fn), value=fault_circuit)

    kept = _kept_circuits(line, [st for st, _nb in later], fault_circuit - 1)
    idx = np.array([3 * c + p for c in kept for p in range(3)])
    z, y = line.z_ohm_per_m, line.y_s_per_m
    if len(kept) < n_circ:
        z = z[:, idx[:, None], idx[None, :]]
    n = z.shape[-1]
    circuits = [later[c - 1] for c in kept[1:]]
    pos = {c: 3 * k for k, c in enumerate(kept)}  # first row of each kept circuit
    n_m, n_k, n_l = m.size, scale.shape[0], e_s.shape[1]
    z_ref = float(np.max(np.abs(line.z_total_ohm)))

    # (M, 2n, 2n) each; memory bounded in the number of sections
    if line.elements:
        phi_l, phi_r = element_fault_chain_products(
            z, y, line.length_m, m, np.array([e.at for e in line.elements]),
            np.array([e.z_ohm[np.ix_(idx, idx)] for e in line.elements]))
    else:
        phi_l, phi_r = fault_chain_products(z, y, line.length_m, m)
    zs = None if source_s is None else source_s.phase_matrix(scale[:, 0])
    zr = None if source_r is None else source_r.phase_matrix(scale[:, 1])
    # Sequential clearing: the open end's terminal is "open", the other end in service.
    st_l = st_r = "in_service"
    if first in OPEN_END_STATES:
        st_l, st_r = (("open", "in_service") if first == OPEN_END_STATES[0]
                      else ("in_service", "open"))
    g_l, b_l = _terminal(n, st_l, zs, _balanced(e_s), z_ref, circuits=[
        (st, None if nb is None else nb[0]) for st, nb in circuits])
    g_r, b_r = _terminal(n, st_r, zr, _balanced(e_r), z_ref, circuits=[
        (st, None if nb is None else nb[1]) for st, nb in circuits])
    off = pos[fault_circuit - 1]  # the faulted circuit's first conductor

    # System in x = [V_F, I_L, I_R] (3n) for each (m, source case).
    w_l = g_l[None] @ phi_l[:, None]  # (M, K, n, 2n): terminal rows in fault-point terms
    w_r = g_r[None] @ phi_r[:, None]
    a = np.zeros((n_m, n_k, 3 * n, 3 * n), dtype=complex)
    a[..., :n, :n] = w_l[..., :n]
    a[..., :n, n:2 * n] = w_l[..., n:]
    a[..., n:2 * n, :n] = w_r[..., :n]
    a[..., n:2 * n, 2 * n:] = w_r[..., n:]
    a[..., 2 * n:, n:2 * n] = z_ref * np.eye(n)  # KCL at the fault point
    a[..., 2 * n:, 2 * n:] = z_ref * np.eye(n)
    rhs = np.zeros((n_m, n_k, 3 * n, n_l + 3), dtype=complex)
    rhs[..., :n, :n_l] = np.swapaxes(b_l, -1, -2)[None]
    rhs[..., n:2 * n, :n_l] = np.swapaxes(b_r, -1, -2)[None]
    rhs[..., 2 * n + off:2 * n + off + 3, n_l:] = z_ref * np.eye(3)  # unit current into each
    # fault phase
    x = np.linalg.solve(a, rhs)  # (M, K, 3n, L + 3)

    # Rows of T (M, 7n, 3n) map x to the line-end and fault-point quantities; only the
    # fault-point voltages and the requested outputs are formed.
    t = np.zeros((n_m, 7 * n, 3 * n), dtype=complex)
    t[:, 0:n, 0:n] = phi_l[:, :n, :n]
    t[:, 0:n, n:2 * n] = phi_l[:, :n, n:]
    t[:, n:2 * n, 0:n] = phi_l[:, n:, :n]
    t[:, n:2 * n, n:2 * n] = phi_l[:, n:, n:]
    t[:, 2 * n:3 * n, 0:n] = phi_r[:, :n, :n]
    t[:, 2 * n:3 * n, 2 * n:] = phi_r[:, :n, n:]
    t[:, 3 * n:4 * n, 0:n] = phi_r[:, n:, :n]
    t[:, 3 * n:4 * n, 2 * n:] = phi_r[:, n:, n:]
    t[:, 4 * n:, :] = np.eye(3 * n)
    _vt_line_side(line, t, n, m, idx)
    # The bus voltage is circuit 1's end voltage, but circuit 2's where circuit 1 is open.
    bus_s, bus_r = 3 * (st_l == "open"), 3 * (st_r == "open")
    starts = {"v_s": bus_s, "i_s": n, "i_s_parallel": n + 3, "v_r": 2 * n + bus_r,
              "i_r": 3 * n,
              "i_r_parallel": 3 * n + 3, "v_f": 4 * n + off, "i_f_from_s": 5 * n + off,
              "i_f_from_r": 6 * n + off}
    wanted = _check_outputs(outputs, fn)
    # circuit 2's currents where it is solved (zeros where it was dropped or absent)
    two = 1 in kept
    blocks = [k for k in starts if k in wanted and (two or not k.endswith("parallel"))]
    rows = np.concatenate([np.arange(4 * n + off, 4 * n + off + 3)]
                          + [np.arange(starts[k], starts[k] + 3) for k in blocks])
    out = t[:, None, rows] @ x  # (M, K, 3 + 3B, L + 3)
    # Internal layout: phase axes first and the location axis last, cases as
    # (Rf, K, L, M), so that every element-wise step runs over contiguous locations; the
    # result fields are views with the documented axis order.
    n_b = len(blocks)
    def tr(a: np.ndarray, axes: tuple[int, ...]) -> np.ndarray:  # transposed copy
        return np.ascontiguousarray(np.transpose(a, axes))

    z_th = -tr(out[..., :3, n_l:], (2, 3, 1, 0))[:, :, None, :, None, :]
    if z_b is not None:  # the fault beyond a series branch (see the parameters)
        z_th = z_th + np.transpose(z_b, (1, 2, 0))[:, :, None, None, None, :]
    v_pre = tr(out[..., :3, :n_l], (2, 1, 3, 0))[:, None]  # (3, 1, K, L, M)
    pre_o = tr(out[..., 3:, :n_l].reshape(n_m, n_k, n_b, 3, n_l),
               (2, 3, 1, 4, 0))[:, :, None]  # (B, 3, 1, K, L, M)
    sens_o = tr(out[..., 3:, n_l:].reshape(n_m, n_k, n_b, 3, 3),
                (4, 2, 3, 1, 0))[..., None, :, None, :]  # (j, B, 3, 1, K, 1, M)
    res = np.empty((n_b, 3, len(ftypes), rf.size, n_k, n_l, n_m), dtype=complex)
    i_fault = np.zeros((3, len(ftypes), rf.size, n_k, n_l, n_m), dtype=complex)
    rf_b, rp_b = rf[:, None, None, None], rp[:, None, None, None]
    for f, ft in enumerate(ftypes):  # loop over the (ten) fault types only
        try:
            cur = fault_currents(ft, z_th, v_pre, rf_b, rp_b)  # (Rf, K, L, M) per phase
        except np.linalg.LinAlgError:
            raise InputError(
                "a bolted fault at a bus with zero source impedance has no finite current",
                field=_name("source_scale", fn), value=scale.tolist(),
            ) from None
        phases, ground = check_fault_type(ft)
        if len(phases) == 2 and not ground:  # I_q = -I_p: one term
            p, q = phases
            terms = [(sens_o[p] - sens_o[q], cur[p])]
        else:
            terms = [(sens_o[j], cur[j]) for j in phases]
        for j in phases:
            i_fault[j, f] = cur[j]
        tgt = res[:, :, f]
        np.multiply(terms[0][0], terms[0][1], out=tgt)
        for sens_j, c in terms[1:]:
            tgt += sens_j * c
        tgt += pre_o

    def view(a: np.ndarray) -> np.ndarray:  # (3, F, Rf, K, L, M) -> (F, M, Rf, K, L, 3)
        return np.transpose(a, (1, 5, 2, 3, 4, 0))

    # Circuit 2 of a single-circuit line carries nothing: a read-only zero view, no memory.
    zeros = np.broadcast_to(np.zeros((), dtype=complex), (len(ftypes), n_m, rf.size, n_k,
                                                          n_l, 3))
    fields = {k: view(res[blocks.index(k)]) if k in blocks else zeros
              for k in starts if k in wanted}
    pre0 = np.swapaxes(t[0, None, :2 * n] @ x[0, :, :, :n_l], -1, -2)  # (K, L, 2n)
    pre_r = np.swapaxes(t[0, None, 2 * n:3 * n + 3] @ x[0, :, :, :n_l], -1, -2)  # V_R, I_R
    return FaultSweep(
        fault_types=ftypes,
        m=m,
        r_fault_ohm=rf,
        r_phase_ohm=rp,
        source_scale=scale,
        emf_s_v=e_s,
        emf_r_v=e_r,
        parallel_state=parallel_state,
        v_s=fields.get("v_s"),
        i_s=fields.get("i_s"),
        i_s_parallel=fields.get("i_s_parallel"),
        v_r=fields.get("v_r"),
        i_r=fields.get("i_r"),
        i_r_parallel=fields.get("i_r_parallel"),
        v_f=fields.get("v_f"),
        i_fault=view(i_fault),
        i_f_from_s=fields.get("i_f_from_s"),
        i_f_from_r=fields.get("i_f_from_r"),
        v_s_pre=np.ascontiguousarray(pre0[..., bus_s:bus_s + 3]),
        i_s_pre=np.ascontiguousarray(pre0[..., n:n + 3]),
        i_s_parallel_pre=(
            np.ascontiguousarray(pre0[..., n + 3:n + 6])
            if two else np.zeros((*pre0.shape[:-1], 3), dtype=complex)
        ),
        v_r_pre=np.ascontiguousarray(pre_r[..., bus_r:bus_r + 3]),
        i_r_pre=np.ascontiguousarray(pre_r[..., n:n + 3]),
    )


#: Names of the per-case results of :func:`solve_fault_sweep` that ``outputs`` may select.
SWEEP_OUTPUTS: tuple[str, ...] = (
    "v_s", "i_s", "i_s_parallel", "v_r", "i_r", "i_r_parallel", "v_f", "i_f_from_s",
    "i_f_from_r",
)


def _check_outputs(outputs: Collection[str] | None, fn: Mapping[str, str] | None) -> set[str]:
    if outputs is None:
        return set(SWEEP_OUTPUTS)
    bad = [o for o in outputs if o not in SWEEP_OUTPUTS]
    if bad:
        raise InputError(f"unknown output; use some of {', '.join(SWEEP_OUTPUTS)}"
                         + suggest(str(bad[0]), SWEEP_OUTPUTS),
                         field=_name("outputs", fn), value=bad[0])
    return set(outputs)

