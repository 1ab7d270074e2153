"""The HTML report of a transient run (heat2d report, run --report, a result in memory):
each shape's peak with its time-step error and when, the limits, the hottest moment, the
thermal impedance with its Foster and Cauer tables, the periodic peaks, the energy over
the run and the four images, checked against the summary and against closed forms; and
a real headless browser renders and prints it.

References:
* the steady resistance of a slab, R = L/(kA) (Incropera et al., Fundamentals of Heat and
  Mass Transfer, 6th ed., §3.1, eq. 3.6);
* the periodic steady state of a Foster network under a rectangular pulse train, by
  superposition of the step response (Duhamel's theorem, Carslaw & Jaeger, Conduction of
  Heat in Solids, 2nd ed., §1.14): each term settles to a peak rise per watt of
  Rᵢ (1 − e^(−tp/τᵢ)) / (1 − e^(−T/τᵢ)) (the geometric series of the pulses);
* the Foster impedance Z(t) = Σ Rᵢ (1 − e^(−t/τᵢ)) (same superposition, one term per mode);
* the energy of a pulse train: ∫P dt = P_base·t_end + count·width·(P_pulse − P_base).
"""

from __future__ import annotations

import base64
import hashlib
import json
import math
import re
from html.parser import HTMLParser
from pathlib import Path

import pytest

import heat2d
from heat2d.cli.main import main
from heat2d.report import result_report, run_report
from tests.test_report import Page, _headless, browser  # noqa: F401  (the browser fixture)

L, K, RHO_C = 1e-3, 1.0, 1e6          # the slab: 1 mm, 1 W/(m·K), 1 MJ/(m³·K)
WIDTH, DEPTH = 0.5e-3, 1e-3            # m
P_BASE, P_PULSE, WIDTH_S, PERIOD, COUNT, END = 0.002, 0.02, 0.01, 0.05, 5, 1.0
LIMIT = 32.0


def slab_text(*, limit: float | None = LIMIT) -> str:
    """A slab held at 20 °C at the bottom, heated through a thin, high-k heater of almost
    no capacity on its top face; insulated sides, so the heat flows one-dimensionally."""
    lim = f"max_temperature = {limit}\n" if limit is not None else ""
    return f'''# A slab heated through its top face <by pulses>.
[model]
title = "Pulsed slab"
length_unit = "mm"
depth = {DEPTH * 1e3}

[materials.slab]
k = {K}
density = 1000
specific_heat = {RHO_C / 1000}
note = "a material of round values"

[materials.heater]
k = 1000
density = 1
specific_heat = 50

[[shape]]
name = "slab"
material = "slab"
rect = {{ x = 0, y = 0, width = {WIDTH * 1e3}, height = {L * 1e3} }}

[[shape]]
name = "heater"
material = "heater"
rect = {{ x = 0, y = {L * 1e3}, width = {WIDTH * 1e3}, height = 0.01 }}
power = {P_BASE}
power_pulse = {{ power = {P_PULSE}, width = {WIDTH_S}, period = {PERIOD}, count = {COUNT} }}
mesh_size = 0.01
{lim}
[[boundary]]
name = "sink"
on = "slab.bottom"
temperature = 20

[[probe]]
name = "middle"
at = [0.25, 0.5]

[mesh]
size = 0.25

[transient]
end = {END}
first = 1e-3
'''


class Tables(HTMLParser):
    """Every table of the page as rows of cell texts, with each row's class."""

    def __init__(self, text: str) -> None:
        super().__init__(convert_charrefs=True)
        self.tables: list[list[tuple[str | None, list[str]]]] = []
        self._cell: list[str] | None = None
        self.feed(text)
        self.close()

    def handle_starttag(self, tag, attrs):
        if tag == "table":
            self.tables.append([])
        elif tag == "tr" and self.tables:
            self.tables[-1].append((dict(attrs).get("class"), []))
        elif tag in ("td", "th"):
            self._cell = []

    def handle_endtag(self, tag):
        if tag in ("td", "th") and self._cell is not None:
            self.tables[-1][-1][1].append(" ".join("".join(self._cell).split()))
            self._cell = None

    def handle_data(self, data):
        if self._cell is not None:
            self._cell.append(data)

    def find(self, *heads: str) -> list[tuple[str | None, list[str]]]:
        """The table whose heading row starts with ``heads``."""
        for t in self.tables:
            if t and t[0][1][:len(heads)] == list(heads):
                return t
        raise AssertionError(f"no table headed {heads}")


@pytest.fixture(scope="module")
def run_folder(tmp_path_factory) -> Path:
    """heat2d run MODEL --out DIR --report on the pulsed slab."""
    base = tmp_path_factory.mktemp("transient_report")
    model = base / "slab.toml"
    model.write_text(slab_text(), encoding="utf-8")
    out = base / "slab"
    assert main(["run", str(model), "--out", str(out), "--report", "--quiet"]) == 0
    return out


@pytest.fixture(scope="module")
def page(run_folder):
    text = (run_folder / "report.html").read_text(encoding="utf-8")
    summary = json.loads((run_folder / "summary.json").read_text(encoding="utf-8"))
    return Page(text), Tables(text), text, summary


def test_the_page_has_the_sections_of_a_transient_run(page):
    parsed, _, text, s = page
    assert {"overview", "temperatures", "impedance", "periodic", "heat", "model",
            "numerics"} <= set(parsed.sections)
    assert "heat2d transient run report" in parsed.text
    assert s["caution"] in parsed.text and s["model"]["title"] in parsed.text
    assert parsed.stack == [] and parsed.misnested == []
    # The model's text is escaped: its "<by pulses>" is text, not a tag.
    assert "&lt;by pulses&gt;" in text and "by pulses" not in parsed.tags


def test_peaks_with_their_time_step_error_and_time(page):
    _, tables, _, s = page
    rows = {r[0]: r for _, r in tables.find("shape", "material", "peak power (W)")[1:]}
    for name, shape in s["shapes"].items():
        assert rows[name][3] == f"{shape['max']:.2f} ± {shape['max_error']:.1e}"
        assert rows[name][4] == f"{shape['time_s']:.4g}"
    # The peak comes at the end of the last pulse: (count − 1)·period + width (the
    # temperature rises only while a pulse is on, and each pulse starts warmer).
    assert s["shapes"]["heater"]["time_s"] == pytest.approx((COUNT - 1) * PERIOD + WIDTH_S,
                                                            abs=1e-12)
    assert rows["heater"][4] == "0.21"


def test_limits_hottest_moment_and_periodic_margin(page):
    parsed, tables, _, s = page
    lim = s["limits"]["heater"]
    (cls, row), = tables.find("shape", "peak (°C)", "limit (°C)")[1:]
    assert row[2] == f"{LIMIT:.2f}" and row[5] == "within" and cls is None
    assert row[3].startswith(f"{LIMIT - lim['max']:.2f} ±")
    hs = s["hot_spot"]
    assert f"{hs['time_s']:.4g} s of {END:g} s" in parsed.text
    assert f"{hs['temperature']:.2f} °C" in parsed.text
    # The periodic peak: the steady state at the base power, R·P_base above the sink
    # (Incropera §3.1), plus the pulse's rise; the report flags it above the limit.
    (cls, row), = tables.find("shape", "pulse (W)", "between (W)")[1:]
    peak = s["transient"]["periodic"]["heater"]["peak"]
    assert peak > LIMIT > lim["max"]
    assert cls == "bad" and row[7] == f"{peak:.2f}" and row[8] == f"{LIMIT - peak:.2f}"
    assert "in periodic steady state: above its limit" in parsed.text


def test_impedance_tables_against_the_slab_and_the_foster_sums(page):
    parsed, tables, _, s = page
    z = s["transient"]["zth"]["heater"]
    # R = L/(kA) of the slab (Incropera §3.1); the heater adds 1e-5 of it.
    r = L / (K * WIDTH * DEPTH)
    assert z["r_k_per_w"] == pytest.approx(r, rel=1e-4)
    assert f"heater: R = {z['r_k_per_w']:.4g} K/W" in parsed.text
    net = tables.find("term", "Foster R (K/W)", "Foster τ (s)")
    terms = [row for _, row in net[1:] if row[0].isdigit()]
    assert len(terms) == z["foster"]["terms"]
    fr = [float(row[1]) for row in terms]
    tau = [float(row[2]) for row in terms]
    cr = [float(row[3]) for row in terms]
    cc = [float(row[4]) for row in terms]
    assert all(c > 0 for c in cc)
    # Both networks sum to R, and the Foster terms as printed give Z at each decade
    # (Z = Σ Rᵢ (1 − e^(−t/τᵢ))) to the fit error plus the table's 4 digits.
    assert math.fsum(fr) == pytest.approx(r, rel=1e-3)
    assert math.fsum(cr) == pytest.approx(r, rel=1e-3)
    decades = tables.find("t (s)")
    for t, shown in zip(decades[0][1][1:], decades[1][1][1:], strict=True):
        fit = sum(ri * (1 - math.exp(-float(t) / ti)) for ri, ti in zip(fr, tau, strict=True))
        assert float(shown) == pytest.approx(z["at"][t], rel=1e-3)
        assert fit == pytest.approx(float(shown), rel=z["foster"]["fit_error"] + 2e-3)
    assert f"{100 * z['foster']['fit_error']:.2g} %" in parsed.text
    mc = z["modal_check"]
    assert f"within {100 * mc['max_difference']:.2g} % of R" in parsed.text
    # The periodic rise per watt from the printed Foster terms (geometric series of
    # the pulses, Carslaw & Jaeger §1.14) matches the one reported.
    rise = sum(ri * (1 - math.exp(-WIDTH_S / ti)) / (1 - math.exp(-PERIOD / ti))
               for ri, ti in zip(fr, tau, strict=True))
    (_, row), = tables.find("shape", "pulse (W)", "between (W)")[1:]
    assert float(row[6]) == pytest.approx(rise, rel=2e-3)
    assert float(row[7]) == pytest.approx(20 + P_BASE * r + (P_PULSE - P_BASE) * rise,
                                          abs=0.02)


def test_energy_over_the_run(page):
    parsed, tables, _, s = page
    energy = P_BASE * END + COUNT * WIDTH_S * (P_PULSE - P_BASE)
    eb = s["energy_balance"]
    assert eb["energy_in_j"] == pytest.approx(energy, rel=1e-9)
    assert f"energy in {eb['energy_in_j']:.6g} J" in parsed.text
    assert f"stored {eb['stored_j']:.6g} J" in parsed.text
    assert f"heat out {eb['heat_out_j']:.6g} J" in parsed.text
    (_, row), = tables.find("boundary", "kind", "heat out at the end (W)")[1:]
    assert row[0] == "sink" and float(row[2]) == pytest.approx(
        s["boundaries"]["sink"]["heat_out_w"], rel=1e-3)


def test_the_map_and_three_plots_are_embedded(page, run_folder):
    parsed, _, _, s = page
    shown = {hashlib.sha256(base64.b64decode(src.split(",", 1)[1])).hexdigest()
             for src in parsed.images}
    assert all(src.startswith("data:image/png;base64,") for src in parsed.images)
    for name in ("slab.png", "slab_history.png", "slab_zth.png", "slab_duty.png"):
        assert hashlib.sha256((run_folder / name).read_bytes()).hexdigest() in shown, name
    assert f"Temperature map at the hottest moment (slab.png): t = " \
           f"{s['hot_spot']['time_s']:.4g} s" in parsed.text
    # Self-contained: no address outside the page.
    assert not [a for a in parsed.attrs if a[1] in ("src", "href")
                and not a[2].startswith(("data:", "#"))]


def test_materials_show_density_and_specific_heat(page):
    _, tables, _, _ = page
    rows = {r[0]: r for _, r in tables.find("material", "kx (W/(m·K))")[1:]}
    assert rows["slab"][4:6] == ["1000", "1000"]
    assert rows["heater"][4:6] == ["1", "50"]


def test_report_command_and_result_in_memory(run_folder, tmp_path):
    out = tmp_path / "page.html"
    assert main(["report", str(run_folder), "--out", str(out), "--quiet"]) == 0
    text = out.read_text(encoding="utf-8")
    assert text == run_report(run_folder)
    summary = json.loads((run_folder / "summary.json").read_text(encoding="utf-8"))
    # The same run in memory gives the same figures (a run is deterministic).
    memory = result_report(heat2d.solve(heat2d.parse(slab_text(), source="slab.toml")))
    peak = summary["shapes"]["heater"]
    for t in (text, memory):
        assert f"{peak['max']:.2f} ± {peak['max_error']:.1e}" in t
        assert len(re.findall(r'<img src="data:image/png', t)) == 4


def test_browser_renders_and_prints_the_transient_report(browser, run_folder, tmp_path):  # noqa: F811
    import matplotlib.image as mpimg

    shot = tmp_path / "shot.png"
    _headless(browser, f"--screenshot={shot}", "--window-size=1200,1600",
              (run_folder / "report.html").as_uri())
    rgb = mpimg.imread(shot)[..., :3]
    assert rgb.shape[:2] == (1600, 1200)
    # Not blank (common practice for screenshot checks), and the map's colours show.
    assert (rgb.min(axis=2) < 0.9).mean() > 0.03
    assert ((rgb.max(axis=2) - rgb.min(axis=2)) > 0.5).sum() > 30_000
    pdf = tmp_path / "report.pdf"
    _headless(browser, "--no-pdf-header-footer", f"--print-to-pdf={pdf}",
              (run_folder / "report.html").as_uri())
    data = pdf.read_bytes()
    assert data.startswith(b"%PDF")
    # One page object per printed page (PDF 1.7 §7.7.3.3): each section starts a page.
    assert len(re.findall(rb"/Type\s*/Page\b(?!s)", data)) > 3
