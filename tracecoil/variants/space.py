"""Parameter spaces for sweeps: which design keys vary and over what values.

Each varied key is an :class:`Axis`, written ``KEY=VALUES``:

* ``turns=8:20`` -- whole numbers from 8 to 20 inclusive;
* ``width_mm=0.1:0.2:0.05`` -- start:stop:step, stop included when the
  steps land on it (0.1, 0.15, 0.2);
* ``width_mm=0.1,0.15,0.2`` or ``shape=circle,square`` -- a list;
* ``gap_mm=0.1:0.3`` -- a continuous range (random and Latin-hypercube
  samples only).

KEY is any ``[coil]`` key (``turns``, ``width_mm``, ``shape``, ...) or a
``[board]`` key written ``board.KEY`` (``board.copper_um``). A
:class:`Space` combines axes as a full grid (every combination), zipped
(the i-th value of every axis together) or by sampling: uniform random or
Latin-hypercube points (:mod:`scipy.stats.qmc`) over the ranges, seeded.

>>> s = make_space(["turns=8:10", "width_mm=0.1,0.2"])
>>> len(s), s.variants()[:2]
(6, [{'turns': 8, 'width_mm': 0.1}, {'turns': 8, 'width_mm': 0.2}])
>>> parse_vary("width_mm=0.1:0.2:0.05").values
(0.1, 0.15, 0.2)
>>> lhs = make_space(["turns=4:12", "gap_mm=0.1:0.3"], sample="lhs:5", seed=1).variants()
>>> len(lhs), all(4 <= v["turns"] <= 12 and isinstance(v["turns"], int) for v in lhs)
(5, True)
"""

from __future__ import annotations

import hashlib
import json
import math
from dataclasses import dataclass, fields, replace

import numpy as np

from ..design import BOARD_KEYS, COIL_KEYS, CORNERS, DIRECTIONS, RETURN_LEADS, SHAPES, WIRINGS, Design, make_board_spec
from ..errors import SpecError, unknown_key_message

MODES = ("grid", "zip", "random", "lhs")
MAX_VARIANTS = 1_000_000
BOARD_PREFIX = "board."

# Keys holding a list (one value per layer, or several points) cannot be swept.
_FIXED = {"paths", "on_layers", "board.dielectric_mm", "board.outline_mm"}
_CHOICES = {"shape": SHAPES, "wiring": WIRINGS, "direction": DIRECTIONS, "corner": CORNERS, "return_lead": RETURN_LEADS}
_INTEGER = {"layers", "sides", "return_layer", "board.layers"}
VARIABLE_KEYS = tuple(k for k in (*COIL_KEYS, *(BOARD_PREFIX + k for k in BOARD_KEYS)) if k not in _FIXED)


def _number_text(x: float) -> float:
    """``x`` rounded to 12 significant digits, so 0.1 + 0.05 is 0.15."""
    return float(f"{x:.12g}")


def parse_value(text: str):
    """One list item: an int, a float, or a string (quotes stripped).

    >>> parse_value("8"), parse_value("0.15"), parse_value("'square'"), parse_value("6 mil")
    (8, 0.15, 'square', '6 mil')
    """
    s = text.strip()
    if len(s) >= 2 and s[0] == s[-1] and s[0] in "'\"":
        return s[1:-1]
    try:
        return int(s)
    except ValueError:
        pass
    try:
        v = float(s)
    except ValueError:
        return s
    if not math.isfinite(v):
        raise SpecError(f"value {text!r} is not a finite number")
    return v


@dataclass(frozen=True)
class Axis:
    """One varied key.

    Attributes
    ----------
    key : str
        ``[coil]`` key or ``board.KEY``.
    values : tuple
        The discrete values (grid and zip); empty for a continuous range.
    low, high : float or None
        Bounds of a range (used by random and Latin-hypercube samples).
    integer : bool
        The range holds whole numbers only.
    text : str
        What the user wrote.
    """

    key: str
    values: tuple
    low: float | None = None
    high: float | None = None
    integer: bool = False
    text: str = ""

    @property
    def is_range(self) -> bool:
        return self.low is not None

    def sample(self, u: np.ndarray) -> list:
        """Values for unit-interval points ``u`` (shape (n,))."""
        u = np.clip(np.asarray(u, float), 0.0, np.nextafter(1.0, 0.0))
        if self.is_range and (self.integer or not self.values):
            if self.integer:
                lo, hi = int(self.low), int(self.high)
                return [int(lo + k) for k in np.floor(u * (hi - lo + 1)).astype(int)]
            return [_number_text(self.low + x * (self.high - self.low)) for x in u]
        return [self.values[k] for k in np.floor(u * len(self.values)).astype(int)]


def check_key(key: str) -> str:
    """Validate a varied key; raise :class:`SpecError` naming it."""
    if key in _FIXED:
        raise SpecError(f"{key!r} holds a list (per layer or per point) and cannot be varied; vary a single-valued key instead")
    if key.startswith(BOARD_PREFIX):
        k = key[len(BOARD_PREFIX):]
        if k not in BOARD_KEYS:
            raise SpecError(unknown_key_message("board", k, [b for b in BOARD_KEYS if BOARD_PREFIX + b not in _FIXED]))
        return key
    if key not in COIL_KEYS:
        hint = " (board keys are written board.KEY)" if key in BOARD_KEYS else ""
        raise SpecError(unknown_key_message("coil", key, [c for c in COIL_KEYS if c not in _FIXED]) + hint)
    return key


def _check_values(key: str, values) -> tuple:
    for v in values:
        if key in _CHOICES:
            if v not in _CHOICES[key]:
                raise SpecError(f"--vary {key}: {v!r} is not one of {', '.join(_CHOICES[key])}")
        elif key in _INTEGER:
            if isinstance(v, bool) or not isinstance(v, int):
                raise SpecError(f"--vary {key}: values must be whole numbers; got {v!r}")
        elif isinstance(v, bool) or not isinstance(v, (int, float, str)):
            raise SpecError(f"--vary {key}: values must be numbers; got {v!r}")
    return tuple(values)


def _range(key: str, parts: list[str], text: str) -> Axis:
    nums = []
    for p in parts:
        v = parse_value(p)
        if isinstance(v, str) or isinstance(v, bool):
            raise SpecError(f"--vary {text!r}: a range needs numbers start:stop[:step]; got {p!r}")
        nums.append(v)
    if key in _CHOICES:
        raise SpecError(f"--vary {key}: a choice key takes a list such as {','.join(_CHOICES[key][:2])}, not a range")
    start, stop = nums[0], nums[1]
    if stop < start:
        raise SpecError(f"--vary {text!r}: stop {stop} is below start {start}")
    whole = all(isinstance(v, int) for v in nums)
    if len(nums) == 2:
        if whole:
            return Axis(key, tuple(range(start, stop + 1)), start, stop, True, text)
        if key in _INTEGER:
            raise SpecError(f"--vary {key}: values must be whole numbers; got {text!r}")
        return Axis(key, (), float(start), float(stop), False, text)
    step = nums[2]
    if step <= 0:
        raise SpecError(f"--vary {text!r}: step must be > 0; got {step}")
    count = int(math.floor((stop - start) / step * (1 + 1e-9) + 1e-9)) + 1
    if count > MAX_VARIANTS:
        raise SpecError(f"--vary {text!r} gives {count} values; at most {MAX_VARIANTS}")
    if whole:
        values = tuple(start + i * step for i in range(count))
    else:
        if key in _INTEGER:
            raise SpecError(f"--vary {key}: values must be whole numbers; got {text!r}")
        values = tuple(_number_text(start + i * step) for i in range(count))
    return Axis(key, values, float(start), float(values[-1]), False, text)


def parse_vary(text: str) -> Axis:
    """Parse one ``KEY=VALUES`` item (see the module docstring).

    >>> parse_vary("board.copper_um=18,35").values
    (18, 35)
    >>> parse_vary("turns=4:10:2").values
    (4, 6, 8, 10)
    """
    if not isinstance(text, str) or "=" not in text:
        raise SpecError(f"--vary takes KEY=VALUES such as turns=8:20 or width_mm=0.1,0.15; got {text!r}")
    key, _, spec = text.partition("=")
    key, spec = key.strip(), spec.strip()
    check_key(key)
    if not spec:
        raise SpecError(f"--vary {key}: no values after '='")
    if ":" in spec and "," not in spec:
        parts = spec.split(":")
        if len(parts) not in (2, 3) or not all(p.strip() for p in parts):
            raise SpecError(f"--vary {text!r}: a range is start:stop or start:stop:step")
        return _range(key, parts, text)
    items = [s for s in spec.split(",")]
    if any(not s.strip() for s in items):
        raise SpecError(f"--vary {text!r}: empty item in the list")
    values = _check_values(key, [parse_value(s) for s in items])
    return Axis(key, values, text=text)


def axis_from(key: str, values) -> Axis:
    """An axis from Python: ``values`` is a KEY=VALUES right-hand side
    string or a sequence of values."""
    if isinstance(values, str):
        return parse_vary(f"{key}={values}")
    check_key(key)
    vals = list(values) if not isinstance(values, (int, float)) else [values]
    if not vals:
        raise SpecError(f"{key}: no values to vary over")
    return Axis(key, _check_values(key, vals), text=f"{key}={vals}")


def parse_sample(text: str | None) -> tuple[str | None, int | None]:
    """``'lhs:200'`` -> ('lhs', 200); ``'random:50'``; None -> (None, None)."""
    if text is None:
        return None, None
    kind, _, n = str(text).partition(":")
    kind = kind.strip().lower()
    if kind not in ("random", "lhs"):
        raise SpecError(f"--sample must be lhs:N or random:N; got {text!r}")
    try:
        count = int(n)
    except ValueError:
        raise SpecError(f"--sample {text!r}: N must be a whole number") from None
    if not 1 <= count <= MAX_VARIANTS:
        raise SpecError(f"--sample {text!r}: N must be from 1 to {MAX_VARIANTS}")
    return kind, count


@dataclass(frozen=True)
class Space:
    """Axes and how they combine.

    Parameters
    ----------
    axes : tuple of Axis
        Different keys.
    mode : {'grid', 'zip', 'random', 'lhs'}
    samples : int or None
        Points for 'random' and 'lhs'.
    seed : int or None
        Seed for sampling (the same seed gives the same points).
    """

    axes: tuple
    mode: str = "grid"
    samples: int | None = None
    seed: int | None = None

    def __post_init__(self):
        if self.mode not in MODES:
            raise SpecError(f"space mode must be one of {', '.join(MODES)}; got {self.mode!r}")
        if not self.axes:
            raise SpecError("nothing to vary: give at least one KEY=VALUES (e.g. --vary turns=8:20)")
        keys = [a.key for a in self.axes]
        dup = sorted({k for k in keys if keys.count(k) > 1})
        if dup:
            raise SpecError(f"key(s) {dup} varied twice; give each key once")
        if self.mode in ("grid", "zip"):
            for a in self.axes:
                if not a.values:
                    raise SpecError(f"--vary {a.text!r}: a continuous range needs a step (start:stop:step) for a grid; or use --sample")
            if self.mode == "zip":
                lens = {a.key: len(a.values) for a in self.axes}
                if len(set(lens.values())) > 1:
                    raise SpecError(f"zipped keys need the same number of values; got {lens}")
            elif self.count > MAX_VARIANTS:
                raise SpecError(f"the full grid has {self.count} variants; at most {MAX_VARIANTS} (use --sample)")
        else:
            if not self.samples or self.samples < 1:
                raise SpecError(f"mode {self.mode!r} needs samples >= 1")
            if self.seed is not None and (isinstance(self.seed, bool) or not isinstance(self.seed, int) or self.seed < 0):
                raise SpecError(f"seed must be a whole number >= 0; got {self.seed!r}")

    @property
    def keys(self) -> list[str]:
        return [a.key for a in self.axes]

    @property
    def count(self) -> int:
        """Variants before duplicates are dropped."""
        if self.mode == "grid":
            return math.prod(len(a.values) for a in self.axes)
        if self.mode == "zip":
            return len(self.axes[0].values)
        return self.samples

    def __len__(self) -> int:
        return len(self.variants())

    def points(self) -> np.ndarray:
        """Unit-cube points, shape (samples, axes), for the sampling modes."""
        d = len(self.axes)
        if self.mode == "lhs":
            from scipy.stats import qmc

            return qmc.LatinHypercube(d, rng=np.random.default_rng(self.seed)).random(self.samples)
        return np.random.default_rng(self.seed).random((self.samples, d))

    def variants(self) -> list[dict]:
        """The variants as ``{key: value}`` dicts, duplicates dropped (the
        first one kept), in a stable order."""
        if self.mode == "grid":
            import itertools

            rows = [dict(zip(self.keys, combo)) for combo in itertools.product(*(a.values for a in self.axes))]
        elif self.mode == "zip":
            rows = [dict(zip(self.keys, combo)) for combo in zip(*(a.values for a in self.axes))]
        else:
            u = self.points()
            cols = [a.sample(u[:, i]) for i, a in enumerate(self.axes)]
            rows = [dict(zip(self.keys, combo)) for combo in zip(*cols)]
        out, seen = [], set()
        for r in rows:
            vid = variant_id(r)
            if vid not in seen:
                seen.add(vid)
                out.append(r)
        return out

    def to_dict(self) -> dict:
        return {"axes": [a.text for a in self.axes], "mode": self.mode, "samples": self.samples, "seed": self.seed}


def make_space(vary, *, zip: bool = False, sample: str | None = None, seed: int | None = None) -> Space:
    """Build a :class:`Space`.

    Parameters
    ----------
    vary : list of str, or dict
        ``["turns=8:20", "width_mm=0.1,0.15"]``, or ``{key: values}`` where
        values is a right-hand side string or a list.
    zip : bool
        Pair the i-th values of all axes instead of a full grid.
    sample : str or None
        ``"lhs:N"`` or ``"random:N"``: N sampled points over the axes.
    seed : int or None
        Seed for sampling.
    """
    if isinstance(vary, dict):
        axes = tuple(axis_from(k, v) for k, v in vary.items())
    elif isinstance(vary, str):
        axes = (parse_vary(vary),)
    else:
        axes = tuple(a if isinstance(a, Axis) else parse_vary(a) for a in vary)
    kind, n = parse_sample(sample)
    if kind and zip:
        raise SpecError("choose either --zip or --sample, not both")
    mode = kind or ("zip" if zip else "grid")
    return Space(axes, mode=mode, samples=n, seed=seed)


# ----------------------------------------------------------------------------
# variants: identity and application to a design
# ----------------------------------------------------------------------------


def _canonical(v):
    if isinstance(v, bool) or v is None or isinstance(v, str):
        return v
    if isinstance(v, (int, np.integer)):
        return int(v)
    if isinstance(v, (float, np.floating)):
        x = _number_text(float(v))
        return int(x) if x.is_integer() and abs(x) < 2**53 else x
    if isinstance(v, (list, tuple)):
        return [_canonical(x) for x in v]
    return str(v)


def variant_id(params: dict) -> str:
    """Stable 16-hex-digit id of a variant: a hash of its parameters
    (key order and float noise below 12 significant digits do not matter).

    >>> variant_id({"turns": 8, "width_mm": 0.15}) == variant_id({"width_mm": 0.1 + 0.05, "turns": 8.0})
    True
    """
    text = json.dumps({k: _canonical(v) for k, v in params.items()}, sort_keys=True, separators=(",", ":"))
    return hashlib.sha256(text.encode()).hexdigest()[:16]


def _board_dict(board) -> dict:
    d = {f.name: getattr(board, f.name) for f in fields(board)}
    cu = d["copper_um"]
    if isinstance(cu, tuple) and len(set(cu)) == 1:
        d["copper_um"] = cu[0]  # one value: stays valid when board.layers changes
    return d


def apply_params(design: Design, params: dict) -> Design:
    """``design`` with the variant's keys changed (validated).

    >>> from tracecoil.design import design_from_dict
    >>> d = design_from_dict({"coil": {"turns": 4}, "board": {"layers": 2}})
    >>> v = apply_params(d, {"turns": 6, "board.copper_um": 70})
    >>> v.coil.turns, v.board.copper_um
    (6, (70.0, 70.0))
    """
    coil = {k: v for k, v in params.items() if not k.startswith(BOARD_PREFIX)}
    board = {k[len(BOARD_PREFIX):]: v for k, v in params.items() if k.startswith(BOARD_PREFIX)}
    for k in params:
        check_key(k)
    out = design.with_coil(**coil) if coil else design
    if board:
        out = replace(out, board=make_board_spec({**_board_dict(out.board), **board}))
    return out


__all__ = [
    "MODES",
    "VARIABLE_KEYS",
    "Axis",
    "Space",
    "apply_params",
    "axis_from",
    "check_key",
    "make_space",
    "parse_sample",
    "parse_value",
    "parse_vary",
    "variant_id",
]
