"""Reports of a rule check: readable text, JSON, and a picture of the
layout with every violation marked, numbered and listed.

All files are written atomically. matplotlib is imported only when a
picture is drawn.
"""

from __future__ import annotations

from pathlib import Path

from ..errors import SpecError
from ..export.atomic import atomic_path, write_json, write_text
from .findings import CheckResult
from .geometry import IGNORE_ANGLE_DEG, LIMIT_TOL_MM

PICTURE_FORMATS = ("svg", "png")
REPORT_FORMATS = ("txt", "json", "svg", "png")
MARK_COLOUR = "#C00000"
_MAX_LISTED = 40  # findings listed beside the picture
MAX_PER_RULE = 25  # findings of one rule on one layer spelled out in the text report


def _fmt(v, unit="mm"):
    if v is None:
        return "-"
    return f"{v:.4f}" if unit == "mm" else f"{v:.1f}"


def _limits_line(r) -> list[str]:
    return [
        f"  width >= {r.min_width_outer_mm:g} mm outer, {r.min_width_inner_mm:g} mm inner; gap >= {r.min_gap_outer_mm:g} mm outer, {r.min_gap_inner_mm:g} mm inner",
        f"  drill >= {r.min_drill_mm:g} mm, annular ring >= {r.min_annular_ring_mm:g} mm, hole to hole >= {r.via_to_via_mm:g} mm, "
        f"hole to copper >= {r.via_to_trace_mm:g} mm, copper to board edge >= {r.edge_clearance_mm:g} mm",
    ]


def text_report(result: CheckResult) -> str:
    """The check as plain text: verdict, one line per violation with place,
    measured and required value, per-layer measurements, the IPC-2221 table,
    notes and safety cautions.

    >>> from tracecoil import spiral
    >>> from tracecoil.rules import check
    >>> text = text_report(check(spiral(shape="square", outer_mm=10, turns=3, width_mm=0.12, gap_mm=0.3), "standard"))
    >>> print(text.splitlines()[2])
    Result: 2 violations
    """
    r = result.rules
    src = f" ({r.source})" if r is not None and r.source else ""
    lines = [f"Rule check of {result.name!r} against rule set {r.name!r}{src}", f"  {r.description}" if r.description else ""]
    n = len(result.findings)
    lines.append("Result: clean, no rule broken" if result.ok else f"Result: {n} violation{'s' if n != 1 else ''}")
    lines.append("")
    lines.append("Limits")
    lines += _limits_line(r)
    if result.current_a > 0:
        lines.append(f"  temperature rise <= {r.max_temp_rise_c:g} K at {result.current_a:g} A (IPC-2221 trace fit)")
    if result.voltage_v > 0:
        lines.append(f"  spacing for {result.voltage_v:g} V working voltage per IPC-2221 Table 6-1 ({r.condition} outer layers)")
    if not result.ok:
        lines += ["", "Violations"]
        shown: dict = {}
        for k, f in enumerate(_sorted(result), 1):
            key = (f.rule, f.layer)
            shown[key] = shown.get(key, 0) + 1
            if shown[key] > MAX_PER_RULE:
                if shown[key] == MAX_PER_RULE + 1:
                    more = sum(1 for g in result.findings if (g.rule, g.layer) == key) - MAX_PER_RULE
                    lines.append(f"       ... and {more} more {f.rule} on {f.layer} (all are in the JSON report and the picture)")
                continue
            rel = "<=" if f.rule == "TEMPERATURE_RISE" else ">="
            lines.append(
                f"  {k:>3}. {f.rule} on {f.layer} at ({f.at[0]:.3f}, {f.at[1]:.3f}) mm: measured {_fmt(f.measured, f.unit)} {f.unit}, "
                f"required {rel} {_fmt(f.limit, f.unit)} {f.unit}"
            )
            lines.append(f"       {f.message}")
    if result.measured:
        lines += ["", "Measured per layer (mm; '-' = nothing within 1.5x the limit)"]
        lines.append(f"  {'layer':<8} {'narrowest':>10} {'gap':>10} {'ring':>10} {'gap for V':>10}")
        for name, m in result.measured.items():
            lines.append(
                f"  {name:<8} {_fmt(m.get('narrowest_mm')):>10} {_fmt(m.get('smallest_gap_mm')):>10} {_fmt(m.get('smallest_ring_mm')):>10} "
                f"{_fmt(m.get('voltage_gap_mm') or None):>10}"
            )
    if result.electrical:
        lines += ["", f"Trace heating (IPC-2221 fit, k = 0.048 outer / 0.024 inner; allowed rise {r.max_temp_rise_c:g} K)"]
        lines.append(f"  {'layer':<8} {'width mm':>9} {'Cu um':>6} {'I A':>7} {'rise K':>7} {'I max A':>8}")
        for row in result.electrical:
            est = "~" if row["width_estimated"] else " "
            lines.append(
                f"  {row['layer']:<8} {est}{row['width_mm']:>8.3f} {row['copper_um']:>6g} {row['current_a']:>7.3g} {row['temp_rise_c']:>7.2f} {row['max_current_a']:>8.3g}"
            )
    if result.notes:
        lines += ["", "Notes"] + [f"  - {s}" for s in result.notes]
    if result.cautions:
        lines += ["", "Cautions"] + [f"  ! {s}" for s in result.cautions]
    lines += [
        "",
        f"Method: widths and gaps are measured between facing edges of the copper polygons (edges meeting at {IGNORE_ANGLE_DEG:g} degrees "
        f"or more are corners); a value within {LIMIT_TOL_MM * 1000:g} um of its limit passes.",
    ]
    return "\n".join(lines) + "\n"


def _sorted(result):
    return [f for fs in result.by_rule().values() for f in fs]


def write_report_json(result: CheckResult, path) -> Path:
    """Write ``result.to_dict()`` as JSON atomically; return the path."""
    return write_json(path, result.to_dict())


def picture_figure(result: CheckResult, *, title: str | None = None):
    """The layout (all layers, drills, board edge) with every violation
    marked by a numbered ring, the measured span drawn as a line, and the
    numbered list beside the drawing. Returns a matplotlib Figure."""
    from matplotlib.patches import Circle

    from ..export.preview import preview_figure

    out = result.outlines
    if out is None:
        raise SpecError("this check result holds no outlines to draw")
    verdict = "clean" if result.ok else f"{len(result.findings)} violation(s)"
    fig = preview_figure(out, title=title or f"{result.name}: rule set {result.rules.name!r}, {verdict}")
    ax = fig.axes[0]
    x0, x1 = ax.get_xlim()
    y0, y1 = ax.get_ylim()
    span = max(x1 - x0, y1 - y0)
    ring = span / 70
    listed = []
    for k, f in enumerate(_sorted(result), 1):
        ax.add_patch(Circle(f.at, ring, facecolor="none", edgecolor=MARK_COLOUR, linewidth=1.4, zorder=10))
        if f.span:
            (ax_, ay), (bx, by) = f.span
            ax.plot([ax_, bx], [ay, by], color=MARK_COLOUR, linewidth=1.2, zorder=11)
        ax.annotate(str(k), f.at, xytext=(f.at[0] + ring, f.at[1] + ring), color=MARK_COLOUR, fontsize=8, fontweight="bold", zorder=12)
        if k <= _MAX_LISTED:
            rel = ">" if f.rule == "TEMPERATURE_RISE" else "<"
            listed.append(f"{k:>2} {f.rule} {f.layer} {_fmt(f.measured, f.unit)} {rel} {_fmt(f.limit, f.unit)} {f.unit}")
    if len(result.findings) > _MAX_LISTED:
        listed.append(f"... and {len(result.findings) - _MAX_LISTED} more (see the text report)")
    if listed:
        w, h = fig.get_size_inches()
        fig.set_size_inches(w * 1.3, h)
        ax.set_position([0.02, 0.04, 0.6, 0.88])  # room on the right for the legend and the list
        ax.text(1.03, 0.62, "\n".join(listed), transform=ax.transAxes, fontsize=7, color=MARK_COLOUR, va="top", ha="left", family="monospace")
    return fig


def write_picture(result: CheckResult, path, *, dpi: int = 150) -> Path:
    """Write the marked-up picture as SVG or PNG (by the extension of
    ``path``) atomically; return the path."""
    fmt = Path(path).suffix.lower().lstrip(".")
    if fmt not in PICTURE_FORMATS:
        raise SpecError(f"picture file must end in .svg or .png; got {str(path)!r}")
    import matplotlib

    with matplotlib.rc_context({"svg.hashsalt": "tracecoil", "svg.fonttype": "none"}):
        fig = picture_figure(result)
        with atomic_path(path) as tmp:
            fig.savefig(tmp, format=fmt, dpi=dpi, metadata={"Date": None} if fmt == "svg" else {"Software": "tracecoil"})
    return Path(path)


def write_reports(result: CheckResult, out_dir, *, formats=REPORT_FORMATS, stem: str | None = None) -> dict:
    """Write the reports named in ``formats`` ('txt', 'json', 'svg', 'png')
    into ``out_dir`` as ``<stem>-check.<ext>``; return {format: path}."""
    bad = [f for f in formats if f not in REPORT_FORMATS]
    if bad:
        raise SpecError(f"report formats must be among {', '.join(REPORT_FORMATS)}; got {bad}")
    d = Path(out_dir)
    d.mkdir(parents=True, exist_ok=True)
    base = f"{stem or result.name}-check"
    written = {}
    for fmt in formats:
        p = d / f"{base}.{fmt}"
        if fmt == "txt":
            written[fmt] = write_text(p, text_report(result))
        elif fmt == "json":
            written[fmt] = write_report_json(result, p)
        else:
            written[fmt] = write_picture(result, p)
    return written
