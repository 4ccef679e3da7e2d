"""JSON-ready records of results, each headed by the same provenance.

Every record starts with :func:`provenance` (tool, version, caution, scenario, where it came from, the
overrides, and how the run was made: seed, sampler, samples or method) and carries the resolved inputs,
so that a file written from it can be traced back to what produced it.

Records are valid JSON: no Infinity or NaN. A value that is not a finite number is given as ``null``
beside a flag or a count saying why (``percentiles_beyond_any_runway``, ``landings_cannot_stop``), and
:func:`dumps` replaces any left over by ``null`` and lists where in ``non_finite_values``. Every key
with a unit ends in it, in SI: ``_m``, ``_mps`` (m/s), ``_kt`` where stated, ``_s``.
"""

from __future__ import annotations

import hashlib
import json
import math
from collections.abc import Mapping
from typing import TYPE_CHECKING, Any

import numpy as np

from landrisk import CAUTION, __version__
from landrisk.model import KEYS, Scenario, SingleLanding
from landrisk.units import convert

if TYPE_CHECKING:  # the studies are imported with their results, not by reading this module
    from landrisk.studies import Assessment, Ranking, RareAssessment
    from landrisk.uq import Percentile

__all__ = [
    "assessment_record",
    "dumps",
    "input_units",
    "inputs_hash",
    "provenance",
    "ranking_record",
    "rare_record",
    "solve_record",
    "summary_record",
]


def provenance(scenario: Scenario, **run: Any) -> dict[str, Any]:
    """The head of every record: tool, version, caution, the scenario and its source, the overrides,
    then the run's own settings (``seed=``, ``sampler=``, ``samples=``, ``method=``) in that order."""
    return {"tool": "landrisk", "version": __version__, "caution": CAUTION, "scenario": scenario.name,
            "source": scenario.source, "overrides": list(scenario.overrides), **run}


def _clean(obj: Any, path: str, found: list[str]) -> Any:
    if isinstance(obj, float | np.floating):
        if math.isfinite(float(obj)):
            return float(obj)
        found.append(path)
        return None
    if isinstance(obj, np.integer):
        return int(obj)
    if isinstance(obj, np.bool_):
        return bool(obj)
    if isinstance(obj, np.ndarray):
        obj = obj.tolist()
    if isinstance(obj, dict):
        return {k: _clean(v, f"{path}.{k}" if path else str(k), found) for k, v in obj.items()}
    if isinstance(obj, list | tuple):
        return [_clean(v, f"{path}[{i}]", found) for i, v in enumerate(obj)]
    return obj


def json_safe(record: Any) -> Any:
    """``record`` with every non-finite number replaced by None; the paths replaced are listed under
    ``non_finite_values`` (a dict record only)."""
    found: list[str] = []
    out = _clean(record, "", found)
    if found and isinstance(out, dict):
        out["non_finite_values"] = found
    return out


def dumps(record: Any, indent: int | None = 2) -> str:
    """``record`` as valid JSON text (never Infinity or NaN; see :func:`json_safe`)."""
    return json.dumps(json_safe(record), indent=indent, default=str, allow_nan=False, ensure_ascii=False)


def _num(x: float | None) -> float | None:
    return None if x is None or not math.isfinite(x) else float(x)


def inputs_hash(inputs: Mapping[str, Any], uncertain: Mapping[str, Any] | None) -> str:
    """SHA-256 of the resolved inputs (scenario values and the uncertain tables as recorded), hex.

    Computed on the canonical JSON of what a summary file holds (keys sorted), so that the same hash
    can be recomputed from ``summary.json``'s ``inputs`` and ``uncertain`` entries.
    """
    data = json.loads(json.dumps({"inputs": dict(inputs), "uncertain": dict(uncertain or {})}, default=str))
    text = json.dumps(data, sort_keys=True, separators=(",", ":"), ensure_ascii=True)
    return hashlib.sha256(text.encode("ascii")).hexdigest()


def input_units() -> dict[str, str]:
    """The unit of every dimensional scenario key, as held in ``inputs``."""
    return {k: spec.unit for k, spec in KEYS.items() if spec.kind == "quantity"}


def _kt(speed_ms: float) -> float:
    return convert(speed_ms, "m/s", "kt")


def solve_record(landing: SingleLanding) -> dict[str, Any]:
    """A JSON-ready record of one landing: results, the resolved inputs and the run's provenance."""
    return {
        **provenance(landing.scenario),
        "air_distance_m": landing.air_distance_m,
        "approach_m": landing.approach_m,
        "flare_m": landing.flare_m,
        "free_roll_m": landing.free_roll_m,
        "braking_m": landing.braking_m,
        "total_m": landing.total_m,
        "lda_m": landing.lda_m,
        "margin_m": landing.margin_m,
        "overrun": landing.overrun,
        "runway_end_ground_speed_mps": landing.runway_end_ground_speed,
        "beyond_end_m": landing.beyond_end_m,
        "stall_speed_kt": _kt(landing.stall_speed),
        "touchdown_speed_kt": _kt(landing.touchdown_speed),
        "touchdown_ground_speed_kt": _kt(landing.touchdown_ground_speed),
        "brake_speed_kt": _kt(landing.brake_speed),
        "time_to_stop_s": landing.time_to_stop_s,
        "inputs": dict(landing.scenario.values),
        "input_units": input_units(),
        "derived": dict(landing.derived),
    }


def _pct(items: list[Percentile]) -> dict[str, Any]:
    return {f"{p.p:g}": p.as_dict() for p in items}


def _phase_record(a: Assessment, name: str) -> dict[str, Any]:
    m = a.moments[name]
    return {"mean_m": _num(m.mean), "sd_m": _num(m.sd), "moments_samples": m.used,
            "moments_excluded_cannot_stop": m.excluded, "percentiles": _pct(a.percentiles[name])}


def summary_record(a: Assessment) -> dict[str, Any]:
    """The figures of an assessment, JSON-ready (no provenance; :func:`assessment_record` adds it).

    Means and standard deviations are of the landings that stop (``moments_samples`` of them); the
    ``landings_cannot_stop`` are overruns with an infinite distance, and a percentile above their share
    is listed in ``percentiles_beyond_any_runway`` instead of given a number. With fewer than two
    landings that stop the standard deviation cannot be estimated: ``sd_m`` is null. A ``streamed``
    assessment (more samples than its settings keep) reads its percentiles from counts in bins:
    within ``percentile_error_m`` of the sample's (0 for exact order statistics).
    """
    from landrisk.studies.assess import PHASES

    tot = a.percentiles["total_m"]
    mom = a.moments["total_m"]
    finite = [p for p in tot if p.supported and not p.infinite]
    return {
        "samples": a.n,
        "seed": a.settings.seed,
        "sampler": a.settings.sampler,
        "confidence": a.settings.confidence,
        "lda_m": a.lda_m,
        "mean_m": _num(mom.mean),
        "sd_m": _num(mom.sd),
        "mean_ci95_m": [mom.lo, mom.hi] if mom.lo is not None else None,
        "moments_samples": mom.used,
        "landings_cannot_stop": a.cannot_stop,
        "percentiles_m": {f"{p.p:g}": p.value for p in finite},
        "percentiles_ci95_m": {f"{p.p:g}": [p.lo, p.hi] for p in tot if p.supported},
        "percentiles_beyond_any_runway": [f"{p.p:g}" for p in tot if p.infinite],
        "unsupported_percentiles": [f"{p.p:g}" for p in tot if not p.supported],
        "streamed": a.streamed,
        "percentile_error_m": a.percentile_error_m,
        "p_overrun": None if a.p_overrun.upper_bound_only else a.p_overrun.estimate,
        "p_overrun_ci95": [a.p_overrun.lo, a.p_overrun.hi],
        "p_overrun_upper_bound_only": a.p_overrun.upper_bound_only,
        "p_overrun_upper_bound": a.p_overrun.hi if a.p_overrun.upper_bound_only else None,
        "overruns": a.p_overrun.events,
        "resa_length_m": a.resa_length_m,
        "p_beyond_resa": a.p_beyond_resa.as_dict(),
        "overrun_ground_speed_mps": _pct(a.overrun_speed),
        "overrun_ground_speed_min_mps": a.overrun_speed_min,
        "overrun_ground_speed_max_mps": a.overrun_speed_max,
        "phases": {name: _phase_record(a, name) for name in PHASES},
        "comparison_lines": [{"name": c.name, "factor": c.factor, "source": c.source, "basis": c.basis,
                              "distance_m": c.distance_m, "lda_meets": c.meets,
                              "p_exceed": c.p_exceed.as_dict()} for c in a.comparisons],
        "nominal_total_m": _num(a.nominal_total_m),
        "nominal_cannot_stop": not math.isfinite(a.nominal_total_m),
        "nominal_inputs_note": a.nominal_note,
        "dry_runway_total_m": _num(a.dry_total_m) if a.dry_basis_note else _num(a.nominal_total_m),
        "dry_runway_note": a.dry_basis_note,
        "flags": a.flags,
    }


def assessment_record(a: Assessment) -> dict[str, Any]:
    """Everything about an assessment, JSON-ready: provenance, results, resolved inputs."""
    return {
        **provenance(a.scenario, seed=a.settings.seed, sampler=a.settings.sampler,
                     samples=a.settings.samples),
        **summary_record(a),
        "inputs": dict(a.scenario.values),
        "input_units": input_units(),
        "uncertain": dict(a.record),
        "scenario_text": a.scenario.text,
    }


def _nan_none(x: float) -> float | None:
    return None if np.isnan(x) else x


def _chaos_record(r: Ranking) -> dict[str, Any]:
    """The surrogate's truncation, hold-out and tail checks, flat (the keys of earlier versions)."""
    assert r.chaos is not None and r.tail is not None
    c, t = r.chaos, r.tail
    return {"order": c.order, "q_norm": c.q_norm, "terms": c.terms, "branches": c.branches,
            "training_calls": c.training_calls, "holdout_calls": c.holdout_calls, "loo_error": c.loo_error,
            "holdout_rel_error": c.holdout_rel_error, "holdout_max_error_m": c.holdout_max_error_m,
            "holdout_max_rel_error": c.holdout_max_rel_error, "tail_check_calls": t.calls,
            "tail_rel_rms": t.rel_rms, "tail_max_rel": t.max_rel, "tail_bias_rel": t.bias_rel,
            "near_runway_end": t.near_runway_end, "misclassified_overruns": t.misclassified_overruns,
            "tail_ok": t.passed, "reliable": r.reliable, "error_band_m": t.band_m}


def _triple(v: tuple[float, float, float] | None) -> dict[str, float] | None:
    return None if v is None else {"value": v[0], "ci_lo": v[1], "ci_hi": v[2]}


def _tail_record(r: Ranking) -> dict[str, Any]:
    """The surrogate's P99 and P(overrun) against the Monte Carlo check's, and what failed."""
    t = r.tail
    assert t is not None
    return {"passed": t.passed,
            "p99_m": {"surrogate": _triple(t.p99_surrogate), "monte_carlo": _triple(t.p99_mc),
                      "passed": t.p99_passed},
            "p_overrun": {"surrogate": _triple(t.p_overrun_surrogate), "monte_carlo": _triple(t.p_overrun_mc),
                          "within_error_band": list(t.p_overrun_band) if t.p_overrun_band else None,
                          "passed": t.p_overrun_passed},
            "error_band_m": t.band_m, "calls": t.calls, "near_runway_end": t.near_runway_end,
            "misclassified_outside_band": t.misclassified_overruns,
            "misclassified_within_band": t.misclassified_within_band, "note": t.note}


def _overrun_record(r: Ranking) -> dict[str, Any]:
    """Influence on the overrun from failure samples: indices, profile, parameter sensitivities, and the
    Shapley effects and the tail check where there are some."""
    out: dict[str, Any] = {}
    o = r.overrun
    if o is not None:
        out["overrun_samples"] = {"source": o.source, "samples": o.samples, "calls": o.calls,
                                  "overruns": o.events, "effective_overruns": o.effective_events,
                                  "p_overrun": o.p_overrun}
        out["overrun_indices"] = [{"name": i.name, "first_order": i.first_order,
                                   "first_order_ci95": list(i.ci) if i.ci else None,
                                   **({"note": i.note} if i.note else {})} for i in o.indices]
        out["overrun_profile"] = [{"name": p.name, "unit": p.unit, "prior_median": p.prior_median,
                                   "overrun_median": p.overrun_median, "shift": p.shift,
                                   **({"levels": [{"value": v, "prior": a, "given_overrun": b}
                                                  for v, a, b in p.levels]} if p.discrete else {})}
                                  for p in o.profile]
        out["parameter_sensitivity"] = [{"input": q.input, "parameter": q.parameter, "value": q.value,
                                         "change": q.change, "dp_overrun": q.dp,
                                         "dp_overrun_ci95": list(q.ci), "derivative": q.derivative}
                                        for q in o.sensitivity]
    if r.overrun_mc is not None:
        m = r.overrun_mc
        out["overrun_indices_cross_check"] = {
            "source": m.source, "effective_overruns": m.effective_events, "p_overrun": m.p_overrun,
            "inputs": [{"name": i.name, "first_order": i.first_order,
                        "first_order_ci95": list(i.ci) if i.ci else None} for i in m.indices]}
    if r.shapley is not None:
        sh = r.shapley
        out["shapley"] = {"output": "total_m", "calls_on_surrogate": sh.calls,
                          "inputs": [{"name": n, "effect": float(e), "se": float(se)}
                                     for n, e, se in zip(sh.names, sh.effects, sh.se, strict=True)]}
    if r.tail is not None:
        out["tail_check"] = _tail_record(r)
    return out


def _ranking_figures(r: Ranking) -> dict[str, Any]:
    """The JSON-ready figures of a ranking (no provenance)."""
    out: dict[str, Any] = {
        "method": r.method,
        "calls": r.calls,
        "calls_breakdown": r.calls_breakdown,
        "seed": r.settings.seed,
        "reliable": r.reliable,
        "warnings": r.warnings,
        "inputs": [{"name": i.name, "first_order": i.first, "total": i.total,
                    "first_order_ci95": list(i.first_ci) if i.first_ci else None,
                    "total_ci95": list(i.total_ci) if i.total_ci else None,
                    "p5": None if i.discrete and np.isnan(i.p5) else i.p5,
                    "p95": None if i.discrete and np.isnan(i.p95) else i.p95,
                    "swing_total_m": _nan_none(i.swing_total_m),
                    "swing_margin_m": _nan_none(i.swing_margin_m),
                    "discrete": i.discrete, "levels": list(i.levels)} for i in r.inputs],
        "second_order": [{"pair": [a, b], "index": v} for a, b, v in r.second_order],
        "phase_indices": {ph: {n: {"first_order": f, "total": t} for n, (f, t) in d.items()}
                          for ph, d in r.phase_indices.items()},
    }
    if r.form_importance:
        out["form_importance_alpha2"] = r.form_importance
        out["form_beta"] = r.form_beta
    out.update(_overrun_record(r))
    if r.method == "pce" and r.chaos is not None and r.surrogate is not None:
        chaos = _chaos_record(r)
        out.update({"order": chaos["order"], "q_norm": chaos["q_norm"],
                    "holdout_rel_error": chaos["holdout_rel_error"], "chaos": chaos})
        sur = r.surrogate
        out["surrogate"] = {"samples": sur.samples, "mean_m": sur.mean_m, "sd_m": sur.sd_m,
                            "percentiles": _pct(sur.percentiles), "p_overrun": sur.p_overrun.as_dict()}
        if r.mc_check is not None:
            m = r.mc_check
            out["mc_check"] = {"samples": m.samples, "mean_m": m.mean_m, "sd_m": m.sd_m, "p50_m": m.p50_m,
                               "p99_m": m.p99_m, "p_overrun": m.p_overrun.as_dict(), "rel_diff": m.rel_diff}
    return out


def ranking_record(r: Ranking) -> dict[str, Any]:
    """Everything about a ranking, JSON-ready: provenance, results, resolved inputs."""
    return {**provenance(r.scenario, seed=r.settings.seed, method=r.method), **_ranking_figures(r),
            "inputs_used": dict(r.scenario.values), "input_units": input_units(), "uncertain": dict(r.record),
            "scenario_text": r.scenario.text}


def _finite(v: float | None) -> float | None:
    """A float for JSON: None for NaN or an infinity (JSON has neither)."""
    return None if v is None or not math.isfinite(v) else float(v)


def _rare_figures(r: RareAssessment) -> dict[str, Any]:
    """The JSON-ready figures of a rare-event assessment (no provenance)."""
    s = r.settings
    out: dict[str, Any] = {
        "method": r.method,
        # A method that did not converge gives no estimate; its last value is kept apart.
        "p_overrun": r.probability if r.converged else None,
        "p_overrun_ci95": list(r.ci) if r.converged else None,
        "last_value_not_converged": None if r.converged else r.probability,
        "cov": _finite(r.cov),
        "model_calls": r.calls,
        "converged": r.converged,
        "beta": _finite(r.beta),
        "lda_m": float(r.scenario.values["runway.lda"]),
        "seed": s.seed,
        "settings": {"target_cov": s.target_cov, "max_calls_per_branch": s.max_calls,
                     "subset_samples_per_level": s.subset_samples, "subset_replicates": s.subset_replicates,
                     "starts": s.starts, "confidence": s.confidence},
        # inputs whose truncation bound or extreme sample value sets the probability
        "bound_limited": list(r.bound_limited),
        "design_point": r.design_point,
        "importance_alpha2": r.importance,
        "branches": [{"values": b.values, "probability": b.probability, "kind": b.estimate.kind,
                      "p_overrun": b.estimate.probability, "cov": _finite(b.estimate.cov),
                      "ci95": list(b.estimate.ci), "calls": b.estimate.calls,
                      "converged": b.estimate.converged, "message": b.estimate.message,
                      "effective_samples": b.estimate.effective_samples} for b in r.branches],
        "messages": r.messages,
    }
    if r.cross_check is not None:
        c = r.cross_check
        out["cross_check"] = {"method": c.method, "p_overrun": c.probability, "ci95": list(c.ci),
                              "calls": c.calls}
    if r.risk_curve is not None:
        rc = r.risk_curve
        out["risk_curve"] = {"lda_m": rc.lda_m.tolist(), "p_subset": rc.p_subset.tolist(),
                             "p_subset_ci95_lo": rc.ci_lo.tolist(), "p_subset_ci95_hi": rc.ci_hi.tolist(),
                             "converged": rc.converged.tolist(),
                             "subset_calls": rc.subset_calls, "mc_samples": rc.mc_samples,
                             "p_mc": [None if np.isnan(v) else float(v) for v in rc.p_mc],
                             "form_points": [{"lda_m": a, "p_form": b} for a, b in rc.form_points],
                             "form_calls": rc.form_calls}
    return out


def rare_record(r: RareAssessment) -> dict[str, Any]:
    """Everything about a rare-event assessment, JSON-ready: provenance, results, resolved inputs.

    The keys of an assessment that have a meaning here are given too; percentiles and moments need
    plain Monte Carlo and are empty.
    """
    rec = _rare_figures(r)
    assess_keys = {"samples": rec["model_calls"], "sampler": "standard normal space, seeded",
                   "overruns": None, "percentiles_m": {}, "mean_m": None, "sd_m": None}
    return {**provenance(r.scenario), **assess_keys, **rec, "inputs": dict(r.scenario.values),
            "input_units": input_units(), "uncertain": dict(r.record)}
