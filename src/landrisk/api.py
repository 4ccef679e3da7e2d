"""The high-level entry points: what the command line does, in a few lines from Python.

>>> import landrisk.api as lr
>>> scenario = lr.load()                      # the embedded, invented demo scenario
>>> result = lr.solve(scenario)               # one landing, every phase
>>> round(result.total_m)                     # doctest: +SKIP
947
>>> table = lr.solve_many(scenario, {"runway.braking_mu": [0.2, 0.3, 0.4]})   # a pandas DataFrame
>>> scenario, uncertain = lr.load_study()     # the demo with its uncertain inputs
>>> result = lr.assess(scenario, uncertain, samples=100_000, seed=1)
>>> lr.percentile_table(result)               # doctest: +SKIP
"""

from __future__ import annotations

import json
import warnings
from collections.abc import Callable, Iterable, Mapping
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np
from numpy.typing import ArrayLike

if TYPE_CHECKING:
    import pandas as pd

from landrisk import CAUTION, __version__
from landrisk.errors import LandriskWarning, SolveError
from landrisk.io import UncertainSet, load_scenario
from landrisk.io import load_study as _load_study
from landrisk.io.config import demo_text
from landrisk.io.output import comment_header, write_files, write_text_new
from landrisk.model import KEYS, LandingResult, Scenario, SingleLanding, solve_landings, solve_one
from landrisk.studies import (
    PHASES,
    Assessment,
    AssessSettings,
    Ranking,
    RankSettings,
    RareAssessment,
    RareSettings,
    ranking_record,
    rare_record,
    samples_frame_columns,
    summary_record,
)
from landrisk.studies import assess as _assess
from landrisk.studies import rank as _rank
from landrisk.studies import rare_assess as _rare_assess

__all__ = [
    "AssessSettings",
    "Assessment",
    "SingleLanding",
    "assess",
    "assessment_record",
    "load",
    "load_study",
    "percentile_table",
    "rank",
    "rank_record",
    "rank_table",
    "rare",
    "rare_full_record",
    "samples_table",
    "solve",
    "solve_many",
    "solve_record",
    "write_assessment",
    "write_ranking",
    "write_rare",
    "write_starter",
]


def load(path: str | Path | None = None, overrides: Iterable[str] = ()) -> Scenario:
    """Read a scenario file (``None``: the embedded demo) with ``KEY=VALUE`` overrides."""
    return load_scenario(path, overrides)


def load_study(
    path: str | Path | None = None, overrides: Iterable[str] = ()
) -> tuple[Scenario, UncertainSet]:
    """Read a scenario and its uncertain inputs (``None``: the embedded demo)."""
    return _load_study(path, overrides)


def solve(scenario: Scenario) -> SingleLanding:
    """The deterministic landing of ``scenario`` at its nominal inputs.

    Raises
    ------
    landrisk.errors.SolveError
        If lift exceeds weight at touchdown or the aircraft cannot stop.
    """
    case = scenario.case()
    try:
        res: LandingResult = solve_one(case)
    except SolveError as exc:
        raise SolveError(f"{scenario.source}: {exc}") from None
    out = {name: _scalar(getattr(res, name)) for name in SingleLanding.__dataclass_fields__
           if name not in ("scenario", "derived")}
    derived = {
        "density_kg_m3": _scalar(case.density),
        "rolling_mu": _scalar(case.rolling_mu),
        "braking_mu": _scalar(case.braking_mu),
        "flare_speed_ratio": _scalar(case.flare_speed_ratio),
        "slope_angle_rad": _scalar(case.slope_angle),
    }
    return SingleLanding(scenario=scenario, derived=derived, **out)


def _scalar(x: Any) -> Any:
    v = np.asarray(x).reshape(-1)[0]
    return bool(v) if v.dtype == bool else float(v)


def solve_many(scenario: Scenario, values: Mapping[str, ArrayLike]) -> pd.DataFrame:
    """Many landings of ``scenario`` with some keys replaced by arrays (one value per landing).

    Parameters
    ----------
    scenario : Scenario
        The base scenario.
    values : mapping
        Dotted key -> array of values in the key's unit (see ``landrisk.model.schema``).

    Returns
    -------
    pandas.DataFrame
        One row per landing: the varied inputs, then every result column of
        :class:`landrisk.model.LandingResult` (metres, m/s, seconds, flags).
    """
    import pandas as pd

    res = solve_landings(scenario.case(values))
    frame = pd.DataFrame({k: np.broadcast_to(np.asarray(v), (res.size,)) for k, v in values.items()})
    for name in LandingResult.__dataclass_fields__:
        frame[name] = getattr(res, name)
    return frame


def _scenario_provenance(s: Scenario) -> dict[str, Any]:
    """Tool, version, caution and where the scenario came from: the head of every record."""
    return {"tool": "landrisk", "version": __version__, "caution": CAUTION, "scenario": s.name,
            "source": s.source, "overrides": list(s.overrides)}


def solve_record(landing: SingleLanding) -> dict[str, Any]:
    """A JSON-ready record of one landing: results, the resolved inputs and the run's provenance."""
    return {
        **_scenario_provenance(landing.scenario),
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
        "input_units": _input_units(),
        "derived": dict(landing.derived),
    }


def _kt(speed_ms: float) -> float:
    from landrisk.units import convert

    return convert(speed_ms, "m/s", "kt")


def write_starter(path: str | Path, force: bool = False) -> Path:
    """Write a commented starter scenario (the invented demo, every key explained) to ``path``."""
    header = (
        "# Starter scenario written by `landrisk init`: a copy of the invented demo. Replace every value\n"
        "# with your own data; see the README for the meaning, unit and range of each key.\n"
    )
    return write_text_new(Path(path), header + demo_text(), force=force)


def assess(
    scenario: Scenario,
    uncertain: UncertainSet,
    *,
    samples: int = 100_000,
    seed: int = 1,
    sampler: str = "random",
    chunk: int = 1 << 16,
    keep_samples: bool = False,
    progress: Callable[[int, int], None] | None = None,
) -> Assessment:
    """Monte Carlo overrun assessment of ``scenario`` over its ``uncertain`` inputs.

    Returns the :class:`landrisk.studies.Assessment`; see :func:`percentile_table`,
    :func:`samples_table` and :func:`assessment_record` for pandas and JSON views of it.
    """
    for key in uncertain.fixed:
        warnings.warn(f"{key} is fixed by --set; its distribution is not used", LandriskWarning,
                      stacklevel=2)
    settings = AssessSettings(samples=samples, seed=seed, sampler=sampler, chunk=chunk,
                              keep_samples=keep_samples)
    return _assess(scenario, uncertain.problem(), settings, progress=progress,
                   record=uncertain.record())


def _input_units() -> dict[str, str]:
    return {k: spec.unit for k, spec in KEYS.items() if spec.kind == "quantity"}


def _provenance(a: Assessment) -> dict[str, Any]:
    return {**_scenario_provenance(a.scenario), "seed": a.settings.seed, "sampler": a.settings.sampler,
            "samples": a.settings.samples}


def assessment_record(a: Assessment) -> dict[str, Any]:
    """Everything about an assessment, JSON-ready: provenance, resolved inputs, results."""
    return {
        **_provenance(a),
        **summary_record(a),
        "inputs": dict(a.scenario.values),
        "input_units": _input_units(),
        "uncertain": dict(a.record),
        "scenario_text": a.scenario.text,
    }


def percentile_table(a: Assessment) -> pd.DataFrame:
    """Percentiles of every phase with their intervals: one row per (phase, percentile)."""
    import pandas as pd

    rows = []
    for name, label in PHASES.items():
        for p in a.percentiles[name]:
            rows.append({"phase": label, "percentile": p.p, "value_m": p.value, "ci95_lo_m": p.lo,
                         "ci95_hi_m": p.hi, "supported": p.supported})
    return pd.DataFrame(rows)


def samples_table(a: Assessment) -> pd.DataFrame:
    """Every sample's uncertain inputs (if kept) and its phase distances, as a DataFrame."""
    import pandas as pd

    return pd.DataFrame(dict(samples_frame_columns(a)))


def _figure_files(figures: Mapping[str, Callable[[Any], Any]], result: Any,
                  meta: dict[str, Any]) -> dict[str, bytes]:
    """``stem.png`` and ``stem.svg`` for each figure function, the run's record in their metadata."""
    from landrisk.plotting import figure_bytes

    return {f"{stem}.{fmt}": figure_bytes(make(result), fmt, meta)
            for stem, make in figures.items() for fmt in ("png", "svg")}


def write_assessment(
    a: Assessment, folder: str | Path, *, force: bool = False, figures: bool = True
) -> list[Path]:
    """Write summary.json, percentiles.csv, the figures (PNG and SVG) and, if kept, samples.csv.

    Every file records the tool version, the seed, the sampler, the sample count and the scenario.
    """
    record = assessment_record(a)
    header = comment_header({**_provenance(a), "inputs": dict(a.scenario.values),
                             "uncertain": record["uncertain"]})
    files: dict[str, str | bytes] = {
        "percentiles.csv": header + percentile_table(a).to_csv(index=False),
    }
    if figures:
        from landrisk.plotting import FIGURES

        files.update(_figure_files(FIGURES, a, {**_provenance(a), "inputs": dict(a.scenario.values)}))
    if a.inputs is not None:
        files["samples.csv"] = header + samples_table(a).to_csv(index=False)
    record["files"] = {"summary": "summary.json", **{
        name.rsplit(".", 1)[0] if name.endswith(".csv") else name: name for name in files}}
    files = {"summary.json": json.dumps(record, indent=2, default=str) + "\n", **files}
    return write_files(Path(folder), files, force=force)


def rank(
    scenario: Scenario,
    uncertain: UncertainSet,
    *,
    method: str = "pce",
    calls: int | None = None,
    order: int | None = None,
    seed: int = 1,
    mc_check: int = 100_000,
) -> Ranking:
    """Rank the uncertain inputs by Sobol indices (polynomial chaos or Monte Carlo); see studies.rank."""
    for key in uncertain.fixed:
        warnings.warn(f"{key} is fixed by --set; its distribution is not used", LandriskWarning,
                      stacklevel=2)
    settings = RankSettings(method=method, calls=calls, order=order, seed=seed, mc_check=mc_check)
    return _rank(scenario, uncertain.problem(), settings)


def _rank_provenance(r: Ranking) -> dict[str, Any]:
    return {**_scenario_provenance(r.scenario), "seed": r.settings.seed, "method": r.method}


def rank_record(r: Ranking) -> dict[str, Any]:
    """Everything about a ranking, JSON-ready: provenance, resolved inputs, results."""
    return {**_rank_provenance(r), **ranking_record(r), "inputs_used": dict(r.scenario.values),
            "scenario_text": r.scenario.text}


def rank_table(r: Ranking) -> pd.DataFrame:
    """One row per input: first-order and total index (with intervals for Monte Carlo) and swings."""
    import pandas as pd

    return pd.DataFrame([{"input": i.name, "first_order": i.first, "total": i.total,
                          "first_order_ci95_lo": i.first_ci[0] if i.first_ci else None,
                          "first_order_ci95_hi": i.first_ci[1] if i.first_ci else None,
                          "total_ci95_lo": i.total_ci[0] if i.total_ci else None,
                          "total_ci95_hi": i.total_ci[1] if i.total_ci else None,
                          "low_value": i.p5, "high_value": i.p95, "swing_total_m": i.swing_total_m,
                          "swing_margin_m": i.swing_margin_m, "discrete": i.discrete} for i in r.inputs])


def write_ranking(r: Ranking, folder: str | Path, *, force: bool = False) -> list[Path]:
    """Write ranking.json, indices.csv and the index and tornado figures (PNG and SVG)."""
    from landrisk.plotting import RANK_FIGURES

    record = rank_record(r)
    header = comment_header({**_rank_provenance(r), "inputs": dict(r.scenario.values)})
    files: dict[str, str | bytes] = {"indices.csv": header + rank_table(r).to_csv(index=False)}
    figures = {k: f for k, f in RANK_FIGURES.items() if r.method == "pce" or k != "surrogate-exceedance"}
    files.update(_figure_files(figures, r, {**_rank_provenance(r), "inputs": dict(r.scenario.values)}))
    record["files"] = sorted(["ranking.json", *files])
    files = {"ranking.json": json.dumps(record, indent=2, default=str) + "\n", **files}
    return write_files(Path(folder), files, force=force)


def rare(
    scenario: Scenario,
    uncertain: UncertainSet,
    *,
    method: str = "importance",
    seed: int = 1,
    target_cov: float = 0.1,
    risk_curve: bool = True,
) -> RareAssessment:
    """P(overrun) by FORM, importance sampling or subset simulation; see studies.rare."""
    for key in uncertain.fixed:
        warnings.warn(f"{key} is fixed by --set; its distribution is not used", LandriskWarning,
                      stacklevel=2)
    settings = RareSettings(method=method, seed=seed, target_cov=target_cov, risk_curve=risk_curve)
    return _rare_assess(scenario, uncertain.problem(), settings)


def rare_full_record(r: RareAssessment) -> dict[str, Any]:
    """Everything about a rare-event assessment, JSON-ready: provenance, inputs, results."""
    s = r.scenario
    rec = rare_record(r)
    # The assess keys that have a meaning here; percentiles and moments need plain Monte Carlo.
    assess_keys = {"samples": rec["model_calls"], "sampler": "standard normal space, seeded",
                   "overruns": None, "percentiles_m": {}, "mean_m": None, "sd_m": None}
    return {**_scenario_provenance(s), **assess_keys, **rec, "inputs": dict(s.values),
            "input_units": _input_units()}


def write_rare(r: RareAssessment, folder: str | Path, *, force: bool = False) -> list[Path]:
    """Write summary.json and, with a risk curve, risk-curve.csv and its figure (PNG and SVG)."""
    import pandas as pd

    record = rare_full_record(r)
    provenance = {k: record[k] for k in ("tool", "version", "caution", "scenario", "source", "overrides",
                                          "method", "seed")}
    files: dict[str, str | bytes] = {}
    if r.risk_curve:
        from landrisk.plotting import risk_curve_figure

        rc = r.risk_curve
        table = pd.DataFrame({"lda_m": rc["lda_m"], "p_overrun_subset": rc["p_subset"],
                              "p_overrun_mc": rc["p_mc"]})
        files["risk-curve.csv"] = comment_header({**provenance, "inputs": dict(r.scenario.values)}) + \
            table.to_csv(index=False)
        files.update(_figure_files({"risk-curve": risk_curve_figure}, r, provenance))
    record["files"] = sorted(["summary.json", *files])
    files = {"summary.json": json.dumps(record, indent=2, default=str) + "\n", **files}
    return write_files(Path(folder), files, force=force)
