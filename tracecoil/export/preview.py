"""SVG and PNG previews of copper outlines (matplotlib, no pyplot state).

Every copper layer is drawn filled and half transparent with an opaque
edge in its colour, top layer last so it sits on top (where layers overlap
exactly, the edges still show which layers are there); drilled holes are white discs with a dark edge, the board
edge a dark line. The legend names each layer ("L1 top", ...), and a scale
bar gives a round length in millimetres (1, 2 or 5 times a power of ten,
at most a fifth of the drawing's width).

Layer colours are the colour-blind-safe qualitative palette of M. Okabe and
K. Ito, "Color Universal Design", 2008 (from memory), so that neighbouring
layers stay distinguishable in print and for most readers.

matplotlib is imported inside the functions: importing this module is
cheap, and a command that never draws never pays for matplotlib.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
from shapely.geometry.polygon import orient

from ..errors import SpecError
from .atomic import atomic_path

FORMATS = ("svg", "png")
# Okabe-Ito palette, without black (used for holes and the board edge).
LAYER_COLOURS = ("#D55E00", "#0072B2", "#009E73", "#E69F00", "#CC79A7", "#56B4E9", "#F0E442")
_EDGE = "#222222"


def layer_colour(layer: int, n_layers: int) -> str:
    """Colour of copper layer ``layer`` (1 = top) on a board of ``n_layers``:
    top vermilion, bottom blue, inner layers the remaining palette colours.

    >>> layer_colour(1, 4), layer_colour(4, 4), layer_colour(2, 4)
    ('#D55E00', '#0072B2', '#009E73')
    """
    if layer == 1:
        return LAYER_COLOURS[0]
    if layer == n_layers:
        return LAYER_COLOURS[1]
    inner = LAYER_COLOURS[2:]
    return inner[(layer - 2) % len(inner)]


def scale_bar_mm(span_mm: float) -> float:
    """A round scale-bar length (1, 2 or 5 x 10^k mm) at most a fifth of
    ``span_mm``.

    >>> scale_bar_mm(60.0), scale_bar_mm(9.0), scale_bar_mm(0.4)
    (10.0, 1.0, 0.05)
    """
    if not span_mm > 0:
        raise SpecError(f"span_mm must be > 0 mm; got {span_mm}")
    target = span_mm / 5
    k = math.floor(math.log10(target))
    for m in (5, 2, 1):
        if m * 10**k <= target:
            return float(round(m * 10**k, 12))
    return float(10**k)  # pragma: no cover - m = 1 always fits


def _compound_path(multipolygon):
    """One matplotlib Path for all polygons of a layer (holes included)."""
    from matplotlib.path import Path as MPath

    verts, codes = [], []
    for poly in multipolygon.geoms:
        poly = orient(poly, sign=1.0)  # holes run opposite to the exterior
        for ring in [poly.exterior, *poly.interiors]:
            xy = np.asarray(ring.coords)[:, :2]
            c = np.full(len(xy), MPath.LINETO, dtype=np.uint8)
            c[0] = MPath.MOVETO
            c[-1] = MPath.CLOSEPOLY
            verts.append(xy)
            codes.append(c)
    return MPath(np.concatenate(verts), np.concatenate(codes))


def preview_figure(outlines, *, title: str | None = None, size_in: float = 8.0):
    """A matplotlib Figure showing all layers, drills, board, legend, scale.

    Parameters
    ----------
    outlines : tracecoil.outline.Outlines
        Copper per layer (mm), drills (n, 3) as x, y, diameter (mm), board.
    title : str, optional
        Figure title (e.g. the coil name).
    size_in : float
        Height of the figure in inches (the width adds a quarter for the
        legend, which sits to the right of the drawing).

    Returns
    -------
    matplotlib.figure.Figure
    """
    from matplotlib.figure import Figure
    from matplotlib.lines import Line2D
    from matplotlib.patches import Circle, Patch, PathPatch
    from mpl_toolkits.axes_grid1.anchored_artists import AnchoredSizeBar

    fig = Figure(figsize=(size_in * 1.25, size_in))
    ax = fig.add_subplot(1, 1, 1)
    n_layers = max(outlines.layer_names) if outlines.layer_names else max(outlines.copper, default=1)
    handles = []
    bounds = []
    for layer in sorted(outlines.copper, reverse=True):  # bottom first, top drawn last
        geom = outlines.copper[layer]
        if geom.is_empty:
            continue
        colour = layer_colour(layer, n_layers)
        path = _compound_path(geom)
        ax.add_patch(PathPatch(path, facecolor=colour, edgecolor="none", alpha=0.5))
        ax.add_patch(PathPatch(path, facecolor="none", edgecolor=colour, linewidth=0.6))  # opaque edge
        name = outlines.layer_names.get(layer, str(layer))
        handles.append((layer, Patch(facecolor=colour, edgecolor=colour, label=f"L{layer} {name}")))
        bounds.append(geom.bounds)
    handles = [h for _, h in sorted(handles, key=lambda t: t[0])]
    drills = np.asarray(outlines.drills, float).reshape(-1, 3)
    for x, y, d in drills:
        ax.add_patch(Circle((x, y), d / 2, facecolor="white", edgecolor=_EDGE, linewidth=0.6, zorder=3))
    if len(drills):
        handles.append(Patch(facecolor="white", edgecolor=_EDGE, label=f"drills ({len(drills)})"))
    if outlines.board is not None:
        bx, by = outlines.board.exterior.xy
        ax.plot(bx, by, color=_EDGE, linewidth=1.0, zorder=4)
        handles.append(Line2D([], [], color=_EDGE, linewidth=1.0, label="board edge"))
        bounds.append(outlines.board.bounds)
    if not bounds:
        raise SpecError("nothing to preview: the outlines hold no copper and no board edge")
    b = np.array(bounds)
    x0, y0, x1, y1 = b[:, 0].min(), b[:, 1].min(), b[:, 2].max(), b[:, 3].max()
    span = max(x1 - x0, y1 - y0)
    margin = 0.08 * span
    ax.set_xlim(x0 - margin, x1 + margin)
    ax.set_ylim(y0 - margin - 0.06 * span, y1 + margin)
    ax.set_aspect("equal")
    ax.set_axis_off()
    bar = scale_bar_mm(span)
    label = f"{bar:g} mm"
    ax.add_artist(AnchoredSizeBar(ax.transData, bar, label, loc="lower left", frameon=False, size_vertical=span / 300, color=_EDGE, pad=0.3, sep=4))
    ax.legend(handles=handles, loc="upper left", bbox_to_anchor=(1.0, 1.0), fontsize=9, frameon=False)
    if title:
        ax.set_title(title)
    fig.tight_layout()
    return fig


def save_preview(outlines, filename, *, fmt: str, title: str | None = None, dpi: int = 150) -> None:
    """Write a preview to ``filename`` directly (not atomic: the caller
    stages the name, as :func:`tracecoil.export.build` does).

    ``fmt`` is 'svg' or 'png'. SVG output is reproducible: no date, fixed
    element ids.
    """
    if fmt not in FORMATS:
        raise SpecError(f"preview format must be one of {FORMATS}; got {fmt!r}")
    import matplotlib

    with matplotlib.rc_context({"svg.hashsalt": "tracecoil", "svg.fonttype": "none"}):
        fig = preview_figure(outlines, title=title)
        metadata = {"Date": None} if fmt == "svg" else {"Software": "tracecoil"}
        fig.savefig(filename, format=fmt, dpi=dpi, metadata=metadata)


def write_preview(outlines, path, *, title: str | None = None, dpi: int = 150) -> Path:
    """Write an SVG or PNG preview (chosen by the extension of ``path``)
    atomically; return the path."""
    fmt = Path(path).suffix.lower().lstrip(".")
    if fmt not in FORMATS:
        raise SpecError(f"preview file must end in .svg or .png; got {str(path)!r}")
    with atomic_path(path) as tmp:
        save_preview(outlines, tmp, fmt=fmt, title=title, dpi=dpi)
    return Path(path)
