"""Figures fit for print: nothing cut off at the stated size, 300 dpi PNG, the caution inside the plot
area, "invented data" on invented scenarios, distinguishable lines with a legend, the LDA and the end
of the safety area on distance axes, a log density axis that keeps the tail past the LDA visible.
"""

from __future__ import annotations

import io
from dataclasses import replace
from typing import Any

import numpy as np
import pytest

from landrisk import CAUTION, api, plotting
from landrisk.studies import RankSettings, RareSettings, rank, rare_assess

matplotlib = pytest.importorskip("matplotlib")
from matplotlib.offsetbox import AnchoredText  # noqa: E402
from matplotlib.text import Text  # noqa: E402

# Rendering whole results folders and figures takes tens of seconds: the slow set (run by .ci/run).
pytestmark = pytest.mark.slow

OVERRIDE = 'scenario.description="Operator survey data, runway 09L"'


@pytest.fixture(scope="module")
def results() -> dict[str, Any]:
    scenario, uncertain = api.load_study()
    plain, plain_unc = api.load_study(None, [OVERRIDE])
    ranking = replace(rank(scenario, uncertain.problem(), RankSettings(
        calls=200, seed=2, mc_check=1000, surrogate_samples=20_000, risk_samples=1024, tail_checks=40)),
        record=uncertain.record())
    return {"assessment": api.assess(scenario, uncertain, samples=20_000, seed=1),
            "plain": api.assess(plain, plain_unc, samples=2_000, seed=1), "ranking": ranking}


@pytest.fixture(scope="module")
def rare() -> Any:
    """FORM with its risk curve (subset simulation over runway lengths, 10^5 Monte Carlo samples)."""
    scenario, uncertain = api.load_study()
    return rare_assess(scenario, uncertain.problem(), RareSettings(
        method="form", subset_samples=300, subset_replicates=2, cross_check=False))


@pytest.fixture(scope="module")
def figures(results: dict[str, Any]) -> Any:
    """Every figure of an assessment and of a ranking, made once (stem -> figure), closed at the end."""
    out = {stem: make(results["assessment"]) for stem, make in plotting.FIGURES.items()}
    out |= {stem: make(results["ranking"]) for stem, make in plotting.RANK_FIGURES.items()}
    yield out
    for fig in out.values():
        matplotlib.pyplot.close(fig)


def drawn_texts(fig: Any) -> list[Text]:
    """Every non-empty text the figure draws (tick labels only of the ticks in view)."""
    fig.canvas.draw()
    tick_labels, drawn = set(), set()
    for ax in [a for parent in fig.axes for a in (parent, *parent.child_axes)]:  # secondary axes too
        for axis in (ax.xaxis, ax.yaxis):
            for tick in axis.get_major_ticks() + axis.get_minor_ticks():
                tick_labels |= {id(tick.label1), id(tick.label2)}
            for tick in axis._update_ticks():  # the ticks matplotlib draws
                drawn |= {id(tick.label1), id(tick.label2)}
    return [t for t in fig.findobj(Text) if t.get_visible() and t.get_text().strip()
            and (id(t) not in tick_labels or id(t) in drawn)]


def outside(fig: Any) -> list[str]:
    """Texts whose window extent leaves the canvas at the figure's stated size (1 px slack)."""
    renderer = fig.canvas.get_renderer()
    w, h = fig.bbox.width, fig.bbox.height
    bad = []
    for t in drawn_texts(fig):
        bb = t.get_window_extent(renderer)
        if bb.x0 < -1 or bb.y0 < -1 or bb.x1 > w + 1 or bb.y1 > h + 1:
            bad.append(f"{t.get_text()[:40]!r} at {bb.bounds}")
    tight = fig.get_tightbbox(renderer)  # inches
    if tight.x0 < -0.01 or tight.y0 < -0.01 or tight.x1 > fig.get_figwidth() + 0.01 or \
            tight.y1 > fig.get_figheight() + 0.01:
        bad.append(f"tight bounding box {tight.bounds} beyond {fig.get_size_inches()}")
    return bad


def caution_box(fig: Any) -> AnchoredText:
    boxes = [a for ax in fig.axes for a in ax.artists if isinstance(a, AnchoredText)]
    assert len(boxes) == 1
    return boxes[0]


@pytest.mark.slow
def test_no_text_is_cut_off(figures: dict[str, Any]) -> None:
    for stem, fig in figures.items():
        assert outside(fig) == [], stem


@pytest.mark.slow
def test_risk_curve_figure_fits_and_marks_the_runway(rare: Any) -> None:
    fig = plotting.risk_curve_figure(rare)
    assert outside(fig) == []
    lda = rare.scenario.values["runway.lda"]
    xs = {line.get_xdata()[0] for line in fig.axes[0].get_lines()
          if line.get_label().startswith(("LDA", "end"))}
    assert xs == {lda, lda + rare.scenario.values["runway.resa_length"]}
    assert CAUTION in " ".join(caution_box(fig).txt.get_text().split())


def test_the_check_catches_a_cut_off_title() -> None:
    """The check itself: a title far wider than its figure leaves the canvas and is reported."""
    plt = matplotlib.pyplot
    fig, ax = plt.subplots(figsize=(3, 2))
    ax.set_title("a title much wider than a three-inch figure can show at nine points " * 2)
    assert outside(fig)
    plt.close(fig)


@pytest.mark.slow
def test_png_is_300_dpi_and_svg_is_written(results: dict[str, Any]) -> None:
    from PIL import Image

    fig = plotting.convergence_figure(results["plain"])
    png = plotting.figure_bytes(fig, "png", {"seed": 1}, close=False)
    svg = plotting.figure_bytes(fig, "svg", {"seed": 1})
    image = Image.open(io.BytesIO(png))
    assert image.info["dpi"] == pytest.approx((300, 300), abs=0.01)
    # The tight bounding box only trims margins: at least 80 % of the stated size in each direction.
    assert image.size[0] >= 0.8 * 9 * 300 and image.size[1] >= 0.8 * 4.6 * 300
    assert svg.lstrip().startswith(b"<?xml") and b"<svg" in svg


@pytest.mark.slow
def test_caution_and_invented_data_inside_the_plot_area(results: dict[str, Any],
                                                         figures: dict[str, Any]) -> None:
    for stem, fig in figures.items():
        box = caution_box(fig)
        text = " ".join(box.txt.get_text().split())
        assert CAUTION in text and text.startswith("INVENTED DATA"), stem
        fig.canvas.draw()
        inner = box.get_window_extent(fig.canvas.get_renderer())
        axes = next(ax for ax in fig.axes if box in ax.artists).get_window_extent()
        assert axes.x0 <= inner.x0 and inner.x1 <= axes.x1 and axes.y0 <= inner.y0 and inner.y1 <= axes.y1
        size = box.txt._text.get_fontsize()
        assert size >= 6.5, stem  # not the 6 pt footer
    fig = plotting.exceedance_figure(results["plain"])  # a scenario whose description claims real data
    text = " ".join(caution_box(fig).txt.get_text().split())
    assert text == CAUTION and "INVENTED" not in text
    matplotlib.pyplot.close(fig)


def dashes(line: Any) -> str:
    """The dash pattern a line is drawn with (offset and on-off lengths; solid: no pattern)."""
    return str(line._unscaled_dash_pattern)


def test_lines_are_distinguishable_and_in_the_legend(figures: dict[str, Any]) -> None:
    ax = figures["exceedance"].axes[0]
    lines = [ln for ln in ax.get_lines() if not ln.get_label().startswith("_")]
    styles = [(matplotlib.colors.to_hex(ln.get_color()), dashes(ln), ln.get_linewidth())
              for ln in lines]
    assert len(set(styles)) == len(styles) >= 6  # estimate, LDA, safety-area end, four comparison lines
    # No two comparison lines share a colour or a dash pattern (the grey lines of earlier versions did).
    comparisons = lines[-4:]
    assert len({ln.get_color() for ln in comparisons}) == 4
    assert len({dashes(ln) for ln in comparisons}) == 4
    assert all(c in plotting.OKABE_ITO for c in (ln.get_color() for ln in comparisons))
    legend = {t.get_text() for t in ax.get_legend().get_texts()}
    assert {ln.get_label() for ln in lines} <= legend


def test_distance_axes_mark_the_lda_and_the_safety_area(results: dict[str, Any],
                                                        figures: dict[str, Any]) -> None:
    a = results["assessment"]
    lda, end = a.lda_m, a.lda_m + a.resa_length_m
    for stem in ("exceedance", "histogram", "surrogate-exceedance"):
        ax = figures[stem].axes[0]
        marks = {ln.get_label().split()[0]: ln.get_xdata()[0] for ln in ax.get_lines()}
        assert marks["LDA"] == lda and marks["end"] == end, stem
        lo, hi = ax.get_xlim()
        assert lo < lda < end < hi, stem


def test_histogram_keeps_the_tail_past_the_lda_visible(results: dict[str, Any],
                                                       figures: dict[str, Any]) -> None:
    a = results["assessment"]
    ax = figures["histogram"].axes[0]
    assert ax.get_yscale() == "log"
    beyond = a.outputs["total_m"] > a.lda_m
    assert beyond.sum() > 0  # the demo at 20 000 samples has overruns (seed 1: 6)
    # Every overrun's bin is drawn above the axis' lower limit: it can be seen.
    heights = [p.get_height() for p in ax.patches
               if p.get_x() + p.get_width() > a.lda_m and p.get_height() > 0]
    assert heights and min(heights) > ax.get_ylim()[0]


def test_intervals_are_bands(results: dict[str, Any], figures: dict[str, Any]) -> None:
    from matplotlib.collections import PolyCollection

    for stem in ("exceedance", "convergence"):
        bands = [c for c in figures[stem].axes[0].collections if isinstance(c, PolyCollection)]
        assert bands and "interval" in bands[0].get_label(), stem
    p = results["assessment"].convergence["p_event"]
    assert figures["convergence"].axes[0].get_yscale() == ("log" if np.any(p > 0) else "linear")
    # the running P99 has its order-statistic band too
    bands = [c for c in figures["convergence"].axes[1].collections if isinstance(c, PolyCollection)]
    assert bands and "order statistics" in bands[0].get_label()


def test_distance_axes_in_feet_beside_metres_unless_a_system_is_chosen(results: dict[str, Any]) -> None:
    # 1 ft = 0.3048 m exactly (NIST SP 811, 2008, appendix B.8).
    a = results["assessment"]
    fig = plotting.exceedance_figure(a)
    ax = fig.axes[0]
    (top,) = ax.child_axes
    fig.canvas.draw()
    for metres in (1000.0, 1900.0):  # the same place on the canvas reads metres below and feet above
        x_display = ax.transData.transform((metres, 1.0))[0]
        feet = top.transData.inverted().transform((x_display, 0.0))[0]
        assert feet == pytest.approx(metres / 0.3048, rel=1e-9)
    assert "[ft]" in top.get_xlabel()
    matplotlib.pyplot.close(fig)
    for units in ("si", "aviation"):
        fig = plotting.exceedance_figure(a, units=units)
        assert fig.axes[0].child_axes == []
        matplotlib.pyplot.close(fig)


def test_the_caution_box_avoids_the_histogram_bars(results: dict[str, Any]) -> None:
    # The bars of the demo's histogram rise on the left: a box placed there would hide them.
    from matplotlib.path import Path

    fig = plotting.histogram_figure(results["assessment"])
    fig.canvas.draw()
    ax = fig.axes[0]
    bb = caution_box(fig).get_window_extent(fig.canvas.get_renderer())
    corners = np.array([[bb.x0, bb.y0], [bb.x1, bb.y0], [bb.x0, bb.y1], [bb.x1, bb.y1],
                        [(bb.x0 + bb.x1) / 2, (bb.y0 + bb.y1) / 2]])
    hidden = sum(int(Path(p.get_transform().transform(p.get_path().vertices)).contains_points(corners).sum())
                 for p in ax.patches if p.get_zorder() > 0)
    assert hidden <= 1
    matplotlib.pyplot.close(fig)
