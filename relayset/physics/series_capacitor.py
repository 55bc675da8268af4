r"""Series capacitor bank with its metal-oxide varistor (MOV): Goldsworthy's linearised model.

Under a fault the varistor across a series capacitor conducts once the capacitor voltage
reaches its protective level, so the bank no longer looks like :math:`-jX_C`. Goldsworthy
[1]_ fitted the fundamental-frequency equivalent impedance :math:`R_e - jX_e` of the
capacitor in parallel with its varistor, fed by a sinusoidal current, as a function of the
capacitor current in per unit of the protective-level current
:math:`I_{pu} = |I_C| / I_{pl}` (:math:`I_{pl}`: the RMS current whose peak capacitor
voltage equals the protective level):

.. math::
   R_e &= X_C\,(0.0745 + 0.49\,e^{-0.243 I_{pu}} - 35.0\,e^{-5.0 I_{pu}}
          - 0.6\,e^{-1.4 I_{pu}}) \\
   X_e &= X_C\,(0.101 - 0.005749\,I_{pu} + 2.088\,e^{-0.8566 I_{pu}})

for :math:`0.98 < I_{pu} \le 10`; below, the varistor does not conduct
(:math:`R_e = 0`, :math:`X_e = X_C`). The coefficients are given from memory and checked
in tests/test_series_cap_varistor.py against an independent time-domain computation
(scipy.integrate of the capacitor and a power-law varistor fed by an ideal sinusoidal
current source; the fundamental of the capacitor voltage over the current). Above 10 per
unit the value at 10 per unit is used (a bounded representation: the reactance is then
already below 5 % of :math:`X_C`, and such currents make a bank's bypass operate anyway).

References
----------
.. [1] D. L. Goldsworthy, "A linearized model for MOV-protected series capacitors," IEEE
   Trans. Power Systems, vol. PWRS-2, no. 4, pp. 953-958, Nov. 1987.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

__all__ = ["GOLDSWORTHY_RANGE", "PORT_STATES", "PhaseOperatingPoint",
           "goldsworthy_impedance_pu", "per_phase_operating_point"]

#: Range of the fit [per unit of the protective-level current] (Goldsworthy, from memory).
GOLDSWORTHY_RANGE: tuple[float, float] = (0.98, 10.0)


def goldsworthy_impedance_pu(i_pu: np.ndarray | float) -> np.ndarray:
    r"""Equivalent impedance of an MOV-protected series capacitor in per unit of
    :math:`X_C`, :math:`(R_e - jX_e)/X_C` (Goldsworthy [1]_, see the module notes).

    Parameters
    ----------
    i_pu : array_like
        Capacitor current in per unit of the protective-level current [1], >= 0.

    Returns
    -------
    complex ndarray
        :math:`(R_e - jX_e)/X_C` [1]; exactly :math:`-j` where the varistor does not
        conduct.
    """
    i = np.clip(np.asarray(i_pu, dtype=float), 0.0, GOLDSWORTHY_RANGE[1])
    r = 0.0745 + 0.49 * np.exp(-0.243 * i) - 35.0 * np.exp(-5.0 * i) - 0.6 * np.exp(-1.4 * i)
    x = 0.101 - 0.005749 * i + 2.088 * np.exp(-0.8566 * i)
    on = i > GOLDSWORTHY_RANGE[0]
    return np.where(on, np.maximum(r, 0.0) - 1j * x, -1j + 0.0)


#: What each port's operating point is (:attr:`PhaseOperatingPoint.status`).
PORT_STATES: tuple[str, ...] = ("not_conducting", "conducting", "held_at_level",
                                "held_at_fit_end")


@dataclass(frozen=True, eq=False)
class PhaseOperatingPoint:
    """Result of :func:`per_phase_operating_point`; arrays (C, P): cases x ports."""

    z_ohm: np.ndarray  #: each port's impedance [ohm]
    i_a: np.ndarray  #: each port's current magnitude at it [A] (the bound where held)
    status: np.ndarray  #: index into :data:`PORT_STATES`
    converged: np.ndarray  #: (C,) bool: the iteration met the tolerance
    sweeps: int  #: Gauss-Seidel sweeps of the last linearisation
    linearisations: int  #: network linearisations used
    residual_a: np.ndarray  #: (C,) largest port-current mismatch of the last check [A]


def per_phase_operating_point(
    solve: Callable[[np.ndarray], np.ndarray],
    x_c_ohm: np.ndarray,
    i_pl_a: np.ndarray,
    n_cases: int,
    *,
    tol_pu: float = 1e-6,
    max_sweeps: int = 200,
    max_linearisations: int = 12,
) -> PhaseOperatingPoint:
    r"""Operating point of MOV-protected series capacitors phase by phase: every port (one
    phase of one bank) at Goldsworthy's impedance of its own current, in C cases at once.

    Each phase's varistor conducts by its own phase current, so in an unbalanced fault the
    phases of a bank take different impedances. The network outside the ports is linear,
    so around base impedances :math:`Z^0` the port currents are exactly (compensation
    theorem: a change :math:`\Delta Z_j` of port j is a series voltage source
    :math:`-\Delta Z_j I_j`)

    .. math::
       (\mathbf{1} + G\,\mathrm{diag}(Z - Z^0))\,I = I^0,

    with :math:`G` found column by column from one network solve per port with
    :math:`Z^0_j + \delta_j` (:math:`G_{:j} = (I^0 - I^{(j)}) / (\delta_j I^{(j)}_j)`).
    On that model the fixed point :math:`|I_j| = i_j`, :math:`Z_j = Z_G(i_j)` is found by
    nonlinear Gauss-Seidel over the ports, each port's own equation by bisection between
    the protective level and the fit's upper end (the map :math:`i \mapsto |I_j(Z_G(i))|`
    falls steeply just above the level, where iterating it oscillates). The result is then
    solved through the network again; where that differs from the model by more than
    ``tol_pu`` (a port left out of the model, e.g. a second circuit's bank tied to the
    first's), the network is linearised again at the result. A port whose current with the
    full capacitor stays at or below the level does not conduct (:math:`-jX_C`); one
    without a fixed point above the level (the current it lets through just above the
    level is below it) is held at the level; one letting through more than the fit's
    upper end is held there (the module's bounded representation).

    Parameters
    ----------
    solve : callable
        ``solve(z)`` with ``z`` (C, P) complex port impedances [ohm] returns the (C, P)
        complex port currents [A] of the network (every case its own impedances).
    x_c_ohm, i_pl_a : (P,) array
        Each port's capacitor reactance [ohm] and protective-level current [A, RMS].
    n_cases : int
        C, the number of cases.
    tol_pu : float
        Convergence tolerance on every port current, per unit of its protective-level
        current [1]: the Gauss-Seidel sweeps stop when no port current moves by more, the
        network check accepts a model mismatch below it.
    max_sweeps, max_linearisations : int
        Bounds of the iteration; a case that does not meet ``tol_pu`` within them is
        returned with ``converged`` False (the caller refuses it).

    Returns
    -------
    PhaseOperatingPoint
    """
    x_c = np.asarray(x_c_ohm, dtype=float)
    i_pl = np.asarray(i_pl_a, dtype=float)
    n_p = x_c.size
    lo_pu, hi_pu = GOLDSWORTHY_RANGE
    lo, hi = lo_pu * i_pl, hi_pu * i_pl
    lo_in = lo * (1 + 1e-9)
    tol = tol_pu * i_pl  # (P,)
    full = np.broadcast_to(-1j * x_c, (n_cases, n_p)).astype(complex)
    # bisection steps for the interval (lo, hi) down to a quarter of the tolerance
    n_bisect = int(np.ceil(np.log2(max(hi_pu - lo_pu, 1e-12) / (tol_pu / 4)))) + 1

    def gold(i: np.ndarray, j: int) -> np.ndarray:
        return goldsworthy_impedance_pu(i / i_pl[j]) * x_c[j]

    z_base = full.copy()
    z = full.copy()
    at = np.zeros((n_cases, n_p))
    status = np.zeros((n_cases, n_p), dtype=int)
    converged = np.zeros(n_cases, dtype=bool)
    resid = np.full(n_cases, np.inf)
    sweeps = lins = 0
    eye = np.eye(n_p)
    for lins in range(1, max_linearisations + 1):  # noqa: B007 (reported)
        i0 = np.asarray(solve(z_base), dtype=complex)
        g = np.zeros((n_cases, n_p, n_p), dtype=complex)
        scale = np.max(np.abs(i0), axis=1) + 1e-300
        for j in range(n_p):
            zj = z_base.copy()
            zj[:, j] += x_c[j]  # a real step of X_C: well away from rounding
            ij = np.asarray(solve(zj), dtype=complex)
            den = x_c[j] * ij[:, j]
            ok = np.abs(ij[:, j]) > 1e-12 * scale
            # a port carrying no current in both solves: its column acts on nothing
            # there; the network check below catches a solution that needs it
            g[:, :, j] = np.where(ok[:, None], (i0 - ij) / np.where(ok, den, 1.0)[:, None],
                                  0.0)
        def model(zz: np.ndarray, g=g, i0=i0, z0=z_base) -> np.ndarray:
            a = eye + g * (zz - z0)[:, None, :]
            return np.linalg.solve(a, i0[..., None])[..., 0]

        for sweeps in range(1, max_sweeps + 1):  # noqa: B007 (reported)
            before = at.copy()
            for j in range(n_p):
                def through(i: np.ndarray, j=j, z=z) -> np.ndarray:
                    zz = z.copy()
                    zz[:, j] = i if np.iscomplexobj(i) else gold(i, j)
                    return np.abs(model(zz)[:, j])

                i_full = through(full[:, j])
                g_lo = through(np.full(n_cases, lo_in[j]))
                g_hi = through(np.full(n_cases, hi[j]))
                off = i_full <= lo[j]
                held_lo = ~off & (g_lo <= lo_in[j])
                held_hi = ~off & ~held_lo & (g_hi >= hi[j])
                a_, c_ = np.full(n_cases, lo_in[j]), np.full(n_cases, hi[j])
                for _ in range(n_bisect):
                    mid = 0.5 * (a_ + c_)
                    up = through(mid) > mid
                    a_, c_ = np.where(up, mid, a_), np.where(up, c_, mid)
                i_star = np.where(held_lo, lo_in[j], np.where(held_hi, hi[j],
                                                               0.5 * (a_ + c_)))
                z[:, j] = np.where(off, full[:, j], gold(i_star, j))
                at[:, j] = np.where(off, i_full, i_star)
                status[:, j] = np.where(off, 0, np.where(held_lo, 2,
                                                         np.where(held_hi, 3, 1)))
            moved = np.max(np.abs(at - before) / tol, axis=1)
            if np.all(moved <= 1.0):
                break
        swept = np.max(np.abs(at - before) / tol, axis=1) <= 1.0
        if not np.all(swept):  # a cycle (strong coupling of the phases): Newton
            z, at, status, swept = _newton_fallback(model, gold, z, at, status, swept,
                                                    full, lo, hi, tol, max_sweeps)
        # the result through the network itself
        direct = np.asarray(solve(z), dtype=complex)
        resid = np.max(np.abs(direct - model(z)), axis=1)
        fits = np.all(np.abs(direct - model(z)) <= tol, axis=1)
        converged = swept & fits
        if np.all(converged):
            break
        z_base = z.copy()
    return PhaseOperatingPoint(z, at, status, converged, sweeps, lins, resid)


def _newton_fallback(model, gold, z, at, status, swept, full, lo, hi, tol, max_iter):
    r"""Newton's method on :math:`F(i) = |I(Z_G(i))| - i` of the model (finite-difference
    Jacobian, step halving on :math:`\max |F|/tol`) for the cases whose Gauss-Seidel sweeps
    did not settle, started from the currents with every capacitor in service (a balanced
    fault then stays balanced). Accepted only where every port meets ``tol``."""
    bad = np.flatnonzero(~swept)
    n_p = full.shape[1]
    z_b = full[bad]

    def zs(i: np.ndarray) -> np.ndarray:
        return np.stack([np.where(i[:, j] <= lo[j], z_b[:, j], gold(i[:, j], j))
                         for j in range(n_p)], axis=1)

    def res(i: np.ndarray) -> np.ndarray:
        return (np.abs(model(_rows(z, bad, zs(i)))[bad]) - i) / tol

    i = np.abs(model(full)[bad])
    f = res(i)
    h = 1e-7 * hi / GOLDSWORTHY_RANGE[1]  # 1e-7 of the protective level
    for _ in range(max_iter):
        if np.all(np.max(np.abs(f), axis=1) <= 1.0):
            break
        jac = np.empty((bad.size, n_p, n_p))
        for j in range(n_p):
            ij = i.copy()
            ij[:, j] += h[j]
            jac[:, :, j] = (res(ij) - f) / h[j]
        step = _solve_or_zero(jac, -f)
        t = np.ones(bad.size)
        norm0 = np.max(np.abs(f), axis=1)
        for _h in range(30):
            trial = np.maximum(i + t[:, None] * step, 0.0)
            ft = res(trial)
            worse = np.max(np.abs(ft), axis=1) >= norm0 * (1 - 1e-4 * t)
            if not np.any(worse):
                break
            t = np.where(worse, t / 2, t)
        i, f = trial, ft
    ok = np.max(np.abs(f), axis=1) <= 1.0
    zf = zs(i)
    st = np.where(i <= lo, 0, np.where(i >= hi, 3, 1))
    z, at, status, swept = z.copy(), at.copy(), status.copy(), swept.copy()
    z[bad[ok]], at[bad[ok]], status[bad[ok]] = zf[ok], i[ok], st[ok]
    swept[bad[ok]] = True
    return z, at, status, swept


def _rows(a: np.ndarray, rows: np.ndarray, values: np.ndarray) -> np.ndarray:
    out = a.copy()
    out[rows] = values
    return out


def _solve_or_zero(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Batched least-squares steps (a singular Jacobian: a port on a flat part)."""
    return np.stack([np.linalg.lstsq(a[k], b[k], rcond=None)[0] for k in range(a.shape[0])])
