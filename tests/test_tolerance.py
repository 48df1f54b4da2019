"""Fabrication tolerance: fabricated coils, sampling, zero spread, first-order
spread of L against a finite-difference sensitivity, seeds, histogram,
command."""

from __future__ import annotations

import numpy as np
import pytest
from numpy.testing import assert_allclose

from tracecoil.design import design_from_dict
from tracecoil.errors import GeometryError, SpecError
from tracecoil.generators import coil_from_design
from tracecoil.physics.inductance import inductance
from tracecoil.physics.resistance import dc_resistance
from tracecoil.variants.tolerance import (
    Spread,
    draw_samples,
    fabricated_coil,
    make_tolerances,
    plot_histograms,
    tolerance,
)

BASE = {"coil": {"shape": "square", "outer_mm": 8, "turns": 3, "width_mm": 0.3, "gap_mm": 0.3}, "board": {"layers": 2}}


@pytest.fixture(scope="module")
def design():
    return design_from_dict(BASE)


@pytest.fixture(scope="module")
def coil(design):
    return coil_from_design(design)


def test_fabricated_coil_keeps_the_centrelines(coil):
    f = fabricated_coil(coil, etch_um=-25, copper_um=4, dielectric_pct=10, permittivity=-0.3)
    for a, b in zip(coil.traces, f.traces):
        assert np.array_equal(a.points_mm, b.points_mm)
        assert_allclose(b.width_mm, a.width_mm - 0.025, rtol=1e-12)  # plain arithmetic
    for a, b in zip(coil.vias, f.vias):
        assert (b.x_mm, b.y_mm, b.drill_mm) == (a.x_mm, a.y_mm, a.drill_mm)
        assert_allclose(b.pad_mm, a.pad_mm - 0.025, rtol=1e-12)  # plain arithmetic
    assert f.stackup.copper_um == tuple(c + 4 for c in coil.stackup.copper_um)
    assert_allclose(f.stackup.dielectric_mm, np.array(coil.stackup.dielectric_mm) * 1.1, rtol=1e-12)  # plain arithmetic
    assert_allclose(f.stackup.permittivity, coil.stackup.permittivity - 0.3, rtol=1e-12)  # plain arithmetic
    with pytest.raises(GeometryError, match="closes the 0.3 mm gap"):
        fabricated_coil(coil, etch_um=300)
    with pytest.raises(GeometryError, match="leaves no copper"):
        fabricated_coil(coil, etch_um=-300)
    with pytest.raises(GeometryError, match="below 1"):
        fabricated_coil(coil, permittivity=-4)


def test_copper_thickness_scales_trace_resistance(coil):
    # R = rho l / (w t) for every trace (Ohm's law for a uniform bar); the via
    # barrels keep their plating, so the coil's R follows t0 / (t0 + dt)
    # within the small share of the vias.
    thick = fabricated_coil(coil, copper_um=7.0)
    t0 = coil.stackup.copper_um[0]
    assert_allclose(dc_resistance(thick) / dc_resistance(coil), t0 / (t0 + 7.0), rtol=0.01)  # vias are < 1 % of R here


def test_permittivity_changes_capacitance_not_inductance(coil):
    from tracecoil.physics.capacitance import capacitance

    f = fabricated_coil(coil, permittivity=0.5)
    assert inductance(f).inductance_h == inductance(coil).inductance_h  # the magnetostatic model has no permittivity
    assert capacitance(f).total_f > capacitance(coil).total_f


def test_spreads_and_sampling():
    assert make_tolerances({"etch_um": 20, "copper_um": "uniform:5"}) == make_tolerances(etch_um=Spread("normal", 20), copper_um=Spread("uniform", 5))
    with pytest.raises(SpecError, match="tolerance etch_um.*normal, uniform.*triangle"):
        make_tolerances(etch_um="triangle:3")
    with pytest.raises(SpecError, match="unknown key 'etch'.*etch_um"):
        make_tolerances({"etch": 3})
    big = draw_samples(make_tolerances(etch_um=20, copper_um="uniform:5"), 4000, seed=2)
    e = np.array([s["etch_um"] for s in big])
    c = np.array([s["copper_um"] for s in big])
    # 4000 normal draws: the sample std errs by about 1/sqrt(2n) = 1.1 %.
    assert_allclose(e.std(ddof=1), 20, rtol=0.05)
    assert c.min() >= -5 and c.max() <= 5 and c.max() > 4.9
    # The uniform's std is h / sqrt(3); 4000 draws err by about 1 %.
    assert_allclose(c.std(ddof=1), 5 / np.sqrt(3), rtol=0.05)
    # Each parameter draws from its own stream: switching copper off keeps the etch draws.
    assert [s["etch_um"] for s in draw_samples(make_tolerances(etch_um=20), 50, seed=2)] == list(e[:50])


def test_zero_spread_gives_the_nominal_every_time(design):
    r = tolerance(design, {}, samples=5, seed=1, metrics=["inductance", "resistance_dc", "srf", "q"], executor="serial", progress=False)
    assert r.failed == 0
    for rec in r.records:
        for col in ("inductance_h", "resistance_dc_ohm", "srf_hz", "q"):
            assert_allclose(rec[col], r.nominal[col], rtol=1e-12)  # identical inputs: only round-off may differ
    for s in r.stats.values():  # std of equal values: zero up to the round-off of the mean
        assert s["std"] <= 1e-12 * abs(s["mean"])


def test_spread_of_l_follows_the_first_order_sensitivity(design, coil):
    # For small etch deviations L(d) = L0 + L'(0) d, so std(L) = |L'(0)| std(d).
    # L'(0) from a central difference of the full model at +-2 um.
    h = 2.0
    slope = (inductance(fabricated_coil(coil, etch_um=h)).inductance_h - inductance(fabricated_coil(coil, etch_um=-h)).inductance_h) / (2 * h)
    results = {}
    for sigma in (2.0, 4.0):
        r = tolerance(design, {"etch_um": sigma}, samples=16, seed=5, metrics=["inductance"], executor="serial", progress=False)
        d = np.array([x["etch_um"] for x in r.records])
        results[sigma] = r.stats["inductance_h"]["std"]
        # The second-order term (L'' d^2) is far below the first here.
        assert_allclose(results[sigma], abs(slope) * d.std(ddof=1), rtol=0.02)
    # Same seed, twice the sigma: the same standard draws scaled, twice the spread.
    assert_allclose(results[4.0] / results[2.0], 2.0, rtol=0.01)  # linear for small sigma; 1 % leaves room for curvature
    # Wider copper on the same centrelines: less inductance (a bar's partial self-inductance
    # mu0 l / (2 pi) [ln(2 l / (w + t)) + 1/2 + ...] falls with w; F. W. Grover, Inductance Calculations, 1946).
    assert slope < 0


def test_seed_reproducibility_and_histogram(design, tmp_path):
    kw = dict(samples=6, metrics=["inductance", "resistance_dc"], executor="serial", progress=False)
    a = tolerance(design, {"etch_um": 15, "copper_um": 3}, seed=3, **kw)
    b = tolerance(design, {"etch_um": 15, "copper_um": 3}, seed=3, **kw)
    c = tolerance(design, {"etch_um": 15, "copper_um": 3}, seed=4, **kw)
    assert a.records == b.records and a.stats == b.stats
    assert a.records != c.records
    s = a.stats["resistance_dc_ohm"]
    assert s["p1"] <= s["mean"] <= s["p99"] and s["min"] <= s["p1"] and s["p99"] <= s["max"]
    plot_histograms(a, tmp_path / "h.png")
    assert (tmp_path / "h.png").stat().st_size > 1000
    assert "resistance_dc_ohm" in a.table()


def test_lc_frequency_spread_follows_the_tank_capacitor(design):
    # With only the tank capacitor varying, f = 1 / (2 pi sqrt(L (C + Cp)))
    # (Thomson's formula; tracecoil.physics.circuit): f(1 + x) / f0 follows
    # sqrt((C + Cp) / (C (1 + x) + Cp)) for every sample.
    c_tank = 1e-9
    r = tolerance(design, {"tank_pct": 2}, samples=4, seed=0, metrics=["lc_frequency", "capacitance"], options={"tank_capacitance_f": c_tank}, executor="serial", progress=False)
    f0, cp = r.nominal["lc_frequency_hz"], r.nominal["capacitance_f"]
    for rec in r.records:
        x = rec["tank_pct"] / 100
        assert_allclose(rec["lc_frequency_hz"] / f0, np.sqrt((c_tank + cp) / (c_tank * (1 + x) + cp)), rtol=1e-4)  # R's small effect on the resonance


def test_tolerance_command(tmp_path, capsys):
    from tracecoil.cli import main

    d = tmp_path / "d.toml"
    d.write_text('[coil]\nshape = "square"\nouter_mm = 8\nturns = 3\nwidth_mm = 0.3\ngap_mm = 0.3\n\n[tolerance]\netch_um = 10\nsamples = 6\nseed = 2\n')
    assert main(["tolerance", str(d), "--metrics", "inductance,resistance_dc", "--copper-um", "uniform:3", "--out", str(tmp_path / "o"), "--executor", "serial", "--no-progress"]) == 0
    out = capsys.readouterr().out
    assert "6 samples (seed 2), 0 failed" in out and "etch_um sigma 10" in out and "copper_um +- 3" in out
    for name in ("d-tolerance.csv", "d-tolerance.json", "d-tolerance.png"):
        assert (tmp_path / "o" / name).stat().st_size > 100
