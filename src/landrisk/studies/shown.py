"""Short self-descriptions of the results objects: a few lines for ``repr()`` and a notebook's HTML.

Printing a result shows what it is, for which scenario, how it was made and its headline numbers, never
its arrays (the full figures are in the records of :mod:`landrisk.export` and the text reports).
"""

from __future__ import annotations

import html
import math
from typing import Any

__all__ = ["assessment_lines", "html_of", "ranking_lines", "rare_lines", "repr_of"]


def _num(x: float | None, fmt: str = ".1f", unit: str = " m") -> str:
    return "-" if x is None or not math.isfinite(x) else f"{x:{fmt}}{unit}"


def repr_of(kind: str, lines: list[str]) -> str:
    """``Kind(first line)`` then the other lines, indented."""
    return f"<{kind}: {lines[0]}" + "".join(f"\n  {ln}" for ln in lines[1:]) + ">"


def html_of(kind: str, lines: list[str]) -> str:
    """The same lines as a small HTML block for a notebook."""
    items = "".join(f"<li>{html.escape(ln)}</li>" for ln in lines[1:])
    return f"<div><strong>{html.escape(kind)}</strong>: {html.escape(lines[0])}<ul>{items}</ul></div>"


def _scenario(s: Any) -> str:
    return f"scenario {s.name!r} ({s.source})"


def assessment_lines(a: Any) -> list[str]:
    """An assessment in a few lines: run, P(overrun), mean and P99 of the total distance."""
    st = a.settings
    mom = a.moments["total_m"]
    p99 = next((p for p in a.percentiles["total_m"] if p.p == 99.0), None)
    p99_text = ("beyond any runway" if p99 is not None and p99.infinite
                else _num(p99.value if p99 is not None else None))
    lines = [f"{_scenario(a.scenario)}, {st.samples:,} samples ({st.sampler}, seed {st.seed}), "
             f"{a.problem.dimension} uncertain inputs",
             f"P(overrun) {a.p_overrun.text()}",
             f"LDA {a.lda_m:.0f} m; total distance mean {_num(mom.mean)}, sd {_num(mom.sd)}, P99 {p99_text}"]
    if a.cannot_stop:
        lines.append(f"{a.cannot_stop:,} of {a.n:,} landings cannot stop (counted as overruns)")
    return lines


def ranking_lines(r: Any) -> list[str]:
    """A ranking in a few lines: method and cost, the three most influential inputs."""
    top = ", ".join(f"{i.name} {i.total:.2f}" for i in r.inputs[:3])
    lines = [f"{_scenario(r.scenario)}, method {r.method}, {r.calls:,} solver calls, seed {r.settings.seed}",
             f"largest total Sobol indices: {top}" if top else "no inputs ranked"]
    if r.warnings:
        lines.append(f"{len(r.warnings)} warning(s): {r.warnings[0]}")
    return lines


def rare_lines(r: Any) -> list[str]:
    """A rare-event assessment in a few lines: method, estimate (or why none), cost."""
    if not r.converged:
        estimate = "no estimate: the method did not converge"
    elif r.method == "form":
        estimate = f"P(overrun) ~ Phi(-beta) = {r.probability:.3e} (FORM: no sampling interval)"
    else:
        estimate = f"P(overrun) {r.probability:.3e} [{r.ci[0]:.2e}, {r.ci[1]:.2e}]"
    return [f"{_scenario(r.scenario)}, method {r.method}, {r.calls:,} solver calls, seed {r.settings.seed}",
            estimate]
