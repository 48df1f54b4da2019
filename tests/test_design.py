"""Design files and specs: loading, defaults and every validation error."""

import pytest

from tracecoil import GeometryError, SpecError, load_design, spiral
from tracecoil.design import BoardSpec, CoilSpec, design_from_dict
from tracecoil.generators import coil_from_design
from tracecoil.templates import design_names, template_path


@pytest.mark.parametrize("name", design_names())
def test_every_template_loads_and_builds(name):
    d = load_design(template_path(name))
    coil = coil_from_design(d)
    assert d.name == name
    assert len(coil.winding_traces()) == d.coil.layers
    assert {t.name for t in coil.terminals} == {"A", "B"}


def test_file_and_script_say_the_same(tmp_path):
    f = tmp_path / "x.toml"
    f.write_text('[coil]\nshape = "hexagon"\nouter_mm = 12\nturns = 4.5\nwidth_mm = "6 mil"\ngap_mm = 0.2\n')
    a = coil_from_design(load_design(f))
    b = spiral(shape="hexagon", outer_mm=12, turns=4.5, width_mm="6 mil", gap_mm=0.2)
    assert len(a.traces) == len(b.traces)
    for ta, tb in zip(a.traces, b.traces):
        assert (ta.points_mm == tb.points_mm).all()


def test_units_in_strings():
    s = CoilSpec(width_mm="6 mil", gap_mm="0.2 mm", outer_mm="2 cm")
    assert s.width_mm == pytest.approx(0.1524)
    assert s.outer_mm == 20.0
    assert BoardSpec(copper_um="2 oz").copper_um == (70.0, 70.0)


@pytest.mark.parametrize(
    "coil, words",
    [
        ({"widht_mm": 0.2}, ["widht_mm", "did you mean 'width_mm'"]),
        ({"shape": "triangle"}, ["shape", "'triangle'", "'circle'"]),
        ({"outer_mm": -5}, ["outer_mm", "> 0", "-5"]),
        ({"outer_mm": 0}, ["outer_mm", "> 0"]),
        ({"width_mm": 0.01}, ["width_mm", ">= 0.025", "0.01"]),
        ({"gap_mm": 0.0}, ["gap_mm", ">= 0.025"]),
        ({"turns": 0}, ["turns", ">= 0.25"]),
        ({"layers": 0}, ["layers", "1 to 32"]),
        ({"layers": 2.5}, ["layers", "whole number"]),
        ({"wiring": "both"}, ["wiring", "'series'"]),
        ({"direction": "left"}, ["direction", "'ccw'"]),
        ({"shape": "rectangle"}, ["outer_height_mm"]),
        ({"shape": "polygon"}, ["sides"]),
        ({"shape": "polygon", "sides": 2}, ["sides", "3 to 64"]),
        ({"sides": 5}, ["sides", "'polygon' only"]),
        ({"corner": "round"}, ["corner_mm > 0"]),
        ({"via_pad_mm": 0.2}, ["via_pad_mm", "via_drill_mm"]),
        ({"width_mm": "0.2 furlong"}, ["width_mm", "unknown length unit"]),
    ],
)
def test_bad_coil_values_name_the_field(coil, words):
    with pytest.raises(SpecError) as e:
        design_from_dict({"coil": coil})
    for w in words:
        assert w in str(e.value)


def test_unknown_table_and_missing_coil():
    with pytest.raises(SpecError, match="unknown table 'boar'.*did you mean 'board'"):
        design_from_dict({"coil": {}, "boar": {}})
    with pytest.raises(SpecError, match=r"no \[coil\] table"):
        design_from_dict({"board": {}})


def test_board_errors():
    with pytest.raises(SpecError, match="copper_um lists 3 thicknesses but board.layers = 2"):
        BoardSpec(layers=2, copper_um=[35, 35, 35])
    with pytest.raises(SpecError, match="dielectric_mm must list 3"):
        BoardSpec(layers=4, dielectric_mm=[0.2])
    with pytest.raises(SpecError, match="unknown key 'thickness' in \\[board\\].*thickness_mm"):
        design_from_dict({"coil": {}, "board": {"thickness": 1}})


def test_layers_beyond_board():
    with pytest.raises(SpecError, match="beyond board.layers = 2"):
        spiral(layers=4, board={"layers": 2})


def test_odd_series_without_spare_layer_is_explained():
    with pytest.raises(SpecError, match="spare copper layer"):
        spiral(layers=3, turns=4, board={"layers": 3})
    # the alternative the message offers works: a terminal pad at the centre
    c = spiral(layers=3, turns=4, return_lead="none", board={"layers": 3})
    assert c.vias[c.terminals[1].via].role == "terminal"


def test_turns_that_do_not_fit_say_how_many_fit():
    with pytest.raises(GeometryError) as e:
        spiral(shape="circle", outer_mm=10, turns=30, width_mm=0.2, gap_mm=0.2)
    msg = str(e.value)
    assert "turns = 30" in msg and "at most about" in msg
    fit = float(msg.split("at most about")[1].split()[0])
    spiral(shape="circle", outer_mm=10, turns=fit, width_mm=0.2, gap_mm=0.2)  # the advice holds


def test_load_design_errors(tmp_path):
    with pytest.raises(SpecError, match="does not exist"):
        load_design(tmp_path / "nope.toml")
    bad = tmp_path / "bad.toml"
    bad.write_text("[coil\nshape=1")
    with pytest.raises(SpecError, match="not valid TOML"):
        load_design(bad)
    named = tmp_path / "n.toml"
    named.write_text('[design]\nname = "a b/c"\n[coil]\n')
    with pytest.raises(SpecError, match="design.name"):
        load_design(named)
