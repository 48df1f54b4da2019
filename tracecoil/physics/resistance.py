"""Resistance of a coil: DC with temperature, skin depth, closed-form AC.

Kernels (plain arrays, SI units) come first; the coil-level functions below
them read the coil's conductor segments
(:func:`tracecoil.physics.conductors.conductors`, SI) and, for the
network's connectivity, its vias and terminals.

Models
------
DC, trace segment
    R = rho * l / (w * t), l the centreline length. At a sharp 90 degree
    corner the centreline rule counts the corner square as one square where
    the true value is about 0.56 squares (common practice), so square
    spirals come out high by about 0.44 / N for sides N widths long (under
    1 % once the sides are longer than about 50 widths).
DC, via barrel
    A plated annulus of outer diameter ``drill`` and wall ``plating``:
    R = rho * l / (pi * p * (d - p)), l the distance between the copper
    mid-planes it joins. Pads and solder are ignored.
Skin depth
    delta = sqrt(rho / (pi f mu0 mu_r)) (J. D. Jackson, *Classical
    Electrodynamics*, 3rd ed., 1999, sec. 5.18, from memory).
AC, closed form (``ac_resistance``)
    Each trace is treated as a wide plate of thickness t whose two faces
    see equal and opposite tangential field (an isolated strip). The exact
    1-D diffusion solution, J ~ cosh(gamma x), gamma = (1 + j) / delta,
    gives Z / R_dc = (gamma t / 2) coth(gamma t / 2), whose real part is
    R / R_dc = D (sinh 2D + sin 2D) / (cosh 2D - cos 2D), D = t / (2 delta):
    the skin-effect term of P. L. Dowell, "Effects of eddy currents in
    transformer windings", Proc. IEE 113(8), 1966, for a half-thickness
    fed from one face (from memory; the derivation is the plane-conductor
    internal impedance of S. Ramo, J. R. Whinnery, T. Van Duzer, *Fields and
    Waves in Communication Electronics*, 3rd ed., 1994). It tends to 1 at
    low frequency and to t / (2 delta) (current in one skin depth under
    each face) at high frequency. A via barrel is a wall of thickness p fed
    from its outer face only (no field inside the hole): D = p / delta.
    The model ignores the strip's edges (current crowding there raises R
    further) and the proximity of neighbouring turns, so in a dense
    winding it *underestimates* R(f) once delta is smaller than the trace
    width (typically by 20 % to a factor of 2 or more); the filament model
    of ``tracecoil.physics.inductance.impedance`` includes both and is
    preferred where available. Treat this closed form as a lower bound and
    a cross-check.

Combining the path
------------------
DC resistance is solved as a resistor network (Kirchhoff): nodes are the
ends of the path's traces and the pads of the vias, joined where a trace
end lies on a via pad of the same layer or on another trace end; every via
barrel joins its pads. This is exact for parallel branches of unequal
resistance. The power-weighted sum
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
from .conductors import MM, Conductors, conductors
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


def plate_ac_factor(thickness_m, skin_depth_m, *, faces=2):
    """R_ac / R_dc of a plate carrying current along it (skin effect only).

    Exact 1-D solution: Re[z coth z] with z = (1 + j) t / (2 delta) for a
    plate fed from both faces, z = (1 + j) t / delta from one face; see the
    module docstring (Dowell 1966; Ramo, Whinnery & Van Duzer 1994; from
    memory).

    Parameters
    ----------
    thickness_m, skin_depth_m : ndarray
        Plate thickness and skin depth (m), broadcast; ``skin_depth_m``
        may be inf (DC).
    faces : {1, 2}
        Faces the field (and current) enters from.

    Returns
    -------
    ndarray
        Resistance ratio >= 1.

    >>> round(float(plate_ac_factor(70e-6, 35e-6)), 4)
    1.0856
    """
    if faces not in (1, 2):
        raise SpecError(f"faces must be 1 or 2; got {faces!r}")
    t = np.asarray(thickness_m, dtype=float)
    d = np.asarray(skin_depth_m, dtype=float)
    x = t / (2.0 * d) if faces == 2 else t / d
    z = (1.0 + 1.0j) * np.where(x > 1e-4, x, 1.0)
    with np.errstate(over="ignore", invalid="ignore"):
        big = x > 20.0  # coth(z) = 1 to double precision
        ratio = np.where(big, z, z / np.tanh(np.where(big, 1.0, z)))
    # Series 1 + 4 x^4 / 45 below x = 1e-4 (exact to double precision).
    return np.where(x > 1e-4, ratio.real, 1.0 + 4.0 * x**4 / 45.0)


def strip_resistance(length_m, width_m, thickness_m, resistivity_ohm_m, freq_hz=0.0):
    """Resistance of straight rectangular strips, DC or closed-form AC (ohm).

    DC: rho l / (w t). AC: times :func:`plate_ac_factor` across the
    thickness (both faces; see the module docstring for the model and its
    limits).

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
    r = rho * np.asarray(length_m, dtype=float) / (w * t)
    if freq_hz > 0:
        r = r * plate_ac_factor(t, skin_depth(rho, freq_hz), faces=2)
    return r


def barrel_resistance(length_m, drill_m, plating_m, resistivity_ohm_m, freq_hz=0.0):
    """Resistance of plated via barrels (ohm).

    An annulus of outer diameter ``drill_m`` and wall ``plating_m``:
    R = rho l / (pi p (d - p)) at DC; at frequency times
    :func:`plate_ac_factor` of the wall fed from its outer face.

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
    1.277
    """
    d = np.asarray(drill_m, dtype=float)
    p = np.asarray(plating_m, dtype=float)
    rho = np.asarray(resistivity_ohm_m, dtype=float)
    r = rho * np.asarray(length_m, dtype=float) / (np.pi * p * (d - p))
    if freq_hz > 0:
        r = r * plate_ac_factor(p, skin_depth(rho, freq_hz), faces=1)
    return r


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


def segment_resistances(cond: Conductors, *, temperature_c=20.0, freq_hz=0.0) -> np.ndarray:
    """Resistance of every conductor segment (ohm), DC or closed-form AC.

    Parameters
    ----------
    cond : Conductors
        From :func:`tracecoil.physics.conductors.conductors`: traces are
        strips (width x thickness), vias barrels (outer diameter, wall).

    Returns
    -------
    ndarray, shape (n,)
    """
    rho = copper_resistivity(temperature_c)
    via = cond.is_via
    length = cond.length_m
    r = np.empty(len(cond))
    r[~via] = strip_resistance(length[~via], cond.width_m[~via], cond.thickness_m[~via], rho, freq_hz)
    r[via] = barrel_resistance(length[via], cond.width_m[via], cond.thickness_m[via], rho, freq_hz)
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
    cond = conductors(coil)
    r = segment_resistances(cond, temperature_c=temperature_c)
    if method == "path":
        return float(np.sum(cond.fraction**2 * r))
    net = path_network(coil, cond)
    return net.solve(network_edge_resistances(coil, net, cond, r, temperature_c=temperature_c))[0]


def ac_resistance(coil, freq_hz, *, temperature_c=20.0) -> float:
    """Closed-form AC resistance estimate at ``freq_hz`` (ohm).

    Skin effect in each rectangular strip and via wall, no proximity
    effect: a lower bound for a dense winding (see the module docstring).
    Combined as sum f_i^2 R_i(f) over the path.
    """
    _check_temperature(temperature_c)
    if not (np.isfinite(freq_hz) and freq_hz >= 0):
        raise SpecError(f"freq_hz must be a finite number >= 0; got {freq_hz!r}")
    cond = conductors(coil)
    r = segment_resistances(cond, temperature_c=temperature_c, freq_hz=float(freq_hz))
    return float(np.sum(cond.fraction**2 * r))


def resistance_by_layer(coil, *, temperature_c=20.0, freq_hz=0.0) -> dict:
    """Power-weighted resistance shares: {layer: ohm} for traces and
    {'vias': ohm}; they sum to the 'path' resistance.

    Returns
    -------
    dict
        Keys are layer numbers (int) and the string 'vias'.
    """
    cond = conductors(coil)
    r = cond.fraction**2 * segment_resistances(cond, temperature_c=temperature_c, freq_hz=freq_hz)
    trace = ~cond.is_via
    out = {}
    for layer in sorted(set(cond.layer[trace].tolist())):
        out[layer] = float(r[trace & (cond.layer == layer)].sum())
    out["vias"] = float(r[cond.is_via].sum())
    return out


@dataclass(frozen=True)
class PathNetwork:
    """Connectivity of the coil's copper: traces on the path and via barrels.

    Attributes
    ----------
    n_nodes, node_a, node_b : int
        Node count and the nodes of terminals A and B.
    edge_i, edge_j : ndarray of int, shape (m,)
        End nodes of each edge.
    step : ndarray of int, shape (m,)
        For a trace edge, the index into ``coil.path`` of its step (the
        edges of trace steps come first, in path order); -1 for a barrel.
    barrel_length_m, barrel_drill_m : ndarray, shape (m,)
        For a barrel edge (between two consecutive pad layers of a via),
        its length and drill; 0 for trace edges.
    """

    n_nodes: int
    node_a: int
    node_b: int
    edge_i: np.ndarray
    edge_j: np.ndarray
    step: np.ndarray
    barrel_length_m: np.ndarray
    barrel_drill_m: np.ndarray

    @property
    def is_barrel(self) -> np.ndarray:
        return self.step < 0

    def solve(self, edge_ohm):
        """:func:`network_resistance` over this network."""
        return network_resistance(self.n_nodes, self.node_a, self.node_b, self.edge_i, self.edge_j, edge_ohm)


def trace_step_sums(cond: Conductors, values) -> np.ndarray:
    """Sum per-segment ``values`` over each trace step, in the order of the
    trace edges of :func:`path_network`."""
    tr = ~cond.is_via
    steps, inverse = np.unique(cond.step[tr], return_inverse=True)
    return np.bincount(inverse, weights=np.asarray(values, dtype=float)[tr], minlength=len(steps))


def path_network(coil, cond: Conductors | None = None) -> PathNetwork:
    """Connectivity of the coil: the path's traces plus every via barrel.

    Nodes are via pads (via, layer) and free trace ends (layer, x, y). A
    trace end lying on a via pad of its layer joins that pad; trace ends
    within 1 nm of each other join. Each via contributes one barrel edge
    between every two consecutive layers it has pads on (the plated hole
    joins all of them, whether or not the path lists the step), except
    terminal pads, which are one node (the pin soldered through joins them).
    """
    cond = conductors(coil) if cond is None else cond
    start_mm = cond.start_m[:, :2] / MM
    end_mm = cond.end_m[:, :2] / MM
    st = coil.stackup
    nodes: dict = {}
    vias_by_layer: dict[int, list[int]] = {}
    for vi, v in enumerate(coil.vias):
        for layer in v.layers:
            vias_by_layer.setdefault(layer, []).append(vi)
    snap = 1e-6  # mm: trace ends closer than this are the same node

    terminal_vias = {t.via for t in coil.terminals}

    def pad_key(vi, layer):
        # A terminal pad is one node on every layer: the pin soldered through joins them.
        return ("via", vi, 0) if vi in terminal_vias else ("via", vi, layer)

    def node_at(layer, xy):
        key = None
        for vi in vias_by_layer.get(layer, ()):
            v = coil.vias[vi]
            if np.hypot(*(xy - v.xy)) <= v.pad_mm / 2 + snap:
                key = pad_key(vi, layer)
                break
        if key is None:
            key = ("pt", layer, round(float(xy[0]) / snap), round(float(xy[1]) / snap))
        return nodes.setdefault(key, len(nodes))

    tr = np.nonzero(~cond.is_via)[0]
    steps, first = np.unique(cond.step[tr], return_index=True)
    last = np.append(first[1:], len(tr)) - 1
    ei, ej, step, blen, bdrill = [], [], [], [], []
    for k0, k1, s_idx in zip(tr[first], tr[last], steps):
        ei.append(node_at(cond.layer[k0], start_mm[k0]))
        ej.append(node_at(cond.layer[k1], end_mm[k1]))
        step.append(int(s_idx))
        blen.append(0.0)
        bdrill.append(0.0)
    for vi, v in enumerate(coil.vias):
        layers = sorted(v.layers)
        if vi in terminal_vias:
            continue
        for la, lb in zip(layers[:-1], layers[1:]):
            ei.append(nodes.setdefault(("via", vi, la), len(nodes)))
            ej.append(nodes.setdefault(("via", vi, lb), len(nodes)))
            step.append(-1)
            blen.append(abs(st.z_mm(la) - st.z_mm(lb)) * MM)
            bdrill.append(v.drill_mm * MM)
    term = {t.name: t for t in coil.terminals}
    if "A" not in term or "B" not in term:
        raise GeometryError(f"the coil needs terminals 'A' and 'B'; got {sorted(term)}")
    a = nodes.setdefault(pad_key(term["A"].via, 0), len(nodes))
    b = nodes.setdefault(pad_key(term["B"].via, 0), len(nodes))
    return PathNetwork(
        len(nodes), a, b, np.array(ei, dtype=int), np.array(ej, dtype=int), np.array(step, dtype=int), np.array(blen), np.array(bdrill)
    )


def network_edge_resistances(coil, net: PathNetwork, cond: Conductors, segment_ohm, *, temperature_c=20.0, freq_hz=0.0):
    """Resistance of every edge of ``net`` (ohm): trace edges from the
    segments' resistances, barrels from :func:`barrel_resistance`."""
    out = np.empty(len(net.step))
    out[~net.is_barrel] = trace_step_sums(cond, segment_ohm)
    b = net.is_barrel
    rho = copper_resistivity(temperature_c)
    plating = coil.stackup.plating_um * 1e-6
    out[b] = barrel_resistance(net.barrel_length_m[b], net.barrel_drill_m[b], plating, rho, freq_hz)
    return out
