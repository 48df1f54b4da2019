"""Electrical prediction of a coil: L, R, C, self-resonance, Q, tank, SPICE.

:func:`predict` gathers the physics models into one :class:`Prediction`:

* inductance L and, at the operating frequency, L(f) and R(f) from the
  partial-inductance model (:mod:`tracecoil.physics.inductance`), which
  includes skin and proximity effect when it subdivides the cross-section;
* DC resistance (Kirchhoff over the path, copper at ``temperature_c``) and
  the closed-form skin-effect estimate of R(f) as a cross-check
  (:mod:`tracecoil.physics.resistance`);
* the energy-equivalent parasitic capacitance C
  (:mod:`tracecoil.physics.capacitance`, an estimate, +-30-50 %);
* SRF = 1 / (2 pi sqrt(L C)), Q = w L / R, the Q seen at the terminals
  with C included, the resonance with a tank capacitor, and a SPICE
  subcircuit (:mod:`tracecoil.physics.circuit`).

:func:`frequency_sweep` evaluates L(f), R(f), Q(f) over many frequencies;
:func:`write_outputs` writes the JSON document, the SPICE file and the
pictures (matplotlib is imported only there).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from .errors import SpecError
from .physics import capacitance as _cap
from .physics import circuit as _cc
from .physics import resistance as _res
from .physics.inductance import impedance as _impedance
from .physics.inductance import inductance as _inductance

# What each number can be trusted to; repeated in the JSON and the README.
ACCURACY = {
    "inductance": "partial-inductance (PEEC) model of the copper as drawn: within 0.5 % of exact loop formulas and "
    "inside the published band of Mohan et al. 1999 for spirals (tests); nearby metal, ferrite or ground planes "
    "are not modelled",
    "resistance_dc": "+-10 %: dominated by the plated copper's real thickness (common practice tolerance) and resistivity "
    "(electrodeposited copper is 0-10 % above the 1.7241e-8 ohm m annealed value)",
    "resistance_ac": "filament model (sub-bars across each trace: skin and proximity effect; via barrels without skin "
    "effect); the closed-form plate model is a lower bound (no proximity effect)",
    "capacitance": "estimate, +-30-50 %: 2-D cross-sections, potential linear along the winding, solder mask ignored",
    "srf": "+-15-30 %, following the capacitance estimate (SRF ~ C^-1/2)",
    "q": "follows R(f): below SRF/3 as good as R(f); near the SRF the Q with capacitance is only indicative",
}

FREQ_MIN_HZ = 1.0
FREQ_MAX_HZ = 1e10


def _check_freq(freq_hz, name="freq_hz"):
    try:
        f = float(freq_hz)
    except (TypeError, ValueError):
        raise SpecError(f"{name} must be a number in Hz; got {freq_hz!r}") from None
    if not (FREQ_MIN_HZ <= f <= FREQ_MAX_HZ):
        raise SpecError(f"{name} must be between {FREQ_MIN_HZ:g} and {FREQ_MAX_HZ:g} Hz; got {freq_hz!r}")
    return f


def _check_temperature(temperature_c):
    try:
        t = float(temperature_c)
    except (TypeError, ValueError):
        raise SpecError(f"temperature_c must be a number in degC; got {temperature_c!r}") from None
    if not -200.0 <= t <= 400.0:
        raise SpecError(f"temperature_c must be between -200 and 400 degC; got {temperature_c!r}")
    return t


# ----------------------------------------------------------------------------
# the partial-inductance model (physics core)
# ----------------------------------------------------------------------------


def core_inductance(coil):
    """Low-frequency inductance from the partial-inductance model.

    Returns
    -------
    tracecoil.physics.inductance.InductanceResult
        ``float(result)`` is L (H); ``matrix_h`` splits it by layer.
    """
    return _inductance(coil)


METHOD_FILAMENT = "filament model (skin and proximity effect)"


def core_impedance(coil, freqs_hz, *, temperature_c=20.0):
    """L(f) (H) and R(f) (ohm) from the partial-inductance model's AC
    solution (:func:`tracecoil.physics.inductance.impedance`: sub-bars
    across each cross-section, skin and proximity effect), copper at
    ``temperature_c``. Each frequency is solved with the cross-section
    subdivision its own skin depth needs.

    Parameters
    ----------
    freqs_hz : ndarray, shape (n,)

    Returns
    -------
    l_h, r_ohm : ndarray, shape (n,)
    """
    freqs = np.atleast_1d(np.asarray(freqs_hz, dtype=float))
    l_h, r_ohm = np.empty(len(freqs)), np.empty(len(freqs))
    for k, f in enumerate(freqs):
        z = _impedance(coil, [float(f)], temperature_c=temperature_c)
        l_h[k], r_ohm[k] = z.inductance_h[0], z.resistance_ohm[0]
    return l_h, r_ohm


# ----------------------------------------------------------------------------
# results
# ----------------------------------------------------------------------------


@dataclass(frozen=True)
class LayerShare:
    """One copper layer's part of the prediction.

    Attributes
    ----------
    layer : int
        Copper layer (1 = top).
    name : str
        'top', 'inner1', ..., 'bottom'.
    trace_length_mm : float
        Centreline length of the layer's traces on the current path.
    resistance_dc_ohm, resistance_ac_closed_form_ohm : float
        The layer's power-weighted share of the resistance (f^2 R over its
        segments), DC and by the closed-form plate model at the frequency.
    capacitance_turn_to_turn_f : float
        Same-layer part of the capacitance estimate.
    inductance_share_h : float or None
        The layer's share of L: its own inductance plus half of its mutual
        terms with every other layer and the vias (shares sum to L).
    """

    layer: int
    name: str
    trace_length_mm: float
    resistance_dc_ohm: float
    resistance_ac_closed_form_ohm: float
    capacitance_turn_to_turn_f: float
    inductance_share_h: float | None = None


@dataclass(frozen=True)
class Prediction:
    """Predicted electrical behaviour of a coil at one frequency (SI units).

    ``srf_hz`` is 1/(2 pi sqrt(L C)) with L = ``inductance_h`` (L(f) at
    ``frequency_hz``, the value the SPICE subcircuit carries); ``q`` is
    w L(f) / R(f) at ``frequency_hz``; ``q_with_capacitance`` is Im Z /
    Re Z at the terminals with C across them.
    """

    name: str
    frequency_hz: float
    temperature_c: float
    inductance_h: float
    inductance_dc_h: float
    resistance_dc_ohm: float
    resistance_ac_ohm: float
    resistance_ac_method: str
    resistance_ac_closed_form_ohm: float
    capacitance_f: float
    capacitance_turn_to_turn_f: dict
    capacitance_layer_to_layer_f: dict
    srf_hz: float
    q: float
    q_with_capacitance: float
    apparent_inductance_h: float
    impedance_ohm: complex
    vias_resistance_dc_ohm: float
    layers: tuple = ()
    tank: dict | None = None
    notes: tuple = ()
    cautions: tuple = ()
    accuracy: dict = field(default_factory=lambda: dict(ACCURACY))

    def to_dict(self) -> dict:
        """A JSON-ready dictionary (plain floats, no NaN)."""

        def num(x):
            x = float(x)
            return x if math.isfinite(x) else None

        z = complex(self.impedance_ohm)
        out = {
            "name": self.name,
            "frequency_hz": num(self.frequency_hz),
            "temperature_c": num(self.temperature_c),
            "inductance_h": num(self.inductance_h),
            "inductance_dc_h": num(self.inductance_dc_h),
            "resistance_dc_ohm": num(self.resistance_dc_ohm),
            "resistance_ac_ohm": num(self.resistance_ac_ohm),
            "resistance_ac_method": self.resistance_ac_method,
            "resistance_ac_closed_form_ohm": num(self.resistance_ac_closed_form_ohm),
            "capacitance_f": num(self.capacitance_f),
            "capacitance_parts": {
                "turn_to_turn_f": {str(k): num(v) for k, v in sorted(self.capacitance_turn_to_turn_f.items())},
                "layer_to_layer_f": {f"{a}-{b}": num(v) for (a, b), v in sorted(self.capacitance_layer_to_layer_f.items())},
            },
            "srf_hz": num(self.srf_hz),
            "q": num(self.q),
            "q_with_capacitance": num(self.q_with_capacitance),
            "apparent_inductance_h": num(self.apparent_inductance_h),
            "impedance": {
                "real_ohm": num(z.real),
                "imag_ohm": num(z.imag),
                "magnitude_ohm": num(abs(z)),
                "phase_deg": num(math.degrees(math.atan2(z.imag, z.real))),
            },
            "vias_resistance_dc_ohm": num(self.vias_resistance_dc_ohm),
            "layers": [
                {
                    "layer": s.layer,
                    "name": s.name,
                    "trace_length_mm": num(s.trace_length_mm),
                    "resistance_dc_ohm": num(s.resistance_dc_ohm),
                    "resistance_ac_closed_form_ohm": num(s.resistance_ac_closed_form_ohm),
                    "capacitance_turn_to_turn_f": num(s.capacitance_turn_to_turn_f),
                    "inductance_share_h": None if s.inductance_share_h is None else num(s.inductance_share_h),
                }
                for s in self.layers
            ],
            "tank": None if self.tank is None else {k: (num(v) if isinstance(v, (int, float)) else v) for k, v in self.tank.items()},
            "accuracy": dict(self.accuracy),
            "notes": list(self.notes),
            "cautions": list(self.cautions),
        }
        return out

    def spice(self) -> str:
        """SPICE subcircuit (R at the prediction frequency, L, C)."""
        return _cc.spice_subcircuit(
            self.name,
            inductance_h=self.inductance_h,
            resistance_ohm=self.resistance_ac_ohm,
            capacitance_f=self.capacitance_f,
            comment_lines=(
                f"R = R(f) at {self.frequency_hz:.6g} Hz ({self.resistance_ac_method}); R_dc = {self.resistance_dc_ohm:.6g} ohm",
                f"L = L(f) at {self.frequency_hz:.6g} Hz; C = parasitic estimate ({ACCURACY['capacitance']})",
                f"self-resonance 1/(2 pi sqrt(LC)) = {self.srf_hz:.6g} Hz",
                "usage: X1 <node_a> <node_b> " + _cc.spice_name(self.name),
            ),
        )

    def table(self) -> str:
        """A readable text table."""
        rows = [
            ("frequency", _eng(self.frequency_hz, "Hz")),
            ("inductance L(f)", _eng(self.inductance_h, "H")),
            ("inductance (low f)", _eng(self.inductance_dc_h, "H")),
            (f"resistance DC at {self.temperature_c:g} degC", _eng(self.resistance_dc_ohm, "ohm")),
            ("resistance AC R(f)", f"{_eng(self.resistance_ac_ohm, 'ohm')}  ({self.resistance_ac_method})"),
            ("  closed-form plate model", _eng(self.resistance_ac_closed_form_ohm, "ohm")),
            ("capacitance (estimate)", _eng(self.capacitance_f, "F")),
            ("self-resonance", _eng(self.srf_hz, "Hz")),
            ("Q = wL/R", f"{self.q:.4g}"),
            ("Q with capacitance", f"{self.q_with_capacitance:.4g}"),
            ("|Z| at frequency", _eng(abs(complex(self.impedance_ohm)), "ohm")),
        ]
        if self.tank is not None:
            rows.append(("tank capacitor", _eng(self.tank["capacitance_f"], "F")))
            rows.append(("tank resonance", _eng(self.tank["frequency_hz"], "Hz")))
            rows.append(("tank Q", f"{self.tank['q']:.4g}"))
            rows.append(("tank impedance at resonance", _eng(self.tank["impedance_at_resonance_ohm"], "ohm")))
        width = max(len(k) for k, _ in rows)
        lines = [f"{self.name}"]
        lines += [f"  {k:<{width}}  {v}" for k, v in rows]
        lines.append("")
        lines.append(f"  {'layer':<8}{'length':>12}{'R dc':>12}{'R ac (cf)':>12}{'C same-layer':>14}{'L share':>12}")
        for s in self.layers:
            ls = "-" if s.inductance_share_h is None else _eng(s.inductance_share_h, "H")
            lines.append(
                f"  {s.name:<8}{s.trace_length_mm:>10.1f}mm{_eng(s.resistance_dc_ohm, 'ohm'):>12}"
                f"{_eng(s.resistance_ac_closed_form_ohm, 'ohm'):>12}{_eng(s.capacitance_turn_to_turn_f, 'F'):>14}{ls:>12}"
            )
        lines.append(f"  {'vias':<8}{'':>12}{_eng(self.vias_resistance_dc_ohm, 'ohm'):>12}")
        for c in self.cautions:
            lines.append(f"  caution: {c}")
        return "\n".join(lines)


def _eng(x, unit: str) -> str:
    """Engineering notation: 4 significant digits and an SI prefix.

    >>> _eng(1.2341e-6, "H"), _eng(0.0, "F"), _eng(4.7e3, "ohm")
    ('1.234 uH', '0 F', '4.7 kohm')
    """
    x = float(x)
    if not math.isfinite(x):
        return f"{x} {unit}"
    if x == 0:
        return f"0 {unit}"
    prefixes = {-15: "f", -12: "p", -9: "n", -6: "u", -3: "m", 0: "", 3: "k", 6: "M", 9: "G"}
    e = int(math.floor(math.log10(abs(x)) / 3) * 3)
    e = max(-15, min(9, e))
    return f"{x / 10**e:.4g} {prefixes[e]}{unit}"


# ----------------------------------------------------------------------------
# predict
# ----------------------------------------------------------------------------


def predict(coil, *, freq_hz=1e6, temperature_c=20.0, tank_capacitance_f=None, capacitance_cuts=_cap.DEFAULT_CUTS) -> Prediction:
    """Predict a coil's L, R, C, self-resonance, Q and tank resonance.

    Parameters
    ----------
    coil : tracecoil.layout.Coil
    freq_hz : float
        Operating frequency (Hz), 1 Hz to 10 GHz.
    temperature_c : float
        Copper temperature (degC) for the resistance.
    tank_capacitance_f : float or None
        A capacitor across the coil (F) for the tank resonance.
    capacitance_cuts : int
        Cross-sections for the capacitance estimate.

    Returns
    -------
    Prediction
    """
    f = _check_freq(freq_hz)
    t = _check_temperature(temperature_c)
    if tank_capacitance_f is not None:
        tank_c = float(tank_capacitance_f)
        if not (math.isfinite(tank_c) and 0 < tank_c < 1.0):
            raise SpecError(f"tank_capacitance_f must be between 0 and 1 F; got {tank_capacitance_f!r}")
    notes = []
    cautions = []

    l_model = core_inductance(coil)
    l_static = float(l_model.inductance_h)
    r_dc = _res.dc_resistance(coil, temperature_c=t)
    r_closed = _res.ac_resistance(coil, f, temperature_c=t)
    (l_f,), (r_f,) = core_impedance(coil, [f], temperature_c=t)
    method = METHOD_FILAMENT
    est = _cap.capacitance(coil, cuts=capacitance_cuts)
    c = est.total_f
    # The SRF uses the same L as the SPICE subcircuit: L(f) at the frequency.
    srf = float(_cc.resonant_frequency(l_f, c)) if c > 0 else math.inf
    q = float(_cc.quality_factor(f, l_f, r_f))
    z = complex(_cc.coil_impedance(f, l_f, r_f, c))
    q_c = z.imag / z.real
    l_app = z.imag / (2 * np.pi * f)
    if f >= srf:
        cautions.append(
            f"the frequency {f:.4g} Hz is at or above the estimated self-resonance {srf:.4g} Hz: the coil looks capacitive there"
        )
    elif f > srf / 3:
        cautions.append(
            f"the frequency is above a third of the estimated self-resonance ({srf:.4g} Hz): the apparent inductance "
            "and Q depend on the capacitance estimate (+-30-50 %)"
        )
    if r_f < 0.98 * r_closed:
        notes.append("the filament model's R(f) is below the closed-form plate model; check its discretisation")

    tank = None
    if tank_capacitance_f is not None:
        f0, fz = _cc.tank_frequency(l_f, r_f, c, tank_c)
        r_at = _res.ac_resistance(coil, f0, temperature_c=t)
        z0 = complex(_cc.coil_impedance(f0, l_f, r_f, c + tank_c))
        tank = {
            "capacitance_f": tank_c,
            "frequency_hz": f0,
            "zero_phase_frequency_hz": fz,
            "q": float(_cc.quality_factor(f0, l_f, r_f)),
            "impedance_at_resonance_ohm": abs(z0),
            "closed_form_resistance_at_resonance_ohm": r_at,
            "note": "L and R taken at the prediction frequency; rerun with --freq at the tank resonance for R(f) there",
        }

    dc_parts = _res.resistance_by_layer(coil, temperature_c=t)
    ac_parts = _res.resistance_by_layer(coil, temperature_c=t, freq_hz=f)
    l_shares = _layer_inductance_shares(coil, l_model)
    st = coil.stackup
    layers = []
    for layer in sorted(k for k in dc_parts if k != "vias"):
        length = sum(tr.length_mm for s in coil.path if s.kind == "trace" for tr in [coil.traces[s.index]] if tr.layer == layer)
        layers.append(
            LayerShare(
                layer=layer,
                name=st.layer_name(layer),
                trace_length_mm=float(length),
                resistance_dc_ohm=dc_parts[layer],
                resistance_ac_closed_form_ohm=ac_parts[layer],
                capacitance_turn_to_turn_f=float(est.turn_to_turn_f.get(layer, 0.0)),
                inductance_share_h=l_shares.get(layer),
            )
        )
    notes.extend(est.notes)
    notes.append(
        "layer resistances are power-weighted shares (fraction^2 R; AC by the closed-form plate model, cf); "
        "the total DC value solves the path network"
    )
    cautions.append(
        "resistance is for the stated copper temperature; high currents heat the traces (see the rule checker's "
        "IPC-2221 current limits) and high voltages need the clearances of the standard and local codes"
    )
    return Prediction(
        name=coil.name,
        frequency_hz=f,
        temperature_c=t,
        inductance_h=float(l_f),
        inductance_dc_h=float(l_static),
        resistance_dc_ohm=float(r_dc),
        resistance_ac_ohm=float(r_f),
        resistance_ac_method=method,
        resistance_ac_closed_form_ohm=float(r_closed),
        capacitance_f=float(c),
        capacitance_turn_to_turn_f=dict(est.turn_to_turn_f),
        capacitance_layer_to_layer_f=dict(est.layer_to_layer_f),
        srf_hz=srf,
        q=q,
        q_with_capacitance=float(q_c),
        apparent_inductance_h=float(l_app),
        impedance_ohm=z,
        vias_resistance_dc_ohm=float(dc_parts["vias"]),
        layers=tuple(layers),
        tank=tank,
        notes=tuple(notes),
        cautions=tuple(cautions),
    )


def _layer_inductance_shares(coil, result) -> dict:
    """{layer: H}: each layer's row of the model's group matrix (its own
    inductance plus half of each mutual term), so the shares of the layers
    and the vias sum to L."""
    names = {coil.stackup.layer_name(layer): layer for layer in range(1, coil.stackup.n_layers + 1)}
    rows = np.asarray(result.matrix_h).sum(axis=1)
    return {names[lab]: float(v) for lab, v in zip(result.layers, rows) if lab in names}


# ----------------------------------------------------------------------------
# frequency sweep
# ----------------------------------------------------------------------------


@dataclass(frozen=True)
class Sweep:
    """L(f), R(f) and Q(f) over frequency (SI units).

    Two sets of frequencies: the filament model (skin and proximity effect;
    costly at high frequency) at ``filament_hz``, and the closed-form
    quantities, cheap, at every ``frequency_hz``.

    Attributes
    ----------
    frequency_hz : ndarray, shape (n,)
    resistance_closed_form_ohm : ndarray, shape (n,)
        Plate skin-effect model (a lower bound, no proximity effect).
    apparent_inductance_h, q_with_capacitance : ndarray, shape (n,)
        Im Z / w and Im Z / Re Z at the terminals with the parasitic
        capacitance, using L(f) interpolated from the filament points (held
        constant beyond them) and R(f) interpolated likewise on the ratio
        to the closed form.
    filament_hz : ndarray, shape (m,)
    inductance_h, resistance_ohm, q : ndarray, shape (m,)
        The filament model's L(f), R(f) and w L / R.
    capacitance_f, srf_hz, resistance_dc_ohm, inductance_dc_h : float
    """

    frequency_hz: np.ndarray
    resistance_closed_form_ohm: np.ndarray
    apparent_inductance_h: np.ndarray
    q_with_capacitance: np.ndarray
    filament_hz: np.ndarray
    inductance_h: np.ndarray
    resistance_ohm: np.ndarray
    q: np.ndarray
    capacitance_f: float
    srf_hz: float
    resistance_dc_ohm: float
    inductance_dc_h: float

    def to_dict(self) -> dict:
        def arr(a):
            return [float(x) if math.isfinite(x) else None for x in np.asarray(a, float)]

        return {
            "filament_model": {
                "frequency_hz": arr(self.filament_hz),
                "inductance_h": arr(self.inductance_h),
                "resistance_ohm": arr(self.resistance_ohm),
                "q": arr(self.q),
            },
            "frequency_hz": arr(self.frequency_hz),
            "resistance_closed_form_ohm": arr(self.resistance_closed_form_ohm),
            "apparent_inductance_h": arr(self.apparent_inductance_h),
            "q_with_capacitance": arr(self.q_with_capacitance),
        }


def sweep_frequencies(freq_hz: float, srf_hz: float, *, points: int = 40) -> np.ndarray:
    """Log-spaced sweep around an operating frequency: from a hundredth of
    it (or of the SRF, if lower) up to 1.5 x the SRF, or 100 x the
    frequency when the SRF is unknown; the operating frequency is
    included.

    >>> f = sweep_frequencies(1e6, 50e6, points=5)
    >>> bool(f[0] <= 1e4 and f[-1] >= 75e6 and np.any(np.isclose(f, 1e6)))
    True
    """
    lo = min(freq_hz, srf_hz if math.isfinite(srf_hz) else freq_hz) / 100.0
    hi = 1.5 * srf_hz if math.isfinite(srf_hz) else 100.0 * freq_hz
    hi = max(hi, 2.0 * freq_hz)
    lo, hi = max(lo, FREQ_MIN_HZ), min(hi, FREQ_MAX_HZ)
    f = np.geomspace(lo, hi, points)
    return np.unique(np.append(f, freq_hz))


def filament_frequencies(freq_hz: float, sweep_hz, *, points: int = 6, above: float = 4.0) -> np.ndarray:
    """Where to run the filament model in a sweep: ``points`` log-spaced
    from the sweep's start to ``above`` x the operating frequency (the
    model's cost grows with frequency), plus the operating frequency.

    >>> filament_frequencies(1e6, np.geomspace(1e4, 1e8, 9), points=3).tolist()
    [10000.0, 200000.0, 1000000.0, 4000000.0]
    """
    sweep_hz = np.asarray(sweep_hz, dtype=float)
    hi = min(float(sweep_hz.max()), above * freq_hz)
    lo = min(float(sweep_hz.min()), hi)
    f = np.geomspace(lo, hi, points) if points > 1 else np.array([hi])
    return np.unique(np.round(np.append(f, freq_hz), 6))


def frequency_sweep(coil, freqs_hz, *, temperature_c=20.0, capacitance_f=None, filament_hz=None) -> Sweep:
    """L(f), R(f) and Q(f) over frequency.

    Parameters
    ----------
    coil : tracecoil.layout.Coil
    freqs_hz : array_like, shape (n,)
        Frequencies (Hz) for the closed-form quantities.
    temperature_c : float
    capacitance_f : float or None
        Parasitic capacitance; estimated with
        :func:`tracecoil.physics.capacitance.capacitance` when None.
    filament_hz : array_like or None
        Frequencies for the filament model (default: ``freqs_hz``).

    Returns
    -------
    Sweep
    """
    t = _check_temperature(temperature_c)
    f = np.atleast_1d(np.asarray(freqs_hz, dtype=float))
    ff = f if filament_hz is None else np.atleast_1d(np.asarray(filament_hz, dtype=float))
    for x in np.concatenate([f, ff]):
        _check_freq(x, "freqs_hz")
    f, ff = np.sort(f), np.sort(ff)
    c = _cap.capacitance(coil).total_f if capacitance_f is None else float(capacitance_f)
    l_ff, r_ff = core_impedance(coil, ff, temperature_c=t)
    r_cf = np.array([_res.ac_resistance(coil, x, temperature_c=t) for x in f])
    r_cf_at_ff = np.array([_res.ac_resistance(coil, x, temperature_c=t) for x in ff])
    # Between and beyond the filament points: L held/interpolated in log f,
    # R as the closed form times the interpolated ratio of the two models.
    lf = np.log(f)
    l_interp = np.interp(lf, np.log(ff), l_ff)
    r_interp = r_cf * np.interp(lf, np.log(ff), r_ff / r_cf_at_ff)
    l0 = float(core_inductance(coil).inductance_h)
    return Sweep(
        frequency_hz=f,
        resistance_closed_form_ohm=r_cf,
        apparent_inductance_h=_cc.apparent_inductance(f, l_interp, r_interp, c),
        q_with_capacitance=_cc.loaded_quality_factor(f, l_interp, r_interp, c),
        filament_hz=ff,
        inductance_h=l_ff,
        resistance_ohm=r_ff,
        q=_cc.quality_factor(ff, l_ff, r_ff),
        capacitance_f=c,
        srf_hz=float(_cc.resonant_frequency(l0, c)) if c > 0 else math.inf,
        resistance_dc_ohm=_res.dc_resistance(coil, temperature_c=t),
        inductance_dc_h=l0,
    )


# ----------------------------------------------------------------------------
# files and pictures
# ----------------------------------------------------------------------------


def write_outputs(prediction: Prediction, coil, out_dir, *, sweep: Sweep | None = None, field_map: bool = True) -> dict:
    """Write the prediction's files into ``out_dir``, all or none.

    Files: ``<name>-predict.json`` (the prediction, with the sweep if
    given), ``<name>-equivalent.cir`` (SPICE subcircuit),
    ``<name>-sweep.png`` (L, R, Q against frequency, when ``sweep`` is
    given) and ``<name>-field.png`` (|B| in the plane y = centre, when
    ``field_map``).

    Returns
    -------
    dict
        {kind: Path} of the files written.
    """
    import json

    from .export.atomic import Staging

    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    stem = prediction.name  # design names are letters, digits, '-' and '_' (design.py)
    doc = prediction.to_dict()
    if sweep is not None:
        doc["sweep"] = sweep.to_dict()
    text = json.dumps(doc, indent=2, allow_nan=False) + "\n"
    written = {}
    with Staging() as stage:
        written["json"] = out / f"{stem}-predict.json"
        stage.path(written["json"]).write_text(text, encoding="utf-8")
        written["spice"] = out / f"{stem}-equivalent.cir"
        stage.path(written["spice"]).write_text(prediction.spice(), encoding="utf-8")
        if sweep is not None:
            written["sweep_png"] = out / f"{stem}-sweep.png"
            plot_sweep(sweep, stage.path(written["sweep_png"]), title=f"{prediction.name}: L, R and Q against frequency", mark_hz=prediction.frequency_hz)
        if field_map:
            written["field_png"] = out / f"{stem}-field.png"
            plot_field_map(coil, stage.path(written["field_png"]), title=f"{prediction.name}: |B| at 1 A, plane through the centre")
    return written


def plot_sweep(sweep: Sweep, path, *, title: str = "", mark_hz: float | None = None) -> None:
    """Three stacked panels against log frequency, PNG: L (filament model
    points, apparent L with C), R (filament model points, closed form, DC),
    Q (filament model points, Q at the terminals with C)."""
    from matplotlib.figure import Figure

    f, ff = sweep.frequency_hz, sweep.filament_hz
    fig = Figure(figsize=(7.5, 8.5), dpi=120)
    ax_l, ax_r, ax_q = fig.subplots(3, 1, sharex=True)
    below = f < 0.97 * sweep.srf_hz
    ax_l.plot(f[below], sweep.apparent_inductance_h[below] * 1e6, "-", color="tab:orange", label="apparent L at the terminals (with C)")
    ax_l.plot(ff, sweep.inductance_h * 1e6, "o", ms=4, color="tab:blue", label="L(f), filament model")
    ax_l.set_ylabel("inductance (uH)")
    # The apparent L grows without bound at the SRF: keep the model's L readable.
    ax_l.set_ylim(0, 2.5 * float(np.nanmax(sweep.inductance_h)) * 1e6)
    ax_r.loglog(f, sweep.resistance_closed_form_ohm, "--", color="tab:orange", label="plate skin-effect model (lower bound)")
    ax_r.loglog(ff, sweep.resistance_ohm, "o", ms=4, color="tab:blue", label="R(f), filament model (skin + proximity)")
    ax_r.axhline(sweep.resistance_dc_ohm, color="0.4", lw=0.8, label="R DC")
    ax_r.set_ylabel("resistance (ohm)")
    q_c = np.where(sweep.q_with_capacitance > 0, sweep.q_with_capacitance, np.nan)
    ax_q.plot(f, q_c, "-", color="tab:orange", label="Q at the terminals (with C; R between points from the closed form)")
    ax_q.plot(ff, sweep.q, "o", ms=4, color="tab:blue", label="Q = wL/R, filament model")
    ax_q.set_ylabel("Q")
    ax_q.set_xlabel("frequency (Hz)")
    ax_q.set_xscale("log")
    for ax in (ax_l, ax_r, ax_q):
        if math.isfinite(sweep.srf_hz) and f[0] <= sweep.srf_hz <= f[-1]:
            ax.axvline(sweep.srf_hz, color="tab:red", lw=0.8, ls=":", label=f"SRF estimate {_eng(sweep.srf_hz, 'Hz')}")
        if mark_hz is not None:
            ax.axvline(mark_hz, color="0.2", lw=0.8, ls="-.", label=f"operating {_eng(mark_hz, 'Hz')}")
        ax.grid(True, which="both", alpha=0.3)
        ax.legend(fontsize=7, loc="best")
    ax_q.set_ylim(bottom=0)
    if title:
        fig.suptitle(title, fontsize=10)
    fig.tight_layout()
    fig.savefig(path, format="png")


def field_plane(coil, *, nx: int = 161, nz: int = 101):
    """Grid for the field map: the vertical plane y = y_centre through the
    coil's copper, x over the copper plus a margin, z above and below.

    Returns
    -------
    x_mm : ndarray, shape (nx,)
    z_mm : ndarray, shape (nz,)
    points_mm : ndarray, shape (nz, nx, 3)
    """
    x0, y0, x1, y1 = coil.bounds_mm()
    span = max(x1 - x0, y1 - y0)
    zs = [coil.z_mm(layer) for layer in coil.layers_used]
    zc = 0.5 * (min(zs) + max(zs))
    x = np.linspace(x0 - 0.25 * span, x1 + 0.25 * span, nx)
    z = np.linspace(zc - 0.5 * span, zc + 0.5 * span, nz)
    yc = 0.5 * (y0 + y1)
    X, Z = np.meshgrid(x, z)
    pts = np.stack([X, np.full_like(X, yc), Z], axis=-1)
    return x, z, pts


def plot_field_map(coil, path, *, title: str = "", nx: int = 161, nz: int = 101) -> None:
    """|B| (log colour scale) and field lines in the plane y = centre, for
    1 A entering terminal A, with the copper crossing the plane marked."""
    from matplotlib.colors import LogNorm
    from matplotlib.figure import Figure

    from .export.preview import layer_colour
    from .physics.field import field

    x, z, pts = field_plane(coil, nx=nx, nz=nz)
    B = field(coil, pts, 1.0)
    mag = np.linalg.norm(B, axis=-1)
    finite = mag[np.isfinite(mag) & (mag > 0)]
    vmax = float(np.percentile(finite, 99.5))
    vmin = max(float(finite.min()), vmax * 1e-4)
    fig = Figure(figsize=(8, 5.2), dpi=120)
    ax = fig.subplots()
    im = ax.pcolormesh(x, z, np.clip(mag, vmin, vmax), norm=LogNorm(vmin=vmin, vmax=vmax), cmap="viridis", shading="auto")
    ax.streamplot(x, z, B[..., 0], B[..., 2], color="w", linewidth=0.5, density=1.1, arrowsize=0.6)
    yc = pts[0, 0, 1]
    n_layers = coil.stackup.n_layers
    for layer in coil.layers_used:
        xs = _crossings(coil, layer, yc)
        if len(xs):
            ax.plot(xs, np.full(len(xs), coil.z_mm(layer)), "s", ms=2.5, color=layer_colour(layer, n_layers), label=f"L{layer} {coil.stackup.layer_name(layer)}")
    ax.set_aspect("equal")
    ax.set_xlabel("x (mm)")
    ax.set_ylabel("z (mm)")
    ax.set_xlim(x[0], x[-1])
    ax.set_ylim(z[0], z[-1])
    cb = fig.colorbar(im, ax=ax)
    cb.set_label("|B| (T) for 1 A")
    if ax.get_legend_handles_labels()[0]:
        ax.legend(fontsize=7, loc="upper right")
    if title:
        ax.set_title(title, fontsize=10)
    fig.tight_layout()
    fig.savefig(path, format="png")


def _crossings(coil, layer: int, y: float) -> np.ndarray:
    """x of every point where a trace centreline on ``layer`` crosses y."""
    xs = []
    for tr in coil.traces_on(layer):
        p = tr.points_mm
        a, b = p[:-1], p[1:]
        s = (y - a[:, 1]) / np.where(b[:, 1] != a[:, 1], b[:, 1] - a[:, 1], np.nan)
        ok = (s >= 0) & (s < 1)
        xs.append(a[ok, 0] + s[ok] * (b[ok, 0] - a[ok, 0]))
    return np.concatenate(xs) if xs else np.zeros(0)
