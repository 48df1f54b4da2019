"""Motions: poses against their defining geometry, table input, sampling.

Independent references: scipy.spatial.transform.Rotation for rotations
about an axis; straight-line and circular kinematics (x = x0 + v t,
angle = 2 pi rpm / 60 t) written out in the tests; scipy's CubicSpline
reproduces cubic polynomials exactly (not-a-knot end conditions).
"""

import math

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy.spatial.transform import Rotation

from tracecoil.errors import SpecError
from tracecoil.targets.motion import (
    MAX_SAMPLES,
    MIN_SAMPLES,
    Circular,
    Linear,
    Table,
    axis_rotations,
    motion_from_table,
    sample_times,
)


def test_linear_poses_and_duration():
    m = Linear(start_mm=(1, 2, 3), direction=(3, 4, 0), speed_m_s=0.5, distance_mm=25)
    assert_allclose(m.duration_s, 0.05, rtol=1e-15)  # 25 mm at 500 mm/s
    t = np.array([0.0, 0.01, 0.05])
    pos, turn = m.poses(t)
    expect = np.array([1, 2, 3]) + (500 * t)[:, None] * np.array([0.6, 0.8, 0.0])
    assert_allclose(pos, expect, rtol=1e-14, atol=1e-14)  # rtol: exact arithmetic up to rounding
    assert np.all(turn == np.eye(3))
    m2 = Linear(start_mm=(0, 0, 1), direction=(0, 1, 0), speed_m_s=2.0, duration_s=0.01)
    assert_allclose(m2.distance_mm, 20.0, rtol=1e-15)


def test_linear_without_speed_is_a_position_sweep_only():
    m = Linear(start_mm=(0, 0, 1), direction=(1, 0, 0), speed_m_s=0, distance_mm=5)
    assert m.duration_s is None and not m.moves()
    pos, _ = m.path(6)
    assert_allclose(pos[:, 0], np.arange(6.0), rtol=1e-15)
    with pytest.raises(SpecError, match="needs motion"):
        sample_times(m, 1.0)
    with pytest.raises(SpecError, match="speed_m_s > 0"):
        m.poses([0.0])


@pytest.mark.parametrize("kwargs, words", [
    (dict(direction=(0, 0, 0), speed_m_s=1, distance_mm=1), "non-zero direction"),
    (dict(speed_m_s=-1, distance_mm=1), "speed_m_s must be >= 0"),
    (dict(speed_m_s=1), "exactly one of distance_mm or duration_s"),
    (dict(speed_m_s=1, distance_mm=1, duration_s=1), "exactly one of distance_mm or duration_s"),
    (dict(speed_m_s=0, duration_s=1), "duration_s needs speed_m_s > 0"),
    (dict(speed_m_s=1, distance_mm=1, samples=2), "samples must be a whole number from 3"),
])
def test_linear_validation(kwargs, words):
    with pytest.raises(SpecError, match=words):
        Linear(**kwargs)


def test_axis_rotations_against_scipy():
    axis = np.array([1.0, -2.0, 0.5])
    axis /= np.linalg.norm(axis)
    ang = np.linspace(-3, 7, 11)
    ref = Rotation.from_rotvec(ang[:, None] * axis).as_matrix()
    assert_allclose(axis_rotations(axis, ang), ref, rtol=1e-13, atol=1e-15)  # rtol: same formula, rounding


def test_circular_kinematics():
    m = Circular(centre_mm=(1, 2, 12), radius_mm=10, rpm=300, axis=(1, 0, 0), start_angle_deg=30)
    assert_allclose(m.duration_s, 0.2, rtol=1e-15)  # one revolution at 5 rev/s
    t = np.linspace(0, m.duration_s, 9)
    pos, turn = m.poses(t)
    rel = pos - np.array([1, 2, 12])
    assert_allclose(np.linalg.norm(rel, axis=1), 10.0, rtol=1e-14)
    assert_allclose(rel[:, 0], 0.0, atol=1e-13)  # stays in the plane through the centre normal to x
    # angle from the reference direction (straight down, -z) turning right-handed about +x
    e1, e2 = np.array([0, 0, -1.0]), np.cross([1.0, 0, 0], [0, 0, -1.0])
    ang = np.arctan2(rel @ e2, rel @ e1)
    expect = np.deg2rad(30) + 2 * np.pi * 300 / 60 * t
    assert_allclose(np.unwrap(ang), expect, rtol=1e-13)
    # the target turns with the shaft by the same angle
    assert_allclose(turn, Rotation.from_rotvec((2 * np.pi * 5 * t)[:, None] * [1, 0, 0]).as_matrix(), atol=1e-14)
    assert_allclose(m.speed_m_s, 2 * np.pi * 5 * 0.010, rtol=1e-15)


def test_circular_reference_direction_for_a_vertical_axis_and_fixed_orientation():
    m = Circular(centre_mm=(0, 0, 5), radius_mm=4, rpm=60, axis=(0, 0, 1), rotate_target=False, revolutions=0.25)
    pos, turn = m.poses(np.array([0.0, m.duration_s]))
    assert_allclose(pos, [[4, 0, 5], [0, 4, 5]], atol=1e-13)  # from +x, counter-clockwise seen from +z
    assert np.all(turn == np.eye(3))


@pytest.mark.parametrize("kwargs, words", [
    (dict(radius_mm=0, rpm=60, rotate_target=False), "does not move the target"),
    (dict(radius_mm=-1, rpm=60), "radius_mm must be >= 0"),
    (dict(radius_mm=1, rpm=60, revolutions=1, duration_s=1), "at most one of revolutions or duration_s"),
    (dict(radius_mm=1, rpm=0, duration_s=1), "duration_s needs rpm > 0"),
    (dict(radius_mm=1, rpm=60, rotate_target="yes"), "rotate_target must be true or false"),
])
def test_circular_validation(kwargs, words):
    with pytest.raises(SpecError, match=words):
        Circular(**kwargs)


def test_table_from_csv_and_interpolation(tmp_path):
    t = np.linspace(0, 0.3, 7)
    x = 2 + 3 * t - 40 * t**2 + 100 * t**3  # a cubic: reproduced exactly by the spline
    f = tmp_path / "path.csv"
    rows = "\n".join(f"{a},{b},0.5,{2.0 + a}" for a, b in zip(t, x))
    f.write_text("# measured pass\ntime_s,x_mm,y_mm,z_mm,comment\n" + rows.replace("\n", ",a\n") + ",a\n")
    m = Table.from_csv(f)
    tq = np.linspace(0, 0.3, 31)
    pos, turn = m.poses(tq)
    assert_allclose(pos[:, 0], 2 + 3 * tq - 40 * tq**2 + 100 * tq**3, rtol=1e-12)  # rtol: exact up to rounding
    assert_allclose(pos[:, 2], 2 + tq, rtol=1e-12)
    assert np.all(turn == np.eye(3)) and m.duration_s == pytest.approx(0.3)
    lin = Table(time_s=t, position_mm=np.column_stack([x, 0 * t, 0 * t]), interpolation="linear")
    mid = lin.poses(np.array([0.025]))[0][0, 0]
    assert_allclose(mid, 0.5 * (x[0] + x[1]), rtol=1e-14)


def test_table_errors(tmp_path):
    with pytest.raises(SpecError, match="time_s must increase strictly; row 3"):
        Table(time_s=[0, 1, 1, 2], position_mm=np.zeros((4, 3)))
    with pytest.raises(SpecError, match="at least 4 rows"):
        Table(time_s=[0, 1], position_mm=np.zeros((2, 3)))
    f = tmp_path / "bad.csv"
    f.write_text("t,x_mm,y_mm,z_mm\n0,0,0,0\n")
    with pytest.raises(SpecError, match="missing time_s"):
        Table.from_csv(f)
    with pytest.raises(SpecError, match="does not exist"):
        Table.from_csv(tmp_path / "none.csv")
    f.write_text("time_s,x_mm,y_mm,z_mm\n0,0,0,0\n1,x,0,0\n")
    with pytest.raises(SpecError, match="row 3 is not a row of numbers"):
        Table.from_csv(f)


def test_sample_times_resolve_the_feature():
    m = Linear(start_mm=(-20, 0, 1), direction=(1, 0, 0), speed_m_s=2.0, distance_mm=40)
    t = sample_times(m, 0.5, per_feature=16)
    feature_time = 0.5 / 2000.0
    assert t[0] == 0 and t[-1] == pytest.approx(m.duration_s)
    assert np.all(np.diff(t) <= feature_time / 16 * (1 + 1e-12))
    assert len(sample_times(m, 1000.0)) == MIN_SAMPLES
    assert len(sample_times(m, 0.5, samples=77)) == 77
    with pytest.raises(SpecError, match=f"more than {MAX_SAMPLES}"):
        sample_times(m, 1e-4)


def test_sample_times_of_a_rotation_resolve_every_revolution():
    m = Circular(centre_mm=(0, 0, 5), radius_mm=0, rpm=600, revolutions=3)
    t = sample_times(m, 1.0)
    assert len(t) - 1 >= 72 * 3  # at most 5 degrees per step


def test_motion_from_table(tmp_path):
    (tmp_path / "m.csv").write_text("time_s,x_mm,y_mm,z_mm\n0,0,0,2\n1,1,0,2\n2,2,0,2\n3,3,0,2\n")
    m = motion_from_table({"kind": "table", "file": "m.csv", "interpolation": "linear"}, base_dir=tmp_path)
    assert isinstance(m, Table) and m.duration_s == 3.0
    c = motion_from_table({"kind": "circular", "centre_mm": [0, 0, "1 cm"], "radius_mm": 5, "rpm": 120})
    assert c.centre_mm == (0.0, 0.0, 10.0) and math.isclose(c.duration_s, 0.5)
    with pytest.raises(SpecError, match="did you mean 'speed_m_s'"):
        motion_from_table({"kind": "linear", "speed_ms": 1})
    with pytest.raises(SpecError, match="kind must be one of"):
        motion_from_table({"kind": "spiral"})
    with pytest.raises(SpecError, match="needs file"):
        motion_from_table({"kind": "table"})
