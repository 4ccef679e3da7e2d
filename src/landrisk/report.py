"""Plain-text reports of results, as the command line prints them.

Distances and speeds are shown in the unit system asked for (``units="si"``: m, m/s, kg; ``"aviation"``:
ft, kt, lb; ``None``: metres with feet beside them and knots with m/s, as before), converted through
:class:`landrisk.units.DisplayUnits`; the results themselves stay SI. :func:`ascii_text` spells a report
in ASCII for a terminal that cannot show every character.
"""

from __future__ import annotations

import math
import unicodedata
from typing import TYPE_CHECKING, Any

import numpy as np

from landrisk import CAUTION, __version__
from landrisk.model import SingleLanding
from landrisk.units import DisplayUnits, convert

if TYPE_CHECKING:  # imported with the results themselves, not by printing a landing
    from landrisk.studies import Assessment, Ranking, RareAssessment
    from landrisk.studies.calibrate import Calibration
    from landrisk.studies.epistemic import EpistemicAssessment
    from landrisk.studies.study import StudyResult
    from landrisk.uq import Percentile

__all__ = ["BEYOND", "ascii_text", "render_assess", "render_calibration", "render_epistemic", "render_rank",
           "render_rare", "render_solve"]

#: How a percentile of the distance that lies among the landings that cannot stop is shown.
BEYOND = "beyond any runway"

_ASCII = {"°": "deg", "μ": "mu", "µ": "mu", "≥": ">=", "≤": "<=", "≈": "~", "±": "+/-", "×": "x",
          "−": "-", "–": "-", "—": "-", "‘": "'", "’": "'", "“": '"', "”": '"', "…": "...", "²": "^2",
          "³": "^3", "·": ".", "\u00a0": " ", "\u2009": " ", "\u202f": " ", "→": "->"}


def ascii_text(text: str) -> str:
    """``text`` in ASCII: known symbols spelled out (° -> deg, μ -> mu), accents dropped, others '?'."""
    out = []
    for ch in text:
        if ord(ch) < 128:
            out.append(ch)
        elif ch in _ASCII:
            out.append(_ASCII[ch])
        else:
            base = unicodedata.normalize("NFKD", ch).encode("ascii", "ignore").decode()
            out.append(base or "?")
    return "".join(out)


class _Show:
    """Numbers with their units for a report, in one system or (``None``) metres and feet side by side."""

    def __init__(self, units: str | None) -> None:
        self.both = units is None
        self.du = DisplayUnits(units or "si")

    @property
    def lu(self) -> str:
        return self.du.unit("length")

    def dist(self, metres: float, fmt: str = ".0f") -> str:
        """``1234 m`` (one system) or ``1234 m (4049 ft)`` (both)."""
        text = f"{self.du.length(metres):{fmt}} {self.lu}"
        return text + (f" ({convert(metres, 'm', 'ft'):.0f} ft)" if self.both else "")

    def speed(self, mps: float, fmt: str = ".0f") -> str:
        if self.both:
            return f"{convert(mps, 'm/s', 'kt'):{fmt}} kt"
        return f"{self.du.speed(mps):{fmt}} {self.du.unit('speed')}"

    def row(self, label: str, metres: float, note: str = "") -> str:
        """A distance row of the solve table."""
        if self.both:
            return _m_ft(label, metres, note)
        return f"  {label:<28}{self.du.length(metres):10.1f} {self.lu:<3} {note}".rstrip()

    def speed_row(self, label: str, mps: float) -> str:
        if self.both:
            return _kt(label, mps)
        return f"  {label:<28}{self.du.speed(mps):10.1f} {self.du.unit('speed')}"


def _m_ft(label: str, metres: float, note: str = "") -> str:
    return f"  {label:<28}{metres:10.1f} m {convert(metres, 'm', 'ft'):10.0f} ft  {note}".rstrip()


def _kt(label: str, speed: float) -> str:
    return f"  {label:<28}{convert(speed, 'm/s', 'kt'):10.1f} kt {speed:9.1f} m/s"


def _closing(lines: list[str], notes: list[str], written: list[str] | None) -> str:
    """Notes, the files written and the caution after a report's body; the whole report as text."""
    if notes:
        lines += [""] + [f"Note: {n}" for n in notes]
    if written:
        lines += ["", "Files written:"] + [f"  {w}" for w in written]
    lines += ["", CAUTION]
    return "\n".join(lines)


def render_solve(landing: SingleLanding, units: str | None = None) -> str:
    """The deterministic landing as a readable table: phases, speeds, the margin (``units``: see module)."""
    sh = _Show(units)
    s = landing.scenario
    v = s.values
    lines = [
        f"landrisk {__version__} - deterministic landing distance",
        f"Scenario: {s.name} ({s.source})" + (f" with {', '.join(s.overrides)}" if s.overrides else ""),
    ]
    if v["scenario.description"]:
        lines.append(f"  {v['scenario.description']}")
    lines += ["", "Distances from the screen height over the threshold"]
    if v["procedure.touchdown_distance"] is None:
        lines += [sh.row("approach (in the air)", landing.approach_m),
                  sh.row("flare (in the air)", landing.flare_m)]
    lines += [
        sh.row("air distance", landing.air_distance_m,
               "(given touchdown point)" if v["procedure.touchdown_distance"] is not None else ""),
        sh.row("free roll", landing.free_roll_m, f"({v['procedure.reaction_time']:g} s, brakes off)"
               if not landing.stopped_in_free_roll else "(stopped before the brakes came on)"),
        sh.row("braking roll", landing.braking_m),
        sh.row("total landing distance", landing.total_m),
        sh.row("landing distance available", landing.lda_m),
        sh.row("margin (LDA - total)", landing.margin_m,
               f"({100 * landing.margin_m / landing.lda_m:.1f} % of LDA)"),
        "",
        "Speeds (true airspeed unless stated)",
        sh.speed_row("stall V_S", landing.stall_speed),
        sh.speed_row("touchdown V_TD", landing.touchdown_speed),
        sh.speed_row("touchdown ground speed", landing.touchdown_ground_speed),
        sh.speed_row("at brake application", landing.brake_speed),
        f"  {'touchdown to stop':<28}{landing.time_to_stop_s:10.1f} s",
        "",
    ]
    if landing.overrun:
        lines.append(f"OVERRUN: {sh.dist(landing.beyond_end_m)} beyond the runway end, crossing it at "
                     f"{sh.speed(landing.runway_end_ground_speed)} ground speed.")
    else:
        lines.append("The aircraft stops within the landing distance available.")
    d = landing.derived
    wind = v["conditions.headwind"]
    wind_text = (f"{convert(wind, 'm/s', 'kt'):.1f} kt" if sh.both
                 else f"{sh.du.speed(wind):.1f} {sh.du.unit('speed')}")
    density = (f"{d['density_kg_m3']:.4f} kg/m^3" if units != "aviation"
               else f"{convert(d['density_kg_m3'], 'kg/m^3', 'lb/ft^3'):.5f} lb/ft^3")
    lines += [
        f"Inputs used: density {density}, rolling mu {d['rolling_mu']:.3f}, "
        f"braking mu {d['braking_mu']:.3f}, headwind {wind_text}, "
        f"reverse thrust {'used' if v['procedure.use_reverse'] else 'not used'}.",
        "",
        CAUTION,
    ]
    return "\n".join(lines)


def _as_written(table: dict | None) -> str:
    """``lognormal(median="1.5 s", sigma_log=0.4)`` from an uncertain table as written in the file."""
    if not table:
        return ""
    params = ", ".join(f"{k}={v!r}".replace("'", '"') for k, v in table.items()
                       if k not in ("distribution", "source"))
    return f"{table.get('distribution')}({params})"


def _pct_label(p: float) -> str:
    return f"P{p:g}"


def _interval(sh: _Show, p: Percentile) -> str:
    lo = "-" if p.lo is None else f"{sh.du.length(p.lo):.1f}"
    hi = BEYOND if p.hi_infinite else ("-" if p.hi is None else f"{sh.du.length(p.hi):.1f}")
    return f"[{lo}, {hi}]"


def _distance_rows(a: Assessment, sh: _Show, conf: str) -> list[str]:
    """The mean, sd and percentiles of the total distance, with what cannot be given said so."""
    mom = a.moments["total_m"]
    unit_head = f"{'m':>9} {'ft':>10}" if sh.both else f"{sh.lu:>9}"
    lines = [f"Total landing distance from the screen height {unit_head}   {conf} interval [{sh.lu}]"]

    def value(x: float) -> str:
        return (f"{x:9.1f} {convert(x, 'm', 'ft'):10.0f}" if sh.both else f"{sh.du.length(x):9.1f}")

    pad = 20 if sh.both else 9
    if a.cannot_stop and mom.used:
        lines.append(f"  (mean and standard deviation of the {mom.used:,} landings that stop; "
                     f"{a.cannot_stop:,} of {a.n:,} cannot stop)")
    if mom.mean is None:
        lines.append(f"  {'mean':<44}cannot be estimated: no landing stops")
    else:
        ci = (f"   [{sh.du.length(mom.lo):.1f}, {sh.du.length(mom.hi):.1f}]"
              if mom.lo is not None and mom.hi is not None else "")
        lines.append(f"  {'mean':<44}{value(mom.mean)}{ci}")
    if mom.mean is None:
        lines.append(f"  {'standard deviation':<44}cannot be estimated: no landing stops")
    elif mom.sd is None:
        lines.append(f"  {'standard deviation':<44}cannot be estimated from {mom.used} landing (needs 2),")
        lines.append(f"  {'':<44}nor can the interval of the mean")
    else:
        lines.append(f"  {'standard deviation':<44}{value(mom.sd)}")
    for p in a.percentiles["total_m"]:
        if p.infinite:
            lines.append(f"  {_pct_label(p.p):<44}{BEYOND:>{pad}}   (a landing that cannot stop)")
        elif p.value is not None:
            lines.append(f"  {_pct_label(p.p):<44}{value(p.value)}   {_interval(sh, p)}")
        elif a.streamed:
            lines.append(f"  {_pct_label(p.p):<44}{'beyond the counted range':>{pad}}")
        else:
            lines.append(f"  {_pct_label(p.p):<44}{'needs more samples':>{pad}}")
    if a.streamed:
        err = f"{sh.du.length(a.percentile_error_m):.3g} {sh.lu}"
        lines.append(f"  (streamed: the {a.n:,} distances were counted in bins of {err}, not kept;")
        lines.append(f"   the percentiles and their intervals are within {err} of the sample's)")
    return lines


def _comparison_rows(a: Assessment, sh: _Show, conf: str) -> list[str]:
    """Each comparison line, whether the LDA meets it, and how its distance was obtained."""
    from landrisk.studies.assess import DRY_BRAKING_MU

    lines = ["", f"Comparison lines (P that the Monte Carlo distance exceeds each; {conf} interval)"]
    if not a.comparisons:
        lines.append("  none: the deterministic landing at the nominal inputs cannot stop")
    for c in a.comparisons:
        verdict = "LDA meets it" if c.meets else "LDA does NOT meet it"
        lines.append(f"  {c.name:<32}{sh.du.length(c.distance_m):8.0f} {sh.lu}   {verdict:<21}"
                     f"{c.p_exceed.text()}")
    lines += [f"    {c.name}: {c.source}" for c in a.comparisons[1:]]
    note = ("the deterministic line is solved with the same touchdown model as the samples"
            + (f": {a.nominal_note}" if a.nominal_note else ""))
    lines.append(f"    {note}.")
    if a.dry_basis_note:
        lines.append(f"    {a.dry_basis_note}.")
    elif a.comparisons:
        lines.append("    the regulatory factors multiply the deterministic distance, a dry-runway one "
                     f"(runway condition code 6, or braking mu at least {DRY_BRAKING_MU:g})")
    return lines


def _risk_rows(a: Assessment, sh: _Show) -> list[str]:
    lines = [
        "",
        f"Runway: LDA {sh.dist(a.lda_m)}",
        f"  P(overrun)                        {a.p_overrun.text()}",
        f"  P(beyond a {sh.dist(a.resa_length_m)} safety area)   {a.p_beyond_resa.text()}",
    ]
    if a.cannot_stop:
        lines.append(f"  {a.cannot_stop:,} of {a.n:,} landings cannot stop (thrust and slope outweigh the "
                     "braking): counted as overruns, left out of the mean and standard deviation")
    if a.overrun_speed_max is not None and a.overrun_speed_min is not None:
        shown = [f"{'median' if p.p == 50 else _pct_label(p.p)} {sh.speed(p.value)}"
                 for p in a.overrun_speed if p.value is not None]
        lines.append("  ground speed of the overruns at the runway end: " + ", ".join(
            [*shown, f"range {sh.speed(a.overrun_speed_min)} to {sh.speed(a.overrun_speed_max)}"]))
    return lines


def render_assess(a: Assessment, written: list[str] | None = None, units: str | None = None) -> str:
    """The Monte Carlo assessment as a readable summary: percentiles, overrun risk, comparison lines."""
    sh = _Show(units)
    s = a.scenario
    st = a.settings
    conf = f"{100 * st.confidence:g} %"
    lines = [
        f"landrisk {__version__} - overrun risk by Monte Carlo",
        f"Scenario: {s.name} ({s.source})" + (f" with {', '.join(s.overrides)}" if s.overrides else ""),
        f"{st.samples:,} samples ({st.sampler}, seed {st.seed}); {a.problem.dimension} uncertain inputs:",
    ]
    specs = a.record.get("inputs", {})
    for name, m in zip(a.problem.names, a.problem.marginals, strict=True):
        lines.append(f"  {name:<34}{_as_written(specs.get(name, {}).get('written')) or m.describe()}")
    if a.problem.spearman is not None:
        lines.append("  rank correlations (Gaussian copula, an assumption): " + ", ".join(
            f"{a.problem.names[i]} ~ {a.problem.names[j]} {a.problem.spearman[i, j]:+.2f}"
            for i in range(a.problem.dimension) for j in range(i + 1, a.problem.dimension)
            if a.problem.spearman[i, j] != 0))
    lines += ["", *_distance_rows(a, sh, conf), "", f"By phase (P50 / P99, {sh.lu}):"]
    for name in ("air_distance_m", "free_roll_m", "braking_m"):
        by = {p.p: p for p in a.percentiles[name]}
        label = f"  {name.removesuffix('_m').replace('_', ' '):<20}"
        if by[50.0].infinite:
            lines.append(f"{label}{BEYOND} / {BEYOND}")
        elif by[99.0].infinite and by[50.0].value is not None:
            lines.append(f"{label}{sh.du.length(by[50.0].value):8.1f} / {BEYOND}")
        elif by[99.0].supported and by[50.0].value is not None and by[99.0].value is not None:
            p50, p99 = sh.du.length(by[50.0].value), sh.du.length(by[99.0].value)
            lines.append(f"{label}{p50:8.1f} / {p99:8.1f}")
    lines += _risk_rows(a, sh)
    lines += _comparison_rows(a, sh, conf)
    if any(a.flags.values()):
        lines.append(f"Flags: {a.flags['lift_exceeds_weight']} samples with lift above weight at touchdown, "
                     f"{a.flags['cannot_stop']} that cannot stop (counted as overruns).")
    if st.sampler != "random":
        lines.append(f"Intervals assume independent samples; for {st.sampler} points they are conservative.")
    return _closing(lines, [], written)


_TAIL_FAILED = "FAILED - the surrogate's P99 and P(overrun) are not reliable"


def render_rank(r: Ranking, written: list[str] | None = None, units: str | None = None) -> str:
    """The ranking of the uncertain inputs as a readable table (``units``: distances in ``si`` or
    ``aviation`` units; default metres, and each input in its scenario-file unit)."""
    s = r.scenario
    show = _Show(units)
    lu = show.lu
    lines = [
        f"landrisk {__version__} - which uncertain inputs drive the landing distance and the overrun",
        f"Scenario: {s.name} ({s.source})" + (f" with {', '.join(s.overrides)}" if s.overrides else ""),
    ]
    if r.chaos is not None:
        c = r.chaos
        lines += [
            f"Method: polynomial chaos, order {c.order} (q-norm {c.q_norm:g}, {c.terms} terms) per "
            f"branch, {c.branches} branch(es); {r.calls} solver calls ({c.training_calls} training + "
            f"{c.holdout_calls} hold-out per branch)",
            f"  hold-out error of the total distance: {100 * c.holdout_rel_error:.2f} % of its sd (RMS), "
            f"largest {show.du.length(c.holdout_max_error_m):.1f} {lu} "
            f"({100 * c.holdout_max_rel_error:.2f} %)",
        ]
    else:
        lines.append(f"Method: Monte Carlo pick-freeze (Saltelli 2010 first order, Jansen total), "
                     f"{r.calls:,} solver calls, {100 * r.settings.confidence:g} % bootstrap intervals")
    shap = dict(zip(r.shapley.names, r.shapley.effects, strict=True)) if r.shapley is not None else {}
    header = (f"  {'input':<34}{'first order':>12}{'total':>9}" + (f"{'Shapley':>9}" if shap else "")
              + f"{'swing of total':>17}{'swing of margin':>17}")
    lines += ["", header]
    for i in r.inputs:
        ci = f"  [{i.total_ci[0]:.3f}, {i.total_ci[1]:.3f}]" if i.total_ci else ""
        sw = (f"{show.du.length(i.swing_total_m):+14.0f} {lu:<2}"
              f"{show.du.length(i.swing_margin_m):+14.0f} {lu}" if np.isfinite(i.swing_total_m)
              else f"{'-':>16}{'-':>17}")
        sh = f"{shap[i.name]:9.3f}" if i.name in shap else ""
        lines.append(f"  {i.name:<34}{i.first:12.3f}{i.total:9.3f}{sh}{sw}{ci}")
        if i.levels:
            lines.append(f"    values: {', '.join(i.levels)}")
    lines.append("  (swing: the input at its 5th and then 95th percentile, a discrete input at its least and "
                 "greatest value, the others nominal)")
    if shap and r.shapley is not None:
        lines.append("  Inputs are correlated: the Sobol indices depend on the order of the inputs in the "
                     "file (the first of a correlated pair carries the shared part); the Shapley effects "
                     f"(Owen 2014, on the surrogate, standard error <= {np.max(r.shapley.se):.3f}) do not.")
    if r.second_order:
        pairs = ", ".join(f"{a} x {b} {v:.3f}" for a, b, v in r.second_order)
        lines.append(f"  largest interactions: {pairs}")
    if r.surrogate is not None and r.tail is not None:
        lines += _surrogate_lines(r, show)
    lines += _overrun_lines(r, units)
    return _closing(lines, r.warnings, written)


_METHOD_NAMES = {"auto": "auto (subset simulation, with FORM's design point and importance sampling "
                         "beside it)",
                 "form": "FORM (first-order reliability method)",
                 "sorm": "SORM (second-order reliability method, Breitung 1984)",
                 "importance": "importance sampling around the design points", "subset": "subset simulation"}


def _rare_settings_line(r: RareAssessment) -> str:
    """The run's settings, each marked where it is the default."""
    from landrisk.studies import RareSettings

    s, d = r.settings, RareSettings()

    def mark(v: object, default: object) -> str:
        return " (default)" if v == default else ""

    return (f"Settings: --target-cov {s.target_cov:g}{mark(s.target_cov, d.target_cov)}, --max-calls "
            f"{s.max_calls:,} per branch{mark(s.max_calls, d.max_calls)}, --subset-samples "
            f"{s.subset_samples:,} per level{mark(s.subset_samples, d.subset_samples)} x "
            f"{s.subset_replicates} replicates")


def _rare_branch_line(b: Any) -> str:
    label = ", ".join(f"{k} = {v}" for k, v in b.values.items()) or "all landings"
    e = b.estimate
    if e.kind == "zero":
        return f"    {label} (probability {b.probability:g}): 0 - cannot overrun inside the inputs' bounds"
    if e.kind == "upper bound":
        return f"    {label} (probability {b.probability:g}): at most {e.ci[1]:.1e} (an upper bound only)"
    extra = f", CoV {100 * e.cov:.1f} %" if e.cov and np.isfinite(e.cov) else ""
    ci = f" [{e.ci[0]:.2e}, {e.ci[1]:.2e}]" if e.method not in ("form", "sorm") and e.converged else ""
    return f"    {label} (probability {b.probability:g}): {e.probability:.3e}{ci}{extra}, {e.calls:,} calls"


def _surrogate_lines(r: Ranking, sh: _Show) -> list[str]:
    """The surrogate's figures, its tail check and the Monte Carlo check."""
    sur, t = r.surrogate, r.tail
    assert sur is not None and t is not None
    by = {p.p: p for p in sur.percentiles}

    def d1(metres: float | None) -> str:
        return "-" if metres is None else f"{sh.du.length(metres):.1f} {sh.lu}"

    lines = ["", f"From {sur.samples:,} surrogate samples: mean {d1(sur.mean_m)}, sd "
             f"{d1(sur.sd_m)}, P50 {d1(by[50.0].value)}, P99 {d1(by[99.0].value)}, "
             f"P(overrun) {sur.p_overrun.text()}"]
    if r.mc_check is not None:
        m = r.mc_check
        d = m.rel_diff
        lines.append(f"  Monte Carlo check ({m.samples:,} solver runs): mean {d1(m.mean_m)} "
                     f"({100 * d['mean']:+.2f} %), sd {d1(m.sd_m)} ({100 * d['sd']:+.2f} %), P50 "
                     f"{d1(m.p50_m)} ({100 * d['p50']:+.2f} %), P99 {d1(m.p99_m)} "
                     f"({100 * d['p99']:+.2f} %), P(overrun) {m.p_overrun.text()}")
    verdict = "passed" if t.passed else _TAIL_FAILED
    lines.append(f"  tail check: {verdict}")
    if t.p99_surrogate is not None and t.p99_mc is not None:
        a, b = t.p99_surrogate, t.p99_mc
        a, b = tuple(sh.du.length(x) for x in a), tuple(sh.du.length(x) for x in b)
        lines.append(f"    P99: surrogate {a[0]:.1f} {sh.lu} [{a[1]:.1f}, {a[2]:.1f}], real solver "
                     f"{b[0]:.1f} {sh.lu} [{b[1]:.1f}, {b[2]:.1f}]: "
                     + ("intervals meet" if t.p99_passed else "DISAGREE"))
    if t.p_overrun_surrogate is not None and t.p_overrun_mc is not None:
        a, b = t.p_overrun_surrogate, t.p_overrun_mc
        lines.append(f"    P(overrun): surrogate {a[0]:.2e} [{a[1]:.2e}, {a[2]:.2e}], real solver {b[0]:.2e} "
                     f"[{b[1]:.2e}, {b[2]:.2e}]: " + ("intervals meet" if t.p_overrun_passed else "DISAGREE"))
    lines.append(f"    real solver on {t.calls} surrogate samples in the tail and near the runway end: error "
                 f"band {d1(t.band_m)} (twice the RMS error near the runway end); "
                 f"{t.misclassified_overruns} of {t.near_runway_end} near the runway end on the wrong side "
                 f"by more than the band ({t.misclassified_within_band} more within it)")
    if t.note:
        lines.append(f"    note: {t.note}")
    return lines


def _level(key: str, v: float) -> str:
    """A discrete input's value in its key's type (True, 3)."""
    from landrisk.model import KEYS

    return str(KEYS[key].cast(v)) if key in KEYS else f"{v:g}"


_DIMENSIONLESS = ("sigma_log", "shape", "alpha", "beta")


def _change(key: str, parameter: str, change: float, units: str | None = None) -> str:
    """A parameter's stated change, in the key's display unit where the parameter has it."""
    if parameter in _DIMENSIONLESS or parameter.startswith("P("):
        return f"{change:+.3g}"
    return "+" + _show(key, change, units, difference=True)


def _fmt_index(v: float | None) -> str:
    return "-" if v is None else (f"{v:.3f}" if v >= 0.01 else f"{v:.1e}")


def _overrun_lines(r: Ranking, units: str | None = None) -> list[str]:
    """Influence on the overrun: indicator indices, the overrun profile, parameter sensitivities."""
    o = r.overrun
    if o is None:
        return []
    lines = ["", f"Influence on the overrun itself, from {o.source}: {o.events:,} overrun samples "
             f"({o.effective_events:,.0f} effective), P(overrun) {o.p_overrun:.2e}"]
    lines.append(f"  {'input':<34}{'median':>14}{'given overrun':>15}{'first-order index':>19}  "
                 f"{'95 % interval':<20}" + ("FORM alpha^2" if r.form_importance else ""))
    pairs = sorted(zip(o.profile, o.indices, strict=True),
                   key=lambda t: -(t[1].first_order if t[1].first_order is not None else -1.0))
    for p, i in pairs:
        med = _level(p.name, p.prior_median) if p.discrete else _show(p.name, p.prior_median, units)
        given = "-" if p.overrun_median is None else (
            _level(p.name, p.overrun_median) if p.discrete else _show(p.name, p.overrun_median, units))
        ci = f"[{_fmt_index(i.ci[0])}, {_fmt_index(i.ci[1])}]" if i.ci else "-"
        a2 = r.form_importance.get(p.name)
        lines.append(f"  {p.name:<34}{med:>14}{given:>15}{_fmt_index(i.first_order):>19}  {ci:<20}"
                     + (f"{a2:.3f}" if a2 is not None else ""))
        if p.discrete and p.overrun_median is not None:
            lines.append("    " + ", ".join(f"{_level(p.name, v)}: {100 * a:.3g} % of landings, "
                                            f"{100 * b:.3g} % of overruns" for v, a, b in p.levels))
    notes = {i.note for i in o.indices if i.note}
    lines += [f"  note: {n}" for n in notes]
    lines.append("  (first-order indices of the overrun indicator by Bayes' rule from the overrun samples, "
                 "Perrin & Defaux 2019; for a rare overrun they are small by nature, the rest being "
                 "interactions: read the medians given an overrun and the sensitivities below)")
    if r.overrun_mc is not None:
        m = r.overrun_mc
        lines.append(f"  cross-check from {m.source}: P(overrun) {m.p_overrun:.2e}, "
                     f"{m.effective_events:,.0f} effective overruns")
    if o.sensitivity:
        lines += ["", "What to control: change of P(overrun) for a stated change of each distribution "
                  "parameter (score function, first order)"]
        for q in sorted(o.sensitivity, key=lambda q: -abs(q.dp)):
            change = _change(q.input, q.parameter, q.change, units)
            lines.append(f"  {q.input:<34}{q.parameter:<11}{change:>12} -> "
                         f"{q.dp:+.2e} "
                         f"[{q.ci[0]:+.1e}, {q.ci[1]:+.1e}] ({100 * q.dp / o.p_overrun:+.1f} %)")
        lines.append("  (change: a tenth of the input's spread for a mean, median or mode, a tenth of the "
                     "value otherwise; bounds of uniform or triangular inputs move the support and are not "
                     "given)")
    return lines


def render_rare(r: RareAssessment, written: list[str] | None = None, units: str | None = None) -> str:
    """A rare-event assessment: the probability with its interval, cost, design point and risk curve
    (``units``: see the module)."""
    s = r.scenario
    show = _Show(units)
    conf = f"{100 * r.settings.confidence:g} %"
    lda = float(s.values["runway.lda"])
    lines = [
        f"landrisk {__version__} - rare overrun probability",
        f"Scenario: {s.name} ({s.source})" + (f" with {', '.join(s.overrides)}" if s.overrides else ""),
        f"Method: {_METHOD_NAMES[r.method]}; seed {r.settings.seed}; {r.calls:,} solver calls",
        _rare_settings_line(r),
        "",
        f"Runway: LDA {show.dist(lda)}",
    ]
    beta = f", generalised beta {r.beta:.3f}" if r.beta is not None and math.isfinite(r.beta) else ""
    if not r.converged:
        why = next((m for m in r.messages if "did not converge" in m), "; ".join(r.messages))
        lines.append(f"  P(overrun): NO ESTIMATE - THE METHOD DID NOT CONVERGE ({why}). "
                     f"Its last, unreliable value was {r.probability:.1e}; use --method auto or plain "
                     "Monte Carlo.")
    elif r.method in ("form", "sorm"):
        name = "Phi(-beta)" if r.method == "form" else "Breitung's SORM"
        lines.append(f"  P(overrun) ~ {name} = {r.probability:.3e}{beta} ({r.method.upper()} has no "
                     "sampling interval; FORM is exact for a linear limit state only)")
    elif r.probability == 0:
        bound = f", at most {r.ci[1]:.1e} (outside the box of the bounds)" if r.ci[1] > 0 else ""
        lines.append(f"  P(overrun) = 0{bound}: no branch can overrun inside the inputs' bounds (see the "
                     "notes)")
    else:
        lines.append(f"  P(overrun) = {r.probability:.3e} [{r.ci[0]:.2e}, {r.ci[1]:.2e}] ({conf}), "
                     f"coefficient of variation {100 * r.cov:.1f} %{beta}")
    if r.bound_limited:
        lines.append(f"  SET BY A BOUND: the overruns sit at the bound of {', '.join(r.bound_limited)}; "
                     "the probability is set by that assumption")
    lines += [_rare_branch_line(b) for b in r.branches]
    if r.cross_check is not None:
        c = r.cross_check
        lines.append(f"  cross-check by {_METHOD_NAMES.get(c.method, c.method)}: {c.probability:.3e} "
                     f"[{c.ci[0]:.2e}, {c.ci[1]:.2e}] ({c.calls:,} calls)")
    if r.design_point:
        lines += ["", "The most likely overrun (design point of the dominant branch) and each input's "
                  "importance alpha^2:"]
        for k, v in r.design_point.items():
            a2 = r.importance.get(k)
            shown = _show(k, v, units)
            nominal = _show(k, s.values[k], units) if s.values.get(k) is not None else "-"
            tail = f"   alpha^2 {a2:.3f}" if a2 is not None else ""
            lines.append(f"  {k:<34}{shown:>16}   (nominal {nominal}){tail}")
    if r.risk_curve is not None:
        rc = r.risk_curve
        lines += ["", f"Risk curve (subset simulation, mixed over branches, {conf} interval over its "
                  "replicates): P(overrun) for a runway of"]
        for target in (1e-3, 1e-5, 1e-7, 1e-9):
            i = int(np.argmin(np.abs(np.log(np.maximum(rc.p_subset, 1e-300)) - np.log(target))))
            if rc.converged[i]:
                lines.append(f"  {show.du.length(rc.lda_m[i]):8.0f} {show.lu}: {rc.p_subset[i]:.1e} "
                             f"[{rc.ci_lo[i]:.1e}, {rc.ci_hi[i]:.1e}]")
            else:
                lines.append(f"  {show.du.length(rc.lda_m[i]):8.0f} {show.lu}: not reached by every "
                             "replicate (no estimate)")
    return _closing(lines, r.messages, written)


def _show(key: str, value: object, units: str | None = None, difference: bool = False) -> str:
    """A value in a readable unit: in the system ``units`` (``si``, ``aviation``), else kt for speeds
    and the key's own unit (m, s, kg); ``difference``: a change of the value (no temperature offset)."""
    from landrisk.model import KEYS

    if isinstance(value, bool) or not isinstance(value, int | float):
        return str(value)
    unit = KEYS[key].unit if key in KEYS else ""
    if units:
        du = DisplayUnits(units)
        kind, sym = du.key_unit(unit)
        if kind is None:
            return f"{_num(value)} {sym}".rstrip()
        if difference and kind == "temperature":  # a change of 1 K is a change of 1 degC
            return f"{_num(value)} {sym}"
        return f"{_num(du.value(kind, float(value)))} {sym}"
    if unit == "m/s":
        return f"{convert(float(value), 'm/s', 'kt'):.1f} kt"
    return f"{_num(value)} {unit}".rstrip()


def _num(x: float) -> str:
    """Four significant digits, or a whole number with thousands separators from 10 000 up."""
    return f"{x:,.0f}" if abs(x) >= 1e4 else f"{x:.4g}"


def render_calibration(c: Calibration, written: list[str] | None = None) -> str:
    """The fitted parameters with standard errors, their correlation, and the residuals."""
    s = c.scenario
    rms = float(np.sqrt(np.mean(c.residual_m**2)))
    rms0 = float(np.sqrt(np.mean((c.start_model_m - c.reference_m) ** 2)))
    lines = [
        f"landrisk {__version__} - calibration against reference distances",
        f"Scenario: {s.name} ({s.source}); reference: {c.reference_source} ({c.reference_m.size} rows)",
        "Weighted least squares (scipy.optimize.least_squares), "
        + ("weights 1/tolerance^2" if c.sigma_from == "tolerance" else "equal weights, covariance scaled by "
           "the residual variance"),
        "",
        f"  {'parameter':<34}{'fitted':>12}{'std. error':>12}{'start':>12}   bounds",
    ]
    for p in c.parameters:
        se = "-" if p.standard_error is None else f"{p.standard_error:.4g}"
        lines.append(f"  {p.name:<34}{p.value:12.5g}{se:>12}{p.start:12.5g}   [{p.lower:g}, {p.upper:g}]"
                     + (" AT BOUND" if p.at_bound else ""))
    names = [p.name.rsplit(".", 1)[-1][:10] for p in c.parameters]
    lines += ["", "Correlation of the estimates:", "  " + " " * 12 + "".join(f"{n:>11}" for n in names)]
    for n, row in zip(names, c.correlation, strict=True):
        lines.append(f"  {n:<12}" + "".join(f"{x:11.3f}" for x in row))
    lines += ["", f"RMS residual {rms:.1f} m ({convert(rms, 'm', 'ft'):.0f} ft), at the start {rms0:.1f} m; "
              f"residual sd {c.residual_sd:.3g} (in units of the tolerance); {c.solver_calls:,} solver calls",
              f"Largest residual: {float(np.max(np.abs(c.residual_m))):.1f} m"]
    return _closing(lines, list(c.warnings), written)


def render_epistemic(e: EpistemicAssessment) -> str:
    """P(overrun) over the epistemic parameters: median, upper quantile, drivers, cost."""
    r = e.result
    med = float(np.quantile(r.probability, 0.5))
    up = float(np.quantile(r.probability, r.upper_level))
    lines = [
        f"Epistemic uncertainty: P(overrun) over {r.outer} draws of {len(r.parameters)} uncertain "
        f"distribution parameter(s) ({r.method}, {r.inner_samples:,} inner samples)",
        f"  median                      {med:.3e}",
        f"  {100 * r.upper_level:g}th percentile            {up:.3e}   (P(overrun) <= {up:.1e} with "
        f"{100 * r.upper_level:g} % confidence in the inputs)",
        f"  at the nominal parameters   {r.nominal_probability:.3e}  sampling interval "
        f"[{r.nominal_interval[0]:.2e}, {r.nominal_interval[1]:.2e}] (estimator only)",
        f"  solver calls {r.solver_calls:,}; {int(r.nested.sum())} nested draw(s); least effective sample "
        f"size {r.ess.min():,.0f}",
        "  drivers of log10 P (standardised regression coefficient squared, Spearman):",
    ]
    for name, src2, rho in r.drivers:
        lines.append(f"    {name:<40}{src2:8.3f}{rho:+8.2f}")
    lines += [f"Note: {n}" for n in r.notes]
    return "\n".join(lines)


def render_study(r: StudyResult, written: list[str] | None = None, units: str | None = None) -> str:
    """A study: P(overrun) per case, the paired comparisons and the yearly risk (``units``: distances
    in ``si`` or ``aviation`` units, metres by default)."""
    s = r.settings
    du = DisplayUnits(units or "si")
    lu = du.unit("length")
    lines = [
        f"landrisk {__version__} - study {r.name} ({r.source})",
        f"Base scenario: {r.base.name} ({r.base.source})" if r.base else "",
        f"{len(r.cases)} cases, {s.samples:,} Monte Carlo samples each, seed {s.seed}, method {s.method} "
        f"(auto: Monte Carlo with >= {s.min_events} overruns, else subset simulation); {r.engine}, "
        f"{r.workers} worker(s); {r.computed} computed, {r.reused} from the cache, {r.seconds:.1f} s",
        "",
        f"{'case':<44} {'method':<7} {'P(overrun) [95 % interval]':<32} {'CoV':>6} {'p50 ' + lu:>7} "
        f"{'p99 ' + lu:>7}",
    ]
    for c in r.cases:
        pct = {p.p: p.value for p in c.percentiles}
        p50, p99 = (None if x is None else du.length(x) for x in (pct.get(50.0), pct.get(99.0)))
        prob = f"< {c.ci[1]:.2e} (none seen)" if c.upper_bound_only else \
            f"{c.p_overrun:.2e} [{c.ci[0]:.2e}, {c.ci[1]:.2e}]"
        cov = f"{100 * c.cov:.0f} %" if c.cov is not None else "-"
        lines.append(f"{c.name[:44]:<44} {c.method:<7} {prob:<32} {cov:>6} "
                     f"{p50 if p50 is None else round(p50):>7} {p99 if p99 is None else round(p99):>7}")
    if r.comparisons:
        lines += ["", "Comparisons on common random numbers (the same Monte Carlo input samples for both "
                  "cases; they use those samples only, not the subset-simulation estimates above):"]
    for cmp in r.comparisons:
        p = cmp.paired
        ratio = "ratio - (no overrun seen in one case)" if p.ratio is None or p.ratio_ci is None else \
            f"ratio {p.ratio:.3f} [{p.ratio_ci[0]:.3f}, {p.ratio_ci[1]:.3f}]"
        vr = (f"variance {p.variance_reduction:.1f}x smaller than two independent runs"
              if p.variance_reduction else "no sample differs between the two: no variance reduction "
              "to state")
        lines.append(f"  {cmp.alternative} vs {cmp.baseline}: difference {p.difference:+.2e} "
                     f"[{p.difference_ci[0]:+.2e}, {p.difference_ci[1]:+.2e}], {ratio}; {vr}")
    e = r.exposure
    if e is not None:
        y = e.yearly
        mean = f"{y.mean_years_between:.3g}" if y.mean_years_between is not None else "no overrun expected"
        lines += ["", f"Yearly risk at {e.exposure.landings_per_year:,.0f} landings a year ({e.basis}):",
                  f"  expected overruns per year {y.overruns_per_year:.3g} [{y.overruns_per_year_ci[0]:.3g}, "
                  f"{y.overruns_per_year_ci[1]:.3g}]; P(at least one a year) {y.p_at_least_one:.3g}; "
                  f"mean years between overruns {mean} (Poisson, common practice, no source)"]
        if e.target_per_year is not None:
            lines.append(f"  target level of safety {e.target_per_year:.3g} overruns per year: "
                         f"{e.target_status}")
        lines += [f"  note: {n}" for n in e.notes]
    messages = [f"{c.name}: {m}" for c in r.cases for m in c.messages]
    return _closing(lines, messages, written)
