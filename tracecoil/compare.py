"""Several designs side by side: one table of their electrical figures,
geometry, signal at their own target and rule margins, and one plot that
overlays their signal curves.

Every number comes from the engines the other commands use, through the
metric registry (:mod:`tracecoil.variants.metrics`): the prediction
(:func:`tracecoil.predict.predict`), the geometry summary
(:func:`tracecoil.export.summary`), the rule check
(:func:`tracecoil.rules.check`) and the signal
(:func:`tracecoil.targets.signal.signal`) of the design's ``[target]``
moving as its ``[motion]`` says.

>>> from tracecoil.design import design_from_dict
>>> a = design_from_dict({"design": {"name": "a"}, "coil": {"outer_mm": 8, "turns": 2, "width_mm": 0.3, "gap_mm": 0.3}})
>>> from dataclasses import replace
>>> b = replace(a.with_coil(turns=3), name="b")
>>> c = compare([a, b], freq_hz=1e5, progress=False)
>>> [r["design"] for r in c.rows], c.rows[0]["rules_ok"]
(['a', 'b'], True)
>>> bool(c.rows[1]["inductance_dc_h"] > c.rows[0]["inductance_dc_h"])
True
"""

from __future__ import annotations

import csv
import io
import json
import math
from dataclasses import dataclass, field
from pathlib import Path

from .errors import SpecError

DEFAULT_FREQ_HZ = 1e6
SIGNAL_MODES = ("auto", "require", "off")
OUTPUT_FORMATS = ("txt", "csv", "json", "png")
MISSING = "-"


@dataclass(frozen=True)
class Quantity:
    """One row of the comparison (one column of the CSV).

    ``unit`` is the SI unit of the stored value ('' for none); the text
    table scales it with one SI prefix per row. ``better`` is 'high',
    'low', 'abs' (larger magnitude) or None; the text table marks the best
    design of each such row.
    """

    key: str
    label: str
    unit: str = ""
    better: str | None = None
    kind: str = "float"  # 'float', 'int', 'bool', 'str'


QUANTITIES = (
    Quantity("design", "design", kind="str"),
    Quantity("shape", "shape", kind="str"),
    Quantity("winding_layers", "winding layers", kind="int"),
    Quantity("turns_total", "turns, all layers"),
    Quantity("outer_mm", "outer size", "mm"),
    Quantity("inner_mm", "inner size", "mm"),
    Quantity("trace_length_mm", "total trace length", "mm"),
    Quantity("via_count", "vias", kind="int"),
    Quantity("freq_hz", "frequency f", "Hz"),
    Quantity("inductance_dc_h", "L (low frequency)", "H"),
    Quantity("inductance_h", "L(f)", "H"),
    Quantity("resistance_dc_ohm", "R dc", "ohm", "low"),
    Quantity("resistance_ac_ohm", "R(f)", "ohm", "low"),
    Quantity("capacitance_f", "C (estimate)", "F", "low"),
    Quantity("srf_hz", "self-resonance", "Hz", "high"),
    Quantity("q", "Q at f", "", "high"),
    Quantity("q_with_capacitance", "Q at f with C", "", "high"),
    Quantity("signal_kind", "target", kind="str"),
    Quantity("peak_emf_v", "peak EMF", "V", "high"),
    Quantity("rms_emf_v", "RMS EMF", "V", "high"),
    Quantity("delta_l_h", "largest dL", "H", "abs"),
    Quantity("delta_l_pct", "largest dL / L", "%", "abs"),
    Quantity("frequency_shift_hz", "largest tank shift", "Hz", "abs"),
    Quantity("rule_set", "rule set", kind="str"),
    Quantity("rules_ok", "rules pass", kind="bool"),
    Quantity("rules_violations", "rule violations", "", "low", kind="int"),
    Quantity("rules_margin_pct", "worst rule margin", "%", "high"),
    Quantity("rules_margin_mm", "worst length margin", "mm", "high"),
)
QUANTITY = {q.key: q for q in QUANTITIES}
# The registry metrics each row is computed with (tracecoil.variants.metrics).
METRIC_NAMES = ("inductance", "resistance_dc", "resistance_ac", "capacitance", "srf", "q", "rules")


# ----------------------------------------------------------------------------
# helpers shared with the design report
# ----------------------------------------------------------------------------


def as_design(item):
    """A :class:`~tracecoil.design.Design` from a Design or a design file path."""
    from .design import Design, load_design

    if isinstance(item, Design):
        return item
    if isinstance(item, (str, Path)):
        return load_design(item)
    raise SpecError(f"designs must be Design objects or design file paths; got {type(item).__name__}")


def design_frequency_hz(design, freq_hz=None) -> float:
    """The operating frequency for a design: ``freq_hz`` when given, else
    the ``frequency_hz`` of its ``[target]`` table, else 1 MHz.

    >>> from tracecoil.design import design_from_dict
    >>> design_frequency_hz(design_from_dict({"coil": {}, "target": {"kind": "plate", "frequency_hz": 2e6}}))
    2000000.0
    """
    if freq_hz is not None:
        return float(freq_hz)
    target = (design.tables or {}).get("target") or {}
    f = target.get("frequency_hz") if isinstance(target, dict) else None
    return DEFAULT_FREQ_HZ if f is None else float(f)


def has_signal(design) -> bool:
    """True when the design has both a ``[target]`` and a ``[motion]`` table."""
    t = design.tables or {}
    return "target" in t and "motion" in t


def design_signal(design, *, coil=None, freq_hz=None, samples=None, load_ohm=None, progress=False):
    """The signal of a design's ``[target]`` moving as its ``[motion]`` says
    (with ``[receiver]`` when present), as ``tracecoil signal`` computes it.

    Parameters
    ----------
    design : Design
    coil : Coil, optional
        The design's coil, when already built.
    freq_hz : float, optional
        Excitation for a conductive target whose table gives neither
        ``frequency_hz`` nor ``tank_capacitance_f`` (without it such a
        target is an error that says so).
    load_ohm : float, optional
        Magnets: load resistance across the terminals.
    samples : int, optional
        Time samples (magnets) or poses (plates); default automatic.
    progress : bool
        Progress bar over a plate's poses.

    Returns
    -------
    tracecoil.targets.signal.MagnetSignal or tracecoil.targets.conductive.PlateSignal

    Raises
    ------
    SpecError
        The design has no ``[target]`` or ``[motion]`` table, or they are
        invalid (the message names the design).
    """
    from .generators import coil_from_design
    from .targets.magnets import Magnet
    from .targets.motion import motion_from_table
    from .targets.signal import signal, target_from_table

    tables = design.tables or {}
    missing = [t for t in ("target", "motion") if t not in tables]
    if missing:
        raise SpecError(
            f"{design.name}: the design has no {' and no '.join(f'[{t}]' for t in missing)} table; a signal needs "
            "[target] (e.g. kind = 'cylinder', diameter_mm, length_mm, grade) and [motion] "
            "(e.g. kind = 'linear', start_mm, direction, speed_m_s, distance_mm)"
        )
    base = Path(design.source).parent if design.source else None
    try:
        target, options = target_from_table(tables["target"], base_dir=base)
        motion = motion_from_table(tables["motion"], base_dir=base)
        if "receiver" in tables:
            from .targets.coupling import receiver_from_table

            receiver, rx_options = receiver_from_table(tables["receiver"], board=design.board)
            options.update(receiver=receiver, **rx_options)
    except SpecError as e:
        raise SpecError(f"{design.name}: {e}") from None
    if isinstance(target, Magnet):
        if load_ohm is not None:
            options["load_ohm"] = load_ohm
    else:
        if "freq_hz" not in options and "tank_capacitance_f" not in options and freq_hz is not None:
            options["freq_hz"] = float(freq_hz)
        if load_ohm is not None:
            options["load_ohm"] = load_ohm  # plate_signal rejects it with a clear message
        options["progress"] = bool(progress)
    coil = coil_from_design(design) if coil is None else coil
    return signal(coil, target, motion, samples=samples, name=design.name, **options)


def signal_numbers(result) -> dict:
    """Scalar signal levels of a magnet or plate signal result.

    Returns
    -------
    dict
        ``signal_kind`` ('magnet' or 'plate'); for a magnet ``peak_emf_v``
        and ``rms_emf_v``; for a plate ``delta_l_h`` (the signed change of
        largest magnitude), ``delta_l_pct`` (the same, in % of the coil's
        own L) and ``frequency_shift_hz`` (signed, with a tank capacitor).
    """
    import numpy as np

    if hasattr(result, "emf_v"):
        return {"signal_kind": "magnet", "peak_emf_v": result.peak_emf_v, "rms_emf_v": result.rms_emf_v}
    k = int(np.argmax(np.abs(result.delta_l_h)))
    out = {
        "signal_kind": "plate",
        "delta_l_h": float(result.delta_l_h[k]),
        "delta_l_pct": float(100.0 * result.delta_l_h[k] / result.free_inductance_h),
    }
    if result.frequency_shift_hz is not None:
        j = int(np.argmax(np.abs(result.frequency_shift_hz)))
        out["frequency_shift_hz"] = float(result.frequency_shift_hz[j])
    return out


def length_margin_mm(result, coil) -> float:
    """Worst length margin of a rule check of ``coil``, min(measured -
    limit) in mm: over the broken length rules when there are any, else
    over the widths, gaps and annular rings the checker measured on each
    layer against the rule set's minimums (gaps against the larger of the
    minimum gap and the gap the working voltage needs). NaN when nothing
    was measured.
    """
    from .rules import LIMIT_TOL_MM

    def margin(d):  # the checker passes differences within its tolerance: count them as zero
        return 0.0 if abs(d) <= LIMIT_TOL_MM else d

    broken = [f.measured - f.limit for f in result.findings if f.unit == "mm"]
    if broken:
        return float(min(margin(d) for d in broken))
    rules, n = result.rules, coil.stackup.n_layers
    layer_of = {coil.stackup.layer_name(i): i for i in range(1, n + 1)}
    margins = []
    for name, m in result.measured.items():
        if name not in layer_of:
            continue
        layer = layer_of[name]
        pairs = (
            (m.get("narrowest_mm"), rules.min_width_mm(layer, n)),
            (m.get("smallest_gap_mm"), max(rules.min_gap_mm(layer, n), m.get("voltage_gap_mm") or 0.0)),
            (m.get("smallest_ring_mm"), rules.min_annular_ring_mm),
        )
        margins += [margin(v - lim) for v, lim in pairs if v is not None]
    return float(min(margins)) if margins else math.nan


# ----------------------------------------------------------------------------
# one design
# ----------------------------------------------------------------------------


def design_row(design, *, freq_hz=None, temperature_c=20.0, rules=None, signal="auto", samples=None, coil=None):
    """One row of the comparison and the signal result (or None).

    Returns
    -------
    row : dict
        ``{quantity key: value}`` for every key of :data:`QUANTITIES`
        (None where a quantity does not apply).
    signal : MagnetSignal, PlateSignal or None
    """
    from .export.summary import summary
    from .generators import coil_from_design
    from .variants.metrics import METRICS, Evaluation, make_options

    if signal not in SIGNAL_MODES:
        raise SpecError(f"signal must be one of {', '.join(SIGNAL_MODES)}; got {signal!r}")
    f = design_frequency_hz(design, freq_hz)
    options = make_options(freq_hz=f, temperature_c=temperature_c, rules=rules)
    coil = coil_from_design(design) if coil is None else coil
    ev = Evaluation(design, options, coil=coil)
    values = {}
    for name in METRIC_NAMES:
        v = METRICS[name].func(ev)
        values.update(v if isinstance(v, dict) else {METRICS[name].column: v})
    pred = ev.prediction
    geo = summary(coil)
    row = dict.fromkeys(q.key for q in QUANTITIES)
    row.update(
        design=design.name,
        shape=coil.spec.shape if coil.spec is not None else "custom",
        winding_layers=sum(1 for s in geo["layers"] if s["turns"] > 0),
        turns_total=float(sum(geo["turns_per_winding"])),
        outer_mm=geo["outer_mm"],
        inner_mm=geo["inner_mm"],
        trace_length_mm=geo["total_trace_length_mm"],
        via_count=geo["via_count"],
        freq_hz=f,
        inductance_dc_h=values["inductance_h"],
        inductance_h=pred.inductance_h,
        resistance_dc_ohm=values["resistance_dc_ohm"],
        resistance_ac_ohm=values["resistance_ac_ohm"],
        capacitance_f=values["capacitance_f"],
        srf_hz=values["srf_hz"],
        q=values["q"],
        q_with_capacitance=pred.q_with_capacitance,
        rule_set=ev.rules.name,
        rules_ok=bool(values["rules_ok"]),
        rules_violations=int(values["rules_violations"]),
        rules_margin_pct=100.0 * values["rules_margin"],
        rules_margin_mm=length_margin_mm(ev.rule_check, coil),
    )
    sig = None
    if signal == "require" or (signal == "auto" and has_signal(design)):
        sig = design_signal(design, coil=coil, freq_hz=f, samples=samples)
        row.update(signal_numbers(sig))
    return row, sig


# ----------------------------------------------------------------------------
# the comparison
# ----------------------------------------------------------------------------


def _si(x: float, unit: str) -> tuple[float, str]:
    """Scale for a row: (factor, prefixed unit) from the largest magnitude."""
    if unit in ("", "%", "mm") or not math.isfinite(x) or x == 0:
        return 1.0, unit
    prefixes = {-15: "f", -12: "p", -9: "n", -6: "u", -3: "m", 0: "", 3: "k", 6: "M", 9: "G"}
    e = max(-15, min(9, int(math.floor(math.log10(abs(x)) / 3) * 3)))
    return 10.0**-e, prefixes[e] + unit


def _cell(v, q: Quantity, scale: float) -> str:
    if v is None:
        return MISSING
    if q.kind == "bool":
        return "yes" if v else "NO"
    if q.kind in ("str", "int"):
        return str(v)
    x = float(v) * scale
    if not math.isfinite(x):
        return str(x)
    return f"{x:.4g}"


def _best(values, better):
    xs = [(i, float(v)) for i, v in enumerate(values) if isinstance(v, (int, float)) and not isinstance(v, bool) and math.isfinite(v)]
    if len(xs) < 2 or better is None:
        return None
    key = {"high": lambda t: t[1], "low": lambda t: -t[1], "abs": lambda t: abs(t[1])}[better]
    top = max(xs, key=key)
    if all(key(t) == key(top) for t in xs):
        return None  # a tie everywhere marks nothing
    return top[0]


def plain(x):
    """JSON-ready copy of ``x`` (see :func:`tracecoil.export.atomic.jsonable`).

    >>> import numpy as np
    >>> plain({"a": np.float64(1.5), "b": [float("nan"), np.int64(2)], "c": (True, "x")})
    {'a': 1.5, 'b': [None, 2], 'c': [True, 'x']}
    """
    from .export.atomic import jsonable

    return jsonable(x)


@dataclass
class Comparison:
    """Rows of :func:`compare` (one dict per design, keys of
    :data:`QUANTITIES`) and the signal results by design name."""

    rows: list
    signals: dict = field(default_factory=dict)
    temperature_c: float = 20.0

    def quantities(self) -> list:
        """The quantities any design has a value for, in table order."""
        return [q for q in QUANTITIES if any(r.get(q.key) is not None for r in self.rows)]

    def text(self) -> str:
        """Aligned text table: one row per quantity (unit in its header,
        one SI prefix per row), one column per design; '*' marks the best
        design of a row where a direction is known."""
        qs = self.quantities()
        names = [str(r["design"]) for r in self.rows]
        lines = []
        labels, cells = [], []
        for q in qs:
            if q.key == "design":
                continue
            vals = [r.get(q.key) for r in self.rows]
            nums = [abs(float(v)) for v in vals if q.kind == "float" and isinstance(v, (int, float)) and math.isfinite(v)]
            scale, unit = _si(max(nums) if nums else 0.0, q.unit)
            labels.append(f"{q.label} ({unit})" if unit else q.label)
            best = _best(vals, q.better)
            cells.append([_cell(v, q, scale) + ("*" if i == best else " ") for i, v in enumerate(vals)])
        w0 = max(len(s) for s in labels + ["quantity"])
        widths = [max(len(n) + 1, *(len(c[i]) for c in cells)) for i, n in enumerate(names)]
        lines.append(f"{'quantity':<{w0}}  " + "  ".join(f"{n + ' ':>{w}}" for n, w in zip(names, widths)))
        lines.append("-" * len(lines[0]))
        for label, row in zip(labels, cells):
            lines.append(f"{label:<{w0}}  " + "  ".join(f"{c:>{w}}" for c, w in zip(row, widths)))
        lines.append("")
        lines.append("* best of the designs in that row; f = the frequency row; copper at "
                     f"{self.temperature_c:g} degC; C and the self-resonance are estimates (+-30-50 %)")
        return "\n".join(lines) + "\n"

    def csv_text(self) -> str:
        """CSV: a header of quantity keys (units in the names), one line per design."""
        buf = io.StringIO()
        w = csv.writer(buf, lineterminator="\n")
        keys = [q.key for q in QUANTITIES]
        w.writerow(keys)
        for r in self.rows:
            w.writerow(["" if r.get(k) is None else (repr(r[k]) if isinstance(r[k], float) else r[k]) for k in keys])
        return buf.getvalue()

    def to_dict(self) -> dict:
        """JSON-ready: the quantities (key, label, unit, better), the rows
        and each design's signal summary."""
        return {
            "temperature_c": self.temperature_c,
            "quantities": [{"key": q.key, "label": q.label, "unit": q.unit, "better": q.better} for q in QUANTITIES],
            "rows": plain(self.rows),
            "signals": {n: plain(s.summary()) for n, s in self.signals.items()},
        }

    def plot(self, path, *, title: str = "") -> Path:
        """PNG (atomic) overlaying the signal curves of every design that
        has a target: EMF against time for magnets, dL against the path
        for conductive plates. Raises SpecError when no design has one."""
        from .export.atomic import atomic_path

        with atomic_path(path) as tmp:
            plot_signals(self.signals, tmp, title=title)
        return Path(path)

    def write(self, out_dir, *, stem: str = "compare", formats=OUTPUT_FORMATS) -> dict:
        """Write ``<stem>.txt``, ``.csv``, ``.json`` and (when any design has
        a target) ``.png`` into ``out_dir``, all or none; return
        ``{format: path}``."""
        from .export.atomic import Staging

        bad = [f for f in formats if f not in OUTPUT_FORMATS]
        if bad:
            raise SpecError(f"formats must be among {', '.join(OUTPUT_FORMATS)}; got {bad}")
        out = Path(out_dir)
        out.mkdir(parents=True, exist_ok=True)
        written = {}
        with Staging() as stage:
            for fmt in formats:
                if fmt == "png" and not self.signals:
                    continue
                written[fmt] = out / f"{stem}.{fmt}"
                tmp = stage.path(written[fmt])
                if fmt == "txt":
                    tmp.write_text(self.text(), encoding="utf-8")
                elif fmt == "csv":
                    tmp.write_text(self.csv_text(), encoding="utf-8")
                elif fmt == "json":
                    tmp.write_text(json.dumps(self.to_dict(), indent=2, allow_nan=False) + "\n", encoding="utf-8")
                else:
                    plot_signals(self.signals, tmp)
        return written


def plot_signals(signals: dict, path, *, title: str = "") -> None:
    """Overlay the signal curves of several designs (not atomic; see
    :meth:`Comparison.plot`).

    Parameters
    ----------
    signals : dict
        ``{design name: MagnetSignal or PlateSignal}``.
    path : path or file object
        Where the PNG goes.
    """
    from matplotlib.figure import Figure

    magnets = {n: s for n, s in signals.items() if hasattr(s, "emf_v")}
    plates = {n: s for n, s in signals.items() if not hasattr(s, "emf_v")}
    if not signals:
        raise SpecError("no design has a [target] and [motion]: there is no signal to plot")
    panels = [p for p in (magnets, plates) if p]
    fig = Figure(figsize=(7.5, 3.4 * len(panels) + 0.5), dpi=110)
    axes = fig.subplots(len(panels), 1, squeeze=False)[:, 0]
    for ax, group in zip(axes, panels):
        for name, s in group.items():
            if group is magnets:
                ax.plot(s.time_s * 1e3, s.emf_v * 1e3, label=f"{name} (peak {s.peak_emf_v * 1e3:.3g} mV)")
            else:
                ax.plot(s.path_mm, s.delta_l_h * 1e9, label=f"{name} ({s.target.get('material', '')} plate, {s.freq_hz / 1e6:.3g} MHz)")
        if group is magnets:
            ax.set_xlabel("time (ms)")
            ax.set_ylabel("open-circuit EMF (mV)")
            ax.set_title("magnet targets: EMF along each design's motion", fontsize=9)
        else:
            ax.set_xlabel("path of the plate (mm)")
            ax.set_ylabel("dL (nH)")
            ax.set_title("conductive targets: inductance change along each design's motion", fontsize=9)
        ax.axhline(0.0, color="0.5", lw=0.6)
        ax.grid(True, alpha=0.3)
        ax.legend(fontsize=7, loc="best")
    if title:
        fig.suptitle(title, fontsize=10)
    fig.tight_layout()
    fig.savefig(path, format="png")


def compare(designs, *, freq_hz=None, temperature_c=20.0, rules=None, signal="auto", samples=None, progress=True) -> Comparison:
    """Put several designs side by side.

    Parameters
    ----------
    designs : sequence of Design or path
        At least one; names must differ (they head the columns).
    freq_hz : float, optional
        Operating frequency for every design (Hz); default: each design's
        own (:func:`design_frequency_hz`).
    temperature_c : float
        Copper temperature (degC).
    rules : str, path, RuleSet or None
        Rule set for every design; default: each design's own.
    signal : {'auto', 'require', 'off'}
        'auto' computes the signal of each design that has ``[target]`` and
        ``[motion]``; 'require' raises for a design without them; 'off'
        skips signals.
    samples : int, optional
        Signal samples (default automatic).
    progress : bool
        A tqdm progress bar over the designs (standard error).

    Returns
    -------
    Comparison
    """
    from tqdm.auto import tqdm

    if signal not in SIGNAL_MODES:
        raise SpecError(f"signal must be one of {', '.join(SIGNAL_MODES)}; got {signal!r}")
    designs = [as_design(d) for d in designs]
    if not designs:
        raise SpecError("compare needs at least one design")
    names = [d.name for d in designs]
    dup = sorted({n for n in names if names.count(n) > 1})
    if dup:
        raise SpecError(f"design names must differ to head the columns; {', '.join(map(repr, dup))} appears more than once "
                        "(set [design] name in the files)")
    if signal == "require":
        lacking = [d.name for d in designs if not has_signal(d)]
        if lacking:
            raise SpecError(f"a signal is required but {', '.join(lacking)} has no [target] and [motion] tables; "
                            "add them, or compare signals only where there are (signal 'auto')")
    rows, signals = [], {}
    for d in tqdm(designs, desc="compare", unit="design", disable=not progress):
        row, sig = design_row(d, freq_hz=freq_hz, temperature_c=temperature_c, rules=rules, signal=signal, samples=samples)
        rows.append(row)
        if sig is not None:
            signals[d.name] = sig
    return Comparison(rows=rows, signals=signals, temperature_c=float(temperature_c))


__all__ = [
    "Comparison",
    "QUANTITIES",
    "Quantity",
    "as_design",
    "compare",
    "design_frequency_hz",
    "design_row",
    "design_signal",
    "has_signal",
    "length_margin_mm",
    "plain",
    "plot_signals",
    "signal_numbers",
]
