"""Pictures of sweep results: a metric against a varied parameter, and the
trade-off between two metrics with rule failures marked and the
non-dominated front drawn. PNG files, written atomically; matplotlib is
imported only when a picture is drawn.

>>> pareto_front([(1, 5), (2, 3), (3, 4), (4, 1)], better=("low", "low"))
[0, 1, 3]
"""

from __future__ import annotations

import math

import numpy as np

from ..errors import SpecError
from .metrics import METRICS

PASS_COLOR = "#2b6cb0"
FAIL_COLOR = "#c53030"


def column_info(column: str) -> tuple[str, str | None]:
    """(unit, better direction) of a metric column; ('', None) for others."""
    for m in METRICS.values():
        for c in m.columns:
            if c.name == column:
                return c.unit, m.better_for(column)
    return "", None


def _label(column: str) -> str:
    unit, _ = column_info(column)
    return f"{column} ({unit})" if unit else column


def pareto_front(points, *, better=("high", "high")) -> list[int]:
    """Indices of the non-dominated points, sorted by the first coordinate.

    Parameters
    ----------
    points : sequence of (x, y)
    better : (str, str)
        'high' or 'low' for each coordinate.

    A point is dominated when another is at least as good in both
    coordinates and better in one.
    """
    p = np.asarray(points, float).reshape(-1, 2)
    for b in better:
        if b not in ("high", "low"):
            raise SpecError(f"better must be 'high' or 'low'; got {b!r}")
    s = p * np.array([1.0 if b == "high" else -1.0 for b in better])  # larger is better
    keep = []
    for i in range(len(s)):
        ge = np.all(s >= s[i], axis=1)
        gt = np.any(s > s[i], axis=1)
        if not np.any(ge & gt):
            keep.append(i)
    return sorted(keep, key=lambda i: (p[i, 0], p[i, 1]))


def _numeric(records, column):
    out = []
    for r in records:
        v = r.get(column)
        out.append(float(v) if isinstance(v, (int, float)) and not isinstance(v, bool) and math.isfinite(v) else math.nan)
    return np.array(out)


def _save(fig, path) -> None:
    import matplotlib.pyplot as plt

    from ..export.atomic import atomic_path

    fig.tight_layout()
    with atomic_path(path) as tmp:
        fig.savefig(tmp, format="png", dpi=110)
    plt.close(fig)


def _pyplot():
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    return plt


def plot_metric(records, parameter: str, column: str, path, *, title: str = "", max_lines: int = 12) -> None:
    """``column`` against the varied ``parameter``; one line per
    combination of the other varied keys (up to ``max_lines``, else
    points); variants that fail the rule check are marked with a cross.
    """
    ok = [r for r in records if r.get("error") is None]
    if not ok:
        raise SpecError("no successful variants to plot")
    if parameter not in ok[0]:
        raise SpecError(f"{parameter!r} is not a column of the results; columns: {', '.join(ok[0])}")
    if column not in ok[0]:
        raise SpecError(f"{column!r} is not a column of the results; columns: {', '.join(ok[0])}")
    plt = _pyplot()
    params = [k for k in ok[0] if k not in (parameter, "variant_id", "error") and not _is_result(k)]
    groups: dict[tuple, list] = {}
    for r in ok:
        groups.setdefault(tuple(r[k] for k in params), []).append(r)
    fig, ax = plt.subplots(figsize=(6.4, 4.2))
    lines = len(groups) <= max_lines
    for key, rs in groups.items():
        x = [r[parameter] for r in rs]
        numeric_x = all(isinstance(v, (int, float)) and not isinstance(v, bool) for v in x)
        order = np.argsort(x) if numeric_x else np.arange(len(x))
        xs = [x[i] for i in order] if numeric_x else [str(x[i]) for i in order]
        ys = _numeric([rs[i] for i in order], column)
        label = ", ".join(f"{k}={v}" for k, v in zip(params, key)) if params and lines else None
        ax.plot(xs, ys, marker="o", ms=3, lw=1 if lines else 0, label=label)
        bad = [i for i, j in enumerate(order) if rs[j].get("rules_ok") is False]
        if bad:
            ax.plot([xs[i] for i in bad], ys[bad], "x", color=FAIL_COLOR, ms=7, mew=1.5)
    if any(r.get("rules_ok") is False for r in ok):
        ax.plot([], [], "x", color=FAIL_COLOR, label="fails the rule check")
    ax.set_xlabel(parameter)
    ax.set_ylabel(_label(column))
    ax.set_title(title or f"{column} against {parameter}", fontsize=10)
    ax.grid(alpha=0.3)
    if ax.get_legend_handles_labels()[0]:
        ax.legend(fontsize=7)
    _save(fig, path)


def _is_result(key: str) -> bool:
    return any(key == c.name for m in METRICS.values() for c in m.columns)


def plot_tradeoff(records, x: str, y: str, path, *, better=None, title: str = "") -> list[int]:
    """Scatter of metric ``y`` against metric ``x`` over all variants that
    worked: rule passes as dots, rule failures as crosses, and the front of
    variants that pass the rules and are not beaten in both metrics.

    ``better`` ('high'/'low' for x and y) defaults to each metric's own
    direction. Returns the indices (into ``records``) on the front.
    """
    if better is None:
        bx, by = column_info(x)[1], column_info(y)[1]
        if bx is None or by is None:
            raise SpecError(f"give better=(...) for columns without a direction: {x!r} -> {bx}, {y!r} -> {by}")
        better = (bx, by)
    idx = [i for i, r in enumerate(records) if r.get("error") is None]
    xs, ys = _numeric([records[i] for i in idx], x), _numeric([records[i] for i in idx], y)
    good = np.isfinite(xs) & np.isfinite(ys)
    if not good.any():
        raise SpecError(f"no variant has both {x!r} and {y!r}")
    passes = np.array([records[i].get("rules_ok") is not False for i in idx])
    plt = _pyplot()
    fig, ax = plt.subplots(figsize=(6.4, 4.6))
    m = good & passes
    ax.plot(xs[m], ys[m], "o", color=PASS_COLOR, ms=4, alpha=0.7, label="passes the rules")
    m = good & ~passes
    if m.any():
        ax.plot(xs[m], ys[m], "x", color=FAIL_COLOR, ms=6, label="fails the rules")
    cand = np.flatnonzero(good & passes)
    front = [int(cand[k]) for k in pareto_front(np.column_stack([xs[cand], ys[cand]]), better=better)] if cand.size else []
    if front:
        ax.plot(xs[front], ys[front], "-", color="black", lw=1.2, label="trade-off front")
    ax.set_xlabel(f"{_label(x)}, {better[0]} is better")
    ax.set_ylabel(f"{_label(y)}, {better[1]} is better")
    ax.set_title(title or f"{y} against {x}", fontsize=10)
    ax.grid(alpha=0.3)
    ax.legend(fontsize=8)
    _save(fig, path)
    return [idx[k] for k in front]


__all__ = ["column_info", "pareto_front", "plot_metric", "plot_tradeoff"]
