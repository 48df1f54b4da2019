"""One self-contained HTML page about a design.

:func:`collect` runs the engines once (geometry summary, prediction,
frequency sweep, field map, signal, rule check) and draws the pictures;
:meth:`Report.html` turns the result into a page whose pictures are
embedded as base64 PNG (no external files, scripts, fonts or style
sheets); :func:`write_report` does both and writes the page atomically.

Sections: the design and its parameters; the geometry (all layers, then
one picture per copper layer, and the summary numbers); the electrical
numbers with their stated accuracy; L, R and Q against frequency; the
field map; the signal of the design's ``[target]`` along its ``[motion]``
(when both are given); the rule check with its marked picture, findings
and measurements; safety cautions; and sweep plots when a sweep result is
given (drawn by :mod:`tracecoil.variants.plots`).

The numbers shown are also embedded as JSON (``<script
type="application/json" id="tracecoil-data">``), so scripts can read them
from the page.
"""

from __future__ import annotations

import base64
import csv
import html
import io
import json
import math
import tempfile
from dataclasses import dataclass, field, fields, replace
from pathlib import Path

from ..compare import plain
from ..errors import SpecError

DATA_ID = "tracecoil-data"
SECTIONS = ("design", "geometry", "electrical", "frequency", "field", "signal", "rules", "cautions", "sweep")
TITLES = {
    "design": "Design",
    "geometry": "Geometry",
    "electrical": "Electrical prediction",
    "frequency": "L, R and Q against frequency",
    "field": "Magnetic field",
    "signal": "Signal at the target",
    "rules": "Rule check",
    "cautions": "Safety cautions",
    "sweep": "Sweep",
}
MAX_FINDINGS_LISTED = 200
PREVIEW_DPI = 90
PLOT_DPI = 100


# ----------------------------------------------------------------------------
# pictures
# ----------------------------------------------------------------------------


@dataclass(frozen=True)
class Image:
    """A PNG picture and its caption."""

    caption: str
    png: bytes

    def tag(self) -> str:
        data = base64.b64encode(self.png).decode("ascii")
        cap = html.escape(self.caption)
        return f'<figure><img alt="{cap}" src="data:image/png;base64,{data}"><figcaption>{cap}</figcaption></figure>'


def figure_png(fig, *, dpi: int = PLOT_DPI) -> bytes:
    """PNG bytes of a matplotlib Figure."""
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=dpi, metadata={"Software": "tracecoil"})
    return buf.getvalue()


def drawn_png(draw) -> bytes:
    """PNG bytes of a picture that a function writes to a file:
    ``draw(path)`` is called with a path in a temporary folder."""
    with tempfile.TemporaryDirectory(prefix="tracecoil-report-") as d:
        path = Path(d) / "picture.png"
        draw(path)
        return path.read_bytes()


# ----------------------------------------------------------------------------
# sweep results
# ----------------------------------------------------------------------------


def read_sweep_csv(path) -> list[dict]:
    """Records of a sweep results file (``tracecoil sweep``'s CSV): metric
    columns typed by the metric registry, other cells as numbers where they
    look like numbers, empty cells as None."""
    from ..variants.metrics import METRICS
    from ..variants.space import parse_value

    p = Path(path)
    if not p.is_file():
        raise SpecError(f"sweep results file {str(p)!r} does not exist")
    types = {c.name: c.type for m in METRICS.values() for c in m.columns}

    def parse(col, text):
        if text == "":
            return None
        if col in ("variant_id", "error"):
            return text
        t = types.get(col)
        if t is bool:
            return text == "true"
        return t(text) if t is not None else parse_value(text)

    with open(p, encoding="utf-8", newline="") as f:
        rows = list(csv.reader(f))
    if len(rows) < 2:
        raise SpecError(f"{p}: no sweep results in the file")
    head = rows[0]
    if "variant_id" not in head or "error" not in head:
        raise SpecError(f"{p}: not a sweep results file (needs the columns variant_id and error); got {head[:6]}")
    try:
        return [{c: parse(c, t) for c, t in zip(head, r)} for r in rows[1:] if len(r) == len(head)]
    except ValueError as e:
        raise SpecError(f"{p}: a cell is not of its column's type ({e})") from None


def sweep_keys(records) -> list[str]:
    """The varied keys of sweep records: the columns that are neither the
    variant id, the error nor a metric column."""
    from ..variants.metrics import METRICS

    results = {c.name for m in METRICS.values() for c in m.columns}
    return [k for k in records[0] if k not in ("variant_id", "error") and k not in results]


def sweep_images(records, *, keys=None, tradeoff=None) -> list[Image]:
    """The sweep pictures of :mod:`tracecoil.variants.plots`: each numeric
    metric against the first varied key, and the trade-off of two metrics
    (``tradeoff``, default the first two numeric metrics that have a
    better direction) with rule failures marked."""
    from ..variants.plots import column_info, plot_metric, plot_tradeoff

    records = list(records)
    if not records:
        raise SpecError("the sweep result holds no records")
    keys = list(keys) if keys else sweep_keys(records)
    if not keys:
        raise SpecError("cannot tell which keys the sweep varied; give sweep_keys")
    ok = [r for r in records if r.get("error") is None]
    if not ok:
        raise SpecError("no variant of the sweep succeeded; there is nothing to plot")
    from ..variants.metrics import METRICS

    floats = {c.name for m in METRICS.values() for c in m.columns if c.type is float}
    numeric = [k for k in ok[0] if k in floats and k not in keys]
    images = []
    for col in numeric:
        images.append(Image(f"{col} against {keys[0]}", drawn_png(lambda p, c=col: plot_metric(records, keys[0], c, p))))
    pair = list(tradeoff) if tradeoff else [c for c in numeric if column_info(c)[1] is not None][:2]
    if len(pair) == 2:
        images.append(Image(f"trade-off of {pair[1]} against {pair[0]} (crosses fail the rule check)",
                            drawn_png(lambda p: plot_tradeoff(records, pair[0], pair[1], p))))
    return images


# ----------------------------------------------------------------------------
# collecting the results
# ----------------------------------------------------------------------------


@dataclass
class Report:
    """Everything a design report shows (see :func:`collect`)."""

    design: object
    coil: object
    summary: dict
    prediction: object
    freq_sweep: object
    check: object
    design_problems: list
    signal: object = None
    images: dict = field(default_factory=dict)  # section -> [Image]
    sweep_records: list | None = None
    notes: list = field(default_factory=list)

    # -- data -------------------------------------------------------------

    def data(self) -> dict:
        """The numbers of the page (JSON-ready)."""
        from .. import __version__

        sig = None
        if self.signal is not None:
            sig = plain(self.signal.summary())
        check = self.check.to_dict()
        return {
            "tracecoil_version": __version__,
            "design": self.design.name,
            "summary": self.summary,
            "prediction": self.prediction.to_dict(),
            "check": check,
            "design_problems": list(self.design_problems),
            "signal": sig,
            "sweep_records": None if self.sweep_records is None else len(self.sweep_records),
        }

    def cautions(self) -> list[tuple[str, str]]:
        """(source, text) of every safety caution: the rule checker's, the
        prediction's and the signal's."""
        out = [("rule check", c) for c in self.check.cautions]
        out += [("prediction", c) for c in self.prediction.cautions]
        if self.signal is not None:
            out += [("signal", line.strip().removeprefix("caution:").strip()) for line in self.signal.summary_lines() if "caution:" in line]
        return out

    # -- page -------------------------------------------------------------

    def html(self) -> str:
        """The whole page."""
        d = self.design
        title = f"tracecoil design report: {d.name}"
        present = [s for s in SECTIONS if self._has(s)]
        body = [f"<h1>{_e(title)}</h1>"]
        if d.description:
            body.append(f'<p class="lead">{_e(d.description)}</p>')
        body.append(self._key_figures())
        body.append("<nav><ol>" + "".join(f'<li><a href="#{s}">{TITLES[s]}</a></li>' for s in present) + "</ol></nav>")
        for s in present:
            body.append(f'<section id="{s}"><h2>{TITLES[s]}</h2>{getattr(self, "_" + s)()}</section>')
        from .. import __version__

        body.append(f"<footer>Written by tracecoil {_e(__version__)}. Lengths in mm, other values in SI units with prefixes. "
                    "Every model's accuracy is stated beside its numbers.</footer>")
        data = json.dumps(self.data(), allow_nan=False).replace("</", "<\\/")
        return (
            "<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">"
            f"<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\"><title>{_e(title)}</title>"
            f"<style>{CSS}</style></head><body>\n" + "\n".join(body)
            + f'\n<script type="application/json" id="{DATA_ID}">{data}</script>\n</body></html>\n'
        )

    def _key_figures(self) -> str:
        from ..compare import signal_numbers
        from ..predict import _eng

        p, r = self.prediction, self.check
        cells = [
            ("L", _eng(p.inductance_h, "H")),
            ("R dc", _eng(p.resistance_dc_ohm, "ohm")),
            (f"Q at {_eng(p.frequency_hz, 'Hz')}", f"{p.q:.4g}"),
            ("self-resonance", _eng(p.srf_hz, "Hz")),
            ("rule check", "pass" if r.ok else f"FAIL ({len(r.findings)})"),
        ]
        if self.signal is not None:
            s = signal_numbers(self.signal)
            if s["signal_kind"] == "magnet":
                cells.append(("peak EMF", _eng(s["peak_emf_v"], "V")))
            else:
                cells.append(("largest dL", f"{_eng(s['delta_l_h'], 'H')} ({s['delta_l_pct']:+.3g} %)"))
        return ('<table class="key"><tr>' + "".join(f"<th>{_e(k)}</th>" for k, _ in cells) + "</tr><tr>"
                + "".join(f"<td>{_e(v)}</td>" for _, v in cells) + "</tr></table>")

    def _has(self, section: str) -> bool:
        if section == "signal":
            return self.signal is not None
        if section == "cautions":
            return bool(self.cautions())
        if section == "sweep":
            return bool(self.images.get("sweep"))
        return True

    def _design(self) -> str:
        from ..design import coil_dict

        d = self.design
        rows = [("name", d.name), ("description", d.description or "-"), ("design file", d.source or "-"),
                ("rule set", self.check.rules.name + (f" ({self.check.rules.source})" if self.check.rules.source else ""))]
        parts = [_kv_table(rows)]
        tables = [("[coil]", [(k, v) for k, v in coil_dict(d.coil).items() if v is not None])]
        tables.append(("[board]", [(f.name, getattr(d.board, f.name)) for f in fields(d.board) if getattr(d.board, f.name) is not None]))
        tables += [(f"[{name}]", list(t.items())) for name, t in (d.tables or {}).items() if isinstance(t, dict) and t]
        parts.append('<div class="row">' + "".join(f"<div><h3>{_e(name)}</h3>{_kv_table(items)}</div>" for name, items in tables) + "</div>")
        return "".join(parts)

    def _geometry(self) -> str:
        s = self.summary
        turns = ", ".join(f"{t:.4g}" for t in s["turns_per_winding"]) or "-"
        rows = [
            ("outer size d_out (mm)", _num(s["outer_mm"])),
            ("inner size d_in (mm)", _num(s["inner_mm"])),
            ("fill ratio (d_out - d_in) / (d_out + d_in)", _num(s["fill_ratio"])),
            ("turns of each winding", turns),
            ("total trace length (mm)", _num(s["total_trace_length_mm"])),
            ("winding length (mm)", _num(s["total_winding_length_mm"])),
            ("vias", s["via_count"]),
            ("terminal pads", s["terminal_pad_count"]),
            ("copper bounds x0, y0, x1, y1 (mm)", ", ".join(_num(v) for v in s["bounds_mm"] or [])),
            ("board copper layers", s["board_layers"]),
        ]
        head = ("layer", "name", "turns", "outer (mm)", "inner (mm)", "trace length (mm)", "copper area (mm2)", "direction")
        body = [(L["layer"], L["name"], _num(L["turns"]), _num(L["outer_mm"]), _num(L["inner_mm"]), _num(L["trace_length_mm"]),
                 _num(L["copper_area_mm2"]), L["direction"] or "-") for L in s["layers"]]
        pics = self.images.get("geometry", [])
        return (_images(pics[:1]) + "<h3>Each copper layer</h3>" + _images(pics[1:], min_px=380) + "<h3>Summary</h3>" + _kv_table(rows) + "<h3>Per layer</h3>" + _table(head, body)
                + '<p class="note">Sizes are measured on the generated layout (Mohan et al. 1999 definitions of d_out, d_in and fill ratio).</p>')

    def _electrical(self) -> str:
        from ..predict import _eng

        p = self.prediction
        acc = p.accuracy
        rows = [
            ("frequency f", _eng(p.frequency_hz, "Hz"), ""),
            ("inductance L(f)", _eng(p.inductance_h, "H"), acc["inductance"]),
            ("inductance at low frequency", _eng(p.inductance_dc_h, "H"), acc["inductance"]),
            (f"DC resistance at {p.temperature_c:g} degC", _eng(p.resistance_dc_ohm, "ohm"), acc["resistance_dc"]),
            ("AC resistance R(f)", _eng(p.resistance_ac_ohm, "ohm"), acc["resistance_ac"]),
            ("AC resistance, closed-form plate model", _eng(p.resistance_ac_closed_form_ohm, "ohm"), "lower bound: no proximity effect"),
            ("capacitance", _eng(p.capacitance_f, "F"), acc["capacitance"]),
            ("self-resonant frequency", _eng(p.srf_hz, "Hz"), acc["srf"]),
            ("Q = wL/R at f", f"{p.q:.4g}", acc["q"]),
            ("Q at the terminals with C", f"{p.q_with_capacitance:.4g}", acc["q"]),
            ("|Z| at f", _eng(abs(complex(p.impedance_ohm)), "ohm"), ""),
        ]
        if p.tank is not None:
            rows += [
                ("tank capacitor", _eng(p.tank["capacitance_f"], "F"), "from the design's [target] table"),
                ("tank resonance", _eng(p.tank["frequency_hz"], "Hz"), "coil capacitance included"),
                ("tank Q", f"{p.tank['q']:.4g}", acc["q"]),
            ]
        out = _table(("quantity", "value", "accuracy"), rows, cls="numbers")
        head = ("layer", "trace length (mm)", "R dc share", "R(f) share, closed form", "C same layer", "L share")
        body = [(f"L{s.layer} {s.name}", _num(s.trace_length_mm), _eng(s.resistance_dc_ohm, "ohm"), _eng(s.resistance_ac_closed_form_ohm, "ohm"),
                 _eng(s.capacitance_turn_to_turn_f, "F"), "-" if s.inductance_share_h is None else _eng(s.inductance_share_h, "H")) for s in p.layers]
        body.append(("vias", "", _eng(p.vias_resistance_dc_ohm, "ohm"), "", "", ""))
        out += "<h3>Per layer</h3>" + _table(head, body)
        if p.notes:
            out += "<h3>Notes</h3>" + _list(p.notes)
        return out

    def _frequency(self) -> str:
        return _images(self.images.get("frequency", [])) + (
            '<p class="note">Points: the filament model (skin and proximity effect); lines: closed forms between them, '
            "and the apparent inductance and Q at the terminals with the capacitance estimate.</p>")

    def _field(self) -> str:
        return _images(self.images.get("field", [])) + (
            '<p class="note">|B| for 1 A entering terminal A, in the vertical plane through the coil centre (Biot-Savart over the copper).</p>')

    def _signal(self) -> str:
        return _images(self.images.get("signal", [])) + "<pre>" + _e("\n".join(self.signal.summary_lines())) + "</pre>"

    def _rules(self) -> str:
        from ..rules.report import text_report

        r = self.check
        rs = r.rules
        n = len(r.findings)
        verdict = '<p class="pass">PASS: no rule broken</p>' if r.ok else f'<p class="fail">FAIL: {n} violation{"s" if n != 1 else ""}</p>'
        out = verdict + f"<p>Rule set {_e(repr(rs.name))}: {_e(rs.description or '')}</p>"
        out += _images(self.images.get("rules", []))
        if r.findings:
            head = ("#", "rule", "layer", "at x, y (mm)", "measured", "limit", "unit", "message")
            body = [(k, f.rule, f.layer, f"{f.at[0]:.3f},\u00a0{f.at[1]:.3f}", _num(f.measured), _num(f.limit), f.unit, f.message)
                    for k, f in enumerate([f for fs in r.by_rule().values() for f in fs], 1)]
            out += "<h3>Findings</h3>" + _table(head, body[:MAX_FINDINGS_LISTED])
            if len(body) > MAX_FINDINGS_LISTED:
                out += f'<p class="note">... and {len(body) - MAX_FINDINGS_LISTED} more in the full text report below.</p>'
        else:
            out += "<h3>Findings</h3><p>None.</p>"
        if self.design_problems:
            out += "<h3>Design numbers that break the rule set</h3>" + _list(self.design_problems)
        if r.measured:
            head = ("layer", "narrowest (mm)", "smallest gap (mm)", "smallest ring (mm)", "gap for the voltage (mm)")
            body = [(name, _num(m.get("narrowest_mm")), _num(m.get("smallest_gap_mm")), _num(m.get("smallest_ring_mm")),
                     _num(m.get("voltage_gap_mm") or None)) for name, m in r.measured.items()]
            out += "<h3>Measured per layer</h3>" + _table(head, body)
        if r.electrical:
            head = ("layer", "width (mm)", "copper (um)", "current (A)", "rise (K)", "current for the allowed rise (A)")
            body = [(row["layer"], _num(row["width_mm"]), _num(row["copper_um"]), _num(row["current_a"]), _num(row["temp_rise_c"]),
                     _num(row["max_current_a"])) for row in r.electrical]
            out += f"<h3>Trace heating (IPC-2221, allowed rise {rs.max_temp_rise_c:g} K)</h3>" + _table(head, body)
        if r.notes:
            out += "<h3>Notes</h3>" + _list(r.notes)
        out += "<details><summary>Full text report</summary><pre>" + _e(text_report(r)) + "</pre></details>"
        return out

    def _cautions(self) -> str:
        return ('<div class="caution"><p>Where high voltage, high current or heating matter, these cautions apply; '
                "defer to local codes and licensed practice.</p><ul>"
                + "".join(f"<li><b>{_e(src)}:</b> {_e(text)}</li>" for src, text in self.cautions()) + "</ul></div>")

    def _sweep(self) -> str:
        n = len(self.sweep_records or [])
        failed = sum(1 for r in self.sweep_records or [] if r.get("error") is not None)
        return f"<p>{n} variant(s), {failed} failed.</p>" + _images(self.images.get("sweep", []))


# ----------------------------------------------------------------------------
# HTML helpers
# ----------------------------------------------------------------------------

CSS = """
body{font-family:system-ui,-apple-system,"Segoe UI",Roboto,sans-serif;max-width:1100px;margin:2em auto;padding:0 1em;color:#1a1a1a;line-height:1.4}
h1{font-size:1.6em;border-bottom:2px solid #0072B2;padding-bottom:.2em}
h2{font-size:1.3em;margin-top:2em;border-bottom:1px solid #ccc}
h3{font-size:1.05em;margin-top:1.2em}
nav ol{columns:3;font-size:.95em}
table{border-collapse:collapse;margin:.5em 0;font-size:.9em}
th,td{border:1px solid #ccc;padding:.25em .6em;text-align:left;vertical-align:top}
th{background:#f0f4f8}
table.key td{font-family:ui-monospace,monospace;font-size:1.1em;white-space:nowrap}
td{overflow-wrap:normal}
table.numbers td:nth-child(2){font-family:ui-monospace,monospace;white-space:nowrap}
figure{margin:.5em 0;display:inline-block;max-width:100%}
figure img{max-width:100%;height:auto;border:1px solid #ddd}
figcaption{font-size:.85em;color:#555}
.gallery{display:grid;gap:.5em}
.row{display:flex;flex-wrap:wrap;gap:0 2em;align-items:flex-start}
.pass{color:#1a7f37;font-weight:bold}
.fail{color:#c00000;font-weight:bold}
.caution{border-left:4px solid #c00000;background:#fff4f4;padding:.2em 1em}
.note{font-size:.85em;color:#555}
.lead{font-size:1.1em}
pre{background:#f6f8fa;padding:.6em;overflow-x:auto;font-size:.85em}
footer{margin-top:3em;font-size:.8em;color:#666}
"""


def _e(x) -> str:
    return html.escape(str(x))


def _num(v) -> str:
    if v is None:
        return "-"
    if isinstance(v, bool):
        return "yes" if v else "no"
    if isinstance(v, (int, float)):
        return f"{v:.5g}" if math.isfinite(v) else str(v)
    return str(v)


def _value(v) -> str:
    if isinstance(v, (list, tuple)):
        return json.dumps(v, default=str)
    return _num(v)


def _kv_table(rows) -> str:
    return "<table>" + "".join(f"<tr><th>{_e(k)}</th><td>{_e(_value(v))}</td></tr>" for k, v in rows) + "</table>"


def _table(head, rows, *, cls: str = "") -> str:
    c = f' class="{cls}"' if cls else ""
    return (f"<table{c}><thead><tr>" + "".join(f"<th>{_e(h)}</th>" for h in head) + "</tr></thead><tbody>"
            + "".join("<tr>" + "".join(f"<td>{_e(v)}</td>" for v in r) + "</tr>" for r in rows) + "</tbody></table>")


def _list(items) -> str:
    return "<ul>" + "".join(f"<li>{_e(i)}</li>" for i in items) + "</ul>"


def _images(images, *, min_px: int = 420) -> str:
    if not images:
        return ""
    if len(images) == 1:
        return images[0].tag()
    return f'<div class="gallery" style="grid-template-columns:repeat(auto-fill,minmax({min_px}px,1fr))">' + "".join(i.tag() for i in images) + "</div>"


# ----------------------------------------------------------------------------
# collect and write
# ----------------------------------------------------------------------------


def collect(design, *, freq_hz=None, temperature_c=20.0, rules=None, points=6, samples=None, sweep=None, sweep_keys=None,
            tradeoff=None, progress=True) -> Report:
    """Compute and draw everything :func:`write_report` shows.

    Parameters are those of :func:`write_report`.
    """
    from tqdm.auto import tqdm

    from ..compare import as_design, design_frequency_hz, design_signal, has_signal
    from ..outline import DEFAULT_TOLERANCE_MM
    from ..export.preview import preview_figure
    from ..export.summary import summary
    from ..generators import coil_from_design
    from ..outline import outlines as make_outlines
    from ..predict import filament_frequencies, frequency_sweep, plot_field_map, plot_sweep, predict, sweep_frequencies
    from ..rules import check, design_rules
    from ..rules.fit import spec_problems
    from ..rules.report import picture_figure

    design = as_design(design)
    if isinstance(points, bool) or not isinstance(points, int) or not 1 <= points <= 50:
        raise SpecError(f"points must be a whole number from 1 to 50; got {points!r}")
    if isinstance(sweep, (str, Path)):
        sweep = read_sweep_csv(sweep)
    f = design_frequency_hz(design, freq_hz)
    target = (design.tables or {}).get("target") or {}
    tank = target.get("tank_capacitance_f") if isinstance(target, dict) else None
    steps = ["geometry", "prediction", "frequency sweep", "field map", "rule check"]
    if has_signal(design):
        steps.insert(4, "signal")
    if sweep is not None:
        steps.append("sweep plots")
    bar = tqdm(total=len(steps), desc=f"report {design.name}", unit="step", disable=not progress)
    images: dict = {}

    def step(name):
        bar.set_postfix_str(name)

    try:
        step("geometry")
        coil = coil_from_design(design)
        outl = make_outlines(coil, tolerance_mm=getattr(coil.spec, "tolerance_mm", DEFAULT_TOLERANCE_MM))
        geo = summary(coil, outlines=outl)
        names = outl.layer_names
        gallery = [Image(f"{design.name}: all layers", figure_png(preview_figure(outl, title=f"{design.name}: all layers"), dpi=PREVIEW_DPI))]
        for layer in sorted(outl.copper):
            one = replace(outl, copper={layer: outl.copper[layer]})
            label = f"L{layer} {names.get(layer, layer)}"
            gallery.append(Image(f"{design.name}: copper layer {label}", figure_png(preview_figure(one, title=f"{design.name}: {label}"), dpi=PREVIEW_DPI)))
        images["geometry"] = gallery
        bar.update()

        step("prediction")
        pred = predict(coil, freq_hz=f, temperature_c=temperature_c, tank_capacitance_f=tank)
        bar.update()

        step("frequency sweep")
        dense = sweep_frequencies(f, pred.srf_hz)
        fs = frequency_sweep(coil, dense, temperature_c=temperature_c, capacitance_f=pred.capacitance_f,
                             filament_hz=filament_frequencies(f, dense, points=points))
        images["frequency"] = [Image(f"{design.name}: L, R and Q against frequency",
                                     drawn_png(lambda p: plot_sweep(fs, p, title=f"{design.name}: L, R and Q against frequency", mark_hz=f)))]
        bar.update()

        step("field map")
        images["field"] = [Image(f"{design.name}: |B| at 1 A in the plane through the centre",
                                 drawn_png(lambda p: plot_field_map(coil, p, title=f"{design.name}: |B| at 1 A, plane through the centre")))]
        bar.update()

        sig = None
        if has_signal(design):
            step("signal")
            sig = design_signal(design, coil=coil, freq_hz=f, samples=samples)
            images["signal"] = [Image(f"{design.name}: signal along the motion", drawn_png(sig.plot))]
            bar.update()

        step("rule check")
        rule_set = design_rules(design, rules)
        result = check(coil, rule_set, name=design.name)
        problems = spec_problems(design.coil, design.board, rule_set)
        images["rules"] = [Image(f"{design.name}: rule check, violations marked and numbered", figure_png(picture_figure(result)))]
        bar.update()

        if sweep is not None:
            step("sweep plots")
            sweep = list(sweep)
            images["sweep"] = sweep_images(sweep, keys=sweep_keys, tradeoff=tradeoff)
            bar.update()
    finally:
        bar.close()
    return Report(design=design, coil=coil, summary=geo, prediction=pred, freq_sweep=fs, check=result, design_problems=problems,
                  signal=sig, images=images, sweep_records=sweep)


def report_path(design, out_dir) -> Path:
    """Where :func:`write_report` puts the page: ``<out_dir>/<name>-report.html``."""
    return Path(out_dir) / f"{design.name}-report.html"


def write_report(design, out_dir="out", *, sweep=None, freq_hz=None, temperature_c=20.0, rules=None, points=6, samples=None,
                 sweep_keys=None, tradeoff=None, progress=True) -> Path:
    """Write one self-contained HTML page about a design.

    Parameters
    ----------
    design : Design or path
        The design (object or TOML file).
    out_dir : path
        Output folder (created); the page is ``<name>-report.html``.
    sweep : list of dict, path, or None
        Sweep records (:func:`tracecoil.variants.sweep`) or a sweep results
        CSV file; adds the sweep plots.
    freq_hz : float, optional
        Operating frequency (Hz); default the ``frequency_hz`` of the
        design's ``[target]``, else 1 MHz.
    temperature_c : float
        Copper temperature (degC).
    rules : str, path, RuleSet or None
        Rule set; default the design's own.
    points : int
        Frequencies where the L, R, Q plot runs the filament model (the
        slow part), 1 to 50.
    samples : int, optional
        Signal samples (default automatic).
    sweep_keys : list of str, optional
        The sweep's varied keys (default: inferred from the records).
    tradeoff : (str, str), optional
        Result columns for the trade-off plot.
    progress : bool
        Progress bar (tqdm, standard error).

    Returns
    -------
    Path
        The page written (atomically).
    """
    from ..export.atomic import write_text

    rep = collect(design, freq_hz=freq_hz, temperature_c=temperature_c, rules=rules, points=points, samples=samples,
                  sweep=sweep, sweep_keys=sweep_keys, tradeoff=tradeoff, progress=progress)
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    return write_text(report_path(rep.design, out), rep.html())


__all__ = ["DATA_ID", "SECTIONS", "Image", "Report", "collect", "read_sweep_csv", "report_path", "sweep_images", "sweep_keys", "write_report"]
