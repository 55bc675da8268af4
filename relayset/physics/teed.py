r"""Phase-domain short-circuit solver for a three-terminal (teed) line.

The network is three legs meeting at a tee point: bus S -- tee, bus R -- tee and
bus T -- tee. Each leg is a :class:`~relayset.physics.network.LineCascade` with its
sections (overhead or cable) ordered from its bus towards the tee. The branch (leg T)
carries three conductors; the legs from S and R three, or six on a double-circuit line:
circuit 1 is tapped at the tee, circuit 2 runs through it untapped between the buses S
and R, in service (on the same buses as circuit 1), out and earthed at both ends, or out
and isolated (:data:`~relayset.physics.network.PARALLEL_STATES`). Each bus has a
Thevenin source (:class:`~relayset.physics.network.Source`), no source (open end) or a
grounded-star transformer (:class:`GroundedTransformer`, a zero-sequence source only).

Method
------
Every leg part is represented by its chain matrix [1]_

.. math:: \begin{bmatrix}V_0\\I_0\end{bmatrix} = \Phi
          \begin{bmatrix}V_x\\I_x\end{bmatrix},\qquad
          \Phi = \exp\begin{bmatrix}0 & Z\ell\\ Y\ell & 0\end{bmatrix}

from :mod:`relayset.physics.chain`. Each bus obeys terminal equations
:math:`G_v V + G_i I = g` (I into the leg), written as in
:mod:`relayset.physics.network` (source :math:`V + Z_s I = E`, open end :math:`I = 0`,
and circuit 2's state); a grounded-star transformer of zero-sequence impedance
:math:`Z_0` passes no positive- or negative-sequence current and
:math:`V_0 + Z_0 I_0 = 0`, i.e. with the zero-sequence projector
:math:`P_0 = \tfrac13\mathbf 1\mathbf 1^T`

.. math:: P_0 V + \left(Z_0 P_0 + z_{ref}(I - P_0)\right) I = 0.

The tee's node voltages U are circuit 1's and, on a double circuit, circuit 2's; a leg's
conductors at the tee are :math:`C_k U` (:math:`C_k` the first :math:`n_k` rows of the
identity). A healthy leg h runs whole from its bus to the tee (:math:`\Phi_h`); its
terminal equations :math:`G_h \Phi_h [C_h U; I_h] = g_h` give the current it delivers to
the tee, :math:`I_h = a_h + B_h U`, so KCL at the tee gives the current leaving the tee
into the faulted leg f, :math:`C_f^T I_{Tf} = Y U + J` with
:math:`Y = \sum_h C_h^T B_h`, :math:`J = \sum_h C_h^T a_h` (per source case). With the
branch faulted on a double circuit, circuit 2's tee nodes carry no other current:
:math:`Y_{21} V_T + Y_{22} U_2 + J_2 = 0` eliminates :math:`U_2` (a Schur complement).
The faulted leg is then a two-ended line with the terminal
:math:`I_{Tf} - Y_t V_T = J_t` at its tee end, split at the fault point F
(:math:`\Phi_a` from its bus to F, :math:`\Phi_b` from the tee to F):

.. math::
    G_f \Phi_a \begin{bmatrix}V_F\\I_a\end{bmatrix} = g_f, \qquad
    [-Y_t,\ 1]\, \Phi_b \begin{bmatrix}V_F\\I_b\end{bmatrix} = J_t, \qquad
    I_a + I_b = I_{inj}\quad\text{(KCL at F)}.

One batched solve of :math:`3 n_f` unknowns per (location, source case) gives the
prefault state of every load case (:math:`I_{inj} = 0`) and the response to a unit
current into each fault phase, hence the Thevenin matrix :math:`Z_{th}` at F; every fault
type and resistance then follows from :func:`relayset.physics.faults.fault_currents` and
superposition, as in :func:`relayset.physics.network.solve_fault_sweep`. Series-only with
circuit 2 isolated, circuit 2 carries no current and floats: it is dropped, as
:func:`relayset.physics.network.solve_fault_sweep` does. Lumped series elements of a leg
(:class:`~relayset.physics.network.SeriesElement`, e.g. capacitor banks; ``from_line``
places the line's on the leg they sit on) enter its chain matrices as
:math:`[[1, Z_e], [0, 1]]` (:func:`relayset.physics.chain.element_fault_chain_products`),
and a relay VT on the line side of an element at its bus reads the line-side voltage,
both as in the two-ended solver.

References
----------
.. [1] C. R. Paul, *Analysis of Multiconductor Transmission Lines*, 2nd ed. Hoboken, NJ,
   USA: Wiley, 2008, ch. 7 (chain-parameter matrix).
.. [2] C. L. Fortescue, "Method of symmetrical co-ordinates applied to the solution of
   polyphase networks," Trans. AIEE, vol. 37, pp. 1027-1140, 1918.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass

import numpy as np

from relayset.errors import InputError, suggest
from relayset.physics.chain import (
    element_fault_chain_products,
    fault_chain_products,
    split_lengths,
)
from relayset.physics.faults import check_fault_type, check_resistance, fault_currents
from relayset.physics.network import (
    PARALLEL_STATES,
    LineCascade,
    SeriesElement,
    Source,
    _balanced,
    _check_branch,
    _check_locations,
    _check_state,
    _name,
    _terminal,
)

__all__ = ["ENDS", "GroundedTransformer", "TeedLine", "TeedSweep", "parallel_label",
           "parallel_states", "solve_teed_sweep"]

#: The three line ends (buses), in the order of every per-end axis.
ENDS: tuple[str, ...] = ("S", "R", "T")


@dataclass(frozen=True)
class GroundedTransformer:
    """A grounded-star transformer winding at a bus: a zero-sequence source only.

    Parameters
    ----------
    z0_ohm : complex
        Zero-sequence impedance to ground [ohm], finite, real part >= 0.
    """

    z0_ohm: complex

    def __post_init__(self) -> None:
        z = complex(self.z0_ohm)
        if not (math.isfinite(z.real) and math.isfinite(z.imag)) or z.real < 0:
            raise InputError("zero-sequence impedance must be finite with resistance >= 0",
                             field="z0_ohm", value=z)
        object.__setattr__(self, "z0_ohm", z)


Terminal = Source | GroundedTransformer | None


@dataclass(frozen=True, eq=False)
class TeedLine:
    """The three legs of a teed line, each from its bus to the tee.

    Parameters
    ----------
    legs : tuple of three LineCascade
        Legs from bus S, bus R and bus T to the tee, sections in order from the bus. The
        legs from S and R carry three conductors, or six on a double-circuit line
        (circuit 1 A, B, C, then circuit 2): circuit 1 is tapped at the tee, circuit 2
        runs through it untapped. The branch (from T) carries three.
    """

    legs: tuple[LineCascade, LineCascade, LineCascade]

    def __post_init__(self) -> None:
        legs = tuple(self.legs)
        if len(legs) != 3:
            raise InputError("a teed line has three legs", field="legs", value=len(legs))
        n_s, n_r, n_t = (leg.n_conductors for leg in legs)
        if n_s != n_r or n_t != 3:
            raise InputError(
                "a teed line's legs from bus S and bus R carry the same circuits (one, or "
                "two with the untapped parallel circuit) and the branch one circuit",
                field="legs", value=[n_s, n_r, n_t])
        object.__setattr__(self, "legs", legs)

    @property
    def n_conductors(self) -> int:
        """Conductors of the legs from bus S and bus R: 3, or 6 with the parallel circuit."""
        return self.legs[0].n_conductors

    @classmethod
    def from_line(cls, line: LineCascade, tee_m: float, branch: LineCascade) -> TeedLine:
        """Split a line S -> R at ``tee_m`` [m] from bus S; ``branch`` runs tee -> bus T.

        The S leg keeps the sections up to the tee; the R leg is the rest in reverse order
        (from bus R); the branch is reversed to run from bus T. A double-circuit line (six
        conductors) is tapped on circuit 1; circuit 2 runs through the tee.
        """
        if branch.n_conductors != 3:
            raise InputError("the branch of a teed line carries one circuit (three "
                             "conductors)", field="tee", value=branch.n_conductors)
        total = line.total_length_m
        if not (0 < tee_m < total):
            raise InputError("the tee must lie inside the line", field="tee", value=tee_m)
        left, right = split_lengths(line.length_m, np.array([tee_m / total]))
        y = line.y_s_per_m
        ls, rs = np.flatnonzero(left[0] > 0), np.flatnonzero(right[0] > 0)[::-1]
        # Lumped series elements (banks) go to the leg they sit on, placed from its bus.
        el_s, el_r = [], []
        for el in line.elements:
            x = el.at * total
            if math.isclose(x, tee_m, rel_tol=1e-12, abs_tol=1e-9):
                raise InputError("a series element exactly at the tee belongs to no leg: "
                                 "place it on one side", field="elements", value=el.at)
            if x < tee_m:
                el_s.append(SeriesElement(x / tee_m, el.z_ohm, el.vt_line_side))
            else:
                el_r.append(SeriesElement((total - x) / (total - tee_m), el.z_ohm,
                                          el.vt_line_side))
        leg_s = LineCascade(line.z_ohm_per_m[ls], left[0, ls],
                            None if y is None else y[ls], tuple(el_s))
        leg_r = LineCascade(line.z_ohm_per_m[rs], right[0, rs],
                            None if y is None else y[rs], tuple(el_r))
        yb = branch.y_s_per_m
        leg_t = LineCascade(branch.z_ohm_per_m[::-1], branch.length_m[::-1],
                            None if yb is None else yb[::-1],
                            tuple(SeriesElement(1.0 - el.at, el.z_ohm, el.vt_line_side)
                                  for el in branch.elements))
        return cls((leg_s, leg_r, leg_t))


@dataclass(frozen=True, eq=False)
class TeedSweep:
    """Results of :func:`solve_teed_sweep`.

    Fault quantities have axes ``(fault_type, m, r_fault, source_case, load_case, phase)``;
    the per-end ones are dicts keyed by the end name in :data:`ENDS`. Currents at an end
    flow into the leg from that bus; ``i_fault`` flows from the fault point into the fault.
    Prefault quantities have axes ``(source_case, load_case, phase)``.
    """

    fault_types: tuple[str, ...]
    fault_leg: str  #: leg of the fault (its bus name)
    m: np.ndarray  #: (M,) fault locations [1], fraction of the leg from its bus to the tee
    r_fault_ohm: np.ndarray  #: (Rf,) [ohm]
    r_phase_ohm: np.ndarray  #: (Rf,) [ohm]
    source_scale: np.ndarray  #: (K, 3) factors on the S, R, T source impedances [1]
    emf_v: np.ndarray  #: (3, K, L) phase-A EMFs of the S, R, T sources [V]
    v: dict[str, np.ndarray]  #: bus voltages per end
    i: dict[str, np.ndarray]  #: currents into the line per end
    v_f: np.ndarray  #: voltages at the fault point
    i_fault: np.ndarray
    v_pre: dict[str, np.ndarray]  #: (K, L, 3) prefault bus voltages per end
    i_pre: dict[str, np.ndarray]  #: (K, L, 3) prefault currents per end
    #: circuit 2 currents into the line at S and R (zeros at T and on a single circuit)
    i_parallel: dict[str, np.ndarray] | None = None
    i_parallel_pre: dict[str, np.ndarray] | None = None  #: (K, L, 3) their prefault values
    parallel_state: str = "in_service"  #: circuit 2's state (network.PARALLEL_STATES)
    fault_circuit: int = 1  #: the faulted circuit (2: the untapped parallel circuit)


def _transformer_terminal(n: int, state: str, n_k: int, n_l: int, z0: complex,
                          z_ref: float) -> tuple[np.ndarray, np.ndarray]:
    """Terminal equations of a grounded-star transformer (see the module text); on six
    conductors circuit 2 is on the same bus (in service), earthed or isolated there."""
    p0 = np.full((3, 3), 1.0 / 3.0)
    zt = z0 * p0 + z_ref * (np.eye(3) - p0)
    g = np.zeros((n_k, n, 2 * n), dtype=complex)
    g[:, :3, :3] = p0
    g[:, :3, n:n + 3] = zt
    if n == 6:
        eye = np.eye(3)
        if state == "in_service":  # V1 = V2 and the transformer takes I1 + I2
            g[:, :3, 9:12] = zt
            g[:, 3:, 0:3] = eye
            g[:, 3:, 3:6] = -eye
        elif state == "earthed":
            g[:, 3:, 3:6] = eye
        else:
            g[:, 3:, 9:12] = z_ref * eye
    return g, np.zeros((n_k, n_l, n), dtype=complex)


def _check_scale3(scale: np.ndarray | float, fn: Mapping[str, str] | None) -> np.ndarray:
    sc = np.asarray(scale, dtype=float)
    if sc.ndim == 0:
        sc = sc.reshape(1)
    if sc.ndim == 1:
        sc = np.stack([sc] * 3, axis=-1)
    if sc.ndim != 2 or sc.shape[1] != 3 or not np.all(np.isfinite(sc)) or np.any(sc < 0):
        raise InputError("source scale must be >= 0, shape (cases,) or (cases, 3)",
                         field=_name("source_scale", fn), value=sc.tolist())
    return sc


def _check_emfs(v_nominal_v: float, emf_v: Sequence[np.ndarray] | None, n_k: int,
                fn: Mapping[str, str] | None) -> np.ndarray:
    """(3, K, L) phase-A EMFs; default one load case, all at nominal magnitude, angle 0."""
    if not (math.isfinite(v_nominal_v) and v_nominal_v > 0):
        raise InputError("nominal voltage must be positive", field=_name("v_nominal_v", fn),
                         value=v_nominal_v)
    if emf_v is None:
        return np.full((3, n_k, 1), v_nominal_v / math.sqrt(3), dtype=complex)
    if len(emf_v) != 3:
        raise InputError("give the EMFs of the S, R and T sources",
                         field=_name("emf_v", fn), value=len(emf_v))
    arrs = np.broadcast_arrays(*(np.atleast_1d(np.asarray(e, dtype=complex))
                                 for e in emf_v))
    e = np.stack(arrs)
    if e.ndim == 2:
        e = e[:, None]
    if e.ndim != 3 or e.shape[1] not in (1, n_k) or not np.all(np.isfinite(e)):
        raise InputError("EMFs must be finite, shape (load,) or (source cases, load)",
                         field=_name("emf_v", fn), value=e.shape)
    return np.broadcast_to(e, (3, n_k, e.shape[2])).copy()


def parallel_states(line: TeedLine) -> tuple[str, ...]:
    """The states of the untapped parallel circuit to solve: every one of
    :data:`~relayset.physics.network.PARALLEL_STATES` on a double-circuit line, only
    "in_service" (none) on a single circuit."""
    return PARALLEL_STATES if line.n_conductors == 6 else ("in_service",)


def parallel_label(line: TeedLine, state: str) -> str:
    """``", parallel circuit STATE"`` of a double-circuit line's case label (empty on a
    single circuit)."""
    return "" if line.n_conductors != 6 else f", parallel circuit {state.replace('_', ' ')}"


def _leg_chains(z, y, length_m, m, elements) -> tuple[np.ndarray, np.ndarray]:
    """Chain matrices of a leg from its bus to each location m and from the tee to it,
    its lumped elements included (:func:`~relayset.physics.chain.element_fault_chain_products`:
    a fault at m = 0 lies on the bus side of an element at the bus)."""
    if not elements:
        return fault_chain_products(z, y, length_m, m)
    return element_fault_chain_products(z, y, length_m, m,
                                        np.array([e.at for e in elements]),
                                        np.array([e.z_ohm for e in elements]))


def _vt_line_side(out, x, elems, order, nf, per, m) -> None:
    """The bus voltage rows of ``out`` moved to the line side of an element at a leg's bus
    whose relay VT is there (in place), as :func:`relayset.physics.network.solve_fault_sweep`
    does: :math:`V_{line} = V_{bus} - Z_e I` with I the currents of the leg's conductors
    into it; for a fault at that bus (m = 0 of the faulted leg, between the current
    transformer and the element) the element carries the current from the line side into
    the fault: :math:`V_{line} = V_F + Z_e I_b`."""
    for r, k in enumerate(order):
        for el in elems[k]:
            if not (el.vt_line_side and el.at == 0.0):
                continue
            n = el.z_ohm.shape[0]
            ze = el.z_ohm[:3]  # circuit 1's rows (the relay's voltages)
            rv = 3 + per * r
            cur = out[:, :, rv + 3:rv + 3 + n]  # I1 (and I2) at the bus, into the leg
            bus = (m == 0.0) if r == 0 else np.zeros(m.shape, dtype=bool)
            out[~bus, :, rv:rv + 3] -= ze @ cur[~bus]
            if np.any(bus):
                out[bus, :, rv:rv + 3] = x[bus][:, :, 0:3] + ze @ x[bus][:, :, 2 * nf:3 * nf]


def _incidence(n: int, n_u: int) -> np.ndarray:
    """(n, n_u) map from the tee's node voltages (circuit 1, then circuit 2 running
    through) to a leg's conductors there."""
    return np.eye(n, n_u)


def solve_teed_sweep(
    line: TeedLine,
    sources: Sequence[Terminal],
    *,
    v_nominal_v: float,
    fault_leg: str,
    fault_types: Sequence[str],
    m: np.ndarray,
    r_fault_ohm: np.ndarray,
    r_phase_ohm: np.ndarray | float = 0.0,
    source_scale: np.ndarray | float = 1.0,
    emf_v: Sequence[np.ndarray] | None = None,
    field_names: Mapping[str, str] | None = None,
    z_branch_ohm: np.ndarray | None = None,
    parallel_state: str = "in_service",
    fault_circuit: int = 1,
    parallel_currents: bool = False,
) -> TeedSweep:
    """Solve every fault type, location on one leg, resistance, source and load case.

    Parameters
    ----------
    line : TeedLine
        The three legs.
    sources : sequence of three Source, GroundedTransformer or None
        Terminals at bus S, R and T (None: open end); one Source at least.
    v_nominal_v : float
        Nominal line-to-line voltage [V] (default EMF magnitude ``v_nominal_v/sqrt(3)``).
    fault_leg : str
        The faulted leg, named by its bus: one of :data:`ENDS`.
    fault_types : sequence of str
        Fault types from :data:`~relayset.physics.faults.FAULT_TYPES`.
    m : (M,) array
        Fault locations as fractions of the leg from its bus (0) to the tee (1) [1].
    r_fault_ohm : (Rf,) array
        Fault resistances to ground [ohm], >= 0.
    r_phase_ohm : float or (Rf,) array
        Phase-to-phase fault resistance [ohm], >= 0, paired with ``r_fault_ohm``.
    source_scale : (K,) or (K, 3) array
        Source cases: factors on the source impedances (all, or S, R, T) [1], >= 0.
    emf_v : three arrays (L,) or (K, L), optional
        Phase-A EMFs of the S, R, T sources [V] (e.g. a load flow's); default one case
        of nominal EMFs in phase (no load). EMFs of terminals without a Source are unused.
    field_names : mapping, optional
        Names to use in :class:`~relayset.errors.InputError` for the parameters above.
    z_branch_ohm : (M, 3, 3) complex array, optional
        Per location, a series branch between the leg point and the fault (e.g. part of a
        line leaving the bus at m = 0, carrying the fault current only), exactly as in
        :func:`relayset.physics.network.solve_fault_sweep`: the fault constraints see
        :math:`Z_{th} + Z_b`; ``v_f`` stays the leg point's voltage.
    parallel_state : str
        Double-circuit line only: the untapped circuit 2, one of
        :data:`~relayset.physics.network.PARALLEL_STATES`: in service (on the same buses
        S and R as circuit 1), out and earthed at both ends, or out and isolated, exactly
        as :func:`relayset.physics.network.solve_fault_sweep` takes it.
    fault_circuit : int
        1 (default) or 2: the circuit faulted at ``m`` (2: the parallel circuit in
        service, on leg S or R; ``v_f`` and ``i_fault`` are then circuit 2's).
    parallel_currents : bool
        Form circuit 2's currents at S and R per case (``i_parallel``, e.g. for mutual
        compensation); otherwise ``i_parallel`` is None (its prefault values are always
        formed).

    Returns
    -------
    TeedSweep
    """
    fn = field_names
    terms = tuple(sources)
    if len(terms) != 3:
        raise InputError("give the terminals at bus S, R and T", field=_name("sources", fn),
                         value=len(terms))
    if not any(isinstance(t, Source) for t in terms):
        raise InputError("the line needs a source at one end at least",
                         field=_name("sources", fn), value=None)
    if fault_leg not in ENDS:
        raise InputError(f"unknown leg; use one of {', '.join(ENDS)}"
                         + suggest(str(fault_leg), ENDS), field=_name("fault_leg", fn),
                         value=fault_leg)
    _check_state(line.legs[0], parallel_state, fn)
    if fault_circuit not in (1, 2) or (fault_circuit == 2 and (
            line.n_conductors != 6 or parallel_state != "in_service" or fault_leg == "T")):
        raise InputError("the faulted circuit is 1, or 2 of a double-circuit line in service "
                         "on the leg from S or R", field=_name("fault_circuit", fn),
                         value=fault_circuit)
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
    scale = _check_scale3(source_scale, fn)
    n_k = scale.shape[0]
    emf = _check_emfs(v_nominal_v, emf_v, n_k, fn)
    n_l, n_m = emf.shape[2], m.size
    z_b = None if z_branch_ohm is None else _check_branch(z_branch_ohm, n_m, fn)
    z_ref = max(float(np.max(np.abs(leg.z_total_ohm))) for leg in line.legs)

    # Series-only with circuit 2 isolated: it carries no current and floats (no closed
    # path); it is dropped, as network._line_matrices does.
    legs = [(leg.z_ohm_per_m, leg.y_s_per_m, leg.length_m) for leg in line.legs]
    elems = [leg.elements for leg in line.legs]
    state = parallel_state
    if line.n_conductors == 6 and state == "isolated" and all(y is None for _, y, _ in legs):
        legs = [(z[:, :3, :3], y, ln) for z, y, ln in legs]
        elems = [tuple(SeriesElement(e.at, e.z_ohm[:3, :3], e.vt_line_side) for e in es)
                 for es in elems]
        state = "in_service"
    ns = [z.shape[-1] for z, _, _ in legs]
    n_u = max(ns)  # tee nodes: circuit 1, and circuit 2 running through

    g_mat, g_vec = [], []
    for k, term in enumerate(terms):
        if isinstance(term, GroundedTransformer):
            g, b = _transformer_terminal(ns[k], state, n_k, n_l, term.z0_ohm, z_ref)
        else:
            zs = None if term is None else term.phase_matrix(scale[:, k])
            g, b = _terminal(ns[k], state, zs, _balanced(emf[k]), z_ref)
        g_mat.append(g)
        g_vec.append(np.swapaxes(b, -1, -2))  # (K, n, L)

    f = ENDS.index(fault_leg)
    h1, h2 = (k for k in range(3) if k != f)
    nf = ns[f]
    z_f, y_f, l_f = legs[f]
    phi_a, phi_b = _leg_chains(z_f, y_f, l_f, m, elems[f])  # bus -> F, tee -> F
    inc = {k: _incidence(ns[k], n_u) for k in range(3)}
    cols = n_l + 3  # load cases, then a unit current into each fault phase

    # The healthy legs with their terminals, seen from the tee (per source case only):
    # W_V C_h U + W_I I_h = g_h gives I_h = a_h + B_h U, and KCL at the tee the current
    # into the faulted leg, C_f^T I_Tf = Y U + J.
    y_u = np.zeros((n_k, n_u, n_u), dtype=complex)
    j_u = np.zeros((n_k, n_u, cols), dtype=complex)
    healthy = []
    for h in (h1, h2):
        nh = ns[h]
        phi = _leg_chains(*legs[h], np.array([1.0]), elems[h])[0][0]  # bus -> tee
        w = g_mat[h] @ phi  # (K, nh, 2nh)
        rhs = np.zeros((n_k, nh, n_u + cols), dtype=complex)
        rhs[..., :n_u] = -w[..., :nh] @ inc[h]
        rhs[..., n_u:n_u + n_l] = g_vec[h]
        sol = np.linalg.solve(w[..., nh:], rhs)
        b_h, a_h = sol[..., :n_u], sol[..., n_u:]
        y_u += inc[h].T @ b_h
        j_u += inc[h].T @ a_h
        # bus quantities of leg h: [V; I] = Phi_h [C_h U; a_h + B_h U] = P_h U + q_h
        p_h = phi[:, :nh] @ inc[h] + phi[:, nh:] @ b_h
        q_h = phi[:, nh:] @ a_h
        healthy.append((nh, p_h, q_h))
    # Circuit 2 at the tee (the branch faulted): KCL there, Y21 V_T + Y22 U2 + J2 = 0.
    d_u = np.zeros((n_k, n_u, nf), dtype=complex)  # U = D V_T + e
    d_u[:, :nf] = np.eye(nf)
    e_u = np.zeros((n_k, n_u, cols), dtype=complex)
    y_t, j_t = y_u[:, :nf, :nf], j_u[:, :nf]
    if n_u > nf:
        s2 = np.linalg.solve(y_u[:, nf:, nf:],
                             np.concatenate([y_u[:, nf:, :nf], j_u[:, nf:]], axis=-1))
        d_u[:, nf:] = -s2[..., :nf]
        e_u[:, nf:] = -s2[..., nf:]
        y_t = y_t - y_u[:, :nf, nf:] @ s2[..., :nf]
        j_t = j_t - y_u[:, :nf, nf:] @ s2[..., nf:]

    # The faulted leg as a two-ended line: x = [V_F, I_a, I_b]; rows: its bus terminal,
    # the tee (I_Tf - Y_t V_T = J_t, in volts), KCL at F.
    w_f = g_mat[f][None] @ phi_a[:, None]  # (M, K, nf, 2nf)
    g_t = np.concatenate([-z_ref * y_t, np.broadcast_to(z_ref * np.eye(nf), y_t.shape)],
                         axis=-1)  # (K, nf, 2nf)
    w_t = g_t[None] @ phi_b[:, None]
    a = np.zeros((n_m, n_k, 3 * nf, 3 * nf), dtype=complex)
    a[..., :nf, :nf] = w_f[..., :nf]
    a[..., :nf, nf:2 * nf] = w_f[..., nf:]
    a[..., nf:2 * nf, :nf] = w_t[..., :nf]
    a[..., nf:2 * nf, 2 * nf:] = w_t[..., nf:]
    a[..., 2 * nf:, nf:2 * nf] = z_ref * np.eye(nf)
    a[..., 2 * nf:, 2 * nf:] = z_ref * np.eye(nf)
    off = 3 * (fault_circuit - 1)  # the faulted circuit's first conductor
    rhs = np.zeros((n_m, n_k, 3 * nf, cols), dtype=complex)
    rhs[..., :nf, :n_l] = g_vec[f][None]
    rhs[..., nf:2 * nf, :] = z_ref * j_t[None]
    rhs[..., 2 * nf + off:2 * nf + off + 3, n_l:] = z_ref * np.eye(3)
    x = np.linalg.solve(a, rhs)  # (M, K, 3nf, L + 3)

    # Output rows: V_F (the faulted circuit), then per bus of f, h1, h2 its voltage
    # (circuit 1's), circuit 1's current and, on a double circuit, circuit 2's.
    n_c2 = 3 if n_u == 6 else 0
    per = 6 + n_c2  # the prefault state has them all; per case they are optional
    n_out = 3 + 3 * per
    out = np.empty((n_m, n_k, n_out, cols), dtype=complex)
    out[:, :, 0:3] = x[:, :, off:off + 3]
    sel_f = [*range(3), *range(nf, nf + 3 + (n_c2 if nf == 6 else 0))]
    bus_f = phi_a[:, None, sel_f] @ x[:, :, :2 * nf]
    out[:, :, 3:3 + len(sel_f)] = bus_f
    out[:, :, 3 + len(sel_f):3 + per] = 0.0
    v_t = phi_b[:, None, :nf] @ np.concatenate([x[:, :, :nf], x[:, :, 2 * nf:]], axis=2)
    u = d_u[None] @ v_t + e_u[None]  # (M, K, n_u, L + 3)
    for r, (nh, p_h, q_h) in enumerate(healthy):
        sel = [*range(3), *range(nh, nh + 3 + (n_c2 if nh == 6 else 0))]
        r0 = 3 + per * (r + 1)
        out[:, :, r0:r0 + len(sel)] = p_h[None, :, sel] @ u + q_h[None, :, sel]
        out[:, :, r0 + len(sel):r0 + per] = 0.0
    _vt_line_side(out, x, elems, (f, h1, h2), nf, per, m)

    # Cases laid out (M, Rf, K, L); phase axes first for fault_currents.
    z_th = -np.transpose(out[..., 0:3, n_l:], (2, 3, 0, 1))[:, :, :, None, :, None]
    if z_b is not None:  # the fault beyond a series branch (see the parameters)
        z_th = z_th + np.transpose(z_b, (1, 2, 0))[:, :, :, None, None, None]
    v_pre_f = np.transpose(out[..., 0:3, :n_l], (2, 0, 1, 3))[:, :, None]  # (3, M, 1, K, L)
    pre0 = np.transpose(out[0, :, :, :n_l], (0, 2, 1))  # (K, L, n_out)
    per_case = per if parallel_currents else 6
    keep = [*range(3), *(3 + per * r + c for r in range(3) for c in range(per_case))]
    out = out[:, :, keep]  # the rows formed per case
    n_row = len(keep)
    pre = np.transpose(out[..., :n_l], (0, 1, 3, 2))[:, None]  # (M, 1, K, L, n_row)
    sens = np.transpose(out[..., n_l:], (3, 0, 1, 2))[:, :, None, :, None, :]
    res = np.empty((len(ftypes), n_m, rf.size, n_k, n_l, n_row), dtype=complex)
    i_fault = np.zeros((len(ftypes), n_m, rf.size, n_k, n_l, 3), dtype=complex)
    rf_b, rp_b = rf[None, :, None, None], rp[None, :, None, None]
    for fi, ft in enumerate(ftypes):
        try:
            cur = fault_currents(ft, z_th, v_pre_f, rf_b, rp_b)  # (M, Rf, K, L) per phase
        except np.linalg.LinAlgError:
            raise InputError(
                "a bolted fault at a bus with zero source impedance has no finite current",
                field=_name("source_scale", fn), value=scale.tolist(),
            ) from None
        phases, _ground = check_fault_type(ft)
        acc = res[fi]  # superposition formed in place (no copy)
        acc[...] = pre
        for j in phases:
            i_fault[fi, ..., j] = cur[j]
            acc += sens[j] * cur[j][..., None]

    order = (f, h1, h2)
    v, i, v_pre, i_pre, i_par, i_par_pre = {}, {}, {}, {}, {}, {}
    zero = np.zeros((), dtype=complex)
    for r, k in enumerate(order):
        rv, rc = 3 + per * r, 3 + per_case * r
        v[ENDS[k]] = res[..., rc:rc + 3]
        i[ENDS[k]] = res[..., rc + 3:rc + 6]
        v_pre[ENDS[k]] = np.ascontiguousarray(pre0[..., rv:rv + 3])
        i_pre[ENDS[k]] = np.ascontiguousarray(pre0[..., rv + 3:rv + 6])
        # no circuit 2: read-only zero views, no memory
        i_par[ENDS[k]] = (res[..., rc + 6:rc + 9] if per_case == 9
                          else np.broadcast_to(zero, i[ENDS[k]].shape))
        i_par_pre[ENDS[k]] = (np.ascontiguousarray(pre0[..., rv + 6:rv + 9]) if n_c2
                              else np.broadcast_to(zero, i_pre[ENDS[k]].shape))
    return TeedSweep(
        fault_types=ftypes, fault_leg=fault_leg, m=m, r_fault_ohm=rf, r_phase_ohm=rp,
        source_scale=scale, emf_v=emf, v=v, i=i, v_f=res[..., 0:3], i_fault=i_fault,
        v_pre=v_pre, i_pre=i_pre, i_parallel=i_par if parallel_currents else None,
        i_parallel_pre=i_par_pre,
        parallel_state=parallel_state, fault_circuit=fault_circuit,
    )
