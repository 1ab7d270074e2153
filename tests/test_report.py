"""The HTML report (heat2d report, run --report): every section carries the figures of
summary.json with their ±, the page is self-contained and well formed, and a real headless
browser renders it (a non-blank screenshot) and prints it to a PDF of several pages."""

from __future__ import annotations

import base64
import copy
import hashlib
import json
import os
import re
import shutil
import subprocess
import tempfile
from html.parser import HTMLParser
from pathlib import Path

import pytest

import heat2d
from heat2d.cli.main import main
from heat2d.post.writers import is_output_name
from heat2d.report import read_compare, result_report, run_report, sweep_report, write_report
from heat2d.report.model_facts import ModelFacts
from heat2d.report.run_report import summary_report
from heat2d.version import __version__
from tests.common import board

ROOT = Path(__file__).resolve().parent.parent
POWER_STAGE = ROOT / "models" / "power_stage.toml"
VOID = {"meta", "img", "br", "hr", "link", "input", "col", "wbr"}
"""HTML elements without an end tag (HTML Living Standard, 'void elements')."""


class Page(HTMLParser):
    """The parsed page: visible text, image sources, every attribute, section ids, and
    the tags left unclosed or closed out of order."""

    def __init__(self, text: str) -> None:
        super().__init__(convert_charrefs=True)
        self.stack: list[str] = []
        self.misnested: list[str] = []
        self.images: list[str] = []
        self.attrs: list[tuple[str, str, str]] = []
        self.sections: list[str] = []
        self.tags: set[str] = set()
        self.chunks: list[str] = []
        self.feed(text)
        self.close()
        self.text = re.sub(r"\s+", " ", " ".join(self.chunks))

    def handle_starttag(self, tag, attrs):
        self.tags.add(tag)
        for k, v in attrs:
            self.attrs.append((tag, k, v or ""))
        if tag == "img":
            self.images.append(dict(attrs)["src"])
        if tag == "section" and dict(attrs).get("id"):
            self.sections.append(dict(attrs)["id"])
        if tag not in VOID:
            self.stack.append(tag)

    def handle_endtag(self, tag):
        if not self.stack or self.stack[-1] != tag:
            self.misnested.append(tag)
        else:
            self.stack.pop()

    def handle_data(self, data):
        if self.stack and self.stack[-1] in ("style", "title"):
            return
        self.chunks.append(data)


@pytest.fixture(scope="module")
def run_folder(tmp_path_factory) -> Path:
    """heat2d run --report on the bundled power stage (limits, probes, an interface, a
    k(T) table, materials with notes: every part of the report)."""
    out = tmp_path_factory.mktemp("report") / "ps"
    assert main(["run", str(POWER_STAGE), "--out", str(out), "--report", "--quiet"]) == 0
    return out


@pytest.fixture(scope="module")
def page(run_folder) -> tuple[Page, str, dict]:
    text = (run_folder / "report.html").read_text(encoding="utf-8")
    summary = json.loads((run_folder / "summary.json").read_text(encoding="utf-8"))
    return Page(text), text, summary


def test_run_report_holds_the_figures_of_the_summary(page):
    parsed, _, s = page
    # The sections a design review reads (the brief of the report), by their ids.
    assert {"overview", "temperatures", "heat", "model", "numerics"} <= set(parsed.sections)
    t = s["temperature"]
    # The figures as summary.txt prints them: °C to 2 decimals, ± to 2 significant digits.
    assert f"{t['max']:.2f} ± {t['max_error']:.2g} °C" in parsed.text
    for name, shape in s["shapes"].items():
        assert f"{shape['max']:.2f} ± {shape['max_error']:.2g}" in parsed.text, name
        assert f"{shape['mean']:.2f} ± {shape['mean_error']:.2g}" in parsed.text, name
    for name, b in s["boundaries"].items():
        assert f"{b['heat_out_w']:.4g} ± {b['heat_out_error_w']:.2g}" in parsed.text, name
    for name, lim in s["limits"].items():
        assert f"{lim['margin']:.2f} ± {lim['margin_error']:.2g}" in parsed.text, name
    for name, value in s["probes"].items():
        assert f"{value:.2f} ± {s['probe_errors'][name]:.2g}" in parsed.text, name
    for name, itf in s["interfaces"].items():
        assert f"{itf['heat_w']:.4g}" in parsed.text, name
    die = s["thermal_resistance"]["mean_rise_k_per_w"]["die"]["die"]
    assert f"{die:.4g}" in parsed.text                   # the °C/W matrix
    assert f"{s['mesh']['nodes']}" in parsed.text and f"{s['mesh']['triangles']}" in parsed.text
    assert s["caution"] in parsed.text
    assert s["model"]["title"] in parsed.text
    assert f"heat2d {__version__}" in parsed.text
    # The digest is that of the model file's bytes (hashlib, the reference).
    assert hashlib.sha256(POWER_STAGE.read_bytes()).hexdigest() in parsed.text


def test_run_report_lists_each_material_with_its_values_and_source(page):
    parsed, _, _ = page
    model = heat2d.load(POWER_STAGE)
    for m in model.materials:
        assert m.note and m.note in parsed.text, m.name
    # silicon's k(T) table points (models/power_stage.toml: 148 W/(m K) at 27 °C)
    assert "148 at 27 °C" in parsed.text
    assert "Description (from the model file)" in parsed.text
    assert "A 50 mm slice through the power stage" in parsed.text   # the file's opening


def test_report_is_self_contained_and_well_formed(page):
    parsed, text, _ = page
    assert not parsed.stack and not parsed.misnested           # every tag closed, in order
    assert parsed.images, "the map is embedded"
    for src in parsed.images:
        assert src.startswith("data:image/png;base64,")
        assert base64.b64decode(src.split(",", 1)[1])[:8] == b"\x89PNG\r\n\x1a\n"
    for tag, key, value in parsed.attrs:                       # no address leaves the page
        assert not re.match(r"\s*(https?:)?//", value), (tag, key, value)
    assert not re.search(r"https?://", text)
    assert "url(" not in text and "@import" not in text
    assert not {"script", "link", "iframe", "object"} & parsed.tags
    assert "@media print" in text and "break-before: page" in text


def test_text_from_the_model_is_escaped(page):
    _, _, s = page
    s = copy.deepcopy(s)
    s["model"]["title"] = 'Board <script>alert("x")</script> & "co"'
    s["warnings"] = ["shape <u>under</u> is thin"]
    text = summary_report(s, facts=ModelFacts("m.toml", problem="not read here"))
    parsed = Page(text)
    assert "script" not in parsed.tags and "u" not in parsed.tags
    assert 'Board <script>alert("x")</script> & "co"' in parsed.text
    assert "shape <u>under</u> is thin" in parsed.text
    assert "not read here" in parsed.text                      # why the digest is missing


def test_an_exceeded_limit_is_flagged(page):
    _, _, s = page
    s = copy.deepcopy(s)
    lim = s["limits"]["die"]
    lim.update(limit=100.0, margin=lim["max"] - 100.0, exceeded=True)
    text = summary_report(s, facts=ModelFacts("m.toml"))
    parsed = Page(text)
    assert "EXCEEDED" in parsed.text
    assert f"{lim['margin']:.2f} ± {lim['margin_error']:.2g}" in parsed.text
    assert '<tr class="bad"><td>die</td>' in text          # in the shapes and limits tables
    assert text.count('<tr class="bad">') == 2


def test_package_figures_and_cut_lines(page):
    # models/power_stage.toml has a powered die and a [[cut]]: their figures as summary.json
    # holds them.
    parsed, _, s = page
    assert {"package", "cuts"} <= set(parsed.sections)
    for name, p in s["package"].items():
        for exit_name, e in p["to"].items():
            assert f"{e['resistance_k_per_w']:.4g}" in parsed.text, (name, exit_name)
            assert f"{100 * e['share']:.1f} %" in parsed.text, (name, exit_name)
    for name, c in s["cuts"].items():
        assert name in parsed.text
        assert f"{c['heat_w']:.4g} ± {c['heat_w_error']:.2g}" in parsed.text


def test_unknown_summary_keys_appear_as_tables(page):
    # Keys this report does not know by name reach the page, a value and its error in one
    # cell; so do package and cut entries of a shape it does not know.
    _, _, s = page
    s = copy.deepcopy(s)
    s["package"] = {"die": {"power_w": 10.0, "to_boundary": {
        "frame": {"resistance_k_per_w": 4.274, "heat_share": 0.9607},
        "inside_air": {"resistance_k_per_w": 2.345, "heat_share": 0.0393}}}}
    s["cuts"] = {"package top": {"heat_w": 1.234, "heat_error_w": 0.0123, "side": "up"}}
    s["novel"] = {"a": {"value_k": 3.21, "value_error_k": 0.045, "path": [[0, 1], [2, 3]]}}
    parsed = Page(summary_report(s, facts=ModelFacts("m.toml")))
    assert "4.274" in parsed.text and "0.9607" in parsed.text and "2.345" in parsed.text
    assert "1.234 ± 0.012" in parsed.text and "package top" in parsed.text
    assert "3.21 ± 0.045" in parsed.text and "novel" in parsed.text
    assert "(0, 1) → (2, 3)" in parsed.text
    assert not parsed.stack and not parsed.misnested


def test_report_command_with_a_comparison(run_folder, tmp_path):
    cmp_dir = tmp_path / "cmp"
    cmp_dir.mkdir()
    shutil.copy(run_folder / "power_stage.png", cmp_dir / "compare.png")
    data = {"a": {"folder": "a-results", "model": "a.toml", "title": "pad k = 3"},
            "b": {"folder": "b-results", "model": "b.toml", "title": "pad k = 1.5"},
            "same_geometry": True,
            "shapes": {"die": {"a": 102.62, "b": 115.64, "delta": 13.02, "error": 0.11,
                               "significant": True}},
            "probes": {"board_end": {"a": 84.64, "b": 84.65, "delta": 0.01, "error": 0.02,
                                     "significant": False}},
            "boundaries": {"frame": {"a_w": 9.72, "b_w": 9.547, "delta_w": -0.173,
                                     "error_w": 0.0005, "significant": True}},
            "resistances": {"die": {"die": {"a": 4.211, "b": 5.489, "delta": 1.278,
                                            "error": None, "significant": None}}},
            "hot_spot": {"a": {"x": 25.03, "y": 2.975, "shape": "die", "temperature": 102.62,
                               "temperature_error": 0.053},
                         "b": {"x": 24.84, "y": 2.975, "shape": "die", "temperature": 115.64,
                               "temperature_error": 0.054},
                         "delta": 13.02, "error": 0.11, "significant": True},
            "verdict": "B runs hotter\ndie max is 13.02 K higher in B (± 0.11 K)",
            "caution": "Error bars: the sum of both estimates. Estimates only."}
    (cmp_dir / "compare.json").write_text(json.dumps(data), encoding="utf-8")
    out = tmp_path / "r.html"
    assert main(["report", str(run_folder), "--out", str(out), "--compare", str(cmp_dir),
                 "--quiet"]) == 0
    parsed = Page(out.read_text(encoding="utf-8"))
    assert "compare" in parsed.sections
    assert "B runs hotter" in parsed.text
    assert "die max is 13.02 K higher in B (± 0.11 K)" in parsed.text
    assert "115.64 ± 0.054 °C in \"die\" at (24.84, 2.975)" in parsed.text   # hot spot of B
    assert "die → die" in parsed.text and "no error bars" in parsed.text   # °C/W, no ±
    assert data["caution"] in parsed.text
    assert "13.02 ± 0.11" in parsed.text and "-0.173 ± 0.0005" in parsed.text
    assert "yes: larger than the error bars" in parsed.text
    assert "no: within the error bars" in parsed.text
    assert len(parsed.images) == 2                            # the map and compare.png
    assert read_compare(cmp_dir)["_png"][:4] == b"\x89PNG"


def test_report_of_a_real_comparison(tmp_path, monkeypatch):
    # heat2d compare's own files: its verdict and the die's change reach the report.
    monkeypatch.chdir(tmp_path)
    (tmp_path / "a.toml").write_text(board(), encoding="utf-8")
    (tmp_path / "b.toml").write_text(board({"power = 0.5": "power = 1"}), encoding="utf-8")
    for name in ("a", "b"):
        assert main(["run", f"{name}.toml", "--out", name, "--quiet"]) == 0
    assert main(["compare", "a", "b", "--out", "cmp", "--quiet"]) == 0
    doc = json.loads((tmp_path / "cmp" / "compare.json").read_text(encoding="utf-8"))
    assert main(["report", "b", "--compare", "cmp", "--quiet"]) == 0
    parsed = Page((tmp_path / "b" / "report.html").read_text(encoding="utf-8"))
    assert doc["verdict"].splitlines()[0] in parsed.text
    pad = doc["shapes"]["pad"]
    assert f"{pad['delta']:.2f} ± {pad['error']:.2g}" in parsed.text
    assert not parsed.stack and not parsed.misnested


def test_report_command_refuses_what_is_no_result(tmp_path, capsys):
    (tmp_path / "empty").mkdir()
    assert main(["report", str(tmp_path / "empty")]) == 2
    assert "no readable summary.json" in capsys.readouterr().err
    assert main(["report", str(tmp_path / "missing")]) == 2
    assert "no such folder" in capsys.readouterr().err
    (tmp_path / "empty" / "sweep.csv").write_text("variant,status\n", encoding="utf-8")
    assert main(["report", str(tmp_path / "empty"), "--compare", str(tmp_path)]) == 2
    assert "not a sweep's" in capsys.readouterr().err


def test_run_report_option_leaves_a_folder_the_next_run_replaces(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    (tmp_path / "b.toml").write_text(board(), encoding="utf-8")
    assert main(["run", "b.toml", "--out", "res", "--report", "--quiet"]) == 0
    assert (tmp_path / "res" / "report.html").is_file()
    assert is_output_name("report.html") and is_output_name(".report.html.new-12-ab12")
    assert not is_output_name("notes.html")
    assert not [p for p in (tmp_path / "res").iterdir() if p.name.startswith(".")]
    # A run without --report replaces the whole result: no stale report is left.
    assert main(["run", "b.toml", "--out", "res", "--quiet"]) == 0
    assert not (tmp_path / "res" / "report.html").exists()
    # The model moved: the report says so and shows no digest; --model points to it.
    assert main(["run", "b.toml", "--out", "res", "--quiet"]) == 0
    (tmp_path / "b.toml").rename(tmp_path / "moved.toml")
    assert "model file b.toml not found" in Page(run_report(tmp_path / "res")).text
    text = run_report(tmp_path / "res", model_file=tmp_path / "moved.toml")
    assert hashlib.sha256((tmp_path / "moved.toml").read_bytes()).hexdigest() in text


def test_write_report_replaces_the_file_whole(tmp_path):
    path = tmp_path / "report.html"
    path.write_text("old", encoding="utf-8")
    write_report("<p>new</p>", path)
    assert path.read_text(encoding="utf-8") == "<p>new</p>"
    assert [p.name for p in tmp_path.iterdir()] == ["report.html"]


def test_result_report_from_memory():
    result = heat2d.solve(heat2d.parse(board(), source="board.toml"))
    parsed = Page(result_report(result))
    t = result.summary["temperature"]
    assert f"{t['max']:.2f} ± {t['max_error']:.2g} °C" in parsed.text
    assert len(parsed.images) == 1 and parsed.images[0].startswith("data:image/png;base64,")
    assert "model file board.toml not found" in parsed.text


def test_sweep_report(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    (tmp_path / "b.toml").write_text(board(), encoding="utf-8")
    assert main(["sweep", "b.toml", "--vary", "power=0.5,1", "--out", "sw", "--quiet"]) == 0
    assert main(["report", "sw", "--quiet"]) == 0
    parsed = Page((tmp_path / "sw" / "report.html").read_text(encoding="utf-8"))
    assert {"table", "plot"} <= set(parsed.sections)
    rows = list(csv_rows(tmp_path / "sw" / "sweep.csv"))
    assert len(rows) == 2
    for r in rows:                                # each variant's maximum, as the csv holds it
        assert f"{float(r['max_temperature_c']):.2f}" in parsed.text
    assert len(parsed.images) == 1 and parsed.images[0].startswith("data:image/png;base64,")
    assert hashlib.sha256((tmp_path / "b.toml").read_bytes()).hexdigest() in parsed.text
    assert "Estimates only" in parsed.text
    assert not parsed.stack and not parsed.misnested
    assert sweep_report("sw") == (tmp_path / "sw" / "report.html").read_text(encoding="utf-8")


def csv_rows(path: Path):
    import csv

    with open(path, newline="", encoding="utf-8") as f:
        yield from csv.DictReader(f)


# ---------------------------------------------------------------------------
# A real browser: Chromium from the system packages (.ci/run installs it).


def _chromium() -> str | None:
    for name in ("chromium", "chromium-browser", "/usr/bin/chromium"):
        found = shutil.which(name)
        if found:
            return found
    return None


@pytest.fixture(scope="module")
def browser() -> str:
    found = _chromium()
    if found is None:
        if os.environ.get("HEAT2D_REQUIRE_BROWSER"):
            pytest.fail("HEAT2D_REQUIRE_BROWSER is set but no chromium is installed")
        pytest.skip("no chromium on this machine (apt-get install chromium; .ci/run does)")
    return found


def _headless(browser: str, *args: str) -> None:
    with tempfile.TemporaryDirectory() as profile:
        subprocess.run([browser, "--headless", "--no-sandbox", "--disable-gpu",
                        "--disable-quic", "--no-first-run", "--disable-background-networking",
                        "--disable-component-update", "--disable-sync",
                        f"--user-data-dir={profile}", *args],
                       check=True, capture_output=True, timeout=180)


def test_browser_renders_the_report(browser, run_folder, tmp_path):
    import matplotlib.image as mpimg
    import numpy as np

    shot = tmp_path / "shot.png"
    _headless(browser, f"--screenshot={shot}", "--window-size=1200,1600",
              (run_folder / "report.html").as_uri())
    rgb = mpimg.imread(shot)[..., :3]
    assert rgb.shape[:2] == (1600, 1200)
    # Not blank (common practice for screenshot checks): text and rules darken well over
    # 3 % of a page of tables, and the page shows many colours.
    assert (rgb.min(axis=2) < 0.9).mean() > 0.03
    assert len(np.unique((rgb * 15).round().reshape(-1, 3), axis=0)) > 50
    # The embedded map renders: the colour map's saturated pixels (text and rules are grey
    # or pale; the coloured caution frame is a few thousand pixels) cover a large area.
    chroma = rgb.max(axis=2) - rgb.min(axis=2)
    assert (chroma > 0.5).sum() > 30_000


def test_browser_prints_the_report_on_several_pages(browser, run_folder, tmp_path):
    pdf = tmp_path / "report.pdf"
    _headless(browser, "--no-pdf-header-footer", f"--print-to-pdf={pdf}",
              (run_folder / "report.html").as_uri())
    data = pdf.read_bytes()
    assert data.startswith(b"%PDF")
    # One page object per printed page ('/Type /Page', PDF 1.7 section 7.7.3.3); each
    # section starts a page, so the full report prints on more than one.
    assert len(re.findall(rb"/Type\s*/Page\b(?!s)", data)) > 1
