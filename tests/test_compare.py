"""Tests of tracecoil.compare and the compare command.

The comparison's rows are checked against the engines called directly and
independently (predict, check, signal, plate_signal on coils built here),
and the rule margins against the margins the design's own numbers imply.
"""

import csv
import io
import json
import math

import numpy as np
import pytest
from numpy.testing import assert_allclose

from report_designs import write_designs

from tracecoil.cli import main
from tracecoil.compare import QUANTITIES, compare, design_signal, plot_signals
from tracecoil.design import load_design
from tracecoil.errors import SpecError
from tracecoil.generators import coil_from_design
from tracecoil.predict import predict
from tracecoil.rules import check, load_rules
from tracecoil.targets import Dipole, Linear, signal
from tracecoil.targets.conductive import Plate, plate_signal

SAMPLES = 41
FREQ = 1e6


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    return write_designs(tmp_path_factory.mktemp("designs"))


@pytest.fixture(scope="module")
def comparison(files):
    return compare([files["magnet"], files["plate"], files["narrow"]], freq_hz=FREQ, samples=SAMPLES, progress=False)


def _row(c, name):
    (row,) = [r for r in c.rows if r["design"] == name]
    return row


def test_electrical_rows_equal_predict_called_directly(files, comparison):
    for key in ("magnet", "plate"):
        design = load_design(files[key])
        coil = coil_from_design(design)
        p = predict(coil, freq_hz=FREQ)
        row = _row(comparison, design.name)
        # Same deterministic computation on the same coil: only summation
        # order in threaded BLAS could differ, hence 1e-9.
        for col, ref in (
            ("inductance_dc_h", p.inductance_dc_h),
            ("inductance_h", p.inductance_h),
            ("resistance_dc_ohm", p.resistance_dc_ohm),
            ("resistance_ac_ohm", p.resistance_ac_ohm),
            ("capacitance_f", p.capacitance_f),
            ("srf_hz", p.srf_hz),
            ("q", p.q),
            ("q_with_capacitance", p.q_with_capacitance),
        ):
            assert_allclose(row[col], ref, rtol=1e-9, err_msg=f"{design.name} {col}")
        assert row["freq_hz"] == FREQ


def test_geometry_rows(comparison):
    row = _row(comparison, "pick-a")
    # The square spiral's outer size is the design's outer_mm (measured on
    # the layout); two series layers of 3 turns each.
    assert_allclose(row["outer_mm"], 8.0, rtol=1e-9)
    assert row["winding_layers"] == 2
    assert_allclose(row["turns_total"], 6.0, atol=0.1)  # the layer change adds a fraction of a turn
    assert row["shape"] == "square"
    assert row["trace_length_mm"] > 4 * 6 * 5  # 6 turns whose sides are all longer than 5 mm


def test_signal_rows_equal_signal_called_directly(files, comparison):
    coil = coil_from_design(load_design(files["magnet"]))
    s = signal(coil, Dipole(moment_am2=(0, 0, 0.05)), Linear(start_mm=(-10, 0, 3), direction=(1, 0, 0), speed_m_s=1.0, distance_mm=20), samples=SAMPLES)
    row = _row(comparison, "pick-a")
    assert row["signal_kind"] == "magnet"
    assert_allclose(row["peak_emf_v"], s.peak_emf_v, rtol=1e-12)  # same inputs, same code path
    assert_allclose(row["rms_emf_v"], s.rms_emf_v, rtol=1e-12)
    assert row["delta_l_h"] is None

    coil = coil_from_design(load_design(files["plate"]))
    plate = Plate([[-6, -6], [6, -6], [6, 6], [-6, 6]], 0.5, material="copper")
    ps = plate_signal(coil, plate, Linear(start_mm=(-10, 0, 1), direction=(1, 0, 0), speed_m_s=0.1, distance_mm=20),
                      freq_hz=1e6, max_cells=150, samples=SAMPLES, progress=False)
    k = int(np.argmax(np.abs(ps.delta_l_h)))
    row = _row(comparison, "prox-b")
    assert row["signal_kind"] == "plate"
    assert_allclose(row["delta_l_h"], ps.delta_l_h[k], rtol=1e-9)  # same solver, same mesh
    assert_allclose(row["delta_l_pct"], 100 * ps.delta_l_h[k] / ps.free_inductance_h, rtol=1e-9)
    assert row["delta_l_h"] < 0  # a conducting plate lowers L (eddy currents oppose the field)
    assert row["peak_emf_v"] is None
    assert _row(comparison, "narrow-c")["signal_kind"] is None


def test_rule_rows_equal_check_and_the_designs_own_margins(files, comparison):
    std = load_rules("standard")
    for key in ("magnet", "narrow"):
        design = load_design(files[key])
        r = check(coil_from_design(design), std)
        row = _row(comparison, design.name)
        assert row["rules_ok"] is r.ok
        assert row["rules_violations"] == len(r.findings)
        assert row["rule_set"] == "standard"
    # pick-a: width and gap 0.3 mm against 0.15 mm leave 0.15 mm; the via
    # ring (0.6 - 0.3) / 2 = 0.15 mm against 0.13 mm leaves 0.02 mm, the
    # tightest. Outlines are polygons within 0.1 um of the circles: atol 1e-3 mm.
    row = _row(comparison, "pick-a")
    assert row["rules_ok"] is True
    assert_allclose(row["rules_margin_mm"], 0.02, atol=1e-3)
    assert_allclose(row["rules_margin_pct"], 100 * 0.02 / std.min_annular_ring_mm, atol=1.0)
    # narrow-c: 0.12 mm traces against the 0.15 mm minimum.
    row = _row(comparison, "narrow-c")
    assert row["rules_ok"] is False
    assert row["rules_violations"] >= 1
    assert_allclose(row["rules_margin_mm"], 0.12 - 0.15, atol=1e-3)
    assert_allclose(row["rules_margin_pct"], 100 * (0.12 - 0.15) / 0.15, atol=1.0)


def test_text_table_is_aligned_with_units(comparison):
    text = comparison.text()
    lines = text.splitlines()
    table = lines[: lines.index("")]
    assert len({len(s) for s in table if not s.startswith("-")}) == 1  # every row as wide as the header
    head = table[0]
    for name in ("pick-a", "prox-b", "narrow-c"):
        assert name in head
    labels = {s.split("  ")[0].strip() for s in table[2:]}
    assert "L(f) (nH)" in labels and ("R dc (mohm)" in labels or "R dc (ohm)" in labels)
    assert "outer size (mm)" in labels and "peak EMF (mV)" in labels
    # the value cells agree with the rows after the row's prefix
    (line,) = [s for s in table if s.startswith("L(f) (nH)")]
    cells = line.split()[2:]
    assert_allclose(float(cells[0].rstrip("*")), comparison.rows[0]["inductance_h"] * 1e9, rtol=1e-3)  # 4 digits shown
    assert "NO" in [s for s in table if s.startswith("rules pass")][0]


def test_csv_and_json_round_trip(tmp_path, comparison):
    written = comparison.write(tmp_path)
    assert set(written) == {"txt", "csv", "json", "png"}
    rows = list(csv.DictReader(io.StringIO(written["csv"].read_text())))
    assert [r["design"] for r in rows] == ["pick-a", "prox-b", "narrow-c"]
    assert list(rows[0]) == [q.key for q in QUANTITIES]
    for got, want in zip(rows, comparison.rows):
        assert float(got["inductance_h"]) == want["inductance_h"]  # repr round-trips exactly
        assert float(got["rules_margin_mm"]) == want["rules_margin_mm"]
    assert rows[2]["peak_emf_v"] == ""
    doc = json.loads(written["json"].read_text())
    assert doc["rows"][1]["delta_l_h"] == comparison.rows[1]["delta_l_h"]
    assert set(doc["signals"]) == {"pick-a", "prox-b"}
    assert written["txt"].read_text() == comparison.text()
    assert sorted(p.name for p in tmp_path.iterdir()) == ["compare.csv", "compare.json", "compare.png", "compare.txt"]  # no temporaries


def test_overlay_plot_has_one_panel_per_target_kind(tmp_path, comparison):
    import matplotlib.image as mpimg

    path = comparison.plot(tmp_path / "overlay.png")
    img = mpimg.imread(path)
    assert img.shape[0] > 500 and img.shape[1] > 500  # two panels stacked: taller than one
    one = tmp_path / "one.png"
    with open(one, "wb") as f:
        plot_signals({"pick-a": comparison.signals["pick-a"]}, f)
    assert mpimg.imread(one).shape[0] < img.shape[0]
    with pytest.raises(SpecError, match="no design has a \\[target\\]"):
        plot_signals({}, tmp_path / "none.png")


def test_no_png_without_targets(tmp_path, files):
    c = compare([files["narrow"]], freq_hz=FREQ, progress=False)
    assert not c.signals
    assert "png" not in c.write(tmp_path)
    assert c.rows[0]["peak_emf_v"] is None


def test_bad_input(tmp_path, files):
    with pytest.raises(SpecError, match="missing.toml.*does not exist"):
        compare([tmp_path / "missing.toml"], progress=False)
    with pytest.raises(SpecError, match="narrow-c has no \\[target\\] and \\[motion\\]"):
        compare([files["magnet"], files["narrow"]], signal="require", progress=False)
    with pytest.raises(SpecError, match="narrow-c: the design has no \\[target\\] and no \\[motion\\] table"):
        design_signal(load_design(files["narrow"]))
    with pytest.raises(SpecError, match="appears more than once"):
        compare([files["narrow"], files["narrow"]], progress=False)
    with pytest.raises(SpecError, match="signal must be one of"):
        compare([files["narrow"]], signal="always", progress=False)
    with pytest.raises(SpecError, match="at least one design"):
        compare([], progress=False)


def test_command(tmp_path, files, capsys):
    rc = main(["compare", str(files["narrow"]), "hexagon-return", "--freq", "250k", "--signal", "off", "--out", str(tmp_path), "--no-progress"])
    out = capsys.readouterr().out
    assert rc == 0
    assert "narrow-c" in out and "hexagon-return" in out and "frequency f (kHz)" in out
    doc = json.loads((tmp_path / "compare.json").read_text())
    assert [r["freq_hz"] for r in doc["rows"]] == [250e3, 250e3]
    assert not math.isnan(doc["rows"][1]["inductance_h"])
    rc = main(["compare", str(tmp_path / "nope.toml"), "--no-progress"])
    assert rc == 2
    assert "nope.toml" in capsys.readouterr().err
