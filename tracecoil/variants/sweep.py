"""Parameter sweeps: evaluate metrics over many variants of one design.

:func:`sweep` builds every variant of a :class:`~tracecoil.variants.space.Space`,
computes the chosen metrics (:func:`~tracecoil.variants.metrics.evaluate`)
serially, on local processes or on a Dask cluster, and returns one record
(a dict) per variant::

    {"variant_id": "3f2a...", "turns": 8, "width_mm": 0.15,
     "inductance_h": 2.1e-06, ..., "error": None}

A variant that cannot be built or evaluated keeps its parameters, empty
metric values and the error message; the sweep goes on.

Results file
------------
With ``out_csv`` every finished variant is appended to a CSV file as one
line, flushed and fsynced at once, so an interrupted sweep loses at most
the variants still running. The file is the one output tracecoil does not
write atomically, on purpose: it grows while the sweep runs. Its first
line is the header; every later line is a complete record. A companion
``<file>.meta.json`` (written atomically) fingerprints the base design,
the metrics and their options.

``resume=True`` reads the file back, drops a torn last line (a write cut
off mid-line leaves a line without its newline), checks the header and
the fingerprint, and skips every variant whose id is already there; the
rest are computed and appended. Each variant therefore appears exactly
once however often a sweep is interrupted and resumed. Variant ids hash
the varied parameters (:func:`~tracecoil.variants.space.variant_id`).

>>> from tracecoil.design import design_from_dict
>>> base = design_from_dict({"coil": {"shape": "square", "outer_mm": 8, "turns": 2, "width_mm": 0.3, "gap_mm": 0.3}})
>>> rows = sweep(base, {"turns": "2:3"}, ["resistance_dc"], executor="serial", progress=False)
>>> [(r["turns"], round(r["resistance_dc_ohm"], 2), r["error"]) for r in rows]
[(2, 0.1, None), (3, 0.13, None)]
"""

from __future__ import annotations

import csv
import hashlib
import io
import json
import os
import sys
from dataclasses import dataclass, fields
from pathlib import Path
from typing import Callable

from ..design import Design
from ..errors import SpecError
from .executors import batch_size, check_executor, check_workers, chunks, default_workers, run_batches
from .metrics import Column, MetricOptions, MetricUnavailable, columns, evaluate, make_options, resolve
from .space import Space, apply_params, make_space, parse_value, variant_id

ID_COLUMN = "variant_id"
ERROR_COLUMN = "error"
MAX_ERROR_CHARS = 500
DEFAULT_METRICS = ("inductance", "resistance_dc", "rules")


def build_variant(design: Design, params: dict, options: MetricOptions):
    """Default variant builder: the design with the varied keys changed;
    the coil is built by the metrics."""
    return apply_params(design, params), None, options


@dataclass(frozen=True)
class Task:
    """Everything a worker needs besides the batch (picklable).

    ``builder(design, params, options) -> (design, coil or None,
    options)`` makes one variant (the options may change per variant, e.g.
    a tank capacitor's tolerance); it must be a module-level function.
    """

    design: Design
    metrics: tuple
    options: MetricOptions
    builder: Callable = build_variant

    @property
    def metric_columns(self) -> list[Column]:
        return columns(self.metrics)


def error_text(exc: BaseException) -> str:
    """One line naming the error type and message, at most 500 characters."""
    text = f"{type(exc).__name__}: {exc}".replace("\r", " ").replace("\n", " ")
    return text if len(text) <= MAX_ERROR_CHARS else text[: MAX_ERROR_CHARS - 3] + "..."


def run_batch(task: Task, batch: list) -> list[dict]:
    """Evaluate ``batch`` (a list of ``(variant_id, params)``); one record
    each. Runs in worker processes: module level, no shared state."""
    cols = [c.name for c in task.metric_columns]
    out = []
    for vid, params in batch:
        rec = {ID_COLUMN: vid, **params}
        try:
            design, coil, options = task.builder(task.design, params, task.options)
            rec.update(evaluate(design, task.metrics, options=options, coil=coil))
            rec[ERROR_COLUMN] = None
        except MetricUnavailable:
            raise  # not the variant's fault: stop the sweep
        except Exception as e:  # noqa: BLE001 - a failed variant is a result, recorded with its error
            rec.update(dict.fromkeys(cols))
            rec[ERROR_COLUMN] = error_text(e)
        out.append(rec)
    return out


# ----------------------------------------------------------------------------
# the results file
# ----------------------------------------------------------------------------


def format_value(v) -> str:
    """CSV text of a value; floats round-trip exactly (repr).

    >>> [format_value(x) for x in (None, True, 3, 0.1, float("nan"), "a")]
    ['', 'true', '3', '0.1', 'nan', 'a']
    """
    if v is None:
        return ""
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, float):
        return repr(v)
    return str(v)


def _parser(col: Column | None):
    def parse(text: str):
        if text == "":
            return None
        if col is None:
            return parse_value(text)
        if col.type is bool:
            if text not in ("true", "false"):
                raise ValueError(f"not a boolean: {text!r}")
            return text == "true"
        return col.type(text)

    return parse


def format_row(record: dict, header: list[str]) -> str:
    """One CSV line (with its newline) for ``record``."""
    buf = io.StringIO()
    csv.writer(buf, lineterminator="\n").writerow([format_value(record.get(c)) for c in header])
    return buf.getvalue()


def _fsync_dir(path: Path) -> None:
    try:
        fd = os.open(path, os.O_RDONLY)
    except OSError:  # pragma: no cover - some file systems do not open directories
        return
    try:
        os.fsync(fd)
    except OSError:  # pragma: no cover
        pass
    finally:
        os.close(fd)


def meta_path(csv_path) -> Path:
    p = Path(csv_path)
    return p.with_name(p.name + ".meta.json")


class ResultsFile:
    """Append-only CSV of sweep records (see the module docstring).

    Parameters
    ----------
    path : path
    header : list of str
        Column names.
    types : dict
        ``{column: Column}`` for typed columns; the others are parsed as
        numbers where they look like numbers.
    resume : bool
        Continue an existing file; without it an existing file is an error.
    meta : dict
        Fingerprint written beside the file and checked on resume.
    """

    def __init__(self, path, header: list[str], types: dict, *, resume: bool, meta: dict):
        self.path = Path(path)
        self.header = list(header)
        self.parsers = {c: _parser(types.get(c)) for c in header}
        self.parsers[ID_COLUMN] = self.parsers[ERROR_COLUMN] = lambda s: s or None
        self.records: dict[str, dict] = {}
        self.dropped_torn = False
        if self.path.exists() and self.path.stat().st_size > 0:
            if not resume:
                raise SpecError(f"{self.path} already exists; resume it (--resume / resume=True) or choose another file")
            self._check_meta(meta)
            self._read()
        else:
            self._start(meta)
        self._f = open(self.path, "a", encoding="utf-8", newline="")

    def _check_meta(self, meta):
        mp = meta_path(self.path)
        if not mp.exists():
            return  # a file from elsewhere: the header check still applies
        try:
            old = json.loads(mp.read_text(encoding="utf-8"))
        except (OSError, ValueError) as e:
            raise SpecError(f"{mp}: cannot read the sweep fingerprint ({e}); remove it to resume without the check") from None
        diff = [k for k in meta if old.get(k) != meta[k]]
        if diff:
            raise SpecError(f"{self.path} was written by a different sweep (differs in: {', '.join(diff)}); use another file or the same design, metrics and options")

    def _start(self, meta):
        from ..export.atomic import write_json

        self.path.parent.mkdir(parents=True, exist_ok=True)
        write_json(meta_path(self.path), meta)
        self._write_header()
        _fsync_dir(self.path.parent)

    def _read(self):
        data = self.path.read_bytes()
        keep = len(data)
        if not data.endswith(b"\n"):  # torn last line: cut back to the last complete one
            keep = data.rfind(b"\n") + 1
            self.dropped_torn = True
        text = data[:keep].decode("utf-8", errors="strict")
        lines = text.splitlines(keepends=True)
        if not lines:  # even the header was torn
            self._write_header()
            return
        head = next(csv.reader([lines[0]]))
        if head != self.header:
            raise SpecError(f"{self.path}: its columns {head} differ from this sweep's {self.header}; use another file")
        n = len(self.header)
        for i, line in enumerate(lines[1:], start=2):
            row = next(csv.reader([line]))
            try:
                if len(row) != n:
                    raise ValueError(f"{len(row)} fields, expected {n}")
                rec = {c: self.parsers[c](t) for c, t in zip(self.header, row)}
                if not rec[ID_COLUMN] or len(rec[ID_COLUMN]) != 16:
                    raise ValueError(f"bad variant id {rec[ID_COLUMN]!r}")
            except ValueError as e:
                if i == len(lines):  # a damaged last line: drop it like a torn one
                    keep -= len(line.encode("utf-8"))
                    self.dropped_torn = True
                    break
                raise SpecError(f"{self.path}, line {i}: not a complete record ({e}); the file is damaged") from None
            self.records.setdefault(rec[ID_COLUMN], rec)
        if keep != self.path.stat().st_size:
            with open(self.path, "r+b") as f:
                f.truncate(keep)
                f.flush()
                os.fsync(f.fileno())

    def _write_header(self):
        with open(self.path, "w", encoding="utf-8", newline="") as f:
            f.write(format_row(dict(zip(self.header, self.header)), self.header))
            f.flush()
            os.fsync(f.fileno())

    def append(self, record: dict) -> None:
        """Write one record as one line, then flush and fsync."""
        self._f.write(format_row(record, self.header))
        self._f.flush()
        os.fsync(self._f.fileno())
        self.records[record[ID_COLUMN]] = record

    def close(self) -> None:
        self._f.close()

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.close()


def fingerprint(task: Task) -> dict:
    """What a resumed sweep must share with the one that wrote the file."""

    def digest(obj) -> str:
        return hashlib.sha256(json.dumps(obj, sort_keys=True, default=str).encode()).hexdigest()[:16]

    d = task.design
    coil = {f.name: getattr(d.coil, f.name) for f in fields(d.coil)}
    board = {f.name: getattr(d.board, f.name) for f in fields(d.board)}
    return {
        "design": digest({"coil": coil, "board": board, "rules": d.rules, "tables": d.tables}),
        "metrics": list(task.metrics),
        "options": task.options.to_dict(),
        "builder": f"{task.builder.__module__}.{task.builder.__qualname__}",
    }


# ----------------------------------------------------------------------------
# sweep
# ----------------------------------------------------------------------------


def _as_variants(space) -> tuple[list[str], list[dict]]:
    if isinstance(space, Space):
        return space.keys, space.variants()
    if isinstance(space, (dict, str)) or (isinstance(space, (list, tuple)) and space and isinstance(space[0], str)):
        s = make_space(space)
        return s.keys, s.variants()
    variants = [dict(v) for v in space]
    if not variants:
        raise SpecError("the sweep has no variants")
    keys = list(variants[0])
    for v in variants:
        if list(v) != keys:
            raise SpecError(f"every variant must set the same keys {keys}; got {list(v)}")
    return keys, variants


def run_variants(task: Task, keys: list[str], variants: list[dict], *, out_csv=None, executor="process", cluster=None, workers=None, resume=False, progress=True, batch=None, desc="sweep") -> list[dict]:
    """The engine behind :func:`sweep` and the tolerance run: evaluate
    ``variants`` (dicts over ``keys``) with ``task``; see :func:`sweep`."""
    executor = check_executor(executor, cluster)
    workers = check_workers(workers)
    mcols = task.metric_columns
    header = [ID_COLUMN, *keys, *(c.name for c in mcols), ERROR_COLUMN]
    clash = [c.name for c in mcols if c.name in keys] + [k for k in keys if k in (ID_COLUMN, ERROR_COLUMN)]
    if clash:
        raise SpecError(f"column name(s) {clash} are both varied keys and result columns")
    ids = [variant_id(v) for v in variants]
    order = {vid: i for i, vid in enumerate(ids)}
    results: dict[str, dict] = {}
    store = None
    if out_csv is not None:
        store = ResultsFile(out_csv, header, {c.name: c for c in mcols}, resume=resume, meta=fingerprint(task))
        results.update({vid: rec for vid, rec in store.records.items() if vid in order})
        if store.dropped_torn:
            print(f"{out_csv}: dropped an incomplete last line left by an interrupted run", file=sys.stderr)
    todo = [(vid, v) for vid, v in zip(ids, variants) if vid not in results]
    n_workers = 1 if executor == "serial" else (workers or default_workers())
    size = batch or batch_size(len(todo), n_workers, executor)
    from tqdm import tqdm

    bar = tqdm(total=len(ids), initial=len(ids) - len(todo), disable=not progress, unit="variant", desc=desc, file=sys.stderr, dynamic_ncols=True)
    failed = 0
    try:
        for recs in run_batches(run_batch, task, chunks(todo, size), executor=executor, cluster=cluster, workers=workers):
            for rec in recs:
                if store is not None:
                    store.append(rec)
                results[rec[ID_COLUMN]] = rec
                failed += rec[ERROR_COLUMN] is not None
            bar.update(len(recs))
            if failed:
                bar.set_postfix(failed=failed, refresh=False)
    finally:
        bar.close()
        if store is not None:
            store.close()
    return [results[vid] for vid in ids]


def sweep(
    design: Design,
    space,
    metrics=DEFAULT_METRICS,
    *,
    out_csv=None,
    executor: str = "process",
    cluster=None,
    workers: int | None = None,
    resume: bool = False,
    progress: bool = True,
    options=None,
    batch: int | None = None,
) -> list[dict]:
    """Evaluate ``metrics`` for every variant of ``design`` in ``space``.

    Parameters
    ----------
    design : tracecoil.design.Design
        The base design; each variant changes some of its keys.
    space : Space, dict, list of str, or list of dict
        A :class:`~tracecoil.variants.space.Space`; ``{key: values}`` or
        ``["key=values", ...]`` for a full grid; or explicit variants
        (dicts with the same keys).
    metrics : list of str or str
        Metric names (:data:`~tracecoil.variants.metrics.METRICS`).
    out_csv : path, optional
        Stream results to this CSV file (see the module docstring).
    executor : {'process', 'dask', 'serial'}
        Where variants run; giving ``cluster`` selects 'dask'.
    cluster : 'local', 'tcp://HOST:PORT', distributed.Client or None
        The Dask cluster.
    workers : int, optional
        Local processes, or workers of a local Dask cluster (default: the
        CPU count).
    resume : bool
        Continue ``out_csv``: skip variants already in it.
    progress : bool
        Show a progress bar (tqdm, on standard error).
    options : MetricOptions or dict, optional
        Frequency, temperature, tank capacitor, rule set.
    batch : int, optional
        Variants per task (default: :func:`~tracecoil.variants.executors.batch_size`).

    Returns
    -------
    list of dict
        One record per variant in the space's order: ``variant_id``, the
        varied keys, the metric columns and ``error`` (None when it
        worked). :func:`to_columns` turns it into ``{column: list}``.
    """
    if not isinstance(design, Design):
        raise SpecError(f"sweep() needs a Design (see tracecoil.load_design); got {type(design).__name__}")
    options = make_options(options)
    ms = resolve(metrics, design=design, options=options)
    keys, variants = _as_variants(space)
    task = Task(design, tuple(m.name for m in ms), options)
    if batch is not None and (isinstance(batch, bool) or not isinstance(batch, int) or batch < 1):
        raise SpecError(f"batch must be a whole number >= 1; got {batch!r}")
    return run_variants(task, keys, variants, out_csv=out_csv, executor=executor, cluster=cluster, workers=workers, resume=resume, progress=progress, batch=batch)


def to_columns(records: list[dict]) -> dict[str, list]:
    """``{column: [values...]}`` from records (columns of the first record).

    >>> to_columns([{"a": 1, "b": 2}, {"a": 3, "b": 4}])
    {'a': [1, 3], 'b': [2, 4]}
    """
    if not records:
        return {}
    return {k: [r.get(k) for r in records] for k in records[0]}


__all__ = ["DEFAULT_METRICS", "ResultsFile", "Task", "build_variant", "format_row", "format_value", "run_batch", "run_variants", "sweep", "to_columns"]
