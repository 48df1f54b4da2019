"""EMF signals of moving magnets: analytic waveforms, physical properties,
the load circuit, writers and the command line.

Faraday's sign convention checked here: emf = V_B - V_A = -d(lambda)/dt,
with lambda positive when the magnet's flux threads the coil in the sense
the current A -> B circulates (right-hand rule).

References used here
--------------------
* Flux of a point dipole through a coaxial loop,
  Phi = mu0 m R^2 / (2 (R^2 + z^2)^(3/2)) (J. D. Jackson, Classical
  Electrodynamics, 3rd ed., 1999, from memory), differentiated by hand:
  dPhi/dz = -3/2 mu0 m R^2 z / (R^2 + z^2)^(5/2); with z = z0 - v t the
  EMF is -dPhi/dt = -v 3/2 mu0 m R^2 z / (R^2 + z^2)^(5/2).
* The series R-L circuit against scipy.signal.lsim (first-order hold),
  an independent integrator.
"""

import csv
import json
import shutil

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy import signal as sps

from tracecoil.cli import main
from tracecoil.design import load_design
from tracecoil.errors import SpecError
from tracecoil.generators import coil_from_design
from tracecoil.layout import Coil, Stackup, Step, Trace
from tracecoil.targets import Circular, CylinderMagnet, Dipole, Linear, Table, signal
from tracecoil.targets.magnets import MAGNET_KINDS, MU0, BlockMagnet
from tracecoil.targets.motion import motion_from_table
from tracecoil.targets.signal import _rms, emf_from_flux, load_current, target_from_table
from tracecoil.templates import design_names, template_path


def ring_coil(radii_mm, layers, n=2048, repeat=1):
    nl = max(layers)
    st = Stackup(copper_um=(35.0,) * nl, dielectric_mm=(0.2,) * (nl - 1))
    t = np.linspace(0, 2 * np.pi, n + 1)
    traces = tuple(Trace(lay, r * np.column_stack([np.cos(t), np.sin(t)]), 0.2) for r, lay in zip(radii_mm, layers))
    steps = tuple(Step("trace", i) for i in range(len(traces))) * repeat
    return Coil(st, traces, (), (), steps, name="rings")


def square_coil():
    pts = np.array([[-4, -4], [4, -4], [4, 4], [-4, 4], [-4, -4]], float)
    return Coil(Stackup((35.0,), ()), (Trace(1, pts, 0.3),), (), (), (Step("trace", 0),), name="square")


@pytest.fixture(scope="module")
def pickup():
    return coil_from_design(load_design(template_path("speed-pickup")))


def test_dipole_along_the_axis_matches_the_analytic_emf():
    radii, layers = (3.0, 5.0), (1, 2)
    coil = ring_coil(radii, layers)
    m, v, z0 = 0.02, 2.0, 9.0  # A m^2, m/s, mm
    motion = Linear(start_mm=(0, 0, z0), direction=(0, 0, -1), speed_m_s=v, distance_mm=7.0)
    s = signal(coil, Dipole(moment_am2=(0, 0, m)), motion, samples=401)
    z = (z0 - v * 1e3 * s.time_s)[:, None] - np.array([coil.z_mm(k) for k in layers])[None, :]  # mm
    R = np.array(radii)[None, :] * 1e-3
    zm = z * 1e-3
    flux = (MU0 * m * R**2 / (2 * (R**2 + zm**2) ** 1.5)).sum(axis=1)
    emf = (-v * 1.5 * MU0 * m * R**2 * zm / (R**2 + zm**2) ** 2.5).sum(axis=1)
    # rtol: 2048-gons against circles, (pi/N)^2 ~ 2.4e-6
    assert_allclose(s.flux_linkage_wb, flux, rtol=5e-6)
    # EMF within 1e-5 of its peak (the issue asks for 1 %): polygon error
    # plus the fourth-order difference, whose own estimate bounds it
    err = np.abs(s.emf_v - emf).max()
    assert err < 1e-5 * np.abs(emf).max()
    assert np.abs(s.emf_v - emf * s.flux_linkage_wb / flux).max() <= s.emf_error_v
    # Faraday's sign: the dipole (m along +z) approaches counter-clockwise
    # loops from above, its linkage grows, so V_B - V_A is negative
    assert np.all(s.flux_linkage_wb > 0) and np.all(np.diff(s.flux_linkage_wb) > 0)
    assert np.all(s.emf_v < 0)


def test_emf_scales_with_speed_remanence_and_series_turns():
    coil = square_coil()
    mag = CylinderMagnet(diameter_mm=3, length_mm=2, remanence_t=1.2)
    path = dict(start_mm=(-8, 1, 2.5), direction=(1, 0, 0), distance_mm=16)
    slow = signal(coil, mag, Linear(speed_m_s=0.5, **path), samples=151)
    fast = signal(coil, mag, Linear(speed_m_s=1.0, **path), samples=151)
    # rtol: identical flux arrays, derivative over a time step half as long
    assert_allclose(fast.flux_linkage_wb, slow.flux_linkage_wb, rtol=1e-14)
    # atol: rounding of the linkage (1e-16 of it) divided by the time step,
    # visible only where the EMF crosses zero
    assert_allclose(fast.emf_v, 2 * slow.emf_v, rtol=1e-9, atol=1e-10 * slow.peak_emf_v)
    weak = signal(coil, mag.placed(remanence_t=0.6), Linear(speed_m_s=0.5, **path), samples=151)
    assert_allclose(weak.emf_v, 0.5 * slow.emf_v, rtol=1e-9, atol=1e-10 * slow.peak_emf_v)
    one = signal(ring_coil([4.0], [1], n=256), mag, Linear(speed_m_s=0.5, **path), samples=151)
    three = signal(ring_coil([4.0], [1], n=256, repeat=3), mag, Linear(speed_m_s=0.5, **path), samples=151)
    assert_allclose(three.emf_v, 3 * one.emf_v, rtol=1e-9, atol=1e-10 * one.peak_emf_v)


def test_reversing_the_motion_reverses_the_emf():
    coil = square_coil()
    mag = BlockMagnet(size_mm=(2, 3, 1), remanence_t=1.3, rotation_deg=(0, 0, 20))
    there = signal(coil, mag, Linear(start_mm=(-7, 0.5, 2), direction=(1, 0.2, 0), speed_m_s=1, distance_mm=14), samples=121)
    end = np.asarray(there.position_mm[-1])
    back = signal(coil, mag, Linear(start_mm=end, direction=(-1, -0.2, 0), speed_m_s=1, distance_mm=14), samples=121)
    # atol: same poses in reverse order; rounding of the start point only
    assert_allclose(back.emf_v[::-1], -there.emf_v, rtol=0, atol=1e-9 * there.peak_emf_v)


def test_no_motion_gives_no_emf(pickup):
    mag = CylinderMagnet(diameter_mm=4, length_mm=2, grade="N42")
    still = Table(time_s=[0, 0.01, 0.02, 0.03], position_mm=[[0.5, 0.3, 2.5]] * 4)
    s = signal(pickup, mag, still, samples=31)
    scale = np.abs(s.flux_linkage_wb).max() / still.duration_s  # EMF if the linkage changed by itself
    # only rounding is left (the spline's extrapolated ghost poses)
    assert np.all(s.flux_linkage_wb == s.flux_linkage_wb[0]) and s.peak_emf_v < 1e-12 * scale
    # spinning an axisymmetric magnet about its own axis changes nothing
    spin = Circular(centre_mm=(0.5, 0.3, 2.5), radius_mm=0, rpm=3000, axis=(0, 0, 1))
    s2 = signal(pickup, mag, spin, samples=73)
    scale = np.abs(s2.flux_linkage_wb).max() / spin.duration_s
    assert s2.peak_emf_v < 1e-10 * scale
    # ... while spinning a tilted one does induce a voltage
    s3 = signal(pickup, mag.placed(axis=(1, 0, 1)), spin, samples=73)
    assert s3.peak_emf_v > 1e-3 * scale


def test_zero_speed_is_refused(pickup):
    mag = Dipole(moment_am2=(0, 0, 0.01))
    with pytest.raises(SpecError, match="zero speed.*speed_m_s"):
        signal(pickup, mag, Linear(start_mm=(0, 0, 3), direction=(1, 0, 0), speed_m_s=0, distance_mm=5))
    with pytest.raises(SpecError, match="zero speed.*rpm"):
        signal(pickup, mag, Circular(centre_mm=(0, 0, 3), radius_mm=2, rpm=0))


def test_magnet_through_the_board_is_refused(pickup):
    mag = CylinderMagnet(diameter_mm=4, length_mm=2, remanence_t=1.2)
    with pytest.raises(SpecError, match="overlaps the board's copper region at t = "):
        signal(pickup, mag, Linear(start_mm=(-12, 0, 0.5), direction=(1, 0, 0), speed_m_s=1, distance_mm=24), samples=101)


def test_unknown_options_are_refused(pickup):
    with pytest.raises(SpecError, match=r"unknown options.*\[receiver\] applies to conductive"):
        signal(pickup, Dipole(), Linear(start_mm=(0, 0, 3), speed_m_s=1, distance_mm=1), receiver={})


def test_load_circuit_against_lsim():
    t = np.linspace(0, 2e-3, 801)
    e = 0.05 * np.exp(-((t - 8e-4) / 1.5e-4) ** 2) * np.sin(2 * np.pi * 4e3 * t) + 0.01 * np.cos(3e3 * t)
    R, L = 12.0, 3e-3  # tau = 250 us, comparable to the pulse
    i = load_current(e, t[1] - t[0], resistance_ohm=R, inductance_h=L)
    # lsim's realisation of 1/(L s + R) has state x = L i; start settled at e[0]/R
    _, y, _ = sps.lsim(sps.lti([1.0], [L, R]), e, t, X0=[L * e[0] / R], interp=True)
    # rtol: both integrate the first-order hold exactly; lsim by a matrix exponential
    assert_allclose(i, y, rtol=0, atol=1e-10 * np.abs(y).max())
    assert_allclose(load_current(e, t[1] - t[0], resistance_ohm=R, inductance_h=0.0), e / R, rtol=1e-15)


def test_signal_into_a_load(pickup):
    mag = CylinderMagnet(diameter_mm=6, length_mm=3, remanence_t=1.2)
    motion = Linear(start_mm=(-15, 0, 2), direction=(1, 0, 0), speed_m_s=1.5, distance_mm=30)
    s = signal(pickup, mag, motion, samples=301, load_ohm=47.0, coil_resistance_ohm=3.0, coil_inductance_h=1e-5)
    assert s.time_constant_s == pytest.approx(1e-5 / 50)
    # tau = 0.2 us against a ~ms pulse: the load sees the resistive divider
    # (starting settled); the inductance adds tau d(emf)/dt, below 1e-3 of the peak here
    assert_allclose(s.load_v, s.emf_v * 47 / 50, rtol=0, atol=1e-3 * s.peak_emf_v)
    assert s.load_v[0] == pytest.approx(s.emf_v[0] * 47 / 50, rel=1e-12)
    assert_allclose(s.load_v, 47.0 * s.current_a, rtol=1e-15)
    assert s.summary()["load"]["peak_load_v"] == pytest.approx(s.peak_load_v)


def test_derivative_stencil_and_rms():
    t = np.arange(-2, 203) * 1e-3
    lam = np.sin(2 * np.pi * 5 * t)
    emf, err = emf_from_flux(lam, 1e-3)
    exact = -2 * np.pi * 5 * np.cos(2 * np.pi * 5 * t[2:-2])
    # fourth order: error ~ h^4 w^5 / 30 = 6e-8 relative; the estimate exceeds the true error
    assert np.abs(emf - exact).max() < err
    assert_allclose(emf, exact, rtol=0, atol=1e-6 * np.abs(exact).max())
    tt = np.linspace(0, 1, 1001)
    assert_allclose(_rms(tt, np.sin(2 * np.pi * 3 * tt)), np.sqrt(0.5), rtol=1e-12)  # rtol: trapezoid is exact for periodic trig


def test_writers(tmp_path):
    s = signal(square_coil(), Dipole(moment_am2=(0.01, 0, 0.02)),
               Linear(start_mm=(-6, 0, 2), direction=(1, 0, 0), speed_m_s=1, distance_mm=12), samples=61)
    files = s.write(tmp_path / "out", "sq")
    assert sorted(p.name for p in (tmp_path / "out").iterdir()) == ["sq.csv", "sq.json", "sq.png"]
    with open(files["csv"], newline="") as f:
        rows = list(csv.reader(f))
    assert rows[0] == ["time_s", "x_mm", "y_mm", "z_mm", "flux_linkage_wb", "emf_v"]
    data = np.array(rows[1:], float)
    assert_allclose(data[:, 5], s.emf_v, rtol=1e-9, atol=1e-12 * s.peak_emf_v)  # 10 significant digits
    doc = json.loads(files["json"].read_text())
    assert doc["peak_emf_v"] == s.peak_emf_v and doc["rms_emf_v"] == s.rms_emf_v
    assert len(doc["time_s"]) == len(doc["emf_v"]) == 61
    assert files["png"].read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


def _magnet_examples():
    out = []
    for n in design_names():
        kind = load_design(template_path(n)).tables.get("target", {}).get("kind")
        if kind in MAGNET_KINDS:
            out.append(n)
    return out


@pytest.mark.parametrize("name", _magnet_examples())
def test_bundled_examples_are_resolved_by_the_automatic_sampling(name):
    d = load_design(template_path(name))
    target, options = target_from_table(d.tables["target"])
    s = signal(coil_from_design(d), target, motion_from_table(d.tables["motion"]), **options)
    assert s.peak_emf_v > 0 and s.emf_error_v < 0.01 * s.peak_emf_v


# ----------------------------------------------------------------------- CLI


def _design(tmp_path, target=None, motion=None):
    text = template_path("speed-pickup").read_text()
    head = text[: text.index("[target]")]
    target = target or 'kind = "cylinder"\ndiameter_mm = 6\nlength_mm = 3\nremanence_t = 1.2\n'
    motion = motion or 'kind = "linear"\nstart_mm = [-15, 0, 2]\ndirection = [1, 0, 0]\nspeed_m_s = 1.5\ndistance_mm = 30\n'
    f = tmp_path / "speed-pickup.toml"
    f.write_text(head + "[target]\n" + target + "\n[motion]\n" + motion)
    return f


def test_cli_json(tmp_path, capsys):
    f = _design(tmp_path)
    assert main(["signal", str(f), "--out", str(tmp_path / "o"), "--samples", "101", "--json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    for key in ("peak_emf_v", "rms_emf_v", "time_s", "emf_v", "flux_linkage_wb", "position_mm"):
        assert key in doc
    assert len(doc["emf_v"]) == 101 and doc["peak_emf_v"] > 0
    assert (tmp_path / "o" / "speed-pickup-signal.csv").is_file()


def test_cli_text_with_load(tmp_path, capsys):
    shutil.copy(template_path("hub-pickup"), tmp_path / "hub-pickup.toml")
    assert main(["signal", str(tmp_path / "hub-pickup.toml"), "--out", str(tmp_path / "o"), "--samples", "181",
                 "--load", "1000"]) == 0
    out = capsys.readouterr().out
    assert "open-circuit EMF: peak" in out and "into 1 kohm" in out and "wrote" in out


@pytest.mark.parametrize("target, motion, words", [
    (None, 'kind = "linear"\nstart_mm = [-15, 0, 1]\ndirection = [1, 0, 0]\nspeed_m_s = 1\ndistance_mm = 30\n',
     "overlaps the board's copper region"),
    (None, 'kind = "linear"\nstart_mm = [-15, 0, 3]\ndirection = [1, 0, 0]\nspeed_m_s = 0\ndistance_mm = 30\n',
     "zero speed"),
    ('kind = "cylinder"\ndiameter_mm = 6\nlength_mm = 3\ngrade = "N99"\n', None, "unknown magnet grade 'N99'"),
    ('kind = "cylinder"\ndiameter_mm = 6\nlenght_mm = 3\nremanence_t = 1.2\n', None, "did you mean 'length_mm'"),
    (None, 'kind = "linear"\nstart_mm = [-15, 0, 3]\ndirection = [1, 0, 0]\nspeed = 1\ndistance_mm = 30\n',
     "did you mean 'speed_m_s'"),
])
def test_cli_errors(tmp_path, capsys, target, motion, words):
    f = _design(tmp_path, target, motion)
    assert main(["signal", str(f), "--out", str(tmp_path / "o"), "--samples", "51"]) == 2
    assert words in capsys.readouterr().err
    assert not (tmp_path / "o").exists() or not any((tmp_path / "o").iterdir())


def test_cli_needs_target_and_motion(tmp_path, capsys):
    f = tmp_path / "plain.toml"
    f.write_text('[coil]\nshape = "square"\nouter_mm = 10\nturns = 3\nwidth_mm = 0.2\ngap_mm = 0.2\n')
    assert main(["signal", str(f)]) == 2
    assert "no [target]" in capsys.readouterr().err
