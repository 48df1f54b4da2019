"""Motions: a target's pose as a function of time.

A motion places a target's centre in the world (millimetres) and, for a
rotating shaft, turns its orientation. :meth:`Motion.poses` maps times
(s) to

* ``positions_mm``, shape (p, 3): the target's centre;
* ``turns``, shape (p, 3, 3): a rotation applied to the target's own
  orientation (identity for straight and tabulated motions).

A motion replaces the target's own ``position_mm``.

Three kinds:

* :class:`Linear` -- straight line at constant speed;
* :class:`Circular` -- a target on a rotating shaft (centre, radius, rpm,
  axis), optionally turning with the shaft;
* :class:`Table` -- times and positions from a CSV file or arrays.

Sampling
--------
:func:`sample_times` picks evenly spaced times that resolve the waveform:
at least ``per_feature`` samples (default 16) in the time the target
needs to travel one *feature length* -- the smaller of the coil's size
and the target's closest distance to the copper (chosen by the caller,
see :func:`tracecoil.targets.signal.signal`) -- and, for rotation, at
least 72 samples per revolution. The user can override the count.
"""

from __future__ import annotations

import csv
import math
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ..errors import SpecError, unknown_key_message
from ..units import to_mm
from .magnets import _finite, _vector

__all__ = [
    "Motion",
    "Linear",
    "Circular",
    "Table",
    "MOTION_KINDS",
    "motion_from_table",
    "sample_times",
    "axis_rotations",
    "MIN_SAMPLES",
    "MAX_SAMPLES",
]

MIN_SAMPLES = 101
MAX_SAMPLES = 200_000
PER_FEATURE = 16
PER_REVOLUTION = 72  # at most 5 degrees between samples of a rotation
INTERPOLATIONS = ("cubic", "linear")


def axis_rotations(axis, angles_rad) -> np.ndarray:
    """Rotation matrices about a unit ``axis`` by ``angles_rad`` (right-handed).

    Rodrigues' formula, R = I + sin(t) K + (1 - cos(t)) K^2.

    Parameters
    ----------
    axis : ndarray, shape (3,)
        Unit vector.
    angles_rad : ndarray, shape (p,)

    Returns
    -------
    ndarray, shape (p, 3, 3)

    >>> R = axis_rotations(np.array([0, 0, 1.0]), np.array([np.pi / 2]))
    >>> np.round(R[0] @ [1, 0, 0], 12).tolist()
    [0.0, 1.0, 0.0]
    """
    k = np.asarray(axis, float)
    K = np.array([[0, -k[2], k[1]], [k[2], 0, -k[0]], [-k[1], k[0], 0]])
    t = np.asarray(angles_rad, float)[:, None, None]
    return np.eye(3) + np.sin(t) * K + (1.0 - np.cos(t)) * (K @ K)


class Motion:
    """Base class: ``poses(times_s)``, ``duration_s``, ``speed_mm_s``.

    Subclasses set ``duration_s`` (None when the motion has no speed, for
    position sweeps) and implement :meth:`poses` and :meth:`path`.
    """

    kind = "motion"
    samples: int | None = None

    def poses(self, times_s):  # pragma: no cover - abstract
        raise NotImplementedError

    def path(self, n: int):  # pragma: no cover - abstract
        """``n`` evenly spaced poses along the whole path (works without a speed)."""
        raise NotImplementedError

    def feature_poses(self):
        """Poses along the path for judging its closest approach (a coarse, representative set)."""
        return self.path(257)

    def moves(self) -> bool:
        """True when the target's pose changes in time."""
        return self.duration_s is not None

    def feature_time_s(self, feature_mm: float) -> float:
        """Time to travel ``feature_mm`` (s); inf when nothing moves."""
        raise NotImplementedError  # pragma: no cover

    def describe(self) -> dict:  # pragma: no cover - abstract
        raise NotImplementedError


def _check_positive(value, name, *, allow_zero=False, unit=""):
    v = _finite(value, name)
    if v < 0 or (v == 0 and not allow_zero):
        rel = ">= 0" if allow_zero else "> 0"
        raise SpecError(f"{name} must be {rel}{unit}; got {value!r}")
    return v


def _check_samples(samples, name="samples"):
    if samples is None:
        return None
    if isinstance(samples, bool) or not isinstance(samples, (int, np.integer)) and not (
        isinstance(samples, float) and float(samples).is_integer()
    ):
        raise SpecError(f"{name} must be a whole number from 3 to {MAX_SAMPLES}; got {samples!r}")
    n = int(samples)
    if not 3 <= n <= MAX_SAMPLES:
        raise SpecError(f"{name} must be a whole number from 3 to {MAX_SAMPLES}; got {samples!r}")
    return n


@dataclass(frozen=True, eq=False, kw_only=True)
class Linear(Motion):
    """Straight-line motion at constant speed.

    Parameters
    ----------
    start_mm : sequence of 3 floats
        Centre of the target at t = 0 (mm).
    direction : sequence of 3 floats
        Direction of travel (normalised).
    speed_m_s : float
        Speed (m/s). 0 or None describes a position sweep only (no time):
        an EMF needs a speed > 0.
    distance_mm, duration_s : float
        Give one: the length of the path, or (with a speed) its duration.
    samples : int, optional
        Number of time samples (overrides the automatic choice).

    Examples
    --------
    >>> m = Linear(start_mm=(-10, 0, 2), direction=(1, 0, 0), speed_m_s=2.0, distance_mm=20)
    >>> m.duration_s
    0.01
    >>> pos, turn = m.poses(np.array([0.0, 0.005]))
    >>> pos.tolist()
    [[-10.0, 0.0, 2.0], [0.0, 0.0, 2.0]]
    """

    start_mm: tuple = (0.0, 0.0, 0.0)
    direction: tuple = (1.0, 0.0, 0.0)
    speed_m_s: float | None = None
    distance_mm: float | None = None
    duration_s: float | None = None
    samples: int | None = None

    kind = "linear"

    def __post_init__(self):
        object.__setattr__(self, "start_mm", tuple(_vector(self.start_mm, "motion.start_mm", mm=True)))
        object.__setattr__(self, "direction", tuple(_vector(self.direction, "motion.direction", unit_length=True)))
        v = 0.0 if self.speed_m_s is None else _check_positive(self.speed_m_s, "motion.speed_m_s", allow_zero=True, unit=" m/s")
        object.__setattr__(self, "speed_m_s", v)
        object.__setattr__(self, "samples", _check_samples(self.samples, "motion.samples"))
        if (self.distance_mm is None) == (self.duration_s is None):
            raise SpecError("linear motion: give exactly one of distance_mm or duration_s")
        if self.duration_s is not None:
            if v == 0:
                raise SpecError("linear motion: duration_s needs speed_m_s > 0 (or give distance_mm for a position sweep)")
            dur = _check_positive(self.duration_s, "motion.duration_s", unit=" s")
            object.__setattr__(self, "distance_mm", v * dur * 1000.0)
        else:
            d = to_mm(self.distance_mm, "motion.distance_mm")
            if not math.isfinite(d) or d <= 0:
                raise SpecError(f"motion.distance_mm must be > 0 mm; got {self.distance_mm!r}")
            object.__setattr__(self, "distance_mm", d)
            object.__setattr__(self, "duration_s", d / (v * 1000.0) if v > 0 else None)

    @property
    def speed_mm_s(self) -> float:
        return self.speed_m_s * 1000.0

    def poses(self, times_s):
        if self.duration_s is None:
            raise SpecError("linear motion has speed_m_s = 0: it has no time axis; an EMF needs speed_m_s > 0")
        t = np.asarray(times_s, float)
        pos = np.asarray(self.start_mm) + (t * self.speed_mm_s)[:, None] * np.asarray(self.direction)
        return pos, np.broadcast_to(np.eye(3), (len(t), 3, 3))

    def path(self, n: int):
        s = np.linspace(0.0, self.distance_mm, int(n))
        pos = np.asarray(self.start_mm) + s[:, None] * np.asarray(self.direction)
        return pos, np.broadcast_to(np.eye(3), (len(s), 3, 3))

    def feature_time_s(self, feature_mm: float) -> float:
        return feature_mm / self.speed_mm_s if self.speed_m_s > 0 else math.inf

    def describe(self) -> dict:
        return {"kind": "linear", "start_mm": list(self.start_mm), "direction": list(self.direction),
                "speed_m_s": self.speed_m_s, "distance_mm": self.distance_mm, "duration_s": self.duration_s}


def _reference_direction(axis):
    """In-plane direction for angle 0: toward the board (-z projected), or +x for an axis along z."""
    down = np.array([0.0, 0.0, -1.0])
    v = down - (down @ axis) * axis
    n = np.linalg.norm(v)
    if n < 1e-9:
        v = np.array([1.0, 0.0, 0.0]) - axis[0] * axis
        n = np.linalg.norm(v)
    return v / n


@dataclass(frozen=True, eq=False, kw_only=True)
class Circular(Motion):
    """A target on a rotating shaft: circular path at constant rpm.

    Parameters
    ----------
    centre_mm : sequence of 3 floats
        A point on the shaft axis; the target's centre moves in the plane
        through it perpendicular to the axis (mm).
    radius_mm : float
        Distance of the target's centre from the axis (mm); 0 spins the
        target in place.
    rpm : float
        Revolutions per minute, right-handed about ``axis``. 0 describes a
        position sweep only: an EMF needs rpm > 0.
    axis : sequence of 3 floats
        Shaft direction (normalised).
    start_angle_deg : float
        Angle of the target at t = 0, measured from the reference
        direction: the direction in the plane of rotation that points most
        steeply down (-z, toward a board in the z = 0 plane); for an axis
        along z, from +x.
    revolutions, duration_s : float
        Give at most one (default: one revolution).
    rotate_target : bool
        True (default) when the target is fixed to the shaft and turns with
        it; False keeps its orientation (a translating carriage).
    samples : int, optional
        Number of time samples.

    Examples
    --------
    A shaft along x, 12 mm above the board, magnet 10 mm out, starting at
    its lowest point:

    >>> m = Circular(centre_mm=(0, 0, 12), radius_mm=10, rpm=600, axis=(1, 0, 0))
    >>> m.duration_s
    0.1
    >>> pos, turn = m.poses(np.array([0.0, 0.025]))
    >>> np.round(pos, 9).tolist()
    [[0.0, 0.0, 2.0], [0.0, 10.0, 12.0]]
    """

    centre_mm: tuple = (0.0, 0.0, 0.0)
    radius_mm: float = 0.0
    rpm: float = 0.0
    axis: tuple = (0.0, 0.0, 1.0)
    start_angle_deg: float = 0.0
    revolutions: float | None = None
    duration_s: float | None = None
    rotate_target: bool = True
    samples: int | None = None

    kind = "circular"

    def __post_init__(self):
        object.__setattr__(self, "centre_mm", tuple(_vector(self.centre_mm, "motion.centre_mm", mm=True)))
        r = to_mm(self.radius_mm, "motion.radius_mm")
        if not math.isfinite(r) or r < 0:
            raise SpecError(f"motion.radius_mm must be >= 0 mm; got {self.radius_mm!r}")
        object.__setattr__(self, "radius_mm", r)
        rpm = _check_positive(self.rpm, "motion.rpm", allow_zero=True)
        object.__setattr__(self, "rpm", rpm)
        object.__setattr__(self, "axis", tuple(_vector(self.axis, "motion.axis", unit_length=True)))
        object.__setattr__(self, "start_angle_deg", _finite(self.start_angle_deg, "motion.start_angle_deg"))
        if not isinstance(self.rotate_target, bool):
            raise SpecError(f"motion.rotate_target must be true or false; got {self.rotate_target!r}")
        object.__setattr__(self, "samples", _check_samples(self.samples, "motion.samples"))
        if self.revolutions is not None and self.duration_s is not None:
            raise SpecError("circular motion: give at most one of revolutions or duration_s")
        if self.duration_s is not None:
            if rpm == 0:
                raise SpecError("circular motion: duration_s needs rpm > 0 (or give revolutions for a position sweep)")
            dur = _check_positive(self.duration_s, "motion.duration_s", unit=" s")
            object.__setattr__(self, "revolutions", dur * rpm / 60.0)
        else:
            rev = 1.0 if self.revolutions is None else _check_positive(self.revolutions, "motion.revolutions")
            if rev > 1e5:
                raise SpecError(f"motion.revolutions must be <= 100000; got {rev}")
            object.__setattr__(self, "revolutions", rev)
            object.__setattr__(self, "duration_s", rev * 60.0 / rpm if rpm > 0 else None)
        if r == 0 and not self.rotate_target:
            raise SpecError("circular motion with radius_mm = 0 and rotate_target = false does not move the target")

    @property
    def omega_rad_s(self) -> float:
        return 2.0 * math.pi * self.rpm / 60.0

    @property
    def speed_m_s(self) -> float:
        """Speed of the target's centre (m/s)."""
        return self.omega_rad_s * self.radius_mm / 1000.0

    def _at_angles(self, turn_rad):
        axis = np.asarray(self.axis)
        e1 = _reference_direction(axis)
        e2 = np.cross(axis, e1)
        ang = np.deg2rad(self.start_angle_deg) + turn_rad
        pos = np.asarray(self.centre_mm) + self.radius_mm * (np.cos(ang)[:, None] * e1 + np.sin(ang)[:, None] * e2)
        if self.rotate_target:
            turns = axis_rotations(axis, turn_rad)
        else:
            turns = np.broadcast_to(np.eye(3), (len(ang), 3, 3))
        return pos, turns

    def poses(self, times_s):
        if self.duration_s is None:
            raise SpecError("circular motion has rpm = 0: it has no time axis; an EMF needs rpm > 0")
        return self._at_angles(self.omega_rad_s * np.asarray(times_s, float))

    def path(self, n: int):
        return self._at_angles(np.linspace(0.0, 2.0 * math.pi * self.revolutions, int(n)))

    def feature_poses(self):
        """One revolution (or less) at 1 degree: the path repeats every turn."""
        turns = min(self.revolutions, 1.0)
        return self._at_angles(np.linspace(0.0, 2.0 * math.pi * turns, int(360 * turns) + 1))

    def feature_time_s(self, feature_mm: float) -> float:
        if self.rpm == 0:
            return math.inf
        per_rev = 60.0 / self.rpm / PER_REVOLUTION * PER_FEATURE  # so that PER_FEATURE samples give 72 per turn
        v = self.speed_m_s * 1000.0
        return min(feature_mm / v, per_rev) if v > 0 else per_rev

    def describe(self) -> dict:
        return {"kind": "circular", "centre_mm": list(self.centre_mm), "radius_mm": self.radius_mm, "rpm": self.rpm,
                "axis": list(self.axis), "start_angle_deg": self.start_angle_deg, "revolutions": self.revolutions,
                "duration_s": self.duration_s, "rotate_target": self.rotate_target}


@dataclass(frozen=True, eq=False, kw_only=True)
class Table(Motion):
    """A tabulated motion: times and positions of the target's centre.

    Between (and, for the derivative stencil, just beyond) the rows the
    position is interpolated: 'cubic' (default; a not-a-knot cubic spline,
    so velocity and EMF are continuous) or 'linear' (piecewise constant
    velocity: the EMF jumps at every row). The orientation stays fixed.

    Parameters
    ----------
    time_s : sequence of float, shape (n,)
        Strictly increasing times (s), n >= 2 (>= 4 for 'cubic').
    position_mm : array_like, shape (n, 3)
        Centre of the target at those times (mm).
    interpolation : {'cubic', 'linear'}
    samples : int, optional
        Number of evenly spaced time samples used for the signal (default:
        automatic, at least the number of rows).

    Examples
    --------
    >>> m = Table(time_s=[0, 1, 2, 3], position_mm=[[0, 0, 1], [1, 0, 1], [2, 0, 1], [3, 0, 1]])
    >>> m.poses(np.array([1.5]))[0].tolist()
    [[1.5, 0.0, 1.0]]
    """

    time_s: tuple = ()
    position_mm: tuple = ()
    interpolation: str = "cubic"
    samples: int | None = None
    source: str | None = None

    kind = "table"

    def __post_init__(self):
        t = np.asarray(self.time_s, dtype=float)
        p = np.asarray(self.position_mm, dtype=float)
        where = f" ({self.source})" if self.source else ""
        if self.interpolation not in INTERPOLATIONS:
            raise SpecError(f"motion.interpolation must be one of {', '.join(repr(i) for i in INTERPOLATIONS)}; got {self.interpolation!r}")
        need = 4 if self.interpolation == "cubic" else 2
        if t.ndim != 1 or len(t) < need:
            raise SpecError(f"motion table{where} needs at least {need} rows for {self.interpolation!r} interpolation; got {t.size}")
        if p.shape != (len(t), 3):
            raise SpecError(f"motion table{where}: position_mm must have shape ({len(t)}, 3); got {p.shape}")
        if not (np.all(np.isfinite(t)) and np.all(np.isfinite(p))):
            raise SpecError(f"motion table{where}: times and positions must be finite numbers")
        bad = np.nonzero(np.diff(t) <= 0)[0]
        if len(bad):
            i = int(bad[0]) + 1
            raise SpecError(f"motion table{where}: time_s must increase strictly; row {i + 1} has {t[i]} after {t[i - 1]}")
        t.setflags(write=False)
        p.setflags(write=False)
        object.__setattr__(self, "time_s", t)
        object.__setattr__(self, "position_mm", p)
        object.__setattr__(self, "samples", _check_samples(self.samples, "motion.samples"))
        if self.interpolation == "cubic":
            from scipy.interpolate import CubicSpline

            object.__setattr__(self, "_spline", CubicSpline(t, p, axis=0, bc_type="not-a-knot", extrapolate=True))

    @classmethod
    def from_csv(cls, path, *, interpolation: str = "cubic", samples: int | None = None) -> "Table":
        """Read a CSV file with a header row naming ``time_s, x_mm, y_mm, z_mm``.

        Other columns are ignored; lines starting with '#' are comments.
        """
        p = Path(path)
        if not p.is_file():
            raise SpecError(f"motion table file {str(p)!r} does not exist")
        need = ("time_s", "x_mm", "y_mm", "z_mm")
        with p.open(newline="", encoding="utf-8") as f:
            rows = [r for r in csv.reader(f) if r and not r[0].lstrip().startswith("#")]
        if not rows:
            raise SpecError(f"{p}: empty motion table; expected a header with {', '.join(need)}")
        header = [h.strip() for h in rows[0]]
        missing = [h for h in need if h not in header]
        if missing:
            raise SpecError(f"{p}: the header must name the columns {', '.join(need)}; missing {', '.join(missing)} "
                            f"(found {', '.join(header)})")
        cols = [header.index(h) for h in need]
        data = []
        for k, r in enumerate(rows[1:], start=2):
            try:
                data.append([float(r[c]) for c in cols])
            except (ValueError, IndexError):
                raise SpecError(f"{p}: row {k} is not a row of numbers for {', '.join(need)}: {r!r}") from None
        arr = np.array(data, dtype=float).reshape(-1, 4)
        return cls(time_s=arr[:, 0], position_mm=arr[:, 1:], interpolation=interpolation, samples=samples, source=str(p))

    @property
    def duration_s(self) -> float:
        return float(self.time_s[-1] - self.time_s[0])

    def _interp(self, t):
        if self.interpolation == "cubic":
            return self._spline(t)
        ts = self.time_s
        # linear, extrapolated with the end slopes
        i = np.clip(np.searchsorted(ts, t, side="right") - 1, 0, len(ts) - 2)
        w = (t - ts[i]) / (ts[i + 1] - ts[i])
        return self.position_mm[i] + w[:, None] * (self.position_mm[i + 1] - self.position_mm[i])

    def poses(self, times_s):
        """Poses at times measured from the table's first time."""
        t = np.asarray(times_s, float) + self.time_s[0]
        return self._interp(t), np.broadcast_to(np.eye(3), (len(t), 3, 3))

    def path(self, n: int):
        return self.poses(np.linspace(0.0, self.duration_s, int(n)))

    def max_speed_mm_s(self) -> float:
        t = np.linspace(self.time_s[0], self.time_s[-1], max(20 * len(self.time_s), 2001))
        p = self._interp(t)
        return float(np.max(np.linalg.norm(np.diff(p, axis=0), axis=1) / np.diff(t)))

    def moves(self) -> bool:
        return bool(np.ptp(self.position_mm, axis=0).max() > 0)

    def feature_time_s(self, feature_mm: float) -> float:
        v = self.max_speed_mm_s()
        return feature_mm / v if v > 0 else math.inf

    def describe(self) -> dict:
        return {"kind": "table", "rows": int(len(self.time_s)), "interpolation": self.interpolation,
                "duration_s": self.duration_s, **({"file": self.source} if self.source else {})}


def sample_times(motion: Motion, feature_mm: float, *, samples: int | None = None, per_feature: int = PER_FEATURE) -> np.ndarray:
    """Evenly spaced sample times over the motion's duration (s).

    Parameters
    ----------
    motion : Motion
        With a time axis (speed > 0, or a table).
    feature_mm : float
        Feature length: the smaller of the coil's size and the target's
        closest distance to the copper (mm).
    samples : int, optional
        Fixed number of samples (overrides the motion's own ``samples`` and
        the automatic choice).
    per_feature : int
        Samples per feature time (automatic choice).

    Returns
    -------
    ndarray, shape (n,)
        Times from 0 to ``motion.duration_s``; n >= 101 unless fixed, and
        at least the number of rows of a table.

    Raises
    ------
    SpecError
        If more than 200000 samples would be needed (give ``samples``, a
        shorter motion or a larger distance).

    Examples
    --------
    A 20 mm pass at 1 m/s with a 1 mm feature: 16 samples per ms.

    >>> m = Linear(start_mm=(-10, 0, 1), direction=(1, 0, 0), speed_m_s=1.0, distance_mm=20)
    >>> len(sample_times(m, 1.0))
    321
    """
    if motion.duration_s is None:
        raise SpecError(f"{motion.kind} motion has no speed: an EMF needs motion (speed_m_s > 0 or rpm > 0)")
    fixed = _check_samples(samples) or motion.samples
    duration = float(motion.duration_s)
    if fixed is None:
        per_feature = int(per_feature)
        if per_feature < 2:
            raise SpecError(f"per_feature must be >= 2; got {per_feature}")
        if not feature_mm > 0:
            raise SpecError(f"feature length must be > 0 mm; got {feature_mm}")
        tf = motion.feature_time_s(feature_mm)
        n = MIN_SAMPLES if not math.isfinite(tf) else int(math.ceil(duration / tf * per_feature)) + 1
        n = max(n, MIN_SAMPLES, len(getattr(motion, "time_s", ())))
        if n > MAX_SAMPLES:
            raise SpecError(f"resolving this motion needs {n} samples (more than {MAX_SAMPLES}): the target passes "
                            f"{feature_mm:.3g} mm from the copper over {duration:.3g} s; shorten the motion or give samples")
    else:
        n = fixed
    return np.linspace(0.0, duration, n)


MOTION_KINDS = ("linear", "circular", "table")
_TABLE_KEYS = {
    "linear": ("kind", "start_mm", "direction", "speed_m_s", "distance_mm", "duration_s", "samples"),
    "circular": ("kind", "centre_mm", "radius_mm", "rpm", "axis", "start_angle_deg", "revolutions", "duration_s",
                 "rotate_target", "samples"),
    "table": ("kind", "file", "interpolation", "samples"),
}


def motion_from_table(values: dict, *, base_dir=None) -> Motion:
    """Build a motion from a design file's ``[motion]`` table.

    ``kind`` is 'linear' (``start_mm``, ``direction``, ``speed_m_s``,
    ``distance_mm`` or ``duration_s``), 'circular' (``centre_mm``,
    ``radius_mm``, ``rpm``, ``axis``, ``start_angle_deg``, ``revolutions``
    or ``duration_s``, ``rotate_target``) or 'table' (``file``: a CSV with
    columns time_s, x_mm, y_mm, z_mm, relative to ``base_dir``;
    ``interpolation``). Every kind accepts ``samples``.

    >>> m = motion_from_table({"kind": "linear", "start_mm": [-15, 0, 2], "direction": [1, 0, 0],
    ...                        "speed_m_s": 1.5, "distance_mm": 30})
    >>> round(m.duration_s, 6)
    0.02
    >>> motion_from_table({"kind": "circular", "rmp": 100})
    Traceback (most recent call last):
    ...
    tracecoil.errors.SpecError: unknown key 'rmp' in [motion]; did you mean 'rpm'? (valid keys: axis, centre_mm, duration_s, kind, radius_mm, revolutions, rotate_target, rpm, samples, start_angle_deg)
    """
    if not isinstance(values, dict):
        raise SpecError(f"[motion] must be a table of keys; got {type(values).__name__}")
    kind = values.get("kind")
    if kind not in MOTION_KINDS:
        raise SpecError(f"[motion] kind must be one of {', '.join(repr(k) for k in MOTION_KINDS)}; got {kind!r}")
    keys = _TABLE_KEYS[kind]
    for k in values:
        if k not in keys:
            raise SpecError(unknown_key_message("motion", k, keys))
    args = {k: v for k, v in values.items() if k != "kind"}
    if kind == "linear":
        return Linear(**args)
    if kind == "circular":
        return Circular(**args)
    if "file" not in args:
        raise SpecError("[motion] kind 'table' needs file = 'path/to/motion.csv' (columns time_s, x_mm, y_mm, z_mm)")
    path = Path(args.pop("file"))
    if base_dir is not None and not path.is_absolute():
        path = Path(base_dir) / path
    return Table.from_csv(path, **args)
