r"""Chain (ABCD) matrices of uniform multi-conductor line sections, batched over lengths.

A uniform section of length :math:`\ell` with series impedance Z and shunt admittance Y
per metre (both n x n, symmetric) relates the voltages and currents at its two ends by

.. math:: \begin{bmatrix}V_0\\I_0\end{bmatrix} = \Phi
          \begin{bmatrix}V_\ell\\I_\ell\end{bmatrix},\qquad
          \Phi = \exp\begin{bmatrix}0 & Z\ell\\ Y\ell & 0\end{bmatrix}
          = \begin{bmatrix} \cosh(\Gamma\ell) & S(\ell) Z\ell \\
                            Y\ell\, S(\ell) & \cosh(\Gamma^T\ell) \end{bmatrix}

with :math:`\Gamma^2 = ZY` and :math:`S(\ell) = \sinh(\Gamma\ell)(\Gamma\ell)^{-1}` [1]_.
The matrix functions are evaluated by modal decomposition [1]_, [2]_:
:math:`ZY = T\,\mathrm{diag}(\gamma_k^2)\,T^{-1}` once per section, then for every length
only the scalar functions of :math:`\gamma_k\ell` change. The two diagonal blocks are
formed as :math:`I + T\,\mathrm{diag}(2\sinh^2(\gamma_k\ell/2))\,T^{-1}` (and the
transposed counterpart through Y and Z) so that their small deviation from the identity
keeps full relative accuracy. A section whose modal matrix T is ill-conditioned (nearly
repeated modes without a full set of eigenvectors) falls back to a batched
scaling-and-squaring Padé approximant of the exponential [3]_. Either way the work is a
few batched numpy operations over all parts at once: no per-matrix library call, hence no
multi-threaded BLAS start-up per call.

References
----------
.. [1] C. R. Paul, *Analysis of Multiconductor Transmission Lines*, 2nd ed. Hoboken, NJ,
   USA: Wiley, 2008, ch. 7 (chain-parameter matrix, modal solution).
.. [2] L. M. Wedepohl, "Application of matrix methods to the solution of travelling-wave
   phenomena in polyphase systems," Proc. IEE, vol. 110, no. 12, pp. 2200-2212, 1963.
.. [3] N. J. Higham, "The scaling and squaring method for the matrix exponential
   revisited," SIAM J. Matrix Anal. Appl., vol. 26, no. 4, pp. 1179-1193, 2005.
"""

from __future__ import annotations

import hashlib
import math
from collections import OrderedDict

import numpy as np

#: Condition number of the modal matrix above which a section uses the Padé fallback.
MODAL_COND_MAX: float = 1e6

# Padé [13/13] coefficients and the 1-norm bound theta_13 of Higham (2005), table 2.1.
_PADE13 = (
    64764752532480000.0, 32382376266240000.0, 7771770303897600.0, 1187353796428800.0,
    129060195264000.0, 10559470521600.0, 670442572800.0, 33522128640.0, 1323241920.0,
    40840800.0, 960960.0, 16380.0, 182.0, 1.0,
)
_THETA13 = 5.371920351148152


def expm_pade(a: np.ndarray) -> np.ndarray:
    """Matrix exponential of a stack of square matrices by Padé [13/13] with scaling and
    squaring (Higham [3]_), batched in numpy.

    Parameters
    ----------
    a : (..., k, k) complex array
        Matrices [1].

    Returns
    -------
    (..., k, k) complex array
        :math:`e^{A}` of each matrix [1].
    """
    a = np.asarray(a, dtype=complex)
    if a.size == 0:
        return a.copy()
    norm = float(np.max(np.sum(np.abs(a), axis=-2)))  # largest 1-norm of the stack
    s = max(0, math.ceil(math.log2(norm / _THETA13))) if norm > _THETA13 else 0
    a = a / 2.0**s
    b = _PADE13
    eye = np.eye(a.shape[-1])
    a2 = a @ a
    a4 = a2 @ a2
    a6 = a4 @ a2
    u = a @ (a6 @ (b[13] * a6 + b[11] * a4 + b[9] * a2)
             + b[7] * a6 + b[5] * a4 + b[3] * a2 + b[1] * eye)
    v = a6 @ (b[12] * a6 + b[10] * a4 + b[8] * a2) + b[6] * a6 + b[4] * a4 + b[2] * a2 \
        + b[0] * eye
    r = np.linalg.solve(v - u, v + u)
    for _ in range(s):
        r = r @ r
    return r


def _modal(z: np.ndarray, y: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray, bool]:
    """Eigenvalues gamma^2 (n,) and modal matrices T, T^-1 of ZY for one section."""
    w, t = np.linalg.eig(z @ y)
    try:
        t_inv = np.linalg.inv(t)
    except np.linalg.LinAlgError:
        return w, t, t, False
    ok = bool(np.linalg.norm(t, 1) * np.linalg.norm(t_inv, 1) < MODAL_COND_MAX)
    return w, t, t_inv, ok


def _section_parts(z: np.ndarray, y: np.ndarray, ln: np.ndarray,
                   modal: tuple[np.ndarray, np.ndarray, np.ndarray, bool]) -> np.ndarray:
    """Chain matrices (M, 2n, 2n) of parts of lengths ``ln`` (M,) of one section with shunt
    admittance, its modal decomposition ``modal`` given (see :func:`_modal`)."""
    w, t, t_inv, ok = modal
    if not ok:
        return _pade_section(z, y, ln)
    n = z.shape[-1]
    eye = np.eye(n)
    phi = np.zeros((ln.size, 2 * n, 2 * n), dtype=complex)
    phi[:, :n, :n] = eye
    phi[:, n:, n:] = eye
    x2 = w[None, :] * (ln * ln)[:, None]  # (gamma_k l)^2, (M, n)
    x = np.sqrt(x2)  # either root: only even functions of x are used
    with np.errstate(invalid="ignore", divide="ignore"):
        sinhc = np.where(x == 0, 1.0, np.sinh(x) / x)
        ch1 = 2.0 * np.sinh(x / 2) ** 2  # cosh(x) - 1, accurate for small x
        ch1_x2 = np.where(x2 == 0, 0.5, ch1 / x2)
    f_s = (t[None] * sinhc[:, None, :]) @ t_inv  # sinh(G l)/(G l), (M, n, n)
    f_c = (t[None] * ch1[:, None, :]) @ t_inv  # cosh(G l) - 1
    f_h = (t[None] * ch1_x2[:, None, :]) @ t_inv  # (cosh(G l) - 1)/(G l)^2
    l3 = ln[:, None, None]
    phi[:, :n, :n] += f_c
    phi[:, :n, n:] = (f_s @ z) * l3
    phi[:, n:, :n] = (y @ f_s) * l3
    phi[:, n:, n:] += (y @ f_h @ z) * (l3 * l3)
    return phi


def section_chain_matrices(
    z: np.ndarray, y: np.ndarray | None, lengths: np.ndarray
) -> np.ndarray:
    """Chain matrix of parts of given lengths of every section.

    Parameters
    ----------
    z : (S, n, n) complex array
        Series impedance matrix per metre of each section [ohm/m].
    y : (S, n, n) complex array or None
        Shunt admittance matrix per metre of each section [S/m]; None: series only.
    lengths : (M, S) float array
        Length of the part of each section [m], >= 0.

    Returns
    -------
    (M, S, 2n, 2n) complex array
        Chain matrices [1, ohm; S, 1 blocks].
    """
    n_m, n_sec = lengths.shape
    n = z.shape[-1]
    eye = np.eye(n)
    phi = np.zeros((n_m, n_sec, 2 * n, 2 * n), dtype=complex)
    phi[..., :n, :n] = eye
    phi[..., n:, n:] = eye
    if y is None:
        phi[..., :n, n:] = lengths[..., None, None] * z
        return phi
    for s in range(n_sec):  # loop over sections, not over parts
        phi[:, s] = _section_parts(z[s], y[s], lengths[:, s], _modal(z[s], y[s]))
    return phi


def _pade_section(z: np.ndarray, y: np.ndarray, ln: np.ndarray) -> np.ndarray:
    """Chain matrices of one section for lengths ``ln`` (M,) by the Padé exponential.

    The exponent is balanced (blocks Z l/c and Y l c of similar size, c ~ surge impedance)
    so that the small admittance block keeps full relative accuracy.
    """
    n = z.shape[-1]
    c = math.sqrt(float(np.max(np.abs(z)) / np.max(np.abs(y))))
    k = np.zeros((ln.size, 2 * n, 2 * n), dtype=complex)
    k[:, :n, n:] = ln[:, None, None] * (z / c)
    k[:, n:, :n] = ln[:, None, None] * (y * c)
    e = expm_pade(k)
    e[:, :n, n:] *= c
    e[:, n:, :n] /= c
    return e


def chain_products(
    z: np.ndarray, y: np.ndarray | None, lengths: np.ndarray, reverse: bool
) -> np.ndarray:
    """Chain matrix of each cascade of section parts, (M, 2n, 2n).

    Parameters
    ----------
    z, y : (S, n, n) complex arrays
        Series [ohm/m] and shunt [S/m] matrices per section (``y`` None: series only).
    lengths : (M, S) float array
        Part lengths [m]; the product runs from the measuring end (section 0, or section
        S-1 with ``reverse``) towards the fault. A reciprocal section looks the same from
        either end, so the R side uses the same part matrices.
    reverse : bool
        Multiply from the last section to the first.

    Returns
    -------
    (M, 2n, 2n) complex array
        Chain matrix of the cascade [1, ohm; S, 1 blocks].
    """
    n_m, n_sec = lengths.shape
    n = z.shape[-1]
    if y is None:  # series only: the blocks add, no products needed
        phi = np.zeros((n_m, 2 * n, 2 * n), dtype=complex)
        phi[:, :n, :n] = np.eye(n)
        phi[:, n:, n:] = np.eye(n)
        phi[:, :n, n:] = np.einsum("ms,sij->mij", lengths, z)
        return phi
    e = section_chain_matrices(z, y, lengths)
    order = range(n_sec - 1, -1, -1) if reverse else range(n_sec)
    phi = None
    for s in order:  # loop over sections (a handful), not over cases
        phi = e[:, s] if phi is None else phi @ e[:, s]
    return phi


#: Fault locations whose section split is formed at a time in :func:`fault_chain_products`
#: is this many part lengths divided by the number of sections (bounds its memory at some
#: 8 MB an array whatever the number of sections).
SPLIT_BLOCK_PARTS = 1 << 20


def split_lengths(length_m: np.ndarray, m: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Length of every section on the S side and on the R side of each fault.

    Parameters
    ----------
    length_m : (S,) float array
        Section lengths [m], from bus S.
    m : (M,) float array
        Fault locations as fractions of the line from bus S [1], in [0, 1].

    Returns
    -------
    left, right : (M, S) float arrays
        Part of each section between bus S and the fault, and between the fault and
        bus R [m].
    """
    edges = np.concatenate([[0.0], np.cumsum(length_m)])
    x = m * edges[-1]
    left = np.clip(x[:, None] - edges[None, :-1], 0.0, length_m[None, :])
    left[m == 1.0] = length_m  # exact zero R-side length at the remote bus
    return left, length_m[None, :] - left


def fault_chain_products(
    z: np.ndarray, y: np.ndarray | None, length_m: np.ndarray, m: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    """Chain matrices of the line from each bus to each fault location, (M, 2n, 2n) each.

    The same matrices as :func:`chain_products` of the parts :func:`split_lengths` gives
    (the same products in the same order, bit for bit on the modal path), with memory
    bounded in the number of sections: a fault cuts one section, every section before it
    is whole and every section after it is absent (an exact identity). The whole sections
    are cascaded once, from either bus (S + 1 prefix products each way); per fault only
    the cut section is formed and multiplied on. The modal decomposition is computed once
    per distinct section (a transposed line repeats a few phase orders). Rows whose parts
    do not follow that pattern to rounding are still multiplied out in full.

    Parameters
    ----------
    z, y : (S, n, n) complex arrays
        Series [ohm/m] and shunt [S/m] matrices per section (``y`` None: series only).
    length_m : (S,) float array
        Section lengths [m], from bus S.
    m : (M,) float array
        Fault locations as fractions of the line from bus S [1], in [0, 1].

    Returns
    -------
    phi_s, phi_r : (M, 2n, 2n) complex arrays
        Chain matrix from bus S to the fault (sections in order) and from bus R to the
        fault (sections in reverse order) [1, ohm; S, 1 blocks].
    """
    length_m = np.asarray(length_m, dtype=float)
    m = np.asarray(m, dtype=float)
    key = _digest(z, y, length_m, m)
    hit = _PRODUCTS.get(key)
    if hit is None:
        hit = tuple(_frozen(a) for a in _fault_chain_products(z, y, length_m, m))
        _PRODUCTS[key] = hit
        while len(_PRODUCTS) > PRODUCTS_CACHED:
            _PRODUCTS.popitem(last=False)
    else:
        _PRODUCTS.move_to_end(key)
    return hit


#: How many results of :func:`fault_chain_products` are kept: the verification solves the
#: same line at the same fault locations once per state of a series element, source case
#: group or fault type, and the products depend on none of them.
PRODUCTS_CACHED = 32
_PRODUCTS: OrderedDict[bytes, tuple[np.ndarray, np.ndarray]] = OrderedDict()


def _digest(*arrays: np.ndarray | None) -> bytes:
    h = hashlib.blake2b(digest_size=20)
    for a in arrays:
        if a is None:
            h.update(b"none")
            continue
        a = np.ascontiguousarray(a)
        h.update(f"{a.dtype.str}{a.shape}".encode())
        h.update(a.tobytes())
    return h.digest()


def _frozen(a: np.ndarray) -> np.ndarray:
    a.flags.writeable = False  # shared between callers: read-only
    return a


def _fault_chain_products(z: np.ndarray, y: np.ndarray | None, length_m: np.ndarray,
                          m: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """:func:`fault_chain_products` computed (no cache)."""
    n_sec, n = length_m.size, z.shape[-1]
    block = max(1, SPLIT_BLOCK_PARTS // n_sec)
    phi_s = np.empty((m.size, 2 * n, 2 * n), dtype=complex)
    phi_r = np.empty_like(phi_s)
    if y is None:  # series only: the blocks add, no products needed
        for a in range(0, m.size, block):
            left, right = split_lengths(length_m, m[a:a + block])
            phi_s[a:a + block] = chain_products(z, None, left, reverse=False)
            phi_r[a:a + block] = chain_products(z, None, right, reverse=True)
        return phi_s, phi_r
    # one modal decomposition per distinct section (same matrices, bit for bit)
    kind: dict[bytes, int] = {}
    sec_kind = np.array([kind.setdefault(z[s].tobytes() + y[s].tobytes(), len(kind))
                         for s in range(n_sec)])
    rep = {k: int(np.flatnonzero(sec_kind == k)[0]) for k in range(len(kind))}
    modal = {k: _modal(z[s], y[s]) for k, s in rep.items()}

    def parts(sec: np.ndarray, ln: np.ndarray) -> np.ndarray:
        """Chain matrices of parts ``ln`` of sections ``sec`` (P,), grouped by kind."""
        out = np.empty((sec.size, 2 * n, 2 * n), dtype=complex)
        for k, s in rep.items():
            sel = np.flatnonzero(sec_kind[sec] == k)
            if sel.size:
                out[sel] = _section_parts(z[s], y[s], ln[sel], modal[k])
        return out

    whole = parts(np.arange(n_sec), length_m)
    fwd, bwd = np.arange(n_sec), np.arange(n_sec - 1, -1, -1)
    cascades = []
    for order in (fwd, bwd):  # prefix products of the whole sections in product order
        pre = np.empty((n_sec + 1, 2 * n, 2 * n), dtype=complex)
        pre[0] = np.eye(2 * n)
        pre[1] = whole[order[0]]
        for j in range(1, n_sec):
            pre[j + 1] = pre[j] @ whole[order[j]]
        cascades.append(pre)
    for a in range(0, m.size, block):
        left, right = split_lengths(length_m, m[a:a + block])
        for out, lens, order, pre in ((phi_s, left, fwd, cascades[0]),
                                      (phi_r, right, bwd, cascades[1])):
            out[a:a + block] = _cut_products(lens[:, order], length_m[order], order, pre,
                                             parts)
    return phi_s, phi_r


def _cut_products(lens: np.ndarray, full: np.ndarray, order: np.ndarray, pre: np.ndarray,
                  parts) -> np.ndarray:
    """Products over the sections (columns already in product order) of the parts ``lens``
    (B, S): the prefix product of the leading whole sections, then every other part that is
    not absent, in order (one, the cut section, unless rounding says otherwise)."""
    n_sec = lens.shape[1]
    whole = lens == full[None, :]
    n_lead = np.where(whole.all(axis=1), n_sec, np.argmin(whole, axis=1))
    rows, cols = np.nonzero((np.arange(n_sec)[None, :] >= n_lead[:, None]) & (lens > 0))
    phi = pre[n_lead]  # identity where no section is whole
    rank = _run_index(rows)  # which term of its row each part is (rows come sorted)
    e = parts(order[cols], lens[rows, cols])
    for r in range(int(rank.max(initial=-1)) + 1):
        sel = np.flatnonzero(rank == r)
        rw = rows[sel]
        first = (r == 0) & (n_lead[rw] == 0)  # the product starts with this part itself
        phi[rw[first]] = e[sel[first]]
        rest = ~first
        phi[rw[rest]] = phi[rw[rest]] @ e[sel[rest]]
    return phi


def _run_index(rows: np.ndarray) -> np.ndarray:
    """Position of each element within its run of equal values of sorted ``rows``."""
    if rows.size == 0:
        return rows
    start = np.flatnonzero(np.r_[True, rows[1:] != rows[:-1]])
    counts = np.diff(np.r_[start, rows.size])
    return np.arange(rows.size) - np.repeat(start, counts)


def _sub_cascade(length_m: np.ndarray, a: float, b: float) -> tuple[np.ndarray, np.ndarray]:
    """Sections (indices) and their lengths [m] within [a, b] of the line [m]."""
    edges = np.concatenate([[0.0], np.cumsum(length_m)])
    lo = np.maximum(edges[:-1], a)
    hi = np.minimum(edges[1:], b)
    part = hi - lo
    keep = np.flatnonzero(part > 1e-12 * max(edges[-1], 1.0))
    return keep, part[keep]


def element_fault_chain_products(
    z: np.ndarray, y: np.ndarray | None, length_m: np.ndarray, m: np.ndarray,
    at: np.ndarray, z_el: np.ndarray,
) -> tuple[np.ndarray, np.ndarray]:
    r"""As :func:`fault_chain_products`, with lumped series elements in the cascade.

    A lumped series element of impedance matrix :math:`Z_e` (e.g. a series capacitor
    bank, :math:`-jX_C` in each phase) has the chain matrix

    .. math:: E = \begin{bmatrix} 1 & Z_e \\ 0 & 1 \end{bmatrix}

    (the same seen from either side), inserted at its place between the uniform parts
    [1]_. The line is cut at the elements into pieces; the chain matrix from a bus to a
    fault is the product of the whole pieces and elements on the way and the part of the
    fault's own piece (:func:`fault_chain_products` of that piece).

    A fault exactly at an element's place is on its bus side for an element at a line end
    (m = 0 and m = 1 are the buses) and on its S side for a mid-line element; a fault on
    the other side is at a location just beyond it.

    Parameters
    ----------
    z, y, length_m, m
        As :func:`fault_chain_products` [ohm/m, S/m, m, 1].
    at : (E,) float array
        Places of the elements as fractions of the line from bus S [1], in [0, 1].
    z_el : (E, n, n) complex array
        Impedance matrix of each element [ohm].

    Returns
    -------
    phi_s, phi_r : (M, 2n, 2n) complex arrays
        Chain matrix from bus S to the fault and from bus R to the fault.
    """
    length_m = np.asarray(length_m, dtype=float)
    m = np.asarray(m, dtype=float)
    at = np.asarray(at, dtype=float)
    order = np.argsort(at, kind="stable")
    at, z_el = at[order], np.asarray(z_el, dtype=complex)[order]
    n = z.shape[-1]
    total = float(np.sum(length_m))
    bounds = np.concatenate([[0.0], at, [1.0]])  # piece k is [bounds[k], bounds[k + 1]]
    n_p = at.size + 1
    # piece of each fault: the first whose R end is at or beyond it (S side of a mid-line
    # element), but the last for m = 1 (bus side of an element at bus R)
    piece = np.searchsorted(bounds[1:], m, side="left")
    piece = np.where(m >= 1.0, n_p - 1, np.minimum(piece, n_p - 1))
    eye = np.eye(2 * n, dtype=complex)
    elem = np.tile(eye, (at.size, 1, 1))
    elem[:, :n, n:] = z_el
    whole_s = np.tile(eye, (n_p, 1, 1))  # each piece from its S end
    whole_r = np.tile(eye, (n_p, 1, 1))  # each piece from its R end
    local_s: dict[int, np.ndarray] = {}  # per piece: its faults' parts (from S, from R)
    local_r: dict[int, np.ndarray] = {}
    for k in range(n_p):
        idx, ln = _sub_cascade(length_m, bounds[k] * total, bounds[k + 1] * total)
        if not idx.size:  # a zero-length piece (an element at a bus)
            continue
        sel = np.flatnonzero(piece == k)
        span = bounds[k + 1] - bounds[k]
        local = np.clip((m[sel] - bounds[k]) / span, 0.0, 1.0)
        # the piece's faults and its two ends in one call (the whole piece either way)
        ps, pr = fault_chain_products(z[idx], None if y is None else y[idx], ln,
                                      np.concatenate([local, [0.0, 1.0]]))
        whole_s[k], whole_r[k] = ps[-1], pr[-2]
        local_s[k], local_r[k] = ps[:-2], pr[:-2]
    pre_s = np.empty((n_p, 2 * n, 2 * n), dtype=complex)  # bus S to the S end of piece k
    pre_s[0] = eye
    for k in range(1, n_p):
        pre_s[k] = pre_s[k - 1] @ whole_s[k - 1] @ elem[k - 1]
    pre_r = np.empty_like(pre_s)  # bus R to the R end of piece k
    pre_r[-1] = eye
    for k in range(n_p - 2, -1, -1):
        pre_r[k] = pre_r[k + 1] @ whole_r[k + 1] @ elem[k]
    phi_s = np.empty((m.size, 2 * n, 2 * n), dtype=complex)
    phi_r = np.empty_like(phi_s)
    for k in range(n_p):
        sel = np.flatnonzero(piece == k)
        if not sel.size:
            continue
        if k not in local_s:  # faults in a zero-length piece: at the element's bus side
            phi_s[sel], phi_r[sel] = pre_s[k], pre_r[k]
            continue
        phi_s[sel] = pre_s[k] @ local_s[k]
        phi_r[sel] = pre_r[k] @ local_r[k]
    return phi_s, phi_r
