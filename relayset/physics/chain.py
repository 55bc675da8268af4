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

import math

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
    for s in range(n_sec):  # loop over sections (a handful), not over parts
        ln = lengths[:, s]
        w, t, t_inv, ok = _modal(z[s], y[s])
        if not ok:
            phi[:, s] = _pade_section(z[s], y[s], ln)
            continue
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
        phi[:, s, :n, :n] += f_c
        phi[:, s, :n, n:] = (f_s @ z[s]) * l3
        phi[:, s, n:, :n] = (y[s] @ f_s) * l3
        phi[:, s, n:, n:] += (y[s] @ f_h @ z[s]) * (l3 * l3)
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
