r"""Phase-domain short-circuit solver for a three-terminal (teed) single-circuit line.

The network is three legs meeting at a tee point: bus S -- tee, bus R -- tee and
bus T -- tee. Each leg is a :class:`~relayset.physics.network.LineCascade` of three
conductors with its sections ordered from its bus towards the tee. Each bus has a
Thevenin source (:class:`~relayset.physics.network.Source`), no source (open end) or a
grounded-star transformer (:class:`GroundedTransformer`, a zero-sequence source only).

Method
------
Every leg part is represented by its chain matrix [1]_

.. math:: \begin{bmatrix}V_0\\I_0\end{bmatrix} = \Phi
          \begin{bmatrix}V_x\\I_x\end{bmatrix},\qquad
          \Phi = \exp\begin{bmatrix}0 & Z\ell\\ Y\ell & 0\end{bmatrix}

from :mod:`relayset.physics.chain`. Each bus obeys three terminal equations
:math:`G_v V + G_i I = g` (I into the leg), written as in
:mod:`relayset.physics.network` (source :math:`V + Z_s I = E`, open end :math:`I = 0`);
a grounded-star transformer of zero-sequence impedance :math:`Z_0` passes no positive- or
negative-sequence current and :math:`V_0 + Z_0 I_0 = 0`, i.e. with the zero-sequence
projector :math:`P_0 = \tfrac13\mathbf 1\mathbf 1^T`

.. math:: P_0 V + \left(Z_0 P_0 + z_{ref}(I - P_0)\right) I = 0.

The faulted leg f is split at the fault point F: :math:`\Phi_a` runs from its bus to F,
:math:`\Phi_b` from the tee to F. The two healthy legs h run whole from their buses to
the tee (:math:`\Phi_h`). With the unknowns :math:`V_F`, the currents :math:`I_a`,
:math:`I_b` flowing into F from the bus side and from the tee side, and the currents
:math:`I_h` arriving at the tee from each healthy leg, the tee voltage and the current
leaving the tee into the faulted leg are
:math:`[V_T; I_{Tf}] = \Phi_b [V_F; I_b]`, and

.. math::
    G_f \Phi_a \begin{bmatrix}V_F\\I_a\end{bmatrix} &= g_f, \qquad
    G_h \Phi_h \begin{bmatrix}V_T\\I_h\end{bmatrix} = g_h \quad (h = 1, 2),\\
    I_1 + I_2 &= I_{Tf} \quad\text{(KCL at the tee, voltage continuity by } V_T),
    \qquad I_a + I_b = I_{inj}\quad\text{(KCL at F)}.

One batched 15 x 15 solve per (location, source case) gives the prefault state of every
load case (:math:`I_{inj} = 0`) and the response to a unit current into each fault phase,
hence the Thevenin matrix :math:`Z_{th}` at F; every fault type and resistance then
follows from :func:`relayset.physics.faults.fault_currents` and superposition, as in
:func:`relayset.physics.network.solve_fault_sweep`. A double-circuit line with a tee is
refused.

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
from relayset.physics.chain import chain_products, fault_chain_products, split_lengths
from relayset.physics.faults import check_fault_type, check_resistance, fault_currents
from relayset.physics.network import (
    LineCascade,
    Source,
    _balanced,
    _check_branch,
    _check_locations,
    _name,
    _terminal,
)

__all__ = ["ENDS", "GroundedTransformer", "TeedLine", "TeedSweep", "solve_teed_sweep"]

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
    """The three legs of a teed single-circuit line, each from its bus to the tee.

    Parameters
    ----------
    legs : tuple of three LineCascade
        Legs from bus S, bus R and bus T to the tee, three conductors each, sections in
        order from the bus.
    """

    legs: tuple[LineCascade, LineCascade, LineCascade]

    def __post_init__(self) -> None:
        legs = tuple(self.legs)
        if len(legs) != 3:
            raise InputError("a teed line has three legs", field="legs", value=len(legs))
        for leg in legs:
            if leg.n_conductors != 3:
                raise InputError(
                    "a three-terminal line is modelled for a single circuit only; a double "
                    "circuit with a tee is not supported", field="legs",
                    value=leg.n_conductors)
        object.__setattr__(self, "legs", legs)

    @classmethod
    def from_line(cls, line: LineCascade, tee_m: float, branch: LineCascade) -> TeedLine:
        """Split a line S -> R at ``tee_m`` [m] from bus S; ``branch`` runs tee -> bus T.

        The S leg keeps the sections up to the tee; the R leg is the rest in reverse order
        (from bus R); the branch is reversed to run from bus T.
        """
        if line.n_conductors != 3 or branch.n_conductors != 3:
            raise InputError(
                "a three-terminal line is modelled for a single circuit only; a double "
                "circuit with a tee is not supported", field="tee",
                value=max(line.n_conductors, branch.n_conductors))
        total = line.total_length_m
        if not (0 < tee_m < total):
            raise InputError("the tee must lie inside the line", field="tee", value=tee_m)
        left, right = split_lengths(line.length_m, np.array([tee_m / total]))
        y = line.y_s_per_m
        ls, rs = np.flatnonzero(left[0] > 0), np.flatnonzero(right[0] > 0)[::-1]
        leg_s = LineCascade(line.z_ohm_per_m[ls], left[0, ls],
                            None if y is None else y[ls])
        leg_r = LineCascade(line.z_ohm_per_m[rs], right[0, rs],
                            None if y is None else y[rs])
        yb = branch.y_s_per_m
        leg_t = LineCascade(branch.z_ohm_per_m[::-1], branch.length_m[::-1],
                            None if yb is None else yb[::-1])
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


def _transformer_terminal(n_k: int, n_l: int, z0: complex, z_ref: float
                          ) -> tuple[np.ndarray, np.ndarray]:
    """Terminal equations of a grounded-star transformer (see the module text)."""
    p0 = np.full((3, 3), 1.0 / 3.0)
    g = np.zeros((n_k, 3, 6), dtype=complex)
    g[:, :, :3] = p0
    g[:, :, 3:] = z0 * p0 + z_ref * (np.eye(3) - p0)
    return g, np.zeros((n_k, n_l, 3), dtype=complex)


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

    g_mat, g_vec = [], []
    for k, term in enumerate(terms):
        if isinstance(term, GroundedTransformer):
            g, b = _transformer_terminal(n_k, n_l, term.z0_ohm, z_ref)
        else:
            zs = None if term is None else term.phase_matrix(scale[:, k])
            g, b = _terminal(3, "in_service", zs, _balanced(emf[k]), z_ref)
        g_mat.append(g)
        g_vec.append(b)

    f = ENDS.index(fault_leg)
    h1, h2 = (k for k in range(3) if k != f)
    leg_f = line.legs[f]
    phi_a, phi_b = fault_chain_products(leg_f.z_ohm_per_m, leg_f.y_s_per_m,
                                        leg_f.length_m, m)  # bus -> F, tee -> F
    phi_h = [chain_products(line.legs[h].z_ohm_per_m, line.legs[h].y_s_per_m,
                            line.legs[h].length_m[None], reverse=False)[0] for h in (h1, h2)]

    # x = [V_F, I_a, I_b, I_1, I_2]; rows: terminal f, terminals h1, h2, KCL tee, KCL F.
    eye = np.eye(3)
    w_f = g_mat[f][None] @ phi_a[:, None]  # (M, K, 3, 6)
    a = np.zeros((n_m, n_k, 15, 15), dtype=complex)
    a[..., 0:3, 0:3] = w_f[..., :3]
    a[..., 0:3, 3:6] = w_f[..., 3:]
    for r, (h, ph) in enumerate(zip((h1, h2), phi_h, strict=True)):
        w_h = g_mat[h] @ ph  # (K, 3, 6)
        rows = slice(3 + 3 * r, 6 + 3 * r)
        # V_T = Phi_b11 V_F + Phi_b12 I_b
        a[..., rows, 0:3] = w_h[None, :, :, :3] @ phi_b[:, None, :3, :3]
        a[..., rows, 6:9] = w_h[None, :, :, :3] @ phi_b[:, None, :3, 3:]
        a[..., rows, 9 + 3 * r:12 + 3 * r] = w_h[None, :, :, 3:]
    a[..., 9:12, 0:3] = -z_ref * phi_b[:, None, 3:, :3]  # I_1 + I_2 - I_Tf = 0
    a[..., 9:12, 6:9] = -z_ref * phi_b[:, None, 3:, 3:]
    a[..., 9:12, 9:12] = z_ref * eye
    a[..., 9:12, 12:15] = z_ref * eye
    a[..., 12:15, 3:6] = z_ref * eye  # I_a + I_b = I_inj
    a[..., 12:15, 6:9] = z_ref * eye
    rhs = np.zeros((n_m, n_k, 15, n_l + 3), dtype=complex)
    rhs[..., 0:3, :n_l] = np.swapaxes(g_vec[f], -1, -2)[None]
    rhs[..., 3:6, :n_l] = np.swapaxes(g_vec[h1], -1, -2)[None]
    rhs[..., 6:9, :n_l] = np.swapaxes(g_vec[h2], -1, -2)[None]
    rhs[..., 12:15, n_l:] = z_ref * eye
    x = np.linalg.solve(a, rhs)  # (M, K, 15, L + 3)

    # Output rows: V_F, then (V, I) at the buses of f, h1, h2.
    t = np.zeros((n_m, 21, 15), dtype=complex)
    t[:, 0:3, 0:3] = eye
    t[:, 3:9, 0:3] = phi_a[:, :, :3]
    t[:, 3:9, 3:6] = phi_a[:, :, 3:]
    for r, ph in enumerate(phi_h):
        rows = slice(9 + 6 * r, 15 + 6 * r)
        t[:, rows, 0:3] = ph[None, :, :3] @ phi_b[:, :3, :3]
        t[:, rows, 6:9] = ph[None, :, :3] @ phi_b[:, :3, 3:]
        t[:, rows, 9 + 3 * r:12 + 3 * r] = ph[None, :, 3:]
    out = t[:, None] @ x  # (M, K, 21, L + 3)

    # Cases laid out (M, Rf, K, L); phase axes first for fault_currents.
    z_th = -np.transpose(out[..., 0:3, n_l:], (2, 3, 0, 1))[:, :, :, None, :, None]
    if z_b is not None:  # the fault beyond a series branch (see the parameters)
        z_th = z_th + np.transpose(z_b, (1, 2, 0))[:, :, :, None, None, None]
    v_pre_f = np.transpose(out[..., 0:3, :n_l], (2, 0, 1, 3))[:, :, None]  # (3, M, 1, K, L)
    pre = np.transpose(out[..., :n_l], (0, 1, 3, 2))[:, None]  # (M, 1, K, L, 21)
    sens = np.transpose(out[..., n_l:], (3, 0, 1, 2))[:, :, None, :, None, :]  # (j,M,1,K,1,21)
    res = np.empty((len(ftypes), n_m, rf.size, n_k, n_l, 21), dtype=complex)
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
        acc = np.broadcast_to(pre, res.shape[1:]).copy()
        for j in phases:
            i_fault[fi, ..., j] = cur[j]
            acc += sens[j] * cur[j][..., None]
        res[fi] = acc

    order = (f, h1, h2)
    v, i, v_pre, i_pre = {}, {}, {}, {}
    pre0 = np.transpose(out[0, :, :, :n_l], (0, 2, 1))  # (K, L, 21)
    for r, k in enumerate(order):
        rv, ri = 3 + 6 * r, 6 + 6 * r
        v[ENDS[k]] = res[..., rv:rv + 3]
        i[ENDS[k]] = res[..., ri:ri + 3]
        v_pre[ENDS[k]] = np.ascontiguousarray(pre0[..., rv:rv + 3])
        i_pre[ENDS[k]] = np.ascontiguousarray(pre0[..., ri:ri + 3])
    return TeedSweep(
        fault_types=ftypes, fault_leg=fault_leg, m=m, r_fault_ohm=rf, r_phase_ohm=rp,
        source_scale=scale, emf_v=emf, v=v, i=i, v_f=res[..., 0:3], i_fault=i_fault,
        v_pre=v_pre, i_pre=i_pre,
    )
