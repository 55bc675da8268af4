r"""Shunt fault models: fault types, exact fault constraints and fault admittance.

A fault at one point of circuit 1 joins phase conductors to each other and to ground through
resistances. The solvers write each fault type as exact linear constraints
:math:`P_v V + P_i I = 0` on the phase voltages V at the fault point and the currents I into
the fault, which stay valid for zero resistance (bolted faults need no resistance floor).
"""

from __future__ import annotations

import numpy as np

from relayset.errors import InputError, suggest

FAULT_TYPES: tuple[str, ...] = (
    "AG", "BG", "CG", "AB", "BC", "CA", "ABG", "BCG", "CAG", "ABC",
)

#: Resistance used by :func:`fault_admittance` in place of 0 ohm [ohm]. The solvers do not
#: use it: they write faults as exact constraints.
R_FLOOR_OHM: float = 1e-6

_PHASE_INDEX = {"A": 0, "B": 1, "C": 2}


def check_fault_type(fault_type: str, field: str = "fault_type") -> tuple[list[int], bool]:
    """Faulted phase indices (0, 1, 2 for A, B, C) of a fault type and whether it involves
    ground; InputError naming ``field`` for an unknown type."""
    if fault_type not in FAULT_TYPES:
        raise InputError(
            f"unknown fault type; use one of {', '.join(FAULT_TYPES)}"
            + suggest(str(fault_type), FAULT_TYPES),
            field=field,
            value=fault_type,
        )
    ground = fault_type.endswith("G")
    letters = fault_type[:-1] if ground else fault_type
    return [_PHASE_INDEX[c] for c in letters], ground


def check_resistance(r: np.ndarray, field: str) -> np.ndarray:
    """Resistances [ohm] as a float array; InputError naming ``field`` unless finite, >= 0."""
    r = np.asarray(r, dtype=float)
    if not np.all(np.isfinite(r)):
        raise InputError("resistance must be finite", field=field, value=r.tolist())
    if np.any(r < 0):
        raise InputError(
            "resistance must not be negative", field=field, value=float(r[r < 0].flat[0])
        )
    return r


def fault_constraints(
    fault_type: str, r_fault_ohm: np.ndarray | float, r_phase_ohm: np.ndarray | float
) -> tuple[np.ndarray, np.ndarray]:
    r"""Exact linear description :math:`P_v V + P_i I = 0` of a shunt fault.

    V are the phase-to-ground voltages at the fault point and I the phase currents into
    the fault. A phase-to-ground fault is phase-ground resistance ``r_fault``; a phase-phase
    fault is ``r_phase`` between the two phases; a two-phase-to-ground or three-phase
    fault joins the faulted phases to a star point through ``r_phase/2`` each, the star
    point going to ground through ``r_fault`` (two-phase-to-ground) or floating
    (three-phase). Zero resistances are exact (bolted fault).

    Parameters
    ----------
    fault_type : str
        One of :data:`FAULT_TYPES`.
    r_fault_ohm : array_like
        Resistance to ground [ohm], >= 0.
    r_phase_ohm : array_like
        Resistance between two faulted phases [ohm], >= 0; broadcast with ``r_fault_ohm``.

    Returns
    -------
    p_v, p_i : (..., 3, 3) complex arrays
        Coefficients of V [1] and of I [ohm].
    """
    phases, ground = check_fault_type(fault_type)
    rf = check_resistance(r_fault_ohm, "r_fault_ohm")
    rp = check_resistance(r_phase_ohm, "r_phase_ohm")
    rf, rp = np.broadcast_arrays(rf, rp)
    shape = rf.shape
    p_v = np.zeros((*shape, 3, 3), dtype=complex)
    p_i = np.zeros((*shape, 3, 3), dtype=complex)
    for o in range(3):
        if o not in phases:
            p_i[..., o, o] = 1.0  # healthy phase: no current into the fault
    if len(phases) == 1:
        (p,) = phases
        p_v[..., p, p] = 1.0
        p_i[..., p, p] = -rf
    elif len(phases) == 2:
        p, q = phases
        if ground:
            # V_p = (r_p/2) I_p + r_f (I_p + I_q), same for q
            for row, col in ((p, p), (q, q)):
                p_v[..., row, col] = 1.0
                p_i[..., row, col] = -rp / 2
                p_i[..., row, p] -= rf
                p_i[..., row, q] -= rf
        else:
            p_i[..., p, p] = 1.0  # I_p + I_q = 0
            p_i[..., p, q] = 1.0
            p_v[..., q, p] = 1.0  # V_p - V_q = (r_p/2)(I_p - I_q)
            p_v[..., q, q] = -1.0
            p_i[..., q, p] = -rp / 2
            p_i[..., q, q] = rp / 2
    else:
        p_i[..., 0, :] = 1.0  # star point not earthed: currents sum to zero
        for row, (x, y) in ((1, (0, 1)), (2, (1, 2))):
            p_v[..., row, x] = 1.0
            p_v[..., row, y] = -1.0
            p_i[..., row, x] = -rp / 2
            p_i[..., row, y] = rp / 2
    return p_v, p_i


def fault_admittance(
    fault_type: str, r_fault_ohm: np.ndarray | float, r_phase_ohm: np.ndarray | float
) -> np.ndarray:
    r"""Phase admittance matrix :math:`Y_f` of a shunt fault, :math:`I_f = Y_f V_F`.

    Same fault model as :func:`fault_constraints`. Zero resistances are replaced by
    :data:`R_FLOOR_OHM` because a bolted fault has no finite admittance; the solvers use the
    exact constraints instead. For the star connection (conductance :math:`g = 2/r_p`
    per phase, :math:`g_g = 1/r_f` to ground) the star point is eliminated (Kron):

    .. math:: Y_f = g\,D - \frac{g^2}{k g + g_g}\, u u^T

    with D the diagonal selector of the k faulted phases and u their indicator vector
    (:math:`g_g = 0` for the unearthed three-phase star).

    Parameters
    ----------
    fault_type : str
        One of :data:`FAULT_TYPES`.
    r_fault_ohm, r_phase_ohm : array_like
        Resistances [ohm], >= 0, broadcast together.

    Returns
    -------
    (..., 3, 3) complex array
        Fault admittance matrix [S].
    """
    phases, ground = check_fault_type(fault_type)
    rf = np.maximum(check_resistance(r_fault_ohm, "r_fault_ohm"), R_FLOOR_OHM)
    rp = np.maximum(check_resistance(r_phase_ohm, "r_phase_ohm"), R_FLOOR_OHM)
    rf, rp = np.broadcast_arrays(rf, rp)
    y = np.zeros((*rf.shape, 3, 3), dtype=complex)
    u = np.zeros(3)
    u[phases] = 1.0
    if len(phases) == 1:
        y += (1.0 / rf)[..., None, None] * np.outer(u, u)
    elif len(phases) == 2 and not ground:
        d = np.zeros(3)
        d[phases[0]], d[phases[1]] = 1.0, -1.0
        y += (1.0 / rp)[..., None, None] * np.outer(d, d)
    else:
        g = 2.0 / rp
        g_g = 1.0 / rf if ground else np.zeros_like(rf)
        k = len(phases)
        y += g[..., None, None] * np.diag(u)
        y -= (g * g / (k * g + g_g))[..., None, None] * np.outer(u, u)
    return y


def fault_currents(
    fault_type: str,
    z_th_ohm: np.ndarray,
    v_pre_v: np.ndarray,
    r_fault_ohm: np.ndarray | float,
    r_phase_ohm: np.ndarray | float,
) -> list[np.ndarray | None]:
    r"""Fault currents from the Thevenin equivalent at the fault point, in closed form.

    With :math:`V_F = V_{pre} - Z_{th} I` the constraints of :func:`fault_constraints`
    give, for faulted phases p, q and resistances :math:`r_f` (to ground), :math:`r_p`
    (between phases):

    .. math::
        I_p &= \frac{V_p}{Z_{pp} + r_f} && \text{(phase to ground)}\\
        I_p = -I_q &= \frac{V_p - V_q}{Z_{pp} + Z_{qq} - Z_{pq} - Z_{qp} + r_p}
            && \text{(phase to phase)}\\
        \begin{bmatrix}I_p\\I_q\end{bmatrix} &= \begin{bmatrix}
            Z_{pp} + r_p/2 + r_f & Z_{pq} + r_f\\ Z_{qp} + r_f & Z_{qq} + r_p/2 + r_f
            \end{bmatrix}^{-1}\begin{bmatrix}V_p\\V_q\end{bmatrix}
            && \text{(two phases to ground)}\\
        I &= W^{-1}(V - v_n \mathbf 1),\quad
            v_n = \frac{\mathbf 1^T W^{-1} V}{\mathbf 1^T W^{-1} \mathbf 1},\quad
            W = Z_{th} + \tfrac{r_p}{2} I_3 && \text{(three phases, unearthed star)}

    (Kirchhoff's laws; the 2x2 and 3x3 inverses by their adjugates). The work is a few
    element-wise operations over all cases, no per-case linear solve.

    Parameters
    ----------
    fault_type : str
        One of :data:`FAULT_TYPES`.
    z_th_ohm : (3, 3, ...) complex array
        Thevenin impedance matrix at the fault point [ohm], phase axes first.
    v_pre_v : (3, ...) complex array
        Prefault phase voltages at the fault point [V], phase axis first.
    r_fault_ohm, r_phase_ohm : array_like
        Resistances [ohm], >= 0. All trailing shapes broadcast together (phase axes
        first so that each operation runs over contiguous case axes).

    Returns
    -------
    list of three complex arrays or None
        Current into the fault of phase A, B, C [A] (broadcast shape of the cases); None
        for a phase that carries none.

    Raises
    ------
    numpy.linalg.LinAlgError
        If a case has no finite solution (bolted fault on a zero Thevenin impedance).
    """
    phases, ground = check_fault_type(fault_type)
    rf = np.asarray(r_fault_ohm, dtype=float)
    rp = np.asarray(r_phase_ohm, dtype=float)

    def z(i: int, j: int) -> np.ndarray:
        return z_th_ohm[i, j]

    def v(i: int) -> np.ndarray:
        return v_pre_v[i]

    out: list[np.ndarray | None] = [None, None, None]
    if len(phases) == 1:
        (p,) = phases
        den = z(p, p) + rf
        _check_nonzero(den)
        out[p] = v(p) / den
    elif len(phases) == 2 and not ground:
        p, q = phases
        den = z(p, p) + z(q, q) - z(p, q) - z(q, p) + rp
        _check_nonzero(den)
        out[p] = (v(p) - v(q)) / den
        out[q] = -out[p]
    elif len(phases) == 2:
        p, q = phases
        a, b = z(p, p) + rp / 2 + rf, z(p, q) + rf
        c, d = z(q, p) + rf, z(q, q) + rp / 2 + rf
        det = a * d - b * c
        _check_nonzero(det)
        vp, vq = v(p), v(q)
        out[p] = (d * vp - b * vq) / det
        out[q] = (a * vq - c * vp) / det
    else:
        half = rp / 2
        w = [[z(i, j) + (half if i == j else 0.0) for j in range(3)] for i in range(3)]
        # adjugate (transposed cofactors) of W: W^-1 = adj / det
        adj = [[w[(j + 1) % 3][(i + 1) % 3] * w[(j + 2) % 3][(i + 2) % 3]
                - w[(j + 1) % 3][(i + 2) % 3] * w[(j + 2) % 3][(i + 1) % 3]
                for j in range(3)] for i in range(3)]
        vv = [v(0), v(1), v(2)]
        adj_v = [adj[i][0] * vv[0] + adj[i][1] * vv[1] + adj[i][2] * vv[2] for i in range(3)]
        adj_1 = [adj[i][0] + adj[i][1] + adj[i][2] for i in range(3)]
        det = w[0][0] * adj[0][0] + w[0][1] * adj[1][0] + w[0][2] * adj[2][0]
        s1 = adj_1[0] + adj_1[1] + adj_1[2]
        _check_nonzero(det)
        _check_nonzero(s1)
        v_n = (adj_v[0] + adj_v[1] + adj_v[2]) / s1
        for i in range(3):
            out[i] = (adj_v[i] - v_n * adj_1[i]) / det
    return out


def _check_nonzero(den: np.ndarray) -> None:
    if not np.all(den != 0):
        raise np.linalg.LinAlgError("fault with no finite current")
