"""Signals from targets moving near a coil: ``signal(coil, target, motion)``.

For a magnet the result is the induced voltage waveform
(:class:`MagnetSignal`); for a conductive target the call is handed to
``tracecoil.targets.conductive.plate_signal`` (imported only then).

EMF and sign convention
-----------------------
Faraday's law along the coil's current path from terminal A to B::

    emf(t) = -d lambda / dt,      lambda = sum_i f_i int_A^B A_magnet . dl

At open terminals ``emf_v`` is V_B - V_A. A magnet whose flux through the
coil grows in the sense the coil's A -> B current circulates (right-hand
rule) gives a negative EMF. Into a load resistor across the terminals the
current i (from B through the load back to A) obeys the first-order
circuit::

    L di/dt + (R_coil + R_load) i = emf(t),   v_load = R_load i

starting settled, i(0) = emf(0) / (R_coil + R_load) (as if the first EMF
value had been present for long; for a magnet starting far away this is
i(0) = 0),

with L and R_coil of the coil itself (partial-inductance model and DC
resistance, or given by the caller).

Derivative
----------
lambda is computed on an even time grid extended by two samples beyond
each end (the motion is extended analytically), and differentiated with
the fourth-order central difference
``(l[k-2] - 8 l[k-1] + 8 l[k+1] - l[k+2]) / (12 h)``. ``emf_error_v`` is
the largest difference between that and the second-order difference
``(l[k+1] - l[k-1]) / (2 h)``: the error of the second-order value,
hence an upper estimate of the fourth-order one's while the sampling
resolves the waveform.

Circuit
-------
The circuit is integrated exactly for an EMF that is linear between samples
(first-order hold): with a = exp(-h/tau), tau = L / R,
i[k+1] = a i[k] + ((tau/h)(1 - a) - a) e[k] / R + (1 - (tau/h)(1 - a)) e[k+1] / R.
"""

from __future__ import annotations

import csv
import io
import math
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from ..errors import SpecError
from .flux import _first_overlap_message, clearance_mm, flux_linkage
from .magnets import MAGNET_KINDS, Magnet, magnet_from_table
from .motion import PER_FEATURE, Motion, sample_times

__all__ = [
    "signal",
    "MagnetSignal",
    "emf_from_flux",
    "load_current",
    "target_from_table",
    "MIN_FEATURE_MM",
    "CAUTION_EMF_V",
]

MIN_FEATURE_MM = 0.05  # finest feature length used for automatic sampling (mm)
# Above this open-circuit peak the summary prints a caution (touch-voltage
# limits for dry conditions start near 50 V AC / 120 V DC in IEC 61140
# terms; 30 V leaves margin; common practice, defer to local codes).
CAUTION_EMF_V = 30.0

SIGN_CONVENTION = ("emf_v = V_B - V_A at open terminals = -d(flux_linkage_wb)/dt; flux linkage is positive "
                   "when the magnet's flux threads the coil in the sense the current A -> B circulates")


def emf_from_flux(flux_ext, dt):
    """EMF and its error estimate from flux linkage on an extended even grid.

    Parameters
    ----------
    flux_ext : ndarray, shape (n + 4,)
        Flux linkage (Wb) at t0 - 2h, t0 - h, t0, ..., t0 + (n-1) h, then
        two more samples beyond the end.
    dt : float
        Sample spacing h (s).

    Returns
    -------
    emf : ndarray, shape (n,)
        -d(lambda)/dt by the fourth-order central difference (V).
    error : float
        max |fourth-order - second-order| (V), an upper error estimate.

    Examples
    --------
    lambda = t^3 has derivative 3 t^2; the fourth-order stencil is exact:

    >>> t = np.arange(-2, 7) * 0.1
    >>> e, err = emf_from_flux(t**3, 0.1)
    >>> np.round(-e, 12).tolist()
    [0.0, 0.03, 0.12, 0.27, 0.48]
    """
    lam = np.asarray(flux_ext, float)
    h = float(dt)
    d4 = (lam[:-4] - 8.0 * lam[1:-3] + 8.0 * lam[3:-1] - lam[4:]) / (12.0 * h)
    d2 = (lam[3:-1] - lam[1:-3]) / (2.0 * h)
    err = float(np.max(np.abs(d4 - d2))) if len(d4) else 0.0
    return -d4, err


def load_current(emf_v, dt, *, resistance_ohm, inductance_h, initial_current_a=None):
    """Current (A) of the series R-L circuit driven by ``emf_v``.

    Exact for an EMF linear between samples (module docstring).

    Parameters
    ----------
    emf_v : ndarray, shape (n,)
        Source voltage at even time steps (V).
    dt : float
        Time step (s).
    resistance_ohm : float
        Total series resistance (ohm), > 0.
    inductance_h : float
        Series inductance (H), >= 0.
    initial_current_a : float, optional
        Current at the first sample; default emf_v[0] / resistance_ohm
        (the circuit settled to the first value).

    Returns
    -------
    ndarray, shape (n,)

    Examples
    --------
    A step held at 1 V settles to 1 V / R:

    >>> i = load_current(np.ones(200), 1e-6, resistance_ohm=10.0, inductance_h=1e-5)
    >>> round(float(i[-1]), 6)
    0.1
    """
    from scipy.signal import lfilter

    e = np.asarray(emf_v, float)
    R = float(resistance_ohm)
    L = float(inductance_h)
    if not R > 0:
        raise SpecError(f"circuit resistance must be > 0 ohm; got {resistance_ohm!r}")
    if not L >= 0:
        raise SpecError(f"inductance must be >= 0 H; got {inductance_h!r}")
    if len(e) == 0:
        return e.copy()
    if L == 0:
        return e / R
    i0 = e[0] / R if initial_current_a is None else float(initial_current_a)
    h = float(dt)
    tau = L / R
    one_minus_a = -math.expm1(-h / tau)
    a = 1.0 - one_minus_a
    g = tau / h * one_minus_a
    b1 = (1.0 - g) / R
    b0 = (g - a) / R
    # y[n] = a y[n-1] + b1 e[n] + b0 e[n-1]; the initial state makes y[0] = i0
    i, _ = lfilter([b1, b0], [1.0, -a], e, zi=[i0 - b1 * e[0]])
    return i


def _rms(t, x):
    if len(t) < 2:
        return float(abs(x[0])) if len(x) else 0.0
    return float(math.sqrt(np.trapezoid(x * x, t) / (t[-1] - t[0])))


def _eng(x: float, unit: str) -> str:
    if x == 0 or not math.isfinite(x):
        return f"{x:g} {unit}"
    e = int(math.floor(math.log10(abs(x)) / 3))
    e = max(-5, min(e, 3))
    prefix = {-5: "f", -4: "p", -3: "n", -2: "u", -1: "m", 0: "", 1: "k", 2: "M", 3: "G"}[e]
    return f"{x / 10 ** (3 * e):.4g} {prefix}{unit}"


@dataclass(frozen=True, eq=False)
class MagnetSignal:
    """Waveform of a magnet moving near a coil (see :func:`signal`).

    Attributes
    ----------
    time_s : ndarray, shape (n,)
    position_mm : ndarray, shape (n, 3)
        Centre of the magnet.
    flux_linkage_wb : ndarray, shape (n,)
    emf_v : ndarray, shape (n,)
        Open-circuit EMF, V_B - V_A (module docstring).
    emf_error_v : float
        Upper estimate of the differentiation error.
    load_v, current_a : ndarray, shape (n,), or None
        Voltage across the load and current into it, when a load was given.
    """

    time_s: np.ndarray
    position_mm: np.ndarray
    flux_linkage_wb: np.ndarray
    emf_v: np.ndarray
    emf_error_v: float
    target: dict = field(default_factory=dict)
    motion: dict = field(default_factory=dict)
    feature_mm: float = math.nan
    clearance_mm: float = math.nan
    load_ohm: float | None = None
    coil_resistance_ohm: float | None = None
    coil_inductance_h: float | None = None
    load_v: np.ndarray | None = None
    current_a: np.ndarray | None = None
    name: str = "coil"

    @property
    def samples(self) -> int:
        return len(self.time_s)

    @property
    def peak_emf_v(self) -> float:
        """Largest |emf| (V)."""
        return float(np.max(np.abs(self.emf_v)))

    @property
    def peak_to_peak_emf_v(self) -> float:
        return float(np.ptp(self.emf_v))

    @property
    def rms_emf_v(self) -> float:
        """RMS over the sampled window (trapezoid rule) (V)."""
        return _rms(self.time_s, self.emf_v)

    @property
    def peak_load_v(self) -> float | None:
        return None if self.load_v is None else float(np.max(np.abs(self.load_v)))

    @property
    def rms_load_v(self) -> float | None:
        return None if self.load_v is None else _rms(self.time_s, self.load_v)

    @property
    def time_constant_s(self) -> float | None:
        if self.load_ohm is None:
            return None
        return self.coil_inductance_h / (self.coil_resistance_ohm + self.load_ohm)

    def summary(self) -> dict:
        """Scalar results (JSON-ready)."""
        d = {
            "name": self.name,
            "samples": self.samples,
            "duration_s": float(self.time_s[-1] - self.time_s[0]),
            "peak_emf_v": self.peak_emf_v,
            "peak_to_peak_emf_v": self.peak_to_peak_emf_v,
            "rms_emf_v": self.rms_emf_v,
            "emf_error_v": self.emf_error_v,
            "peak_flux_linkage_wb": float(np.max(np.abs(self.flux_linkage_wb))),
            "feature_mm": self.feature_mm,
            "clearance_mm": self.clearance_mm,
            "sign_convention": SIGN_CONVENTION,
            "target": self.target,
            "motion": self.motion,
        }
        if self.load_ohm is not None:
            d["load"] = {
                "load_ohm": self.load_ohm,
                "coil_resistance_ohm": self.coil_resistance_ohm,
                "coil_inductance_h": self.coil_inductance_h,
                "time_constant_s": self.time_constant_s,
                "peak_load_v": self.peak_load_v,
                "rms_load_v": self.rms_load_v,
                "peak_current_a": float(np.max(np.abs(self.current_a))),
            }
        return d

    def to_dict(self) -> dict:
        """Scalars and the waveform arrays (JSON-ready)."""
        d = self.summary()
        d["time_s"] = self.time_s.tolist()
        d["position_mm"] = self.position_mm.tolist()
        d["flux_linkage_wb"] = self.flux_linkage_wb.tolist()
        d["emf_v"] = self.emf_v.tolist()
        if self.load_v is not None:
            d["load_v"] = self.load_v.tolist()
            d["current_a"] = self.current_a.tolist()
        return d

    def summary_lines(self) -> list[str]:
        """Plain-text report of the key numbers."""
        lines = [
            f"{self.name}: {self.target.get('kind', 'magnet')} magnet, {self.motion.get('kind', '')} motion, "
            f"{self.samples} samples over {_eng(float(self.time_s[-1] - self.time_s[0]), 's')}",
            f"  closest approach to the copper {self.clearance_mm:.3g} mm; sampling feature {self.feature_mm:.3g} mm",
            f"  peak flux linkage {_eng(float(np.max(np.abs(self.flux_linkage_wb))), 'Wb')}",
            f"  open-circuit EMF: peak {_eng(self.peak_emf_v, 'V')}, peak-to-peak {_eng(self.peak_to_peak_emf_v, 'V')}, "
            f"RMS {_eng(self.rms_emf_v, 'V')} (derivative error < {_eng(self.emf_error_v, 'V')})",
        ]
        if self.load_ohm is not None:
            lines.append(
                f"  into {_eng(self.load_ohm, 'ohm')}: coil R {_eng(self.coil_resistance_ohm, 'ohm')}, "
                f"L {_eng(self.coil_inductance_h, 'H')}, tau {_eng(self.time_constant_s, 's')}; "
                f"peak {_eng(self.peak_load_v, 'V')}, RMS {_eng(self.rms_load_v, 'V')}")
        if self.peak_emf_v > CAUTION_EMF_V:
            lines.append(f"  caution: the EMF exceeds {CAUTION_EMF_V:g} V; treat the coil terminals as hazardous and "
                         "follow local electrical-safety codes and licensed practice")
        if self.emf_error_v > 0.01 * self.peak_emf_v:
            lines.append("  note: the derivative error estimate exceeds 1 % of the peak; increase samples")
        return lines

    def write_csv(self, path) -> Path:
        """Write the waveform as CSV (atomic): time_s, x_mm, y_mm, z_mm,
        flux_linkage_wb, emf_v[, load_v, current_a]."""
        from ..export.atomic import write_text

        write_text(path, self._csv_text())
        return Path(path)

    def _csv_text(self) -> str:
        buf = io.StringIO()
        w = csv.writer(buf, lineterminator="\n")
        head = ["time_s", "x_mm", "y_mm", "z_mm", "flux_linkage_wb", "emf_v"]
        cols = [self.time_s, *self.position_mm.T, self.flux_linkage_wb, self.emf_v]
        if self.load_v is not None:
            head += ["load_v", "current_a"]
            cols += [self.load_v, self.current_a]
        w.writerow(head)
        for row in zip(*cols):
            w.writerow([format(float(v), ".10g") for v in row])
        return buf.getvalue()

    def write_json(self, path) -> Path:
        """Write :meth:`to_dict` as JSON (atomic)."""
        from ..export.atomic import write_json

        write_json(path, self.to_dict())
        return Path(path)

    def plot(self, path, *, title: str = "") -> Path:
        """PNG: EMF (and load voltage) and position against time."""
        from ..export.atomic import atomic_path

        with atomic_path(path) as tmp:
            self._plot(tmp, title=title)
        return Path(path)

    def _plot(self, path, *, title: str = "") -> None:
        from matplotlib.figure import Figure

        t_ms = self.time_s * 1e3
        fig = Figure(figsize=(7.5, 6.0), dpi=120)
        ax_e, ax_p = fig.subplots(2, 1, sharex=True)
        ax_e.plot(t_ms, self.emf_v * 1e3, label="open-circuit EMF (V_B - V_A)")
        if self.load_v is not None:
            ax_e.plot(t_ms, self.load_v * 1e3, "--", label=f"across {_eng(self.load_ohm, 'ohm')} load")
        ax_e.set_ylabel("voltage (mV)")
        ax_e.axhline(0.0, color="0.5", lw=0.6)
        for k, lab in enumerate("xyz"):
            ax_p.plot(t_ms, self.position_mm[:, k], label=f"{lab}")
        ax_p.set_ylabel("magnet centre (mm)")
        ax_p.set_xlabel("time (ms)")
        for ax in (ax_e, ax_p):
            ax.grid(True, alpha=0.3)
            ax.legend(fontsize=7, loc="best")
        fig.suptitle(title or f"{self.name}: EMF of a moving {self.target.get('kind', '')} magnet", fontsize=10)
        fig.tight_layout()
        fig.savefig(path, format="png")

    def write(self, out_dir, stem: str | None = None) -> dict:
        """Write CSV, JSON and PNG together (all or none); return their paths."""
        from ..export.atomic import Staging

        out = Path(out_dir)
        out.mkdir(parents=True, exist_ok=True)
        stem = stem or f"{self.name}-signal"
        written = {"csv": out / f"{stem}.csv", "json": out / f"{stem}.json", "png": out / f"{stem}.png"}
        import json

        text = json.dumps(self.to_dict(), indent=2, allow_nan=False) + "\n"
        with Staging() as stage:
            stage.path(written["csv"]).write_text(self._csv_text(), encoding="utf-8")
            stage.path(written["json"]).write_text(text, encoding="utf-8")
            self._plot(stage.path(written["png"]))
        return written


def _coil_size_mm(coil) -> float:
    x0, y0, x1, y1 = coil.bounds_mm()
    return max(x1 - x0, y1 - y0)


def _conductive_module():
    try:
        from . import conductive  # noqa: PLC0415 - optional, written separately
    except ImportError as e:
        raise SpecError(f"conductive targets are not available ({e})") from None
    return conductive


def signal(coil, target, motion, *, load_ohm=None, samples=None, per_feature=PER_FEATURE, coil_resistance_ohm=None,
           coil_inductance_h=None, temperature_c=20.0, order=4, piece_factor=1.0, check_overlap=True, name=None,
           **options):
    """Signal of a target moving near a coil.

    Dispatches on the target: a magnet (:class:`~tracecoil.targets.magnets.Dipole`,
    ``CylinderMagnet``, ``BlockMagnet``) gives a :class:`MagnetSignal`; a
    conductive plate is handed to
    ``tracecoil.targets.conductive.plate_signal(coil, plate, motion, ...)``
    with ``samples``, ``load_ohm``, ``name`` (when given) and ``**options``
    (``receiver``, ``freq_hz``, ... see that function).

    Parameters
    ----------
    coil : Coil
        The coil, placed in the world (mm); board top at z = offset.
    target : magnet or conductive target
    motion : Linear, Circular or Table
        Places the target's centre over time (its own ``position_mm`` is
        not used).
    load_ohm : float, optional
        Resistance across the terminals; adds ``load_v`` and ``current_a``.
    samples : int, optional
        Number of time samples (default: automatic, see
        :func:`tracecoil.targets.motion.sample_times`, with the feature
        length = min(coil size, closest approach of the magnet to the
        copper), never below 0.05 mm).
    per_feature : int
        Samples per feature time for the automatic choice.
    coil_resistance_ohm, coil_inductance_h : float, optional
        The coil's own R and L for the load circuit (default: DC resistance
        at ``temperature_c`` and the partial-inductance model).
    temperature_c : float
        Copper temperature for the default resistance.
    order, piece_factor : optional
        Quadrature along the copper, see :func:`tracecoil.targets.flux.flux_linkage`.
    check_overlap : bool
        Refuse poses where the magnet overlaps the board's copper region.
    name : str, optional
        Name for reports (default: the coil's name).

    Returns
    -------
    MagnetSignal (or the conductive module's result)

    Raises
    ------
    SpecError
        Zero speed, a magnet overlapping the copper, bad options.

    Examples
    --------
    A dipole passing 3 mm over a small spiral at 1 m/s:

    >>> from tracecoil import spiral
    >>> from tracecoil.targets import Dipole, Linear
    >>> c = spiral(turns=3, outer_mm=8, width_mm=0.3, gap_mm=0.3)
    >>> s = signal(c, Dipole(moment_am2=(0, 0, 0.05)), Linear(start_mm=(-10, 0, 3), direction=(1, 0, 0),
    ...            speed_m_s=1.0, distance_mm=20), samples=201)
    >>> s.samples, bool(s.peak_emf_v > 0), bool(s.emf_error_v < 0.01 * s.peak_emf_v)
    (201, True, True)
    """
    if not isinstance(target, Magnet):
        mod = _conductive_module()
        plate_cls = getattr(mod, "Plate", None)
        if plate_cls is None or not isinstance(target, plate_cls) or not hasattr(mod, "plate_signal"):
            raise SpecError(f"target must be a Dipole, CylinderMagnet, BlockMagnet or Plate; got {type(target).__name__}")
        extra = {k: v for k, v in (("samples", samples), ("load_ohm", load_ohm), ("name", name)) if v is not None}
        return mod.plate_signal(coil, target, motion, **extra, **options)
    if options:
        raise SpecError(f"unknown options for a magnet signal: {', '.join(sorted(options))}"
                        + ("; [receiver] applies to conductive targets" if "receiver" in options else ""))
    if not isinstance(motion, Motion):
        raise SpecError(f"motion must be a Linear, Circular or Table motion; got {type(motion).__name__}")
    if not hasattr(coil, "bounds_mm"):
        raise SpecError(f"coil must be a tracecoil Coil (layout); got {type(coil).__name__}")
    if motion.duration_s is None:
        what = "speed_m_s" if motion.kind == "linear" else "rpm"
        raise SpecError(f"zero speed: an EMF needs a moving magnet; motion {what} is 0 (give {what} > 0)")
    from ..physics.conductors import conductors

    cd = conductors(coil)
    # Feature length from the whole path (pose count independent of samples)
    pos_c, turn_c = motion.feature_poses()
    rot_c = turn_c @ target.rotation
    clear = clearance_mm(cd, target, pos_c, rot_c)
    feature = max(min(_coil_size_mm(coil), clear), MIN_FEATURE_MM)
    times = sample_times(motion, feature, samples=samples, per_feature=per_feature)
    h = float(times[1] - times[0])
    t_ext = np.concatenate([times[0] - h * np.array([2.0, 1.0]), times, times[-1] + h * np.array([1.0, 2.0])])
    pos, turn = motion.poses(t_ext)
    rot = np.asarray(turn) @ target.rotation
    if check_overlap:
        msg = _first_overlap_message(coil, target, pos[2:-2], rot[2:-2], times)
        if msg:
            raise SpecError(msg)
    lam = flux_linkage(cd, target, pos, rot, order=order, piece_factor=piece_factor)
    emf, err = emf_from_flux(lam, h)
    res = dict(
        time_s=times,
        position_mm=np.ascontiguousarray(pos[2:-2]),
        flux_linkage_wb=lam[2:-2].copy(),
        emf_v=emf,
        emf_error_v=err,
        target=target.describe(),
        motion=motion.describe(),
        feature_mm=feature,
        clearance_mm=clear,
        name=name or getattr(coil, "name", "coil"),
    )
    if load_ohm is not None:
        rl = float(load_ohm)
        if not (math.isfinite(rl) and rl > 0):
            raise SpecError(f"load_ohm must be > 0 ohm; got {load_ohm!r}")
        if coil_resistance_ohm is None:
            from ..physics.resistance import dc_resistance

            coil_resistance_ohm = dc_resistance(coil, temperature_c=temperature_c)
        if coil_inductance_h is None:
            from ..physics.inductance import inductance

            coil_inductance_h = inductance(coil).inductance_h
        rc, lc = float(coil_resistance_ohm), float(coil_inductance_h)
        if not (math.isfinite(rc) and rc >= 0):
            raise SpecError(f"coil_resistance_ohm must be >= 0; got {coil_resistance_ohm!r}")
        if not (math.isfinite(lc) and lc >= 0):
            raise SpecError(f"coil_inductance_h must be >= 0; got {coil_inductance_h!r}")
        i = load_current(emf, h, resistance_ohm=rc + rl, inductance_h=lc)
        res.update(load_ohm=rl, coil_resistance_ohm=rc, coil_inductance_h=lc, current_a=i, load_v=rl * i)
    return MagnetSignal(**res)


def target_from_table(values: dict, *, base_dir=None):
    """Build a target from a design file's ``[target]`` table.

    Magnet kinds ('dipole', 'cylinder', 'block') are built here; 'plate' is
    handed to ``tracecoil.targets.conductive.plate_from_table``.

    Returns
    -------
    target : magnet or Plate
    options : dict
        Keyword arguments for :func:`signal` that the table gives (solver
        settings of a conductive target; empty for a magnet).

    >>> m, opts = target_from_table({"kind": "dipole", "moment_am2": [0, 0, 0.01]})
    >>> type(m).__name__, opts
    ('Dipole', {})
    """
    if not isinstance(values, dict):
        raise SpecError(f"[target] must be a table of keys; got {type(values).__name__}")
    kind = values.get("kind")
    if kind in MAGNET_KINDS:
        return magnet_from_table(values), {}
    if kind == "plate":
        return _conductive_module().plate_from_table(values)
    raise SpecError(f"[target] kind must be one of {', '.join(repr(k) for k in MAGNET_KINDS + ('plate',))}; got {kind!r}")
