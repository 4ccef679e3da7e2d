"""Rendering a results folder as one self-contained HTML document (Jinja2 templates, package data).

The document is for a review: the caution first, then what was asked, the answer, the inputs, the model
and its limits, the ranking, the checks and the provenance. Every number taken from the summary is
written as ``<span class="n" data-key="PATH" data-value="VALUE">text</span>``, ``PATH`` its place in the
summary, keys and list indices joined by ``/`` (``p_overrun_ci95/1``, ``inputs/runway.lda``), so that a
reader or a test can trace it back. Figures are the folder's SVG files, embedded as ``data:`` URIs: the
file needs nothing beside it, on screen or in print.
"""

from __future__ import annotations

import base64
import math
from collections.abc import Mapping
from datetime import UTC, datetime
from typing import Any

from landrisk import CAUTION, INVENTED_NOTE, __version__, invented
from landrisk.document.reader import ResultFigure, ResultSet
from landrisk.model import KEYS
from landrisk.units import convert

__all__ = ["FIGURE_PLACES", "SECTIONS", "render_html"]

#: Section ids in the order of the document, with their headings.
SECTIONS: tuple[tuple[str, str], ...] = (
    ("caution", "Caution"),
    ("question", "What was asked"),
    ("answer", "The answer"),
    ("inputs", "The inputs"),
    ("model", "The model and its limits"),
    ("ranking", "Ranking of the inputs and the most likely overrun"),
    ("checks", "Checks"),
    ("provenance", "Provenance"),
)

#: Figure stem -> the section it is shown in; figures not listed go to a last section before provenance.
FIGURE_PLACES: dict[str, str] = {
    "exceedance": "answer", "histogram": "answer", "risk-curve": "answer",
    "indices": "ranking", "tornado": "ranking",
    "convergence": "checks", "surrogate-exceedance": "checks",
    "study-cases": "answer", "study-comparisons": "answer", "study-yearly": "answer",
}

_CAPTIONS: dict[str, str] = {
    "exceedance": "Probability that the total landing distance exceeds x, with its 95 % interval as a band; "
                  "the LDA, the end of the safety area and the comparison lines are marked.",
    "histogram": "Distribution of the total landing distance on a log density axis, so that the tail past "
                 "the LDA stays visible.",
    "convergence": "The overrun probability and the 99th percentile against the number of samples used.",
    "indices": "First-order and total Sobol indices of the total landing distance.",
    "tornado": "One-at-a-time swings of the total distance and of the margin to the LDA.",
    "surrogate-exceedance": "The surrogate's exceedance curve beside that of a Monte Carlo run of the "
                            "real solver.",
    "risk-curve": "Probability of an overrun per landing against the landing distance available.",
    "study-cases": "P(overrun) per landing of each case of the study, with its 95 % interval.",
    "study-comparisons": "Each alternative against its baseline on common random numbers: the ratio of "
                         "P(overrun) with its paired 95 % interval.",
    "study-yearly": "Expected overruns per year of each case at the study's exposure, with the target "
                    "level of safety where one is given.",
}

MISSING = object()


def _lookup(summary: Mapping[str, Any], path: str) -> Any:
    """The value at ``path`` of the summary (keys and list indices joined by "/"); MISSING if absent."""
    node: Any = summary
    for part in path.split("/"):
        if isinstance(node, Mapping) and part in node:
            node = node[part]
        elif isinstance(node, list) and part.isdigit() and int(part) < len(node):
            node = node[int(part)]
        else:
            return MISSING
    return node


class Numbers:
    """Template helpers that write a summary's number with its path, value and a unit."""

    def __init__(self, summary: Mapping[str, Any]) -> None:
        self.summary = summary

    def get(self, path: str, default: Any = None) -> Any:
        value = _lookup(self.summary, path)
        return default if value is MISSING else value

    def num(self, path: str, spec: str = ".4g", unit: str = "") -> Any:
        """``<span class="n" data-key=path data-value=repr>formatted unit</span>``; a dash if absent."""
        from markupsafe import Markup, escape

        value = _lookup(self.summary, path)
        if value is MISSING or value is None or isinstance(value, bool) or not isinstance(value, int | float):
            return Markup('<span class="n na" data-key="{}">not available</span>').format(path)
        if isinstance(value, float) and not math.isfinite(value):
            text = "infinite" if value > 0 else str(value)
        else:
            text = format(value, spec)
        suffix = f"\u00a0{unit}" if unit else ""
        return Markup('<span class="n" data-key="{}" data-value="{}">{}</span>').format(
            path, repr(value), escape(text + suffix))

    def conv(self, path: str, unit_from: str, unit_to: str, spec: str = ".0f", paren: bool = True) -> str:
        """A summary value in another unit, "(6234 ft)" (plain text, derived: no data-key); "" if absent."""
        value = self.get(path)
        if not isinstance(value, int | float) or isinstance(value, bool) or not math.isfinite(value):
            return ""
        text = f"{format(convert(float(value), unit_from, unit_to), spec)}\u00a0{unit_to}"
        return f" ({text})" if paren else text


def _unit(key: str) -> str:
    spec = KEYS.get(key)
    return spec.unit.replace("**", "^") if spec is not None else ""


def _customary(key: str, value: Any) -> str:
    """The value in a customary second unit (ft, kt, degC, lb), or ''."""
    if isinstance(value, bool) or not isinstance(value, int | float):
        return ""
    unit = KEYS[key].unit if key in KEYS else ""
    second = {"m": "ft", "m/s": "kt", "K": "degC", "kg": "lb"}.get(unit)
    if second is None or (unit == "K" and key != "conditions.temperature"):  # a difference stays in K
        return ""
    digits = 0 if second == "lb" else 1
    return f"{convert(float(value), unit, second):,.{digits}f} {second}"


def _show(value: Any) -> str:
    if isinstance(value, float):
        return f"{value:.6g}"
    if isinstance(value, list | tuple):
        return "[" + ", ".join(_show(v) for v in value) + "]"
    return str(value)


def _fixed_rows(rs: ResultSet) -> list[dict[str, str]]:
    """Every scenario value: key, value in the key's unit, a customary unit, meaning; uncertain marked."""
    uncertain = set((rs.summary.get("uncertain") or {}).get("inputs") or {})
    rows = []
    for key, value in rs.inputs.items():
        if value is None or key.startswith("scenario."):
            continue
        spec = KEYS.get(key)
        rows.append({"key": key, "value": _show(value), "unit": _unit(key),
                     "second": _customary(key, value), "meaning": spec.doc if spec is not None else "",
                     "uncertain": "nominal; varies (see below)" if key in uncertain else ""})
    return rows


def _written(table: Mapping[str, Any]) -> str:
    """``lognormal(median="1.5 s", sigma_log=0.4, ...)``: the table as written in the file."""
    params = ", ".join(f"{k}={_show(v)!s}" if not isinstance(v, str) else f'{k}="{v}"'
                       for k, v in table.items() if k not in ("distribution", "source"))
    return f"{table.get('distribution', '?')}({params})"


#: Families whose ``lower`` and ``upper`` are their own support, not a truncation.
_SUPPORT_FAMILIES = ("uniform", "triangular", "beta", "discrete", "empirical")


def _bounds(written: Mapping[str, Any]) -> str:
    """The truncation bounds of an uncertain input as written ('lower 0.3 s, upper 6 s'), or ''."""
    if written.get("distribution") in _SUPPORT_FAMILIES:
        return ""
    return ", ".join(f"{b} {_show(written[b])}" for b in ("lower", "upper") if b in written)


def _uncertain_rows(rs: ResultSet) -> list[dict[str, str]]:
    spec = (rs.summary.get("uncertain") or {}).get("inputs") or {}
    return [{"key": k, "written": _written(v.get("written") or {}),
             "resolved": str(v.get("distribution", "")), "source": str(v.get("source", "")),
             "bounds": _bounds(v.get("written") or {})} for k, v in spec.items()]


def _figure_uri(fig: ResultFigure) -> str:
    return "data:image/svg+xml;base64," + base64.b64encode(fig.svg.encode("utf-8")).decode("ascii")


def _placed_figures(rs: ResultSet) -> dict[str, list[dict[str, str]]]:
    placed: dict[str, list[dict[str, str]]] = {}
    for fig in rs.figures:
        where = FIGURE_PLACES.get(fig.stem, "figures")
        placed.setdefault(where, []).append({"stem": fig.stem, "uri": _figure_uri(fig),
                                             "caption": _CAPTIONS.get(fig.stem, fig.stem),
                                             "png": fig.png_name or ""})
    return placed


def _context(rs: ResultSet) -> dict[str, Any]:
    s = rs.summary
    values = rs.inputs
    description = str(values.get("scenario.description") or "")
    uncertain = s.get("uncertain") or {}
    names = [str(k) for k in (uncertain.get("inputs") or {})]
    return {
        "kind": rs.kind, "s": s, "v": values, "n": Numbers(s), "folder": rs.folder.name,
        "summary_name": rs.summary_name, "caution": s.get("caution") or CAUTION,
        "caution_current": CAUTION, "invented": invented(description), "invented_note": INVENTED_NOTE,
        "description": description, "sections": SECTIONS, "figures": _placed_figures(rs),
        "fixed_rows": _fixed_rows(rs), "uncertain_rows": _uncertain_rows(rs), "uncertain_names": names,
        "correlations": list(uncertain.get("correlations") or []),
        "fixed_by_override": list(uncertain.get("fixed_by_override") or []),
        "hash_matches": rs.hash_matches, "missing": list(rs.missing),
        "version": __version__, "rendered_utc": datetime.now(UTC).replace(microsecond=0).isoformat(),
        "conv": convert, "unit": _unit, "show": _show,
        "lda": values.get("runway.lda"), "resa": values.get("runway.resa_length"),
        "summary_inputs": rs.inputs_key,
    }


def _breakable(key: Any) -> Any:
    """A dotted key with a line-break opportunity after each dot (``aircraft.<wbr>mass``)."""
    from markupsafe import Markup, escape

    return Markup("<wbr>").join(escape(part) + Markup(".") if i < len(parts) - 1 else escape(part)
                                for parts in [str(key).split(".")] for i, part in enumerate(parts))


def _environment() -> Any:
    from jinja2 import Environment, PackageLoader, StrictUndefined, select_autoescape

    env = Environment(loader=PackageLoader("landrisk.document", "templates"),
                      autoescape=select_autoescape(["html", "j2"], default=True),
                      undefined=StrictUndefined, trim_blocks=True, lstrip_blocks=True)
    env.filters["sci"] = lambda x, d=2: "not available" if x is None else f"{float(x):.{d}e}"
    env.filters["g"] = lambda x, d=4: "not available" if x is None else f"{float(x):.{d}g}"
    env.filters["breakable"] = _breakable
    return env


def render_html(rs: ResultSet) -> str:
    """The review document of the results folder ``rs`` as one self-contained HTML text."""
    return str(_environment().get_template("report.html.j2").render(**_context(rs)))
