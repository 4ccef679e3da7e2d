"""JSON-ready records of results, each headed by the same provenance.

Every record starts with :func:`provenance` (tool, version, caution, scenario, where it came from, the
overrides, and how the run was made: seed, sampler, samples or method) and carries the resolved inputs,
so that a file written from it can be traced back to what produced it.
"""

from __future__ import annotations

import hashlib
import json
from collections.abc import Mapping
from typing import Any

import numpy as np

from landrisk import CAUTION, __version__
from landrisk.model import KEYS, Scenario, SingleLanding
from landrisk.studies import PHASES, Assessment, Ranking, RareAssessment
from landrisk.units import convert
from landrisk.uq import Percentile

__all__ = [
    "assessment_record",
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
        "runway_end_ground_speed_ms": landing.runway_end_ground_speed,
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


def summary_record(a: Assessment) -> dict[str, Any]:
    """The figures of an assessment, JSON-ready (no provenance; :func:`assessment_record` adds it)."""
    tot = a.percentiles["total_m"]
    return {
        "samples": a.n,
        "seed": a.settings.seed,
        "sampler": a.settings.sampler,
        "confidence": a.settings.confidence,
        "lda_m": a.lda_m,
        "mean_m": a.moments["total_m"][0],
        "sd_m": a.moments["total_m"][1],
        "mean_ci95_m": [a.moments["total_m"][2], a.moments["total_m"][3]],
        "percentiles_m": {f"{p.p:g}": p.value for p in tot if p.supported},
        "percentiles_ci95_m": {f"{p.p:g}": [p.lo, p.hi] for p in tot if p.supported},
        "unsupported_percentiles": [f"{p.p:g}" for p in tot if not p.supported],
        "p_overrun": a.p_overrun.estimate,
        "p_overrun_ci95": [a.p_overrun.lo, a.p_overrun.hi],
        "p_overrun_upper_bound_only": a.p_overrun.upper_bound_only,
        "overruns": a.p_overrun.events,
        "resa_length_m": a.resa_length_m,
        "p_beyond_resa": a.p_beyond_resa.as_dict(),
        "overrun_ground_speed_ms": _pct(a.overrun_speed),
        "overrun_ground_speed_min_ms": a.overrun_speed_min,
        "overrun_ground_speed_max_ms": a.overrun_speed_max,
        "phases": {name: {"mean_m": a.moments[name][0], "sd_m": a.moments[name][1],
                          "percentiles": _pct(a.percentiles[name])} for name in PHASES},
        "comparison_lines": [{"name": c.name, "factor": c.factor, "source": c.source,
                              "distance_m": c.distance_m, "p_exceed": c.p_exceed.as_dict()}
                             for c in a.comparisons],
        "nominal_total_m": a.nominal_total_m,
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
            "tail_ok": t.passed, "reliable": r.reliable}


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
                    "discrete": i.discrete} for i in r.inputs],
        "second_order": [{"pair": [a, b], "index": v} for a, b, v in r.second_order],
        "phase_indices": {ph: {n: {"first_order": f, "total": t} for n, (f, t) in d.items()}
                          for ph, d in r.phase_indices.items()},
    }
    if r.form_importance:
        out["form_importance_alpha2"] = r.form_importance
        out["form_beta"] = r.form_beta
    if r.risk is not None:
        out["overrun_indicator_indices"] = {
            "events": r.risk_events, "samples": 2 * r.settings.risk_samples, "calls": r.risk.calls,
            "inputs": [{"name": n, "first_order": float(f), "total": float(t), "first_order_ci95": list(fc),
                        "total_ci95": list(tc)} for n, f, t, fc, tc in
                       zip(r.risk.names, r.risk.first, r.risk.total, r.risk.first_ci.tolist(),
                           r.risk.total_ci.tolist(), strict=True)]}
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


def _rare_figures(r: RareAssessment) -> dict[str, Any]:
    """The JSON-ready figures of a rare-event assessment (no provenance)."""
    out: dict[str, Any] = {
        "method": r.method,
        # A method that did not converge gives no estimate; its last value is kept apart.
        "p_overrun": r.probability if r.converged else None,
        "p_overrun_ci95": list(r.ci) if r.converged else None,
        "last_value_not_converged": None if r.converged else r.probability,
        "cov": r.cov,
        "model_calls": r.calls,
        "converged": r.converged,
        "beta": r.beta,
        "lda_m": float(r.scenario.values["runway.lda"]),
        "seed": r.settings.seed,
        "design_point": r.design_point,
        "importance_alpha2": r.importance,
        "branches": [{"values": b.values, "probability": b.probability, "p_overrun": b.estimate.probability,
                      "cov": b.estimate.cov, "ci95": list(b.estimate.ci), "calls": b.estimate.calls,
                      "converged": b.estimate.converged, "message": b.estimate.message,
                      "effective_samples": b.estimate.effective_samples} for b in r.branches],
        "messages": r.messages,
    }
    if r.cross_check is not None:
        c = r.cross_check
        out["cross_check_subset"] = {"p_overrun": c.probability, "ci95": list(c.ci), "calls": c.calls}
    if r.risk_curve is not None:
        rc = r.risk_curve
        out["risk_curve"] = {"lda_m": rc.lda_m.tolist(), "p_subset": rc.p_subset.tolist(),
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
