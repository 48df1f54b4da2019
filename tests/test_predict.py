"""predict: the combined prediction, its JSON, the SPICE file through
ngspice, the sweep and the command line."""

import json
import math

import numpy as np
import pytest
from numpy.testing import assert_allclose

import tracecoil
from physics_helpers import ngspice_impedance, peak_frequency
from tracecoil.cli import main
from tracecoil.errors import SpecError
from tracecoil.physics.inductance import inductance
from tracecoil.physics.circuit import spice_name
from tracecoil.predict import frequency_sweep, predict

FREQ = 2e6
TANK = 1e-9

REQUIRED = ("inductance_h", "resistance_dc_ohm", "resistance_ac_ohm", "frequency_hz", "capacitance_f", "srf_hz", "q", "layers")

DESIGN = """
[design]
name = "tiny-pad"
description = "small two-layer test coil"

[coil]
shape = "square"
outer_mm = 8
turns = 4
width_mm = 0.2
gap_mm = 0.2
layers = 2

[board]
layers = 2
copper_um = 35
thickness_mm = 1.6
"""


@pytest.fixture(scope="module")
def coil():
    return tracecoil.spiral(shape="square", outer_mm=8, turns=4, width_mm=0.2, gap_mm=0.2, layers=2)


@pytest.fixture(scope="module")
def prediction(coil):
    return predict(coil, freq_hz=FREQ, tank_capacitance_f=TANK)


def test_json_keys_and_self_consistency(prediction):
    d = json.loads(json.dumps(prediction.to_dict(), allow_nan=False))
    for key in REQUIRED:
        assert key in d, key
    L, C, R, f = d["inductance_h"], d["capacitance_f"], d["resistance_ac_ohm"], d["frequency_hz"]
    assert f == FREQ and L > 0 and C > 0 and R > d["resistance_dc_ohm"] > 0
    # srf = 1/(2 pi sqrt(L C)) and q = w L / R at the stated frequency: the
    # definitions, recomputed from the JSON's own numbers.
    assert_allclose(d["srf_hz"], 1 / (2 * math.pi * math.sqrt(L * C)), rtol=1e-12)
    assert_allclose(d["q"], 2 * math.pi * f * L / R, rtol=1e-12)
    # Impedance at the terminals: (R + jwL) || 1/(jwC).
    w = 2 * math.pi * f
    z = (R + 1j * w * L) / (1 + 1j * w * C * (R + 1j * w * L))
    assert_allclose([d["impedance"]["real_ohm"], d["impedance"]["imag_ohm"]], [z.real, z.imag], rtol=1e-9)
    assert_allclose(d["q_with_capacitance"], z.imag / z.real, rtol=1e-9)
    # Tank: lossless resonance with the coil's own C added.
    assert_allclose(d["tank"]["frequency_hz"], 1 / (2 * math.pi * math.sqrt(L * (C + TANK))), rtol=1e-12)
    # Accuracy statements travel with the numbers.
    assert "30-50" in d["accuracy"]["capacitance"]


def test_layer_shares_add_up(coil, prediction):
    layers = {s.layer: s for s in prediction.layers}
    assert set(layers) == {1, 2}
    # Resistance shares (f^2 R) plus vias give the path sum, which for a
    # series coil equals the network DC value.
    total = sum(s.resistance_dc_ohm for s in prediction.layers) + prediction.vias_resistance_dc_ohm
    assert_allclose(total, prediction.resistance_dc_ohm, rtol=1e-9)
    # Inductance shares of the layers plus the vias' sum to L (low f).
    l_model = inductance(coil)
    shares = sum(s.inductance_share_h for s in prediction.layers)
    vias = float(np.asarray(l_model.matrix_h).sum(axis=1)[list(l_model.layers).index("vias")]) if "vias" in l_model.layers else 0.0
    assert_allclose(shares + vias, prediction.inductance_dc_h, rtol=1e-9)
    # Same-layer capacitance parts per layer match the total's breakdown.
    assert_allclose(sum(s.capacitance_turn_to_turn_f for s in prediction.layers), sum(prediction.capacitance_turn_to_turn_f.values()), rtol=1e-12)


def test_filament_resistance_against_closed_form(coil, prediction):
    # Low frequency: the filament model's R tends to the DC value (same
    # copper, uniform current); 1 % allows its own discretisation.
    sw = frequency_sweep(coil, [100.0, FREQ], capacitance_f=prediction.capacitance_f)
    assert_allclose(sw.resistance_ohm[0], prediction.resistance_dc_ohm, rtol=0.01)
    # At frequency the proximity effect makes the filament model's R at
    # least the closed-form plate value, a lower bound (2 % for the
    # filament model's discretisation).
    assert sw.resistance_ohm[1] >= 0.98 * sw.resistance_closed_form_ohm[1]
    assert_allclose(sw.resistance_ohm[1], prediction.resistance_ac_ohm, rtol=1e-9)


def test_temperature(coil):
    p20 = predict(coil, freq_hz=1e3, temperature_c=20.0)
    p85 = predict(coil, freq_hz=1e3, temperature_c=85.0)
    # Handbook coefficient 0.00393 / K (from memory): linear law.
    assert_allclose(p85.resistance_dc_ohm / p20.resistance_dc_ohm, 1 + 0.00393 * 65, rtol=1e-9)


def test_spice_netlist_resonance_in_ngspice(prediction):
    # The subcircuit predict writes, simulated by ngspice (batch mode, AC
    # sweep): the |Z| peak within 1 % of the predicted SRF (the issue's
    # tolerance; the loss term shifts the peak by ~1/(2 Q^2)).
    text = prediction.spice()
    srf = prediction.srf_hz
    f, z = ngspice_impedance(text, spice_name(prediction.name), 0.7 * srf, 1.3 * srf, points=6001)
    assert_allclose(peak_frequency(f, z), srf, rtol=0.01)


def test_bad_inputs(coil):
    with pytest.raises(SpecError, match="freq_hz"):
        predict(coil, freq_hz=0.0)
    with pytest.raises(SpecError, match="tank_capacitance_f"):
        predict(coil, tank_capacitance_f=-1e-9)
    with pytest.raises(SpecError, match="temperature_c"):
        predict(coil, temperature_c="warm")


def test_command_line_writes_files(tmp_path, capsys):
    design = tmp_path / "tiny.toml"
    design.write_text(DESIGN)
    out = tmp_path / "out"
    code = main(["predict", str(design), "--freq", "2M", "--tank-cap", "1n", "--json", "--out", str(out), "--points", "3"])
    assert code == 0
    doc = json.loads(capsys.readouterr().out)
    for key in REQUIRED:
        assert key in doc
    assert doc["frequency_hz"] == 2e6 and doc["tank"]["capacitance_f"] == 1e-9
    files = sorted(p.name for p in out.iterdir())
    assert files == ["tiny-pad-equivalent.cir", "tiny-pad-field.png", "tiny-pad-predict.json", "tiny-pad-sweep.png"]
    saved = json.loads((out / "tiny-pad-predict.json").read_text())
    assert saved["inductance_h"] == doc["inductance_h"]
    assert len(saved["sweep"]["filament_model"]["frequency_hz"]) >= 3 and len(saved["sweep"]["frequency_hz"]) >= 20
    for png in ("tiny-pad-field.png", "tiny-pad-sweep.png"):
        assert (out / png).read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert ".subckt tiny_pad a b" in (out / "tiny-pad-equivalent.cir").read_text()


def test_command_line_bad_frequency_writes_nothing(tmp_path, capsys):
    design = tmp_path / "tiny.toml"
    design.write_text(DESIGN)
    out = tmp_path / "out"
    assert main(["predict", str(design), "--freq", "fast", "--out", str(out)]) == 2
    assert "--freq" in capsys.readouterr().err
    assert not out.exists() or not any(out.iterdir())
