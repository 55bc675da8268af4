"""Vector figures of the report, drawn from the results only, as hand-written SVG.

Three figures: the tower cross-section to scale, the bolted reach error against fault
location per loop and arrangement, and an R-X diagram per relay end (zones as set, line
replica, load region, the verification's governing fault cases). Black and white: loops and
zones differ by dash pattern, weight and marker, never by colour alone. Output is plain text
built by :mod:`relayset.report.svg` (no plotting library): the same results give the same
bytes, every label is escaped, and the figures stay small for the PDF renderer.
"""

from __future__ import annotations

import cmath
import math
from collections.abc import Sequence
from typing import Any

from relayset.report.svg import (
    Axis,
    Boxes,
    Svg,
    f,
    marker_path,
    nice_ticks,
    path_d,
    simplify,
    text_width,
    tick_text,
)

#: Dash patterns, distinguishable without colour ("" is solid).
DASHES = ("", "6 3", "1.5 2", "8 2.5 2 2.5", "3 3", "10 2")
GREYS = ("#000", "#444", "#000", "#555", "#222", "#666")
MARKERS = ("o", "s", "^", "d", "v", "x")
GROUNDING = {"continuous": "earthed at every tower", "segmented":
             "segmented, earthed at one point", "none": "insulated"}
#: Fonts [user units] (figures are 640 units wide, about 170 mm on paper).
# Font sizes [user units]: a 640-unit figure is printed 176 mm wide (0.78 pt per unit), so
# 10.4 units print at 8.1 pt, the report's smallest type.
FS, FS_SMALL, FS_LABEL = 10.8, 10.4, 12.0
MINUS = "\u2212"


def _n(v: float, digits: int = 2) -> str:
    text = f"{v:.{digits}f}"
    if float(text) == 0:
        text = text.lstrip("-")
    return text.replace("-", MINUS)


def _style(k: int, width: float = 1.1) -> dict[str, Any]:
    return {"stroke": GREYS[k % len(GREYS)], "stroke_width": f(width),
            "stroke_dasharray": DASHES[k % len(DASHES)] or None}


#: Zone colours of the R-X diagram (Okabe and Ito's colour-blind-safe set); each zone keeps
#: its dash pattern too, so a black-and-white print still tells them apart.
ZONE_COLOURS = ("#0072B2", "#009E73", "#D55E00", "#CC79A7")


def _zone_style(k: int, width: float = 1.1) -> dict[str, Any]:
    return _style(k, width) | {"stroke": ZONE_COLOURS[k % len(ZONE_COLOURS)]}


def _sample(svg: Svg, x: float, y: float, style: dict[str, Any], marker: str | None = None,
            length: float = 26.0) -> None:
    """A legend's line sample (and marker) starting at (x, y)."""
    svg.lines([(x, y, x + length, y)], **style)
    if marker:
        svg.path(marker_path(marker, [(x + length / 2, y)]), stroke=style["stroke"],
                 stroke_width="0.8", fill="#fff")


# ------------------------------------------------------------------------- tower drawing
def tower_svg(d: dict[str, Any], u: dict[str, Any]) -> str | None:
    """To-scale cross-section: phases per circuit (section 1 order), bundles, shield wires
    with their grounding, the ground line and dimensions (average heights, h - 2/3 sag)."""
    p = d["parameters"]
    wires = p.get("wires") or []
    if not wires:
        return None
    k_len = u["m"]
    unit = u["short"]
    order = p["sections"][0]["order"]
    n_c = len(p["phase_labels"])
    phase_at = {name: (f"{k // 3 + 1}·{order[k]}" if n_c > 1 else order[k])
                for k, name in enumerate(p["positions"])}
    groups: dict[str, list[dict]] = {}
    for w in wires:
        key = w["position"] if w["role"] == "phase" else "shield:" + w["position"]
        groups.setdefault(key, []).append(w)
    xs = [w["x_m"] * k_len for w in wires]
    ys = [w["average_height_m"] * k_len for w in wires]
    top = max(max(ys), 1e-3)
    reach_x = max(max(abs(x) for x in xs), 1e-3)
    # Plot area: a column for the height dimensions at the left, room for labels around.
    left, right = 96.0, 636.0
    mid = (left + right) / 2
    room = 120.0  # user units beside the outermost conductor for its label
    s = min(250.0 / (top * 1.05), (mid - left - room) / reach_x)
    y_top_pad = 34.0
    height = y_top_pad + top * s + 46.0
    X = Axis(0.0, 1.0, mid, mid + s)
    Y = Axis(0.0, 1.0, height - 46.0, height - 46.0 - s)
    svg = Svg(height, "tower cross-section")
    g0 = Y(0.0)
    # Ground line, hatching below it, the tower centre line.
    svg.lines([(left, g0, right, g0)], stroke="#000", stroke_width="1.2")
    svg.lines([(x, g0 + 7, x + 7, g0) for x in range(int(left), int(right) - 6, 9)],
              stroke="#777", stroke_width="0.5")
    svg.text(right, g0 - 3, "ground", FS_SMALL, "end", fill="#000")
    svg.lines([(mid, g0, mid, Y(top) - 14)], stroke="#777", stroke_width="0.6",
              stroke_dasharray="9 2.5 2 2.5")
    svg.text(mid, g0 + 17, "tower centre line", FS_SMALL, "middle", fill="#333")
    # Scale bar: a round length, to show the drawing is to scale.
    target = (right - left) / s / 8
    mag = 10 ** math.floor(math.log10(target))
    bar = max(m * mag for m in (1, 2, 5) if m * mag <= target)
    bx = right - bar * s
    svg.lines([(bx, g0 + 30, right, g0 + 30), (bx, g0 + 26, bx, g0 + 34),
               (right, g0 + 26, right, g0 + 34)], stroke="#000", stroke_width="0.8")
    svg.text((bx + right) / 2, g0 + 27, f"{_n(bar, 0 if bar >= 1 else 1)} {unit}",
             FS_SMALL, "middle", fill="#000")
    # Height dimensions: arrow from the ground to the top, a tick and label per height.
    heights = sorted({round(y, 2) for y in ys})
    xd = left - 4
    svg.lines([(xd, g0, xd, Y(top))], stroke="#333", stroke_width="0.6")
    svg.path(f"M{f(xd - 2.5)} {f(Y(top) + 6)}L{f(xd)} {f(Y(top))}L{f(xd + 2.5)} "
             f"{f(Y(top) + 6)}M{f(xd - 2.5)} {f(g0 - 6)}L{f(xd)} {f(g0)}L{f(xd + 2.5)} "
             f"{f(g0 - 6)}", stroke="#333", stroke_width="0.6")
    label_y = _spread([Y(h) for h in heights], FS * 1.15, Y(top) - 6, g0 - 4)
    svg.open("g", fill="#000", data_role="heights")
    for h, ly in zip(heights, label_y, strict=True):
        svg.lines([(xd - 3, Y(h), xd + 3, Y(h))], stroke="#333", stroke_width="0.6")
        svg.add("text", f"{_n(h)} {unit}", x=f(xd - 5), y=f(ly), font_size=f(FS),
                text_anchor="end", dominant_baseline="middle", data_v=f"{h:.6g}")
    svg.close()
    svg.text(4, 12, f"heights [{unit}]", FS_SMALL, fill="#333")
    # Conductors and their labels; labels avoid each other and stay in the plot area.
    place = Boxes((left + 2, 2, right, g0 - 2))
    marks: list[str] = []
    shields: list[tuple[float, float]] = []
    for ws in groups.values():  # every marker first, so no label covers one
        for w in ws:
            cx, cy = X(w["x_m"] * k_len), Y(w["average_height_m"] * k_len)
            place.take((cx - 5, cy - 5, cx + 5, cy + 5))
    svg.open("g", fill="#000", data_role="conductors")
    for key, ws in groups.items():
        gx = sum(w["x_m"] for w in ws) / len(ws) * k_len
        gy = sum(w["average_height_m"] for w in ws) / len(ws) * k_len
        cx, cy = X(gx), Y(gy)
        out = -1 if gx < -1e-9 else 1
        if key.startswith("shield:"):
            w = ws[0]
            shields.append((cx, cy))
            lines = [w["position"], GROUNDING.get(w["grounding"] or "", w["grounding"] or "")]
            size = FS_SMALL
        else:
            for w in ws:
                marks.append(marker_path("o", [(X(w["x_m"] * k_len),
                                                Y(w["average_height_m"] * k_len))],
                                         3.2 if len(ws) == 1 else 1.9))
            lines = [phase_at.get(key, key)]
            if len(ws) > 1:
                lines.append(f"bundle of {len(ws)}")
            size = FS_LABEL
        lines.append(f"x = {_n(gx)} {unit}")
        w_txt = max(text_width(t, FS_SMALL) for t in lines)
        cands = [(cx + out * 9, cy - 2, "start" if out > 0 else "end"),
                 (cx, cy - 10 - FS_SMALL * 1.2 * (len(lines) - 1), "middle"),
                 (cx, cy + 16, "middle"),
                 (cx - out * 9, cy - 2, "end" if out > 0 else "start"),
                 (cx + out * (9 + w_txt / 2), cy - 26, "middle")]
        x, y, anchor = place.place(cands, lines, FS_SMALL)
        attrs = {"text_anchor": None if anchor == "start" else anchor}
        svg.add("text", lines[0], x=f(x), y=f(y), font_size=f(size),
                font_weight="bold" if size == FS_LABEL else None, data_x=f"{gx:.6g}",
                data_y=f"{gy:.6g}", **attrs)
        for i, t in enumerate(lines[1:], 1):
            svg.add("text", t, x=f(x), y=f(y + i * FS_SMALL * 1.2), font_size=f(FS_SMALL),
                    **attrs)
    svg.close()
    svg.path("".join(marks), fill="#000", data_role="phase-wires")
    svg.path(marker_path("^", shields, 4.2), stroke="#000", stroke_width="1.1", fill="#fff",
             data_role="shield-wires")
    return svg.render()


def _spread(ys: list[float], gap: float, lo: float, hi: float) -> list[float]:
    """Label positions near ``ys`` (sorted descending in data, ascending in SVG y) at least
    ``gap`` apart, inside [lo, hi] where possible."""
    order = sorted(range(len(ys)), key=lambda i: ys[i])
    out = [0.0] * len(ys)
    prev = -math.inf
    for i in order:
        out[i] = max(ys[i], prev + gap)
        prev = out[i]
    over = max((out[i] - hi for i in order), default=0.0)
    if over > 0:  # pushed past the bottom: shift the chain up
        out = [y - over for y in out]
    return [max(lo, y) for y in out]


# ----------------------------------------------------------------------- reach-error plot
def reach_error_svg(end: dict[str, Any], index: int) -> str:
    """Bolted reach error against fault location per loop, one row per arrangement: ground
    loops at the left, phase loops at the right; per loop the largest value (line) and the
    smallest (the same line, thinner, with markers). An arrangement marked as a repeat of
    another (the same line) is not drawn again."""
    arrs = [a for a in end["arrangements"] if not a.get("repeat_of")]
    pw, ph = 270.0, 100.0  # the last tick label (100 %) stays inside the 640 units
    x0s = (52.0, 52.0 + pw + 26.0)
    top_pad, row_pad, bottom_pad = 66.0, 24.0, 36.0
    height = top_pad + len(arrs) * ph + (len(arrs) - 1) * row_pad + bottom_pad
    svg = Svg(height, f"reach error, relay at {end['end']}")
    all_y = [v for a in arrs for key in ("bolted_reach_error_max_pct",
                                         "bolted_reach_error_min_pct")
             for row in a["envelope"][key] for v in row if v is not None and math.isfinite(v)]
    lo, hi = (min(all_y), max(all_y)) if all_y else (-1.0, 1.0)
    lo, hi = min(lo, 0.0), max(hi, 0.0)
    pad = 0.06 * (hi - lo or 1.0)
    yticks = nice_ticks(lo - pad, hi + pad, 5)
    lo, hi = min(lo - pad, yticks[0]), max(hi + pad, yticks[-1])
    loc = arrs[0]["envelope"]["location_pct"] if arrs else [0.0, 100.0]
    xlo, xhi = min(loc), max(loc)
    xticks = nice_ticks(xlo, xhi, 5)
    loops = arrs[0]["envelope"]["loops"] if arrs else []
    ground = [lp.replace("-", "").upper().endswith("G") for lp in loops]
    # Legend: one row per column; per loop the largest (heavy) and smallest (light, markers).
    for c, want in enumerate((True, False)):
        x = x0s[c]
        svg.text(x, 12, "ground loops" if want else "phase loops", FS, fill="#000",
                 font_weight="bold")
        k = 0
        for lp, g in zip(loops, ground, strict=True):
            if g != want:
                continue
            lx = x + k * 92
            _sample(svg, lx, 25, _style(k, 1.3), length=20)
            _sample(svg, lx + 23, 25, _style(k, 0.7), MARKERS[k], length=20)
            svg.text(lx + 47, 28, lp, FS_SMALL, fill="#000")
            k += 1
    svg.text(x0s[0], 44, "per loop, heavy: the largest error; light with markers: the "
             "smallest", FS_SMALL, fill="#000")
    for r, a in enumerate(arrs):
        env = a["envelope"]
        y0 = top_pad + r * (ph + row_pad)
        Yax = Axis(lo, hi, y0 + ph, y0)
        svg.text(x0s[0], y0 - 6, a["title"], FS, fill="#000", font_weight="bold")
        for c, want in enumerate((True, False)):
            x0 = x0s[c]
            Xax = Axis(xlo, xhi, x0, x0 + pw)
            svg.lines([(Xax(t), y0, Xax(t), y0 + ph) for t in xticks]
                      + [(x0, Yax(t), x0 + pw, Yax(t)) for t in yticks],
                      stroke="#d0d0d0", stroke_width="0.4")
            svg.lines([(x0, Yax(0.0), x0 + pw, Yax(0.0))], stroke="#000", stroke_width="0.6")
            svg.polyline([(x0, y0), (x0 + pw, y0), (x0 + pw, y0 + ph), (x0, y0 + ph)],
                         closed=True, stroke="#000", stroke_width="0.6")
            if c == 0:  # one scale for every panel: labelled at the left only
                svg.open("g", fill="#000", data_role=f"yticks-{r}")
                for t in yticks:
                    svg.add("text", tick_text(t, yticks), x=f(x0 - 3), y=f(Yax(t)),
                            font_size=f(FS_SMALL), text_anchor="end",
                            dominant_baseline="middle", data_v=f"{t:.10g}")
                svg.close()
            if r == len(arrs) - 1:  # shared locations: labelled once, at the bottom
                svg.open("g", fill="#000", data_role=f"xticks-{c}")
                for t in xticks:
                    svg.add("text", tick_text(t, xticks), x=f(Xax(t)), y=f(y0 + ph + 10),
                            font_size=f(FS_SMALL), text_anchor="middle", data_v=f"{t:.10g}")
                svg.close()
            k = 0
            for i, lp in enumerate(env["loops"]):
                if ground[i] != want:
                    continue
                for key, width in (("bolted_reach_error_max_pct", 1.3),
                                   ("bolted_reach_error_min_pct", 0.7)):
                    pts = [(Xax(x), Yax(v)) for x, v in zip(env["location_pct"], env[key][i],
                                                            strict=True)
                           if v is not None and math.isfinite(v)]
                    svg.path(path_d(simplify(pts, 0.2)), **_style(k, width),
                             data_loop=lp, data_kind="max" if "max" in key else "min")
                    if "min" in key:
                        every = max(1, len(pts) // 8)
                        svg.path(marker_path(MARKERS[k], pts[every // 2::every], 2.3),
                                 stroke=GREYS[k], stroke_width="0.7", fill="#fff")
                k += 1
    yb = height - 8
    for x0 in x0s:
        svg.text(x0 + pw / 2, yb, "fault location [% of the line from the relay]", FS,
                 "middle", fill="#000")
    svg.add("text", "reach error [%]", x="12", y=f(top_pad + (height - top_pad) / 2),
            font_size=f(FS), text_anchor="middle", fill="#000",
            transform=f"rotate(-90 12 {f(top_pad + (height - top_pad) / 2)})")
    return svg.render()


# ------------------------------------------------------------------------------- R-X diagram
def _clip(poly: list[complex], n: complex, c: float) -> list[complex]:
    """Sutherland-Hodgman: keep the part of a polygon with Re(z conj(n)) <= c."""
    def inside(z):
        return (z.real * n.real + z.imag * n.imag) <= c + 1e-12

    out: list[complex] = []
    for i, a in enumerate(poly):
        b = poly[(i + 1) % len(poly)]
        ia, ib = inside(a), inside(b)
        if ia:
            out.append(a)
        if ia != ib:
            da = a.real * n.real + a.imag * n.imag - c
            db = b.real * n.real + b.imag * n.imag - c
            out.append(a + (b - a) * da / (da - db))
    return out


def _region_shape(region: dict[str, Any]) -> tuple[str, Any, list[complex]]:
    """A zone's neutral geometry (``region_primary_ohm`` of the settings JSON, written by
    :meth:`relayset.physics.characteristic.Mho.region` / ``Quadrilateral.region``) as
    (kind, geometry to draw, points the frame must hold)."""
    if region["kind"] == "circle":
        centre, radius = complex(*region["center"]), float(region["radius"])
        return "circle", (centre, radius), [centre + radius * 1j ** a for a in range(4)]
    poly = [complex(r, x) for r, x in region["vertices"]]
    return "poly", poly, poly


def _governing_cases(verification: dict[str, Any] | None, end: str) -> list[dict[str, Any]]:
    """The verification's governing fault cases of one end that measured an impedance."""
    out = []
    for e in (verification or {}).get("ends", []) or []:
        if str(e.get("end")) != end:
            continue
        for c in e.get("checks", []) or []:
            g = c.get("governing_case")
            if g and g.get("z_apparent_primary_ohm") is not None:
                out.append({"check": f"{c['zone']} {c['check_id']}", "result": c["result"],
                            "z": complex(*g["z_apparent_primary_ohm"]), "case": g})
    return out


def rx_svg(end: dict[str, Any], verification: dict[str, Any] | None = None,
           points: Sequence[tuple[str, complex, bool]] = ()) -> str:
    """R-X diagram (primary ohms) of one relay end: zones as set, line replica, load region
    (both power directions), the verification's governing fault cases and ``points``
    (label, impedance [ohm], filled marker), lettered a, b, ... and listed in the legend
    (a teed line's remote terminals as the relay sees them)."""
    s = end["settings_dict"]
    zl = complex(*s["line"]["z1_primary_ohm"])
    # (kind, geometry, style, legend label, data attributes naming the zone and its loops)
    shapes: list[tuple[str, Any, dict[str, Any], str, dict[str, str]]] = []
    pts: list[complex] = [0j, zl]
    for k, (name, z) in enumerate(s["zones"].items()):
        regions = z["region_primary_ohm"]
        if z["shape"] == "mho":  # one circle for phase and ground loops
            kind, geo, frame = _region_shape(regions["phase_loops"])
            shapes.append((kind, geo, _zone_style(k, 1.2), f"{z['label']} (mho)",
                           {"data_zone": name, "data_loops": "phase_loops ground_loops"}))
            pts += frame
        else:
            for key, width, lab in (("phase_loops", 1.3, "phase loops"),
                                    ("ground_loops", 0.6, "ground loops")):
                kind, geo, frame = _region_shape(regions[key])
                shapes.append((kind, geo, _zone_style(k, width), f"{z['label']}, {lab}",
                               {"data_zone": name, "data_loops": key}))
                pts += frame
    pts += [z for _, z, _ in points]
    cases = _governing_cases(verification, s["end"])
    zmin = s["load"]["z_min_primary_ohm"]
    phi = math.radians(s["load"]["load_angle_max_deg"])
    re_, im_ = [q.real for q in pts], [q.imag for q in pts]
    lo_r, hi_r, lo_x, hi_x = min(re_), max(re_), min(im_), max(im_)
    # Scaled to the zones (and the governing cases near them): the load region is drawn
    # where it falls inside, and the legend says how far it is when it is outside.
    size = max(hi_r - lo_r, hi_x - lo_x)
    # Governing cases: shown where they fall unless far out (then clamped at the edge).
    box = (lo_r - 0.3 * size, hi_r + 0.3 * size, lo_x - 0.3 * size, hi_x + 0.3 * size)
    for c in cases:
        z = c["z"]
        if box[0] <= z.real <= box[1] and box[2] <= z.imag <= box[3]:
            lo_r, hi_r = min(lo_r, z.real), max(hi_r, z.real)
            lo_x, hi_x = min(lo_x, z.imag), max(hi_x, z.imag)
    pad = 0.05 * max(hi_r - lo_r, hi_x - lo_x)
    lo_r, hi_r, lo_x, hi_x = lo_r - pad, hi_r + pad, lo_x - pad, hi_x + pad
    # Equal scales on R and X; the plot is at most 360 units high.
    left, right = 56.0, 632.0
    sc = min((right - left) / (hi_r - lo_r), 360.0 / (hi_x - lo_x))
    extra = ((right - left) / sc - (hi_r - lo_r)) / 2
    lo_r, hi_r = lo_r - extra, hi_r + extra
    top = 22.0
    ph = (hi_x - lo_x) * sc
    R = Axis(lo_r, hi_r, left, right)
    X = Axis(lo_x, hi_x, top + ph, top)
    n_legend = len(shapes) + 2 + (1 if cases else 0)
    case_lines = [_case_lines(n, c) for n, c in enumerate(cases, 1)]
    case_lines += [_wrap(f"{_letter(k)}  Z = {_n(z.real, 1)} "
                         f"{'+' if z.imag >= 0 else MINUS} j{_n(abs(z.imag), 1)} Ω: {label}")
                   for k, (label, z, _) in enumerate(points)]
    legend_rows = math.ceil(n_legend / 2) + sum(len(x) for x in case_lines)
    height = top + ph + 38 + legend_rows * ROW + 6
    svg = Svg(height, f"R-X diagram, relay at {s['end']}")
    svg.text(left, 13, f"Relay at {s['end']} (primary ohms)", FS, fill="#000",
             font_weight="bold")

    def pt(z: complex) -> tuple[float, float]:
        return R(z.real), X(z.imag)

    # Load regions: grey wedges beyond |Z| = Zmin within ± the largest load angle.
    far = 4 * (hi_r - lo_r + hi_x - lo_x)
    regions = []
    for base in (0.0, math.pi):
        arc = [zmin * cmath.exp(1j * (base + a)) for a in
               [-phi + 2 * phi * i / 24 for i in range(25)]]
        region = [*arc, far * cmath.exp(1j * (base + phi)), far * cmath.exp(1j * (base - phi))]
        regions.append(path_d([pt(q) for q in _clip_box(region, lo_r, hi_r, lo_x, hi_x)],
                              True))
    svg.path("".join(regions), fill="#e4e4e4", stroke="#777", stroke_width="0.5",
             data_role="load-region")
    rticks = nice_ticks(lo_r, hi_r, 8)
    xticks = nice_ticks(lo_x, hi_x, 6)
    svg.lines([(R(t), top, R(t), top + ph) for t in rticks]
              + [(left, X(t), right, X(t)) for t in xticks], stroke="#d0d0d0",
              stroke_width="0.4")
    svg.lines([(R(0), top, R(0), top + ph), (left, X(0), right, X(0))], stroke="#000",
              stroke_width="0.6")
    svg.polyline([(left, top), (right, top), (right, top + ph), (left, top + ph)], closed=True,
                 stroke="#000", stroke_width="0.6")
    svg.open("g", fill="#000", data_role="ticks-r")
    for t in rticks:
        svg.add("text", tick_text(t, rticks), x=f(R(t)), y=f(top + ph + 10),
                font_size=f(FS_SMALL), text_anchor="middle", data_v=f"{t:.10g}")
    svg.close()
    svg.open("g", fill="#000", data_role="ticks-x")
    for t in xticks:
        svg.add("text", tick_text(t, xticks), x=f(left - 3), y=f(X(t)), font_size=f(FS_SMALL),
                text_anchor="end", dominant_baseline="middle", data_v=f"{t:.10g}")
    svg.close()
    svg.text((left + right) / 2, top + ph + 22, "R, primary [Ω]", FS, "middle", fill="#000")
    svg.add("text", "X, primary [Ω]", x="10", y=f(top + ph / 2), font_size=f(FS),
            text_anchor="middle", fill="#000", transform=f"rotate(-90 10 {f(top + ph / 2)})")
    # Zones (clipped to the frame by construction: the frame holds every zone).
    for kind, geo, style, _, data in shapes:
        if kind == "circle":
            centre, radius = geo
            svg.add("circle", cx=f(R(centre.real)), cy=f(X(centre.imag)), r=f(radius * sc),
                    **style, **data)
        else:
            svg.polyline([pt(q) for q in geo], closed=True, **style, **data)
    x1, y1 = pt(zl)
    svg.add("path", d=f"M{f(R(0))} {f(X(0))}L{f(x1)} {f(y1)}", stroke="#000",
            stroke_width="2.4", data_role="line-replica")
    svg.path(marker_path("o", [(x1, y1)], 2.4), fill="#000")
    # Governing cases: numbered diamonds (clamped to the frame when outside it).
    svg.open("g", fill="#000", data_role="governing-cases")
    for n, c in enumerate(cases, 1):
        z = c["z"]
        inside = lo_r <= z.real <= hi_r and lo_x <= z.imag <= hi_x
        cx = min(max(R(z.real), left + 4), right - 4)
        cy = min(max(X(z.imag), top + 4), top + ph - 4)
        svg.path(marker_path("d" if inside else "x", [(cx, cy)], 3.0), stroke="#000",
                 stroke_width="0.9", fill="#fff" if c["result"] != "FAIL" else "#000")
        svg.text(cx + 5, cy - 4, str(n), FS_SMALL, fill="#000", font_weight="bold")
    svg.close()
    # Points: lettered squares (inside the frame: the frame holds them).
    svg.open("g", fill="#000", data_role="points")
    for k, (_, z, filled) in enumerate(points):
        cx, cy = pt(z)
        svg.path(marker_path("s", [(cx, cy)], 2.8), stroke="#000", stroke_width="0.9",
                 fill="#000" if filled else "#fff")
        svg.text(cx + 5, cy + 11, _letter(k), FS_SMALL, fill="#000", font_weight="bold")
    svg.close()
    # Legend, two entries a row, then the governing cases (one or two rows each).
    entries = [(label, style) for _, _, style, label, _ in shapes]
    y = top + ph + 40
    outside = zmin * math.cos(phi) > max(abs(lo_r), abs(hi_r))
    items: list[tuple[str, Any]] = [*entries, ("line replica Z1", "replica"),
                                    (f"load region |Z| ≥ {_n(zmin, 1)} Ω, "
                                     f"±{_n(math.degrees(phi), 0)}°"
                                     + (" (outside this frame)" if outside else ""), "load")]
    if cases:
        items.append(("governing case (filled: FAIL; × off the plot)", "case"))
    for i, (label, style) in enumerate(items):
        lx = left + (i % 2) * 288
        ly = y + (i // 2) * ROW
        if style == "replica":
            svg.lines([(lx, ly, lx + 26, ly)], stroke="#000", stroke_width="2.4")
        elif style == "load":
            svg.add("rect", x=f(lx), y=f(ly - 4), width="26", height="8", fill="#e4e4e4",
                    stroke="#777", stroke_width="0.5")
        elif style == "case":
            svg.path(marker_path("d", [(lx + 13, ly)], 3.0), stroke="#000",
                     stroke_width="0.9", fill="#fff")
        else:
            _sample(svg, lx, ly, style)
        svg.text(lx + 31, ly + 3, label, FS_SMALL, fill="#000")
    y += math.ceil(len(items) / 2) * ROW
    for lines in case_lines:
        for k, line in enumerate(lines):
            svg.text(left + (14 if k else 0), y + 3, line, FS_SMALL, fill="#000")
            y += ROW
    return svg.render()


#: Height of a legend row [user units].
ROW = 15.0


def _wrap(text: str, width: float = 556.0) -> list[str]:
    """A legend entry in as many lines as it needs, broken after commas or spaces."""
    lines, line = [], ""
    for word in text.split(" "):
        trial = f"{line} {word}" if line else word
        if line and text_width(trial, FS_SMALL) > width:
            lines.append(line)
            line = word
        else:
            line = trial
    return [*lines, line]


def _letter(k: int) -> str:
    """The label of the k-th point of an R-X diagram: a, b, ..., z, aa, ab, ..."""
    return (_letter(k // 26 - 1) if k >= 26 else "") + chr(ord("a") + k % 26)


def _case_lines(n: int, c: dict[str, Any]) -> list[str]:
    """A governing case of the R-X diagram's legend, in one or two lines that fit."""
    g, z = c["case"], c["z"]
    head = f"{n}  {c['check']} ({c['result']}):"
    where = g["faulted"] if g["faulted"].startswith("behind") else f"on the {g['faulted']}"
    body = (f"{g['fault_type']} {where} at {_n(g['location_pct'], 1)} %, "
            f"Rf {_n(g['r_fault_ohm'], 1)} Ω, loop {g['loop']}, Z = {_n(z.real, 1)} "
            f"{'+' if z.imag >= 0 else MINUS} j{_n(abs(z.imag), 1)} Ω")
    one = f"{head} {body}"
    return [one] if text_width(one, FS_SMALL) <= 570 else [head, body]


def _clip_box(poly: list[complex], lo_r: float, hi_r: float, lo_x: float,
              hi_x: float) -> list[complex]:
    """The part of a polygon inside the plot frame."""
    poly = _clip(poly, 1 + 0j, hi_r)
    poly = _clip(poly, -1 + 0j, -lo_r)
    poly = _clip(poly, 1j, hi_x)
    return _clip(poly, -1j, -lo_x)


def figures(results, d: dict[str, Any], ctx: dict[str, Any]) -> dict[str, Any]:
    """Every figure of the report, as SVG text keyed by its place in the document."""
    out: dict[str, Any] = {"tower": tower_svg(d, ctx["u"]), "reach": [], "rx": []}
    if ctx["reach"] is not None:
        out["reach"] = [reach_error_svg(e, i) for i, e in enumerate(ctx["reach"]["ends"])]
    out["rx"] = [rx_svg(e, d.get("verification")) for e in ctx["settings"]]
    return out
