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
from landrisk.studies import Assessment
from landrisk.uq import exceedance_curve, wilson_interval

if TYPE_CHECKING:
    from matplotlib.figure import Figure

__all__ = ["FIGURES", "convergence_figure", "exceedance_figure", "figure_bytes", "histogram_figure"]


def _pyplot() -> Any:
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    return plt


def _provenance(a: Assessment) -> str:
    s = a.settings
    return (f"landrisk {__version__} | scenario {a.scenario.name} ({a.scenario.source}) | "
            f"{s.samples:,} samples, {s.sampler}, seed {s.seed}")


def _footer(fig: Figure, a: Assessment) -> None:
    fig.text(0.01, 0.01, _provenance(a) + "\n" + CAUTION, fontsize=6, va="bottom", ha="left", wrap=True)


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
    _footer(fig, a)
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
    _footer(fig, a)
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
    _footer(fig, a)
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
