"""Figures of an assessment (matplotlib, imported only when a figure is made).

Each figure carries the caution and the run's provenance (tool version, scenario, samples, sampler,
seed) in its footer and in the file's metadata.
"""

from __future__ import annotations

import io
import json
from typing import TYPE_CHECKING, Any

import numpy as np

from landrisk import CAUTION, __version__
from landrisk.model import KEYS
from landrisk.studies import Assessment, Ranking, RareAssessment
from landrisk.studies.study import StudyResult
from landrisk.uq import exceedance_curve, wilson_interval

if TYPE_CHECKING:
    from matplotlib.figure import Figure

__all__ = [
    "FIGURES",
    "RANK_FIGURES",
    "convergence_figure",
    "exceedance_figure",
    "figure_bytes",
    "histogram_figure",
    "indices_figure",
    "risk_curve_figure",
    "study_cases_figure",
    "study_comparisons_figure",
    "study_figures",
    "study_yearly_figure",
    "tornado_figure",
]


def _pyplot() -> Any:
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    return plt


def _footer(fig: Figure, scenario: Any, run: str) -> None:
    """Provenance (tool version, scenario, how the run was made) and the caution, under the axes."""
    fig.text(0.01, 0.01, f"landrisk {__version__} | scenario {scenario.name} ({scenario.source}) | {run}\n"
             + CAUTION, fontsize=6, va="bottom", ha="left", wrap=True)


def _assess_run(a: Assessment) -> str:
    return f"{a.settings.samples:,} samples, {a.settings.sampler}, seed {a.settings.seed}"


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
    ax.axvline(a.lda_m, color="black", lw=2, label=f"LDA {a.lda_m:.0f} m")
    for c, style in zip(a.comparisons, ("--", "-.", ":", (0, (5, 1, 1, 1))), strict=False):
        ax.axvline(c.distance_m, ls=style, color="grey", lw=1.2, label=f"{c.name}: {c.distance_m:.0f} m")
    ax.set_xlabel("total landing distance from the screen height x [m]")
    ax.set_ylabel("probability that the distance exceeds x")
    ax.set_title(f"Exceedance of the landing distance: {a.scenario.name}\n"
                 f"P(overrun) = {a.p_overrun.text()}", fontsize=9)
    ax.grid(True, which="both", alpha=0.3)
    ax.legend(fontsize=7, loc="lower left")
    fig.subplots_adjust(bottom=0.2)
    _footer(fig, a.scenario, _assess_run(a))
    return fig


def histogram_figure(a: Assessment) -> Figure:
    """Histogram of the total landing distance with the LDA."""
    plt = _pyplot()
    fig, ax = plt.subplots(figsize=(8, 4.8))
    ax.hist(a.outputs["total_m"], bins=120, density=True, alpha=0.8)
    ax.axvline(a.lda_m, color="black", lw=2, label=f"LDA {a.lda_m:.0f} m")
    ax.axvline(a.nominal_total_m, color="grey", ls="--", label=f"deterministic {a.nominal_total_m:.0f} m")
    ax.set_xlabel("total landing distance from the screen height [m]")
    ax.set_ylabel("probability density [1/m]")
    ax.set_title(f"Distribution of the landing distance: {a.scenario.name}", fontsize=9)
    ax.legend(fontsize=8)
    fig.subplots_adjust(bottom=0.2)
    _footer(fig, a.scenario, _assess_run(a))
    return fig


def convergence_figure(a: Assessment) -> Figure:
    """P(overrun) and the 99th percentile against the number of samples used."""
    plt = _pyplot()
    c = a.convergence
    n, p = c["n"], c["p_event"]
    conf = a.settings.confidence
    lo, hi = wilson_interval(np.rint(p * n), n, conf)
    fig, (ax1, ax2) = plt.subplots(1, 2, figsize=(9, 4.4))
    ax1.plot(n, p, marker="o", ms=3, label="estimate")
    ax1.fill_between(n, lo, hi, alpha=0.3, label=f"{100 * conf:g} % interval (Wilson)")
    ax1.set_xscale("log")
    ax1.set_xlabel("samples")
    ax1.set_ylabel("P(overrun)")
    ax1.set_title("overrun probability", fontsize=9)
    ax1.legend(fontsize=7)
    ax2.plot(n, c["quantile"], marker="o", ms=3)
    ax2.set_xscale("log")
    ax2.set_xlabel("samples")
    ax2.set_ylabel("P99 of the total distance [m]")
    ax2.set_title("99th percentile", fontsize=9)
    for ax in (ax1, ax2):
        ax.grid(True, which="both", alpha=0.3)
    fig.suptitle(f"Convergence of the Monte Carlo estimates: {a.scenario.name}", fontsize=10)
    fig.subplots_adjust(bottom=0.25, wspace=0.3)
    _footer(fig, a.scenario, _assess_run(a))
    return fig


#: file stem -> figure function
FIGURES = {"exceedance": exceedance_figure, "histogram": histogram_figure, "convergence": convergence_figure}


def figure_bytes(fig: Figure, fmt: str, record: dict[str, Any]) -> bytes:
    """The figure as PNG or SVG bytes, with the run's record in the file's metadata; closes it."""
    plt = _pyplot()
    buf = io.BytesIO()
    text = json.dumps(record, sort_keys=True, default=str)
    meta = {"Description": text} if fmt == "png" else {"Description": text, "Date": None}
    fig.savefig(buf, format=fmt, dpi=130, metadata=meta)
    plt.close(fig)
    return buf.getvalue()


def indices_figure(r: Ranking) -> Figure:
    """First-order and total Sobol indices of the total landing distance, per input."""
    plt = _pyplot()
    names = [i.name for i in r.inputs]
    y = np.arange(len(names))
    fig, ax = plt.subplots(figsize=(8, 0.5 * len(names) + 2.2))
    ax.barh(y - 0.2, [i.first for i in r.inputs], height=0.4, label="first order")
    ax.barh(y + 0.2, [i.total for i in r.inputs], height=0.4, label="total")
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
    ax.legend(fontsize=8)
    ax.grid(True, axis="x", alpha=0.3)
    fig.subplots_adjust(left=0.32, bottom=0.22)
    _footer(fig, r.scenario, f"seed {r.settings.seed}")
    return fig


def tornado_figure(r: Ranking) -> Figure:
    """One-at-a-time swings of the total distance and of the margin to the LDA, largest first."""
    plt = _pyplot()
    rows = sorted((i for i in r.inputs if np.isfinite(i.swing_total_m)), key=lambda i: -abs(i.swing_total_m))
    fig, axes = plt.subplots(1, 2, figsize=(10, 0.5 * len(rows) + 2.4), sharey=True)
    y = np.arange(len(rows))
    for ax, attr, axis_label in ((axes[0], "swing_total_m", "change of the total distance [m]"),
                                 (axes[1], "swing_margin_m", "change of the margin to the LDA [m]")):
        vals = [getattr(i, attr) for i in rows]
        ax.barh(y, vals, color=["tab:red" if v > 0 else "tab:blue" for v in vals] if attr == "swing_total_m"
                else ["tab:blue" if v > 0 else "tab:red" for v in vals])
        ax.axvline(0, color="black", lw=1)
        ax.set_xlabel(axis_label, fontsize=8)
        ax.grid(True, axis="x", alpha=0.3)

    def label(i: Any) -> str:
        unit = KEYS[i.name].unit.replace("**", "^") if i.name in KEYS else ""
        return f"{i.name}\n{i.p5:.4g} to {i.p95:.4g} {unit}".rstrip()

    axes[0].set_yticks(y, [label(i) for i in rows], fontsize=7)
    axes[0].invert_yaxis()
    fig.suptitle(f"One-at-a-time swings (low to high value, others nominal): {r.scenario.name}", fontsize=9)
    fig.subplots_adjust(left=0.27, bottom=0.22, wspace=0.08)
    _footer(fig, r.scenario, f"seed {r.settings.seed}; red: longer landing / smaller margin")
    return fig


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
    lda = float(r.scenario.values["runway.lda"])
    ax.axvline(lda, color="black", lw=2, label=f"LDA {lda:.0f} m")
    ax.set_yscale("log")
    ax.set_ylim(floor, 1)
    ax.set_xlabel("total landing distance from the screen height x [m]")
    ax.set_ylabel("probability that the distance exceeds x")
    passed = r.tail is not None and r.tail.passed
    verdict = "passed" if passed else "FAILED: the surrogate's tail is not reliable"
    ax.set_title(f"Surrogate exceedance curve: {r.scenario.name} (tail check {verdict})", fontsize=9)
    ax.grid(True, which="both", alpha=0.3)
    ax.legend(fontsize=8, loc="lower left")
    fig.subplots_adjust(bottom=0.2)
    _footer(fig, r.scenario, f"seed {r.settings.seed}")
    return fig


#: file stem -> figure function, for a ranking (the exceedance figure only with polynomial chaos)
RANK_FIGURES = {"indices": indices_figure, "tornado": tornado_figure,
                "surrogate-exceedance": surrogate_exceedance_figure}


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
    ax.errorbar([lda], [r.probability], yerr=[[r.probability - r.ci[0]], [r.ci[1] - r.probability]],
                fmt="o", color="black", capsize=4,
                label=f"{r.method} at the LDA {lda:.0f} m: {r.probability:.2e}")
    ax.set_yscale("log")
    ax.set_ylim(1e-10, 1)
    ax.set_xlabel("landing distance available [m]")
    ax.set_ylabel("probability of an overrun per landing")
    ax.set_title(f"Overrun risk against runway length: {r.scenario.name}", fontsize=9)
    ax.grid(True, which="both", alpha=0.3)
    ax.legend(fontsize=7, loc="lower left")
    fig.subplots_adjust(bottom=0.2)
    _footer(fig, r.scenario, f"seed {r.settings.seed}")
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
