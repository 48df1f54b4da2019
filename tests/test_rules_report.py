"""Rule-check reports (text, JSON, marked-up picture) and the ``tracecoil
check`` command: output content, exit codes 0 / 1 / 2, atomic files."""

from __future__ import annotations

import json

import pytest

from rules_layouts import RULES, bulged_pair, make_outlines, narrowed_trace
from tracecoil import spiral
from tracecoil.cli import main
from tracecoil.export.gds import write_gds
from tracecoil.outline import outlines
from tracecoil.rules import check
from tracecoil.rules.report import text_report, write_picture, write_reports


@pytest.fixture(scope="module")
def result():
    notch, _ = narrowed_trace()
    bulge, _ = bulged_pair()
    from shapely import affinity

    g = notch.union(affinity.translate(bulge, 0, 2))
    return check(make_outlines({1: g}, n_layers=1), RULES, name="seeded")


def test_text_report_lists_each_violation_with_values(result):
    text = text_report(result)
    assert "Result: 2 violations" in text
    assert "MIN_WIDTH on top at (4." in text and "measured 0.1800 mm, required >= 0.2000 mm" in text
    assert "MIN_GAP on top at (6." in text and "measured 0.1900 mm" in text
    assert "a value within 0.1 um of its limit passes" in text


def test_json_and_picture(tmp_path, result):
    written = write_reports(result, tmp_path, stem="seeded")
    assert sorted(p.name for p in tmp_path.iterdir()) == ["seeded-check.json", "seeded-check.png", "seeded-check.svg", "seeded-check.txt"]
    data = json.loads(written["json"].read_text())
    assert data["ok"] is False and data["violations"] == 2
    assert {f["rule"] for f in data["findings"]} == {"MIN_WIDTH", "MIN_GAP"}
    f = next(f for f in data["findings"] if f["rule"] == "MIN_WIDTH")
    assert abs(f["measured"] - 0.18) < 1e-9 and f["limit"] == 0.2 and len(f["span_mm"]) == 2
    svg = written["svg"].read_text()
    assert "MIN_WIDTH top 0.1800 &lt; 0.2000 mm" in svg  # the numbered list beside the drawing
    assert written["png"].read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


def test_picture_needs_a_known_format(tmp_path, result):
    with pytest.raises(ValueError, match=".svg or .png"):
        write_picture(result, tmp_path / "x.pdf")
    assert list(tmp_path.iterdir()) == []


def _design(tmp_path, **coil):
    base = {"shape": "square", "outer_mm": 12, "turns": 4, "width_mm": 0.2, "gap_mm": 0.2, "layers": 2}
    base.update(coil)
    lines = ["[design]", 'name = "t"', 'rules = "standard"', "[coil]"] + [f"{k} = {json.dumps(v)}" for k, v in base.items()]
    p = tmp_path / "t.toml"
    p.write_text("\n".join(lines) + "\n")
    return p


def test_cli_clean_design_exits_0(tmp_path, capsys):
    assert main(["check", str(_design(tmp_path))]) == 0
    out = capsys.readouterr().out
    assert "Result: clean" in out and "Cautions" in out


def test_cli_violations_exit_1_and_write_reports(tmp_path, capsys):
    design = _design(tmp_path, width_mm=0.12)
    assert main(["check", str(design), "--out", str(tmp_path / "out")]) == 1
    out = capsys.readouterr().out
    assert "MIN_WIDTH" in out and "Design numbers that break the rule set" in out and "width_mm = 0.12" in out
    assert sorted(p.name for p in (tmp_path / "out").iterdir()) == ["t-check.json", "t-check.png", "t-check.svg", "t-check.txt"]
    # a finer rule set accepts the same design
    assert main(["check", str(design), "--rules", "fine"]) == 0


def test_cli_json_current_and_voltage(tmp_path, capsys):
    assert main(["check", str(_design(tmp_path)), "--json", "--current", "2", "--voltage", "0"]) == 1
    data = json.loads(capsys.readouterr().out)
    assert data["current_a"] == 2.0 and {f["rule"] for f in data["findings"]} == {"TEMPERATURE_RISE"}
    assert data["design_problems"] and "IPC-2221" in data["design_problems"][0]


def test_cli_outline_file_and_bad_input(tmp_path, capsys):
    gds = write_gds(outlines(spiral(shape="square", outer_mm=12, turns=4, width_mm=0.12, gap_mm=0.2)), tmp_path / "c.gds")
    assert main(["check", str(gds), "--layer-map", "1/0=1,2/0=2,100/0=drill"]) == 1
    assert "MIN_WIDTH" in capsys.readouterr().out
    bad = tmp_path / "bad.gds"
    bad.write_bytes(b"")
    assert main(["check", str(bad)]) == 2
    assert "not a readable GDSII file" in capsys.readouterr().err
    assert main(["check", str(_design(tmp_path)), "--rules", "nonesuch"]) == 2
    assert main(["check", str(gds), "--max-turns"]) == 2
    assert main(["check", str(_design(tmp_path)), "--layer-map", "1/0=1"]) == 2


def test_cli_max_turns(tmp_path, capsys):
    assert main(["check", str(_design(tmp_path, width_mm=0.3, gap_mm=0.3)), "--max-turns"]) == 0
    out = capsys.readouterr().out
    assert "with the design's width and gap (0.3 / 0.3 mm)" in out
    assert "with the rule set's minimum width and gap (0.15 / 0.15 mm)" in out
    assert out.count("passes the rule check") == 2
