"""Exports: DXF, GDSII, previews, build and atomic writes.

Round trips read the files back with independent readers -- ezdxf for DXF,
gdstk and the klayout package (a general-purpose layout tool from PyPI,
used here as an outside reader) for GDSII -- rebuild the copper with
shapely and compare it with the in-memory outlines.

"Polygon count" means the number of connected pieces of copper on a layer
(one shapely Polygon, holes included). DXF keeps them one to one (one HATCH
each). GDSII has no holes: a piece with holes is written as one keyhole
boundary, and a piece over the vertex limit is cut into several; so the raw
boundary count is at least the polygon count, and the count after merging
the boundaries (shapely union, klayout ``Region.merged``) equals it.
"""

from __future__ import annotations

import json
import os
import xml.etree.ElementTree as ET
from functools import reduce

import ezdxf
import gdstk
import klayout.db as kdb
import matplotlib.image
import numpy as np
import pytest
import shapely
from numpy.testing import assert_allclose
from shapely.geometry import Polygon

import tracecoil
from tracecoil.design import Design, make_board_spec, make_coil_spec
from tracecoil.errors import SpecError
from tracecoil.export import atomic, build, dxf, gds, preview
from tracecoil.outline import as_multipolygon, outlines

# DXF stores coordinates as full-precision decimal text and GDSII on a 1 nm
# grid (vertices move by <= 0.5 nm, random sign): both keep the copper area
# far inside the 1e-6 relative difference the exports promise.
AREA_RTOL = 1e-6


def _coil(name, **kw):
    board = kw.pop("board", None)
    return tracecoil.spiral(name=name, board=board, **kw)


# Small coils (few turns, coarse-ish chords) keep the suite fast; together
# they cover multi-layer, circle, polygon and rectangle shapes, a board edge,
# and copper with holes (pads and vias with drills, an annular ring).
COILS = {
    "circle4": lambda: _coil("circle4", shape="circle", outer_mm=16, turns=4, width_mm=0.25, gap_mm=0.25, layers=4, tolerance_mm=0.02, board={"layers": 4, "outline_mm": (24, 20)}),
    "square2": lambda: _coil("square2", shape="square", outer_mm=12, turns=5, width_mm=0.3, gap_mm=0.2, layers=2),
    "pentagon": lambda: _coil("pentagon", shape="polygon", sides=5, outer_mm=14, turns=4, width_mm=0.3, gap_mm=0.3, corner="round", corner_mm=0.5),
    "rect3": lambda: _coil("rect3", shape="rectangle", outer_mm=20, outer_height_mm=8, turns=3, width_mm=0.25, gap_mm=0.25, layers=3, board={"layers": 4}),
}


@pytest.fixture(scope="module", params=sorted(COILS))
def case(request):
    coil = COILS[request.param]()
    return coil, outlines(coil, tolerance_mm=coil.spec.tolerance_mm)


@pytest.fixture(scope="module")
def written(case, tmp_path_factory):
    coil, outl = case
    d = tmp_path_factory.mktemp(coil.name)
    return coil, outl, build(coil, d)


def _has_holes(outl) -> bool:
    return any(len(p.interiors) for g in outl.copper.values() for p in g.geoms)


def test_cases_have_holes(case):
    # pads and vias are drilled, so every case exercises copper with holes
    _, outl = case
    assert _has_holes(outl)


# ----------------------------------------------------------------- DXF
def _dxf_copper(doc):
    """{layer name: (polygons from HATCH, region from LWPOLYLINE rings)}."""
    out = {}
    msp = doc.modelspace()
    for layer in {e.dxf.layer for e in msp.query("HATCH LWPOLYLINE")}:
        polys = []
        for h in msp.query(f'HATCH[layer=="{layer}"]'):
            ext, holes = None, []
            for path in h.paths:
                ring = [(v[0], v[1]) for v in path.vertices]
                if path.path_type_flags & ezdxf.lldxf.const.BOUNDARY_PATH_EXTERNAL:
                    assert ext is None, "one exterior path per hatch"
                    ext = ring
                else:
                    holes.append(ring)
            polys.append(Polygon(ext, holes))
        rings = [Polygon(list(pl.vertices_in_wcs())) for pl in msp.query(f'LWPOLYLINE[layer=="{layer}"]')]
        assert all(pl.closed for pl in msp.query(f'LWPOLYLINE[layer=="{layer}"]'))
        # closed outlines describe the copper by even-odd parity of the rings
        region = reduce(lambda a, b: a.symmetric_difference(b), rings) if rings else None
        out[layer] = (polys, region)
    return out


def test_dxf_round_trip(written):
    coil, outl, paths = written
    doc = ezdxf.readfile(paths["dxf"])
    assert doc.header["$INSUNITS"] == 4  # millimetres
    assert doc.units == ezdxf.units.MM
    assert doc.header["$MEASUREMENT"] == 1
    names = dxf.dxf_layer_names(outl)
    table = {l.dxf.name for l in doc.layers}
    assert set(names.values()) <= table
    assert names[1] == "COPPER_TOP" and names[coil.stackup.n_layers] == "COPPER_BOTTOM"
    got = _dxf_copper(doc)
    board_layers = {dxf.BOARD_LAYER} if outl.board is not None else set()
    assert set(got) == {names[l] for l in outl.copper} | board_layers
    for layer, geom in outl.copper.items():
        polys, region = got[names[layer]]
        assert len(polys) == len(geom.geoms)  # one HATCH per connected piece
        assert all(p.is_valid for p in polys)
        back = shapely.union_all(polys)
        assert_allclose(back.area, geom.area, rtol=AREA_RTOL)
        assert_allclose(region.area, geom.area, rtol=AREA_RTOL)
        # same place, not just same area
        assert back.symmetric_difference(geom).area <= AREA_RTOL * geom.area
        assert region.symmetric_difference(geom).area <= AREA_RTOL * geom.area
    circles = list(doc.modelspace().query(f'CIRCLE[layer=="{dxf.DRILL_LAYER}"]'))
    got_drills = np.array(sorted((c.dxf.center.x, c.dxf.center.y, 2 * c.dxf.radius) for c in circles))
    assert_allclose(got_drills, np.array(sorted(map(tuple, outl.drills))), rtol=0, atol=1e-12)
    if outl.board is not None:
        edge = Polygon(list(next(iter(doc.modelspace().query(f'LWPOLYLINE[layer=="{dxf.BOARD_LAYER}"]'))).vertices_in_wcs()))
        assert_allclose(edge.area, outl.board.area, rtol=1e-12)


def test_dxf_document_needs_something_to_write(case):
    _, outl = case
    with pytest.raises(ValueError, match="hatches"):
        dxf.dxf_document(outl, hatches=False, polylines=False)


# ----------------------------------------------------------------- GDSII
def _gds_layers(path):
    lib = gdstk.read_gds(str(path))
    assert len(lib.top_level()) == 1
    per = {}
    for p in lib.top_level()[0].polygons:
        per.setdefault((p.layer, p.datatype), []).append(np.asarray(p.points))
    return lib, per


def _merged(rings, scale):
    # keyhole rings touch themselves along the cut; make_valid restores the hole
    return as_multipolygon(shapely.union_all([shapely.make_valid(Polygon(r * scale)) for r in rings]))


def test_gds_round_trip_gdstk(written):
    coil, outl, paths = written
    lib, per = _gds_layers(paths["gds"])
    assert lib.unit == pytest.approx(1e-6) and lib.precision == pytest.approx(1e-9)
    expected = {(l, 0) for l in outl.copper} | {(100, 0)} | ({(101, 0)} if outl.board is not None else set())
    assert set(per) == expected
    for layer, geom in outl.copper.items():
        rings = per[(layer, 0)]
        assert all(len(r) <= gds.GDS_MAX_POINTS for r in rings)
        assert len(rings) >= len(geom.geoms)
        raw_area = sum(Polygon(r).area for r in rings) * 1e-6  # um^2 -> mm^2; pieces do not overlap
        assert_allclose(raw_area, geom.area, rtol=AREA_RTOL)
        back = _merged(rings, 1e-3)
        assert len(back.geoms) == len(geom.geoms)
        assert_allclose(back.area, geom.area, rtol=AREA_RTOL)
        # same place: snapping to the 1 nm grid moves each edge by < 1 nm, so
        # the copper that differs is a sliver of at most perimeter x 1 nm
        assert back.symmetric_difference(geom).area <= geom.length * 1e-6
        assert sum(len(p.interiors) for p in back.geoms) == sum(len(p.interiors) for p in geom.geoms)
    drills = per[(100, 0)]
    assert len(drills) == len(outl.drills)
    want = sum(np.pi * (d / 2) ** 2 for d in outl.drills[:, 2])
    # drills are polygons inscribed with chord error <= tolerance: area short by < 2 tol / r
    got = sum(Polygon(r).area for r in drills) * 1e-6
    assert 0 < want - got < want * 2 * outl.tolerance_mm / outl.drills[:, 2].min() * 2


def _klayout(path):
    ly = kdb.Layout()
    ly.read(str(path))
    return ly


def test_gds_klayout_sees_same_layers_and_area(written):
    coil, outl, paths = written
    ly = _klayout(paths["gds"])
    assert ly.dbu == pytest.approx(1e-3)  # um per database unit: 1 nm grid
    seen = {(info.layer, info.datatype) for info in ly.layer_infos()}
    assert {(l, 0) for l in outl.copper} <= seen
    top = ly.top_cell()
    for layer, geom in outl.copper.items():
        region = kdb.Region(top.begin_shapes_rec(ly.find_layer(layer, 0))).merged()
        area_mm2 = region.area() * (ly.dbu * 1e-3) ** 2
        assert_allclose(area_mm2, geom.area, rtol=AREA_RTOL)
        assert region.count() == len(geom.geoms)
        # klayout's merge turns keyholes back into holes
        holes = sum(p.holes() for p in region.each())
        assert holes == sum(len(p.interiors) for p in geom.geoms)


def test_gds_splits_polygons_over_the_vertex_limit(tmp_path):
    # One long spiral whose single copper polygon exceeds 8190 vertices.
    coil = _coil("big", shape="circle", outer_mm=50, turns=40, width_mm=0.25, gap_mm=0.25, tolerance_mm=0.005)
    outl = outlines(coil, tolerance_mm=0.005)
    assert max(len(p.exterior.coords) for p in outl.copper[1].geoms) > gds.GDS_MAX_POINTS
    path = gds.write_gds(outl, tmp_path / "big.gds")
    _, per = _gds_layers(path)
    rings = per[(1, 0)]
    assert max(len(r) for r in rings) <= gds.GDS_MAX_POINTS
    assert len(rings) > len(outl.copper[1].geoms)
    ly = _klayout(path)
    region = kdb.Region(ly.top_cell().begin_shapes_rec(ly.find_layer(1, 0))).merged()
    assert region.count() == len(outl.copper[1].geoms)
    assert_allclose(region.area() * (ly.dbu * 1e-3) ** 2, outl.copper[1].area, rtol=AREA_RTOL)


def test_gds_small_vertex_limit_still_exact(case, tmp_path):
    _, outl = case
    path = gds.write_gds(outl, tmp_path / "small.gds", max_points=64)
    _, per = _gds_layers(path)
    ly = _klayout(path)
    for layer, geom in outl.copper.items():
        assert max(len(r) for r in per[(layer, 0)]) <= 64
        region = kdb.Region(ly.top_cell().begin_shapes_rec(ly.find_layer(layer, 0))).merged()
        assert region.count() == len(geom.geoms)
        assert_allclose(region.area() * (ly.dbu * 1e-3) ** 2, geom.area, rtol=AREA_RTOL)


def test_gds_layer_map(tmp_path):
    coil = COILS["square2"]()
    outl = outlines(coil)
    path = gds.write_gds(outl, tmp_path / "m.gds", layer_map={1: (10, 5), 2: (20, 0), "drill": (66, 1)})
    _, per = _gds_layers(path)
    assert set(per) == {(10, 5), (20, 0), (66, 1)}
    assert_allclose(sum(Polygon(r).area for r in per[(10, 5)]) * 1e-6, outl.copper[1].area, rtol=AREA_RTOL)


@pytest.mark.parametrize(
    "layer_map, match",
    [
        ({7: (7, 0)}, "layer_map key 7"),
        ({1: (2, 0)}, "same GDS layer"),
        ({1: (-1, 0)}, "gds_layer must be a whole number 0..32767"),
        ({1: (1, 1.5)}, "datatype must be"),
        ({"drill": 100}, "must be a pair"),
    ],
)
def test_gds_layer_map_errors(layer_map, match, tmp_path):
    outl = outlines(COILS["square2"]())
    with pytest.raises(SpecError, match=match):
        gds.write_gds(outl, tmp_path / "x.gds", layer_map=layer_map)
    assert list(tmp_path.iterdir()) == []


def test_gds_max_points_limits(case):
    _, outl = case
    with pytest.raises(SpecError, match="max_points"):
        gds.gds_library(outl, max_points=8191)


# ----------------------------------------------------------------- previews
def test_previews_are_valid(written):
    coil, outl, paths = written
    root = ET.parse(paths["svg"]).getroot()
    assert root.tag.endswith("svg")
    text = paths["svg"].read_text(encoding="utf-8")
    for layer in outl.copper:
        assert f"L{layer} {outl.layer_names[layer]}" in text  # legend
    assert " mm" in text  # scale bar label
    raw = paths["png"].read_bytes()
    assert raw[:8] == b"\x89PNG\r\n\x1a\n"
    img = matplotlib.image.imread(paths["png"])
    assert img.ndim == 3 and img.shape[0] >= 600 and img.shape[1] >= 600
    rgb = np.round(img[..., :3] * 255).astype(int)
    # each layer's colour appears unblended (its legend swatch and edges)
    n = coil.stackup.n_layers
    for layer in outl.copper:
        c = preview.layer_colour(layer, n)
        want = np.array([int(c[i : i + 2], 16) for i in (1, 3, 5)])
        assert np.any(np.all(np.abs(rgb - want) <= 2, axis=-1)), f"colour of layer {layer} not in the PNG"


def test_preview_colours_distinguishable():
    # every pair of layer colours on a board of up to 8 layers differs clearly
    for n in range(2, 9):
        cols = [preview.layer_colour(l, n) for l in range(1, n + 1)]
        rgb = np.array([[int(c[i : i + 2], 16) for i in (1, 3, 5)] for c in cols], float)
        distinct = len(set(cols))
        assert distinct == min(n, len(preview.LAYER_COLOURS))
        d = np.linalg.norm(rgb[:, None] - rgb[None], axis=-1)
        same = np.array([[a == b for b in cols] for a in cols])
        assert d[~same].min() > 60


def test_svg_is_reproducible(case, tmp_path):
    _, outl = case
    a = preview.write_preview(outl, tmp_path / "a.svg").read_bytes()
    b = preview.write_preview(outl, tmp_path / "b.svg").read_bytes()
    assert a == b


def test_preview_rejects_unknown_extension(case, tmp_path):
    _, outl = case
    with pytest.raises(SpecError, match=".svg or .png"):
        preview.write_preview(outl, tmp_path / "a.jpg")


# ----------------------------------------------------------------- build
def test_build_writes_every_format(written):
    coil, outl, paths = written
    assert set(paths) == set(tracecoil.export.FORMATS)
    for fmt, p in paths.items():
        assert p.name == f"{coil.name}.{fmt}" and p.stat().st_size > 0
    assert sorted(os.listdir(paths["dxf"].parent)) == sorted(p.name for p in paths.values())
    data = json.loads(paths["json"].read_text(encoding="utf-8"))
    assert data["name"] == coil.name
    assert_allclose([l["copper_area_mm2"] for l in data["layers"]], [outl.area_mm2(l["layer"]) for l in data["layers"]], rtol=1e-12)


def test_build_from_design_and_file(tmp_path):
    design = Design(coil=make_coil_spec({"shape": "hexagon", "outer_mm": 12, "turns": 3, "width_mm": 0.3, "gap_mm": 0.3}), board=make_board_spec({"layers": 2}), name="hexa")
    paths = build(design, tmp_path / "a", formats=("json", "gds"))
    assert sorted(p.name for p in paths.values()) == ["hexa.gds", "hexa.json"]
    toml = tmp_path / "d.toml"
    toml.write_text('[design]\nname = "fromfile"\n[coil]\nshape = "circle"\nouter_mm = 10\nturns = 3\nwidth_mm = 0.2\ngap_mm = 0.2\n', encoding="utf-8")
    paths = build(toml, tmp_path / "b", formats=("dxf",))
    assert paths["dxf"].name == "fromfile.dxf" and paths["dxf"].is_file()


@pytest.mark.parametrize("formats, match", [(("dxf", "pdf"), "pdf"), ((), "empty")])
def test_build_rejects_bad_formats(formats, match, tmp_path):
    with pytest.raises(SpecError, match=match):
        build(COILS["square2"](), tmp_path / "o", formats=formats)
    assert not (tmp_path / "o").exists()


def test_build_rejects_unusable_name(tmp_path):
    coil = COILS["square2"]()
    from dataclasses import replace

    with pytest.raises(SpecError, match="cannot name a file"):
        build(replace(coil, name="../evil"), tmp_path)


# ----------------------------------------------------------------- atomicity
def _boom(*args, **kwargs):
    filename = args[1]
    with open(filename, "wb") as f:  # a half-written file, then failure
        f.write(b"HEADER")
    raise RuntimeError("disk on fire")


@pytest.mark.parametrize("fails", ["gds", "json"])
def test_failed_build_leaves_nothing(fails, tmp_path, monkeypatch):
    coil = COILS["square2"]()
    if fails == "gds":
        monkeypatch.setattr(gds, "save_gds", _boom)
    else:
        monkeypatch.setattr(json, "dumps", lambda *a, **k: (_ for _ in ()).throw(RuntimeError("disk on fire")))
    out = tmp_path / "new"
    with pytest.raises(RuntimeError, match="disk on fire"):
        build(coil, out)
    assert not out.exists()  # made by this run, left empty, removed
    # an existing directory with earlier outputs: they stay as they were
    old = tmp_path / "old"
    old.mkdir()
    (old / "square2.dxf").write_text("earlier run", encoding="utf-8")
    with pytest.raises(RuntimeError):
        build(coil, old)
    assert sorted(os.listdir(old)) == ["square2.dxf"]
    assert (old / "square2.dxf").read_text(encoding="utf-8") == "earlier run"


def test_failed_single_writer_leaves_nothing(tmp_path, monkeypatch):
    outl = outlines(COILS["square2"]())
    monkeypatch.setattr(gds, "save_gds", _boom)
    with pytest.raises(RuntimeError):
        gds.write_gds(outl, tmp_path / "a.gds")
    assert list(tmp_path.iterdir()) == []


def test_staging_rolls_back_when_a_rename_fails(tmp_path, monkeypatch):
    real = os.replace
    calls = []

    def flaky(src, dst):
        calls.append(dst)
        if len(calls) == 2:
            raise OSError("rename failed")
        real(src, dst)

    monkeypatch.setattr(atomic.os, "replace", flaky)
    with pytest.raises(OSError, match="rename failed"):
        with atomic.Staging() as stage:
            stage.path(tmp_path / "a").write_text("a")
            stage.path(tmp_path / "b").write_text("b")
    assert len(calls) == 2
    assert list(tmp_path.iterdir()) == []


def test_atomic_json_and_permissions(tmp_path):
    with pytest.raises(ValueError):
        atomic.write_json(tmp_path / "bad.json", {"x": float("nan")})
    with pytest.raises(TypeError):
        atomic.write_json(tmp_path / "bad.json", {"x": object()})
    assert list(tmp_path.iterdir()) == []
    p = atomic.write_json(tmp_path / "ok.json", {"x": 1.5})
    assert json.loads(p.read_text(encoding="utf-8")) == {"x": 1.5}
    mask = os.umask(0)
    os.umask(mask)
    assert p.stat().st_mode & 0o777 == 0o666 & ~mask
    with pytest.raises(ValueError, match="already staged"):
        with atomic.Staging() as stage:
            stage.path(tmp_path / "twice")
            stage.path(tmp_path / "twice")
    assert sorted(os.listdir(tmp_path)) == ["ok.json"]
