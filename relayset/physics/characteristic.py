r"""Distance-zone characteristics in the impedance plane: one object per shape.

A zone's characteristic is the set of apparent impedances Z = R + jX [ohm] for which the zone
operates. The settings size it, the verification tests fault cases against it, the report
draws it and the results JSON writes it: all through the one object built here, so the shape
is written once. Pure geometry: no policy, no I/O. Every method is vectorised over numpy
arrays of impedances.

Two shapes (IEEE Std C37.113-2015 [1]_, distance-element characteristics):

- :class:`Mho`: a self-polarised mho circle through the origin;
- :class:`Quadrilateral`: a reactance line, two resistive blinders parallel to the line angle
  and a directional line through the origin.

Both answer the same questions (:class:`Characteristic`): ``contains`` (operates or not),
``reach_scale`` (by how much the forward reach alone would have to be scaled for a point to
sit on the boundary), ``reach_along`` (reach along a ray), ``outline`` (points to draw) and
``region`` (neutral JSON geometry).

Direction: a zone looks "forward" (into the protected line) or "reverse" (behind the relay).
Points on the boundary count as inside, with a rounding allowance of
:math:`10^{-12}\max(|c|, 1)` [ohm] for a boundary at distance c from the origin.

References
----------
.. [1] IEEE Guide for Protective Relay Applications to Transmission Lines,
   IEEE Std C37.113-2015 (mho and quadrilateral distance characteristics).
"""

from __future__ import annotations

import cmath
import math
from abc import ABC, abstractmethod
from dataclasses import dataclass
from typing import Any

import numpy as np

from relayset.physics.arrays import unique_sorted

FORWARD = "forward"
REVERSE = "reverse"
DIRECTIONS = (FORWARD, REVERSE)

# Below this a ray runs parallel to a boundary line (never crosses it) [1].
_PARALLEL = 1e-12


def _tol(scale: float | np.ndarray) -> float | np.ndarray:
    # Points on the boundary count as inside, with a rounding allowance.
    return 1e-12 * np.maximum(np.abs(scale), 1.0)


def _direction(direction: str) -> None:
    if direction not in DIRECTIONS:
        raise ValueError(f"direction must be 'forward' or 'reverse', not {direction}")


class Characteristic(ABC):
    """What both shapes answer: the interface the settings, verification and report use.

    Subclasses give ``direction`` and the private ``_contains``, ``_reach_scale`` and
    ``_reach_along`` on numpy arrays, and ``outline`` and ``region``.
    """

    direction: str

    def contains(self, z: complex | np.ndarray) -> np.ndarray:
        """Whether impedances lie inside (or on) the characteristic.

        Parameters
        ----------
        z : complex or array
            Impedances to test [ohm].

        Returns
        -------
        ndarray of bool
        """
        return self._contains(np.asarray(z, dtype=complex))

    def reach_scale(self, z: complex | np.ndarray) -> np.ndarray:
        """Scale s of the forward reach alone (mho diameter, quadrilateral reactive reach) at
        which each impedance sits on the boundary; blinders and directional line kept.

        s <= 1 exactly where :meth:`contains` (away from the rounding allowance); ``inf``
        where no scale reaches the point (behind the zone, outside its blinders) and for a
        non-finite Z. The formulas are on each shape.

        Parameters
        ----------
        z : complex or array
            Impedances to bring onto the boundary [ohm].

        Returns
        -------
        ndarray
            Reach scale [1].
        """
        z = np.asarray(z, dtype=complex)
        with np.errstate(all="ignore"):
            s = self._reach_scale(z)
        return np.where(np.isfinite(z), s, np.inf)

    def reach_along(self, angle_rad: float | np.ndarray) -> np.ndarray:
        """Distance from the origin to the boundary along rays.

        Parameters
        ----------
        angle_rad : float or array
            Ray angle ψ in the impedance plane [rad] (a reverse zone's rays point behind the
            relay).

        Returns
        -------
        ndarray
            Reach along each ray [ohm]; 0 for rays that never enter the zone.
        """
        return self._reach_along(np.asarray(angle_rad, dtype=float))

    @abstractmethod
    def outline(self, n: int = 72) -> np.ndarray:
        """Points of the boundary, counter-clockwise, for drawing [ohm]: the corners of a
        polygon, ``n`` points of a circle."""

    @abstractmethod
    def region(self) -> dict[str, Any]:
        """Neutral JSON geometry [ohm]: ``{"kind": "polygon", "vertices": [[R, X], ...]}``
        (corners counter-clockwise) or ``{"kind": "circle", "center": [R, X], "radius": r}``.
        """

    @abstractmethod
    def _contains(self, z: np.ndarray) -> np.ndarray: ...

    @abstractmethod
    def _reach_scale(self, z: np.ndarray) -> np.ndarray: ...

    @abstractmethod
    def _reach_along(self, psi: np.ndarray) -> np.ndarray: ...


@dataclass(frozen=True)
class Mho(Characteristic):
    r"""Self-polarised mho circle through the origin [1]_.

    The diameter from the origin has length D at the characteristic angle φ:

    .. math:: \left|Z - \tfrac{D}{2}e^{j\varphi}\right| \le \tfrac{D}{2}
              \iff |Z|^2 \le D\,\mathrm{Re}\left(Z e^{-j\varphi}\right)

    Reach scale (diameter scaled), 0 at the origin (on every circle), ``inf`` on or behind
    the tangent at the origin:

    .. math:: s = \frac{|Z|^2}{D\,\mathrm{Re}(Z e^{-j\varphi})}

    Reach along a ray at ψ (the chord from the origin): :math:`\max(D\cos(\psi-\varphi), 0)`.

    A self-polarised mho is directional by itself: it looks where its diameter points. The
    angle is therefore the diameter's own angle as the zone looks (the settings'
    ``char_angle``): a reverse zone's φ points behind the relay, the forward angle ± π.
    ``direction`` names the side and must agree with φ.

    Parameters
    ----------
    diameter_ohm : float
        Diameter D [ohm], >= 0.
    angle_rad : float
        Characteristic (diameter) angle φ [rad]; cos φ >= 0 forward, <= 0 reverse.
    direction : {"forward", "reverse"}
        The side the zone looks to.
    """

    diameter_ohm: float
    angle_rad: float
    direction: str = FORWARD

    def __post_init__(self) -> None:
        _direction(self.direction)
        if not self.diameter_ohm >= 0:
            raise ValueError(f"mho diameter must be >= 0 ohm, not {self.diameter_ohm}")
        c = math.cos(self.angle_rad)
        if (self.direction == FORWARD and c < -1e-9) or (self.direction == REVERSE
                                                         and c > 1e-9):
            raise ValueError(f"a {self.direction} mho needs its diameter angle on that side, "
                             f"not {math.degrees(self.angle_rad):g} degrees")

    @property
    def center_ohm(self) -> complex:
        """Centre of the circle, :math:`\tfrac{D}{2}e^{j\varphi}` [ohm]."""
        return 0.5 * self.diameter_ohm * cmath.exp(1j * self.angle_rad)

    @property
    def radius_ohm(self) -> float:
        """Radius D/2 [ohm]."""
        return 0.5 * self.diameter_ohm

    def _contains(self, z: np.ndarray) -> np.ndarray:
        d = np.asarray(self.diameter_ohm, dtype=float)
        centre = 0.5 * d * np.exp(1j * np.asarray(self.angle_rad, dtype=float))
        return np.abs(z - centre) <= 0.5 * d + _tol(d)

    def _reach_scale(self, z: np.ndarray) -> np.ndarray:
        proj = (z * cmath.exp(-1j * self.angle_rad)).real
        return np.where(proj > 0, np.abs(z) ** 2 / (self.diameter_ohm * proj),
                        np.where(z == 0, 0.0, np.inf))

    def _reach_along(self, psi: np.ndarray) -> np.ndarray:
        d = np.asarray(self.diameter_ohm, dtype=float)
        return np.maximum(d * np.cos(psi - np.asarray(self.angle_rad)), 0.0)

    def outline(self, n: int = 72) -> np.ndarray:
        t = 2 * np.pi * np.arange(n) / n
        return self.center_ohm + self.radius_ohm * np.exp(1j * t)

    def region(self) -> dict[str, Any]:
        c = self.center_ohm
        return {"kind": "circle", "center": [float(c.real), float(c.imag)],
                "radius": float(self.radius_ohm)}


@dataclass(frozen=True)
class Quadrilateral(Characteristic):
    r"""Quadrilateral characteristic [1]_: four half-planes :math:`n\cdot Z \le c`.

    Forward-looking, with θ the line (blinder) angle and τ the reactance-line tilt:

    - reactance line through :math:`(0, X_{reach})` with slope :math:`-\tan\tau`
      (τ = 0 horizontal; τ > 0 tilts it down toward +R, against overreach of resistive faults
      under export):

      .. math:: X \le X_{reach} - R\tan\tau
                \iff R\sin\tau + X\cos\tau \le X_{reach}\cos\tau

    - right resistive blinder through :math:`(R_{reach}, 0)`, parallel to the line angle:
      :math:`R\sin\theta - X\cos\theta \le R_{reach}\sin\theta`;
    - left blinder through :math:`(-R_{left}, 0)`, parallel to the line angle:
      :math:`-R\sin\theta + X\cos\theta \le R_{left}\sin\theta`;
    - directional line through the origin at angle δ, operating on the side of the line
      angle: :math:`R\sin\delta - X\cos\delta \le 0`. By default δ = θ − π/2
      (perpendicular to the line angle), i.e. :math:`\mathrm{Re}(Z e^{-j\theta}) \ge 0`.

    Reach scale (reactance line moved parallel to itself through :math:`(0, sX_{reach})`),
    between the blinders and on the operating side of the directional line, ``inf`` elsewhere:

    .. math:: s = \frac{\max(R\sin\tau + X\cos\tau,\ 0)}{X_{reach}\cos\tau}
              = \frac{\max(X + R\tan\tau,\ 0)}{X_{reach}}

    (τ = 0: :math:`\max(X, 0)/X_{reach}`). Reach along a ray of unit vector u: for each
    half-plane with :math:`n\cdot u > 0` the ray leaves at :math:`c/(n\cdot u)`; the
    smallest of these.

    A reverse-looking zone is the point reflection of the forward one through the origin,
    :math:`Z \to -Z`.

    Parameters
    ----------
    x_reach_ohm : float
        Reactive reach X_reach [ohm], > 0: where the reactance line crosses the X axis.
    r_reach_ohm : float
        Right resistive reach R_reach (blinder offset on the R axis) [ohm], > 0.
    line_angle_rad : float
        Line (blinder) angle θ [rad], 0 < θ < π.
    r_left_ohm : float, optional
        Left blinder offset R_left [ohm], >= 0; defaults to ``r_reach_ohm``.
    direction : {"forward", "reverse"}
        The side the zone looks to.
    tilt_rad : float, optional
        Reactance-line tilt τ [rad], |τ| < π/2 and 0 < θ + τ < π; 0 = horizontal.
    directional_angle_rad : float, optional
        Angle δ of the directional line [rad], 0 < θ − δ < π; default θ − π/2.
    """

    x_reach_ohm: float
    r_reach_ohm: float
    line_angle_rad: float
    r_left_ohm: float | None = None
    direction: str = FORWARD
    tilt_rad: float = 0.0
    directional_angle_rad: float | None = None

    def __post_init__(self) -> None:
        _direction(self.direction)
        th = self.line_angle_rad
        if not (self.x_reach_ohm > 0 and self.r_reach_ohm > 0):
            raise ValueError("quadrilateral reaches must be > 0 ohm, not X "
                             f"{self.x_reach_ohm}, R {self.r_reach_ohm}")
        if self.r_left_ohm is not None and not self.r_left_ohm >= 0:
            raise ValueError(f"left blinder offset must be >= 0 ohm, not {self.r_left_ohm}")
        if not 0 < th < math.pi:
            raise ValueError(f"line angle must be within (0, 180) degrees, not "
                             f"{math.degrees(th):g}")
        # Bounded: the reactance line closes the strip between the blinders in the direction
        # of the line angle, the directional line the other way.
        if not (abs(self.tilt_rad) < math.pi / 2 and math.sin(th + self.tilt_rad) > 1e-9):
            raise ValueError(f"reactance-line tilt {math.degrees(self.tilt_rad):g} degrees "
                             "leaves the quadrilateral open")
        d = self.directional_angle_rad
        if d is not None and not math.sin(th - d) > 1e-9:
            raise ValueError(f"directional line at {math.degrees(d):g} degrees leaves the "
                             "quadrilateral open")

    @property
    def r_left(self) -> float:
        """Left blinder offset [ohm] (the right one unless given)."""
        return self.r_reach_ohm if self.r_left_ohm is None else self.r_left_ohm

    def halfplanes(self) -> tuple[tuple[float, float, float], ...]:
        """The forward shape's half-planes ``(nx, ny, c)``: ``nx·R + ny·X <= c``, c >= 0.

        In the order reactance line, right blinder, left blinder, directional line.
        """
        # numpy's sin/cos (not math's): the settings' load reach has always used them.
        s, co = np.sin(self.line_angle_rad), np.cos(self.line_angle_rad)
        st, ct = np.sin(self.tilt_rad), np.cos(self.tilt_rad)  # exactly (0, 1) for τ = 0
        if self.directional_angle_rad is None:
            dx, dy = -co, -s
        else:
            dx, dy = np.sin(self.directional_angle_rad), -np.cos(self.directional_angle_rad)
        return (
            (st, ct, self.x_reach_ohm * ct),  # reactance line
            (s, -co, self.r_reach_ohm * s),  # right blinder
            (-s, co, self.r_left * s),  # left blinder
            (dx, dy, 0.0),  # directional line through the origin
        )

    def _forward(self, z: np.ndarray) -> np.ndarray:
        return -z if self.direction == REVERSE else z

    @staticmethod
    def _within(z: np.ndarray, planes) -> np.ndarray:
        inside = np.ones(z.shape, dtype=bool)
        for nx, ny, c in planes:
            inside &= nx * z.real + ny * z.imag <= c + _tol(c)
        return inside

    def _contains(self, z: np.ndarray) -> np.ndarray:
        return self._within(self._forward(z), self.halfplanes())

    def _reach_scale(self, z: np.ndarray) -> np.ndarray:
        z = self._forward(z)
        (nx, ny, c), *sides = self.halfplanes()
        return np.where(self._within(z, sides),
                        np.maximum(nx * z.real + ny * z.imag, 0.0) / c, np.inf)

    def _reach_along(self, psi: np.ndarray) -> np.ndarray:
        psi = psi + (0.0 if self.direction == FORWARD else np.pi)
        ux, uy = np.cos(psi), np.sin(psi)
        reach = np.full(psi.shape, np.inf)
        for nx, ny, c in self.halfplanes():
            nu = nx * ux + ny * uy
            with np.errstate(divide="ignore", invalid="ignore"):
                t = np.where(nu > _PARALLEL, c / np.where(nu > _PARALLEL, nu, 1.0), np.inf)
            reach = np.minimum(reach, t)
        return reach

    def outline(self, n: int = 72) -> np.ndarray:
        """The corners [ohm], counter-clockwise from the right end of the directional line:
        four, or three where a tilted reactance line meets the directional line inside the
        blinders (``n`` is for curved outlines; straight edges need no more points)."""
        planes = self.halfplanes()
        corners = []
        for a in range(len(planes)):
            for b in range(a + 1, len(planes)):
                m = np.array([[planes[a][0], planes[a][1]], [planes[b][0], planes[b][1]]],
                             float)
                if abs(np.linalg.det(m)) < 1e-12:
                    continue
                rx = np.linalg.solve(m, np.array([planes[a][2], planes[b][2]], float))
                z = complex(rx[0], rx[1])
                # Keep only crossings that are corners of the shape (inside every half-plane).
                if bool(self._within(np.asarray(z), planes)):
                    corners.append(z)
        pts = unique_sorted(np.round(np.array(corners), 12))
        # Counter-clockwise about the centroid, angles counted from the line angle so that
        # the first corner is the right end of the directional line (a fixed start).
        rot = cmath.exp(-1j * self.line_angle_rad)
        pts = pts[np.argsort(np.angle((pts - pts.mean()) * rot))]
        return -pts if self.direction == REVERSE else pts

    def region(self) -> dict[str, Any]:
        return {"kind": "polygon",
                "vertices": [[float(v.real), float(v.imag)] for v in self.outline()]}

