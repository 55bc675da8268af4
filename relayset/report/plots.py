"""Vector figures of the report (SVG text from matplotlib), drawn from the results only.

matplotlib is imported inside the functions (it is heavy). Output is deterministic: a fixed
hash salt per figure, no date in the metadata, text kept as text (``svg.fonttype = none``)
so the PDF stays searchable. Every string comes from the results and is escaped by
matplotlib's SVG writer; math-text parsing is off so a ``$`` in user text is just a dollar.
Figures are greyscale with distinct line styles, readable in black and white.
"""

from __future__ import annotations

import cmath
import io
import math
import re
from contextlib import contextmanager
from typing import Any

#: Line styles for loops and zones, distinguishable without colour.
STYLES = ("-", "--", ":", "-.", (0, (5, 1, 1, 1, 1, 1)), (0, (1, 3)))
GREYS = ("0.0", "0.35", "0.55", "0.2", "0.45", "0.65")
MARKERS = ("o", "s", "^", "D", "v", "x")
WIDTH_IN = 6.5  # fits A4 and Letter text widths


@contextmanager
def _style(salt: str):
    import matplotlib

    with matplotlib.rc_context({
        "svg.hashsalt": f"relayset-{salt}",
        "svg.fonttype": "none",
        "text.parse_math": False,
        "font.family": "DejaVu Sans",
        "font.size": 7.5,
        "axes.linewidth": 0.6,
        "axes.titlesize": 8,
        "axes.labelsize": 7.5,
        "xtick.labelsize": 7,
        "ytick.labelsize": 7,
        "legend.fontsize": 6.5,
        "legend.framealpha": 1.0,
        "legend.edgecolor": "0.5",
        "lines.linewidth": 1.0,
        "grid.color": "0.85",
        "grid.linewidth": 0.4,
        "axes.grid": True,
        "path.simplify": False,
    }):
        yield


def _figure(w_in: float, h_in: float):
    from matplotlib.backends.backend_svg import FigureCanvasSVG
    from matplotlib.figure import Figure

    fig = Figure(figsize=(w_in, h_in))
    FigureCanvasSVG(fig)
    return fig


def _svg(fig, prefix: str) -> str:
    buf = io.StringIO()
    fig.savefig(buf, format="svg", metadata={"Date": None, "Creator": None},
                bbox_inches=None)
    text = buf.getvalue()
    text = text[text.index("<svg"):]
    # Unique ids per figure: several SVGs share one HTML document.
    text = re.sub(r'\bid="', f'id="{prefix}-', text)
    text = text.replace("url(#", f"url(#{prefix}-").replace('href="#', f'href="#{prefix}-')
    return text.replace("<svg ", f'<svg role="img" aria-label="{prefix}" ', 1)


# ------------------------------------------------------------------------- tower drawing
def tower_svg(d: dict[str, Any], u: dict[str, Any]) -> str | None:
    """To-scale cross-section: phases per circuit (section 1 order), bundles, shield wires
    with grounding, the ground line and dimensions (average heights, h - 2/3 sag)."""
    p = d["parameters"]
    wires = p.get("wires") or []
    if not wires:
        return None
    f = u["m"]
    unit = u["short"]
    order = p["sections"][0]["order"]
    n_c = len(p["phase_labels"])
    pos_names = p["positions"]
    phase_at = {name: (f"{k // 3 + 1}·{order[k]}" if n_c > 1 else order[k])
                for k, name in enumerate(pos_names)}
    groups: dict[str, list[dict]] = {}
    for w in wires:
        groups.setdefault(w["position"] if w["role"] == "phase" else "shield:" + w["position"],
                          []).append(w)
    xs = [w["x_m"] * f for w in wires]
    ys = [w["average_height_m"] * f for w in wires]
    span = max(max(xs) - min(xs), 1.0)
    top = max(ys)
    with _style("tower"):
        h_in = 3.9
        fig = _figure(WIDTH_IN, h_in)
        ax = fig.add_axes((0.1, 0.12, 0.88, 0.84))
        ax.set_aspect("equal", adjustable="box")
        ax.grid(False)
        half = max(abs(min(xs)), abs(max(xs))) + 0.5 * span + 0.25 * top
        # Ground line with hatching below it.
        ax.axhline(0.0, color="0", lw=1.2)
        ax.fill_between([-2 * half, 2 * half], [0, 0], [-0.035 * top] * 2,
                        facecolor="white", edgecolor="0.4", hatch="////", lw=0)
        ax.text(half * 0.98, 0.01 * top, "ground", ha="right", va="bottom", fontsize=6.5)
        ax.axvline(0.0, color="0.5", lw=0.6, ls=(0, (8, 2, 2, 2)))
        ax.text(0.0, -0.06 * top, "tower centre line", ha="center", va="top", fontsize=6.5,
                color="0.3")
        heights: dict[str, float] = {}
        for key, ws in groups.items():
            gx = sum(w["x_m"] for w in ws) / len(ws) * f
            gy = sum(w["average_height_m"] for w in ws) / len(ws) * f
            heights[f"{gy:.2f}"] = gy
            side = -1 if gx < 0 else 1
            where = {"xytext": (side * 9, 0), "textcoords": "offset points",
                     "ha": "left" if side > 0 else "right", "va": "center"}
            if key.startswith("shield:"):
                w = ws[0]
                ax.plot([gx], [gy], marker="^", ms=7, mfc="white", mec="0", mew=1.0, ls="none")
                ground = {"continuous": "earthed at every tower", "segmented":
                          "segmented, earthed at one point", "none": "insulated"}.get(
                              w["grounding"] or "", w["grounding"] or "")
                ax.annotate(f"{w['position']}, x = {gx:.2f} {unit}\n{ground}", (gx, gy),
                            fontsize=6.5, **where)
                if w["grounding"] in ("continuous", "segmented"):
                    # Earthing symbol below the wire: a short drop with three bars.
                    ax.plot([gx, gx], [gy, gy - 0.04 * top], color="0.3", lw=0.6)
                    for k, bar in enumerate((0.02, 0.013, 0.006)):
                        yy = gy - 0.04 * top - k * 0.01 * top
                        ax.plot([gx - bar * top, gx + bar * top], [yy, yy], color="0.3",
                                lw=0.6)
                continue
            for w in ws:
                ax.plot([w["x_m"] * f], [w["average_height_m"] * f], marker="o",
                        ms=5.5 if len(ws) == 1 else 3.5, mfc="0", mec="0", ls="none")
            label = phase_at.get(key, key)
            extra = f"\n{len(ws)}-conductor bundle" if len(ws) > 1 else ""
            ax.annotate(label, (gx, gy), xytext=(0, 5), textcoords="offset points",
                        ha="center", va="bottom", fontsize=8, fontweight="bold")
            ax.annotate(f"x = {gx:.2f} {unit}{extra}", (gx, gy), xytext=(0, -5),
                        textcoords="offset points", ha="center", va="top", fontsize=6)
        # Dimensions: average heights at the left, from the ground line.
        x_dim = -half * 0.97
        ax.annotate("", (x_dim, 0), xytext=(x_dim, top),
                    arrowprops={"arrowstyle": "<->", "lw": 0.6, "color": "0.3",
                                "shrinkA": 0, "shrinkB": 0})
        for _, gy in sorted(heights.items(), key=lambda kv: kv[1]):
            ax.plot([x_dim, -half * 0.75], [gy, gy], color="0.5", lw=0.4, ls=":")
            ax.text(x_dim + 0.01 * half, gy, f"{gy:.2f} {unit}", ha="left", va="bottom",
                    fontsize=6.5)
        ax.set_xlim(-half, half)
        ax.set_ylim(-0.12 * top, top * 1.1)
        ax.set_xlabel(f"horizontal position [{unit}]")
        ax.set_ylabel(f"average height above ground [{unit}]")
        for side in ("top", "right"):
            ax.spines[side].set_visible(False)
        return _svg(fig, "tower")


# ----------------------------------------------------------------------- reach-error plot
def reach_error_svg(end: dict[str, Any], index: int) -> str:
    """Bolted reach error against fault location per loop, one row per arrangement."""
    arrs = end["arrangements"]
    h_in = 0.75 + 1.55 * len(arrs)
    with _style(f"reach{index}"):
        fig = _figure(WIDTH_IN, h_in)
        axes = fig.subplots(len(arrs), 2, sharex=True, squeeze=False)
        fig.subplots_adjust(left=0.09, right=0.98, top=1 - 0.62 / h_in, bottom=0.42 / h_in,
                            hspace=0.55, wspace=0.16)
        for r, a in enumerate(arrs):
            env = a["envelope"]
            x = env["location_pct"]
            loops = env["loops"]
            for c, want_ground in enumerate((True, False)):
                ax = axes[r][c]
                k = 0
                for i, lp in enumerate(loops):
                    ground = lp.replace("-", "").upper().endswith("G")
                    if ground != want_ground:
                        continue
                    kw = {"color": GREYS[k], "ls": STYLES[k], "lw": 1.0}
                    ax.plot(x, env["bolted_reach_error_max_pct"][i], label=f"{lp} max", **kw)
                    ax.plot(x, env["bolted_reach_error_min_pct"][i], marker=MARKERS[k],
                            markevery=max(1, len(x) // 8), ms=3, mfc="white",
                            label=f"{lp} min", **kw)
                    k += 1
                ax.axhline(0.0, color="0", lw=0.5)
                if c == 0:
                    ax.set_ylabel("reach error [%]")
                    ax.set_title(a["title"], loc="left", fontweight="bold")
                if r == len(arrs) - 1:
                    ax.set_xlabel("fault location [% of line from the relay]")
                if r == 0:
                    ax.legend(ncol=3, loc="lower left", bbox_to_anchor=(0.0, 1.22),
                              handlelength=2.6, columnspacing=0.8, borderaxespad=0,
                              title="ground loops" if want_ground else "phase loops",
                              title_fontsize=7)
        return _svg(fig, f"reach-error-{index}")


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


def quad_outline(x_reach: float, r_reach: float, angle_rad: float,
                 forward: bool = True) -> list[complex]:
    """Corners of the quadrilateral as drawn: reactance line, two blinders parallel to the
    line angle, directional line through the origin (the shape documented in
    :func:`relayset.physics.zones.quad_contains`)."""
    big = 10 * (abs(x_reach) + abs(r_reach) + 1)
    poly = [complex(-big, -big), complex(big, -big), complex(big, big), complex(-big, big)]
    s, c = math.sin(angle_rad), math.cos(angle_rad)
    poly = _clip(poly, 1j, x_reach)  # X <= Xr
    poly = _clip(poly, complex(s, -c), r_reach * s)  # right blinder
    poly = _clip(poly, complex(-s, c), r_reach * s)  # left blinder
    poly = _clip(poly, complex(-c, -s), 0.0)  # directional: Re(Z e^-jθ) >= 0
    return poly if forward else [-z for z in poly]


def rx_svg(end: dict[str, Any], extra_loci: list[tuple[str, list[complex]]] | None = None) -> str:
    """R-X diagram (primary ohms) of one relay end: zones as set, line replica, load region,
    and optionally loci of fault cases (from the verification)."""
    s = end["settings_dict"]
    theta = math.radians(s["line"]["angle_deg"])
    zl = complex(*s["line"]["z1_primary_ohm"])
    with _style(f"rx{end['index']}"):
        fig = _figure(WIDTH_IN, 5.0)
        ax = fig.add_axes((0.1, 0.27, 0.88, 0.68))
        ax.set_aspect("equal", adjustable="box")
        pts: list[complex] = [0j, zl]
        handles = []
        for k, z in enumerate(s["zones"].values()):
            style = {"color": GREYS[k % len(GREYS)], "ls": STYLES[k % len(STYLES)], "lw": 1.1}
            if z["shape"] == "mho":
                dia = z["mho_diameter_primary_ohm"]
                ang = math.radians(z["char_angle_deg"])
                centre = 0.5 * dia * cmath.exp(1j * ang)
                t = [2 * math.pi * i / 180 for i in range(181)]
                ring = [centre + 0.5 * dia * cmath.exp(1j * a) for a in t]
                (h,) = ax.plot([q.real for q in ring], [q.imag for q in ring],
                               label=f"{z['label']} (mho)", **style)
                pts += ring
            else:
                fwd = z["direction"] == "forward"
                for rkey, lw, lab in (("r_reach_phase_primary_ohm", 1.1, "phase"),
                                      ("r_reach_ground_primary_ohm", 0.6, "ground")):
                    poly = quad_outline(z["x_reach_primary_ohm"], z[rkey], theta, fwd)
                    poly = [*poly, poly[0]]
                    (h,) = ax.plot([q.real for q in poly], [q.imag for q in poly],
                                   **{**style, "lw": lw},
                                   label=f"{z['label']}, {lab} loops")
                    pts += poly
                    if lab == "phase":
                        handles.append(h)
                continue
            handles.append(h)
        (hl,) = ax.plot([0, zl.real], [0, zl.imag], color="0", lw=2.2, solid_capstyle="butt",
                        label="line replica Z1")
        ax.plot([zl.real], [zl.imag], marker="o", ms=3.5, color="0")
        handles.append(hl)
        for label, locus in extra_loci or []:
            (hv,) = ax.plot([q.real for q in locus], [q.imag for q in locus], marker=".",
                            ms=2.5, ls="none", color="0.3", label=label)
            handles.append(hv)
        re_ = [q.real for q in pts]
        im_ = [q.imag for q in pts]
        lo_r, hi_r, lo_x, hi_x = min(re_), max(re_), min(im_), max(im_)
        size = max(hi_r - lo_r, hi_x - lo_x)
        lo_r, hi_r = lo_r - 0.08 * size, hi_r + 0.08 * size
        lo_x, hi_x = lo_x - 0.08 * size, hi_x + 0.08 * size
        # Load region: |Z| >= Zmin within the largest load angle, both power directions.
        zmin = s["load"]["z_min_primary_ohm"]
        phi = math.radians(s["load"]["load_angle_max_deg"])
        far = 3 * (size + zmin)
        for base in (0.0, math.pi):
            arc = [zmin * cmath.exp(1j * (base + a))
                   for a in [-phi + 2 * phi * i / 40 for i in range(41)]]
            outer = [far * cmath.exp(1j * (base + phi)), far * cmath.exp(1j * (base - phi))]
            region = [*arc, *outer]
            hp = ax.fill([q.real for q in region], [q.imag for q in region], facecolor="none",
                         edgecolor="0.45", hatch="\\\\\\", lw=0.5,
                         label=f"load region (|Z| ≥ {zmin:.1f} Ω, ±{math.degrees(phi):.0f}°)")
        handles.append(hp[0])
        hi_r = max(hi_r, min(zmin * 1.3, hi_r + size))
        lo_r = min(lo_r, max(-zmin * 1.3, lo_r - 0.2 * size))
        ax.set_xlim(lo_r, hi_r)
        ax.set_ylim(lo_x, hi_x)
        ax.axhline(0, color="0", lw=0.5)
        ax.axvline(0, color="0", lw=0.5)
        ax.set_xlabel("R, primary [Ω]")
        ax.set_ylabel("X, primary [Ω]")
        ax.set_title(f"Relay at {end['end']}", loc="left")
        fig.legend(handles=handles, loc="lower center", bbox_to_anchor=(0.5, 0.0), ncol=3,
                   handlelength=2.6)
        return _svg(fig, f"rx-{end['index']}")


def figures(results, d: dict[str, Any], ctx: dict[str, Any]) -> dict[str, Any]:
    """Every figure of the report, as SVG text keyed by its place in the document."""
    out: dict[str, Any] = {"tower": tower_svg(d, ctx["u"]), "reach": [], "rx": []}
    if ctx["reach"] is not None:
        out["reach"] = [reach_error_svg(e, i) for i, e in enumerate(ctx["reach"]["ends"])]
    out["rx"] = [rx_svg(e) for e in ctx["settings"]]
    return out
