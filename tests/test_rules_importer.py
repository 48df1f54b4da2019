"""Reading outline files made elsewhere: DXF and GDSII round trips through
tracecoil's own exporters give the same check result as the outlines in
memory; hand-written DXF with other layer names works through a layer map;
broken or empty files give a clear SpecError."""

from __future__ import annotations

import ezdxf
import gdstk
import numpy as np
import pytest
from numpy.testing import assert_allclose

from tracecoil import spiral
from tracecoil.errors import SpecError
from tracecoil.export.dxf import write_dxf
from tracecoil.export.gds import write_gds
from tracecoil.outline import outlines
from tracecoil.rules import check, geometry_only, load_rules
from tracecoil.rules.importer import parse_layer_map, read_outlines

RULES = geometry_only(load_rules("standard"))


def _summary(res):
    return sorted((f.rule, f.layer, round(f.at[0], 3), round(f.at[1], 3), round(f.measured, 4)) for f in res.findings)


@pytest.fixture(scope="module")
def coil():
    # a square coil with a width defect (0.12 mm trace) on both layers and a board edge close by
    return spiral(shape="square", outer_mm=12, turns=4, width_mm=0.12, gap_mm=0.2, layers=2, board={"layers": 2, "outline_mm": [15.4, 15.4]})


@pytest.mark.parametrize("writer, suffix", [(write_dxf, "dxf"), (write_gds, "gds")])
def test_round_trip_gives_the_same_findings(tmp_path, coil, writer, suffix):
    o = outlines(coil, tolerance_mm=1e-3)
    path = writer(o, tmp_path / f"coil.{suffix}")
    back = read_outlines(path, tolerance_mm=1e-3)
    assert sorted(back.copper) == [1, 2] and back.layer_names == {1: "top", 2: "bottom"}
    for layer in (1, 2):
        # GDS rounds vertices to 1 nm: areas agree to ~1e-7 relative
        assert_allclose(back.copper[layer].area, o.copper[layer].area, rtol=1e-6)
    assert_allclose(back.drills, o.drills, atol=2e-6)  # GDS drill polygons on a 1 nm grid
    assert back.board is not None
    ours, theirs = check(o, RULES), check(back, RULES)
    assert {f.rule for f in ours.findings} == {"MIN_WIDTH", "EDGE_CLEARANCE"}
    if suffix == "dxf":  # same coordinates: same places
        assert _summary(ours) == _summary(theirs)
    else:  # the 1 nm grid moves distances by ~1e-6 mm, so the narrowest of many equal places may move
        assert [s[:2] + s[4:] for s in _summary(ours)] == [s[:2] + s[4:] for s in _summary(theirs)]


def test_dxf_from_another_tool_with_a_layer_map(tmp_path):
    doc = ezdxf.new("R2010")
    doc.units = ezdxf.units.IN  # inches: the reader must convert
    msp = doc.modelspace()
    # 8 mil trace drawn as a wide polyline, a 5 mil gap to a closed outline, a pad and a hole
    msp.add_lwpolyline([(0, 0), (0.4, 0)], dxfattribs={"layer": "Top", "const_width": 0.008})
    msp.add_lwpolyline([(0, 0.009), (0.4, 0.009), (0.4, 0.02), (0, 0.02)], close=True, dxfattribs={"layer": "Top"})
    msp.add_circle((0.5, 0), 0.012, dxfattribs={"layer": "Top"})
    msp.add_circle((0.5, 0), 0.006, dxfattribs={"layer": "Holes"})
    msp.add_line((0, 0), (1, 1), dxfattribs={"layer": "Top"})
    msp.add_text("label", dxfattribs={"layer": "Notes"})
    path = tmp_path / "other.dxf"
    doc.saveas(path)
    notes = []
    o = read_outlines(path, layer_map="TOP=1, HOLES=drill", notes=notes)
    assert sorted(o.copper) == [1]
    assert_allclose(o.drills, [[12.7, 0.0, 0.3048]], rtol=1e-9)
    res = check(o, RULES)
    gaps = [f for f in res.findings if f.rule == "MIN_GAP"]
    # wide polyline edge at y = 0.004 in, closed outline from y = 0.009 in: 5 mil apart
    assert len(gaps) == 1
    assert_allclose(gaps[0].measured, 0.005 * 25.4, rtol=1e-9)
    assert any("LINE" in n for n in notes) and any("Notes" in n for n in notes)


def test_gds_with_its_own_layer_numbers(tmp_path):
    lib = gdstk.Library(unit=1e-6, precision=1e-9)
    cell = lib.new_cell("TOP")
    cell.add(gdstk.rectangle((0, 0), (5000, 200), layer=11, datatype=2))
    cell.add(gdstk.rectangle((0, 300), (5000, 500), layer=11, datatype=2))  # 100 um gap: too close
    cell.add(gdstk.rectangle((-1000, -1000), (6000, 1500), layer=63, datatype=0))
    path = tmp_path / "other.gds"
    lib.write_gds(str(path))
    o = read_outlines(path, layer_map={"11/2": 1, "63": "board"})
    res = check(o, RULES)
    assert {f.rule for f in res.findings} == {"MIN_GAP"}
    assert_allclose(res.findings[0].measured, 0.1, atol=1e-9)
    assert o.board is not None and abs(o.board.area - 7 * 2.5) < 1e-9


@pytest.mark.parametrize(
    "name, content, match",
    [
        ("empty.gds", b"", "not a readable GDSII file"),
        ("junk.gds", b"\x00\x06\x00\x02\x00\x07junk", "not a readable GDSII file"),
        ("empty.dxf", b"", "cannot read the DXF file"),
        ("junk.dxf", b"this is not a drawing", "cannot read the DXF file"),
        ("nothing.dxf", b"0\nSECTION\n2\nENTITIES\n0\nENDSEC\n0\nEOF\n", "no copper found"),
        ("coil.txt", b"x", "unknown outline file type"),
    ],
)
def test_malformed_files_give_clear_errors(tmp_path, name, content, match):
    p = tmp_path / name
    p.write_bytes(content)
    with pytest.raises(SpecError, match=match):
        read_outlines(p)


def test_gds_without_mapped_copper_lists_what_it_has(tmp_path):
    lib = gdstk.Library()
    lib.new_cell("A").add(gdstk.rectangle((0, 0), (1, 1), layer=77, datatype=3))
    p = tmp_path / "odd.gds"
    lib.write_gds(str(p))
    with pytest.raises(SpecError, match="the file has layers: 77/3"):
        read_outlines(p)


def test_layer_map_forms(tmp_path):
    assert parse_layer_map({"top": 1, "5/1": "board"}) == {"TOP": 1, "5/1": "board"}
    f = tmp_path / "map.toml"
    f.write_text('[layers]\nCU1 = 1\nCU2 = 2\n"100/0" = "drill"\n')
    assert parse_layer_map(str(f)) == {"CU1": 1, "CU2": 2, "100/0": "drill"}
    for bad, match in (("TOP:1", "NAME=1"), ("TOP=0", "copper layer number"), ("TOP=wire", "copper layer number")):
        with pytest.raises(SpecError, match=match):
            parse_layer_map(bad)
    with pytest.raises(SpecError, match=r"\[layers\]"):
        (tmp_path / "empty.toml").write_text("")
        parse_layer_map(str(tmp_path / "empty.toml"))
    assert np.all(parse_layer_map(None) == {})
