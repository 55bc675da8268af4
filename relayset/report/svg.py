"""A small SVG writer for the report's figures: deterministic text, no dependencies.

Every drawing attribute is an SVG presentation attribute (never a ``style=""``): inline
SVG goes through the HTML renderer's CSS machinery, which parses and logs each declaration
of a style attribute, and every element costs a pass of the cascade, so figures are drawn
with few elements (one ``<path>`` per curve, markers as sub-paths of one path). Numbers are
written at 0.01 user units: the same results give the same bytes on every machine.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Sequence
from xml.sax.saxutils import escape, quoteattr

_QUOTE = {'"': "&quot;"}

#: Width of every figure in user units; the CSS scales it to the text width.
WIDTH = 640.0
#: Average advance of a DejaVu Sans glyph as a fraction of the font size (for label boxes).
CHAR_W = 0.6


def f(v: float) -> str:
    """A coordinate at 0.01 units, without trailing zeros and never "-0"."""
    text = f"{v:.2f}".rstrip("0").rstrip(".")
    return "0" if text in ("-0", "") else text


def text_width(s: str, size: float) -> float:
    """Approximate width of a one-line label [user units]."""
    return CHAR_W * size * len(s)


def path_d(points: Sequence[tuple[float, float]], closed: bool = False) -> str:
    """Path data of a polyline (``M x y L x y …``), optionally closed."""
    if not points:
        return ""
    head = f"M{f(points[0][0])} {f(points[0][1])}"
    body = "".join(f"L{f(x)} {f(y)}" for x, y in points[1:])
    return head + body + ("Z" if closed else "")


def simplify(points: Sequence[tuple[float, float]], tol: float) -> list[tuple[float, float]]:
    """Ramer-Douglas-Peucker: drop points closer than ``tol`` to the simplified polyline.

    Kept points are exact (no smoothing), so the drawn curve never leaves the true one by
    more than ``tol`` [user units].

    References
    ----------
    D. H. Douglas, T. K. Peucker, "Algorithms for the reduction of the number of points
    required to represent a digitized line or its caricature," Cartographica, vol. 10,
    no. 2, pp. 112-122, 1973.
    """
    pts = list(points)
    if len(pts) < 3:
        return pts
    keep = [False] * len(pts)
    keep[0] = keep[-1] = True
    stack = [(0, len(pts) - 1)]
    while stack:
        a, b = stack.pop()
        (xa, ya), (xb, yb) = pts[a], pts[b]
        dx, dy = xb - xa, yb - ya
        norm = math.hypot(dx, dy) or 1.0
        worst, at = -1.0, -1
        for i in range(a + 1, b):
            x, y = pts[i]
            dist = abs(dy * (x - xa) - dx * (y - ya)) / norm
            if dist > worst:
                worst, at = dist, i
        if worst > tol:
            keep[at] = True
            stack += [(a, at), (at, b)]
    return [p for p, k in zip(pts, keep, strict=True) if k]


def nice_ticks(lo: float, hi: float, n: int = 6) -> list[float]:
    """Round tick values (1, 2, 5 × 10^k steps) covering [lo, hi]."""
    span = hi - lo
    if not span > 0:
        return [lo]
    raw = span / max(n, 1)
    mag = 10 ** math.floor(math.log10(raw))
    step = next(m * mag for m in (1, 2, 2.5, 5, 10) if m * mag >= raw)
    first = math.ceil(lo / step - 1e-9)
    last = math.floor(hi / step + 1e-9)
    return [round(k * step, 10) for k in range(first, last + 1)]


def tick_text(v: float, ticks: Sequence[float]) -> str:
    """A tick label with as many decimals as the step needs, with a real minus sign."""
    step = abs(ticks[1] - ticks[0]) if len(ticks) > 1 else 1.0
    digits = max(0, -math.floor(math.log10(step) + 1e-9)) if step < 1 else 0
    if step < 1 and abs(step * 10 ** digits - round(step * 10 ** digits)) > 1e-6:
        digits += 1
    text = f"{v:.{digits}f}"
    if float(text) == 0:
        text = text.lstrip("-")
    return text.replace("-", "\u2212")


class Axis:
    """A linear map from data to user units."""

    def __init__(self, lo: float, hi: float, a: float, b: float):
        self.lo, self.hi, self.a, self.b = lo, hi, a, b
        self.k = (b - a) / (hi - lo) if hi != lo else 1.0

    def __call__(self, v: float) -> float:
        return self.a + (v - self.lo) * self.k


class Svg:
    """An SVG document built element by element."""

    def __init__(self, height: float, label: str, width: float = WIDTH):
        self.width, self.height, self.label = width, height, label
        self.parts: list[str] = []

    def add(self, tag: str, text: str | None = None, **attrs) -> None:
        """An element; ``attr_name`` becomes ``attr-name``; None values are left out."""
        a = "".join(f" {k.rstrip('_').replace('_', '-')}={quoteattr(str(v), _QUOTE)}"
                    for k, v in attrs.items() if v is not None)
        if text is None:
            self.parts.append(f"<{tag}{a}/>")
        else:
            # quotes too: user text (substation names) is never markup-like in the page
            self.parts.append(f"<{tag}{a}>{escape(text, _QUOTE)}</{tag}>")

    def open(self, tag: str = "g", **attrs) -> None:
        a = "".join(f" {k.rstrip('_').replace('_', '-')}={quoteattr(str(v), _QUOTE)}"
                    for k, v in attrs.items() if v is not None)
        self.parts.append(f"<{tag}{a}>")

    def close(self, tag: str = "g") -> None:
        self.parts.append(f"</{tag}>")

    def path(self, d: str, **attrs) -> None:
        if d:
            self.add("path", d=d, **attrs)

    def polyline(self, pts: Sequence[tuple[float, float]], closed: bool = False,
                 **attrs) -> None:
        self.path(path_d(pts, closed), **attrs)

    def lines(self, segs: Iterable[tuple[float, float, float, float]], **attrs) -> None:
        """Several straight segments as one path."""
        self.path("".join(f"M{f(a)} {f(b)}L{f(c)} {f(d)}" for a, b, c, d in segs), **attrs)

    def text(self, x: float, y: float, s: str, size: float = 9.0, anchor: str = "start",
             **attrs) -> None:
        self.add("text", s, x=f(x), y=f(y), font_size=f(size),
                 text_anchor=None if anchor == "start" else anchor, **attrs)

    def render(self) -> str:
        head = (f'<svg xmlns="http://www.w3.org/2000/svg" viewBox="0 0 {f(self.width)} '
                f'{f(self.height)}" width="{f(self.width)}" height="{f(self.height)}" '
                f'role="img" aria-label={quoteattr(self.label, _QUOTE)} '
                f'font-family="DejaVu Sans, sans-serif" fill="none" stroke="none">')
        return head + "".join(self.parts) + "</svg>"


def marker_path(kind: str, pts: Iterable[tuple[float, float]], r: float = 2.6) -> str:
    """Markers of one kind as sub-paths of one path: 'o' circle, 's' square, '^' triangle,
    'v' triangle down, 'd' diamond, 'x' cross."""
    out = []
    for x, y in pts:
        if kind == "o":
            out.append(f"M{f(x - r)} {f(y)}a{f(r)} {f(r)} 0 1 0 {f(2 * r)} 0"
                       f"a{f(r)} {f(r)} 0 1 0 {f(-2 * r)} 0Z")
        elif kind == "s":
            out.append(f"M{f(x - r)} {f(y - r)}h{f(2 * r)}v{f(2 * r)}h{f(-2 * r)}Z")
        elif kind == "^":
            out.append(f"M{f(x)} {f(y - r * 1.2)}L{f(x + r)} {f(y + r * 0.8)}"
                       f"L{f(x - r)} {f(y + r * 0.8)}Z")
        elif kind == "v":
            out.append(f"M{f(x)} {f(y + r * 1.2)}L{f(x + r)} {f(y - r * 0.8)}"
                       f"L{f(x - r)} {f(y - r * 0.8)}Z")
        elif kind == "d":
            out.append(f"M{f(x)} {f(y - r * 1.3)}L{f(x + r)} {f(y)}L{f(x)} {f(y + r * 1.3)}"
                       f"L{f(x - r)} {f(y)}Z")
        else:
            out.append(f"M{f(x - r)} {f(y - r)}L{f(x + r)} {f(y + r)}"
                       f"M{f(x - r)} {f(y + r)}L{f(x + r)} {f(y - r)}")
    return "".join(out)


class Boxes:
    """Label placement: the first candidate position whose box overlaps nothing placed."""

    def __init__(self, bounds: tuple[float, float, float, float] | None = None):
        self.boxes: list[tuple[float, float, float, float]] = []
        self.bounds = bounds

    def free(self, box: tuple[float, float, float, float]) -> bool:
        x0, y0, x1, y1 = box
        if self.bounds is not None:
            bx0, by0, bx1, by1 = self.bounds
            if x0 < bx0 or y0 < by0 or x1 > bx1 or y1 > by1:
                return False
        return all(x1 <= a or x0 >= c or y1 <= b or y0 >= d for a, b, c, d in self.boxes)

    def take(self, box: tuple[float, float, float, float]) -> None:
        self.boxes.append(box)

    def place(self, candidates: Sequence[tuple[float, float, str]], lines: Sequence[str],
              size: float) -> tuple[float, float, str]:
        """Choose among (x, y, anchor) candidates (y = first baseline); the first that is
        free wins, else the first one."""
        w = max(text_width(s, size) for s in lines)
        h = size * 1.2 * len(lines)
        for x, y, anchor in candidates:
            box = self._box(x, y, anchor, w, h, size)
            if self.free(box):
                self.take(box)
                return x, y, anchor
        x, y, anchor = candidates[0]
        self.take(self._box(x, y, anchor, w, h, size))
        return x, y, anchor

    @staticmethod
    def _box(x, y, anchor, w, h, size):
        x0 = x - w / 2 if anchor == "middle" else x - w if anchor == "end" else x
        top = y - size * 0.95
        return (x0 - 1, top - 1, x0 + w + 1, top + h + 1)
