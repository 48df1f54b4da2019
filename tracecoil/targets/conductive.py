"""Conductive targets: eddy currents in a metal plate and the coil's apparent impedance.

A :class:`Plate` (any polygon outline in mm, a thickness and a conductivity)
near a coil driven at frequency f carries eddy currents that lower the
coil's inductance and raise its resistance. :func:`plate_signal` returns the
apparent impedance Z = R + j omega L of the coil for every pose of the plate
along a motion, with Delta L, Delta R, dL/ds and the resonance shift of an LC
tank; with a receiver coil it also gives the receiver's EMF
(:mod:`tracecoil.targets.coupling`).

Model
-----
Thin-sheet PEEC with mesh (loop) currents, the method of partial
inductances (A. E. Ruehli, "Equivalent circuit models for
three-dimensional multiconductor systems", IEEE Trans. MTT 22(3), 1974,
from memory) applied to a conducting sheet:

* The plate outline is rasterised on a uniform grid of rectangular cells
  (cells whose centre lies inside the outline). Every cell carries a loop
  current circulating counter-clockwise seen from +z (the discrete stream
  function); every hole in the plate carries one more loop current around
  it. Sheet currents are therefore divergence-free and never leave the
  plate.
* Current flows in straight bars on the cell edges (a staggered grid):
  an edge between two plate cells is a bar one cell wide, an edge on the
  plate boundary a bar half a cell wide lying inside the plate. An edge
  carries the difference of the loop currents on its two sides.
* Bars have the thickness t_c of the current layer at the face of the
  plate that faces the coil (below). Partial inductances of parallel bars
  are exact (C. Hoer and C. Love, J. Res. NBS 69C(2), 1965, from memory;
  :func:`~tracecoil.physics.kernels.box_mutual`) up to three cells (or
  three layer thicknesses) apart and Gauss-Legendre averages of Neumann's
  formula for filaments beyond (:func:`~tracecoil.physics.kernels.
  filament_mutual`); perpendicular bars do not couple. On the uniform grid
  a bar pair's value depends only on its offset, so each value is
  computed once and looked up.
* Each bar has the resistance Z_s l / w of a sheet with the surface
  impedance (per square) of a slab of thickness t driven from one face::

      Z_s = (1 + j) / (sigma delta) coth((1 + j) t / delta)
            - j omega mu0 t_c / 3,           t_c = min(t, delta),

  delta = sqrt(2 / (omega mu0 mu_r sigma)) the skin depth. The first term
  is the exact 1-D internal impedance of a slab whose far face sees no
  tangential field (S. Ramo, J. R. Whinnery and T. Van Duzer, *Fields and
  Waves in Communication Electronics*, 3rd ed., 1994, from memory): it is
  1 / (sigma t) for a thin plate and the surface impedance
  (1 + j) / (sigma delta) of a thick one. The second term removes the
  internal inductance mu0 t_c / 3 that the bars' own finite thickness
  already carries, so that to first order in (field wavenumber / alpha_1)
  the sheet reflects a plane-wave spectrum exactly like the solid plate
  of C. V. Dodd and W. E. Deeds, J. Appl. Phys. 39, 1968: expanding their
  reflection coefficient for small alpha / alpha_1 gives
  R = -1 + 2 alpha Z_s' / (j omega mu0), Z_s' the coth term, and a
  uniform-current layer of thickness t_c with the impedance above gives
  the same to that order, whatever t_c (tests/test_conductive.py checks
  the whole model against their integral). A spectral comparison of this sheet against the
  exact plate, done while writing this module (loop radius 5 mm, heights
  0.5 to 2 mm, t from 35 um to 3 mm, f 10 kHz to 10 MHz, aluminium and
  stainless steel), gave Delta L within 0.5 % where t < delta / 2 or
  delta < h / 3, and within 5 % (Delta R within 20 %) in the worst case
  t ~ 2 delta with delta ~ h, where the field varies across the plate
  thickness on the scale of the skin depth and no local sheet impedance
  can be exact.
* The coil couples to every bar through its vector potential averaged
  over the bar (Gauss-Legendre points along, across and through it):
  m_b = <A . u> l per ampere of coil current
  (:func:`~tracecoil.physics.kernels.segment_potential`, the coil as its
  centreline filaments).

With Z_t = R + j omega L_t the plate's loop impedance matrix and m the
coil-to-loop coupling, the loops satisfy 0 = j omega m I + Z_t J and the
coil's apparent impedance is::

    Z = Z_coil + omega^2 m^T Z_t^-1 m.

For rigid motion only m changes with the pose: Z_t is LU-factorised once
(scipy.linalg.lu_factor) and every pose costs one triangular solve. When
many poses share the same height and turn (a slide at constant gap) the
coil's vector potential is sampled once on a grid at the sheet's height
and interpolated with bicubic splines (scipy RectBivariateSpline) instead
of being recomputed for every pose; the grid pitch is at most half the
coil-sheet distance and half a cell, where the spline's error is well
under 0.1 % (tests compare both routes).

Validity
--------
Quasi-static (plate much smaller than the wavelength), non-magnetic plates
(mu_r = 1; for mu_r > 1 only the skin depth is changed, the plate's
magnetisation is not modelled and a warning is issued), plate parallel to
the board (turns about z only). Accuracy is set by the cell size against
the coil-to-plate distance: cells no larger than that distance give a few
per cent (tests against Dodd & Deeds); the result's ``notes`` say when the
mesh is coarser. The coil's own Z_coil is its PEEC inductance
(:func:`tracecoil.physics.inductance.inductance`, DC current distribution)
and its closed-form AC resistance
(:func:`tracecoil.physics.resistance.ac_resistance`) unless given.
"""

from __future__ import annotations

import math
import time
import warnings
from dataclasses import dataclass, field, replace

import numpy as np
import scipy.linalg
import scipy.sparse as sp

from ..errors import GeometryError, SpecError
from ..physics import kernels
from ..physics.conductors import MM, Conductors, conductors
from ..physics.materials import CONDUCTORS, MU0

__all__ = [
    "MATERIALS",
    "Plate",
    "PlateMesh",
    "PlateModel",
    "PlateSignal",
    "plate_signal",
    "plate_from_table",
    "sheet_impedance",
    "PLATE_KEYS",
]

# Material presets: the project's conductor table (tracecoil.physics.materials,
# each entry with its source), with the spellings users type.
MATERIALS = {name: CONDUCTORS[name] for name in ("aluminium", "copper", "brass", "stainless_steel")}
_ALIASES = {"aluminum": "aluminium", "stainless": "stainless_steel", "stainless steel": "stainless_steel",
            "stainless-steel": "stainless_steel"}

DEFAULT_MAX_CELLS = 1500
NEAR_CELLS = 3  # exact Hoer & Love bars up to this many cells apart
GRID_MIN_POSES = 8  # poses sharing height and turn before the spline route pays
GRID_MAX_POINTS = 250_000  # per height level
DEFAULT_POSES = 101  # poses taken from a motion object when it does not say


def _material(name):
    key = str(name).strip().lower().replace("-", "_")
    key = _ALIASES.get(str(name).strip().lower(), key)
    if key not in MATERIALS:
        raise SpecError(f"material must be one of {sorted(MATERIALS)} (or give conductivity_s_m); got {name!r}")
    return MATERIALS[key]


def sheet_impedance(conductivity_s_m, thickness_m, freq_hz, *, mu_r=1.0):
    """Surface impedance (per square) of the plate and its current-layer thickness.

    Z_s = (1 + j)/(sigma delta) coth((1 + j) t / delta) - j omega mu0 t_c / 3
    with t_c = min(t, delta) (see the module docstring; the first term is
    the 1-D internal impedance of a slab driven from one face, Ramo,
    Whinnery & Van Duzer 1994, from memory).

    Parameters
    ----------
    conductivity_s_m : float
        sigma (S/m).
    thickness_m : float
        Plate thickness t (m).
    freq_hz : float
        Frequency (Hz), > 0.
    mu_r : float
        Relative permeability (enters the skin depth only).

    Returns
    -------
    z_ohm : complex
        Z_s (ohm per square).
    layer_m : float
        t_c = min(t, delta) (m).

    Examples
    --------
    A thin plate is its DC sheet resistance 1/(sigma t); a thick one the
    surface impedance (1 + j)/(sigma delta) less the layer term:

    >>> z, tc = sheet_impedance(3.5e7, 1e-6, 1e3)
    >>> round(z.real * 3.5e7 * 1e-6, 6)
    1.0
    >>> z, tc = sheet_impedance(3.5e7, 5e-3, 1e6)
    >>> d = math.sqrt(2 / (2 * math.pi * 1e6 * MU0 * 3.5e7))
    >>> round(z.real * 3.5e7 * d, 6), round(tc / d, 6)
    (1.0, 1.0)
    """
    sigma, t, f = float(conductivity_s_m), float(thickness_m), float(freq_hz)
    w = 2.0 * math.pi * f
    delta = math.sqrt(2.0 / (w * MU0 * mu_r * sigma))
    g = (1.0 + 1.0j) / delta
    x = g * t
    # coth(x) without overflow for thick plates
    coth = 1.0 / np.tanh(x) if abs(x) < 30 else 1.0 + 0.0j
    tc = min(t, delta)
    return complex(g / sigma * coth - 1j * w * MU0 * tc / 3.0), tc


# ----------------------------------------------------------------------------
# the target
# ----------------------------------------------------------------------------

@dataclass(frozen=True, eq=False)
class Plate:
    """A flat conducting plate parallel to the board.

    Parameters
    ----------
    outline_mm : array_like, shape (n, 2)
        Polygon vertices in the plate's own frame (mm).
    thickness_mm : float
        Plate thickness (mm), > 0.
    material : str or None
        One of :data:`MATERIALS` ('aluminium', 'copper', 'brass',
        'stainless_steel'; 'aluminum' and 'stainless steel' accepted).
        Ignored when ``conductivity_s_m`` is given.
    conductivity_s_m : float, optional
        Conductivity (S/m); overrides ``material``.
    mu_r : float
        Relative permeability (see the module docstring: only 1 is fully
        modelled).
    position_mm : (3,) float
        Where the plate's frame origin sits in the world (x, y) and the z
        of its bottom face (mm); the plate spans z .. z + thickness. Used
        when no motion is given; a motion's positions replace it.
    rotation_deg : float
        Turn of the plate about z (degrees, counter-clockwise).
    holes_mm : tuple of array_like
        Polygons of holes in the plate (mm, plate frame).
    name : str

    Examples
    --------
    >>> p = Plate([[0, 0], [10, 0], [10, 5], [0, 5]], 1.0, material="copper")
    >>> p.area_mm2, p.material_name
    (50.0, 'copper')
    """

    outline_mm: np.ndarray
    thickness_mm: float
    material: str | None = "aluminium"
    conductivity_s_m: float | None = None
    mu_r: float = 1.0
    position_mm: tuple = (0.0, 0.0, 1.0)
    rotation_deg: float = 0.0
    holes_mm: tuple = ()
    name: str = "plate"

    def __post_init__(self):
        import shapely

        pts = np.asarray(self.outline_mm, dtype=float)
        if pts.ndim != 2 or pts.shape[1] != 2 or len(pts) < 3 or not np.all(np.isfinite(pts)):
            raise SpecError(f"outline_mm must be a list of at least 3 [x, y] points in mm; got shape {pts.shape}")
        holes = tuple(np.asarray(h, dtype=float) for h in self.holes_mm)
        for k, h in enumerate(holes):
            if h.ndim != 2 or h.shape[1] != 2 or len(h) < 3:
                raise SpecError(f"holes_mm[{k}] must be a list of at least 3 [x, y] points in mm; got shape {h.shape}")
        poly = shapely.Polygon(pts, holes)
        if not poly.is_valid or poly.area <= 0:
            raise GeometryError(f"outline_mm (with holes_mm) is not a valid polygon: {shapely.is_valid_reason(poly)}")
        t = _positive("thickness_mm", self.thickness_mm)
        if self.conductivity_s_m is not None:
            _positive("conductivity_s_m", self.conductivity_s_m)
        else:
            if self.material is None:
                raise SpecError("give material (one of " + ", ".join(sorted(MATERIALS)) + ") or conductivity_s_m")
            _material(self.material)
        mu = _positive("mu_r", self.mu_r)
        if mu < 1.0:
            raise SpecError(f"mu_r must be >= 1; got {mu}")
        pos = np.asarray(self.position_mm, dtype=float).reshape(-1)
        if pos.shape != (3,) or not np.all(np.isfinite(pos)):
            raise SpecError(f"position_mm must be [x, y, z] in mm; got {self.position_mm!r}")
        rot = float(self.rotation_deg)
        if not math.isfinite(rot):
            raise SpecError(f"rotation_deg must be finite; got {self.rotation_deg!r}")
        pts.setflags(write=False)
        object.__setattr__(self, "outline_mm", pts)
        object.__setattr__(self, "holes_mm", holes)
        object.__setattr__(self, "thickness_mm", t)
        object.__setattr__(self, "mu_r", mu)
        object.__setattr__(self, "position_mm", tuple(float(v) for v in pos))
        object.__setattr__(self, "rotation_deg", rot)

    @property
    def polygon(self):
        """The outline with its holes as a shapely Polygon (mm, plate frame)."""
        import shapely

        return shapely.Polygon(self.outline_mm, self.holes_mm)

    @property
    def area_mm2(self) -> float:
        return float(self.polygon.area)

    @property
    def sigma(self) -> float:
        """Conductivity (S/m)."""
        if self.conductivity_s_m is not None:
            return float(self.conductivity_s_m)
        return _material(self.material).conductivity_s_m

    @property
    def material_name(self) -> str:
        if self.conductivity_s_m is not None:
            return f"sigma={self.conductivity_s_m:.3g} S/m"
        return _material(self.material).name

    def skin_depth_m(self, freq_hz) -> float:
        """delta = sqrt(2 / (omega mu0 mu_r sigma)) (m)."""
        return math.sqrt(2.0 / (2 * math.pi * float(freq_hz) * MU0 * self.mu_r * self.sigma))

    def placed(self, *, position_mm=None, rotation_deg=None) -> "Plate":
        """A copy at another pose."""
        return replace(self, position_mm=self.position_mm if position_mm is None else position_mm,
                       rotation_deg=self.rotation_deg if rotation_deg is None else rotation_deg)


def _positive(name, value):
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise SpecError(f"{name} must be a positive number; got {value!r}") from None
    if not (math.isfinite(v) and v > 0):
        raise SpecError(f"{name} must be a positive number; got {value!r}")
    return v


# ----------------------------------------------------------------------------
# mesh
# ----------------------------------------------------------------------------

@dataclass(frozen=True, eq=False)
class PlateMesh:
    """The staggered-grid mesh of a plate (plate frame, SI).

    Attributes
    ----------
    hx_m, hy_m : float
        Cell size (m).
    n_loops : int
        Unknown loop currents (cells, then holes).
    n_cells : int
    bx_i, bx_q : ndarray of int, shape (nbx,)
        x-directed bars: column index (bar runs from x0 + i hx to
        x0 + (i+1) hx) and lateral position in quarter cells
        (y = y0 + q hy / 4); q % 4 == 0 marks full-width bars.
    by_j, by_q : ndarray of int, shape (nby,)
        y-directed bars likewise (j along y, q across in quarters of hx).
    cx, cy : scipy.sparse.csr_matrix, shape (nbx, n_loops), (nby, n_loops)
        Bar current (+x or +y) per unit loop current.
    origin_m : (2,) float
        Grid corner (x0, y0) in the plate frame (m).
    """

    hx_m: float
    hy_m: float
    nx: int
    ny: int
    n_cells: int
    n_loops: int
    bx_i: np.ndarray
    bx_q: np.ndarray
    by_j: np.ndarray
    by_q: np.ndarray
    cx: object
    cy: object
    origin_m: np.ndarray
    cell_mask: np.ndarray

    @property
    def cell_mm(self) -> float:
        return max(self.hx_m, self.hy_m) / MM

    def bar_geometry(self):
        """Centres (plate frame, m), lengths, widths and axis of all bars.

        Returns
        -------
        centre : ndarray, shape (nb, 2)
        length, width : ndarray, shape (nb,)
        axis : ndarray of int, shape (nb,)
            0 for x bars (first nbx rows), 1 for y bars.
        """
        x0, y0 = self.origin_m
        hx, hy = self.hx_m, self.hy_m
        cx = np.column_stack([x0 + (self.bx_i + 0.5) * hx, y0 + self.bx_q * hy / 4])
        cy = np.column_stack([x0 + self.by_q * hx / 4, y0 + (self.by_j + 0.5) * hy])
        wx = np.where(self.bx_q % 4 == 0, hy, hy / 2)
        wy = np.where(self.by_q % 4 == 0, hx, hx / 2)
        centre = np.vstack([cx, cy])
        length = np.concatenate([np.full(len(cx), hx), np.full(len(cy), hy)])
        width = np.concatenate([wx, wy])
        axis = np.concatenate([np.zeros(len(cx), int), np.ones(len(cy), int)])
        return centre, length, width, axis


def mesh_plate(plate: Plate, *, cell_mm=None, max_cells=DEFAULT_MAX_CELLS) -> PlateMesh:
    """Rasterise a plate into loop cells and edge bars.

    Parameters
    ----------
    plate : Plate
    cell_mm : float, optional
        Target cell size (mm); the grid is fitted to the outline's bounding
        box, so cells are within a few per cent of it. Default: the size
        giving about ``max_cells`` cells.
    max_cells : int
        Upper bound on the number of cells (loop unknowns).

    Returns
    -------
    PlateMesh

    Examples
    --------
    >>> m = mesh_plate(Plate([[0, 0], [4, 0], [4, 2], [0, 2]], 1.0), cell_mm=1.0)
    >>> m.n_cells, len(m.bx_i), len(m.by_j)
    (8, 12, 10)
    """
    import shapely
    from scipy import ndimage

    if isinstance(max_cells, bool) or not isinstance(max_cells, (int, np.integer)) or max_cells < 1:
        raise SpecError(f"max_cells must be a positive integer; got {max_cells!r}")
    poly = plate.polygon
    xmin, ymin, xmax, ymax = poly.bounds
    w, h = xmax - xmin, ymax - ymin
    area = poly.area
    if cell_mm is None:
        cell = math.sqrt(area / max_cells)
    else:
        cell = _positive("cell_mm", cell_mm)
    nx = max(1, int(round(w / cell)))
    ny = max(1, int(round(h / cell)))
    hx, hy = w / nx, h / ny
    xc = xmin + (np.arange(nx) + 0.5) * hx
    yc = ymin + (np.arange(ny) + 0.5) * hy
    X, Y = np.meshgrid(xc, yc, indexing="ij")
    inside = shapely.contains_xy(poly, X, Y)  # (nx, ny)
    n_cells = int(inside.sum())
    if n_cells == 0:
        raise GeometryError(f"plate outline is too thin for cells of {cell:.3g} mm; give a smaller cell_mm")
    if n_cells > max_cells * 1.05 + 4:
        raise SpecError(f"cell_mm = {cell:.3g} mm gives {n_cells} cells, more than max_cells = {max_cells}; "
                        "choose a larger cell_mm or raise max_cells")
    # loop index per grid cell: plate cells, then one loop per hole
    loop = np.full((nx, ny), -1, dtype=int)
    loop[inside] = np.arange(n_cells)
    outside = np.pad(~inside, 1, constant_values=True)
    lab, nlab = ndimage.label(outside)
    border = set(np.unique(np.concatenate([lab[0], lab[-1], lab[:, 0], lab[:, -1]])).tolist())
    n_loops = n_cells
    core = lab[1:-1, 1:-1]
    for k in range(1, nlab + 1):
        if k in border:
            continue
        loop[core == k] = n_loops  # a hole: its cells share one loop current
        n_loops += 1

    # x bars on horizontal lines j = 0..ny between cell rows j-1 (below) and j (above)
    below = np.full((nx, ny + 1), -1, dtype=int)
    above = np.full((nx, ny + 1), -1, dtype=int)
    below[:, 1:] = loop
    above[:, :-1] = loop
    pin_a = np.zeros((nx, ny + 1), bool)
    pin_a[:, :-1] = inside
    pin_b = np.zeros((nx, ny + 1), bool)
    pin_b[:, 1:] = inside
    has = pin_a | pin_b
    ii, jj = np.nonzero(has)
    qx = 4 * jj + np.where(pin_a[ii, jj] & pin_b[ii, jj], 0, np.where(pin_a[ii, jj], 1, -1))
    cx = _incidence(above[ii, jj], below[ii, jj], n_loops)  # +x current = I(above) - I(below)
    # y bars on vertical lines i = 0..nx between cell columns i-1 (left) and i (right)
    left = np.full((nx + 1, ny), -1, dtype=int)
    right = np.full((nx + 1, ny), -1, dtype=int)
    left[1:, :] = loop
    right[:-1, :] = loop
    pr = np.zeros((nx + 1, ny), bool)
    pr[:-1, :] = inside
    pl = np.zeros((nx + 1, ny), bool)
    pl[1:, :] = inside
    hasy = pr | pl
    iy, jy = np.nonzero(hasy)
    qy = 4 * iy + np.where(pr[iy, jy] & pl[iy, jy], 0, np.where(pr[iy, jy], 1, -1))
    cy = _incidence(left[iy, jy], right[iy, jy], n_loops)  # +y current = I(left) - I(right)
    return PlateMesh(hx_m=hx * MM, hy_m=hy * MM, nx=nx, ny=ny, n_cells=n_cells, n_loops=n_loops,
                     bx_i=ii, bx_q=qx, by_j=jy, by_q=qy, cx=cx, cy=cy,
                     origin_m=np.array([xmin, ymin]) * MM, cell_mask=inside)


def _incidence(plus, minus, n_loops):
    """Sparse (n_bars, n_loops) matrix: +1 at loop ``plus``, -1 at ``minus`` (-1 = none)."""
    n = len(plus)
    rows = np.concatenate([np.arange(n), np.arange(n)])
    cols = np.concatenate([plus, minus])
    vals = np.concatenate([np.ones(n), -np.ones(n)])
    keep = cols >= 0
    return sp.csr_matrix((vals[keep], (rows[keep], cols[keep])), shape=(n, n_loops))


# ----------------------------------------------------------------------------
# partial inductances of the bars (tables over grid offsets)
# ----------------------------------------------------------------------------

def _bar_table(length, width, tc, n_along, n_lat):
    """Mutual partial inductance of parallel bars on the grid, by offset.

    Bars run along axis 0 with length ``length``; full bars are ``width``
    wide, half bars ``width / 2``; all have thickness ``tc`` and lie in one
    layer. Returns T with T[f1, f2, di + n_along, dq + 4 n_lat] the mutual
    inductance (H) of bar 1 (full if f1) and bar 2 (full if f2) whose
    starts differ by di lengths and centres by dq quarter widths.
    """
    di = np.arange(-n_along, n_along + 1)
    dq = np.arange(-4 * n_lat, 4 * n_lat + 1)
    T = np.full((2, 2, len(di), len(dq)), np.nan)
    DI, DQ = np.meshgrid(di, dq, indexing="ij")
    xw, ww = kernels.gauss_legendre(2)
    nt = 1 if tc <= 0.3 * min(length, width) else 3
    xt, wt = kernels.gauss_legendre(nt)
    near_cells = max(NEAR_CELLS, int(math.ceil(NEAR_CELLS * tc / min(length, width))))
    for f1 in (0, 1):
        for f2 in (0, 1):
            # which offsets occur: full bars sit at q = 0 mod 4, half bars at +-1
            r = np.mod(DQ, 4)
            if f1 and f2:
                ok = r == 0
            elif f1 or f2:
                ok = (r == 1) | (r == 3)
            else:
                ok = (r == 0) | (r == 2)
            w1 = width if f1 else width / 2
            w2 = width if f2 else width / 2
            d_along = DI[ok] * length
            d_lat = DQ[ok] * width / 4
            near = (np.abs(DI[ok]) <= near_cells) & (np.abs(d_lat) <= near_cells * width)
            vals = np.empty(int(ok.sum()))
            if np.any(near):
                n = int(near.sum())
                s1 = np.tile([length, w1, tc], (n, 1))
                s2 = np.tile([length, w2, tc], (n, 1))
                off = np.column_stack([d_along[near], d_lat[near] - w2 / 2 + w1 / 2, np.zeros(n)])
                vals[near] = kernels.box_mutual(s1, s2, off)
            far = ~near
            if np.any(far):
                vals[far] = _filament_average(d_along[far], d_lat[far], length, w1, w2, tc, xw, ww, xt, wt)
            sub = T[f1, f2]
            sub[ok] = vals
    return T


def _filament_average(d_along, d_lat, length, w1, w2, tc, xw, ww, xt, wt):
    """Gauss-Legendre average of Neumann's formula over two parallel bars (H).

    Equal parallel filaments of length l, starts s apart along them, at
    distance d: M = mu0/(4 pi) [G(s + l) - 2 G(s) + G(s - l)],
    G(u) = u asinh(u/d) - sqrt(u^2 + d^2) (Grover 1946, from memory; the
    parallel-filament form). Collinear filaments
    (d = 0, never overlapping here) use the limit G(u) = |u| ln|u| - |u|.
    Used only for bars three or more cells apart, where s/l stays below a
    few hundred and the second difference keeps about 11 digits.
    """
    oy1 = (xw - 0.5) * w1
    oy2 = (xw - 0.5) * w2
    oz = (xt - 0.5) * tc
    dy = d_lat[:, None, None] + oy2[None, None, :] - oy1[None, :, None]  # (n, a, b)
    wy = ww[:, None] * ww[None, :]
    dz = oz[None, :] - oz[:, None]  # (c, e)
    wz = wt[:, None] * wt[None, :]
    d = np.sqrt(dy[..., None, None] ** 2 + dz[None, None, None] ** 2)  # (n, a, b, c, e)
    s = d_along[:, None, None, None, None]
    tot = np.zeros_like(d)
    for u, cf in ((s + length, 1.0), (s, -2.0), (s - length, 1.0)):
        u = np.broadcast_to(u, d.shape)
        with np.errstate(divide="ignore", invalid="ignore"):
            g = np.where(d > 0, u * np.arcsinh(u / np.where(d > 0, d, 1.0)) - np.sqrt(u * u + d * d),
                         np.where(u != 0, np.abs(u) * np.log(np.abs(np.where(u != 0, u, 1.0))), 0.0) - np.abs(u))
        tot += cf * g
    return kernels.K_MU * np.einsum("nabce,ab,ce->n", tot, wy, wz)


def _loop_inductance(mesh: PlateMesh, tc, *, block=512):
    """C^T L C over x bars plus y bars: the loop partial-inductance matrix (H)."""
    out = np.zeros((mesh.n_loops, mesh.n_loops))
    for along, q, length, width, n_al, n_lat, C in (
        (mesh.bx_i, mesh.bx_q, mesh.hx_m, mesh.hy_m, mesh.nx, mesh.ny, mesh.cx),
        (mesh.by_j, mesh.by_q, mesh.hy_m, mesh.hx_m, mesh.ny, mesh.nx, mesh.cy),
    ):
        if len(along) == 0:
            continue
        T = _bar_table(length, width, tc, n_al, n_lat + 1)
        full = (q % 4 == 0).astype(int)
        n = len(along)
        Ct = C.T.tocsr()
        for r0 in range(0, n, block):
            r1 = min(r0 + block, n)
            Lb = T[full[r0:r1, None], full[None, :], along[None, :] - along[r0:r1, None] + n_al,
                   q[None, :] - q[r0:r1, None] + 4 * (n_lat + 1)]
            LbC = np.asarray((Ct @ Lb.T).T)  # (k, n_loops)
            out += np.asarray(Ct[:, r0:r1] @ LbC)
    return 0.5 * (out + out.T)


# ----------------------------------------------------------------------------
# the plate's own matrix, factorised once
# ----------------------------------------------------------------------------

class PlateModel:
    """A plate meshed and factorised at one frequency, ready for many poses.

    Parameters
    ----------
    plate : Plate
    freq_hz : float
    side : {"below", "above"}
        Which face the coil looks at: "below" (the coil is under the plate,
        the bottom face carries the current layer) or "above".
    cell_mm, max_cells :
        As in :func:`mesh_plate`.

    Attributes
    ----------
    mesh : PlateMesh
    z_layer_m : (2,) float
        Bottom and top of the current layer, relative to the plate's
        bottom face (m).
    factor_seconds : float
        Time to mesh, assemble and factorise (s).
    lu_seconds : float
        Of which the LU factorisation (s).
    """

    def __init__(self, plate: Plate, freq_hz, *, side="below", cell_mm=None, max_cells=DEFAULT_MAX_CELLS):
        if side not in ("below", "above"):
            raise SpecError(f"side must be one of ('below', 'above'); got {side!r}")
        t0 = time.perf_counter()
        self.plate = plate
        self.freq_hz = _positive("freq_hz", freq_hz)
        self.omega = 2 * math.pi * self.freq_hz
        self.side = side
        self.mesh = mesh_plate(plate, cell_mm=cell_mm, max_cells=max_cells)
        m = self.mesh
        t_m = plate.thickness_mm * MM
        zs, tc_skin = sheet_impedance(plate.sigma, t_m, self.freq_hz, mu_r=plate.mu_r)
        # a layer far thinner than a cell changes nothing to first order (the
        # -j omega mu0 tc/3 term compensates for its thickness) but costs
        # digits in the bar sums: keep it at least 2 % of a cell
        tc = max(tc_skin, min(t_m, 0.02 * min(m.hx_m, m.hy_m)))
        zs = zs + 1j * self.omega * MU0 * (tc_skin - tc) / 3.0
        self.layer_m = tc
        self.sheet_ohm = zs
        self.z_layer_m = (0.0, tc) if side == "below" else (t_m - tc, t_m)
        Lloop = _loop_inductance(m, tc)
        _, _, width, axis = m.bar_geometry()
        length = np.where(axis == 0, m.hx_m, m.hy_m)
        rbar = zs * length / width
        nbx = len(m.bx_i)
        Rloop = (m.cx.T @ sp.diags(rbar[:nbx]) @ m.cx + m.cy.T @ sp.diags(rbar[nbx:]) @ m.cy).toarray()
        self.inductance_matrix_h = Lloop
        Z = 1j * self.omega * Lloop + Rloop
        t1 = time.perf_counter()
        self._lu = scipy.linalg.lu_factor(Z, check_finite=False)
        self.lu_seconds = time.perf_counter() - t1
        self.factor_seconds = time.perf_counter() - t0
        if plate.mu_r != 1.0:
            warnings.warn(f"plate mu_r = {plate.mu_r}: the eddy-current model uses it for the skin depth only; "
                          "the plate's magnetisation is not modelled", UserWarning, stacklevel=2)

    @property
    def n_unknowns(self) -> int:
        return self.mesh.n_loops

    def solve(self, rhs):
        """Z_t^-1 rhs for rhs of shape (n_loops,) or (n_loops, k)."""
        return scipy.linalg.lu_solve(self._lu, rhs, check_finite=False)

    # ------------------------------------------------------------ coupling
    def _quadrature(self, distance_m):
        """Bar quadrature in the plate frame: points (nb, q, 3), weights (q,)."""
        m = self.mesh
        centre, length, width, axis = m.bar_geometry()
        xa, wa = kernels.gauss_legendre(2)
        xw, ww = kernels.gauss_legendre(2)
        z0, z1 = self.z_layer_m
        nt = 1 if (z1 - z0) <= 0.25 * max(distance_m, 1e-12) else 3
        xt, wt = kernels.gauss_legendre(nt)
        u = np.where(axis[:, None] == 0, np.array([1.0, 0.0]), np.array([0.0, 1.0]))
        v = np.where(axis[:, None] == 0, np.array([0.0, 1.0]), np.array([1.0, 0.0]))
        pts, wts = [], []
        for a, wa_ in zip(xa - 0.5, wa):
            for b, wb in zip(xw - 0.5, ww):
                xy = centre + a * length[:, None] * u + b * width[:, None] * v
                for c, wc in zip(xt, wt):
                    pts.append(np.column_stack([xy, np.full(len(xy), z0 + c * (z1 - z0))]))
                    wts.append(wa_ * wb * wc)
        return np.stack(pts, axis=1), np.array(wts), length, axis

    def coupling(self, source, positions_mm, rotation_deg=None, *, distance_m=None, progress=False, use_grid=None):
        """Coupling m (H) between a coil and every loop, for every pose.

        Parameters
        ----------
        source : Coil or Conductors
            The coil (placed), its terminal current flowing A to B.
        positions_mm : ndarray, shape (p, 3)
            Plate poses: frame origin (x, y) and bottom-face z (mm).
        rotation_deg : ndarray, shape (p,), optional
            Turn about z of each pose (degrees); default the plate's.
        distance_m : float, optional
            Smallest coil-to-layer distance (sets quadrature and grid pitch).
        progress : bool
            Show a tqdm bar over poses.
        use_grid : bool, optional
            Force (True) or forbid (False) the spline route; default: used
            when enough poses share a height and turn.

        Returns
        -------
        ndarray, shape (n_loops, p)
        """
        cd = source if isinstance(source, Conductors) else conductors(source)
        pos = np.asarray(positions_mm, float).reshape(-1, 3)
        p = len(pos)
        rot = np.full(p, self.plate.rotation_deg) if rotation_deg is None else np.broadcast_to(
            np.asarray(rotation_deg, float), (p,))
        if distance_m is None:
            distance_m = _layer_distance(self, cd, pos)
        qp, qw, length, axis = self._quadrature(distance_m)
        nb, nq, _ = qp.shape
        out = np.empty((self.mesh.n_loops, p))
        groups = {}
        for k in range(p):
            groups.setdefault((round(pos[k, 2], 9), round(rot[k], 9)), []).append(k)
        bar_ct = sp.vstack([self.mesh.cx, self.mesh.cy]).T.tocsr()
        it = _progress(groups.items(), progress and p > 1, "plate poses", total=len(groups))
        for (z, r), ks in it:
            a = math.radians(r)
            c, s = math.cos(a), math.sin(a)
            rotm = np.array([[c, -s], [s, c]])
            local = qp.reshape(-1, 3)
            xy_rot = local[:, :2] @ rotm.T
            ub = np.where(axis[:, None] == 0, rotm[:, 0], rotm[:, 1])  # bar axis in the world
            zz = local[:, 2] + z * MM
            grid = use_grid if use_grid is not None else len(ks) >= GRID_MIN_POSES
            interp = None
            if grid:
                interp = _potential_grid(cd, xy_rot, pos[ks, :2] * MM, np.unique(zz), distance_m, self.mesh)
            for k in ks:
                shift = pos[k, :2] * MM
                if interp is not None:
                    A = interp(xy_rot + shift, zz)
                else:
                    pts = np.column_stack([xy_rot + shift, zz])
                    A = kernels.segment_potential(pts, cd.start_m, cd.end_m, cd.fraction)[:, :2]
                A = A.reshape(nb, nq, 2)
                flux = np.einsum("bqk,q,bk->b", A, qw, ub) * length
                out[:, k] = bar_ct @ flux
        return out


def _progress(iterable, show, desc, total=None):
    if not show:
        return iterable
    from tqdm.auto import tqdm

    return tqdm(iterable, desc=desc, total=total, leave=False)


def _potential_grid(cd, xy_rot, shifts, levels, distance_m, mesh):
    """Bicubic splines of A_x, A_y of the coil on a grid per z level.

    Returns a function (xy (n, 2), z (n,)) -> A (n, 2), or None when the
    grid would be larger than GRID_MAX_POINTS per level.
    """
    from scipy.interpolate import RectBivariateSpline

    lo = xy_rot.min(axis=0) + shifts.min(axis=0)
    hi = xy_rot.max(axis=0) + shifts.max(axis=0)
    pitch = min(0.5 * distance_m, 0.5 * min(mesh.hx_m, mesh.hy_m))
    pad = 3 * pitch
    lo, hi = lo - pad, hi + pad
    nx = int(math.ceil((hi[0] - lo[0]) / pitch)) + 1
    ny = int(math.ceil((hi[1] - lo[1]) / pitch)) + 1
    if nx * ny > GRID_MAX_POINTS:
        return None
    gx = np.linspace(lo[0], hi[0], nx)
    gy = np.linspace(lo[1], hi[1], ny)
    X, Y = np.meshgrid(gx, gy, indexing="ij")
    splines = {}
    for z in levels:
        pts = np.column_stack([X.ravel(), Y.ravel(), np.full(X.size, z)])
        A = kernels.segment_potential(pts, cd.start_m, cd.end_m, cd.fraction)
        splines[float(z)] = (RectBivariateSpline(gx, gy, A[:, 0].reshape(nx, ny)),
                             RectBivariateSpline(gx, gy, A[:, 1].reshape(nx, ny)))

    def interp(xy, zz):
        out = np.empty((len(xy), 2))
        for z, (sx, sy) in splines.items():
            sel = zz == z
            out[sel, 0] = sx.ev(xy[sel, 0], xy[sel, 1])
            out[sel, 1] = sy.ev(xy[sel, 0], xy[sel, 1])
        return out

    return interp


def _coil_z_range(cd: Conductors):
    z = np.concatenate([cd.start_m[:, 2], cd.end_m[:, 2]])
    half = np.concatenate([cd.thickness_m, cd.thickness_m]) / 2
    return float((z - half).min()), float((z + half).max())


def _side(plate: Plate, cd: Conductors, positions_mm, what="coil"):
    """'below' if the coil is under the plate at every pose, 'above' if over it."""
    zlo, zhi = _coil_z_range(cd)
    bottom = positions_mm[:, 2] * MM
    top = bottom + plate.thickness_mm * MM
    if np.all(bottom >= zhi):
        return "below"
    if np.all(top <= zlo):
        return "above"
    k = int(np.argmax(~((bottom >= zhi) | (top <= zlo)))) if np.any(~((bottom >= zhi) | (top <= zlo))) else 0
    raise SpecError(
        f"target overlaps the {what}: plate z {bottom[k] / MM:.3f}..{top[k] / MM:.3f} mm at pose {k} against "
        f"{what} copper z {zlo / MM:.3f}..{zhi / MM:.3f} mm; the plate must stay entirely above or below the "
        f"{what} at every pose (position z is the plate's bottom face)")


def _layer_distance(model: PlateModel, cd: Conductors, positions_mm):
    zlo, zhi = _coil_z_range(cd)
    z0, z1 = model.z_layer_m
    bottom = positions_mm[:, 2] * MM
    if model.side == "below":
        return float(np.min(bottom + z0) - zhi)
    return float(zlo - np.max(bottom + z1))


# ----------------------------------------------------------------------------
# poses from a motion
# ----------------------------------------------------------------------------

def poses(motion, plate: Plate, *, samples=None):
    """Plate poses from a motion, an array of positions or None.

    Parameters
    ----------
    motion : None, array_like (3,) or (p, 3), or a motion object
        None: the plate's own position. An array: positions (mm) of the
        plate frame origin (x, y) with z its bottom face. A motion
        (:class:`tracecoil.targets.motion.Linear`, ``Circular``, ``Table``):
        ``samples`` poses evenly spaced in time over its duration (or along
        its path when it has no speed); the motion's position is the plate
        frame origin with z the bottom face, and its turns (about z only)
        add to the plate's ``rotation_deg``.
    samples : int, optional
        Number of poses taken from a motion object (default: the motion's
        own ``samples``, else :data:`DEFAULT_POSES`).

    Returns
    -------
    position_mm : ndarray, shape (p, 3)
    rotation_deg : ndarray, shape (p,)
    time_s : ndarray, shape (p,) or None
    """
    time_s = None
    turns = None
    if motion is None:
        pos = np.array([plate.position_mm], float)
    elif isinstance(motion, (list, tuple, np.ndarray)):
        pos = np.asarray(motion, float)
        if pos.ndim == 1:
            pos = pos.reshape(1, -1)
    elif hasattr(motion, "path") and hasattr(motion, "poses"):
        n = samples if samples is not None else (getattr(motion, "samples", None) or DEFAULT_POSES)
        if isinstance(n, bool) or not isinstance(n, (int, np.integer)) or n < 1:
            raise SpecError(f"samples must be a positive integer; got {n!r}")
        duration = getattr(motion, "duration_s", None)
        if duration is not None:
            time_s = np.linspace(0.0, float(duration), int(n))
            pos, turns = motion.poses(time_s)
        else:
            pos, turns = motion.path(int(n))
        pos = np.asarray(pos, float)
    else:
        raise SpecError(f"motion must be positions (mm), a Linear, Circular or Table motion, or None; "
                        f"got {type(motion).__name__}")
    if pos.ndim != 2 or pos.shape[1] != 3 or len(pos) == 0 or not np.all(np.isfinite(pos)):
        raise SpecError(f"positions must have shape (p, 3) in mm and be finite; got shape {pos.shape}")
    rot = np.full(len(pos), plate.rotation_deg)
    if turns is not None:
        R = np.asarray(turns, float)
        if not np.allclose(R[:, 2, :], [0.0, 0.0, 1.0], atol=1e-9):
            raise SpecError("a plate may only turn about the z axis (it stays parallel to the board); "
                            "use a motion whose axis is z or rotate_target = false")
        rot = rot + np.degrees(np.arctan2(R[:, 1, 0], R[:, 0, 0]))
    return pos, rot, time_s


# ----------------------------------------------------------------------------
# result and the main entry point
# ----------------------------------------------------------------------------

@dataclass(frozen=True, eq=False)
class PlateSignal:
    """Apparent impedance of a coil against a conducting plate along a motion.

    Arrays have one entry per pose (shape (p,) or (p, 3)).

    Attributes
    ----------
    position_mm : (p, 3)
        Plate poses (frame origin x, y; bottom face z).
    path_mm : (p,)
        Distance travelled along the poses (mm).
    inductance_h, resistance_ohm : (p,)
        Apparent L = Im Z / omega and R = Re Z of the coil (H, ohm).
    delta_l_h, delta_r_ohm : (p,)
        Change from the coil without the plate.
    dl_ds_h_per_mm : (p,)
        Sensitivity dL/ds along the path (H/mm); NaN for a single pose.
    free_inductance_h, free_resistance_ohm : float
        The coil alone (same frequency).
    freq_hz : float
    resonance_hz, frequency_shift_hz : (p,) or None
        With a tank capacitor C: 1/(2 pi sqrt(L C)) and its change from the
        coil alone.
    receiver : ReceiverSignal or None
        See :mod:`tracecoil.targets.coupling`.
    time_s : (p,) or None
    """

    position_mm: np.ndarray
    path_mm: np.ndarray
    inductance_h: np.ndarray
    resistance_ohm: np.ndarray
    delta_l_h: np.ndarray
    delta_r_ohm: np.ndarray
    dl_ds_h_per_mm: np.ndarray
    free_inductance_h: float
    free_resistance_ohm: float
    freq_hz: float
    tank_capacitance_f: float | None = None
    resonance_hz: np.ndarray | None = None
    frequency_shift_hz: np.ndarray | None = None
    receiver: object = None
    time_s: np.ndarray | None = None
    rotation_deg: np.ndarray | None = None
    unknowns: int = 0
    cell_mm: float = 0.0
    skin_depth_mm: float = 0.0
    factor_seconds: float = 0.0
    solve_seconds: float = 0.0
    notes: tuple = field(default=())
    name: str = "coil"
    target: dict = field(default_factory=dict)

    def columns(self) -> dict:
        """Per-pose columns for a CSV table (name -> (p,) array)."""
        cols = {}
        if self.time_s is not None:
            cols["time_s"] = self.time_s
        cols.update({"x_mm": self.position_mm[:, 0], "y_mm": self.position_mm[:, 1], "z_mm": self.position_mm[:, 2],
                     "rotation_deg": self.rotation_deg, "path_mm": self.path_mm, "inductance_h": self.inductance_h,
                     "resistance_ohm": self.resistance_ohm, "delta_l_h": self.delta_l_h,
                     "delta_r_ohm": self.delta_r_ohm, "dl_ds_h_per_mm": self.dl_ds_h_per_mm})
        if self.resonance_hz is not None:
            cols["resonance_hz"] = self.resonance_hz
            cols["frequency_shift_hz"] = self.frequency_shift_hz
        if self.receiver is not None:
            cols.update(self.receiver.columns())
        return cols

    def summary(self) -> dict:
        """Scalar results (JSON-ready)."""
        k = int(np.argmax(np.abs(self.delta_l_h)))
        d = {
            "name": self.name,
            "samples": int(len(self.position_mm)),
            "freq_hz": self.freq_hz,
            "free_inductance_h": self.free_inductance_h,
            "free_resistance_ohm": self.free_resistance_ohm,
            "max_abs_delta_l_h": float(self.delta_l_h[k]),
            "delta_r_ohm_there": float(self.delta_r_ohm[k]),
            "position_mm_there": self.position_mm[k].tolist(),
            "max_abs_dl_ds_h_per_mm": (None if np.all(np.isnan(self.dl_ds_h_per_mm))
                                       else float(np.nanmax(np.abs(self.dl_ds_h_per_mm)))),
            "skin_depth_mm": self.skin_depth_mm,
            "mesh": {"unknowns": self.unknowns, "cell_mm": self.cell_mm, "factor_s": self.factor_seconds,
                     "solve_s": self.solve_seconds},
            "target": self.target,
            "notes": list(self.notes),
        }
        if self.resonance_hz is not None:
            d["tank_capacitance_f"] = self.tank_capacitance_f
            d["max_abs_frequency_shift_hz"] = float(self.frequency_shift_hz[np.argmax(np.abs(self.frequency_shift_hz))])
        if self.receiver is not None:
            d["receiver"] = {"tx_current_a": self.receiver.tx_current_a,
                             "free_emf_v": abs(self.receiver.free_emf_v),
                             "min_emf_v": float(self.receiver.emf_amplitude_v.min()),
                             "max_emf_v": float(self.receiver.emf_amplitude_v.max())}
        return d

    def to_dict(self) -> dict:
        """Scalars and the per-pose arrays (JSON-ready)."""
        d = self.summary()
        d.update({k: [None if not math.isfinite(x) else x for x in np.asarray(v, float).tolist()]
                  for k, v in self.columns().items()})
        d["position_mm"] = self.position_mm.tolist()
        d["frequency_shift_hz"] = None if self.frequency_shift_hz is None else self.frequency_shift_hz.tolist()
        return d

    def summary_lines(self) -> list[str]:
        """Plain-text report of the key numbers."""
        t = self.target
        k = int(np.argmax(np.abs(self.delta_l_h)))
        lines = [
            f"{self.name}: {t.get('material', '')} plate {t.get('thickness_mm', 0):.3g} mm thick at "
            f"{self.freq_hz:.4g} Hz (skin depth {self.skin_depth_mm:.3g} mm), {len(self.position_mm)} poses",
            f"  coil alone: L {self.free_inductance_h * 1e9:.5g} nH, R {self.free_resistance_ohm * 1e3:.4g} mOhm",
            f"  largest change at {np.round(self.position_mm[k], 3).tolist()} mm: dL {self.delta_l_h[k] * 1e9:+.4g} nH "
            f"({self.delta_l_h[k] / self.free_inductance_h * 100:+.3g} %), dR {self.delta_r_ohm[k] * 1e3:+.4g} mOhm",
        ]
        if not np.all(np.isnan(self.dl_ds_h_per_mm)):
            lines.append(f"  steepest dL/ds {np.nanmax(np.abs(self.dl_ds_h_per_mm)) * 1e9:.4g} nH/mm")
        if self.resonance_hz is not None:
            j = int(np.argmax(np.abs(self.frequency_shift_hz)))
            lines.append(f"  tank {self.tank_capacitance_f * 1e12:.4g} pF: resonance shift up to "
                         f"{self.frequency_shift_hz[j]:+.5g} Hz")
        if self.receiver is not None:
            rx = self.receiver
            lines.append(f"  receiver EMF (tx {rx.tx_current_a:g} A peak): {rx.emf_amplitude_v.min() * 1e3:.4g} to "
                         f"{rx.emf_amplitude_v.max() * 1e3:.4g} mV peak, without target {abs(rx.free_emf_v) * 1e3:.4g} mV")
            from .signal import CAUTION_EMF_V

            if rx.emf_amplitude_v.max() > CAUTION_EMF_V:
                lines.append(f"  caution: the receiver EMF exceeds {CAUTION_EMF_V:g} V; treat its terminals as "
                             "hazardous and follow local electrical-safety codes and licensed practice")
        lines.append(f"  mesh: {self.unknowns} loop currents, cells {self.cell_mm:.3g} mm; "
                     f"factorised in {self.factor_seconds:.2g} s, poses in {self.solve_seconds:.2g} s")
        lines += [f"  note: {n}" for n in self.notes]
        return lines

    def _csv_text(self) -> str:
        import csv
        import io

        cols = self.columns()
        buf = io.StringIO()
        w = csv.writer(buf, lineterminator="\n")
        w.writerow(list(cols))
        for row in zip(*cols.values()):
            w.writerow([format(float(v), ".10g") for v in row])
        return buf.getvalue()

    # The file writers are the magnet signal's (they only call name, to_dict,
    # _csv_text and _plot), so both kinds of result write files the same way.
    def write_csv(self, path):
        """Write the per-pose table as CSV (atomic)."""
        from .signal import MagnetSignal

        return MagnetSignal.write_csv(self, path)

    def write_json(self, path):
        """Write :meth:`to_dict` as JSON (atomic)."""
        from .signal import MagnetSignal

        return MagnetSignal.write_json(self, path)

    def _plot(self, path, *, title: str = "") -> None:
        from matplotlib.figure import Figure

        x = self.time_s * 1e3 if self.time_s is not None else self.path_mm
        xlabel = "time (ms)" if self.time_s is not None else "path (mm)"
        rows = 3 if self.receiver is not None else 2
        fig = Figure(figsize=(7.5, 2.6 * rows + 0.6), dpi=120)
        axes = fig.subplots(rows, 1, sharex=True)
        axes[0].plot(x, self.delta_l_h * 1e9, label="dL (nH)")
        axes[0].plot(x, self.delta_r_ohm * 1e3, "--", label="dR (mOhm)")
        axes[0].axhline(0.0, color="0.5", lw=0.6)
        axes[0].set_ylabel("change")
        if self.frequency_shift_hz is not None:
            ax2 = axes[0].twinx()
            ax2.plot(x, self.frequency_shift_hz / 1e3, ":", color="C3", label="tank shift (kHz)")
            ax2.set_ylabel("tank shift (kHz)")
        if self.receiver is not None:
            ax = axes[1]
            ax.plot(x, self.receiver.emf_amplitude_v * 1e3, label="receiver EMF (mV peak)")
            ax.set_ylabel("EMF (mV)")
            axp = ax.twinx()
            axp.plot(x, self.receiver.emf_phase_deg, ":", color="C2", label="phase (deg)")
            axp.set_ylabel("phase (deg)")
        for k, lab in enumerate("xyz"):
            axes[-1].plot(x, self.position_mm[:, k], label=lab)
        axes[-1].set_ylabel("plate position (mm)")
        axes[-1].set_xlabel(xlabel)
        for ax in axes:
            ax.grid(True, alpha=0.3)
            ax.legend(fontsize=7, loc="best")
        fig.suptitle(title or f"{self.name}: {self.target.get('material', '')} plate at {self.freq_hz:.4g} Hz",
                     fontsize=10)
        fig.tight_layout()
        fig.savefig(path, format="png")

    def plot(self, path, *, title: str = ""):
        """PNG (atomic): Delta L, Delta R (tank shift, receiver EMF) and position."""
        from .signal import MagnetSignal

        return MagnetSignal.plot(self, path, title=title)

    def write(self, out_dir, stem: str | None = None) -> dict:
        """Write CSV, JSON and PNG together (all or none); return their paths."""
        from .signal import MagnetSignal

        return MagnetSignal.write(self, out_dir, stem)


def plate_signal(coil, plate: Plate, motion=None, *, freq_hz=None, tank_capacitance_f=None, receiver=None,
                 tx_current_a=1.0, cell_mm=None, max_cells=DEFAULT_MAX_CELLS, coil_inductance_h=None,
                 coil_resistance_ohm=None, samples=None, load_ohm=None, progress=None, use_grid=None,
                 name=None) -> PlateSignal:
    """Apparent inductance and resistance of a coil as a plate moves near it.

    Parameters
    ----------
    coil : Coil
        The coil (placed), driven at its terminals.
    plate : Plate
    motion : None, array_like (p, 3), or a motion object
        Plate poses; see :func:`poses`.
    freq_hz : float, optional
        Drive frequency (Hz). Default: the tank's resonance with the coil
        alone when ``tank_capacitance_f`` is given (required otherwise).
    tank_capacitance_f : float, optional
        Tank capacitor (F) for the resonance shift.
    receiver : Coil, optional
        A second coil (placed): its open-circuit EMF with ``coil`` as the
        transmitter carrying ``tx_current_a`` (peak, A).
    tx_current_a : float
        Transmitter current amplitude (A, peak); EMFs scale with it.
    cell_mm, max_cells :
        Plate mesh (:func:`mesh_plate`).
    coil_inductance_h, coil_resistance_ohm : float, optional
        The coil's own L and R at ``freq_hz``; computed when not given.
    samples : int, optional
        Poses taken from a motion object (see :func:`poses`).
    load_ohm : None
        Not used for conductive targets (a load belongs to a magnet's EMF);
        an error when given.
    progress : bool, optional
        tqdm progress bar over poses (default: on for more than 50 poses).
    use_grid : bool, optional
        See :meth:`PlateModel.coupling`.
    name : str, optional
        Name for reports (default: the coil's name).

    Returns
    -------
    PlateSignal

    Examples
    --------
    A 10 mm loop under a copper plate 1 mm above it at 1 MHz loses
    inductance:

    >>> from tracecoil.layout import Coil, Stackup, Step, Trace
    >>> t = np.linspace(0, 2 * np.pi, 65)
    >>> ring = Trace(1, 5 * np.column_stack([np.cos(t), np.sin(t)]), 0.2)
    >>> c = Coil(Stackup((35.0,), ()), (ring,), (), (), (Step("trace", 0),))
    >>> sq = [[-8, -8], [8, -8], [8, 8], [-8, 8]]
    >>> r = plate_signal(c, Plate(sq, 0.5, material="copper"), [[0, 0, 1.0], [0, 0, 3.0]],
    ...                  freq_hz=1e6, max_cells=300)
    >>> bool(r.delta_l_h[0] < r.delta_l_h[1] < 0)
    True
    """
    t0 = time.perf_counter()
    if not isinstance(plate, Plate):
        raise SpecError(f"plate must be a Plate; got {type(plate).__name__}")
    if load_ohm is not None:
        raise SpecError("load_ohm applies to a magnet's EMF; a conductive target gives the coil's impedance "
                        "(leave load_ohm out)")
    cd = coil if isinstance(coil, Conductors) else conductors(coil)
    pos, rot, time_s = poses(motion, plate, samples=samples)
    side = _side(plate, cd, pos)
    if receiver is not None:
        cd_rx = receiver if isinstance(receiver, Conductors) else conductors(receiver)
        if _side(plate, cd_rx, pos, what="receiver") != side:
            raise SpecError("the transmitter and the receiver must be on the same side of the plate")
    if tank_capacitance_f is not None:
        tank_capacitance_f = _positive("tank_capacitance_f", tank_capacitance_f)
    L0 = coil_inductance_h
    if L0 is None:
        from ..physics.inductance import inductance

        L0 = inductance(coil).inductance_h
    L0 = _positive("coil_inductance_h", L0)
    if freq_hz is None:
        if tank_capacitance_f is None:
            raise SpecError("freq_hz is required (Hz) unless tank_capacitance_f is given")
        freq_hz = 1.0 / (2 * math.pi * math.sqrt(L0 * tank_capacitance_f))
    freq_hz = _positive("freq_hz", freq_hz)
    R0 = coil_resistance_ohm
    if R0 is None:
        from ..physics.resistance import ac_resistance

        R0 = ac_resistance(coil, freq_hz)
    R0 = float(R0)
    model = PlateModel(plate, freq_hz, side=side, cell_mm=cell_mm, max_cells=max_cells)
    w = model.omega
    show = progress if progress is not None else len(pos) > 50
    dist = _layer_distance(model, cd, pos)
    m = model.coupling(cd, pos, rot, distance_m=dist, progress=show, use_grid=use_grid)
    x = model.solve(m.astype(complex))
    dZ = w * w * np.einsum("lp,lp->p", m, x)
    L = L0 + dZ.imag / w
    R = R0 + dZ.real
    path = np.concatenate([[0.0], np.cumsum(np.linalg.norm(np.diff(pos, axis=0), axis=1))])
    if len(pos) > 1 and np.all(np.diff(path) > 0):
        dlds = np.gradient(L, path)
    else:
        dlds = np.full(len(pos), np.nan)
    res = shift = None
    if tank_capacitance_f is not None:
        res = 1.0 / (2 * math.pi * np.sqrt(L * tank_capacitance_f))
        shift = res - 1.0 / (2 * math.pi * math.sqrt(L0 * tank_capacitance_f))
    rx = None
    if receiver is not None:
        from .coupling import receiver_response

        rx = receiver_response(coil, receiver, model, pos, rot, m_tx=m, x_tx=x, tx_current_a=tx_current_a,
                               distance_m=dist, use_grid=use_grid, progress=show)
    notes = []
    if model.mesh.cell_mm * MM > 1.0 * dist:
        notes.append(f"plate cells of {model.mesh.cell_mm:.3g} mm are larger than the closest coil-to-plate "
                     f"distance {dist / MM:.3g} mm: expect errors of several per cent; give a smaller cell_mm")
    return PlateSignal(
        position_mm=pos, path_mm=path, inductance_h=L, resistance_ohm=R, delta_l_h=L - L0, delta_r_ohm=R - R0,
        dl_ds_h_per_mm=dlds, free_inductance_h=float(L0), free_resistance_ohm=R0, freq_hz=freq_hz,
        tank_capacitance_f=tank_capacitance_f, resonance_hz=res, frequency_shift_hz=shift, receiver=rx,
        time_s=time_s, rotation_deg=rot, unknowns=model.n_unknowns, cell_mm=model.mesh.cell_mm,
        skin_depth_mm=plate.skin_depth_m(freq_hz) / MM, factor_seconds=model.factor_seconds,
        solve_seconds=time.perf_counter() - t0 - model.factor_seconds, notes=tuple(notes),
        name=name or getattr(coil, "name", "coil"), target=_describe(plate, model))


def _describe(plate: Plate, model: PlateModel) -> dict:
    return {"kind": "plate", "material": plate.material_name, "conductivity_s_m": plate.sigma,
            "thickness_mm": plate.thickness_mm, "area_mm2": plate.area_mm2, "mu_r": plate.mu_r,
            "layer_mm": model.layer_m / MM, "sheet_ohm": [model.sheet_ohm.real, model.sheet_ohm.imag]}


# ----------------------------------------------------------------------------
# design-file table
# ----------------------------------------------------------------------------

PLATE_KEYS = ("kind", "outline_mm", "thickness_mm", "material", "conductivity_s_m", "mu_r", "holes_mm",
              "position_mm", "rotation_deg", "frequency_hz", "tank_capacitance_f", "cell_mm", "max_cells", "name")


def plate_from_table(table: dict):
    """A :class:`Plate` and its solver options from a design file's ``[target]`` table.

    Keys (kind = "plate"): outline_mm (list of [x, y]), thickness_mm,
    material or conductivity_s_m, optional mu_r, holes_mm, position_mm,
    rotation_deg, name; solver options frequency_hz, tank_capacitance_f,
    cell_mm, max_cells. Lengths accept unit strings ("0.5 mm", "20 mil").

    Returns
    -------
    plate : Plate
    options : dict
        Keyword arguments for :func:`plate_signal` (freq_hz,
        tank_capacitance_f, cell_mm, max_cells) that the table gives.

    Examples
    --------
    >>> p, opt = plate_from_table({"kind": "plate", "outline_mm": [[0, 0], [5, 0], [5, 5]],
    ...                            "thickness_mm": "0.5 mm", "material": "brass", "frequency_hz": 2e6})
    >>> p.thickness_mm, p.material_name, opt
    (0.5, 'brass', {'freq_hz': 2000000.0})
    """
    from ..errors import unknown_key_message
    from ..units import to_mm

    if not isinstance(table, dict):
        raise SpecError(f"[target] must be a table; got {type(table).__name__}")
    for k in table:
        if k not in PLATE_KEYS:
            raise SpecError(unknown_key_message("target", k, PLATE_KEYS))
    if table.get("kind", "plate") != "plate":
        raise SpecError(f"target.kind must be 'plate' here; got {table.get('kind')!r}")
    for need in ("outline_mm", "thickness_mm"):
        if need not in table:
            raise SpecError(f"[target] kind = 'plate' needs {need}")

    def pts(v, name):
        try:
            return [[to_mm(x, name), to_mm(y, name)] for x, y in v]
        except (TypeError, ValueError) as e:
            raise SpecError(f"target.{name} must be a list of [x, y] points in mm ({e})") from None

    kw = {"outline_mm": pts(table["outline_mm"], "outline_mm"),
          "thickness_mm": to_mm(table["thickness_mm"], "thickness_mm")}
    if "holes_mm" in table:
        kw["holes_mm"] = tuple(pts(h, "holes_mm") for h in table["holes_mm"])
    if "position_mm" in table:
        kw["position_mm"] = tuple(to_mm(v, "position_mm") for v in table["position_mm"])
    for k in ("material", "conductivity_s_m", "mu_r", "rotation_deg", "name"):
        if k in table:
            kw[k] = table[k]
    if "conductivity_s_m" in table and "material" not in table:
        kw["material"] = None
    plate = Plate(**kw)
    opts = {}
    if "frequency_hz" in table:
        opts["freq_hz"] = _positive("target.frequency_hz", table["frequency_hz"])
    if "tank_capacitance_f" in table:
        opts["tank_capacitance_f"] = _positive("target.tank_capacitance_f", table["tank_capacitance_f"])
    if "cell_mm" in table:
        opts["cell_mm"] = to_mm(table["cell_mm"], "cell_mm")
    if "max_cells" in table:
        opts["max_cells"] = table["max_cells"]
    return plate, opts
