"""Figures of an assessment (matplotlib, imported only when a figure is made), fit for print.

Every figure goes through the same helpers: a colour-blind-safe palette (Okabe & Ito 2008, "Color
Universal Design") with a line style per colour, so that lines stay apart in grey print too; the caution
inside the plot area, where cropping keeps it, and "invented data" on figures of invented scenarios;
the LDA and the end of the runway-end safety area on distance axes; titles wrapped to the figure's width
and a layout that keeps every label inside the canvas at the figure's stated size. Files: PNG at
300 dpi and SVG, both cut to the tight bounding box, with the run's provenance in their metadata and a
one-line provenance footer.
"""

from __future__ import annotations

import functools
import io
import json
import textwrap
from collections.abc import Callable
from typing import TYPE_CHECKING, Any, TypeVar

import numpy as np

from landrisk import CAUTION, __version__, invented
from landrisk.model import KEYS
from landrisk.studies import Assessment, Ranking, RareAssessment
from landrisk.uq import exceedance_curve, wilson_interval

if TYPE_CHECKING:
    from matplotlib.axes import Axes
    from matplotlib.figure import Figure

__all__ = [
    "FIGURES",
    "LINESTYLES",
    "OKABE_ITO",
    "PNG_DPI",
    "RANK_FIGURES",
    "convergence_figure",
    "exceedance_figure",
    "figure_bytes",
    "histogram_figure",
    "indices_figure",
    "risk_curve_figure",
    "tornado_figure",
]

#: Okabe & Ito (2008), "Color Universal Design (CUD): how to make figures and presentations that are
#: friendly to colorblind people": blue, vermillion, bluish green, reddish purple, orange, sky blue,
#: yellow, black.
OKABE_ITO = ("#0072B2", "#D55E00", "#009E73", "#CC79A7", "#E69F00", "#56B4E9", "#F0E442", "#000000")
#: One line style per colour of the cycle.
LINESTYLES: tuple[Any, ...] = ("-", "--", "-.", ":", (0, (5, 1, 1, 1)), (0, (3, 1, 1, 1, 1, 1)),
                               (0, (8, 2)), (0, (1, 3)))
#: Resolution of the PNG files [dots per inch].
PNG_DPI = 300
#: Height of the provenance footer [inches].
_FOOTER_IN = 0.28

F = TypeVar("F", bound=Callable[..., Any])


def _pyplot() -> Any:
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    return plt


def _style() -> dict[str, Any]:
    from cycler import cycler

    return {"axes.prop_cycle": cycler(color=OKABE_ITO) + cycler(linestyle=LINESTYLES),
            "font.size": 9, "axes.titlesize": 9.5, "axes.labelsize": 9, "legend.fontsize": 7.5,
            "xtick.labelsize": 8, "ytick.labelsize": 8, "legend.framealpha": 0.9, "svg.hashsalt": "landrisk"}


def styled(make: F) -> F:
    """Make the figure under the print style (palette, line styles, font sizes)."""

    @functools.wraps(make)
    def wrapper(*args: Any, **kwargs: Any) -> Any:
        import matplotlib

        _pyplot()
        style: Any = _style()
        with matplotlib.rc_context(style):
            return make(*args, **kwargs)

    return wrapper  # type: ignore[return-value]


def runway_marks(ax: Axes, lda_m: float, resa_m: float | None) -> None:
    """The LDA and the end of the runway-end safety area (LDA + resa_length) as vertical lines on a
    distance axis [m], the safety area shaded between them."""
    ax.axvline(lda_m, color="black", lw=2, ls="-", label=f"LDA {lda_m:.0f} m", zorder=3)
    if resa_m:
        end = lda_m + resa_m
        ax.axvspan(lda_m, end, color="0.85", alpha=0.6, lw=0, zorder=0)
        ax.axvline(end, color="black", lw=1.4, ls=(0, (2, 1)), zorder=3,
                   label=f"end of the safety area, LDA + {resa_m:.0f} m = {end:.0f} m")


def _caution_box(fig: Figure, ax: Axes, scenario: Any, loc: str) -> None:
    """The caution (and "INVENTED DATA") inside the plot area, in a framed box at ``loc``."""
    from matplotlib.offsetbox import AnchoredText

    width_in = ax.get_position().width * fig.get_figwidth()
    chars = min(66, max(36, int(width_in * 0.85 * 72 / 3.4)))  # about 3.4 pt per character at 6.5 pt
    lines = textwrap.wrap(CAUTION, chars)
    if invented(scenario.values.get("scenario.description")):
        lines = ["INVENTED DATA: an illustration, no real aircraft or runway", *lines]
    box = AnchoredText("\n".join(lines), loc=loc, prop={"size": 6.5}, frameon=True, borderpad=0.4, pad=0.3)
    box.patch.set_boxstyle("round,pad=0.2")
    box.patch.set_facecolor("white")
    box.patch.set_alpha(0.9)
    box.patch.set_edgecolor("#D55E00")
    box.set_zorder(5)
    ax.add_artist(box)


def _fit_titles(fig: Figure) -> None:
    """Wrap the suptitle and each axes title that is wider than the figure or its axes."""
    canvas: Any = fig.canvas
    renderer = canvas.get_renderer()
    texts = [(ax.title, ax.get_window_extent(renderer).width) for ax in fig.axes]
    suptitle = getattr(fig, "_suptitle", None)
    if suptitle is not None:
        texts.append((suptitle, fig.bbox.width))
    for text, room in texts:
        content = text.get_text()
        if not content:
            continue
        width = text.get_window_extent(renderer).width
        if width > 0.98 * room:
            longest = max(len(line) for line in content.splitlines())
            chars = max(20, int(longest * 0.95 * room / width))
            text.set_text("\n".join(textwrap.fill(line, chars) for line in content.splitlines()))


def _footer(fig: Figure, scenario: Any, run: str, caution_loc: str = "upper right",
            caution_ax: int = 0) -> None:
    """The last step of every figure: the caution inside an axes (the first unless ``caution_ax``), a
    provenance line under the axes, titles wrapped to fit and a layout that keeps every text inside the
    canvas."""
    _caution_box(fig, fig.axes[caution_ax], scenario, caution_loc)
    fig.text(0.005, 0.005, f"landrisk {__version__} | scenario {scenario.name} ({scenario.source}) | {run}",
             fontsize=6, va="bottom", ha="left")
    _fit_titles(fig)
    fig.tight_layout(rect=(0, _FOOTER_IN / fig.get_figheight(), 1, 1), pad=0.6)
    _fit_titles(fig)


def _assess_run(a: Assessment) -> str:
    return f"{a.settings.samples:,} samples, {a.settings.sampler}, seed {a.settings.seed}"


@styled
def exceedance_figure(a: Assessment) -> Figure:
    """P(total landing distance > x) on a log axis, with its 95 % band, the LDA and comparison lines."""
    plt = _pyplot()
    xs = a.sorted_total()
    grid = np.linspace(xs[0], xs[-1], 600)
    p, lo, hi = exceedance_curve(xs, grid, a.settings.confidence)
    floor = 0.5 / xs.size
    fig, ax = plt.subplots(figsize=(8, 5.2))
    ax.fill_between(grid, np.maximum(lo, floor), np.maximum(hi, floor), alpha=0.3,
                    label=f"{100 * a.settings.confidence:g} % interval (Wilson)")
    keep = p > 0
    ax.step(grid[keep], p[keep], where="post", lw=1.6, label="Monte Carlo estimate")
    ax.set_yscale("log")
    ax.set_ylim(floor, 1.0)
    runway_marks(ax, a.lda_m, a.resa_length_m)
    for c, colour, style in zip(a.comparisons, OKABE_ITO[1:], LINESTYLES[1:], strict=False):
        ax.axvline(c.distance_m, ls=style, color=colour, lw=1.4, label=f"{c.name}: {c.distance_m:.0f} m")
    ax.set_xlabel("total landing distance from the screen height x [m]")
    ax.set_ylabel("probability that the distance exceeds x")
    ax.set_title(f"Exceedance of the landing distance: {a.scenario.name}\n"
                 f"P(overrun) = {a.p_overrun.text()}", fontsize=9)
    ax.grid(True, which="both", alpha=0.3)
    ax.legend(loc="lower left")
    _footer(fig, a.scenario, _assess_run(a))
    return fig


@styled
def histogram_figure(a: Assessment) -> Figure:
    """Histogram of the total landing distance on a log density axis (the tail past the LDA stays
    visible), with the LDA and the end of the safety area."""
    plt = _pyplot()
    fig, ax = plt.subplots(figsize=(8, 4.8))
    total = a.outputs["total_m"][np.isfinite(a.outputs["total_m"])]
    ax.hist(total, bins=120, density=True, color=OKABE_ITO[0], alpha=0.85,
            label=f"Monte Carlo, {a.n:,} landings")
    ax.set_yscale("log")
    runway_marks(ax, a.lda_m, a.resa_length_m)
    ax.axvline(a.nominal_total_m, color=OKABE_ITO[1], ls="--",
               label=f"deterministic {a.nominal_total_m:.0f} m")
    ax.set_xlabel("total landing distance from the screen height [m]")
    ax.set_ylabel("probability density [1/m]")
    ax.set_title(f"Distribution of the landing distance: {a.scenario.name}\n"
                 f"P(overrun) = {a.p_overrun.text()}", fontsize=9)
    ax.grid(True, which="major", alpha=0.3)
    ax.legend(loc="lower left")
    _footer(fig, a.scenario, _assess_run(a))
    return fig


@styled
def convergence_figure(a: Assessment) -> Figure:
    """P(overrun) and the 99th percentile against the number of samples used."""
    plt = _pyplot()
    c = a.convergence
    n, p = c["n"], c["p_event"]
    conf = a.settings.confidence
    lo, hi = wilson_interval(np.rint(p * n), n, conf)
    fig, (ax1, ax2) = plt.subplots(1, 2, figsize=(9, 4.6))
    floor = 0.3 / float(np.max(n))  # below any nonzero estimate: zero estimates fall off the log axis
    ax1.fill_between(n, np.maximum(lo, floor), np.maximum(hi, floor), alpha=0.3, color=OKABE_ITO[0],
                     label=f"{100 * conf:g} % interval (Wilson)")
    ax1.plot(n, np.where(p > 0, p, np.nan), marker="o", ms=3, label="estimate")
    if np.any(p > 0):
        ax1.set_yscale("log")
        ax1.set_ylim(bottom=floor)
    ax1.set_xscale("log")
    ax1.set_xlabel("samples")
    ax1.set_ylabel("P(overrun)")
    ax1.set_title("overrun probability", fontsize=9)
    ax1.legend(loc="lower left")
    ax2.plot(n, c["quantile"], marker="o", ms=3, color=OKABE_ITO[2], label="P99 estimate")
    ax2.axhline(a.lda_m, color="black", lw=1.5, label=f"LDA {a.lda_m:.0f} m")
    ax2.legend(loc="lower right")
    ax2.set_xscale("log")
    ax2.set_xlabel("samples")
    ax2.set_ylabel("P99 of the total distance [m]")
    ax2.set_title("99th percentile", fontsize=9)
    for ax in (ax1, ax2):
        ax.grid(True, which="both", alpha=0.3)
    fig.suptitle(f"Convergence of the Monte Carlo estimates: {a.scenario.name}", fontsize=10)
    _footer(fig, a.scenario, _assess_run(a), caution_loc="center right", caution_ax=1)
    return fig


#: file stem -> figure function
FIGURES = {"exceedance": exceedance_figure, "histogram": histogram_figure, "convergence": convergence_figure}


def figure_bytes(fig: Figure, fmt: str, record: dict[str, Any], *, close: bool = True) -> bytes:
    """The figure as PNG (300 dpi) or SVG bytes, cut to its tight bounding box, with the run's record in
    the file's metadata; closes it unless ``close`` is false."""
    plt = _pyplot()
    buf = io.BytesIO()
    text = json.dumps(record, sort_keys=True, default=str)
    meta = {"Description": text} if fmt == "png" else {"Description": text, "Date": None}
    bbox = getattr(fig, "_landrisk_tight_bbox", None)  # one layout pass for both formats
    if bbox is None:
        canvas: Any = fig.canvas
        bbox = fig.get_tightbbox(canvas.get_renderer()).padded(0.05)
        fig._landrisk_tight_bbox = bbox  # type: ignore[attr-defined]
    fig.savefig(buf, format=fmt, dpi=PNG_DPI, metadata=meta, bbox_inches=bbox)
    if close:
        plt.close(fig)
    return buf.getvalue()


@styled
def indices_figure(r: Ranking) -> Figure:
    """First-order and total Sobol indices of the total landing distance, per input."""
    plt = _pyplot()
    names = [i.name for i in r.inputs]
    y = np.arange(len(names))
    fig, ax = plt.subplots(figsize=(8, 0.5 * len(names) + 2.2))
    ax.barh(y - 0.2, [i.first for i in r.inputs], height=0.4, color=OKABE_ITO[0], label="first order")
    ax.barh(y + 0.2, [i.total for i in r.inputs], height=0.4, color=OKABE_ITO[4], hatch="//",
            edgecolor="black", lw=0.4, label="total")
    if r.method == "mc":
        for k, i in enumerate(r.inputs):
            ax.plot(i.total_ci, [k + 0.2] * 2, color="black", lw=1)
            ax.plot(i.first_ci, [k - 0.2] * 2, color="black", lw=1)
    ax.set_yticks(y, names, fontsize=8)
    ax.invert_yaxis()
    ax.set_xlabel("Sobol index of the total landing distance")
    method = (f"polynomial chaos, {r.calls} solver calls" if r.method == "pce"
              else f"Monte Carlo, {r.calls:,} solver calls")
    ax.set_title(f"Which inputs drive the landing distance: {r.scenario.name} ({method})", fontsize=9)
    ax.legend(loc="center right")
    ax.grid(True, axis="x", alpha=0.3)
    _footer(fig, r.scenario, f"seed {r.settings.seed}", caution_loc="lower right")
    return fig


@styled
def tornado_figure(r: Ranking) -> Figure:
    """One-at-a-time swings of the total distance and of the margin to the LDA, largest first."""
    plt = _pyplot()
    rows = sorted((i for i in r.inputs if np.isfinite(i.swing_total_m)), key=lambda i: -abs(i.swing_total_m))
    fig, axes = plt.subplots(1, 2, figsize=(10, 0.5 * len(rows) + 2.4), sharey=True)
    y = np.arange(len(rows))
    for ax, attr, axis_label in ((axes[0], "swing_total_m", "change of the total distance [m]"),
                                 (axes[1], "swing_margin_m", "change of the margin to the LDA [m]")):
        vals = [getattr(i, attr) for i in rows]
        worse = [v > 0 for v in vals] if attr == "swing_total_m" else [v < 0 for v in vals]
        ax.barh(y, vals, color=[OKABE_ITO[1] if w else OKABE_ITO[0] for w in worse],
                hatch=["//" if w else "" for w in worse], edgecolor="black", lw=0.4)
        ax.axvline(0, color="black", lw=1)
        ax.set_xlabel(axis_label, fontsize=8)
        ax.grid(True, axis="x", alpha=0.3)

    def label(i: Any) -> str:
        unit = KEYS[i.name].unit.replace("**", "^") if i.name in KEYS else ""
        return f"{i.name}\n{i.p5:.4g} to {i.p95:.4g} {unit}".rstrip()

    axes[0].set_yticks(y, [label(i) for i in rows], fontsize=7)
    axes[0].invert_yaxis()
    fig.suptitle(f"One-at-a-time swings (low to high value, others nominal): {r.scenario.name}", fontsize=9)
    _footer(fig, r.scenario, f"seed {r.settings.seed}; vermillion, hatched: longer landing / smaller margin",
            caution_loc="lower left", caution_ax=1)
    return fig


@styled
def surrogate_exceedance_figure(r: Ranking) -> Figure:
    """Exceedance curve of the total distance from the surrogate, beside the Monte Carlo check's."""
    plt = _pyplot()
    fig, ax = plt.subplots(figsize=(8, 5))
    curves = [("surrogate", r.surrogate.sorted_total_m if r.surrogate is not None else None)]
    if r.mc_check is not None:
        label = f"Monte Carlo check, real solver ({r.mc_check.samples:,})"
        curves.append((label, r.mc_check.sorted_total_m))
    floor = 1.0
    for label, xs in curves:
        if xs is None or xs.size == 0:
            continue
        grid = np.linspace(xs[0], xs[-1], 600)
        p, _, _ = exceedance_curve(xs, grid)
        keep = p > 0
        ax.step(grid[keep], p[keep], where="post", label=label)
        floor = min(floor, 0.5 / xs.size)
    runway_marks(ax, float(r.scenario.values["runway.lda"]), r.scenario.values.get("runway.resa_length"))
    ax.set_yscale("log")
    ax.set_ylim(floor, 1)
    ax.set_xlabel("total landing distance from the screen height x [m]")
    ax.set_ylabel("probability that the distance exceeds x")
    passed = r.tail is not None and r.tail.passed
    verdict = "passed" if passed else "FAILED: the surrogate's tail is not reliable"
    ax.set_title(f"Surrogate exceedance curve: {r.scenario.name} (tail check {verdict})", fontsize=9)
    ax.grid(True, which="both", alpha=0.3)
    ax.legend(loc="lower left")
    _footer(fig, r.scenario, f"seed {r.settings.seed}")
    return fig


#: file stem -> figure function, for a ranking (the exceedance figure only with polynomial chaos)
RANK_FIGURES = {"indices": indices_figure, "tornado": tornado_figure,
                "surrogate-exceedance": surrogate_exceedance_figure}


@styled
def risk_curve_figure(r: RareAssessment) -> Figure:
    """P(overrun) against the landing distance available, one curve per method, on a log axis."""
    plt = _pyplot()
    rc = r.risk_curve
    assert rc is not None
    fig, ax = plt.subplots(figsize=(8, 5.2))
    ax.plot(rc.lda_m, rc.p_subset, label=f"subset simulation ({rc.subset_calls:,} solver calls)")
    ax.plot(rc.lda_m, rc.p_mc, lw=2.5, alpha=0.6, label=f"Monte Carlo ({rc.mc_samples:,} samples)")
    pts = np.array(rc.form_points)
    ax.plot(pts[:, 0], pts[:, 1], "s", label=f"FORM ({rc.form_calls:,} calls)")
    lda = float(r.scenario.values["runway.lda"])
    runway_marks(ax, lda, r.scenario.values.get("runway.resa_length"))
    ax.errorbar([lda], [r.probability], yerr=[[r.probability - r.ci[0]], [r.ci[1] - r.probability]],
                fmt="o", color="black", capsize=4,
                label=f"{r.method} at the LDA {lda:.0f} m: {r.probability:.2e}")
    ax.set_yscale("log")
    ax.set_ylim(1e-10, 1)
    ax.set_xlabel("landing distance available [m]")
    ax.set_ylabel("probability of an overrun per landing")
    ax.set_title(f"Overrun risk against runway length: {r.scenario.name}", fontsize=9)
    ax.grid(True, which="both", alpha=0.3)
    ax.legend(loc="lower left")
    _footer(fig, r.scenario, f"seed {r.settings.seed}")
    return fig
