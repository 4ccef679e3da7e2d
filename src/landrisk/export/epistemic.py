"""The epistemic study as a record (JSON), a table of its outer draws, and files."""

from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from landrisk.export.records import provenance
from landrisk.export.writers import write_result_set
from landrisk.studies.epistemic import EpistemicAssessment

if TYPE_CHECKING:
    import pandas as pd

__all__ = ["epistemic_record", "epistemic_table", "write_epistemic"]


def epistemic_record(e: EpistemicAssessment) -> dict[str, Any]:
    """``median``, ``upper`` (at ``upper_level``) and ``drivers`` of P(overrun) over the epistemic
    parameters, with the order-statistic intervals of both quantiles over the outer draws, the
    estimator's sampling interval at the nominal parameters apart, and the cost in solver calls."""
    r = e.result
    upper_value = float(np.quantile(r.probability, r.upper_level))
    return {
        "median": float(np.quantile(r.probability, 0.5)),
        "median_interval": [r.median.lo, r.median.hi] if r.median.supported else None,
        "upper": upper_value,
        "upper_level": r.upper_level,
        "upper_interval": [r.upper.lo, r.upper.hi] if r.upper.supported else None,
        "statement": f"P(overrun) <= {upper_value:.2e} with {100 * r.upper_level:g} % confidence in the "
                     "epistemic parameters",
        "drivers": [{"name": n, "src2_log10_p": s, "spearman_log10_p": rho} for n, s, rho in r.drivers],
        "parameters": [{"name": p.name, "distribution": p.distribution.describe(), "source": p.source}
                       for p in r.parameters],
        "nominal": {"probability": r.nominal_probability, "sampling_interval": list(r.nominal_interval)},
        "method": r.method,
        "outer": r.outer,
        "inner_samples": r.inner_samples,
        "nested_draws": int(r.nested.sum()),
        "min_effective_sample_size": float(r.ess.min()),
        "solver_calls": r.solver_calls,
        "confidence": r.confidence,
        "notes": list(r.notes),
    }


def epistemic_table(e: EpistemicAssessment) -> pd.DataFrame:
    """One row per outer draw: the parameters' values, P(overrun), its sampling interval, the effective
    sample size and whether the draw was estimated by a nested run."""
    import pandas as pd

    r = e.result
    frame = pd.DataFrame({p.name: r.theta[:, j] for j, p in enumerate(r.parameters)})
    frame["p_overrun"] = r.probability
    frame["sampling_lo"] = r.sampling_lo
    frame["sampling_hi"] = r.sampling_hi
    frame["effective_sample_size"] = r.ess
    frame["nested"] = r.nested
    return frame


def write_epistemic(e: EpistemicAssessment, folder: str | Path, *, force: bool = False,
                    figures: bool = True) -> list[Path]:
    """epistemic.json, epistemic.csv and the figure of P(overrun) over the epistemic parameters."""
    figs = {}
    if figures:
        from landrisk.plotting import epistemic_figure

        figs["epistemic"] = epistemic_figure
    record = {**provenance(e.scenario, seed=e.settings.seed, method=f"epistemic ({e.result.method})"),
              "epistemic": epistemic_record(e)}
    return write_result_set(folder, "epistemic.json", record, {"epistemic.csv": epistemic_table(e)}, figs, e,
                            inputs=e.scenario.values, force=force)
