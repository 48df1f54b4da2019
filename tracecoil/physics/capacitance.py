"""Parasitic capacitance of a coil: an energy-equivalent estimate.

The coil's self-capacitance is the single capacitor across its terminals
that stores the same electric energy as the winding does when the terminal
voltage is V:

    C_eq = 2 W / V^2 = sum over pairs of C_pair * (dV_pair / V)^2.

Voltage distribution
    The potential is taken to fall linearly with centreline length along
    the current path from terminal A (1) to terminal B (0), the common
    assumption for windings well below self-resonance (common practice).
    Parallel branches share their end potentials: node potentials come
    from the path network (:func:`tracecoil.physics.resistance.path_network`)
    with each trace weighted by its length.

Cross-section model
    The winding is sampled at about ``cuts`` points along its copper
    (:func:`cut_positions`: stratified by trace, golden-ratio spacing within
    each). At each, a cut perpendicular to the trace collects every
    roughly parallel trace (within 45 degrees) it crosses, on every layer,
    in the cluster of copper contiguous with the sampled trace (gaps up to
    ten trace widths or twice the board thickness). These strips, taken as
    infinitely long and of zero thickness at their layers' heights, form a
    2-D cross-section whose per-length partial capacitances C_kl in free
    space are solved by the method of moments
    (:func:`strips_capacitance_matrix`); the sheets sit at the dielectric
    interfaces, the copper thickness collapsed (:func:`sheet_heights_m`),
    so adjacent layers are one dielectric thickness apart. Each is scaled by an effective
    permittivity: (eps_r + 1) / 2 for two strips on the same outer layer
    (exact for zero-thickness strips on a dielectric half-space: the field
    splits evenly between air and board), eps_r otherwise. The energy per
    length of the cross-section, (1/2) sum over pairs k < l of
    eps_kl C_kl (V_k - V_l)^2, is shared equally among its k strips; each
    cut stands for a stretch ds of copper (its trace's length over the
    trace's number of cuts), so it contributes that energy times ds / k.
    Sampling by copper length makes the sum an estimate of the winding's
    energy; its scatter from the choice of cuts is about 1 % for round
    coils and up to about 10 % for polygons with few turns, whose corners
    make the cross-sections differ most. Unlike a
    nearest-neighbour model, the cross-section keeps the long-range
    coupling between the outer and inner turns, which dominates for many
    turns (for a ramp of potentials over m coplanar strips the
    nearest-neighbour sum falls as 1/m while the true energy hardly
    changes). Neighbouring strips on one layer also face each other with
    their side walls: a parallel-plate term eps_gap eps0 t / s is added to
    their pair (common practice; air in an outer layer's gaps, eps_r in an
    inner layer's), which matters when the gap is not much wider than the
    copper is thick.

Neglected: curvature, corners and ends of the winding (the cut treats the
traces as straight and parallel), solder mask, the far
side of the coil, crossings of leads at large angles, the finite thickness
of the board under outer layers (taken as a half-space for same-layer
pairs), and pads.

Expected accuracy: an estimate, typically within +-30-50 % of a measured
or field-solved self-capacitance (common practice for lumped
energy-equivalent models of planar windings); the self-resonant frequency,
which goes as C^-1/2, then within about +-15-30 %. The 2-D solver itself is
checked against the conformal-mapping result for coplanar strips
(K. C. Gupta, R. Garg, I. Bahl, P. Bhartia, *Microstrip Lines and
Slotlines*, 2nd ed., 1996; C. P. Wen, IEEE Trans. MTT 17, 1969; from
memory) in tests/test_capacitance.py.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from scipy.special import ellipkm1

from ..errors import SpecError
from .materials import EPS0
from .conductors import conductors
from .resistance import path_network, trace_step_sums

PARALLEL_COS = np.cos(np.deg2rad(45.0))  # traces within 45 degrees join a cut
MAX_GAP_OVER_WIDTH = 10.0  # a cut's cluster spans gaps up to this many widths
DEFAULT_CUTS = 48
MAX_UNKNOWNS = 240  # method-of-moments cells per cross-section, at most

# ----------------------------------------------------------------------------
# kernels (SI, arrays)
# ----------------------------------------------------------------------------


def elliptic_ratio(k, kp2=None):
    """K(k') / K(k) for modulus k, k' = sqrt(1 - k^2).

    Uses scipy's ``ellipkm1`` (which takes the complementary parameter
    p = 1 - m, m = k^2) for both integrals, so neither k -> 0 nor k -> 1
    loses digits.

    Parameters
    ----------
    k : ndarray
        Modulus in (0, 1).
    kp2 : ndarray or None
        k'^2 = 1 - k^2 if known without cancellation.

    Returns
    -------
    ndarray
        The ratio, same shape as ``k``.

    >>> round(float(elliptic_ratio(np.sqrt(0.5))), 12)
    1.0
    """
    k = np.asarray(k, dtype=float)
    kp2 = 1.0 - k * k if kp2 is None else np.asarray(kp2, dtype=float)
    return ellipkm1(k * k) / ellipkm1(kp2)


def coplanar_strips_capacitance(gap_m, width_m, eps_eff=1.0):
    """Capacitance per unit length between two coplanar strips (F/m).

    C' = eps0 * eps_eff * K(k') / K(k), k = s / (s + 2 w): two strips of
    zero thickness and width w, edge gap s (Gupta et al., *Microstrip Lines
    and Slotlines*, 2nd ed., 1996; Wen 1969; from memory). With eps_eff = 1
    this is the exact free-space result of conformal mapping.

    Parameters
    ----------
    gap_m, width_m : ndarray
        Edge-to-edge gap s and strip width w (m), broadcast together.
    eps_eff : float or ndarray
        Effective relative permittivity.

    Returns
    -------
    ndarray
        Capacitance per length (F/m).

    >>> round(float(coplanar_strips_capacitance(0.2e-3, 0.2e-3, 2.75)) * 1e12, 2)
    38.07
    """
    s = np.asarray(gap_m, dtype=float)
    w = np.asarray(width_m, dtype=float)
    k = s / (s + 2.0 * w)
    kp2 = 4.0 * w * (s + w) / (s + 2.0 * w) ** 2
    return EPS0 * np.asarray(eps_eff, dtype=float) * elliptic_ratio(k, kp2)


def parallel_plate_capacitance(area_m2, distance_m, eps_r):
    """eps0 eps_r A / d (F), no fringing.

    >>> round(float(parallel_plate_capacitance(1e-4, 1e-3, 4.5)) * 1e12, 3)
    3.984
    """
    return EPS0 * np.asarray(eps_r, dtype=float) * np.asarray(area_m2, dtype=float) / np.asarray(distance_m, dtype=float)


def _log_integral(u, h):
    """Antiderivative of ln sqrt(u^2 + h^2) with respect to u."""
    r2 = u * u + h * h
    with np.errstate(divide="ignore", invalid="ignore"):
        out = np.where(r2 > 0, 0.5 * u * np.log(np.where(r2 > 0, r2, 1.0)), 0.0) - u
        out = out + np.where(h != 0, h * np.arctan(u / np.where(h != 0, h, 1.0)), 0.0)
    return out


def strips_capacitance_matrix(x0_m, x1_m, z_m, *, cells=10):
    """Per-length capacitance matrix of parallel zero-thickness strips (2-D).

    Infinitely long strips along y, strip k spanning x0[k]..x1[k] at height
    z[k], in free space, solved by the method of moments: piecewise-constant
    charge on cells graded towards the strip edges (cosine spacing, for the
    edge singularity), collocation at cell centres, the exact integral of
    the 2-D potential ln(r) over each cell, and total charge zero (a 2-D
    system must be neutral for its potential to stay finite).

    Parameters
    ----------
    x0_m, x1_m, z_m : ndarray, shape (k,)
        Strip edges and height (m); strips must not overlap.
    cells : int
        Cells per strip. The error falls as cells^-2: about 0.5 % at 10,
        1e-4 at 60 for two coplanar strips.

    Returns
    -------
    ndarray, shape (k, k)
        Maxwell matrix M (F/m): Q = M V for strip potentials V. Symmetric,
        rows sum to zero; the partial capacitance between strips k and l is
        -M[k, l]. The stored energy per length is V^T M V / 2.

    >>> x0, x1 = np.array([-0.3e-3, 0.1e-3]), np.array([-0.1e-3, 0.3e-3])
    >>> m = strips_capacitance_matrix(x0, x1, np.zeros(2), cells=40)
    >>> round(float(-m[0, 1] / coplanar_strips_capacitance(0.2e-3, 0.2e-3)), 3)
    1.0
    """
    x0 = np.asarray(x0_m, dtype=float)
    x1 = np.asarray(x1_m, dtype=float)
    z = np.asarray(z_m, dtype=float)
    k = len(x0)
    u = 0.5 * (1.0 - np.cos(np.linspace(0.0, np.pi, cells + 1)))
    a = (x0[:, None] + (x1 - x0)[:, None] * u[None, :-1]).ravel()
    b = (x0[:, None] + (x1 - x0)[:, None] * u[None, 1:]).ravel()
    zc = np.repeat(z, cells)
    owner = np.repeat(np.arange(k), cells)
    xc = 0.5 * (a + b)
    h = zc[:, None] - zc[None, :]
    pot = -(_log_integral(xc[:, None] - a[None, :], h) - _log_integral(xc[:, None] - b[None, :], h)) / (2.0 * np.pi * EPS0)
    n = len(xc)
    sys = np.zeros((n + 1, n + 1))
    sys[:n, :n] = pot
    sys[:n, n] = 1.0  # the free reference potential of a neutral 2-D system
    sys[n, :n] = b - a
    rhs = np.zeros((n + 1, k))
    rhs[np.arange(n), owner] = 1.0
    sigma = np.linalg.solve(sys, rhs)[:n]
    m = np.zeros((k, k))
    np.add.at(m, owner, (b - a)[:, None] * sigma)
    return 0.5 * (m + m.T)


@dataclass(frozen=True)
class CapacitanceEstimate:
    """Energy-equivalent parasitic capacitance of a coil.

    Attributes
    ----------
    total_f : float
        Equivalent capacitance across the terminals (F).
    turn_to_turn_f : dict
        {layer: F} energy of pairs of strips on the same copper layer.
    layer_to_layer_f : dict
        {(upper, lower): F} energy of pairs on two different layers.
    cuts : int
        Number of cross-sections sampled.
    notes : tuple of str
        Model statements and accuracy.
    """

    total_f: float
    turn_to_turn_f: dict = field(default_factory=dict)
    layer_to_layer_f: dict = field(default_factory=dict)
    cuts: int = 0
    notes: tuple = ()


@dataclass(frozen=True)
class _Pieces:
    """The straight segments of the coil's traces (mm) with their potentials."""

    layer: np.ndarray  # (n,)
    a: np.ndarray  # (n, 2) segment start
    b: np.ndarray  # (n, 2) segment end
    width: np.ndarray  # (n,)
    va: np.ndarray  # (n,) potential at a (fraction of the terminal voltage)
    vb: np.ndarray  # (n,) potential at b
    trace: np.ndarray  # (n,) index of the trace; a trace's segments are consecutive


def trace_potentials(coil) -> dict:
    """Potential at both ends of every trace on the path, as a fraction of
    the terminal voltage (A = 1, B = 0), linear in centreline length.

    Returns
    -------
    dict
        {trace index: (v_start, v_end)}.
    """
    cond = conductors(coil)
    net = path_network(coil, cond)
    weight = np.zeros(len(net.step))
    weight[~net.is_barrel] = trace_step_sums(cond, cond.length_m)
    # Vias carry no length in this model; a tiny weight keeps the network regular.
    weight = np.maximum(weight, 1e-9 * max(float(weight.sum()), 1e-12))
    r, _, v = net.solve(weight)
    v = v / r
    out = {}
    for k in np.nonzero(~net.is_barrel)[0]:
        out[coil.path[net.step[k]].index] = (float(v[net.edge_i[k]]), float(v[net.edge_j[k]]))
    return out


def _pieces(coil) -> _Pieces:
    rows = []
    for ti, (v0, v1) in trace_potentials(coil).items():
        tr = coil.traces[ti]
        p = tr.points_mm
        seg = np.hypot(*np.diff(p, axis=0).T)
        cum = np.concatenate([[0.0], np.cumsum(seg)])
        keep = seg > 0
        if cum[-1] <= 0:
            continue
        v = v0 + (v1 - v0) * cum / cum[-1]
        n = int(keep.sum())
        rows.append((np.full(n, tr.layer), p[:-1][keep], p[1:][keep], np.full(n, tr.width_mm), v[:-1][keep], v[1:][keep], np.full(n, ti)))
    return _Pieces(*(np.concatenate(c) for c in zip(*rows)))


def sheet_heights_m(stackup) -> dict:
    """Height of each copper layer's zero-thickness sheet (m), {layer: z}.

    The copper thickness is collapsed: layer n sits at minus the sum of the
    dielectric thicknesses above it, so the sheets of two adjacent layers
    are exactly one dielectric thickness apart, as their facing copper
    surfaces are.

    >>> from tracecoil.layout import Stackup
    >>> z = sheet_heights_m(Stackup(copper_um=(35.0, 35.0, 35.0), dielectric_mm=(0.2, 1.0)))
    >>> [round(v * 1e3, 6) for v in z.values()]
    [0.0, -0.2, -1.2]
    """
    z = [0.0]
    for d in stackup.dielectric_mm:
        z.append(z[-1] - d * 1e-3)
    return {layer + 1: z[layer] for layer in range(stackup.n_layers)}


def cut_positions(cum_mm, trace, cuts: int):
    """Where to cut: stratified by trace, about ``cuts`` in all.

    Each trace gets cuts in proportion to its length and at least one, so
    short leads are never skipped nor over-weighted; within a trace the
    positions follow the golden-ratio (Weyl) sequence, which does not
    alias with the turn-by-turn periodicity of a spiral the way evenly
    spaced cuts can.

    Parameters
    ----------
    cum_mm : ndarray, shape (n + 1,)
        Cumulative copper length at the start of each piece and the end.
    trace : ndarray of int, shape (n,)
        Trace of each piece (a trace's pieces are consecutive).
    cuts : int
        Cuts wanted in all.

    Returns
    -------
    s_mm : ndarray, shape (m,)
        Positions along the cumulative length.
    ds_mm : ndarray, shape (m,)
        Copper length each cut stands for; they sum to the total length.

    >>> s, ds = cut_positions(np.array([0.0, 10.0, 40.0]), np.array([0, 1]), 4)
    >>> np.round(s, 3).tolist(), ds.tolist()
    ([5.0, 25.0, 13.541, 32.082], [10.0, 10.0, 10.0, 10.0])
    """
    golden = (np.sqrt(5.0) - 1.0) / 2.0
    total = cum_mm[-1]
    starts = np.concatenate([[0], np.nonzero(trace[1:] != trace[:-1])[0] + 1])
    ends = np.append(starts[1:], len(trace))
    s_out, ds_out = [], []
    for a, b in zip(starts, ends):
        lt = cum_mm[b] - cum_mm[a]
        n = max(1, int(round(cuts * lt / total)))
        u = (0.5 + golden * np.arange(n)) % 1.0
        s_out.append(cum_mm[a] + u * lt)
        ds_out.append(np.full(n, lt / n))
    return np.concatenate(s_out), np.concatenate(ds_out)


def capacitance(coil, *, cuts: int = DEFAULT_CUTS, cells: int = 10) -> CapacitanceEstimate:
    """Energy-equivalent parasitic capacitance across the terminals.

    See the module docstring for the cross-section model, its assumptions
    and its expected accuracy (+-30-50 %).

    Parameters
    ----------
    coil : tracecoil.layout.Coil
    cuts : int
        Cross-sections sampled along the winding (>= 4).
    cells : int
        Method-of-moments cells per strip (>= 2); fewer are used when a
        cross-section holds more than 24 strips (at most 240 cells).

    Returns
    -------
    CapacitanceEstimate
    """
    if not (isinstance(cuts, (int, np.integer)) and cuts >= 4):
        raise SpecError(f"cuts must be an integer >= 4; got {cuts!r}")
    if not (isinstance(cells, (int, np.integer)) and cells >= 2):
        raise SpecError(f"cells must be an integer >= 2; got {cells!r}")
    pc = _pieces(coil)
    st = coil.stackup
    z_m = sheet_heights_m(st)
    outer = {1, st.n_layers}
    vec = pc.b - pc.a
    length = np.hypot(vec[:, 0], vec[:, 1])
    cum = np.concatenate([[0.0], np.cumsum(length)])
    gap_floor = 2.0 * st.thickness_mm
    t2t: dict = {}
    l2l: dict = {}
    for s_mm, ds_mm in zip(*cut_positions(cum, pc.trace, cuts)):
        ds_m = ds_mm * 1e-3
        i = int(np.clip(np.searchsorted(cum, s_mm, side="right") - 1, 0, len(length) - 1))
        frac = (s_mm - cum[i]) / length[i]
        tan = vec[i] / length[i]
        strips = _cut(pc, i, pc.a[i] + frac * vec[i], tan, max(MAX_GAP_OVER_WIDTH * pc.width[i], gap_floor))
        if strips is None:
            continue
        x0, x1, layer, v = strips
        k = len(x0)
        n_cells = int(min(cells, max(2, MAX_UNKNOWNS // k)))
        m = strips_capacitance_matrix(x0 * 1e-3, x1 * 1e-3, np.array([z_m[L] for L in layer]), cells=n_cells)
        same = layer[:, None] == layer[None, :]
        eps = np.where(same & np.isin(layer, list(outer))[:, None], (st.permittivity + 1.0) / 2.0, st.permittivity)
        c = eps * -m
        # Side walls of neighbouring strips on one layer: a parallel-plate
        # term eps_gap eps0 t / s (common practice), air in an outer
        # layer's gaps, the dielectric in an inner layer's.
        for lay in np.unique(layer):
            idx = np.nonzero(layer == lay)[0]  # sorted along the cut
            if len(idx) < 2:
                continue
            p, q = idx[:-1], idx[1:]
            t_m = st.copper_um[lay - 1] * 1e-6
            eps_gap = 1.0 if lay in outer else st.permittivity
            side = eps_gap * EPS0 * t_m / ((x0[q] - x1[p]) * 1e-3)
            c[p, q] += side
            c[q, p] += side
        ka, kb = np.triu_indices(k, 1)
        # Energy per length of the cross-section, shared by its k strips;
        # this cut stands for ds of copper, so for ds / k of the winding.
        c_pair = c[ka, kb] * (v[ka] - v[kb]) ** 2 * ds_m / k
        lo, hi = np.minimum(layer[ka], layer[kb]), np.maximum(layer[ka], layer[kb])
        keys, inverse = np.unique(lo * 1000 + hi, return_inverse=True)
        for key, cp in zip(keys.tolist(), np.bincount(inverse, weights=c_pair).tolist()):
            a, b = divmod(key, 1000)
            if a == b:
                t2t[a] = t2t.get(a, 0.0) + cp
            else:
                l2l[(a, b)] = l2l.get((a, b), 0.0) + cp
    total = sum(t2t.values()) + sum(l2l.values())
    notes = (
        "capacitance: energy-equivalent estimate, potential linear along the winding, 2-D cross-sections "
        "solved by the method of moments; expected accuracy +-30-50 %",
        "eps_eff (eps_r+1)/2 for pairs on one outer layer, eps_r otherwise; copper side walls as parallel "
        "plates; solder mask, corners and winding ends ignored",
    )
    return CapacitanceEstimate(float(total), t2t, l2l, int(cuts), notes)


def _cut(pc: _Pieces, i: int, p, tan, gap_max_mm: float):
    """The cross-section through point ``p`` of piece ``i``, across its
    tangent ``tan``: strips (x0, x1, layer, potential) along the cut line
    in mm, sorted; None when the cut holds no other strip."""
    nrm = np.array([-tan[1], tan[0]])
    d = pc.b - pc.a
    seg_len = np.hypot(d[:, 0], d[:, 1])
    ap = pc.a - p
    den = nrm[0] * d[:, 1] - nrm[1] * d[:, 0]  # cross(n, d)
    parallel = np.abs(d @ tan) >= PARALLEL_COS * seg_len
    with np.errstate(divide="ignore", invalid="ignore"):
        s = (ap[:, 0] * d[:, 1] - ap[:, 1] * d[:, 0]) / den
        u = (ap[:, 0] * nrm[1] - ap[:, 1] * nrm[0]) / den
    hit = parallel & (u >= 0.0) & (u < 1.0)
    hit[i] = True
    idx = np.nonzero(hit)[0]
    s_i = np.where(idx == i, 0.0, s[idx])
    u_i = np.clip(u[idx], 0.0, 1.0)
    v = pc.va[idx] + (pc.vb[idx] - pc.va[idx]) * u_i
    half = pc.width[idx] / 2
    x0, x1, layer = s_i - half, s_i + half, pc.layer[idx]
    own = idx == i
    # Merge strips that overlap or touch on the same layer (joined traces).
    order = np.lexsort((x0, layer))
    x0, x1, layer, v, own = x0[order], x1[order], layer[order], v[order], own[order]
    keep_x0, keep_x1, keep_l, keep_v, keep_own = [], [], [], [], []
    for k in range(len(x0)):
        if keep_l and keep_l[-1] == layer[k] and x0[k] <= keep_x1[-1]:
            keep_x1[-1] = max(keep_x1[-1], x1[k])
            keep_v[-1] = 0.5 * (keep_v[-1] + v[k])
            keep_own[-1] = keep_own[-1] or own[k]
            continue
        keep_x0.append(x0[k])
        keep_x1.append(x1[k])
        keep_l.append(layer[k])
        keep_v.append(v[k])
        keep_own.append(own[k])
    x0, x1, layer, v, own = (np.array(c) for c in (keep_x0, keep_x1, keep_l, keep_v, keep_own))
    order = np.argsort(0.5 * (x0 + x1), kind="stable")
    x0, x1, layer, v, own = x0[order], x1[order], layer[order], v[order], own[order]
    k0 = int(np.nonzero(own)[0][0])
    # Keep the cluster contiguous with the sampled strip.
    hi, right = k0, x1[k0]
    while hi + 1 < len(x0) and x0[hi + 1] - right <= gap_max_mm:
        hi += 1
        right = max(right, x1[hi])
    lo, left = k0, x0[k0]
    while lo - 1 >= 0 and left - x1[lo - 1] <= gap_max_mm:
        lo -= 1
        left = min(left, x0[lo])
    if hi == lo:
        return None
    sl = slice(lo, hi + 1)
    return x0[sl], x1[sl], layer[sl], v[sl]
