"""Fabrication tolerance: Monte Carlo spread of L, SRF, Q and the LC
frequency across boards.

Each sample is one board made from the same artwork with random process
deviations, each drawn from a distribution the user sets (normal with
standard deviation sigma, or uniform with a half-width):

``etch_um``
    Deviation of every finished copper width from the artwork (um). The
    artwork fixes the centrelines and so the pitch: traces get wider by
    the deviation and gaps narrower by the same amount; pads and via pads
    change with the traces, drills do not.
``copper_um``
    Deviation of the copper thickness (um), the same on every layer of a
    board.
``dielectric_pct``
    Relative deviation of every dielectric thickness (percent).
``permittivity``
    Deviation of the dielectric's relative permittivity (absolute).
``tank_pct``
    Relative deviation of the tank capacitor (percent), for the LC
    frequency.

The deviations are applied to the layout (:class:`~tracecoil.layout.Coil`)
the design builds, not to the design parameters, so the centrelines stay
exactly where the artwork puts them. Every parameter draws from its own
random stream (seeded from ``seed`` and the parameter's position), so the
same seed gives the same boards, and switching one spread on or off does
not change the draws of the others.

The samples run through the sweep engine (:func:`~tracecoil.variants.sweep.run_variants`):
local processes, a Dask cluster, a streamed and resumable CSV.

>>> from tracecoil.design import design_from_dict
>>> d = design_from_dict({"coil": {"shape": "square", "outer_mm": 8, "turns": 2, "width_mm": 0.3, "gap_mm": 0.3}})
>>> r = tolerance(d, {"etch_um": 10}, samples=8, seed=3, metrics=["resistance_dc"], executor="serial", progress=False)
>>> s = r.stats["resistance_dc_ohm"]
>>> bool(s["std"] > 0 and s["p1"] < r.nominal["resistance_dc_ohm"] < s["p99"])
True
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace

import numpy as np

from ..design import Design
from ..errors import GeometryError, SpecError
from .metrics import METRICS, MetricOptions, evaluate, make_options, resolve

DISTRIBUTIONS = ("normal", "uniform")
PARAMETERS = ("etch_um", "copper_um", "dielectric_pct", "permittivity", "tank_pct")
DEFAULT_METRICS = ("inductance", "srf", "q")
MAX_SAMPLES = 1_000_000


@dataclass(frozen=True)
class Spread:
    """A distribution of deviations about zero.

    ``kind`` 'normal': ``value`` is the standard deviation; 'uniform':
    ``value`` is the half-width (deviations in [-value, value]).
    """

    kind: str = "normal"
    value: float = 0.0

    def __post_init__(self):
        if self.kind not in DISTRIBUTIONS:
            raise SpecError(f"distribution must be one of {', '.join(DISTRIBUTIONS)}; got {self.kind!r}")
        v = self.value
        if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v) or v < 0:
            raise SpecError(f"spread must be a number >= 0; got {v!r}")
        object.__setattr__(self, "value", float(v))

    def draw(self, rng: np.random.Generator, n: int) -> np.ndarray:
        """``n`` deviations, shape (n,)."""
        if self.kind == "normal":
            return rng.normal(0.0, self.value, n)
        return rng.uniform(-self.value, self.value, n)

    def __str__(self) -> str:
        return f"{'sigma' if self.kind == 'normal' else '+-'} {self.value:g}"


def parse_spread(value, name: str) -> Spread:
    """A :class:`Spread` from a number (normal, sigma), ``'normal:S'``,
    ``'uniform:H'``, a dict ``{dist, value}`` or a Spread.

    >>> parse_spread(20, "etch_um"), parse_spread("uniform:5", "copper_um")
    (Spread(kind='normal', value=20.0), Spread(kind='uniform', value=5.0))
    """
    if isinstance(value, Spread):
        return value
    try:
        if isinstance(value, dict):
            unknown = set(value) - {"dist", "value"}
            if unknown:
                raise SpecError(f"unknown key(s) {sorted(unknown)}; use dist and value")
            return Spread(value.get("dist", "normal"), value.get("value", 0.0))
        if isinstance(value, str):
            kind, sep, num = value.partition(":")
            if not sep:
                kind, num = "normal", value
            try:
                x = float(num)
            except ValueError:
                raise SpecError(f"expected normal:SIGMA or uniform:HALF_WIDTH; got {value!r}") from None
            return Spread(kind.strip().lower(), x)
        return Spread("normal", value)
    except SpecError as e:
        raise SpecError(f"tolerance {name}: {e}") from None


@dataclass(frozen=True)
class Tolerances:
    """Process spreads (see the module docstring); zero by default."""

    etch_um: Spread = field(default_factory=Spread)
    copper_um: Spread = field(default_factory=Spread)
    dielectric_pct: Spread = field(default_factory=Spread)
    permittivity: Spread = field(default_factory=Spread)
    tank_pct: Spread = field(default_factory=Spread)

    def to_dict(self) -> dict:
        return {k: {"dist": getattr(self, k).kind, "value": getattr(self, k).value} for k in PARAMETERS}


def make_tolerances(values=None, **changes) -> Tolerances:
    """:class:`Tolerances` from a dict (e.g. a design's ``[tolerance]``
    keys) and keyword changes (None values ignored)."""
    if isinstance(values, Tolerances):
        base = {k: getattr(values, k) for k in PARAMETERS}
    else:
        base = {}
        for k, v in (values or {}).items():
            if k not in PARAMETERS:
                from ..errors import unknown_key_message

                raise SpecError(unknown_key_message("tolerance", k, PARAMETERS))
            base[k] = v
    base.update({k: v for k, v in changes.items() if v is not None})
    return Tolerances(**{k: parse_spread(v, k) for k, v in base.items()})


def draw_samples(tolerances: Tolerances, samples: int, seed: int) -> list[dict]:
    """The sample boards: ``{"sample": i, "etch_um": ..., ...}`` each.

    >>> s = draw_samples(make_tolerances(etch_um=20), 3, seed=1)
    >>> s == draw_samples(make_tolerances(etch_um=20), 3, seed=1), s[2]["sample"], s[0]["copper_um"]
    (True, 2, 0.0)
    """
    if isinstance(samples, bool) or not isinstance(samples, int) or not 1 <= samples <= MAX_SAMPLES:
        raise SpecError(f"samples must be a whole number from 1 to {MAX_SAMPLES}; got {samples!r}")
    if isinstance(seed, bool) or not isinstance(seed, int) or seed < 0:
        raise SpecError(f"seed must be a whole number >= 0; got {seed!r}")
    cols = {k: getattr(tolerances, k).draw(np.random.default_rng([seed, i]), samples) for i, k in enumerate(PARAMETERS)}
    return [{"sample": i, **{k: float(cols[k][i]) for k in PARAMETERS}} for i in range(samples)]


# ----------------------------------------------------------------------------
# one fabricated board
# ----------------------------------------------------------------------------


def fabricated_coil(coil, *, etch_um=0.0, copper_um=0.0, dielectric_pct=0.0, permittivity=0.0):
    """``coil`` as one board comes out of fabrication: copper widths and
    pads grown by ``etch_um`` (negative: narrower), copper thickness
    changed by ``copper_um``, dielectric thickness scaled by
    ``1 + dielectric_pct / 100``, permittivity changed by ``permittivity``.

    Raises :class:`GeometryError` when a deviation leaves no copper, no
    gap, no annular ring or a non-physical stack-up.

    >>> from tracecoil import spiral
    >>> c = spiral(shape="square", outer_mm=8, turns=2, width_mm=0.3, gap_mm=0.3)
    >>> f = fabricated_coil(c, etch_um=-20, copper_um=5)
    >>> round(f.traces[1].width_mm, 3), f.stackup.copper_um
    (0.28, (40.0, 40.0))
    """
    d_mm = etch_um / 1000.0
    traces = []
    for t in coil.traces:
        w = t.width_mm + d_mm
        if w <= 0:
            raise GeometryError(f"etch deviation {etch_um:+.4g} um leaves no copper in a {t.width_mm:g} mm trace")
        traces.append(replace(t, width_mm=w))
    spec = coil.spec
    if spec is not None and getattr(spec, "gap_mm", None) is not None and spec.gap_mm - d_mm <= 0:
        raise GeometryError(f"etch deviation {etch_um:+.4g} um closes the {spec.gap_mm:g} mm gap between turns")
    vias = []
    for v in coil.vias:
        pad = v.pad_mm + d_mm
        if pad <= v.drill_mm:
            raise GeometryError(f"etch deviation {etch_um:+.4g} um leaves no ring around a {v.drill_mm:g} mm hole (pad {v.pad_mm:g} mm)")
        vias.append(replace(v, pad_mm=pad))
    st = coil.stackup
    cu = tuple(c + copper_um for c in st.copper_um)
    if min(cu) <= 0:
        raise GeometryError(f"copper deviation {copper_um:+.4g} um leaves no copper on a {min(st.copper_um):g} um layer")
    scale = 1.0 + dielectric_pct / 100.0
    if scale <= 0:
        raise GeometryError(f"dielectric deviation {dielectric_pct:+.4g} % leaves no dielectric")
    eps = st.permittivity + permittivity
    if eps < 1.0:
        raise GeometryError(f"permittivity deviation {permittivity:+.4g} takes the relative permittivity {st.permittivity:g} below 1")
    stack = replace(st, copper_um=cu, dielectric_mm=tuple(x * scale for x in st.dielectric_mm), permittivity=eps)
    return replace(coil, traces=tuple(traces), vias=tuple(vias), stackup=stack)


def build_sample(design: Design, params: dict, options: MetricOptions):
    """Variant builder for the sweep engine: the fabricated coil of one
    sample, and the tank capacitor with its own deviation."""
    from ..generators import coil_from_design

    coil = fabricated_coil(
        coil_from_design(design),
        etch_um=params["etch_um"],
        copper_um=params["copper_um"],
        dielectric_pct=params["dielectric_pct"],
        permittivity=params["permittivity"],
    )
    if options.tank_capacitance_f is not None and params["tank_pct"]:
        scale = 1.0 + params["tank_pct"] / 100.0
        if scale <= 0:
            raise GeometryError(f"tank capacitor deviation {params['tank_pct']:+.4g} % is not a capacitor")
        options = replace(options, tank_capacitance_f=options.tank_capacitance_f * scale)
    return design, coil, options


# ----------------------------------------------------------------------------
# the run
# ----------------------------------------------------------------------------


@dataclass
class ToleranceResult:
    """Outcome of :func:`tolerance`.

    Attributes
    ----------
    records : list of dict
        One per sample: its deviations, metric columns and error.
    nominal : dict
        The metrics of the design as drawn.
    stats : dict
        ``{column: {mean, std, p1, p99, min, max, n}}`` over the samples
        that worked (numeric columns); for yes/no columns the fraction
        that is true as ``mean``.
    failed : int
        Samples that could not be built or evaluated.
    """

    records: list
    nominal: dict
    stats: dict
    tolerances: Tolerances
    samples: int
    seed: int
    metrics: tuple
    failed: int = 0
    options: MetricOptions | None = None

    def table(self) -> str:
        """A text table of the spread."""
        units = {c.name: c.unit for m in self.metrics for c in METRICS[m].columns}
        lines = [f"{'column':22s} {'nominal':>12s} {'mean':>12s} {'std':>10s} {'std %':>7s} {'p1':>12s} {'p99':>12s}"]
        for col, s in self.stats.items():
            u = units.get(col, "")
            nom = self.nominal.get(col)
            if s.get("kind") == "fraction":
                lines.append(f"{col:22s} {str(nom):>12s} {s['mean'] * 100:11.1f}% of samples true")
                continue
            rel = 100 * s["std"] / abs(s["mean"]) if s["mean"] else math.nan
            lines.append(f"{col + (f' ({u})' if u else ''):22s} {nom:12.5g} {s['mean']:12.5g} {s['std']:10.3g} {rel:7.3f} {s['p1']:12.5g} {s['p99']:12.5g}")
        spreads = ", ".join(f"{k} {getattr(self.tolerances, k)}" for k in PARAMETERS if getattr(self.tolerances, k).value)
        lines.append(f"{self.samples} samples (seed {self.seed}), {self.failed} failed; spreads: {spreads or 'none'}")
        return "\n".join(lines)

    def to_dict(self) -> dict:
        def clean(x):
            return None if isinstance(x, float) and not math.isfinite(x) else x

        return {
            "samples": self.samples,
            "seed": self.seed,
            "failed": self.failed,
            "tolerances": self.tolerances.to_dict(),
            "metrics": list(self.metrics),
            "nominal": {k: clean(v) for k, v in self.nominal.items()},
            "stats": {c: {k: clean(v) for k, v in s.items()} for c, s in self.stats.items()},
        }


def spread_stats(records: list, cols) -> dict:
    """Mean, standard deviation (n - 1), 1st/99th percentiles (linear
    interpolation), min and max of each column over records without error.

    >>> from tracecoil.variants.metrics import Column
    >>> st = spread_stats([{"x": 1.0, "error": None}, {"x": 3.0, "error": None}, {"x": None, "error": "E"}], [Column("x", "")])
    >>> st["x"]["mean"], round(st["x"]["std"], 4), st["x"]["p99"], st["x"]["n"]
    (2.0, 1.4142, 2.98, 2)
    """
    ok = [r for r in records if r.get("error") is None]
    out = {}
    for c in cols:
        vals = [r[c.name] for r in ok if r.get(c.name) is not None]
        if not vals:
            continue
        if c.type is bool:
            out[c.name] = {"kind": "fraction", "mean": float(np.mean(vals)), "n": len(vals)}
            continue
        a = np.asarray(vals, float)
        a = a[np.isfinite(a)]
        if a.size == 0:
            continue
        p1, p99 = np.percentile(a, [1, 99])
        out[c.name] = {
            "kind": "number",
            "mean": float(a.mean()),
            "std": float(a.std(ddof=1)) if a.size > 1 else 0.0,
            "p1": float(p1),
            "p99": float(p99),
            "min": float(a.min()),
            "max": float(a.max()),
            "n": int(a.size),
        }
    return out


def tolerance(
    design: Design,
    tolerances=None,
    *,
    samples: int = 200,
    seed: int = 0,
    metrics=None,
    options=None,
    executor: str = "process",
    cluster=None,
    workers: int | None = None,
    out_csv=None,
    resume: bool = False,
    progress: bool = True,
) -> ToleranceResult:
    """Monte Carlo spread of ``metrics`` over fabrication deviations.

    Parameters
    ----------
    design : Design
    tolerances : Tolerances, dict or None
        Spreads of ``etch_um``, ``copper_um``, ``dielectric_pct``,
        ``permittivity``, ``tank_pct`` (numbers are normal sigmas; see
        :func:`parse_spread`).
    samples : int
        Boards to simulate.
    seed : int
        Random seed; the same seed gives the same boards.
    metrics : list of str, optional
        Default: inductance, srf, q, and lc_frequency when the options
        carry a tank capacitor.
    options : MetricOptions or dict, optional
    executor, cluster, workers, out_csv, resume, progress
        As for :func:`~tracecoil.variants.sweep.sweep`.

    Returns
    -------
    ToleranceResult
    """
    from .sweep import Task, run_variants

    if not isinstance(design, Design):
        raise SpecError(f"tolerance() needs a Design; got {type(design).__name__}")
    tol = make_tolerances(tolerances)
    options = make_options(options)
    if metrics is None:
        metrics = list(DEFAULT_METRICS) + (["lc_frequency"] if options.tank_capacitance_f is not None else [])
    ms = resolve(metrics, design=design, options=options)
    names = tuple(m.name for m in ms)
    nominal = evaluate(design, names, options=options)
    draws = draw_samples(tol, samples, seed)
    task = Task(design, names, options, builder=build_sample)
    records = run_variants(task, ["sample", *PARAMETERS], draws, out_csv=out_csv, executor=executor, cluster=cluster, workers=workers, resume=resume, progress=progress, desc="tolerance")
    cols = [c for m in ms for c in m.columns]
    return ToleranceResult(
        records=records,
        nominal=nominal,
        stats=spread_stats(records, cols),
        tolerances=tol,
        samples=samples,
        seed=seed,
        metrics=names,
        failed=sum(r["error"] is not None for r in records),
        options=options,
    )


def plot_histograms(result: ToleranceResult, path, *, bins: int = 30) -> None:
    """Histogram of each numeric column, with the nominal value and the
    1st/99th percentiles marked; written atomically as PNG."""
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    from ..export.atomic import atomic_path

    cols = [c for c, s in result.stats.items() if s.get("kind") == "number"]
    if not cols:
        raise SpecError("no numeric results to plot (every sample failed?)")
    units = {c.name: c.unit for m in result.metrics for c in METRICS[m].columns}
    fig, axes = plt.subplots(len(cols), 1, figsize=(6.4, 2.4 * len(cols)), squeeze=False)
    ok = [r for r in result.records if r["error"] is None]
    for ax, col in zip(axes[:, 0], cols):
        vals = np.array([r[col] for r in ok if r[col] is not None], float)
        vals = vals[np.isfinite(vals)]
        s = result.stats[col]
        ax.hist(vals, bins=bins, color="#4a7ab5", edgecolor="white")
        nom = result.nominal.get(col)
        if nom is not None and math.isfinite(nom):
            ax.axvline(nom, color="black", lw=1.5, label="nominal")
        ax.axvline(s["p1"], color="#c0392b", ls="--", lw=1, label="1st / 99th percentile")
        ax.axvline(s["p99"], color="#c0392b", ls="--", lw=1)
        rel = 100 * s["std"] / abs(s["mean"]) if s["mean"] else math.nan
        ax.set_xlabel(f"{col} ({units.get(col, '')})" if units.get(col) else col)
        ax.set_ylabel("boards")
        ax.set_title(f"{col}: mean {s['mean']:.4g}, std {s['std']:.3g} ({rel:.2f} %)", fontsize=9)
    axes[0, 0].legend(fontsize=8)
    fig.suptitle(f"fabrication spread, {result.samples} samples (seed {result.seed})", fontsize=10)
    fig.tight_layout()
    with atomic_path(path) as tmp:
        fig.savefig(tmp, format="png", dpi=110)
    plt.close(fig)


__all__ = [
    "DISTRIBUTIONS",
    "PARAMETERS",
    "Spread",
    "ToleranceResult",
    "Tolerances",
    "build_sample",
    "draw_samples",
    "fabricated_coil",
    "make_tolerances",
    "parse_spread",
    "plot_histograms",
    "spread_stats",
    "tolerance",
]
