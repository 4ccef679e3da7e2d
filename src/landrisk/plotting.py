"""Figures of an assessment (matplotlib, imported only when a figure is made), fit for print.

Every figure goes through the same helpers: a colour-blind-safe palette (Okabe & Ito 2008, "Color
Universal Design") with a line style per colour, so that lines stay apart in grey print too; the caution
inside the plot area, where cropping keeps it, and "invented data" on figures of invented scenarios;
the LDA and the end of the runway-end safety area on distance axes; titles wrapped to the figure's width
and a layout that keeps every label inside the canvas at the figure's stated size. Files: PNG at
300 dpi and SVG, both cut to the tight bounding box, with the run's provenance in their metadata and a
one-line provenance footer.

Each figure carries the caution and the run's provenance (tool version, scenario, samples, sampler,
seed) in its footer and in the file's metadata. The assessment figures take ``units`` (``si``, the
default, or ``aviation``) for their distance axes and labels; landings that cannot stop (an infinite
distance) are counted in the exceedance curve and named in its title, and left out of the histogram.
"""

from __future__ import annotations

import functools
import io
import json
import textwrap
from collections.abc import Callable, Sequence
from typing import TYPE_CHECKING, Any, TypeVar

import numpy as np

from landrisk import CAUTION, __version__, invented
from landrisk.model import KEYS
from landrisk.studies import Assessment, Ranking, RareAssessment
from landrisk.studies.calibrate import Calibration
from landrisk.studies.epistemic import EpistemicAssessment
from landrisk.studies.study import StudyResult
from landrisk.units import DisplayUnits
from landrisk.uq import exceedance_curve, wilson_interval, zero_event_bound

if TYPE_CHECKING:
    from matplotlib.axes import Axes
    from matplotlib.figure import Figure

__all__ = [
    "FIGURES",
    "LINESTYLES",
    "OKABE_ITO",
    "PNG_DPI",
    "RANK_FIGURES",
    "calibration_residuals_figure",
    "convergence_figure",
    "epistemic_figure",
    "exceedance_figure",
    "figure_bytes",
    "histogram_figure",
    "indices_figure",
    "overrun_profile_figure",
    "risk_curve_figure",
    "study_cases_figure",
    "study_comparisons_figure",
    "study_figures",
    "study_yearly_figure",
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


def runway_marks(ax: Axes, lda_m: float, resa_m: float | None, unit: str = "m") -> None:
    """The LDA and the end of the runway-end safety area (LDA + resa_length) as vertical lines on a
    distance axis (in ``unit``, the axis's own), the safety area shaded between them."""
    ax.axvline(lda_m, color="black", lw=2, ls="-", label=f"LDA {lda_m:.0f} {unit}", zorder=3)
    if resa_m:
        end = lda_m + resa_m
        ax.axvspan(lda_m, end, color="0.85", alpha=0.6, lw=0, zorder=0)
        ax.axvline(end, color="black", lw=1.4, ls=(0, (2, 1)), zorder=3,
                   label=f"end of the safety area, LDA + {resa_m:.0f} {unit} = {end:.0f} {unit}")


def _caution_box(fig: Figure, axes: Sequence[Axes], scenario: Any, loc: str) -> Any:
    """The caution (and "INVENTED DATA") inside the plot area of the first of ``axes``, in a framed box
    at ``loc``; "best": the axes and place of :data:`_CAUTION_PLACES` where it covers the least of the
    plotted data."""
    from matplotlib.offsetbox import AnchoredText

    if loc == "best":
        scored = [(_least_covering(fig, ax, _caution_maker(fig, ax, scenario, AnchoredText)), k)
                  for k, ax in enumerate(axes)]
        (_score, where), k = min(scored, key=lambda t: (t[0][0], t[1]))
        box = _caution_maker(fig, axes[k], scenario, AnchoredText)(where)
    else:
        box = _caution_maker(fig, axes[0], scenario, AnchoredText)(loc)
        k = 0
    axes[k].add_artist(box)
    return box


def _caution_maker(fig: Figure, ax: Axes, scenario: Any, anchored: Any) -> Callable[[str], Any]:
    """A function of the place that makes the caution box for ``ax`` (wrapped to its width)."""
    width_in = ax.get_position().width * fig.get_figwidth()
    chars = min(66, max(36, int(width_in * 0.85 * 72 / 3.4)))  # about 3.4 pt per character at 6.5 pt
    lines = textwrap.wrap(CAUTION, chars)
    if invented(scenario.values.get("scenario.description")):
        lines = ["INVENTED DATA: an illustration, no real aircraft or runway", *lines]

    def make(where: str) -> Any:
        box = anchored("\n".join(lines), loc=where, prop={"size": 6.5}, frameon=True, borderpad=0.4,
                       pad=0.3)
        box.patch.set_boxstyle("round,pad=0.2")
        box.patch.set_facecolor("white")
        box.patch.set_alpha(0.9)
        box.patch.set_edgecolor("#D55E00")
        box.set_zorder(5)
        return box

    return make


#: Places tried for the caution box, in order of preference (the first of equally good ones wins).
_CAUTION_PLACES = ("upper right", "upper left", "lower right", "lower left", "center right", "center left",
                   "upper center", "lower center")


def _least_covering(fig: Figure, ax: Axes, make: Callable[[str], Any]) -> tuple[float, str]:
    """The place of :data:`_CAUTION_PLACES` where the caution box hides the least: line points (each
    line sampled densely in display space), filled areas (bands, bars) and the legend."""
    import matplotlib.collections as mcoll
    from matplotlib.path import Path

    canvas: Any = fig.canvas
    renderer = canvas.get_renderer()
    points = []
    for line in ax.get_lines():
        xy = line.get_transform().transform(np.asarray(line.get_xydata(), dtype=float))
        xy = xy[np.all(np.isfinite(xy), axis=1)]
        if len(xy) >= 2:  # 50 points per segment, so that a long straight segment still counts
            t = np.linspace(0.0, 1.0, 50)[:, None, None]
            xy = (xy[:-1] * (1 - t) + xy[1:] * t).reshape(-1, 2)
        points.append(xy)
    pts = np.concatenate(points) if points else np.empty((0, 2))
    # Background shading (zorder <= 0, such as the safety area) may be covered; bands and bars not.
    filled = [a for a in [*(c for c in ax.collections if isinstance(c, mcoll.PolyCollection)), *ax.patches]
              if a.get_zorder() > 0]
    legend = ax.get_legend()
    legend_box = legend.get_window_extent(renderer) if legend is not None else None
    best, best_score = _CAUTION_PLACES[0], np.inf
    for where in _CAUTION_PLACES:
        box = make(where)
        ax.add_artist(box)
        bb = box.get_window_extent(renderer)
        box.remove()
        inside = np.count_nonzero((pts[:, 0] >= bb.x0) & (pts[:, 0] <= bb.x1) & (pts[:, 1] >= bb.y0)
                                  & (pts[:, 1] <= bb.y1)) if len(pts) else 0
        gx, gy = np.meshgrid(np.linspace(bb.x0, bb.x1, 12), np.linspace(bb.y0, bb.y1, 6))
        grid = np.column_stack([gx.ravel(), gy.ravel()])
        covered = 0
        for artist in filled:
            shape: Any = artist
            paths = shape.get_paths() if hasattr(shape, "get_paths") else [shape.get_path()]
            tr = artist.get_transform()
            for path in paths:  # transformed first: contains_points(transform=) drops a log scale
                shown = Path(tr.transform(path.vertices), path.codes)
                covered += int(np.count_nonzero(shown.contains_points(grid)))
        overlap = 0.0
        if legend_box is not None:
            w = max(0.0, min(bb.x1, legend_box.x1) - max(bb.x0, legend_box.x0))
            h = max(0.0, min(bb.y1, legend_box.y1) - max(bb.y0, legend_box.y0))
            overlap = w * h / max(bb.width * bb.height, 1.0)
        score = inside + 5.0 * covered + 1000.0 * overlap
        if score < best_score:
            best, best_score = where, score
    return best_score, best


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


def _footer(fig: Figure, scenario: Any, run: str, caution_loc: str = "best",
            caution_ax: int | None = None) -> None:
    """The last step of every figure: the caution inside an axes (``caution_ax``, or where it hides the
    least of the data), a
    provenance line under the axes, titles wrapped to fit and a layout that keeps every text inside the
    canvas."""
    fig.text(0.005, 0.005, f"landrisk {__version__} | scenario {scenario.name} ({scenario.source}) | {run}",
             fontsize=6, va="bottom", ha="left")
    _fit_titles(fig)
    rect = (0, _FOOTER_IN / fig.get_figheight(), 1, 1)
    fig.tight_layout(rect=rect, pad=1.0)
    # placed once the layout is known; in the axes ``caution_ax``, or in the best of the plot axes
    plots = [ax for ax in fig.axes if ax.get_label() != "<colorbar>" and ax.get_visible() and ax.axison]
    axes = [fig.axes[caution_ax]] if caution_ax is not None else (plots or fig.axes[:1])
    _caution_box(fig, axes, scenario, caution_loc)
    fig.tight_layout(rect=rect, pad=1.0)
    _fit_titles(fig)


def _feet_axis(ax: Axes, units: str | None, which: str = "x") -> None:
    """With no unit system chosen (metres with feet beside them, as the text reports), a secondary
    distance axis in feet opposite the metre axis (1 ft = 0.3048 m exactly, NIST SP 811, 2008, B.8)."""
    if units is not None:
        return
    to_ft, to_m = (lambda m: np.asarray(m) / 0.3048), (lambda ft: np.asarray(ft) * 0.3048)
    if which == "x":
        ax.secondary_xaxis("top", functions=(to_ft, to_m)).set_xlabel("[ft]", fontsize=7, labelpad=1)
    else:
        ax.secondary_yaxis("right", functions=(to_ft, to_m)).set_ylabel("[ft]", fontsize=7)


def _assess_run(a: Assessment) -> str:
    return f"{a.settings.samples:,} samples, {a.settings.sampler}, seed {a.settings.seed}"


@styled
def exceedance_figure(a: Assessment, units: str | None = None) -> Figure:
    """P(total landing distance > x) on a log axis, with its 95 % band, the LDA and comparison lines.

    Where no sample exceeds x the band's upper end is the one-sided Clopper-Pearson bound, as in the
    report and the JSON.
    """
    plt = _pyplot()
    du = DisplayUnits(units or "si")
    lu = du.unit("length")
    span = a.finite_total_range()
    fig, ax = plt.subplots(figsize=(8, 5.2))
    floor = 0.5 / a.n
    if span is not None:
        grid, p, lo, hi = a.exceedance(np.linspace(span[0], span[1], 600))
        binned = f", counted in {a.percentile_error_m:g} m bins" if a.streamed else ""
        ax.fill_between(du.length(grid), np.maximum(lo, floor), np.maximum(hi, floor), alpha=0.3,
                        label=f"{100 * a.settings.confidence:g} % interval (Wilson; no exceedance: "
                              f"Clopper-Pearson {zero_event_bound(a.n, a.settings.confidence):.1e})")
        keep = p > 0
        ax.step(du.length(grid[keep]), p[keep], where="post", lw=1.6, label=f"Monte Carlo estimate{binned}")
    ax.set_yscale("log")
    ax.set_ylim(floor, 1.0)
    runway_marks(ax, du.length(a.lda_m), du.length(a.resa_length_m), lu)
    for c, colour, style in zip(a.comparisons, OKABE_ITO[1:], LINESTYLES[1:], strict=False):
        d = du.length(c.distance_m)
        ax.axvline(d, ls=style, color=colour, lw=1.4, label=f"{c.name}: {d:.0f} {lu}")
    ax.set_xlabel(f"total landing distance from the screen height x [{lu}]")
    ax.set_ylabel("probability that the distance exceeds x")
    _feet_axis(ax, units)
    stop = f"; {a.cannot_stop:,} of {a.n:,} landings cannot stop" if a.cannot_stop else ""
    ax.set_title(f"Exceedance of the landing distance: {a.scenario.name}\n"
                 f"P(overrun) = {a.p_overrun.text()}{stop}", fontsize=9)
    ax.grid(True, which="both", alpha=0.3)
    ax.legend(loc="lower left")
    _footer(fig, a.scenario, _assess_run(a))
    return fig


@styled
def histogram_figure(a: Assessment, units: str | None = None) -> Figure:
    """Histogram of the total landing distance (of the landings that stop) with the LDA."""
    plt = _pyplot()
    du = DisplayUnits(units or "si")
    lu = du.unit("length")
    edges, density, stops = a.total_density(120)
    fig, ax = plt.subplots(figsize=(8, 4.8))
    if stops:
        shown = du.length(edges)
        ax.hist(shown[:-1], bins=shown, weights=density / du.length(1.0), color=OKABE_ITO[0], alpha=0.85,
                label=f"Monte Carlo, {stops:,} landings that stop")
        ax.set_yscale("log")
    else:
        ax.text(0.5, 0.5, "no landing stops", transform=ax.transAxes, ha="center")
    runway_marks(ax, du.length(a.lda_m), du.length(a.resa_length_m), lu)
    if np.isfinite(a.nominal_total_m):
        d = du.length(a.nominal_total_m)
        ax.axvline(d, color=OKABE_ITO[1], ls="--", label=f"deterministic {d:.0f} {lu}")
    ax.set_xlabel(f"total landing distance from the screen height [{lu}]")
    ax.set_ylabel(f"probability density [1/{lu}]")
    _feet_axis(ax, units)
    stop = f" ({a.cannot_stop:,} landings that cannot stop left out)" if a.cannot_stop else ""
    ax.set_title(f"Distribution of the landing distance: {a.scenario.name}{stop}\n"
                 f"P(overrun) = {a.p_overrun.text()}", fontsize=9)
    ax.grid(True, which="major", alpha=0.3)
    ax.legend(loc="lower left")
    _footer(fig, a.scenario, _assess_run(a))
    return fig


@styled
def convergence_figure(a: Assessment, units: str | None = None) -> Figure:
    """P(overrun) and the 99th percentile against the number of samples used, each with its interval as
    a band (Wilson; order statistics where the prefix can bound the percentile)."""
    plt = _pyplot()
    du = DisplayUnits(units or "si")
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
    q = np.asarray(c["quantile"], dtype=float)
    ok = np.isfinite(q)
    lda = du.length(a.lda_m)
    if ok.any():
        q_lo = np.asarray(c.get("quantile_lo", np.full(q.shape, np.nan)), dtype=float)
        q_hi = np.asarray(c.get("quantile_hi", np.full(q.shape, np.nan)), dtype=float)
        band = ok & np.isfinite(q_lo) & np.isfinite(q_hi)
        if band.any():
            ax2.fill_between(n[band], du.length(q_lo[band]), du.length(q_hi[band]), alpha=0.3,
                             color=OKABE_ITO[0], label=f"{100 * conf:g} % interval (order statistics)")
        ax2.plot(n[ok], du.length(q[ok]), marker="o", ms=3, label="estimate")
        ax2.axhline(lda, color="black", lw=1.5, label=f"LDA {lda:.0f} {du.unit('length')}")
        ax2.legend(loc="lower right", fontsize=7)
        ax2.set_xscale("log")
    else:
        ax2.text(0.5, 0.5, "beyond any runway at every sample count", transform=ax2.transAxes,
                 ha="center", fontsize=8)
    ax2.set_xlabel("samples")
    ax2.set_ylabel(f"P99 of the total distance [{du.unit('length')}]")
    _feet_axis(ax2, units, "y")
    ax2.set_title("99th percentile" + ("" if ok.all() else " (beyond any runway where not shown)"),
                  fontsize=9)
    for ax in (ax1, ax2):
        ax.grid(True, which="both", alpha=0.3)
    fig.suptitle(f"Convergence of the Monte Carlo estimates: {a.scenario.name}", fontsize=10)
    _footer(fig, a.scenario, _assess_run(a))
    return fig


#: file stem -> figure function
FIGURES = {"exceedance": exceedance_figure, "histogram": histogram_figure, "convergence": convergence_figure}


def figure_bytes(fig: Figure, fmt: str, record: dict[str, Any], *, close: bool = True) -> bytes:
    """The figure as PNG (300 dpi) or SVG bytes, cut to its tight bounding box, with the run's record in
    the file's metadata; closes it unless ``close`` is false."""
    plt = _pyplot()
    buf = io.BytesIO()
    text = json.dumps(record, sort_keys=True, default=str, ensure_ascii=False)
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


def _display_unit(name: str, units: str | None = None) -> tuple[Callable[[Any], Any], str]:
    """(convert, unit) to show a key's SI value: in the unit system ``units`` (``si``, ``aviation``), or
    (None) in the unit a scenario file uses for it, kt for speeds."""
    unit = KEYS[name].unit if name in KEYS else ""
    if units:
        du = DisplayUnits(units)
        kind, sym = du.key_unit(unit)
        if kind is not None:
            return (lambda v, du=du, kind=kind: du.value(kind, v)), sym
        return (lambda v: v), sym
    if unit == "m/s":
        return (lambda v: np.asarray(v) * (3600.0 / 1852.0)), "kt"  # 1 kt = 1852 m / 3600 s (exact)
    return (lambda v: v), unit.replace("**", "^")


def _value_text(name: str, v: float, units: str | None = None) -> str:
    """A value in its key's type and display unit: ``True``, ``3``, ``12 kt``, ``420 m``."""
    spec = KEYS.get(name)
    if spec is not None and spec.unit in ("", "1") and isinstance(spec.cast(v), bool | int):
        return str(spec.cast(v))
    conv, unit = _display_unit(name, units)
    shown = float(conv(v))
    text = f"{shown:,.0f}" if abs(shown) >= 1e4 else f"{shown:.4g}"
    return f"{text} {unit}".rstrip()


@styled
def indices_figure(r: Ranking) -> Figure:
    """Sobol indices of the total landing distance per input (discrete inputs each their own bar), the
    Shapley effects beside them with correlated inputs, and each input's first-order index of the overrun
    indicator in a second panel."""
    plt = _pyplot()
    names = [i.name for i in r.inputs]
    y = np.arange(len(names))
    overrun = {i.name: i for i in r.overrun.indices} if r.overrun is not None else {}
    fig, (ax, ax2) = plt.subplots(1, 2, figsize=(11, 0.55 * len(names) + 2.6), sharey=True,
                                  gridspec_kw={"width_ratios": [3, 2]})
    shap = dict(zip(r.shapley.names, r.shapley.effects, strict=True)) if r.shapley is not None else {}
    h = 0.27 if shap else 0.4
    ax.barh(y - h / (1 if shap else 2), [i.first for i in r.inputs], height=h, label="first order")
    ax.barh(y + (0 if shap else h / 2), [i.total for i in r.inputs], height=h, label="total")
    if shap:
        ax.barh(y + h, [shap.get(n, 0.0) for n in names], height=h, label="Shapley effect")
    if r.method == "mc":
        for k, i in enumerate(r.inputs):
            ax.plot(i.total_ci, [k + h / 2] * 2, color="black", lw=1)
            ax.plot(i.first_ci, [k - h / 2] * 2, color="black", lw=1)
    labels = [n + (" (discrete)" if i.discrete else "") for n, i in zip(names, r.inputs, strict=True)]
    ax.set_yticks(y, labels, fontsize=8)
    ax.invert_yaxis()
    ax.set_xlabel("index of the total landing distance", fontsize=8)
    ax.legend(fontsize=7, loc="lower right")
    ax.grid(True, axis="x", alpha=0.3)
    vals = [overrun[n].first_order if n in overrun else None for n in names]
    shown = [v if v is not None else 0.0 for v in vals]
    ax2.barh(y, shown, height=0.5, color="tab:red")
    for k, n in enumerate(names):
        o = overrun.get(n)
        if o is not None and o.ci is not None:
            ax2.plot(o.ci, [k] * 2, color="black", lw=1)
        elif n in overrun:
            ax2.text(0, k, "  too few overruns", va="center", fontsize=7)
    ax2.set_xlabel("first-order index of the overrun indicator", fontsize=8)
    ax2.grid(True, axis="x", alpha=0.3)
    if any(v is not None and v > 0 for v in vals):
        ax2.set_xscale("log")
    method = (f"polynomial chaos, {r.calls} solver calls" if r.method == "pce"
              else f"Monte Carlo, {r.calls:,} solver calls")
    source = r.overrun.source if r.overrun else "no overrun samples"
    fig.suptitle(f"Which inputs drive the landing distance and the overrun: {r.scenario.name}\n"
                 f"({method}; overrun indices from {source})", fontsize=9)
    fig.subplots_adjust(left=0.27, right=0.97, bottom=0.2, top=0.86, wspace=0.06)
    _footer(fig, r.scenario, f"seed {r.settings.seed}")
    return fig


@styled
def tornado_figure(r: Ranking, units: str | None = None) -> Figure:
    """One-at-a-time swings of the total distance and of the margin to the LDA, largest first; a discrete
    input from its least to its greatest value (``units``: ``si`` or ``aviation``; default metres and the
    scenario file's units)."""
    plt = _pyplot()
    du = DisplayUnits(units or "si")
    lu = du.unit("length")
    rows = sorted((i for i in r.inputs if np.isfinite(i.swing_total_m)), key=lambda i: -abs(i.swing_total_m))
    fig, axes = plt.subplots(1, 2, figsize=(10.5, 0.55 * len(rows) + 2.4), sharey=True)
    y = np.arange(len(rows))
    for ax, attr, axis_label in ((axes[0], "swing_total_m", f"change of the total distance [{lu}]"),
                                 (axes[1], "swing_margin_m", f"change of the margin to the LDA [{lu}]")):
        vals = [du.length(getattr(i, attr)) for i in rows]
        worse = [v > 0 for v in vals] if attr == "swing_total_m" else [v < 0 for v in vals]
        ax.barh(y, vals, color=[OKABE_ITO[1] if w else OKABE_ITO[0] for w in worse],
                hatch=["//" if w else "" for w in worse], edgecolor="black", lw=0.4)
        ax.axvline(0, color="black", lw=1)
        ax.set_xlabel(axis_label, fontsize=8)
        ax.grid(True, axis="x", alpha=0.3)

    def label(i: Any) -> str:
        return f"{i.name}\n{_value_text(i.name, i.p5, units)} to {_value_text(i.name, i.p95, units)}"

    axes[0].set_yticks(y, [label(i) for i in rows], fontsize=7)
    axes[0].invert_yaxis()
    fig.suptitle(f"One-at-a-time swings (low to high value, others nominal): {r.scenario.name}", fontsize=9)
    fig.subplots_adjust(left=0.28, right=0.97, bottom=0.22, wspace=0.08)
    _footer(fig, r.scenario, f"seed {r.settings.seed}; red: longer landing / smaller margin")
    return fig


@styled
def overrun_profile_figure(r: Ranking, units: str | None = None) -> Figure:
    """Small multiples: each input's distribution given an overrun beside its prior, with both medians, in
    the unit the scenario file uses (kt for speeds) or of the system ``units``; a discrete input as bars
    per value."""
    plt = _pyplot()
    o = r.overrun
    d = r.problem.dimension
    cols = 3 if d > 4 else 2
    rows = int(np.ceil(d / cols))
    fig, axes = plt.subplots(rows, cols, figsize=(4 * cols, 2.7 * rows + 1.6), squeeze=False)
    enough = o is not None and o.effective_events >= 30
    for k, name in enumerate(r.problem.names):
        ax = axes[k // cols][k % cols]
        conv, unit = _display_unit(name, units)
        m = r.problem.marginals[k]
        if o is None:
            ax.set_axis_off()
            continue
        row = o.profile[k]
        if m.discrete:
            vals = [v for v, _, _ in row.levels]
            xk = np.arange(len(vals))
            ax.bar(xk - 0.2, [p for _, p, _ in row.levels], width=0.4, label="all landings")
            if enough:
                ax.bar(xk + 0.2, [q for _, _, q in row.levels], width=0.4, color="tab:red", label="overruns")
            ax.set_xticks(xk, [_value_text(name, v, units) for v in vals], fontsize=7)
            ax.set_ylabel("probability", fontsize=7)
        else:
            prior = np.asarray(conv(o.prior_x[:, k]), dtype=float)
            lo, hi = np.quantile(prior, [0.001, 0.999])
            if enough:
                lo = min(lo, float(conv(float(np.min(o.overrun_x[:, k])))))
                hi = max(hi, float(conv(float(np.max(o.overrun_x[:, k])))))
            bins = np.linspace(lo, hi, 40)
            ax.hist(prior, bins=bins, density=True, alpha=0.5, histtype="stepfilled", label="all landings")
            ax.axvline(float(conv(row.prior_median)), color="tab:blue", ls="--", lw=1)
            if enough and row.overrun_median is not None:
                ax.hist(np.asarray(conv(o.overrun_x[:, k]), dtype=float), bins=bins, weights=o.overrun_w,
                        density=True, alpha=0.6, histtype="stepfilled", color="tab:red", label="overruns")
                ax.axvline(float(conv(row.overrun_median)), color="tab:red", ls="--", lw=1)
            ax.set_yticks([])
            ax.set_xlabel(f"[{unit}]" if unit else "", fontsize=7)
        ax.set_title(name, fontsize=8)
        ax.tick_params(labelsize=7)
    for k in range(d, rows * cols):
        axes[k // cols][k % cols].set_axis_off()
    axes[0][0].legend(fontsize=7)
    src = (f"{o.source}, {o.effective_events:.0f} effective overruns" if o is not None else "no samples")
    if o is not None and not enough:
        src += ": too few to draw the overrun profile"
    fig.suptitle(f"Inputs given an overrun (red) beside all landings (blue), dashed: medians: "
                 f"{r.scenario.name}\n({src})", fontsize=9)
    fig.subplots_adjust(left=0.06, right=0.95, top=0.88, bottom=0.16, hspace=0.7, wspace=0.2)
    _footer(fig, r.scenario, f"seed {r.settings.seed}")
    return fig


@styled
def surrogate_exceedance_figure(r: Ranking, units: str | None = None) -> Figure:
    """Exceedance curve of the total distance from the surrogate, beside the Monte Carlo check's."""
    plt = _pyplot()
    du = DisplayUnits(units or "si")
    lu = du.unit("length")
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
        ax.step(du.length(grid[keep]), p[keep], where="post", label=label)
        floor = min(floor, 0.5 / xs.size)
    resa = r.scenario.values.get("runway.resa_length")
    runway_marks(ax, du.length(float(r.scenario.values["runway.lda"])), du.length(resa) if resa else None, lu)
    ax.set_yscale("log")
    ax.set_ylim(floor, 1)
    ax.set_xlabel(f"total landing distance from the screen height x [{lu}]")
    ax.set_ylabel("probability that the distance exceeds x")
    _feet_axis(ax, units)
    passed = r.tail is not None and r.tail.passed
    verdict = "passed" if passed else "FAILED: the surrogate's tail is not reliable"
    ax.set_title(f"Surrogate exceedance curve: {r.scenario.name} (tail check {verdict})", fontsize=9)
    ax.grid(True, which="both", alpha=0.3)
    ax.legend(loc="lower left")
    _footer(fig, r.scenario, f"seed {r.settings.seed}")
    return fig


#: file stem -> figure function, for a ranking (the exceedance figure only with polynomial chaos); all but
#: the indices take ``units``
RANK_FIGURES: dict[str, Callable[..., Figure]] = {"indices": indices_figure, "tornado": tornado_figure,
                                                  "overrun-profile": overrun_profile_figure,
                                                  "surrogate-exceedance": surrogate_exceedance_figure}


@styled
def risk_curve_figure(r: RareAssessment, units: str | None = None) -> Figure:
    """P(overrun) against the landing distance available, one curve per method, on a log axis; the subset
    curve with its interval band, drawn only where every replicate reached it; the estimate at the LDA
    with its interval, or a hollow marker labelled as such where the method did not converge (``units``:
    the length axis in ``si`` or ``aviation`` units)."""
    plt = _pyplot()
    du = DisplayUnits(units or "si")
    lu = du.unit("length")
    rc = r.risk_curve
    assert rc is not None
    fig, ax = plt.subplots(figsize=(8, 5.2))
    ok = rc.converged & (rc.p_subset > 0)
    p_ok = np.where(ok, rc.p_subset, np.nan)
    ax.plot(du.length(rc.lda_m), p_ok, label=f"subset simulation ({rc.subset_calls:,} solver calls)")
    ax.fill_between(du.length(rc.lda_m), np.where(ok, np.maximum(rc.ci_lo, 1e-12), np.nan),
                    np.where(ok, rc.ci_hi, np.nan),
                    alpha=0.25, label=f"{100 * r.settings.confidence:g} % interval over the replicates")
    ax.plot(du.length(rc.lda_m), rc.p_mc, lw=2.5, alpha=0.6, label=f"Monte Carlo ({rc.mc_samples:,} samples)")
    pts = np.array(rc.form_points)
    ax.plot(du.length(pts[:, 0]), pts[:, 1], "s", label=f"FORM ({rc.form_calls:,} calls)")
    lda = du.length(float(r.scenario.values["runway.lda"]))
    resa = r.scenario.values.get("runway.resa_length")
    runway_marks(ax, lda, du.length(resa) if resa else None, lu)
    if r.converged and r.probability > 0:
        ax.errorbar([lda], [r.probability], yerr=[[r.probability - r.ci[0]], [r.ci[1] - r.probability]],
                    fmt="o", color="black", capsize=4,
                    label=f"{r.method} at the LDA {lda:.0f} {lu}: {r.probability:.2e}")
    elif r.probability > 0:
        ax.plot([lda], [r.probability], "o", mfc="none", color="red",
                label=f"{r.method} at the LDA {lda:.0f} {lu}: NOT CONVERGED, no estimate")
    ax.set_yscale("log")
    ax.set_ylim(1e-10, 1)
    ax.set_xlabel(f"landing distance available [{lu}]")
    _feet_axis(ax, units)
    ax.set_ylabel("probability of an overrun per landing")
    ax.set_title(f"Overrun risk against runway length: {r.scenario.name}", fontsize=9)
    ax.grid(True, which="both", alpha=0.3)
    ax.legend(loc="lower left")
    _footer(fig, r.scenario, f"seed {r.settings.seed}")
    return fig


def calibration_residuals_figure(c: Calibration) -> Figure:
    """Residual (model - reference) [m] of each reference row against each condition the table varies,
    with the rows' tolerances as error bars; at the fitted values (dots) and at the start (crosses)."""
    plt = _pyplot()
    varied = [k for k, v in c.conditions.items() if np.unique(np.asarray(v)).size > 1] or list(c.conditions)
    cols = max(1, min(3, len(varied)))
    rows = max(1, -(-len(varied) // cols))
    fig, axes = plt.subplots(rows, cols, figsize=(4.0 * cols, 3.2 * rows + 0.8), squeeze=False)
    for ax, key in zip(axes.flat, varied, strict=False):
        x = np.asarray(c.conditions[key], dtype=float)
        ax.plot(x, c.start_model_m - c.reference_m, "x", color="grey", ms=4, label="at the start")
        ax.errorbar(x, c.residual_m, yerr=c.sigma_m if c.sigma_from == "tolerance" else None, fmt="o", ms=3,
                    capsize=2, label="fitted")
        ax.axhline(0.0, color="black", lw=0.8)
        unit = KEYS[key].unit if key in KEYS else ""
        ax.set_xlabel(f"{key} [{unit}]" if unit else key, fontsize=8)
        ax.set_ylabel("model - reference [m]", fontsize=8)
        ax.grid(True, alpha=0.3)
    for ax in list(axes.flat)[len(varied):]:
        ax.set_visible(False)
    axes.flat[0].legend(fontsize=7)
    fig.suptitle(f"Calibration residuals: {c.scenario.name} against {c.reference_source}", fontsize=9)
    fig.tight_layout(rect=(0, 0.08, 1, 0.96))
    _footer(fig, c.scenario, f"{c.reference_m.size} reference rows, {c.solver_calls:,} solver calls")
    return fig


def epistemic_figure(e: EpistemicAssessment) -> Figure:
    """The distribution of P(overrun) over the epistemic parameters (log axis), its median and upper
    quantile; below it, apart, each draw's sampling interval of the Monte Carlo estimator."""
    plt = _pyplot()
    r = e.result
    floor = 0.5 / r.inner_samples
    p = np.maximum(r.probability, floor)
    order = np.argsort(p)
    fig, (ax, bx) = plt.subplots(2, 1, figsize=(8, 6.4), sharex=True, gridspec_kw={"height_ratios": [2, 1]})
    bins = np.logspace(np.log10(p.min()) - 0.05, np.log10(p.max()) + 0.05, 30)
    ax.hist(p, bins=bins, color="tab:blue", alpha=0.7, label=f"{r.outer} draws of the epistemic parameters")
    med = float(np.quantile(r.probability, 0.5))
    up = float(np.quantile(r.probability, r.upper_level))
    ax.axvline(max(med, floor), color="black", lw=1.5, label=f"median {med:.2e}")
    ax.axvline(max(up, floor), color="tab:red", lw=1.5, ls="--",
               label=f"{100 * r.upper_level:g}th percentile {up:.2e}")
    ax.set_xscale("log")
    ax.set_ylabel("outer draws")
    ax.set_title(f"P(overrun) over the epistemic parameters: {e.scenario.name}", fontsize=9)
    ax.legend(fontsize=7)
    ax.grid(True, which="both", alpha=0.3)
    rank = np.arange(r.outer)
    lo = np.maximum(r.sampling_lo[order], floor)
    hi = np.maximum(r.sampling_hi[order], floor)
    bx.hlines(rank, lo, hi, color=np.where(r.nested[order], "tab:orange", "grey"), lw=0.8)
    bx.plot(p[order], rank, ".", ms=2, color="tab:blue")
    n0, (l0, h0) = r.nominal_probability, r.nominal_interval
    bx.errorbar([max(n0, floor)], [r.outer * 1.05], xerr=[[max(n0, floor) - max(l0, floor)],
                                                          [max(h0, floor) - max(n0, floor)]],
                fmt="s", color="black", capsize=3, label=f"nominal parameters {n0:.2e}")
    bx.set_xlabel("probability of an overrun per landing")
    bx.set_ylabel("draws (sorted)")
    bx.set_title(f"sampling intervals ({100 * r.confidence:g} %) of each estimate, apart from the spread "
                 "above (grey: reweighted, orange: nested)", fontsize=8)
    bx.legend(fontsize=7, loc="lower right")
    bx.grid(True, which="both", alpha=0.3)
    fig.subplots_adjust(bottom=0.16, hspace=0.3)
    _footer(fig, e.scenario, f"{r.method}, {r.inner_samples:,} inner samples, {r.solver_calls:,} solver "
            f"calls, seed {e.settings.seed}")
    return fig


# ------------------------------------------------------------------------------------------------ studies


def _study_footer(fig: Figure, r: StudyResult) -> None:
    fig.text(0.01, 0.01, f"landrisk {__version__} | study {r.name} ({r.source}) | {r.settings.samples:,} "
             f"samples per case, seed {r.settings.seed}, method {r.settings.method}\n" + CAUTION,
             fontsize=6, va="bottom", ha="left", wrap=True)


def study_cases_figure(r: StudyResult) -> Figure:
    """P(overrun) per case on a log axis with its 95 % interval; a triangle for an upper bound only."""
    plt = _pyplot()
    n = len(r.cases)
    fig, ax = plt.subplots(figsize=(8, 1.6 + 0.32 * n))
    for i, c in enumerate(r.cases):
        y = n - 1 - i
        color = "C0" if c.method == "mc" else "C1"
        if c.upper_bound_only:
            ax.plot([c.ci[1]], [y], "<", color=color)
            ax.hlines(y, c.ci[1] / 10, c.ci[1], color=color, ls=":")
        else:
            lo, hi = max(c.ci[0], c.p_overrun * 1e-3), c.ci[1]
            ax.errorbar([c.p_overrun], [y], xerr=[[c.p_overrun - lo], [hi - c.p_overrun]], fmt="o",
                        color=color, capsize=3)
    ax.set_yticks(range(n), [c.name for c in reversed(r.cases)], fontsize=7)
    ax.set_xscale("log")
    ax.set_xlabel("probability of an overrun per landing (95 % interval)")
    ax.plot([], [], "o", color="C0", label="Monte Carlo")
    ax.plot([], [], "o", color="C1", label="subset simulation")
    ax.plot([], [], "<", color="C0", label="no overrun seen: upper bound")
    ax.legend(fontsize=7, loc="best")
    ax.grid(True, which="both", axis="x", alpha=0.3)
    ax.set_title(f"Overrun probability per case: {r.name}", fontsize=9)
    fig.subplots_adjust(left=0.38, bottom=0.12 + 0.3 / max(n, 1))
    _study_footer(fig, r)
    return fig


def study_comparisons_figure(r: StudyResult) -> Figure:
    """Each comparison's risk ratio P(alternative) / P(baseline) with its paired 95 % interval."""
    plt = _pyplot()
    comps = [c for c in r.comparisons if c.paired.ratio is not None]
    n = max(len(comps), 1)
    fig, ax = plt.subplots(figsize=(8, 1.6 + 0.35 * n))
    for i, c in enumerate(comps):
        p = c.paired
        assert p.ratio is not None and p.ratio_ci is not None
        ax.errorbar([p.ratio], [n - 1 - i], xerr=[[p.ratio - p.ratio_ci[0]], [p.ratio_ci[1] - p.ratio]],
                    fmt="o", color="C2", capsize=3)
        ax.annotate(f"risk reduction {100 * (1 - p.ratio):.0f} %", (p.ratio, n - 1 - i), fontsize=6,
                    xytext=(4, 4), textcoords="offset points")
    ax.set_yticks(range(len(comps)), [f"{c.alternative}\nvs {c.baseline}" for c in reversed(comps)],
                  fontsize=6)
    ax.axvline(1.0, color="grey", lw=1)
    ax.set_xscale("log")
    ax.set_xlabel("P(overrun) alternative / baseline (paired, common random numbers, 95 % interval)")
    ax.set_title(f"What each alternative buys: {r.name}", fontsize=9)
    ax.grid(True, which="both", axis="x", alpha=0.3)
    fig.subplots_adjust(left=0.4, bottom=0.14 + 0.3 / n)
    _study_footer(fig, r)
    return fig


def study_yearly_figure(r: StudyResult) -> Figure:
    """Expected overruns per year per case (and of the mix) with 95 % intervals, against the target."""
    plt = _pyplot()
    e = r.exposure
    assert e is not None
    rows = [(name, y) for name, y in e.per_case.items()]
    if e.basis == "mix":
        rows.append(("mix of the cases", e.yearly))
    n = len(rows)
    fig, ax = plt.subplots(figsize=(8, 1.6 + 0.32 * n))
    for i, (_, y) in enumerate(rows):
        lam, (lo, hi) = y.overruns_per_year, y.overruns_per_year_ci
        if lam > 0:
            lo = max(lo, lam * 1e-3)
            ax.errorbar([lam], [n - 1 - i], xerr=[[lam - lo], [hi - lam]], fmt="o", capsize=3,
                        color="C3" if i == n - 1 and e.basis == "mix" else "C0")
        else:
            ax.plot([hi], [n - 1 - i], "<", color="C0")
    if e.target_per_year is not None:
        ax.axvline(e.target_per_year, color="red", ls="--",
                   label=f"target {e.target_per_year:.2g} per year ({e.target_status})")
        ax.legend(fontsize=7, loc="best")
    ax.set_yticks(range(n), [name for name, _ in reversed(rows)], fontsize=7)
    ax.set_xscale("log")
    ax.set_xlabel(f"expected overruns per year at {e.exposure.landings_per_year:,.0f} landings a year "
                  "(95 % interval)")
    ax.set_title(f"Yearly overrun risk: {r.name}", fontsize=9)
    ax.grid(True, which="both", axis="x", alpha=0.3)
    fig.subplots_adjust(left=0.38, bottom=0.12 + 0.3 / n)
    _study_footer(fig, r)
    return fig


def study_figures(r: StudyResult) -> dict[str, Any]:
    """The figures a study writes: cases, and where there are any, comparisons and the yearly risk."""
    figs: dict[str, Any] = {"study-cases": study_cases_figure}
    if any(c.paired.ratio is not None for c in r.comparisons):
        figs["study-comparisons"] = study_comparisons_figure
    if r.exposure is not None:
        figs["study-yearly"] = study_yearly_figure
    return figs
