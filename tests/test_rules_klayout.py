"""Outside check: the same layouts, written to GDSII, checked for width and
space with KLayout's Python package (klayout.db, from PyPI), a
general-purpose layout tool used here as the reference.

KLayout settings, chosen to state the same rule as tracecoil's:

* ``Region.width_check(d)`` and ``Region.space_check(d)`` on the merged
  copper of a layer (space_check covers gaps inside one polygon too);
* ``metrics = Metrics.Projection``: distances between edges measured where
  they overlap in projection, as tracecoil does;
* ``ignore_angle = 80``: edges meeting at 80 degrees or more are not a
  pair (tracecoil's IGNORE_ANGLE_DEG);
* ``d = limit - 0.1 um`` in database units (1 nm): KLayout reports
  distances below d; tracecoil passes values within 0.1 um of the limit;
* drilled holes inside copper are filled before the checks: tracecoil
  leaves the copper ring round a hole to the annular-ring rule, not to
  the width rule.

KLayout's edge pairs are grouped into clusters (their polygons merged after
growing by 1 um); each cluster must hold one tracecoil finding and each
tracecoil finding must lie in one cluster. The layouts avoid sharp wedges
(below 39 degrees), where tracecoil's same-ring rule and KLayout's
ignore_angle would differ by design.
"""

from __future__ import annotations

import numpy as np
import pytest
import shapely
from shapely import affinity
from shapely.geometry import box

from rules_layouts import RULES, bulged_pair, make_outlines, meander, narrowed_trace
from tracecoil import spiral
from tracecoil.export.gds import write_gds
from tracecoil.outline import Outlines, as_multipolygon, outlines
from tracecoil.rules import LIMIT_TOL_MM, check, geometry_only

kdb = pytest.importorskip("klayout.db")

DBU_MM = 1e-6  # the exporter's 1 nm database unit, in mm
GROW_DBU = 1000  # 1 um: edge pairs this close belong to one cluster


def klayout_clusters(gds_path, layer: int, *, width_mm: float, gap_mm: float):
    """Violation clusters KLayout finds on GDS ``layer``/0: a list of
    (rule, bbox in mm)."""
    ly = kdb.Layout()
    ly.read(str(gds_path))
    assert abs(ly.dbu - 1e-3) < 1e-12  # 1 nm in um
    region = kdb.Region(ly.top_cell().begin_shapes_rec(ly.layer(layer, 0)))
    holes = kdb.Region(ly.top_cell().begin_shapes_rec(ly.layer(100, 0)))
    region = (region + holes.interacting(region)).merged()  # plated holes filled: rings are the annular-ring rule's
    out = []
    for rule, limit, method in (("MIN_WIDTH", width_mm, region.width_check), ("MIN_GAP", gap_mm, region.space_check)):
        d = int(round((limit - LIMIT_TOL_MM) / DBU_MM))
        pairs = method(d, metrics=kdb.Metrics.Projection, ignore_angle=80)
        blobs = pairs.polygons(1).sized(GROW_DBU)  # edge pairs as polygons, grown so touching ones merge
        blobs.merge()
        for poly in blobs.each():
            b = poly.bbox()
            out.append((rule, (b.left * DBU_MM, b.bottom * DBU_MM, b.right * DBU_MM, b.top * DBU_MM)))
    return out


def compare(tmp_path, outl: Outlines, rules, layers=None):
    """tracecoil's width/gap findings and KLayout's clusters, per layer."""
    gds = tmp_path / "layout.gds"
    write_gds(outl, gds)
    res = check(outl, geometry_only(rules))
    n = max(outl.layer_names)
    for layer in layers or sorted(outl.copper):
        name = outl.layer_names[layer]
        ours = [f for f in res.findings if f.layer == name and f.rule in ("MIN_WIDTH", "MIN_GAP")]
        theirs = klayout_clusters(gds, layer, width_mm=rules.min_width_mm(layer, n), gap_mm=rules.min_gap_mm(layer, n))
        pad = 2 * GROW_DBU * DBU_MM
        for rule, (x0, y0, x1, y1) in theirs:
            hits = [f for f in ours if f.rule == rule and x0 - pad <= f.at[0] <= x1 + pad and y0 - pad <= f.at[1] <= y1 + pad]
            assert len(hits) == 1, f"KLayout {rule} cluster {(x0, y0, x1, y1)} on {name} matches tracecoil findings {hits}"
        for f in ours:
            hits = [c for c in theirs if c[0] == f.rule and c[1][0] - pad <= f.at[0] <= c[1][2] + pad and c[1][1] - pad <= f.at[1] <= c[1][3] + pad]
            assert len(hits) == 1, f"tracecoil {f.rule} at {f.at} on {name} matches KLayout clusters {hits}"
        yield name, ours, theirs


def seeded_layout(rot=0.0):
    """Several seeded defects and clean parts on one layer, spread out."""
    notch, _ = narrowed_trace(width=0.25, narrow_to=0.18)
    bulge, _ = bulged_pair(width=0.25, gap=0.25, bump=0.06)
    thin_everywhere = box(0, 0, 6, 0.199)  # 1 um too narrow along its whole length
    close_pair = box(0, 0, 6, 0.3).union(box(0, 0.499, 6, 0.8))  # 1 um too close
    parts = [
        notch,
        affinity.translate(bulge, 0, 2),
        affinity.translate(meander(width=0.2, gap=0.2, legs=5, length=4), 0, 5),  # clean, exactly at the limits
        affinity.translate(thin_everywhere, 12, 0),
        affinity.translate(close_pair, 12, 3),
        affinity.translate(meander(width=0.2, gap=0.2, legs=5, length=4).union(box(2, 0.6 - 1e-3, 2.4, 0.62)), 12, 6),
    ]
    g = shapely.union_all(parts)
    return make_outlines({1: affinity.rotate(g, rot, origin=(0, 0))}, n_layers=1)


@pytest.mark.parametrize("rot", [0.0, 30.0])
def test_seeded_defects_agree_with_klayout(tmp_path, rot):
    outl = seeded_layout(rot)
    (name, ours, theirs), = list(compare(tmp_path, outl, RULES))
    # notch, bulge, thin trace, close pair, bulge in the meander
    assert sorted(f.rule for f in ours) == ["MIN_GAP", "MIN_GAP", "MIN_GAP", "MIN_WIDTH", "MIN_WIDTH"]
    assert len(theirs) == len(ours)


def test_generated_square_coil_with_a_bump_agrees_with_klayout(tmp_path):
    coil = spiral(shape="square", outer_mm=16, turns=6, width_mm=0.2, gap_mm=0.2, layers=2)
    o = outlines(coil, tolerance_mm=1e-4)
    top = o.copper[1]
    # a 30 um bump from the outer turn's inner edge (x = 7.8) towards the next turn (edge at x = 7.6)
    bumped = as_multipolygon(top.union(box(7.77, 1.0, 7.8 + 1e-3, 2.0)))
    # and a 40 um bite out of the inner edge (y = -7.3) of the bottom layer's second turn
    bottom = as_multipolygon(o.copper[2].difference(box(-0.5, -7.34, 0.5, -7.3 + 1e-3)))
    outl = Outlines({1: bumped, 2: bottom}, o.drills, o.plated, o.board, o.layer_names, o.tolerance_mm)
    results = dict((name, (ours, theirs)) for name, ours, theirs in compare(tmp_path, outl, RULES))
    (f,) = results["top"][0]
    assert f.rule == "MIN_GAP" and abs(f.measured - 0.17) < 1e-6
    (f,) = results["bottom"][0]
    assert f.rule == "MIN_WIDTH" and abs(f.measured - 0.16) < 1e-6


@pytest.mark.parametrize("shape", ["square", "hexagon", "octagon"])
def test_clean_generated_coils_at_the_limits_agree_with_klayout(tmp_path, shape):
    coil = spiral(shape=shape, outer_mm=14, turns=5, width_mm=0.2, gap_mm=0.2, layers=2)
    outl = outlines(coil, tolerance_mm=1e-4)
    for name, ours, theirs in compare(tmp_path, outl, RULES):
        assert ours == [] and theirs == [], name


def test_circle_coil_gap_shortfall_is_seen_by_both(tmp_path):
    # A circular spiral is a polyline; where one turn's chord sags towards
    # a vertex of the next, the copper gap is a little below gap_mm. Both
    # checkers must see the same places (whatever the generator does).
    coil = spiral(shape="circle", outer_mm=14, turns=5, width_mm=0.2, gap_mm=0.2, layers=2)
    outl = outlines(coil, tolerance_mm=1e-4)
    for name, ours, theirs in compare(tmp_path, outl, RULES):
        assert len(ours) == len(theirs), name
