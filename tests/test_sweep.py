"""Sweeps: parameter spaces, metrics, executors (serial, local processes,
a real Dask LocalCluster), the streamed CSV with kill-and-resume, plots and
the sweep command."""

from __future__ import annotations

import csv
import os
import signal
import subprocess
import sys
import textwrap
import time
from pathlib import Path

import numpy as np
import pytest
from numpy.testing import assert_allclose

from tracecoil.design import design_from_dict
from tracecoil.errors import SpecError
from tracecoil.generators import coil_from_design
from tracecoil.physics.inductance import inductance
from tracecoil.physics.resistance import dc_resistance
from tracecoil.variants import metrics as M
from tracecoil.variants.plots import pareto_front, plot_metric, plot_tradeoff
from tracecoil.variants.space import apply_params, make_space, parse_vary, variant_id
from tracecoil.variants.sweep import ResultsFile, format_row, meta_path, sweep

BASE = {"coil": {"shape": "square", "outer_mm": 8, "turns": 2, "width_mm": 0.3, "gap_mm": 0.3}}
CHEAP = ["inductance", "resistance_dc", "rules"]


@pytest.fixture(scope="module")
def base():
    return design_from_dict(BASE)


# ----------------------------------------------------------------------------
# spaces
# ----------------------------------------------------------------------------


def test_ranges_lists_and_steps():
    assert parse_vary("turns=8:12").values == (8, 9, 10, 11, 12)  # inclusive
    assert parse_vary("width_mm=0.1:0.2:0.05").values == (0.1, 0.15, 0.2)  # stop reached despite float steps
    assert parse_vary("width_mm=0.1:0.22:0.05").values == (0.1, 0.15, 0.2)  # stop not on a step: left out
    assert parse_vary("shape=circle,square").values == ("circle", "square")
    assert parse_vary("board.copper_um=18,35,70").values == (18, 35, 70)
    s = make_space(["turns=2:3", "width_mm=0.2,0.3"])
    assert s.variants() == [{"turns": 2, "width_mm": 0.2}, {"turns": 2, "width_mm": 0.3}, {"turns": 3, "width_mm": 0.2}, {"turns": 3, "width_mm": 0.3}]
    z = make_space(["turns=2:4", "width_mm=0.2,0.25,0.3"], zip=True)
    assert z.variants() == [{"turns": 2, "width_mm": 0.2}, {"turns": 3, "width_mm": 0.25}, {"turns": 4, "width_mm": 0.3}]


@pytest.mark.parametrize(
    "vary, kw, words",
    [
        (["widht_mm=0.1,0.2"], {}, ["widht_mm", "width_mm"]),
        (["copper_um=18,35"], {}, ["copper_um", "board.KEY"]),
        (["shape=circle,triangle"], {}, ["shape", "triangle"]),
        (["layers=1.5,2"], {}, ["layers", "whole"]),
        (["turns=9:3"], {}, ["stop", "start"]),
        (["gap_mm=0.1:0.3"], {}, ["gap_mm", "step"]),
        (["turns=2:4", "width_mm=0.2,0.3"], {"zip": True}, ["same number", "turns", "width_mm"]),
        (["board.dielectric_mm=0.2,0.4"], {}, ["board.dielectric_mm", "cannot be varied"]),
        (["turns=2:4"], {"sample": "lhs:x"}, ["--sample"]),
    ],
)
def test_space_errors_name_the_key(vary, kw, words):
    with pytest.raises(SpecError) as e:
        make_space(vary, **kw)
    for w in words:
        assert w in str(e.value)


def test_latin_hypercube_stratifies_and_is_seeded():
    # A Latin hypercube of n points puts exactly one point in each of the n
    # strata of every axis (M. D. McKay, R. J. Beckman, W. J. Conover,
    # Technometrics 21(2), 1979, from memory): with 6 whole values and 6
    # points each value appears once.
    s = make_space(["turns=1:6", "gap_mm=0.1:0.4"], sample="lhs:6", seed=7)
    v = s.variants()
    assert sorted(x["turns"] for x in v) == [1, 2, 3, 4, 5, 6]
    gaps = sorted(x["gap_mm"] for x in v)
    assert all(0.1 + 0.05 * i <= g <= 0.1 + 0.05 * (i + 1) for i, g in enumerate(gaps))
    assert v == make_space(["turns=1:6", "gap_mm=0.1:0.4"], sample="lhs:6", seed=7).variants()
    assert v != make_space(["turns=1:6", "gap_mm=0.1:0.4"], sample="lhs:6", seed=8).variants()
    r = make_space(["gap_mm=0.1:0.4"], sample="random:50", seed=1).variants()
    assert len(r) == 50 and all(0.1 <= x["gap_mm"] <= 0.4 for x in r)


def test_variant_id_is_stable_and_apply_params_changes_only_the_keys(base):
    assert variant_id({"turns": 3, "width_mm": 0.15}) == variant_id({"width_mm": 0.05 * 3, "turns": 3.0})
    assert variant_id({"turns": 3}) != variant_id({"turns": 3.25})
    d = apply_params(base, {"turns": 3, "board.copper_um": 70, "board.layers": 4})
    assert (d.coil.turns, d.board.copper_um, d.board.layers) == (3, (70.0,) * 4, 4)
    assert d.coil.width_mm == base.coil.width_mm and d.board.thickness_mm == base.board.thickness_mm


# ----------------------------------------------------------------------------
# metrics
# ----------------------------------------------------------------------------


def test_evaluate_calls_the_engines(base):
    row = M.evaluate(base, CHEAP)
    coil = coil_from_design(base)
    # The same model calls made directly: identical numbers.
    assert row["inductance_h"] == inductance(coil).inductance_h
    assert row["resistance_dc_ohm"] == dc_resistance(coil)
    assert row["rules_ok"] is True and row["rules_violations"] == 0
    # Tightest limit here: the default 0.6 mm via pad around a 0.3 mm drill
    # leaves a 0.15 mm ring against the standard set's 0.13 mm.
    assert_allclose(row["rules_margin"], (0.15 - 0.13) / 0.13, rtol=1e-9)  # exact geometry; rtol covers polygon round-off
    assert list(row) == ["inductance_h", "resistance_dc_ohm", "rules_ok", "rules_violations", "rules_margin"]


def test_rule_margin_of_a_broken_rule():
    d = design_from_dict({"coil": {"shape": "square", "outer_mm": 8, "turns": 3, "width_mm": 0.12, "gap_mm": 0.3}})
    row = M.evaluate(d, ["rules"])
    assert row["rules_ok"] is False and row["rules_violations"] >= 1
    # 0.12 mm copper against the 0.15 mm minimum: (0.12 - 0.15) / 0.15.
    assert_allclose(row["rules_margin"], -0.2, rtol=1e-9)  # the checker measures the straight trace exactly


def test_prediction_metrics_share_one_call(base):
    from tracecoil.predict import predict

    row = M.evaluate(base, ["inductance", "q", "srf"], options={"freq_hz": 2e6})
    p = predict(coil_from_design(base), freq_hz=2e6)
    assert row == {"inductance_h": p.inductance_dc_h, "q": p.q, "srf_hz": p.srf_hz}


def test_metric_requests_are_checked(base, monkeypatch):
    with pytest.raises(SpecError, match="unknown metric 'inductence'.*did you mean 'inductance'"):
        M.evaluate(base, ["inductence"])
    with pytest.raises(SpecError, match="lc_frequency.*tank_capacitance_f"):
        M.evaluate(base, ["lc_frequency"])
    with pytest.raises(SpecError, match=r"peak_emf.*\[target\]"):
        M.evaluate(base, ["peak_emf"])

    # A metric whose engine cannot be imported raises MetricUnavailable,
    # and a sweep stops on it instead of recording it per variant.
    monkeypatch.setattr(M, "METRICS", dict(M.METRICS))

    @M.metric("needs_missing_engine", ("x", "", float), help="test only")
    def _missing(ev):
        import tracecoil.no_such_engine  # noqa: F401

    with pytest.raises(M.MetricUnavailable, match="needs_missing_engine.*no_such_engine"):
        M.evaluate(base, ["needs_missing_engine"])
    with pytest.raises(M.MetricUnavailable):
        sweep(base, {"turns": [2, 3]}, ["needs_missing_engine"], executor="serial", progress=False)


# ----------------------------------------------------------------------------
# executors
# ----------------------------------------------------------------------------

# turns 5 does not fit 8 mm at 0.3/0.3 mm: that variant records its error.
SPACE = {"turns": [2, 3, 5], "width_mm": [0.2, 0.3]}


def test_failed_variant_is_recorded_and_the_sweep_goes_on(base):
    rows = sweep(base, SPACE, ["resistance_dc"], executor="serial", progress=False)
    assert len(rows) == 6
    bad = [r for r in rows if r["error"] is not None]
    assert [(r["turns"], r["width_mm"]) for r in bad] == [(5, 0.3)]
    assert bad[0]["error"].startswith("GeometryError: turns = 5 do not fit") and bad[0]["resistance_dc_ohm"] is None
    assert all(r["resistance_dc_ohm"] > 0 for r in rows if r["error"] is None)


def test_processes_and_dask_local_cluster_give_identical_rows(base):
    from distributed import Client, LocalCluster

    lines = lambda rows: [format_row(r, list(rows[0])) for r in rows]  # noqa: E731 - exact text, floats by repr
    serial = sweep(base, SPACE, CHEAP, executor="serial", progress=False)
    procs = sweep(base, SPACE, CHEAP, executor="process", workers=2, progress=False)
    with LocalCluster(n_workers=1, threads_per_worker=1, processes=False, dashboard_address=None) as lc, Client(lc) as client:
        dask = sweep(base, SPACE, CHEAP, cluster=client, batch=2, progress=False)
        # By scheduler address, as --cluster tcp://HOST:PORT connects (in-process here)
        by_address = sweep(base, SPACE, ["resistance_dc"], cluster=lc.scheduler_address, progress=False)
    assert lines(procs) == lines(serial)
    assert lines(dask) == lines(serial)
    assert [r["resistance_dc_ohm"] for r in by_address] == [r["resistance_dc_ohm"] for r in serial]
    assert sum(r["error"] is not None for r in dask) == 1


# ----------------------------------------------------------------------------
# the results file: kill, resume, torn lines
# ----------------------------------------------------------------------------

KILL_SCRIPT = textwrap.dedent(
    """
    import sys
    from tracecoil.design import design_from_dict
    from tracecoil.variants.sweep import sweep
    BASE = {base!r}
    SPACE = {space!r}
    if __name__ == "__main__":
        sweep(design_from_dict(BASE), SPACE, ["inductance", "rules"], out_csv=sys.argv[1], executor="process", workers=2, progress=False)
    """
)
KILL_SPACE = ["turns=1:4:0.25", "width_mm=0.2,0.25,0.3"]


def _data_lines(path: Path) -> list[str]:
    text = path.read_text()
    return text.splitlines()[1:]


def test_kill_mid_sweep_then_resume_gives_each_variant_once(base, tmp_path):
    out = tmp_path / "runs" / "sweep.csv"
    script = tmp_path / "run_sweep.py"
    script.write_text(KILL_SCRIPT.format(base=BASE, space=KILL_SPACE))
    n = len(make_space(KILL_SPACE).variants())
    log = tmp_path / "stderr.txt"
    with open(log, "wb") as err:
        proc = subprocess.Popen([sys.executable, str(script), str(out)], start_new_session=True, stdout=subprocess.DEVNULL, stderr=err)
    try:
        deadline = time.monotonic() + 60
        while time.monotonic() < deadline and proc.poll() is None:
            if out.exists() and len(_data_lines(out)) >= 3:
                break
            time.sleep(0.01)
        assert proc.poll() is None, f"the sweep ended before it could be interrupted: {log.read_text()[-2000:]}"
    finally:
        os.killpg(proc.pid, signal.SIGKILL)  # the whole group: main process and its workers
        proc.wait()
    before = _data_lines(out)
    assert 3 <= len(before) < n, "killed mid-run: some rows written, not all"

    rows = sweep(base, KILL_SPACE, ["inductance", "rules"], out_csv=out, resume=True, executor="serial", progress=False)
    assert len(rows) == n
    with open(out, newline="") as f:
        table = list(csv.reader(f))
    header, body = table[0], table[1:]
    assert all(len(r) == len(header) for r in body), "no torn rows"
    ids = [r[0] for r in body]
    assert sorted(ids) == sorted(variant_id(v) for v in make_space(KILL_SPACE).variants()), "each variant exactly once"
    assert [r["variant_id"] for r in rows] == [variant_id(v) for v in make_space(KILL_SPACE).variants()]
    # Rows the killed run wrote are kept as they were and equal a fresh evaluation.
    first = dict(zip(header, next(csv.reader([before[0]]))))
    fresh = M.evaluate(apply_params(base, {"turns": float(first["turns"]), "width_mm": float(first["width_mm"])}), ["inductance"])
    assert float(first["inductance_h"]) == fresh["inductance_h"]
    # Resuming a complete file computes nothing and changes nothing.
    text = out.read_text()
    again = sweep(base, KILL_SPACE, ["inductance", "rules"], out_csv=out, resume=True, executor="serial", progress=False)
    assert out.read_text() == text
    assert [format_row(r, header) for r in again] == [format_row(r, header) for r in rows]


def test_torn_last_line_is_dropped_and_recomputed(base, tmp_path):
    out = tmp_path / "s.csv"
    space = {"turns": [2, 3, 4]}
    full = sweep(base, space, ["resistance_dc"], out_csv=out, executor="serial", progress=False)
    lines = out.read_text().splitlines(keepends=True)
    # Cut the last record in half, as a write interrupted mid-line would.
    out.write_text("".join(lines[:-1]) + lines[-1][: len(lines[-1]) // 2])
    rows = sweep(base, space, ["resistance_dc"], out_csv=out, resume=True, executor="serial", progress=False)
    assert [format_row(r, list(r)) for r in rows] == [format_row(r, list(r)) for r in full]
    assert out.read_text().splitlines() == [l.rstrip("\n") for l in lines[:-1]] + [lines[-1].rstrip("\n")]


def test_torn_header_starts_over(base, tmp_path):
    out = tmp_path / "s.csv"
    ref = sweep(base, {"turns": [2, 3]}, ["resistance_dc"], out_csv=out, executor="serial", progress=False)
    out.write_text("variant_id,tur")  # killed while writing the header
    rows = sweep(base, {"turns": [2, 3]}, ["resistance_dc"], out_csv=out, resume=True, executor="serial", progress=False)
    assert rows == ref
    assert len(out.read_text().splitlines()) == 3


def test_existing_file_needs_resume_and_the_same_sweep(base, tmp_path):
    out = tmp_path / "s.csv"
    sweep(base, {"turns": [2, 3]}, ["resistance_dc"], out_csv=out, executor="serial", progress=False)
    assert meta_path(out).exists()
    with pytest.raises(SpecError, match="already exists; resume it"):
        sweep(base, {"turns": [2, 3]}, ["resistance_dc"], out_csv=out, executor="serial", progress=False)
    with pytest.raises(SpecError, match="different sweep.*metrics"):
        sweep(base, {"turns": [2, 3]}, ["inductance"], out_csv=out, resume=True, executor="serial", progress=False)
    other = base.with_coil(gap_mm=0.25)
    with pytest.raises(SpecError, match="different sweep.*design"):
        sweep(other, {"turns": [2, 3]}, ["resistance_dc"], out_csv=out, resume=True, executor="serial", progress=False)


def test_damaged_middle_line_is_an_error(tmp_path):
    out = tmp_path / "s.csv"
    cols = M.columns(["resistance_dc"])
    with ResultsFile(out, ["variant_id", "turns", "resistance_dc_ohm", "error"], {c.name: c for c in cols}, resume=False, meta={}) as f:
        f.append({"variant_id": "0" * 16, "turns": 2, "resistance_dc_ohm": 0.1, "error": None})
        f.append({"variant_id": "1" * 16, "turns": 3, "resistance_dc_ohm": 0.2, "error": None})
    lines = out.read_text().splitlines()
    out.write_text("\n".join([lines[0], "garbage,1", lines[2]]) + "\n")
    with pytest.raises(SpecError, match="line 2: not a complete record"):
        ResultsFile(out, ["variant_id", "turns", "resistance_dc_ohm", "error"], {c.name: c for c in cols}, resume=True, meta={})


# ----------------------------------------------------------------------------
# plots and the command
# ----------------------------------------------------------------------------


def test_pareto_front_matches_brute_force():
    rng = np.random.default_rng(3)
    pts = rng.random((60, 2))
    front = set(pareto_front(pts, better=("high", "low")))
    for i, (x, y) in enumerate(pts):
        beaten = any(a >= x and b <= y and (a > x or b < y) for a, b in pts)
        assert (i in front) == (not beaten)


def test_plots_are_written(base, tmp_path):
    rows = sweep(base, SPACE, CHEAP, executor="serial", progress=False)
    plot_metric(rows, "turns", "inductance_h", tmp_path / "m.png")
    front = plot_tradeoff(rows, "inductance_h", "resistance_dc_ohm", tmp_path / "t.png")
    assert (tmp_path / "m.png").stat().st_size > 1000 and (tmp_path / "t.png").stat().st_size > 1000
    ok = [rows[i] for i in front]
    # On the front no other passing variant has more L with less R.
    for r in ok:
        assert not any(
            o["error"] is None and o["inductance_h"] >= r["inductance_h"] and o["resistance_dc_ohm"] <= r["resistance_dc_ohm"] and o is not r
            and (o["inductance_h"] > r["inductance_h"] or o["resistance_dc_ohm"] < r["resistance_dc_ohm"])
            for o in rows
        )


def test_sweep_command(tmp_path, capsys):
    from tracecoil.cli import main

    design = tmp_path / "d.toml"
    design.write_text(
        '[coil]\nshape = "square"\nouter_mm = 8\nturns = 2\nwidth_mm = 0.3\ngap_mm = 0.3\n\n'
        '[sweep]\nmetrics = ["inductance", "resistance_dc"]\n'
    )
    args = [str(design), "--vary", "turns=2:3", "--vary", "width_mm=0.2,0.3", "--out", str(tmp_path / "o"), "--executor", "serial", "--no-progress"]
    assert main(["sweep", *args]) == 0
    out = capsys.readouterr().out
    assert "4 variant(s), 0 failed" in out
    csv_path = tmp_path / "o" / "d-sweep.csv"
    assert len(csv_path.read_text().splitlines()) == 5
    for name in ("d-sweep-inductance_h.png", "d-sweep-resistance_dc_ohm.png", "d-sweep-tradeoff.png"):
        assert (tmp_path / "o" / name).stat().st_size > 1000
    assert main(["sweep", *args]) == 2  # refuses to overwrite the results
    assert "already exists" in capsys.readouterr().err
    assert main(["sweep", *args, "--resume"]) == 0
    assert len(csv_path.read_text().splitlines()) == 5


def test_peak_emf_metric_equals_the_signal_computed_directly():
    # the metric must build the target with its table's options, exactly as
    # `tracecoil signal` does (regression: it once took the (target,
    # options) pair for the target)
    from tracecoil import load_design
    from tracecoil.compare import design_signal
    from tracecoil.templates import template_path
    from tracecoil.variants import evaluate

    design = load_design(template_path("hub-pickup"))
    direct = design_signal(design).peak_emf_v
    assert evaluate(design, ["peak_emf"])["peak_emf_v"] == pytest.approx(direct, rel=1e-12)
