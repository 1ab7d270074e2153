"""The temperature map: what can be measured on the figure object (not its pixels).

The layout rules checked here are the project's own (heat2d/post/plot.py and
heat2d/post/mapview.py); the round-number rule for axis values (steps of 1, 2 or 5 × 10ⁿ)
is common practice for chart axes.
"""

from __future__ import annotations

import itertools
from pathlib import Path

import numpy as np
import pytest
from matplotlib.transforms import Bbox

import heat2d
from heat2d.post.plot import plot_temperature, plot_zoom

MODELS = Path(__file__).resolve().parents[1] / "models"

THIN = """
[model]
title = "thin board"
length_unit = "mm"
depth = 10
[materials.fr4]
kx = 1.0
ky = 0.3
[materials.si]
k = 148
[materials.mould]
k = 0.8
[[shape]]
name = "board"
material = "fr4"
rect = { x = 0, y = 0, width = 100, height = 1.6 }
[[shape]]
name = "package"
material = "mould"
rect = { x = 60, y = 1.6, width = 5, height = 1.0 }
[[shape]]
name = "die"
material = "si"
rect = { x = 61.5, y = 1.9, width = 2, height = 0.3 }
power = 0.5
[[boundary]]
name = "clamp"
on = "board.left"
temperature = 40
[[boundary]]
name = "air"
on = "exterior"
h = 10
ambient = 30
"""

SQUARE = """
[model]
length_unit = "mm"
depth = 10
[materials.al]
k = 150
[[shape]]
name = "block"
material = "al"
rect = { x = 0, y = 0, width = 20, height = 20 }
[[shape]]
name = "heater"
material = "al"
rect = { x = 4, y = 4, width = 12, height = 10 }
power = 3
[[boundary]]
name = "sink"
on = "block.bottom"
temperature = 40
"""


@pytest.fixture(scope="module")
def thin():
    result = heat2d.solve(heat2d.parse(THIN), estimate=False)
    return result, plot_temperature(result)


@pytest.fixture(scope="module")
def power_stage():
    result = heat2d.solve(heat2d.load(MODELS / "power_stage.toml"), estimate=False)
    return result, plot_temperature(result)


@pytest.fixture(scope="module")
def square():
    result = heat2d.solve(heat2d.parse(SQUARE), estimate=False)
    return result, plot_temperature(result)


def panels(fig):
    return [ax for ax in fig.axes if ax.get_label() != "<colorbar>"]


def bars(fig):
    return [ax for ax in fig.axes if ax.get_label() == "<colorbar>"]


def filled(ax):
    return [c for c in ax.collections if getattr(c, "filled", False)][0]


def isotherms(ax):
    return [c for c in ax.collections if hasattr(c, "filled") and not c.filled]


def is_round(values) -> bool:
    """Every value an integer multiple of one step 1, 2 or 5 × 10ⁿ."""
    values = np.asarray(values, dtype=float)
    if len(values) < 2:
        return True
    step = float(np.min(np.diff(np.sort(values))))
    mantissa = step / 10 ** np.floor(np.log10(step) + 1e-9)
    on_grid = np.allclose(values / step, np.round(values / step), atol=1e-6)
    return on_grid and any(np.isclose(mantissa, m) for m in (1, 2, 5))


@pytest.mark.parametrize("case", ["thin", "power_stage"])
def test_a_small_hot_shape_gets_a_true_scale_zoomed_panel(case, request):
    # heat2d's layout rule: a zoom when the hot shape's smaller side is drawn < 0.6 in.
    result, fig = request.getfixturevalue(case)
    axes = panels(fig)
    assert len(axes) == 2
    assert axes[1].get_title().startswith("around the hot spot (die)")
    assert axes[1].get_aspect() == 1.0                      # true scale
    x0, x1 = axes[1].get_xlim()
    y0, y1 = axes[1].get_ylim()
    hs = result.summary["hot_spot"]
    assert x0 < hs["x"] < x1 and y0 < hs["y"] < y1
    # The window is much narrower than the model: the die is 2 (5) mm of 100 (50) mm.
    (mx0, _), (mx1, _) = result.mesh.points.min(axis=0), result.mesh.points.max(axis=0)
    assert x1 - x0 < 0.35 * (mx1 - mx0)


def test_a_large_hot_shape_in_a_square_model_needs_no_zoom(square):
    # heater 12 x 10 mm in a 20 mm square: drawn over 3 in each way, no zoom.
    _, fig = square
    axes = panels(fig)
    assert len(axes) == 1 and axes[0].get_title() == ""
    assert axes[0].get_aspect() == 1.0


def test_a_thin_board_is_stretched_through_its_thickness_and_says_so(thin):
    # 100 x 2.6 mm drawn at least 1:7 (heat2d's rule): a round stretch of 10.
    _, fig = thin
    whole = panels(fig)[0]
    assert whole.get_aspect() == 10.0
    assert "stretched ×10" in whole.get_title()


@pytest.mark.parametrize("case", ["thin", "power_stage", "square"])
def test_colour_bar_arrows_only_where_values_are_clipped(case, request):
    result, fig = request.getfixturevalue(case)
    for ax in panels(fig):
        assert filled(ax).extend == "neither"
    # A shared scale below the maximum clips the top only: an arrow there alone.
    T = result.temperature
    lo, hi = float(T.min()), float(T.max())
    clipped = plot_temperature(result, scale=(lo - 1.0, hi - 0.2 * (hi - lo)))
    assert filled(panels(clipped)[0]).extend == "max"
    both = plot_temperature(result, scale=(lo + 0.1 * (hi - lo), hi - 0.1 * (hi - lo)))
    assert filled(panels(both)[0]).extend == "both"


@pytest.mark.parametrize("case", ["thin", "power_stage", "square"])
def test_ticks_and_isotherms_are_round_numbers(case, request):
    _, fig = request.getfixturevalue(case)
    for ax in bars(fig):
        ticks = ax.get_yticks()
        assert len(ticks) >= 3 and is_round(ticks), ticks
    for ax in panels(fig):
        levels = np.concatenate([c.levels for c in isotherms(ax)])
        assert len(levels) >= 2 and is_round(levels), levels
        assert is_round(filled(ax).levels)
    assert is_round([0.2, 0.4, 0.6]) and is_round([85, 90, 95])
    assert not is_round([86.6, 91.1]) and not is_round([0.3, 0.6, 0.9])


@pytest.mark.parametrize("case", ["thin", "power_stage", "square"])
def test_shape_names_do_not_overlap(case, request):
    _, fig = request.getfixturevalue(case)
    renderer = fig.canvas.get_renderer()
    for ax in panels(fig):
        names = [t for t in ax.texts if t.get_gid() == "shape-name"]
        assert names
        boxes = [t.get_window_extent(renderer) for t in names]
        for a, b in itertools.combinations(boxes, 2):
            assert not a.overlaps(b)
    named = {t.get_text() for ax in panels(fig) for t in ax.texts
             if t.get_gid() == "shape-name"}
    if case == "power_stage":
        # The stack once on the whole model; the die, mould and vias close up.
        assert {"pcb", "die", "mould", "vias_core", "housing", "pedestal"} <= named


@pytest.mark.parametrize("case", ["thin", "power_stage"])
def test_the_legend_names_every_boundary_and_interface(case, request):
    result, fig = request.getfixturevalue(case)
    text = " ".join(t.get_text() for t in fig.legends[0].get_texts())
    for b in result.model.boundaries:
        assert f"{b.name}:" in text
    for face in result.model.interfaces:
        assert f"interface {face.name}" in text
    if case == "power_stage":
        assert "frame: held at 60 °C" in text            # t_frame in the model file


@pytest.mark.parametrize("case", ["thin", "power_stage", "square"])
def test_the_hot_spot_is_marked_where_it_is_reported(case, request):
    result, fig = request.getfixturevalue(case)
    hs = result.summary["hot_spot"]
    for ax in panels(fig):
        marks = [line for line in ax.lines if line.get_gid() == "hot-spot"]
        assert len(marks) == 1
        assert marks[0].get_xdata()[0] == hs["x"] and marks[0].get_ydata()[0] == hs["y"]
        assert marks[0].get_markerfacecolor() == "none"    # a ring: the field shows inside


@pytest.mark.parametrize("case", ["thin", "power_stage", "square"])
def test_the_figure_has_no_wasted_margin(case, request):
    # The drawn content spans at least 90 % of the figure (heat2d's layout target).
    _, fig = request.getfixturevalue(case)
    renderer = fig.canvas.get_renderer()
    parts = [ax.get_tightbbox(renderer) for ax in fig.axes]
    parts += [leg.get_window_extent(renderer) for leg in fig.legends]
    parts += [t.get_window_extent(renderer) for t in fig.texts]
    used = Bbox.union(parts)
    page = fig.bbox
    assert used.width * used.height > 0.9 * page.width * page.height
    # and the panels themselves take a good part of it (titles, colour bars and the
    # legend the rest)
    area = sum(ax.get_window_extent(renderer).width * ax.get_window_extent(renderer).height
               for ax in panels(fig))
    assert area > 0.4 * page.width * page.height


def test_plot_zoom_draws_the_hot_spot_view_alone(power_stage, tmp_path):
    result, _ = power_stage
    fig = plot_zoom(result, tmp_path / "zoom.png")
    assert (tmp_path / "zoom.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    (ax,) = panels(fig)
    assert ax.get_title().startswith("around the hot spot (die)")
    assert filled(ax).extend == "neither"
    # The die (x 22.5 .. 27.5 mm in the model file) is inside the window.
    x0, x1 = ax.get_xlim()
    assert x0 < 22.5 and x1 > 27.5
