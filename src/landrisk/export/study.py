"""A study's record (JSON), its table (one row per case: CSV and Parquet) and its figures."""

from __future__ import annotations

import io
import json
import math
from collections.abc import Callable
from pathlib import Path
from typing import TYPE_CHECKING, Any

from landrisk import CAUTION, __version__
from landrisk.export.writers import write_result_set
from landrisk.io.output import write_files
from landrisk.studies.study import CaseResult, ComparisonResult, ExposureResult, StudyResult, YearlyRisk

if TYPE_CHECKING:
    import pandas as pd

__all__ = ["json_safe", "study_record", "study_table", "write_study"]


def json_safe(x: Any) -> Any:
    """The same structure with every non-finite float replaced by None (strictly valid JSON)."""
    if isinstance(x, float):
        return x if math.isfinite(x) else None
    if isinstance(x, dict):
        return {str(k): json_safe(v) for k, v in x.items()}
    if isinstance(x, list | tuple):
        return [json_safe(v) for v in x]
    return x


def _yearly(y: YearlyRisk) -> dict[str, Any]:
    return {"overruns_per_year": y.overruns_per_year, "overruns_per_year_ci95": list(y.overruns_per_year_ci),
            "p_at_least_one_per_year": y.p_at_least_one,
            "p_at_least_one_per_year_ci95": list(y.p_at_least_one_ci),
            "mean_years_between": y.mean_years_between,
            "mean_years_between_ci95": list(y.mean_years_between_ci)}


def _case(c: CaseResult, yearly: YearlyRisk | None) -> dict[str, Any]:
    out = {
        "name": c.name,
        "overrides": dict(c.overrides),
        "method": c.method,
        "p_overrun": c.p_overrun,
        "p_overrun_ci95": list(c.ci),
        "p_overrun_upper_bound_only": c.upper_bound_only,
        "cov": c.cov,
        "percentiles_m": {f"{p.p:g}": p.value for p in c.percentiles},
        "percentiles_ci95_m": {f"{p.p:g}": [p.lo, p.hi] for p in c.percentiles if p.supported},
        "percentile_error_m": c.percentile_error_m,
        "lda_m": c.lda_m,
        "mc_overruns": c.mc.events,
        "mc_samples": c.mc.n,
        "mc_p_overrun": c.mc.estimate,
        "mc_p_overrun_ci95": [c.mc.lo, c.mc.hi],
        "rare_calls": c.rare_calls,
        "p_beyond_resa": c.p_beyond_resa.estimate,
        "p_beyond_resa_ci95": [c.p_beyond_resa.lo, c.p_beyond_resa.hi],
        "chunks": c.chunks,
        "messages": list(c.messages),
        "cache_key": c.key,
        "from_cache": c.cached,
    }
    if yearly is not None:
        out["yearly"] = _yearly(yearly)
    return out


def _comparison(c: ComparisonResult, landings: float | None) -> dict[str, Any]:
    p = c.paired
    out = {
        "baseline": c.baseline,
        "alternative": c.alternative,
        "samples": p.counts.n,
        "common_random_numbers": True,
        "same_uncertain_inputs": c.shared_inputs,
        "p_baseline": p.p_base,
        "p_alternative": p.p_alt,
        "ratio": p.ratio,
        "ratio_ci95": list(p.ratio_ci) if p.ratio_ci else None,
        "risk_reduction": None if p.ratio is None else 1.0 - p.ratio,
        "difference": p.difference,
        "difference_ci95": list(p.difference_ci),
        "sd_paired": p.sd_paired,
        "sd_independent_runs": p.sd_independent,
        "variance_reduction": p.variance_reduction,
        "counts": {"both": p.counts.both, "only_baseline": p.counts.only_base,
                   "only_alternative": p.counts.only_alt},
        "from_cache": c.cached,
    }
    if landings is not None:
        # 0.0 - x, not -x: no "-0" where the difference is zero
        out["overruns_avoided_per_year"] = 0.0 - landings * p.difference
        out["overruns_avoided_per_year_ci95"] = [0.0 - landings * p.difference_ci[1],
                                                 0.0 - landings * p.difference_ci[0]]
    return out


def _exposure(e: ExposureResult) -> dict[str, Any]:
    return {
        "landings_per_year": e.exposure.landings_per_year,
        "mix": dict(e.exposure.mix) if e.exposure.mix else None,
        "basis": e.basis,
        "p_per_landing": e.p_per_landing,
        "p_per_landing_ci95": list(e.p_per_landing_ci),
        **_yearly(e.yearly),
        "target_per_year": e.target_per_year,
        "target_status": e.target_status,
        "model": "yearly overruns Poisson with mean N p: P(at least one) = 1 - exp(-N p) (common practice, "
                 "no source)",
        "notes": list(e.notes),
    }


def study_record(r: StudyResult) -> dict[str, Any]:
    """Everything about a study, JSON-ready and strictly valid (no NaN or infinity)."""
    s = r.settings
    e = r.exposure
    landings = e.exposure.landings_per_year if e else None
    rec: dict[str, Any] = {
        "tool": "landrisk", "version": __version__, "caution": CAUTION,
        "study": r.name, "source": r.source,
        "scenario": r.base.name if r.base else None,
        "scenario_source": r.base.source if r.base else None,
        "seed": s.seed, "samples": s.samples, "method": s.method,
        "settings": {"min_events": s.min_events, "split": s.split, "subset_samples": s.subset_samples,
                     "subset_replicates": s.subset_replicates, "confidence": s.confidence,
                     "histogram_bin_m": s.bin_width_m},
        "method_rule": f"auto: Monte Carlo when it sees at least {s.min_events} overruns in {s.samples:,} "
                       "samples, subset simulation otherwise",
        "engine": r.engine, "workers": r.workers, "computed": r.computed, "reused_from_cache": r.reused,
        "seconds": r.seconds,
        "cases": [_case(c, e.per_case.get(c.name) if e else None) for c in r.cases],
        "comparisons": [_comparison(c, landings) for c in r.comparisons],
    }
    if e is not None:
        rec["exposure"] = _exposure(e)
    rec["study_text"] = r.text
    rec["scenario_text"] = r.base.text if r.base else None
    rec["inputs"] = dict(r.base.values) if r.base else {}
    rec["uncertain"] = dict(r.base_uncertain)  # the base scenario's; the cases override some parameters
    rec["overrides"] = []  # the base scenario has none; each case lists its own
    return json_safe(rec)


def study_table(r: StudyResult, units: str | None = None) -> pd.DataFrame:
    """One row per case: its overrides, method, P(overrun) with interval and CoV, percentiles (in the
    unit of the system ``units``, metres by default, named in the header), yearly figures."""
    import pandas as pd

    from landrisk.units import DisplayUnits

    du = DisplayUnits(units or "si")
    lu = du.unit("length")

    keys: list[str] = []
    for c in r.cases:
        keys += [k for k in c.overrides if k not in keys]
    e = r.exposure
    rows = []
    for c in r.cases:
        row: dict[str, Any] = {"case": c.name}
        row.update({k: (None if k not in c.overrides else str(c.overrides[k])) for k in keys})
        row.update({"method": c.method, "p_overrun": c.p_overrun, "p_overrun_ci95_lo": c.ci[0],
                    "p_overrun_ci95_hi": c.ci[1], "upper_bound_only": c.upper_bound_only, "cov": c.cov,
                    "mc_overruns": c.mc.events, "mc_samples": c.mc.n, "rare_calls": c.rare_calls,
                    "p_beyond_resa": c.p_beyond_resa.estimate})
        for p in c.percentiles:
            row[f"p{p.p:g} [{lu}]"] = du.length(p.value)
        row[f"percentile_error [{lu}]"] = du.length(c.percentile_error_m)
        if e is not None:
            y = e.per_case[c.name]
            row.update({"overruns_per_year": y.overruns_per_year,
                        "overruns_per_year_ci95_lo": y.overruns_per_year_ci[0],
                        "overruns_per_year_ci95_hi": y.overruns_per_year_ci[1],
                        "p_at_least_one_per_year": y.p_at_least_one,
                        "mean_years_between": y.mean_years_between})
        row["from_cache"] = c.cached
        rows.append(row)
    return pd.DataFrame(rows)


def _parquet(frame: pd.DataFrame, meta: dict[str, Any]) -> bytes:
    import pyarrow as pa
    import pyarrow.parquet as pq

    table = pa.Table.from_pandas(frame, preserve_index=False)
    table = table.replace_schema_metadata({**(table.schema.metadata or {}),
                                           b"landrisk": json.dumps(meta, default=str).encode()})
    buf = io.BytesIO()
    pq.write_table(table, buf)
    return buf.getvalue()


def write_study(r: StudyResult, folder: str | Path, *, force: bool = False, figures: bool = True,
                units: str | None = None, command: str | None = None) -> list[Path]:
    """study.json, study.csv, study.parquet and the figures (PNG and SVG) in ``folder`` (``units``: the
    distance columns of the tables in ``si`` or ``aviation`` units; the JSON stays SI)."""
    rec = study_record(r)
    frame = study_table(r, units)
    figs: dict[str, Callable[[Any], Any]] = {}
    if figures:
        from landrisk.plotting import study_figures

        figs = study_figures(r)
    rec["table_parquet"] = "study.parquet"
    meta = {k: rec[k] for k in ("tool", "version", "caution", "study", "source", "seed", "samples", "method")}
    written = write_result_set(folder, "study.json", rec, {"study.csv": frame}, figs, r,
                               inputs=rec["inputs"], force=force, command=command)
    written += write_files(Path(folder), {"study.parquet": _parquet(frame, meta)}, force=True)
    return written
