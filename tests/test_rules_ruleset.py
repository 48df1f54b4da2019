"""Rule sets: bundled templates, loading by name or path, validation
errors that name the key, and selection from a design file."""

from __future__ import annotations

import tomllib

import pytest

from tracecoil.design import design_from_dict, load_design
from tracecoil.errors import SpecError
from tracecoil.rules import RuleSet, design_rules, load_rules, rule_set_names, rules_from_dict
from tracecoil.rules.ruleset import RULE_KEYS
from tracecoil.templates import TEMPLATE_DIR


@pytest.mark.parametrize("name", ["standard", "fine"])
def test_bundled_rule_sets_state_every_value_and_mark_their_origin(name):
    path = TEMPLATE_DIR / f"rules-{name}.toml"
    text = path.read_text()
    table = tomllib.loads(text)["rules"]
    assert set(table) == set(RULE_KEYS)  # nothing left to a hidden default
    assert "common practice" in text
    r = load_rules(name)
    assert r.name == name and r.source == str(path)


def test_fine_set_is_finer_than_standard():
    s, f = load_rules("standard"), load_rules("fine")
    for key in ("min_width_outer_mm", "min_width_inner_mm", "min_gap_outer_mm", "min_gap_inner_mm", "min_drill_mm", "min_annular_ring_mm"):
        assert getattr(f, key) < getattr(s, key), key


def test_names_paths_and_template_alias(tmp_path):
    assert {"standard", "fine"} <= set(rule_set_names())
    assert load_rules(None).name == "standard"
    assert load_rules("rules-fine").name == "fine"  # the template file's own name
    p = tmp_path / "mine.toml"
    p.write_text('[rules]\nname = "mine"\nmin_width_outer_mm = "5 mil"\n')
    r = load_rules(str(p))
    assert r.name == "mine" and abs(r.min_width_outer_mm - 0.127) < 1e-12
    assert load_rules(r) is r


@pytest.mark.parametrize(
    "text, match",
    [
        ('[rules]\nmin_widht_outer_mm = 0.1\n', "did you mean 'min_width_outer_mm'"),
        ('[rules]\nmin_gap_outer_mm = -0.1\n', "rules.min_gap_outer_mm must be > 0"),
        ('[rules]\nmin_drill_mm = "wide"\n', "min_drill_mm"),
        ('[rules]\ncondition = "wet"\n', "rules.condition must be one of"),
        ('[rules]\nmax_temp_rise_c = 0\n', "max_temp_rise_c"),
        ('[other]\nx = 1\n', "one \\[rules\\] table"),
        ('[rules\n', "not valid TOML"),
    ],
)
def test_bad_rule_files_name_the_problem(tmp_path, text, match):
    p = tmp_path / "bad.toml"
    p.write_text(text)
    with pytest.raises(SpecError, match=match):
        load_rules(str(p))


def test_unknown_name_lists_the_bundled_sets():
    with pytest.raises(SpecError, match="bundled rule sets: fine, standard"):
        load_rules("ultra")
    with pytest.raises(SpecError, match="does not exist"):
        load_rules("nowhere/rules.toml")


def test_layer_classes():
    r = RuleSet(min_width_outer_mm=0.2, min_width_inner_mm=0.1, min_gap_outer_mm=0.25, min_gap_inner_mm=0.12, copper_outer_um=35, copper_inner_um=18)
    assert [r.min_width_mm(l, 4) for l in (1, 2, 3, 4)] == [0.2, 0.1, 0.1, 0.2]
    assert [r.min_gap_mm(l, 2) for l in (1, 2)] == [0.25, 0.25]
    assert r.copper_um(2, 4) == 18 and r.copper_um(1, 1) == 35
    with pytest.raises(SpecError, match="unknown key"):
        r.with_values(min_with=1)


def test_design_selects_and_overrides_rules(tmp_path):
    own = tmp_path / "shop.toml"
    own.write_text('[rules]\nname = "shop"\nmin_gap_outer_mm = 0.3\n')
    design = tmp_path / "d.toml"
    design.write_text('[design]\nrules = "shop.toml"\n[coil]\nshape = "circle"\n[rules]\nedge_clearance_mm = 1.0\n')
    r = design_rules(load_design(design))
    assert (r.name, r.min_gap_outer_mm, r.edge_clearance_mm) == ("shop", 0.3, 1.0)  # path relative to the design file
    r = design_rules(load_design(design), "fine")  # the command line wins over [design] rules; [rules] still applies
    assert (r.name, r.edge_clearance_mm) == ("fine", 1.0)
    d = design_from_dict({"coil": {}, "rules": {"min_drill_mm": "bad"}})
    with pytest.raises(SpecError, match="min_drill_mm"):
        design_rules(d)
    assert rules_from_dict({}, base=load_rules("fine")).min_drill_mm == load_rules("fine").min_drill_mm
