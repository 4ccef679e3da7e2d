"""Plain-text reports of results, as the command line prints them."""

from __future__ import annotations

import numpy as np

from landrisk import CAUTION, __version__
from landrisk.model import SingleLanding
from landrisk.studies import Assessment, Ranking, RareAssessment
from landrisk.studies.study import StudyResult
from landrisk.units import convert

__all__ = ["render_assess", "render_rank", "render_rare", "render_solve"]


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


def render_solve(landing: SingleLanding) -> str:
    """The deterministic landing as a readable table: phases in m and ft, speeds in kt, the margin."""
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
        lines += [_m_ft("approach (in the air)", landing.approach_m),
                  _m_ft("flare (in the air)", landing.flare_m)]
    lines += [
        _m_ft("air distance", landing.air_distance_m,
              "(given touchdown point)" if v["procedure.touchdown_distance"] is not None else ""),
        _m_ft("free roll", landing.free_roll_m, f"({v['procedure.reaction_time']:g} s, brakes off)"
              if not landing.stopped_in_free_roll else "(stopped before the brakes came on)"),
        _m_ft("braking roll", landing.braking_m),
        _m_ft("total landing distance", landing.total_m),
        _m_ft("landing distance available", landing.lda_m),
        _m_ft("margin (LDA - total)", landing.margin_m,
              f"({100 * landing.margin_m / landing.lda_m:.1f} % of LDA)"),
        "",
        "Speeds (true airspeed unless stated)",
        _kt("stall V_S", landing.stall_speed),
        _kt("touchdown V_TD", landing.touchdown_speed),
        _kt("touchdown ground speed", landing.touchdown_ground_speed),
        _kt("at brake application", landing.brake_speed),
        f"  {'touchdown to stop':<28}{landing.time_to_stop_s:10.1f} s",
        "",
    ]
    if landing.overrun:
        lines.append(
            f"OVERRUN: {landing.beyond_end_m:.0f} m ({convert(landing.beyond_end_m, 'm', 'ft'):.0f} ft) "
            f"beyond the runway end, crossing it at "
            f"{convert(landing.runway_end_ground_speed, 'm/s', 'kt'):.0f} kt ground speed."
        )
    else:
        lines.append("The aircraft stops within the landing distance available.")
    d = landing.derived
    lines += [
        f"Inputs used: density {d['density_kg_m3']:.4f} kg/m^3, rolling mu {d['rolling_mu']:.3f}, "
        f"braking mu {d['braking_mu']:.3f}, "
        f"headwind {convert(v['conditions.headwind'], 'm/s', 'kt'):.1f} kt, "
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


def render_assess(a: Assessment, written: list[str] | None = None) -> str:
    """The Monte Carlo assessment as a readable summary: percentiles, overrun risk, comparison lines."""
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
    mean, sd, lo, hi = a.moments["total_m"]
    lines += [
        "",
        f"Total landing distance from the screen height          m         ft   {conf} interval [m]",
        f"  {'mean':<44}{mean:9.1f} {convert(mean, 'm', 'ft'):10.0f}   [{lo:.1f}, {hi:.1f}]",
        f"  {'standard deviation':<44}{sd:9.1f} {convert(sd, 'm', 'ft'):10.0f}",
    ]
    for p in a.percentiles["total_m"]:
        if p.value is not None and p.lo is not None and p.hi is not None:
            lines.append(f"  {_pct_label(p.p):<44}{p.value:9.1f} {convert(p.value, 'm', 'ft'):10.0f}   "
                         f"[{p.lo:.1f}, {p.hi:.1f}]")
        else:
            lines.append(f"  {_pct_label(p.p):<44}{'needs more samples':>20}")
    lines += ["", "By phase (P50 / P99, m):"]
    for name in ("air_distance_m", "free_roll_m", "braking_m"):
        by = {p.p: p for p in a.percentiles[name]}
        if by[99.0].supported:
            lines.append(f"  {name.removesuffix('_m').replace('_', ' '):<20}"
                         f"{by[50.0].value:8.1f} / {by[99.0].value:8.1f}")
    lines += [
        "",
        f"Runway: LDA {a.lda_m:.0f} m ({convert(a.lda_m, 'm', 'ft'):.0f} ft)",
        f"  P(overrun)                        {a.p_overrun.text()}",
        f"  P(beyond a {a.resa_length_m:.0f} m safety area)   {a.p_beyond_resa.text()}",
    ]
    if a.overrun_speed_max is not None and a.overrun_speed_min is not None:
        shown = [f"{'median' if p.p == 50 else _pct_label(p.p)} {convert(p.value, 'm/s', 'kt'):.0f} kt"
                 for p in a.overrun_speed if p.value is not None]
        lo, hi = (convert(v, "m/s", "kt") for v in (a.overrun_speed_min, a.overrun_speed_max))
        lines.append("  ground speed of the overruns at the runway end: " + ", ".join(
            [*shown, f"range {lo:.0f} to {hi:.0f} kt"]))
    lines += ["", f"Comparison lines (P that the Monte Carlo distance exceeds each; {conf} interval)"]
    for c in a.comparisons:
        lines.append(f"  {c.name:<32}{c.distance_m:8.0f} m   {c.p_exceed.text()}")
    lines += [f"    {c.name}: {c.source}" for c in a.comparisons[1:]]
    if any(a.flags.values()):
        lines.append(f"Flags: {a.flags['lift_exceeds_weight']} samples with lift above weight at touchdown, "
                     f"{a.flags['cannot_stop']} that cannot stop (counted as overruns).")
    if st.sampler != "random":
        lines.append(f"Intervals assume independent samples; for {st.sampler} points they are conservative.")
    return _closing(lines, [], written)


_TAIL_FAILED = "FAILED - the surrogate's P99 and P(overrun) are not reliable"


def render_rank(r: Ranking, written: list[str] | None = None) -> str:
    """The ranking of the uncertain inputs as a readable table."""
    s = r.scenario
    lines = [
        f"landrisk {__version__} - which uncertain inputs drive the landing distance",
        f"Scenario: {s.name} ({s.source})" + (f" with {', '.join(s.overrides)}" if s.overrides else ""),
    ]
    if r.chaos is not None:
        c = r.chaos
        lines += [
            f"Method: polynomial chaos, order {c.order} (q-norm {c.q_norm:g}, {c.terms} terms) per "
            f"branch, {c.branches} branch(es); {r.calls} solver calls ({c.training_calls} training + "
            f"{c.holdout_calls} hold-out per branch)",
            f"  hold-out error of the total distance: {100 * c.holdout_rel_error:.2f} % of its sd (RMS), "
            f"largest {c.holdout_max_error_m:.1f} m ({100 * c.holdout_max_rel_error:.2f} %)",
        ]
    else:
        lines.append(f"Method: Monte Carlo pick-freeze (Saltelli 2010 first order, Jansen total), "
                     f"{r.calls:,} solver calls, {100 * r.settings.confidence:g} % bootstrap intervals")
    header = f"  {'input':<34}{'first order':>12}{'total':>9}{'swing of total':>17}{'swing of margin':>17}"
    lines += ["", header]
    for i in r.inputs:
        ci = f"  [{i.total_ci[0]:.3f}, {i.total_ci[1]:.3f}]" if i.total_ci else ""
        sw = (f"{i.swing_total_m:+14.0f} m{i.swing_margin_m:+15.0f} m" if np.isfinite(i.swing_total_m)
              else f"{'-':>16}{'-':>17}")
        lines.append(f"  {i.name:<34}{i.first:12.3f}{i.total:9.3f}{sw}{ci}")
    lines.append("  (swing: the input at its 5th and then 95th percentile, a discrete input at its least and "
                 "greatest value, the others nominal)")
    if r.second_order:
        pairs = ", ".join(f"{a} x {b} {v:.3f}" for a, b, v in r.second_order)
        lines.append(f"  largest interactions: {pairs}")
    if r.surrogate is not None and r.tail is not None:
        sur, t = r.surrogate, r.tail
        by = {p.p: p for p in sur.percentiles}
        lines += ["", f"From {sur.samples:,} surrogate samples: mean {sur.mean_m:.1f} m, sd "
                  f"{sur.sd_m:.1f} m, P50 {by[50.0].value:.1f} m, P99 {by[99.0].value:.1f} m, "
                  f"P(overrun) {sur.p_overrun.text()}",
                  f"  tail check on the real solver ({t.calls} samples in the tail and near "
                  f"the runway end): RMS error {100 * t.rel_rms:.2f} %, largest "
                  f"{100 * t.max_rel:.1f} %, {t.misclassified_overruns} of {t.near_runway_end} "
                  "overruns misclassified: " + ("passed" if t.passed else _TAIL_FAILED)]
        if r.mc_check is not None:
            m = r.mc_check
            d = m.rel_diff
            lines.append(f"  Monte Carlo check ({m.samples:,} solver runs): mean {m.mean_m:.1f} m "
                         f"({100 * d['mean']:+.2f} %), sd {m.sd_m:.1f} m ({100 * d['sd']:+.2f} %), P50 "
                         f"{m.p50_m:.1f} m ({100 * d['p50']:+.2f} %), P99 {m.p99_m:.1f} m "
                         f"({100 * d['p99']:+.2f} %), P(overrun) {m.p_overrun.text()}")
    if r.risk is not None:
        lines += ["", "Influence on the overrun itself: Sobol indices of the overrun indicator, Monte Carlo "
                  f"on the solver ({r.risk_events} overruns in {2 * r.settings.risk_samples:,} samples)"]
        order = np.argsort(-r.risk.total)
        if r.form_importance:
            lines.append(f"  {'input':<34}{'first order':>12}{'total':>9}  {'95 % interval':<16}"
                         f"FORM alpha^2 (beta {r.form_beta:.2f})")
        for k in order:
            a2 = r.form_importance.get(r.risk.names[k])
            lines.append(f"  {r.risk.names[k]:<34}{r.risk.first[k]:12.3f}{r.risk.total[k]:9.3f}  "
                         f"{f'[{r.risk.total_ci[k, 0]:.3f}, {r.risk.total_ci[k, 1]:.3f}]':<16}"
                         + (f"{a2:.3f}" if a2 is not None else "-"))
    return _closing(lines, r.warnings, written)


_METHOD_NAMES = {"form": "FORM (first-order reliability method)", "importance":
                 "importance sampling around the design points", "subset": "subset simulation"}


def render_rare(r: RareAssessment, written: list[str] | None = None) -> str:
    """A rare-event assessment: the probability with its interval, cost, design point and risk curve."""
    s = r.scenario
    conf = f"{100 * r.settings.confidence:g} %"
    lda = float(s.values["runway.lda"])
    lines = [
        f"landrisk {__version__} - rare overrun probability",
        f"Scenario: {s.name} ({s.source})" + (f" with {', '.join(s.overrides)}" if s.overrides else ""),
        f"Method: {_METHOD_NAMES[r.method]}; seed {r.settings.seed}; {r.calls:,} solver calls",
        "",
        f"Runway: LDA {lda:.0f} m ({convert(lda, 'm', 'ft'):.0f} ft)",
    ]
    if not r.converged:
        lines.append(f"  P(overrun): NO ESTIMATE - THE METHOD DID NOT CONVERGE ({'; '.join(r.messages)}). "
                     f"Its last, unreliable value was {r.probability:.1e}; use --method subset or plain "
                     "Monte Carlo.")
    elif r.method == "form":
        lines.append(f"  P(overrun) ~ Phi(-beta) = {r.probability:.3e}, beta = {r.beta:.3f} (FORM has no "
                     "sampling interval; it is exact for a linear limit state only)")
    else:
        lines.append(f"  P(overrun) = {r.probability:.3e} [{r.ci[0]:.2e}, {r.ci[1]:.2e}] ({conf}), "
                     f"coefficient of variation {100 * r.cov:.1f} %, "
                     f"generalised beta {r.beta or float('nan'):.3f}")
    for b in r.branches:
        label = ", ".join(f"{k} = {v}" for k, v in b.values.items()) or "all landings"
        cov = b.estimate.cov
        extra = f", CoV {100 * cov:.1f} %" if cov and np.isfinite(cov) else ""
        lines.append(f"    {label} (probability {b.probability:g}): {b.estimate.probability:.3e}{extra}, "
                     f"{b.estimate.calls:,} calls")
    if r.cross_check is not None:
        c = r.cross_check
        lines.append(f"  cross-check by subset simulation: {c.probability:.3e} [{c.ci[0]:.2e}, "
                     f"{c.ci[1]:.2e}] ({c.calls:,} calls)")
    if r.design_point:
        lines += ["", "The most likely overrun (design point of the dominant branch) and each input's "
                  "importance alpha^2:"]
        for k, v in r.design_point.items():
            a2 = r.importance.get(k)
            shown = _show(k, v)
            nominal = _show(k, s.values[k]) if s.values.get(k) is not None else "-"
            tail = f"   alpha^2 {a2:.3f}" if a2 is not None else ""
            lines.append(f"  {k:<34}{shown:>16}   (nominal {nominal}){tail}")
    if r.risk_curve is not None:
        rc = r.risk_curve
        lines += ["", "Risk curve (subset simulation, mixed over branches): P(overrun) for a runway of"]
        for target in (1e-3, 1e-5, 1e-7, 1e-9):
            i = int(np.argmin(np.abs(np.log(np.maximum(rc.p_subset, 1e-300)) - np.log(target))))
            lines.append(f"  {rc.lda_m[i]:8.0f} m: {rc.p_subset[i]:.1e}")
    return _closing(lines, r.messages, written)


def _show(key: str, value: object) -> str:
    """A value in a readable unit: kt for speeds, m, s, kg, or as is."""
    from landrisk.model import KEYS

    if isinstance(value, bool) or not isinstance(value, int | float):
        return str(value)
    unit = KEYS[key].unit if key in KEYS else ""
    if unit == "m/s":
        return f"{convert(float(value), 'm/s', 'kt'):.1f} kt"
    return f"{value:.4g} {unit}".rstrip()


def render_study(r: StudyResult, written: list[str] | None = None) -> str:
    """A study: P(overrun) per case, the paired comparisons and the yearly risk."""
    s = r.settings
    lines = [
        f"landrisk {__version__} - study {r.name} ({r.source})",
        f"Base scenario: {r.base.name} ({r.base.source})" if r.base else "",
        f"{len(r.cases)} cases, {s.samples:,} Monte Carlo samples each, seed {s.seed}, method {s.method} "
        f"(auto: Monte Carlo with >= {s.min_events} overruns, else subset simulation); {r.engine}, "
        f"{r.workers} worker(s); {r.computed} computed, {r.reused} from the cache, {r.seconds:.1f} s",
        "",
        f"{'case':<44} {'method':<7} {'P(overrun) [95 % interval]':<32} {'CoV':>6} {'p50 m':>7} "
        f"{'p99 m':>7}",
    ]
    for c in r.cases:
        pct = {p.p: p.value for p in c.percentiles}
        p50, p99 = pct.get(50.0), pct.get(99.0)
        prob = f"< {c.ci[1]:.2e} (none seen)" if c.upper_bound_only else \
            f"{c.p_overrun:.2e} [{c.ci[0]:.2e}, {c.ci[1]:.2e}]"
        cov = f"{100 * c.cov:.0f} %" if c.cov is not None else "-"
        lines.append(f"{c.name[:44]:<44} {c.method:<7} {prob:<32} {cov:>6} "
                     f"{p50 if p50 is None else round(p50):>7} {p99 if p99 is None else round(p99):>7}")
    if r.comparisons:
        lines += ["", "Comparisons on common random numbers (the same input samples for both cases):"]
    for cmp in r.comparisons:
        p = cmp.paired
        ratio = "ratio - (no overrun seen in one case)" if p.ratio is None or p.ratio_ci is None else \
            f"ratio {p.ratio:.3f} [{p.ratio_ci[0]:.3f}, {p.ratio_ci[1]:.3f}]"
        vr = f"{p.variance_reduction:.1f}x" if p.variance_reduction else "-"
        lines.append(f"  {cmp.alternative} vs {cmp.baseline}: difference {p.difference:+.2e} "
                     f"[{p.difference_ci[0]:+.2e}, {p.difference_ci[1]:+.2e}], {ratio}; variance "
                     f"{vr} smaller than two independent runs")
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
