"""Tests of the HTML design report (tracecoil.report) and the report command.

The page is parsed with the standard library's html.parser; its numbers
are compared with predict, check and signal called directly on the same
coil; headless Chromium opens it (when installed; under CI it must be).
"""

import base64
import json
import os
import shutil
import struct
import subprocess
from html.parser import HTMLParser

import pytest
from numpy.testing import assert_allclose
from report_designs import write_designs

from tracecoil.cli import main
from tracecoil.design import load_design
from tracecoil.errors import SpecError
from tracecoil.generators import coil_from_design
from tracecoil.predict import _eng, predict
from tracecoil.report import read_sweep_csv, write_report
from tracecoil.report.html import DATA_ID, SECTIONS
from tracecoil.rules import check, load_rules
from tracecoil.targets import Dipole, Linear, signal
from tracecoil.variants import sweep

FREQ = 1e6
SAMPLES = 41
POINTS = 2  # filament-model frequencies of the L, R, Q plot: the slow part


class Page(HTMLParser):
    """Collects what the tests look at."""

    def __init__(self):
        super().__init__()
        self.tags, self.imgs, self.hrefs, self.sections, self.scripts = [], [], [], [], []
        self.text, self._stack, self._section, self.section_imgs = [], [], None, {}
        self.data_json = None
        self._in_data = False

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        self.tags.append(tag)
        if tag == "section":
            self._section = a.get("id")
            self.sections.append(self._section)
        if tag == "img":
            self.imgs.append(a.get("src", ""))
            self.section_imgs.setdefault(self._section, []).append(a["src"])
        if "href" in a:
            self.hrefs.append(a["href"])
        if tag == "script":
            self.scripts.append(a)
            self._in_data = a.get("id") == DATA_ID

    def handle_endtag(self, tag):
        if tag == "script":
            self._in_data = False

    def handle_data(self, data):
        if self._in_data:
            self.data_json = (self.data_json or "") + data
        else:
            self.text.append(data)


def parse(path):
    p = Page()
    p.feed(path.read_text(encoding="utf-8"))
    p.close()
    return p


def png_size(src: str) -> tuple[int, int]:
    raw = base64.b64decode(src.split(",", 1)[1])
    assert raw[:8] == b"\x89PNG\r\n\x1a\n"
    return struct.unpack(">II", raw[16:24])  # IHDR width, height


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    return write_designs(tmp_path_factory.mktemp("designs"))


@pytest.fixture(scope="module")
def magnet_report(files, tmp_path_factory):
    out = tmp_path_factory.mktemp("report-a")
    path = write_report(files["magnet"], out, freq_hz=FREQ, points=POINTS, samples=SAMPLES, progress=False)
    return path, parse(path)


@pytest.fixture(scope="module")
def sweep_records(files):
    return sweep(load_design(files["narrow"]), {"turns": "2:3"}, ["inductance", "resistance_dc", "rules"], executor="serial", progress=False)


@pytest.fixture(scope="module")
def narrow_report(files, sweep_records, tmp_path_factory):
    out = tmp_path_factory.mktemp("report-narrow")
    path = write_report(files["narrow"], out, freq_hz=FREQ, points=POINTS, sweep=sweep_records, progress=False)
    return path, parse(path)


def test_page_parses_and_is_self_contained(magnet_report):
    path, page = magnet_report
    html = path.read_text(encoding="utf-8")
    assert html.startswith("<!DOCTYPE html>")
    assert page.imgs and all(s.startswith("data:image/png;base64,") for s in page.imgs)
    assert all(h.startswith("#") for h in page.hrefs)  # only links inside the page
    assert "link" not in page.tags and "iframe" not in page.tags
    assert all(s.get("type") == "application/json" for s in page.scripts)  # data only, no code
    assert "http://" not in html and "https://" not in html
    for w, h in map(png_size, page.imgs):
        assert w > 100 and h > 100
    assert sorted(p.name for p in path.parent.iterdir()) == [path.name]  # written atomically: no temporaries


def test_every_section_is_there(magnet_report, narrow_report):
    _, page = magnet_report
    assert page.sections == [s for s in SECTIONS if s != "sweep"]  # no sweep given
    _, page = narrow_report
    assert page.sections == [s for s in SECTIONS if s != "signal"]  # no [target]
    assert "#geometry" in page.hrefs and "#sweep" in page.hrefs


def test_one_preview_per_copper_layer_plus_all(magnet_report, files):
    _, page = magnet_report
    coil = coil_from_design(load_design(files["magnet"]))
    from tracecoil.outline import outlines

    n = len(outlines(coil).copper)
    assert n == 2
    assert len(page.section_imgs["geometry"]) == 1 + n
    for s in ("frequency", "field", "signal", "rules"):
        assert len(page.section_imgs[s]) == 1, s


def test_numbers_equal_predict_check_and_signal(magnet_report, files):
    _, page = magnet_report
    data = json.loads(page.data_json)
    text = " ".join(page.text)
    coil = coil_from_design(load_design(files["magnet"]))
    p = predict(coil, freq_hz=FREQ)
    # Same deterministic computation on the same coil; 1e-9 leaves room for
    # threaded summation order only.
    for key in ("inductance_h", "inductance_dc_h", "resistance_dc_ohm", "resistance_ac_ohm", "capacitance_f", "srf_hz", "q", "q_with_capacitance"):
        assert_allclose(data["prediction"][key], getattr(p, key), rtol=1e-9, err_msg=key)
    for value, unit in ((p.inductance_h, "H"), (p.resistance_dc_ohm, "ohm"), (p.resistance_ac_ohm, "ohm"), (p.capacitance_f, "F"), (p.srf_hz, "Hz")):
        assert _eng(value, unit) in text
    assert f"{p.q:.4g}" in text
    for statement in p.accuracy.values():
        assert statement in text
    r = check(coil, load_rules("standard"))
    assert data["check"]["ok"] is r.ok is True
    assert data["check"]["violations"] == 0
    assert "PASS: no rule broken" in text
    s = signal(coil, Dipole(moment_am2=(0, 0, 0.05)), Linear(start_mm=(-10, 0, 3), direction=(1, 0, 0), speed_m_s=1.0, distance_mm=20), samples=SAMPLES)
    assert_allclose(data["signal"]["peak_emf_v"], s.peak_emf_v, rtol=1e-12)  # same inputs, same code path
    assert s.summary_lines()[3].strip() in text
    assert_allclose(data["summary"]["outer_mm"], 8.0, rtol=1e-9)  # the square's outer size as designed
    assert "three-turn test coil under a passing dipole" in text


def test_rule_failures_findings_and_cautions(narrow_report, files):
    _, page = narrow_report
    data = json.loads(page.data_json)
    text = " ".join(page.text)
    r = check(coil_from_design(load_design(files["narrow"])), load_rules("standard"))
    assert not r.ok
    assert data["check"]["violations"] == len(r.findings)
    assert f"FAIL: {len(r.findings)} violation" in text
    for f in r.findings:
        assert f.message in text
    assert data["design_problems"] and "narrower than the 0.15 mm minimum" in data["design_problems"][0]
    for c in r.cautions:  # the rule checker's safety cautions
        assert c in text
    assert "defer to local codes and licensed practice" in text


def test_sweep_plots_from_records_and_csv(narrow_report, sweep_records, files, tmp_path):
    _, page = narrow_report
    # inductance_h, resistance_dc_ohm and rules_margin against turns, and one trade-off
    assert len(page.section_imgs["sweep"]) == 4
    text = " ".join(page.text)
    assert "2 variant(s), 0 failed." in text
    # the same records read back from a results file
    csv_path = tmp_path / "s.csv"
    rows = sweep(load_design(files["narrow"]), {"turns": "2:3"}, ["inductance", "resistance_dc", "rules"], executor="serial", progress=False, out_csv=csv_path)
    back = read_sweep_csv(csv_path)
    assert [r["turns"] for r in back] == [r["turns"] for r in rows]
    assert [r["inductance_h"] for r in back] == [r["inductance_h"] for r in sweep_records]
    assert [r["rules_ok"] for r in back] == [False, False]


def test_bad_input(tmp_path, files):
    with pytest.raises(SpecError, match="missing.toml.*does not exist"):
        write_report(tmp_path / "missing.toml", tmp_path, progress=False)
    with pytest.raises(SpecError, match="points must be"):
        write_report(files["narrow"], tmp_path, points=0, progress=False)
    with pytest.raises(SpecError, match="does not exist"):
        read_sweep_csv(tmp_path / "none.csv")
    bad = tmp_path / "bad.csv"
    bad.write_text("a,b\n1,2\n")
    with pytest.raises(SpecError, match="not a sweep results file"):
        read_sweep_csv(bad)
    assert not list(tmp_path.glob("*.html"))


def test_command(tmp_path, files, capsys):
    rc = main(["report", str(files["narrow"]), "--out", str(tmp_path), "--points", "1", "--freq", "500k", "--no-progress"])
    assert rc == 0
    path = tmp_path / "narrow-c-report.html"
    assert f"wrote {path}" in capsys.readouterr().out
    data = json.loads(parse(path).data_json)
    assert data["prediction"]["frequency_hz"] == 500e3
    assert main(["report", str(tmp_path / "nope.toml"), "--out", str(tmp_path)]) == 2
    assert "nope.toml" in capsys.readouterr().err
    assert main(["report", str(files["narrow"]), "--tradeoff", "a,b", "--out", str(tmp_path)]) == 2
    assert "--tradeoff needs --sweep" in capsys.readouterr().err


# ----------------------------------------------------------------------------
# headless Chromium
# ----------------------------------------------------------------------------

PROBE = ("<script>window.addEventListener('load',function(){document.body.setAttribute('data-probe',"
         "JSON.stringify(Array.from(document.images).map(function(i){return [i.naturalWidth,i.naturalHeight]})));%s});</script>")


def _chromium():
    exe = shutil.which("chromium") or shutil.which("chromium-browser")
    if exe is None:
        if os.environ.get("CI") == "true":
            pytest.fail("CI=true but chromium is not installed (.ci/run must install the Debian package 'chromium')")
        pytest.skip("headless Chromium is not installed (Debian package 'chromium'); the page check needs it")
    return exe


def _open(exe, html_path, tmp_path, extra_js=""):
    """Load a copy of the page with a probe that records every image's
    decoded size; return (sizes, console lines)."""
    import re

    tmp_path.mkdir(parents=True, exist_ok=True)
    page = tmp_path / "probe.html"
    page.write_text(html_path.read_text(encoding="utf-8").replace("</body>", PROBE % extra_js + "</body>"), encoding="utf-8")
    run = subprocess.run(
        [exe, "--headless", "--no-sandbox", "--disable-gpu", "--enable-logging=stderr", "--v=0", "--virtual-time-budget=5000",
         f"--user-data-dir={tmp_path / 'profile'}", "--dump-dom", page.as_uri()],
        capture_output=True, text=True, timeout=120,
    )
    m = re.search(r'data-probe="([^"]*)"', run.stdout)
    assert m, f"the page did not finish loading in Chromium: {run.stderr[-2000:]}"
    sizes = json.loads(m.group(1).replace("&quot;", '"'))
    console = [line for line in run.stderr.splitlines() if ":CONSOLE" in line]
    return sizes, console


def test_page_opens_in_chromium_without_console_errors(magnet_report, tmp_path):
    exe = _chromium()
    path, page = magnet_report
    sizes, console = _open(exe, path, tmp_path)
    assert console == []
    assert len(sizes) == len(page.imgs)
    assert all(w > 0 and h > 0 for w, h in sizes)
    # The probe sees console errors when there are some (so the check above can fail).
    _, console = _open(exe, path, tmp_path / "control", extra_js="console.error('deliberate')")
    assert any("deliberate" in line for line in console)
