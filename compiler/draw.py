"""The pictures, drawn with matplotlib (imported only by `apsidal plot` and `apsidal
report`, never by `apsidal run`).

What each picture shows comes from compiler/pictures.py; this module lays it out in our
own plain style (white ground, light grid, no box, one colour per step from a palette
that colour-blind readers can tell apart) and writes SVG or PNG that regenerate byte for
byte: a fixed SVG hash salt, text kept as text, no date or software version in the file.

Every element a test reads back carries an SVG id (matplotlib's ``gid``), optionally
behind a prefix so that two pictures can share one HTML page:

* chain: ``body``, ``orbit-N`` (N the step that made it, 0 for the start), ``coast-N``,
  ``burn-N`` (one marker per burn, at the burn point);
* waterfall: ``bar-N-dv``, ``bar-N-margin`` (each priced step), ``bar-total``,
  ``capacity``, ``reserve``;
* mass: ``mass``, ``propellant``; sweep: ``curve-K``, ``best``.
"""

from __future__ import annotations

import io

import matplotlib

matplotlib.use("Agg")  # no display, ever

import matplotlib.pyplot as plt
import numpy as np
from matplotlib.lines import Line2D
from matplotlib.patches import Circle, Patch, Rectangle

from .pictures import (
    BODY_FILL,
    METRICS,
    NEUTRAL,
    PALETTE,
    Chain,
    MassSeries,
    SweepSeries,
    Waterfall,
    time_unit,
)
from .textfmt import sig

INK = "#222222"
GRID = "#E4E4E4"
STYLE = {
    "svg.hashsalt": "apsidal",  # ids in the SVG from a fixed salt: byte-identical files
    "svg.fonttype": "none",  # text stays text (selectable, searchable, small)
    "font.family": "DejaVu Sans",
    "font.size": 8.5,
    "axes.edgecolor": "#999999",
    "axes.labelcolor": INK,
    "axes.titlesize": 10,
    "axes.titleweight": "bold",
    "axes.titlelocation": "left",
    "axes.spines.top": False,
    "axes.spines.right": False,
    "axes.grid": True,
    "grid.color": GRID,
    "grid.linewidth": 0.6,
    "xtick.color": "#555555",
    "ytick.color": "#555555",
    "legend.frameon": False,
    "legend.fontsize": 7.5,
    "figure.dpi": 100,
    "savefig.dpi": 100,
    "path.simplify": False,  # every sampled point of an orbit is kept
}
SIZES = {"chain": (7.5, 6.2), "waterfall": (8.0, 4.6), "mass": (8.0, 4.0),
         "sweep": (7.5, 4.6)}
LABEL_BOX = {"facecolor": "white", "edgecolor": "none", "pad": 0.6, "alpha": 0.85}
LABELLED_ORBITS = 12  # beyond this many orbits the legend alone names them
LEGEND_ENTRIES = 16


NOTE = ("apsidal: preliminary-design estimate under the impulsive two-body "
        "approximation")


def _figure(kind: str, width: float | None = None):
    with plt.rc_context(STYLE):
        w, h = SIZES[kind]
        fig = plt.figure(figsize=(width or w, h))
    return fig


def _style():
    return plt.rc_context(STYLE)


def _pale(colour: str) -> str:
    """The colour mixed two parts in three with white: a margin over its step's bar."""
    rgb = [int(colour[i:i + 2], 16) for i in (1, 3, 5)]
    return "#" + "".join(f"{round(c + (255 - c) * 2 / 3):02X}" for c in rgb)


def _colour(colours: dict[str, str], name: str) -> str:
    return colours.get(name, NEUTRAL)


# --- chain ---------------------------------------------------------------------------


def chain_figure(chains: Chain | list[Chain], colours: dict[str, str], title: str = "",
                 view: str = "top", prefix: str = "", note: str = NOTE):
    """The orbits of a plan around its body, to scale; burns numbered where they happen.
    A plan of several bodies (``pictures.chains``) gets one panel per phase, one above
    the other, each around its own body; the ids of panel k > 0 carry ``phaseK-``."""
    chains = [chains] if isinstance(chains, Chain) else list(chains)
    n = len(chains)
    with _style():
        w, h = SIZES["chain"]
        fig = plt.figure(figsize=(w, h * n))
        for k, chain in enumerate(chains):
            pre = prefix if k == 0 else f"{prefix}phase{k}-"
            if view == "3d":
                ax = fig.add_subplot(n, 1, k + 1, projection="3d")
                _chain_3d(ax, chain, colours, pre)
            else:
                ax = fig.add_subplot(n, 1, k + 1)
                _chain_top(ax, chain, colours, pre)
            head = title or "Orbit chain"
            if n > 1:
                head = f"{head}: around {chain.body}" if k == 0 else chain.cut
            ax.set_title(_title(head), loc="left")
        fig.subplots_adjust(left=0.13, right=0.74, bottom=0.09 / n, top=1.0 - 0.1 / n,
                            hspace=0.32)
        _note(fig, note)
    return fig


def _orbit_style(orbit, colours) -> dict:
    colour = NEUTRAL if orbit.index is None else _colour(colours, orbit.name)
    return {"color": colour, "linewidth": 0.9, "linestyle": (0, (4, 2.5)), "alpha": 0.9}


def _chain_top(ax, chain: Chain, colours, prefix: str) -> None:
    body = Circle((0.0, 0.0), chain.radius, facecolor=BODY_FILL, edgecolor=NEUTRAL,
                  linewidth=0.8, zorder=1)
    body.set_gid(f"{prefix}body")
    ax.add_patch(body)
    handles = []
    for orbit in chain.orbits:
        xy = chain.project(orbit.points)
        label = "start orbit" if orbit.index is None else _short(f"{orbit.index} {orbit.name}")
        (line,) = ax.plot(xy[:, 0], xy[:, 1], zorder=2, label=label,
                          **_orbit_style(orbit, colours))
        line.set_gid(f"{prefix}orbit-{orbit.index or 0}")
        handles.append(line)
        if len(chain.orbits) <= LABELLED_ORBITS and orbit.index is not None:
            _label_orbit(ax, xy, orbit, len(handles), line.get_color())
    for arc in chain.arcs:
        xy = chain.project(arc.points)
        colour = NEUTRAL if arc.orbit_name == "start" else _colour(colours, arc.orbit_name)
        (line,) = ax.plot(xy[:, 0], xy[:, 1], color=colour, linewidth=2.2, zorder=3,
                          solid_capstyle="round")
        line.set_gid(f"{prefix}coast-{arc.index}")
    for arc in chain.thrust:  # a finite burn's thrust arc, ignition to cutoff
        xy = chain.project(arc.points)
        (line,) = ax.plot(xy[:, 0], xy[:, 1], color=_colour(colours, arc.name), linewidth=5.0,
                          zorder=4, solid_capstyle="butt")
        line.set_gid(f"{prefix}thrust-{arc.index}")
    span = _span(chain)
    for group in _together(chain, 0.025 * span):
        for burn in group:
            x, y, _ = chain.project(burn.r)
            (mark,) = ax.plot([x], [y], marker="o", markersize=12, markerfacecolor="white",
                              markeredgecolor=_colour(colours, burn.name),
                              markeredgewidth=1.8, linestyle="none", zorder=6)
            mark.set_gid(f"{prefix}burn-{burn.index}")
        x, y, _ = chain.project(group[0].r)
        if len(group) == 1:
            ax.text(x, y, str(group[0].index), ha="center", va="center", fontsize=6.5,
                    color=INK, zorder=7)
        else:  # burns at one place: their numbers beside the marker, inward (the body)
            inward = -np.array([x, y]) / max(np.hypot(x, y), 1e-9)  # the axes edge is outward
            numbers = [str(b.index) for b in group]
            if len(numbers) > 6:
                numbers = numbers[:5] + [f"... {len(group)} burns"]
            ax.annotate("burns " + ", ".join(numbers), (x, y),
                        xytext=tuple(inward * 14), textcoords="offset points", fontsize=7,
                        color=INK, ha="left" if inward[0] >= 0 else "right", va="center",
                        zorder=7)
    sx, sy, _ = chain.project(chain.start)
    (start,) = ax.plot([sx], [sy], marker="s", markersize=5, color=INK, linestyle="none",
                       zorder=6, label="start")
    start.set_gid(f"{prefix}start")
    ax.set_aspect("equal", adjustable="datalim")
    ax.set_xlabel("km, in the start orbit's plane (x towards its periapsis)")
    ax.set_ylabel("km")
    ax.ticklabel_format(style="plain")
    shown = handles[:LEGEND_ENTRIES] + [
        Line2D([], [], color=INK, linewidth=2.2, label="coast flown"),
        *_thrust_legend(chain),
        Line2D([], [], marker="o", markersize=8, markerfacecolor="white",
               markeredgecolor=INK, linestyle="none", label=_burn_label(chain)),
        start]
    if len(handles) > LEGEND_ENTRIES:
        shown.insert(LEGEND_ENTRIES, Patch(color="none", label=f"... {len(handles)} orbits"))
    ax.legend(handles=shown, loc="upper left", bbox_to_anchor=(1.01, 1.0))
    ax.text(0.0, -0.0, chain.body, ha="center", va="center", fontsize=7, color="#555555",
            zorder=4)


def _thrust_legend(chain: Chain) -> list:
    return [Line2D([], [], color=INK, linewidth=5.0, label="thrust arc (finite burn)")
            ] if chain.thrust else []


def _burn_label(chain: Chain) -> str:
    """A finite burn is marked where it cuts off: where the orbit it makes begins."""
    return "burn cutoff (step number)" if chain.thrust else "burn (step number)"


def _span(chain: Chain) -> float:
    pts = np.concatenate([chain.project(o.points)[:, :2] for o in chain.orbits])
    return float(np.nanmax(np.abs(pts))) if np.isfinite(pts).any() else chain.radius


def _together(chain: Chain, distance: float) -> list[list]:
    """The burns in groups of those drawn within ``distance`` (km) of the group's first."""
    groups: list[list] = []
    for burn in chain.burns:
        xy = chain.project(burn.r)[:2]
        for g in groups:
            if np.hypot(*(chain.project(g[0].r)[:2] - xy)) < distance:
                g.append(burn)
                break
        else:
            groups.append([burn])
    return groups


def _label_orbit(ax, xy: np.ndarray, orbit, k: int, colour: str) -> None:
    """The step's number and name on its orbit: at its farthest point for an open or an
    eccentric orbit; at an angle that differs from orbit to orbit for a near-circle, so
    labels of concentric orbits do not sit on one another."""
    radius = np.hypot(xy[:, 0], xy[:, 1])
    if not np.isfinite(radius).any():
        return
    lo, hi = np.nanmin(radius), np.nanmax(radius)
    if orbit.closed and hi - lo < 0.05 * hi:
        angle = np.radians(50.0 + 47.0 * k)
        angles = np.arctan2(xy[:, 1], xy[:, 0])
        spot = int(np.nanargmin(np.abs(np.angle(np.exp(1j * (angles - angle))))))
    elif orbit.closed:  # part-way round from the burn that made it, clear of the apsides
        spot = int(xy.shape[0] * (0.3 + 0.11 * (k % 4)))
    else:
        spot = int(np.nanargmax(radius))
    if not np.isfinite(radius[spot]):
        spot = int(np.nanargmax(radius))
    out = xy[spot, :2] / max(radius[spot], 1e-9)
    ax.annotate(f"{orbit.index} {orbit.name}", xy[spot, :2], xytext=tuple(out * 6),
                textcoords="offset points", fontsize=7, color=colour, zorder=5,
                ha="left" if out[0] >= 0 else "right", va="bottom" if out[1] >= 0 else "top")


def _short(text: str, width: int = 22) -> str:
    """A label cut to ``width`` characters (an ellipsis says so)."""
    return text if len(text) <= width else text[: width - 1] + "\u2026"


def _layout(fig) -> None:
    """Tight margins where matplotlib can find them; the default ones otherwise, silently
    (a crowded axis is no reason to warn a user)."""
    import warnings

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        fig.tight_layout(rect=(0.0, 0.025, 1.0, 1.0))  # room for the note




def note_for(report: dict) -> str:
    """The corner note of a picture of ``report``: the approximation that priced it."""
    from .budget import approximation, models_of

    return ("apsidal: preliminary-design estimate under the "
            + approximation(*models_of(report), short=True))


def _note(fig, note: str = NOTE) -> None:
    """The caution, small, in the corner: a picture pasted alone into a slide keeps it."""
    fig.text(0.995, 0.005, note, ha="right", va="bottom", fontsize=6, color="#888888")


def _title(text: str) -> str:
    import textwrap

    return "\n".join(textwrap.wrap(text, 80)) or text


def _chain_3d(ax, chain: Chain, colours, prefix: str) -> None:
    u, v = np.meshgrid(np.linspace(0, 2 * np.pi, 37), np.linspace(0, np.pi, 19))
    r = chain.radius
    ax.plot_wireframe(r * np.cos(u) * np.sin(v), r * np.sin(u) * np.sin(v), r * np.cos(v),
                      color=NEUTRAL, linewidth=0.3).set_gid(f"{prefix}body")
    handles = []
    for orbit in chain.orbits:
        p = orbit.points
        label = "start orbit" if orbit.index is None else _short(f"{orbit.index} {orbit.name}")
        (line,) = ax.plot(p[:, 0], p[:, 1], p[:, 2], label=label,
                          **_orbit_style(orbit, colours))
        line.set_gid(f"{prefix}orbit-{orbit.index or 0}")
        handles.append(line)
    for arc in chain.arcs:
        colour = NEUTRAL if arc.orbit_name == "start" else _colour(colours, arc.orbit_name)
        p = arc.points
        (line,) = ax.plot(p[:, 0], p[:, 1], p[:, 2], color=colour, linewidth=2.2)
        line.set_gid(f"{prefix}coast-{arc.index}")
    for arc in chain.thrust:
        p = arc.points
        (line,) = ax.plot(p[:, 0], p[:, 1], p[:, 2], color=_colour(colours, arc.name),
                          linewidth=4.5)
        line.set_gid(f"{prefix}thrust-{arc.index}")
    for burn in chain.burns:
        x, y, z = burn.r
        (mark,) = ax.plot([x], [y], [z], marker="o", markersize=10, markerfacecolor="white",
                          markeredgecolor=_colour(colours, burn.name), markeredgewidth=1.6,
                          linestyle="none")
        mark.set_gid(f"{prefix}burn-{burn.index}")
        ax.text(x, y, z, f" {burn.index}", fontsize=7, color=INK)
    pts = np.concatenate([o.points for o in chain.orbits])
    span = np.nanmax(np.abs(pts)) if np.isfinite(pts).any() else r
    for setter in (ax.set_xlim, ax.set_ylim, ax.set_zlim):
        setter(-span, span)
    ax.set_box_aspect((1, 1, 1))
    ax.set_xlabel("x km")
    ax.set_ylabel("y km")
    ax.set_zlabel("z km (body's pole)")
    shown = handles[:LEGEND_ENTRIES] + [
        Line2D([], [], color=INK, linewidth=2.2, label="coast flown"),
        *_thrust_legend(chain),
        Line2D([], [], marker="o", markersize=8, markerfacecolor="white",
               markeredgecolor=INK, linestyle="none", label=_burn_label(chain))]
    ax.legend(handles=shown, loc="upper left", bbox_to_anchor=(1.02, 1.0))


# --- waterfall -----------------------------------------------------------------------


def waterfall_figure(wf: Waterfall, colours: dict[str, str], title: str = "",
                     prefix: str = "", width: float | None = None, note: str = NOTE):
    """Each priced step's delta-v on top of the ones before, then the total."""
    with _style():
        fig = _figure("waterfall", width)
        ax = fig.add_subplot()
        n = len(wf.bars)
        for k, bar in enumerate(wf.bars):
            colour = _colour(colours, bar.name)
            allowance = bar.kind == "allow"  # white stripes over the step's colour
            base = Rectangle((k - 0.38, bar.bottom), 0.76, bar.base, facecolor=colour,
                             edgecolor="white" if allowance else colour,
                             hatch="////" if allowance else None, linewidth=0.6, zorder=3)
            base.set_gid(f"{prefix}bar-{bar.index}-dv")
            ax.add_patch(base)
            margin = Rectangle((k - 0.38, bar.bottom + bar.base), 0.76, bar.margin,
                               facecolor=_pale(colour), edgecolor=colour, linewidth=0.8,
                               zorder=3)
            margin.set_gid(f"{prefix}bar-{bar.index}-margin")
            ax.add_patch(margin)
            if not bar.covered:
                ax.add_patch(Rectangle((k - 0.44, bar.bottom), 0.88, bar.base + bar.margin,
                                       facecolor="none", edgecolor=INK, linewidth=1.2,
                                       linestyle=(0, (2, 1.5)), zorder=4))
            if n <= 20:  # each step's figure over its bar (a 3 m/s trim is a hairline)
                ax.text(k, bar.bottom + bar.base + bar.margin, sig(bar.base + bar.margin),
                        ha="center", va="bottom", fontsize=6.5, color=INK, zorder=4,
                        rotation=90 if n > 8 else 0,  # upright where bars crowd
                        bbox=LABEL_BOX)
            if k + 1 < n:
                top = bar.bottom + bar.base + bar.margin
                ax.plot([k + 0.38, k + 0.62], [top, top], color="#AAAAAA", linewidth=0.6,
                        zorder=2)
        total = Rectangle((n - 0.38, 0.0), 0.76, wf.total, facecolor="#555555",
                          edgecolor="#555555", zorder=3)
        total.set_gid(f"{prefix}bar-total")
        ax.add_patch(total)
        if n <= 8:  # inside a wide bar; above a narrow one
            ax.text(n, wf.total * 0.5, f"{sig(wf.total)}\nm/s", ha="center", va="center",
                    fontsize=7.5, color="white", zorder=4)
        else:
            ax.text(n, wf.total, f"{sig(wf.total)} m/s", ha="center", va="bottom",
                    fontsize=7, color=INK, zorder=5, rotation=90 if n <= 20 else 0,
                    bbox=LABEL_BOX)
        top = wf.total
        lines = []
        if wf.capacity is not None:
            (cap,) = ax.plot([-0.6, n + 0.6], [wf.capacity] * 2, color=INK, linewidth=1.1,
                             label=f"capacity of the load: {sig(wf.capacity)} m/s")
            cap.set_gid(f"{prefix}capacity")
            lines.append(cap)
            if wf.reserve:
                limit = wf.capacity - wf.reserve
                (res,) = ax.plot([-0.6, n + 0.6], [limit] * 2, color=INK, linewidth=0.9,
                                 linestyle=(0, (5, 3)), label=f"capacity less the "
                                 f"{sig(wf.reserve)} m/s reserve: {sig(limit)} m/s")
                res.set_gid(f"{prefix}reserve")
                lines.append(res)
            top = max(top, wf.capacity)
        elif wf.first_uncovered is not None:
            ax.text(0.01, 0.98, f"the load runs out at {wf.first_uncovered}; short "
                    f"{sig(wf.shortfall_kg)} kg (bars outlined: not covered)",
                    transform=ax.transAxes, va="top", fontsize=7.5, color=INK)
        ax.set_xlim(-0.7, n + 0.7)
        headroom = 1.2 if 8 < n <= 20 else 1.08  # upright figures stand above the bars
        ax.set_ylim(0.0, top * headroom if top > 0 else 1.0)
        labels = [_short(f"{b.index} {b.name}") for b in wf.bars] + ["total"]
        step = max(1, -(-len(labels) // 40))  # at most about 40 labels
        ax.set_xticks(range(0, n + 1, step), labels[::step], rotation=40, ha="right",
                      fontsize=7)
        ax.grid(axis="x", visible=False)
        ax.set_ylabel("delta-v, m/s")
        ax.set_title(_title(title or "Where the delta-v goes"), loc="left")
        ax.legend(handles=[
            Patch(facecolor="#999999", label="burn delta-v"),
            Patch(facecolor="#999999", hatch="////", edgecolor="white", label="allowance"),
            Patch(facecolor=_pale("#999999"), edgecolor="#999999", label="margin"),
            *lines], loc="upper left", bbox_to_anchor=(1.0, 1.0))
        _layout(fig)
        _note(fig, note)
    return fig


# --- mass ----------------------------------------------------------------------------


def mass_figure(ms: MassSeries, colours: dict[str, str], title: str = "", prefix: str = "",
                note: str = NOTE):
    """Mass and usable propellant left against elapsed time; each change a step."""
    with _style():
        fig = _figure("mass")
        ax = fig.add_subplot()
        unit, scale = time_unit(float(ms.t[-1]) if ms.t.size else 0.0)
        t = ms.t / scale
        (m,) = ax.step(t, ms.mass, where="post", color=INK, linewidth=1.4, label="mass")
        m.set_gid(f"{prefix}mass")
        (p,) = ax.step(t, ms.propellant, where="post", color="#117733", linewidth=1.2,
                       linestyle=(0, (5, 2)), label="usable propellant left")
        p.set_gid(f"{prefix}propellant")
        for k in range(1, t.size):
            name = ms.names[k]
            if name in colours and ms.mass[k] < ms.mass[k - 1]:
                ax.plot([t[k]], [ms.mass[k]], marker="o", markersize=5, linestyle="none",
                        color=colours[name], zorder=4)
        for when, mass, name in ms.drops:
            ax.annotate(f"{name} released", (when / scale, mass), xytext=(4, -10),
                        textcoords="offset points", fontsize=7, color=INK)
        if (ms.propellant < 0).any():
            ax.axhline(0.0, color="#882255", linewidth=0.8)
            ax.text(0.01, 0.02, "below 0: the load has run out (priced as if the tanks "
                    "held the rest)", transform=ax.transAxes, fontsize=7, color="#882255")
        ax.set_xlabel(f"elapsed, {unit}")
        ax.set_ylabel("kg")
        ax.set_ylim(bottom=min(0.0, float(ms.propellant.min()) * 1.1))
        ax.set_title(_title(title or "Mass over the mission"), loc="left")
        ax.legend(loc="upper right")
        _layout(fig)
        _note(fig, note)
    return fig


# --- sweep ---------------------------------------------------------------------------


def sweep_figure(series: SweepSeries, title: str = "", prefix: str = ""):
    """A trade study's totals against the varied value; the best variant starred."""
    with _style():
        fig = _figure("sweep")
        ax = fig.add_subplot()
        for k, c in enumerate(series.curves):
            colour = PALETTE[k % len(PALETTE)]
            (line,) = ax.plot(c.x, c.y, color=colour, linewidth=1.3, marker="o",
                              markersize=3.5,
                              label=c.label or METRICS.get(series.metric, series.metric))
            line.set_gid(f"{prefix}curve-{k}")
            bad = ~c.feasible
            if bad.any():
                ax.plot(c.x[bad], c.y[bad], marker="o", markersize=7, linestyle="none",
                        markerfacecolor="white", markeredgecolor=colour,
                        label="does not fit its load" if k == 0 else None)
        if series.best is not None and series.best[1] is not None:
            (best,) = ax.plot([series.best[0]], [series.best[1]], marker="*", markersize=14,
                              color=INK, linestyle="none", label=series.best_label)
            best.set_gid(f"{prefix}best")
        elif series.best is not None:  # the sweep minimised another total: where, not how much
            best = ax.axvline(series.best[0], color=INK, linewidth=1.0, linestyle=(0, (1, 2)),
                              label=series.best_label)
            best.set_gid(f"{prefix}best")
        if series.not_flown:
            ax.plot([], [], linestyle="none", label=f"{series.not_flown} variants not flown "
                    "(not drawn)")
        unit = f", {series.unit}" if series.unit else ""
        ax.set_xlabel(f"{series.parameter}{unit}")
        ax.set_ylabel(METRICS.get(series.metric, series.metric))
        ax.set_title(_title(title or "Trade study"), loc="left")
        ax.legend(loc="best")
        _layout(fig)
        _note(fig)
    return fig


# --- files ---------------------------------------------------------------------------


def render(fig, fmt: str) -> bytes:
    """The figure as SVG or PNG bytes, the same bytes every time; the figure is closed."""
    buf = io.BytesIO()
    with _style():
        if fmt == "svg":
            fig.savefig(buf, format="svg", metadata={"Date": None, "Creator": None})
        else:
            fig.savefig(buf, format="png", metadata={"Software": None})
    plt.close(fig)
    return buf.getvalue()
