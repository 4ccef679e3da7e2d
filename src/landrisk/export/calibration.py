"""A calibration as a record (JSON), a residual table, a calibrated scenario file, and a results folder.

The calibrated scenario is the scenario file as written with each fitted value replaced in place (its
unit written out) under a ``# source:`` line naming the reference table, the standard error and the value
it replaces; a fitted thrust scale rewrites its thrust table as scaled coefficients. Optionally the fitted
parameters are appended as uncertain inputs: normal distributions (mean the fitted value, sd its standard
error, truncated to the calibration bounds) with the estimated correlation as a Gaussian copula. The
file's ``[[correlation]]`` tables take Spearman coefficients, so the normal-space (Pearson) correlation
rho_N of the estimate is written as rho_S = (6 / pi) arcsin(rho_N / 2), the inverse of
rho_N = 2 sin(pi rho_S / 6) (Kruskal, W. H., *J. Am. Stat. Assoc.* 53:814, 1958). The written file is
read back by the scenario reader before it is returned.
"""

from __future__ import annotations

import math
import re
import tomllib
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from landrisk.errors import ConfigError, LandriskError
from landrisk.export.records import provenance
from landrisk.export.writers import write_result_set
from landrisk.io import parse_study
from landrisk.model import KEYS
from landrisk.studies.calibrate import CODE_MU_PREFIX, SCALE_KEYS, Calibration

if TYPE_CHECKING:
    import pandas as pd

__all__ = ["calibrated_scenario_text", "calibration_record", "residual_table", "write_calibration"]

_HEADER_LINE = re.compile(r'^\s*\[\[?\s*([A-Za-z_"][\w."\- ]*?)\s*\]\]?\s*(#.*)?$')


def _jsonable(x: float | None) -> float | None:
    return None if x is None or not math.isfinite(x) else float(x)


def calibration_record(c: Calibration) -> dict[str, Any]:
    """JSON-ready record: ``parameters`` (name, value, standard_error, ...), ``correlation``,
    ``residuals`` (per reference row), ``warnings``, and how the fit was weighted."""
    names = [p.name for p in c.parameters]
    return {
        **provenance(c.scenario, method="weighted least squares (scipy.optimize.least_squares)"),
        "reference": c.reference_source,
        "rows": int(c.reference_m.size),
        "parameters": [
            {"name": p.name, "unit": p.unit, "value": p.value, "standard_error": _jsonable(p.standard_error),
             "start": p.start, "lower": p.lower, "upper": p.upper, "at_bound": p.at_bound}
            for p in c.parameters
        ],
        "correlation": {"names": names, "matrix": np.round(c.correlation, 6).tolist()},
        "residuals": [
            {"row": line, **{k: _plain(v[i]) for k, v in c.conditions.items()},
             "reference_m": float(c.reference_m[i]), "model_m": float(c.model_m[i]),
             "residual_m": float(c.residual_m[i]), "sigma_m": float(c.sigma_m[i]),
             "normalized": float(c.residual_m[i] / c.sigma_m[i])}
            for i, line in enumerate(c.lines)
        ],
        "rms_residual_m": float(np.sqrt(np.mean(c.residual_m**2))),
        "rms_residual_at_start_m": float(np.sqrt(np.mean((c.start_model_m - c.reference_m) ** 2))),
        "weights": ("1 / tolerance^2 from the reference table; covariance taken as is"
                    if c.sigma_from == "tolerance" else
                    "equal (no tolerance column); covariance scaled by the residual variance"),
        "residual_sd": c.residual_sd,
        "solver_calls": c.solver_calls,
        "optimizer": c.optimizer_message,
        "warnings": list(c.warnings),
    }


def _plain(v: Any) -> Any:
    x = np.asarray(v).item()
    return x


def residual_table(c: Calibration) -> pd.DataFrame:
    """One row per reference row: its conditions (keys' units), reference, model and residual [m]."""
    import pandas as pd

    frame = pd.DataFrame({"row": list(c.lines), **{k: np.asarray(v) for k, v in c.conditions.items()}})
    frame["reference_m"] = c.reference_m
    frame["model_m"] = c.model_m
    frame["residual_m"] = c.residual_m
    frame["sigma_m"] = c.sigma_m
    frame["model_at_start_m"] = c.start_model_m
    return frame


def _quantity(key: str, value: float) -> str:
    unit = KEYS[key].unit
    return f'"{value:.8g} {unit}"' if unit else f"{value:.8g}"


def _sections(lines: list[str]) -> list[tuple[str, int, int]]:
    """(table name, header line index, end index) of every table of the file; '' for the top."""
    heads = [(i, m.group(1).replace('"', "").replace(" ", "")) for i, line in enumerate(lines)
             if (m := _HEADER_LINE.match(line))]
    out = [("", -1, heads[0][0] if heads else len(lines))]
    for k, (i, name) in enumerate(heads):
        out.append((name, i, heads[k + 1][0] if k + 1 < len(heads) else len(lines)))
    return out


def _source_line(c: Calibration, name: str) -> str:
    p = next(q for q in c.parameters if q.name == name)
    se = "not determined (flat direction)" if p.standard_error is None else f"{p.standard_error:.3g}"
    return (f"# source: landrisk calibrate, fitted to {c.reference_source} ({c.reference_m.size} rows): "
            f"{name} = {p.value:.6g}, standard error {se}; was {p.start:.6g}")


def _set_value(lines: list[str], section: str, name: str, text: str, source: str) -> None:
    """Replace ``name = ...`` in ``[section]`` (or add it under the header), the source line above."""
    pattern = re.compile(rf"^\s*{re.escape(name)}\s*=")
    for sec, head, end in _sections(lines):
        if sec != section:
            continue
        for i in range(head + 1, end):
            if pattern.match(lines[i]):
                lines[i:i + 1] = [source, f"{name} = {text}"]
                return
        lines[head + 1:head + 1] = [source, f"{name} = {text}"]
        return
    lines.extend(["", f"[{section}]", source, f"{name} = {text}"])


def _set_thrust(lines: list[str], setting: str, c: Calibration, scale_name: str) -> None:
    section = f"aircraft.thrust.{setting}"
    keys = SCALE_KEYS[scale_name]
    values = c.scenario_values()
    body = [_source_line(c, scale_name) + " (the thrust law scaled by it)"]
    body += [f"{k.rsplit('.', 1)[1]} = {_quantity(k, values[k])}" for k in keys]
    for sec, head, end in _sections(lines):
        if sec == section:
            lines[head + 1:end] = [*body, ""]
            return
    lines.extend(["", f"[{section}]", *body])


def calibrated_scenario_text(c: Calibration, *, uncertain: bool = False) -> str:
    """The scenario file with the fitted values in place (see the module docstring).

    Parameters
    ----------
    uncertain : bool
        Also append the fitted scenario keys as correlated normal uncertain inputs (those not already
        uncertain in the file and with a standard error).
    """
    text = c.scenario.text
    if not text:
        raise LandriskError(f"{c.scenario.source}: the scenario has no file text to write a calibrated "
                            "copy of")
    lines = text.splitlines()
    lines[:0] = [f"# Calibrated by landrisk calibrate against {c.reference_source}; fitted values are marked "
                 "with a source line.", f"# {c.scenario.source} is the scenario this copy was made from."]
    codes = []
    for p in c.parameters:
        if p.name in SCALE_KEYS:
            _set_thrust(lines, p.name.split(".")[2], c, p.name)
        elif p.name.startswith(CODE_MU_PREFIX):
            codes.append(p)
        else:
            section, _, name = p.name.rpartition(".")
            _set_value(lines, section, name, _quantity(p.name, p.value), _source_line(c, p.name))
    if codes:
        lines += ["", "# Effective braking coefficients per runway condition code, fitted to the reference "
                  "table",
                  "# (not scenario keys: use one with --set runway.braking_mu=VALUE for that condition):"]
        lines += [_source_line(c, p.name).replace("# source:", "#  ") for p in codes]
    if uncertain:
        lines += _uncertain_block(c)
    out = "\n".join(lines) + "\n"
    try:
        parse_study(out, f"calibrated copy of {c.scenario.source}")
    except ConfigError as exc:
        raise LandriskError(f"the calibrated scenario is not valid ({exc}); the fitted values may clash with "
                            "the file's other keys") from None
    return out


def _uncertain_block(c: Calibration) -> list[str]:
    already = set(tomllib.loads(c.scenario.text).get("uncertain", {}))
    chosen = [(j, p) for j, p in enumerate(c.parameters)
              if p.name in KEYS and p.standard_error is not None and p.standard_error > 0]
    out = ["", "# The fitted parameters as uncertain inputs: normal (the fit's value and standard error), "
           "truncated to the", "# calibration bounds, with the fit's correlation as a Gaussian copula "
           "(Spearman rho_S = (6/pi) asin(rho_N/2))."]
    kept = []
    for j, p in chosen:
        if p.name in already:
            out.append(f"# {p.name} is already an uncertain input of the file; its fitted distribution is "
                       "not added")
            continue
        kept.append((j, p))
        out += [f'[uncertain."{p.name}"]', 'distribution = "normal"', f"mean = {_quantity(p.name, p.value)}",
                f"sd = {_quantity(p.name, p.standard_error or 0.0)}", f"lower = {_quantity(p.name, p.lower)}",
                f"upper = {_quantity(p.name, p.upper)}",
                f'source = "landrisk calibrate against {c.reference_source}: value and standard error of '
                'the fit"',
                ""]
    for a, (i, p) in enumerate(kept):
        for j, q in kept[a + 1:]:
            rho_n = float(c.correlation[i, j])
            if abs(rho_n) < 1e-6:
                continue
            rho_s = 6.0 / math.pi * math.asin(rho_n / 2.0)
            out += ["[[correlation]]", f'between = ["{p.name}", "{q.name}"]', f"spearman = {rho_s:.6f}",
                    f'source = "landrisk calibrate: estimated correlation {rho_n:+.4f} (normal space)"', ""]
    return out


def write_calibration(c: Calibration, folder: str | Path, *, force: bool = False, uncertain: bool = False,
                      figures: bool = True) -> list[Path]:
    """calibration.json, residuals.csv, calibrated.toml and the residual figure (PNG and SVG)."""
    from landrisk.io.output import write_files

    figs = {}
    if figures:
        from landrisk.plotting import calibration_residuals_figure

        figs["calibration-residuals"] = calibration_residuals_figure
    toml_text = calibrated_scenario_text(c, uncertain=uncertain)
    target = Path(folder) / "calibrated.toml"
    if target.exists() and not force:
        raise ConfigError("the file exists; use --force to replace it", file=str(target))
    written = write_result_set(folder, "calibration.json", calibration_record(c),
                               {"residuals.csv": residual_table(c)}, figs, c, inputs=c.scenario.values,
                               force=force)
    return [*written, *write_files(Path(folder), {"calibrated.toml": toml_text}, force=True)]
