"""Resistance of a coil: DC with temperature, skin depth, closed-form AC.

Kernels (plain arrays, SI units) come first; the coil-level functions below
them read the :class:`~tracecoil.layout.Coil` (millimetres) and convert to SI
in one place, :func:`path_elements`.

Models
------
DC, trace segment
    R = rho * l / (w * t), l the centreline length. At a sharp 90 degree
    corner the centreline rule counts the corner square as one square where
    the true value is about 0.56 squares (common practice), so square
    spirals with narrow traces come out slightly high (well under 1 % for
    traces longer than a few widths per side).
DC, via barrel
    A plated annulus of outer diameter ``drill`` and wall ``plating``:
    R = rho * l / (pi * p * (d - p)), l the distance between the copper
    mid-planes it joins. Pads and solder are ignored.
Skin depth
    delta = sqrt(rho / (pi f mu0 mu_r)) (J. D. Jackson, *Classical
    Electrodynamics*, 3rd ed., 1999, sec. 5.18, from memory).
AC, closed form (``ac_resistance``)
    Current density decaying as exp(-x / delta) inward from every face of
    the rectangular section gives, across a thickness t fed from both faces,
    an effective thickness t_eff = 2 delta (1 - exp(-t / (2 delta))); the
    one-sided form delta (1 - exp(-t / delta)) is the one used by C. P. Yue
    and S. S. Wong, "Physical modeling of spiral inductors on silicon",
    IEEE Trans. Electron Devices 47(3), 2000 (from memory). Applying it to
    both width and thickness, A_eff = w t - (w - w_eff)(t - t_eff): this
    tends to w t at low frequency and to about delta times the perimeter at
    high frequency, with a smooth transition (the two-direction extension is
    common practice). It ignores current crowding at the strip edges and
    the proximity effect of neighbouring turns, so in a dense winding it
    *underestimates* R(f) once delta is smaller than the trace width
    (typically by 20 % to a factor of 2 or more); the filament model of
    ``tracecoil.physics.inductance.impedance`` includes both and is
    preferred where available. Treat this closed form as a lower bound and a
    cross-check.

Combining the path
------------------
DC resistance is solved as a resistor network (Kirchhoff): nodes are the
ends of the path's traces and the pads of its vias, joined where a trace
end lies on a via pad of the same layer or on another trace end. This is
exact for parallel branches of unequal resistance. The power-weighted sum
over the path, R = sum_i f_i^2 R_i with ``Step.fraction`` f_i, equals it
when the branch currents split as the fractions state (series coils and
identical parallel layers) and is otherwise an upper bound (Thomson's
theorem: the DC current distribution minimises dissipation). The closed
AC estimate uses the power-weighted sum, since at frequency the split
between tightly coupled parallel layers is set by their inductance.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..errors import GeometryError, SpecError
from .materials import MU0, copper_resistivity

RESISTANCE_METHODS = ("network", "path")

# ----------------------------------------------------------------------------
# kernels (SI, arrays)
# ----------------------------------------------------------------------------


def skin_depth(resistivity_ohm_m, freq_hz, mu_r=1.0):
    """Skin depth delta = sqrt(rho / (pi f mu0 mu_r)) (m).

    Parameters
    ----------
    resistivity_ohm_m : float or ndarray
        Resistivity (ohm m).
    freq_hz : float or ndarray
        Frequency (Hz), broadcast with ``resistivity_ohm_m``. At 0 Hz the
        skin depth is infinite (``inf``).
    mu_r : float or ndarray
        Relative permeability.

    Returns
    -------
    ndarray
        Skin depth (m), broadcast shape.

    >>> round(float(skin_depth(1.7241e-8, 1e6)) * 1e6, 1)
    66.1
    """
    rho = np.asarray(resistivity_ohm_m, dtype=float)
    f = np.asarray(freq_hz, dtype=float)
    with np.errstate(divide="ignore"):
        return np.sqrt(rho / (np.pi * f * MU0 * np.asarray(mu_r, dtype=float)))


def effective_thickness(thickness_m, skin_depth_m):
    """Thickness carrying the current of a slab fed from both faces (m).

    t_eff = 2 delta (1 - exp(-t / (2 delta))): tends to t when delta >> t
    and to 2 delta when delta << t. ``skin_depth_m`` may be ``inf`` (DC).

    Parameters
    ----------
    thickness_m, skin_depth_m : ndarray
        Broadcast together (m).

    Returns
    -------
    ndarray
        Effective thickness (m).

    >>> round(float(effective_thickness(35e-6, np.inf)) * 1e6, 6)
    35.0
    """
    t = np.asarray(thickness_m, dtype=float)
    d = np.asarray(skin_depth_m, dtype=float)
    x = t / (2.0 * d)
    # -expm1(-x) = 1 - exp(-x) without cancellation; x / x-limit at x -> 0.
    with np.errstate(invalid="ignore", divide="ignore"):
        out = np.where(x > 1e-12, 2.0 * d * -np.expm1(-x), t)
    return out


def strip_resistance(length_m, width_m, thickness_m, resistivity_ohm_m, freq_hz=0.0):
    """Resistance of straight rectangular strips, DC or closed-form AC (ohm).

    DC: rho l / (w t). AC: rho l / A_eff with A_eff = w t - (w - w_eff)(t -
    t_eff), the effective widths from :func:`effective_thickness` (see the
    module docstring for the model and its limits).

    Parameters
    ----------
    length_m, width_m, thickness_m : ndarray, shape (n,)
        Strip length, width and thickness (m).
    resistivity_ohm_m : float or ndarray
        Resistivity (ohm m).
    freq_hz : float
        Frequency (Hz); 0 for DC.

    Returns
    -------
    ndarray, shape (n,)
        Resistance (ohm).

    >>> round(float(strip_resistance(0.1, 1e-3, 35e-6, 1.7241e-8)), 5)
    0.04926
    """
    w = np.asarray(width_m, dtype=float)
    t = np.asarray(thickness_m, dtype=float)
    rho = np.asarray(resistivity_ohm_m, dtype=float)
    area = w * t
    if freq_hz > 0:
        d = skin_depth(rho, freq_hz)
        area = area - (w - effective_thickness(w, d)) * (t - effective_thickness(t, d))
    return rho * np.asarray(length_m, dtype=float) / area


def barrel_resistance(length_m, drill_m, plating_m, resistivity_ohm_m, freq_hz=0.0):
    """Resistance of plated via barrels (ohm).

    An annulus of outer diameter ``drill_m`` and wall ``plating_m``:
    R = rho l / (pi p_eff (d - p)), with p_eff = p at DC and the
    effective wall of :func:`effective_thickness` at frequency.

    Parameters
    ----------
    length_m, drill_m, plating_m : ndarray, shape (n,)
        Barrel length, drilled diameter and plating thickness (m).
    resistivity_ohm_m : float or ndarray
        Resistivity (ohm m).
    freq_hz : float
        Frequency (Hz); 0 for DC.

    Returns
    -------
    ndarray, shape (n,)
        Resistance (ohm).

    >>> round(float(barrel_resistance(1.6e-3, 0.3e-3, 25e-6, 1.7241e-8)) * 1e3, 3)
    1.28
    """
    d = np.asarray(drill_m, dtype=float)
    p = np.asarray(plating_m, dtype=float)
    rho = np.asarray(resistivity_ohm_m, dtype=float)
    p_eff = p if freq_hz <= 0 else effective_thickness(p, skin_depth(rho, freq_hz))
    return rho * np.asarray(length_m, dtype=float) / (np.pi * p_eff * (d - p))


def network_resistance(n_nodes, node_a, node_b, edge_i, edge_j, edge_ohm):
    """Resistance between two nodes of a resistor network (Kirchhoff).

    Parameters
    ----------
    n_nodes : int
        Number of nodes.
    node_a, node_b : int
        The two terminals.
    edge_i, edge_j : ndarray of int, shape (m,)
        Ends of each resistor.
    edge_ohm : ndarray, shape (m,)
        Resistances (ohm), all > 0.

    Returns
    -------
    r_ohm : float
        Resistance between ``node_a`` and ``node_b``.
    edge_current : ndarray, shape (m,)
        Current in each resistor from ``edge_i`` to ``edge_j`` for 1 A
        entering ``node_a`` and leaving ``node_b``.
    node_v : ndarray, shape (n_nodes,)
        Node potentials (V) for that current, 0 at ``node_b``; nodes not
        connected to the terminals get NaN.

    Raises
    ------
    GeometryError
        If the two nodes are not connected.

    >>> r, i, v = network_resistance(3, 0, 2, np.array([0, 1, 0]), np.array([1, 2, 2]), np.array([1.0, 1.0, 2.0]))
    >>> round(r, 6), np.round(i, 6).tolist()
    (1.0, [0.5, 0.5, 0.5])
    """
    g = 1.0 / np.asarray(edge_ohm, dtype=float)
    ei = np.asarray(edge_i, dtype=int)
    ej = np.asarray(edge_j, dtype=int)
    lap = np.zeros((n_nodes, n_nodes))
    np.add.at(lap, (ei, ei), g)
    np.add.at(lap, (ej, ej), g)
    np.add.at(lap, (ei, ej), -g)
    np.add.at(lap, (ej, ei), -g)
    # Keep only the component that holds node_a; ground node_b.
    reach = _component(n_nodes, ei, ej, node_a)
    if node_b not in reach:
        raise GeometryError("the coil's current path does not connect terminal A to terminal B")
    keep = np.array(sorted(reach - {node_b}))
    rhs = np.zeros(len(keep))
    rhs[np.searchsorted(keep, node_a)] = 1.0
    v = np.full(n_nodes, np.nan)
    v[node_b] = 0.0
    v[keep] = np.linalg.solve(lap[np.ix_(keep, keep)], rhs)
    return float(v[node_a] - v[node_b]), (v[ei] - v[ej]) * g, v


def _component(n, ei, ej, start):
    adj = [[] for _ in range(n)]
    for a, b in zip(ei.tolist(), ej.tolist()):
        adj[a].append(b)
        adj[b].append(a)
    seen, stack = {start}, [start]
    while stack:
        for m in adj[stack.pop()]:
            if m not in seen:
                seen.add(m)
                stack.append(m)
    return seen


# ----------------------------------------------------------------------------
# coil level
# ----------------------------------------------------------------------------


@dataclass(frozen=True)
class PathElements:
    """The coil's current path as straight resistive elements (SI).

    One row per straight trace segment or via barrel, in path order.

    Attributes
    ----------
    kind : ndarray of str, shape (n,)
        'trace' or 'via'.
    step : ndarray of int, shape (n,)
        Index into ``coil.path`` of the step the element belongs to.
    layer : ndarray of int, shape (n,)
        Copper layer of a trace segment; for a via the layer it leaves.
    length_m, width_m, thickness_m : ndarray, shape (n,)
        Trace: centreline length, width, copper thickness. Via: barrel
        length, drill diameter, plating thickness.
    fraction : ndarray, shape (n,)
        Share of the terminal current (``Step.fraction``).
    start_mm, end_mm : ndarray, shape (n, 2)
        In-plane ends (mm) for network connectivity; a via has both at its
        centre.
    end_layer : ndarray of int, shape (n,)
        Layer of the element's end (differs from ``layer`` for vias).
    """

    kind: np.ndarray
    step: np.ndarray
    layer: np.ndarray
    length_m: np.ndarray
    width_m: np.ndarray
    thickness_m: np.ndarray
    fraction: np.ndarray
    start_mm: np.ndarray
    end_mm: np.ndarray
    end_layer: np.ndarray


def path_elements(coil) -> PathElements:
    """Split the coil's current path into straight resistive elements.

    Zero-length elements (a terminal pad entered and left on the same
    layer) are dropped.
    """
    rows = []
    st = coil.stackup
    for k, s in enumerate(coil.path):
        if s.kind == "trace":
            tr = coil.traces[s.index]
            p = tr.points_mm
            seg = np.linalg.norm(np.diff(p, axis=0), axis=1)
            t_m = st.copper_um[tr.layer - 1] * 1e-6
            for i in np.nonzero(seg > 0)[0]:
                rows.append(("trace", k, tr.layer, seg[i] * 1e-3, tr.width_mm * 1e-3, t_m, s.fraction, p[i], p[i + 1], tr.layer))
        elif s.kind == "via":
            v = coil.vias[s.index]
            if s.from_layer == s.to_layer or not s.from_layer:
                continue
            length = abs(st.z_mm(s.from_layer) - st.z_mm(s.to_layer)) * 1e-3
            rows.append(("via", k, s.from_layer, length, v.drill_mm * 1e-3, st.plating_um * 1e-6, s.fraction, v.xy, v.xy, s.to_layer))
        else:
            raise GeometryError(f"path step {k}: kind must be 'trace' or 'via'; got {s.kind!r}")
    if not rows:
        raise GeometryError("the coil has an empty current path")
    cols = list(zip(*rows))
    return PathElements(
        kind=np.array(cols[0]),
        step=np.array(cols[1], dtype=int),
        layer=np.array(cols[2], dtype=int),
        length_m=np.array(cols[3], dtype=float),
        width_m=np.array(cols[4], dtype=float),
        thickness_m=np.array(cols[5], dtype=float),
        fraction=np.array(cols[6], dtype=float),
        start_mm=np.array(cols[7], dtype=float).reshape(-1, 2),
        end_mm=np.array(cols[8], dtype=float).reshape(-1, 2),
        end_layer=np.array(cols[9], dtype=int),
    )


def element_resistances(elements: PathElements, *, temperature_c=20.0, freq_hz=0.0) -> np.ndarray:
    """Resistance of every path element (ohm), DC or closed-form AC.

    Returns
    -------
    ndarray, shape (n,)
    """
    rho = copper_resistivity(temperature_c)
    is_via = elements.kind == "via"
    r = np.empty(len(elements.kind))
    e = elements
    r[~is_via] = strip_resistance(e.length_m[~is_via], e.width_m[~is_via], e.thickness_m[~is_via], rho, freq_hz)
    r[is_via] = barrel_resistance(e.length_m[is_via], e.width_m[is_via], e.thickness_m[is_via], rho, freq_hz)
    return r


def _check_temperature(temperature_c):
    if not np.isfinite(temperature_c):
        raise SpecError(f"temperature_c must be a finite number; got {temperature_c!r}")


def dc_resistance(coil, *, temperature_c=20.0, method="network") -> float:
    """DC resistance between the coil's terminals (ohm).

    Parameters
    ----------
    coil : tracecoil.layout.Coil
    temperature_c : float
        Copper temperature (degC); resistivity from
        :func:`tracecoil.physics.materials.copper_resistivity`.
    method : {'network', 'path'}
        'network' solves Kirchhoff's laws over the path (exact for unequal
        parallel branches); 'path' is the power-weighted sum
        sum f_i^2 R_i with the path's current fractions.

    Returns
    -------
    float
        Resistance (ohm).
    """
    _check_temperature(temperature_c)
    if method not in RESISTANCE_METHODS:
        raise SpecError(f"method must be one of {RESISTANCE_METHODS}; got {method!r}")
    e = path_elements(coil)
    r = element_resistances(e, temperature_c=temperature_c)
    if method == "path":
        return float(np.sum(e.fraction**2 * r))
    return path_network(coil, e).solve(step_sums(e, r))[0]


def ac_resistance(coil, freq_hz, *, temperature_c=20.0) -> float:
    """Closed-form AC resistance estimate at ``freq_hz`` (ohm).

    Skin effect in each rectangular strip and via wall, no proximity
    effect: a lower bound for a dense winding (see the module docstring).
    Combined as sum f_i^2 R_i(f) over the path.
    """
    _check_temperature(temperature_c)
    if not (np.isfinite(freq_hz) and freq_hz >= 0):
        raise SpecError(f"freq_hz must be a finite number >= 0; got {freq_hz!r}")
    e = path_elements(coil)
    r = element_resistances(e, temperature_c=temperature_c, freq_hz=float(freq_hz))
    return float(np.sum(e.fraction**2 * r))


def resistance_by_layer(coil, *, temperature_c=20.0, freq_hz=0.0) -> dict:
    """Power-weighted resistance shares: {layer: ohm} for traces and
    {'vias': ohm}; they sum to the 'path' resistance.

    Returns
    -------
    dict
        Keys are layer numbers (int) and the string 'vias'.
    """
    e = path_elements(coil)
    r = e.fraction**2 * element_resistances(e, temperature_c=temperature_c, freq_hz=freq_hz)
    out = {}
    for layer in sorted(set(e.layer[e.kind == "trace"].tolist())):
        out[layer] = float(r[(e.kind == "trace") & (e.layer == layer)].sum())
    out["vias"] = float(r[e.kind == "via"].sum())
    return out


@dataclass(frozen=True)
class PathNetwork:
    """Connectivity of the current path: one edge per path step.

    Attributes
    ----------
    n_nodes, node_a, node_b : int
        Node count and the nodes of terminals A and B.
    edge_i, edge_j : ndarray of int, shape (m,)
        Start and end node of each step that has resistive elements.
    step : ndarray of int, shape (m,)
        Index into ``coil.path`` of each edge.
    """

    n_nodes: int
    node_a: int
    node_b: int
    edge_i: np.ndarray
    edge_j: np.ndarray
    step: np.ndarray

    def solve(self, edge_ohm):
        """:func:`network_resistance` over this network."""
        return network_resistance(self.n_nodes, self.node_a, self.node_b, self.edge_i, self.edge_j, edge_ohm)


def step_sums(elements: PathElements, values) -> np.ndarray:
    """Sum per-element ``values`` over each path step, in the order of
    :func:`path_network`'s edges."""
    steps, inverse = np.unique(elements.step, return_inverse=True)
    return np.bincount(inverse, weights=values, minlength=len(steps))


def path_network(coil, elements: PathElements | None = None) -> PathNetwork:
    """Connectivity of the coil's current path.

    Nodes are via pads (via, layer) and free trace ends (layer, x, y); a
    trace end lying on a via pad of its layer joins that pad, and trace
    ends within 1 nm of each other join.
    """
    e = path_elements(coil) if elements is None else elements
    nodes: dict = {}
    vias_by_layer: dict[int, list[int]] = {}
    for vi, v in enumerate(coil.vias):
        for layer in v.layers:
            vias_by_layer.setdefault(layer, []).append(vi)
    snap = 1e-6  # mm: trace ends closer than this are the same node

    def node_at(layer, xy, via_hint=None):
        if via_hint is not None:
            key = ("via", via_hint, layer)
        else:
            key = None
            for vi in vias_by_layer.get(layer, ()):
                v = coil.vias[vi]
                if np.hypot(*(xy - v.xy)) <= v.pad_mm / 2 + snap:
                    key = ("via", vi, layer)
                    break
            if key is None:
                key = ("pt", layer, round(float(xy[0]) / snap), round(float(xy[1]) / snap))
        return nodes.setdefault(key, len(nodes))

    # One edge per path step: a trace's segments are in series.
    steps, first = np.unique(e.step, return_index=True)
    last = np.append(first[1:], len(e.step)) - 1
    ei, ej = [], []
    for k0, k1, s_idx in zip(first, last, steps):
        step = coil.path[s_idx]
        hint = step.index if step.kind == "via" else None
        ei.append(node_at(e.layer[k0], e.start_mm[k0], hint))
        ej.append(node_at(e.end_layer[k1], e.end_mm[k1], hint))
    term = {t.name: t for t in coil.terminals}
    if "A" not in term or "B" not in term:
        raise GeometryError(f"the coil needs terminals 'A' and 'B'; got {sorted(term)}")
    a = _terminal_node(coil, term["A"], nodes)
    b = _terminal_node(coil, term["B"], nodes)
    return PathNetwork(len(nodes), a, b, np.array(ei, dtype=int), np.array(ej, dtype=int), steps)


def _terminal_node(coil, terminal, nodes) -> int:
    v = coil.vias[terminal.via]
    for layer in sorted(v.layers):
        key = ("via", terminal.via, layer)
        if key in nodes:
            return nodes[key]
    raise GeometryError(f"terminal {terminal.name}'s pad (via {terminal.via}) is not on the current path")
