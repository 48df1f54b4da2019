"""Named metrics of a design, and :func:`evaluate`, which computes a chosen
set of them for one design.

A metric is a small function of an :class:`Evaluation` (the design, its
coil and lazily shared results such as the prediction or the rule check)
that calls the public engines (:func:`tracecoil.predict.predict`,
:func:`tracecoil.physics.inductance.inductance`,
:func:`tracecoil.rules.check`, ...) and returns one value per column it
declares. Adding a metric is one decorated function::

    @metric("inductance", ("inductance_h", "H", float), better="high",
            help="low-frequency inductance (partial-inductance model)")
    def _inductance(ev):
        return ev.inductance_h

Sweeps, sizing, tolerance runs, comparisons and reports all call
:func:`evaluate`, so every figure is computed the same way everywhere.

A metric whose engine is not installed (its module fails to import) raises
:class:`MetricUnavailable` when it is requested; it never returns an empty
value silently.

>>> from tracecoil.design import design_from_dict
>>> d = design_from_dict({"coil": {"shape": "square", "outer_mm": 10, "turns": 3, "width_mm": 0.3, "gap_mm": 0.3}})
>>> row = evaluate(d, ["resistance_dc", "rules"])
>>> round(row["resistance_dc_ohm"], 2), row["rules_ok"], row["rules_violations"]
(0.17, True, 0)
"""

from __future__ import annotations

import math
from dataclasses import dataclass, fields, replace
from typing import Callable

from ..errors import SpecError
from ..units import to_mm

BETTER = ("high", "low", None)


class MetricUnavailable(SpecError):
    """A requested metric needs an engine that cannot be imported."""


@dataclass(frozen=True)
class Column:
    """One output column of a metric: name, unit ('' for none), type and,
    for columns other than a metric's first, which direction is better."""

    name: str
    unit: str
    type: type = float
    better: str | None = None


@dataclass(frozen=True)
class Metric:
    """A registered metric (see :func:`metric`)."""

    name: str
    columns: tuple[Column, ...]
    func: Callable
    help: str
    better: str | None = None
    needs: tuple[str, ...] = ()  # option or design-table names it cannot do without
    shares: str | None = None  # name of a shared, cached result it reads ('prediction')

    @property
    def column(self) -> str:
        """The main column (the first)."""
        return self.columns[0].name

    def better_for(self, column: str) -> str | None:
        """Which direction is better for one of this metric's columns."""
        for i, c in enumerate(self.columns):
            if c.name == column:
                return c.better or (self.better if i == 0 else None)
        raise KeyError(column)


METRICS: dict[str, Metric] = {}


def metric(name, *columns, help, better=None, needs=(), shares=None):
    """Register the decorated function as metric ``name``.

    Parameters
    ----------
    name : str
        Name used on the command line and in ``evaluate(..., metrics)``.
    *columns : (column, unit, type) tuples
        Output columns; a one-column metric returns a bare value, a
        several-column metric returns a dict keyed by column name.
    help : str
        One line for listings.
    better : {'high', 'low', None}
        Which direction is better, for ranking.
    needs : tuple of str
        Options (``'tank_capacitance_f'``) or design tables (``'[target]'``)
        without which the metric cannot be computed; checked before a run.
    shares : str or None
        A shared result of :class:`Evaluation` the metric reads; metrics
        that share one are computed before the others so cheaper metrics
        can reuse it.
    """
    if better not in BETTER:
        raise ValueError(f"better must be one of {BETTER}; got {better!r}")
    cols = tuple(Column(*c) for c in columns)

    def register(func):
        if name in METRICS:
            raise ValueError(f"metric {name!r} is registered twice")
        METRICS[name] = Metric(name, cols, func, help, better, tuple(needs), shares)
        return func

    return register


# ----------------------------------------------------------------------------
# options and the per-design evaluation context
# ----------------------------------------------------------------------------


def _positive(name, value, hi):
    if value is None:
        return None
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise SpecError(f"{name} must be a number; got {value!r}") from None
    if not (math.isfinite(v) and 0 < v <= hi):
        raise SpecError(f"{name} must be > 0 and <= {hi:g}; got {value!r}")
    return v


@dataclass(frozen=True)
class MetricOptions:
    """Conditions the metrics are computed under.

    Parameters
    ----------
    freq_hz : float
        Operating frequency (Hz) for AC resistance and Q.
    temperature_c : float
        Copper temperature (degC).
    tank_capacitance_f : float or None
        Capacitor across the coil (F), for the ``lc_frequency`` metric.
    rules : str, path, RuleSet or None
        Rule set for the ``rules`` metric; None takes the design's own.
    distance_mm : float or None
        Gap between the coil and a conductive target for ``delta_l``
        (None: the target's own placement).
    """

    freq_hz: float = 1e6
    temperature_c: float = 20.0
    tank_capacitance_f: float | None = None
    rules: object = None
    distance_mm: float | None = None

    def __post_init__(self):
        object.__setattr__(self, "freq_hz", _positive("freq_hz", self.freq_hz, 1e10))
        t = self.temperature_c
        if isinstance(t, bool) or not isinstance(t, (int, float)) or not -200 <= t <= 400:
            raise SpecError(f"temperature_c must be a number from -200 to 400 degC; got {t!r}")
        object.__setattr__(self, "tank_capacitance_f", _positive("tank_capacitance_f", self.tank_capacitance_f, 1.0))
        if self.distance_mm is not None:
            object.__setattr__(self, "distance_mm", to_mm(self.distance_mm, "distance_mm"))

    def to_dict(self) -> dict:
        out = {}
        for f in fields(self):
            v = getattr(self, f.name)
            out[f.name] = v if v is None or isinstance(v, (int, float, str)) else getattr(v, "name", str(v))
        return out


def make_options(options=None, **changes) -> MetricOptions:
    """A :class:`MetricOptions` from None, a dict or an instance, with
    ``changes`` applied (None values in ``changes`` are ignored)."""
    if options is None:
        options = MetricOptions()
    elif isinstance(options, dict):
        unknown = set(options) - {f.name for f in fields(MetricOptions)}
        if unknown:
            raise SpecError(f"unknown metric option(s) {sorted(unknown)}; valid: {[f.name for f in fields(MetricOptions)]}")
        options = MetricOptions(**options)
    elif not isinstance(options, MetricOptions):
        raise SpecError(f"options must be a MetricOptions or a dict; got {type(options).__name__}")
    changes = {k: v for k, v in changes.items() if v is not None}
    return replace(options, **changes) if changes else options


class Evaluation:
    """One design under evaluation: builds the coil once and shares the
    expensive results (prediction, rule check) between metrics.

    ``coil`` may be given ready-made (e.g. a coil with fabrication
    deviations applied); otherwise it is built from ``design``.
    """

    def __init__(self, design, options: MetricOptions, coil=None):
        self.design = design
        self.options = options
        self._cache = {} if coil is None else {"coil": coil}

    def has(self, name: str) -> bool:
        return name in self._cache

    def _get(self, name, make):
        if name not in self._cache:
            self._cache[name] = make()
        return self._cache[name]

    @property
    def coil(self):
        from ..generators import coil_from_design

        return self._get("coil", lambda: coil_from_design(self.design))

    @property
    def prediction(self):
        from ..predict import predict

        o = self.options
        return self._get("prediction", lambda: predict(self.coil, freq_hz=o.freq_hz, temperature_c=o.temperature_c, tank_capacitance_f=o.tank_capacitance_f))

    @property
    def inductance_h(self) -> float:
        """Low-frequency inductance; reused from the prediction when one
        was made (it is the same model call)."""
        if self.has("prediction"):
            return float(self.prediction.inductance_dc_h)

        def make():
            from ..physics.inductance import inductance

            return float(inductance(self.coil).inductance_h)

        return self._get("inductance", make)

    @property
    def rules(self):
        from ..rules import design_rules

        return self._get("rules", lambda: design_rules(self.design, self.options.rules))

    @property
    def rule_check(self):
        from ..rules import check

        return self._get("rule_check", lambda: check(self.coil, self.rules))


# ----------------------------------------------------------------------------
# the metrics
# ----------------------------------------------------------------------------


@metric("inductance", ("inductance_h", "H", float), better="high", help="low-frequency inductance (partial-inductance model)")
def _inductance(ev):
    return ev.inductance_h


@metric("resistance_dc", ("resistance_dc_ohm", "ohm", float), better="low", help="DC resistance terminal to terminal at the copper temperature")
def _resistance_dc(ev):
    from ..physics.resistance import dc_resistance

    return float(dc_resistance(ev.coil, temperature_c=ev.options.temperature_c))


@metric("capacitance", ("capacitance_f", "F", float), better="low", help="parasitic capacitance estimate (+-30-50 %)")
def _capacitance(ev):
    if ev.has("prediction"):
        return float(ev.prediction.capacitance_f)
    from ..physics.capacitance import capacitance

    return float(capacitance(ev.coil).total_f)


@metric("resistance_ac", ("resistance_ac_ohm", "ohm", float), better="low", shares="prediction", help="resistance at freq_hz (skin and proximity effect)")
def _resistance_ac(ev):
    return float(ev.prediction.resistance_ac_ohm)


@metric("q", ("q", "", float), better="high", shares="prediction", help="quality factor w L / R at freq_hz")
def _q(ev):
    return float(ev.prediction.q)


@metric("srf", ("srf_hz", "Hz", float), better="high", shares="prediction", help="self-resonant frequency from L(f) and the capacitance estimate")
def _srf(ev):
    return float(ev.prediction.srf_hz)


@metric(
    "lc_frequency",
    ("lc_frequency_hz", "Hz", float),
    shares="prediction",
    needs=("tank_capacitance_f",),
    help="resonance with the tank capacitor tank_capacitance_f (coil capacitance included)",
)
def _lc_frequency(ev):
    return float(ev.prediction.tank["frequency_hz"])


def _base_dir(design):
    from pathlib import Path

    return Path(design.source).parent if design.source else None


@metric("peak_emf", ("peak_emf_v", "V", float), better="high", needs=("[target]", "[motion]"), help="peak open-circuit EMF of the design's magnet target along its motion")
def _peak_emf(ev):
    from ..targets.magnets import Magnet
    from ..targets.motion import motion_from_table
    from ..targets.signal import signal, target_from_table

    t = ev.design.tables
    target, options = target_from_table(t["target"], base_dir=_base_dir(ev.design))
    motion = motion_from_table(t["motion"], base_dir=_base_dir(ev.design))
    if not isinstance(target, Magnet):
        raise SpecError(f"peak_emf needs a magnet [target]; got {type(target).__name__} (for a conductive plate use the delta_l metric)")
    return float(signal(ev.coil, target, motion, **options).peak_emf_v)


@metric(
    "delta_l",
    ("delta_l_h", "H", float),
    needs=("[target]",),
    help="inductance change with the design's conductive plate at distance_mm above the board (default: the plate's own position)",
)
def _delta_l(ev):
    from ..targets.conductive import plate_from_table, plate_signal

    plate, popts = plate_from_table(ev.design.tables["target"])
    popts.pop("tank_capacitance_f", None)
    popts.setdefault("freq_hz", ev.options.freq_hz)
    x, y, z = (float(v) for v in plate.position_mm)
    if ev.options.distance_mm is not None:
        z = ev.options.distance_mm
    return float(plate_signal(ev.coil, plate, [[x, y, z]], progress=False, **popts).delta_l_h[0])


@metric(
    "rules",
    ("rules_ok", "", bool),
    ("rules_violations", "", int, "low"),
    ("rules_margin", "", float, "high"),
    better="high",
    help="rule check: pass, number of findings, and the tightest (measured - limit) / limit (negative when broken)",
)
def _rules(ev):
    res = ev.rule_check
    return {"rules_ok": bool(res.ok), "rules_violations": len(res.findings), "rules_margin": rule_margin(res, ev.coil)}


def rule_margin(result, coil) -> float:
    """Tightest relative margin of a rule check: min over the broken rules
    and the measured widths, gaps, annular rings and temperature rises of
    ``(measured - limit) / limit`` (``(limit - rise) / limit`` for a
    temperature rise). Negative when a rule is broken; differences within
    the checker's own tolerance count as zero. NaN when nothing was
    measured.
    """
    from ..rules import LIMIT_TOL_MM

    rules = result.rules
    n = coil.stackup.n_layers
    layer_of = {coil.stackup.layer_name(i): i for i in range(1, n + 1)}
    margins = []

    def add(measured, limit, *, unit="mm", rise=False):
        if measured is None or not limit:
            return
        d = (limit - measured) if rise else (measured - limit)
        if unit == "mm" and abs(d) <= LIMIT_TOL_MM:
            d = 0.0
        margins.append(d / limit)

    for f in result.findings:
        add(f.measured, f.limit, unit=f.unit, rise=f.rule == "TEMPERATURE_RISE")
    for name, m in result.measured.items():
        layer = layer_of.get(name)
        if layer is None:
            continue
        add(m.get("narrowest_mm"), rules.min_width_mm(layer, n))
        add(m.get("smallest_gap_mm"), max(rules.min_gap_mm(layer, n), m.get("voltage_gap_mm") or 0.0))
        add(m.get("smallest_ring_mm"), rules.min_annular_ring_mm)
    for row in result.electrical:
        add(row["temp_rise_c"], row["max_temp_rise_c"], unit="K", rise=True)
    return float(min(margins)) if margins else math.nan


# ----------------------------------------------------------------------------
# evaluate
# ----------------------------------------------------------------------------


def metric_names() -> list[str]:
    return list(METRICS)


def resolve(names, *, design=None, options=None) -> tuple[Metric, ...]:
    """The :class:`Metric` objects for ``names`` (a list or a comma
    separated string), checked: known names, no repeats, and what each
    needs (options, design tables) present. Raises :class:`SpecError`."""
    if isinstance(names, str):
        names = [n.strip() for n in names.split(",") if n.strip()]
    names = list(names)
    if not names:
        raise SpecError(f"choose at least one metric from {', '.join(METRICS)}")
    out, seen = [], set()
    for n in names:
        if n not in METRICS:
            from ..errors import unknown_key_message

            raise SpecError(unknown_key_message("metrics", n, METRICS).replace("unknown key", "unknown metric"))
        if n in seen:
            raise SpecError(f"metric {n!r} is listed twice")
        seen.add(n)
        m = METRICS[n]
        for need in m.needs:
            if need.startswith("["):
                if design is not None and need.strip("[]") not in (design.tables or {}):
                    raise SpecError(f"metric {n!r} needs a {need} table in the design file")
            elif options is not None and getattr(options, need) is None:
                raise SpecError(f"metric {n!r} needs {need} (set it in the options, the design's [sweep] table or on the command line)")
        out.append(m)
    return tuple(out)


def columns(metrics) -> list[Column]:
    """Output columns of ``metrics`` (names or Metric objects), in order."""
    ms = resolve([m.name if isinstance(m, Metric) else m for m in metrics]) if metrics else ()
    return [c for m in ms for c in m.columns]


def evaluate(design, metrics, *, options=None, coil=None) -> dict:
    """Compute ``metrics`` for one design.

    Parameters
    ----------
    design : tracecoil.design.Design
    metrics : list of str or str
        Metric names (see :data:`METRICS`), or a comma-separated string.
    options : MetricOptions, dict or None
        Frequency, temperature, tank capacitor, rule set, ...
    coil : tracecoil.layout.Coil, optional
        The coil to evaluate, when it is not simply built from ``design``
        (for example with fabrication deviations applied).

    Returns
    -------
    dict
        ``{column: value}`` for every column of every metric, in the order
        the metrics were given.

    Raises
    ------
    MetricUnavailable
        A metric's engine cannot be imported.
    SpecError, GeometryError
        The design cannot be built or a metric cannot be computed for it.
    """
    options = make_options(options)
    ms = resolve(metrics, design=design, options=options)
    ev = Evaluation(design, options, coil=coil)
    values = {}
    # Metrics that share a result first, so the others can reuse it.
    for m in sorted(ms, key=lambda m: m.shares is None):
        try:
            v = m.func(ev)
        except ImportError as e:
            raise MetricUnavailable(f"metric {m.name!r} is not available: its engine cannot be imported ({e})") from e
        if len(m.columns) == 1:
            values[m.column] = m.columns[0].type(v)
        else:
            for c in m.columns:
                values[c.name] = c.type(v[c.name])
    return {c.name: values[c.name] for m in ms for c in m.columns}


__all__ = [
    "METRICS",
    "Column",
    "Evaluation",
    "Metric",
    "MetricOptions",
    "MetricUnavailable",
    "columns",
    "evaluate",
    "make_options",
    "metric",
    "metric_names",
    "resolve",
    "rule_margin",
]
