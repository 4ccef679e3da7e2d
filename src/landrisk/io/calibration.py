"""Reading what a calibration needs: the ``[calibration]`` table of a scenario and a reference CSV.

```toml
[calibration."aircraft.cd0"]            # a scenario key to fit, with its bounds (in the key's unit)
lower = 0.03
upper = 0.20
[calibration."aircraft.thrust.reverse.scale"]   # a factor on the reverse-thrust law (1: as written)
lower = 0.5
upper = 1.5
[calibration."runway.braking_mu.code_5"]        # an effective braking mu for the rows with code 5
lower = 0.05
upper = 0.6
```

A parameter starts from the scenario's value (a scale from 1, a per-code mu from the condition-code
table) unless ``start`` is given. The reference CSV (``#`` lines are comments) has one row per reference
landing; each header names a scenario key and the unit of its numbers in brackets
(``aircraft.mass [lb]``, ``conditions.headwind [kt]``, ``runway.condition_code``), and the column
``reference_distance [ft]`` holds the reference total distance from the screen height; an optional
``tolerance [ft]`` column gives each row's standard uncertainty. Keys not in the CSV keep the scenario's
value. Every problem is a one-line :class:`~landrisk.errors.ConfigError` naming the file, the row, the
column and the value.
"""

from __future__ import annotations

import csv
import math
import re
import tomllib
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np
from numpy.typing import NDArray

from landrisk.errors import ConfigError
from landrisk.model import KEYS, Scenario
from landrisk.physics import CONDITION_CODE_TABLE
from landrisk.units import UnitError, to_unit

__all__ = [
    "CODE_MU_PREFIX",
    "SCALE_KEYS",
    "CalibrationParameterSpec",
    "ReferenceTable",
    "calibration_parameters",
    "read_reference",
]

#: Pseudo-keys: factors on a thrust law (1 = the law as written in the scenario).
SCALE_KEYS = ("aircraft.thrust.reverse.scale", "aircraft.thrust.idle.scale")
#: ``runway.braking_mu.code_N``: an effective braking mu for the reference rows with condition code N.
CODE_MU_PREFIX = "runway.braking_mu.code_"
#: Scenario sections whose numeric keys may be fitted (conditions are what the reference rows vary).
_FITTABLE_SECTIONS = ("aircraft.", "procedure.")
_FITTABLE_RUNWAY = ("runway.braking_mu", "runway.rolling_mu")
_REFERENCE = "reference_distance"
_TOLERANCE = "tolerance"
_HEADER = re.compile(r"^\s*([A-Za-z_][\w.]*)\s*(?:\[([^\]]*)\])?\s*$")


@dataclass(frozen=True)
class CalibrationParameterSpec:
    """One parameter to fit: its name, bounds and starting value, in the key's unit."""

    name: str
    lower: float
    upper: float
    start: float
    unit: str


@dataclass(frozen=True)
class ReferenceTable:
    """The reference landings: condition columns in the keys' units, distances in metres.

    Attributes
    ----------
    columns : dict
        Dotted scenario key -> array over rows, in the key's schema unit.
    reference_m : numpy.ndarray
        Reference total distance from the screen height [m].
    tolerance_m : numpy.ndarray or None
        Standard uncertainty of each reference distance [m]; None when the CSV has no tolerance column.
    lines : tuple of int
        Line number of each row in the file (for messages).
    source : str
        The file's path.
    """

    columns: dict[str, NDArray[Any]]
    reference_m: NDArray[np.float64]
    tolerance_m: NDArray[np.float64] | None
    lines: tuple[int, ...]
    source: str

    @property
    def size(self) -> int:
        """Number of reference rows."""
        return int(self.reference_m.size)


def _unit_of(name: str) -> str:
    if name in SCALE_KEYS or name.startswith(CODE_MU_PREFIX):
        return ""
    return KEYS[name].unit


def _fittable(name: str) -> bool:
    if name in SCALE_KEYS:
        return True
    if name.startswith(CODE_MU_PREFIX):
        code = name[len(CODE_MU_PREFIX):]
        return code.isdigit() and int(code) in CONDITION_CODE_TABLE
    spec = KEYS.get(name)
    return spec is not None and spec.kind == "quantity" and (
        name.startswith(_FITTABLE_SECTIONS) or name in _FITTABLE_RUNWAY)


def _start_of(name: str, scenario: Scenario) -> float | None:
    if name in SCALE_KEYS:
        return 1.0
    if name.startswith(CODE_MU_PREFIX):
        return CONDITION_CODE_TABLE[int(name[len(CODE_MU_PREFIX):])][2]
    value = scenario.values[name]
    return None if value is None else float(value)


def calibration_parameters(
    text: str, source: str, scenario: Scenario
) -> tuple[CalibrationParameterSpec, ...]:
    """The parameters of the ``[calibration]`` table of the scenario file ``text``."""
    try:
        raw = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise ConfigError(f"not valid TOML ({exc})", file=source) from None
    table = raw.get("calibration")
    if not isinstance(table, dict) or not table:
        raise ConfigError('has no [calibration."<key>"] tables naming the parameters to fit', file=source,
                          allowed='e.g. [calibration."aircraft.cd0"] with lower and upper')
    out = []
    for name, body in table.items():
        where = f'calibration."{name}"'
        if not _fittable(name):
            raise ConfigError("cannot be calibrated", key=where, file=source,
                              allowed="a numeric aircraft. or procedure. key, runway.braking_mu, "
                              "runway.rolling_mu, " + ", ".join(SCALE_KEYS) + f" or {CODE_MU_PREFIX}0..6")
        if not isinstance(body, dict):
            raise ConfigError("must be a table with lower and upper", key=where, value=body, file=source)
        unknown = set(body) - {"lower", "upper", "start", "source"}
        if unknown:
            bad = sorted(unknown)[0]
            raise ConfigError("unknown key", key=f"{where}.{bad}", value=body[bad], file=source,
                              allowed="lower, upper, start, source")
        unit = _unit_of(name)
        bounds = {}
        for k in ("lower", "upper", "start"):
            if k not in body:
                continue
            try:
                bounds[k] = to_unit(body[k], unit)
            except UnitError as exc:
                raise ConfigError(str(exc), key=f"{where}.{k}", value=body[k], file=source) from None
        if "lower" not in bounds or "upper" not in bounds or not bounds["lower"] < bounds["upper"]:
            shown = {k: body.get(k) for k in ("lower", "upper")}
            raise ConfigError("needs lower < upper", key=where, value=shown, file=source)
        spec = KEYS.get(name)
        if spec is not None and not (spec.contains(bounds["lower"]) and spec.contains(bounds["upper"])):
            raise ConfigError("the bounds leave the key's allowed range", key=where, file=source,
                              value=[body["lower"], body["upper"]], allowed=spec.allowed())
        start = bounds.get("start", _start_of(name, scenario))
        if start is None:
            raise ConfigError("the scenario gives no value to start from; give start", key=where, file=source)
        if not bounds["lower"] <= start <= bounds["upper"]:
            raise ConfigError(f"the starting value {start:g} lies outside [lower, upper]", key=where,
                              file=source, value=[body["lower"], body["upper"]])
        out.append(CalibrationParameterSpec(name, bounds["lower"], bounds["upper"], float(start), unit))
    return tuple(out)


def _header(name: str, source: str) -> tuple[str, str | None]:
    m = _HEADER.match(name)
    if m is None:
        raise ConfigError("a header must be a key with its unit in brackets", key=f"column {name!r}",
                          file=source, allowed="e.g. 'aircraft.mass [lb]' or 'runway.condition_code'")
    return m.group(1), (m.group(2).strip() if m.group(2) is not None else None)


def read_reference(path: str | Path) -> ReferenceTable:
    """Read the reference CSV at ``path`` (see the module docstring)."""
    p = Path(path)
    source = str(p)
    try:
        text = p.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise ConfigError("no such file", file=source) from None
    except (OSError, UnicodeDecodeError) as exc:
        raise ConfigError(f"cannot read the file ({exc})", file=source) from None
    numbered = [(i + 1, line) for i, line in enumerate(text.splitlines())
                if line.strip() and not line.lstrip().startswith("#")]
    if len(numbered) < 2:
        raise ConfigError("needs a header line and at least one row", file=source)
    rows = list(csv.reader(line for _, line in numbered))
    header, body = rows[0], rows[1:]
    specs: list[tuple[str, str, str]] = []  # (key, unit written, column label)
    for label in header:
        key, unit = _header(label, source)
        if key in (_REFERENCE, _TOLERANCE):
            if unit is None:
                raise ConfigError("needs its unit in brackets", key=f"column {label!r}", file=source,
                                  allowed=f"e.g. '{key} [ft]'")
        elif key not in KEYS or not KEYS[key].scalar:
            raise ConfigError("is not a numeric scenario key", key=f"column {label!r}", file=source,
                              allowed="a key such as conditions.headwind, or reference_distance, tolerance")
        elif KEYS[key].kind == "quantity" and unit is None and KEYS[key].unit:
            raise ConfigError("needs its unit in brackets", key=f"column {label!r}", file=source,
                              allowed=f"e.g. '{key} [{KEYS[key].unit}]'")
        specs.append((key, unit or "", label))
    names = [s[0] for s in specs]
    if _REFERENCE not in names:
        raise ConfigError("has no reference_distance column", file=source,
                          allowed="a column 'reference_distance [ft]' (or another length unit)")
    if len(set(names)) != len(names):
        raise ConfigError("names a column twice", file=source, value=header)
    values: dict[str, list[Any]] = {n: [] for n in names}
    for (line, _), row in zip(numbered[1:], body, strict=True):
        if len(row) != len(specs):
            raise ConfigError(f"row {line}: has {len(row)} fields, the header {len(specs)}", file=source)
        for (key, unit, label), cell in zip(specs, row, strict=True):
            values[key].append(_cell(key, unit, label, cell.strip(), line, source))
    reference = np.array(values.pop(_REFERENCE), dtype=float)
    tol = values.pop(_TOLERANCE, None)
    tolerance = None if tol is None else np.array(tol, dtype=float)
    columns = {k: np.asarray(v) for k, v in values.items()}
    return ReferenceTable(columns, reference, tolerance, tuple(n for n, _ in numbered[1:]), source)


def _cell(key: str, unit: str, label: str, cell: str, line: int, source: str) -> Any:
    where = f"row {line}, column {label!r}"
    if key in (_REFERENCE, _TOLERANCE):
        try:
            x = to_unit(f"{cell} {unit}", "m")
        except UnitError as exc:
            raise ConfigError(str(exc), key=where, value=cell, file=source) from None
        if not (x > 0 and math.isfinite(x)):
            raise ConfigError("must be a positive length", key=where, value=cell, file=source,
                              allowed="(0, inf)")
        return x
    spec = KEYS[key]
    if spec.kind == "bool":
        if cell.lower() not in ("true", "false"):
            raise ConfigError("must be true or false", key=where, value=cell, file=source)
        return cell.lower() == "true"
    if spec.kind == "int":
        if not re.fullmatch(r"[+-]?\d+", cell) or not spec.contains(int(cell)):
            raise ConfigError("must be a whole number in range", key=where, value=cell, file=source,
                              allowed=spec.allowed())
        return int(cell)
    try:
        x = to_unit(f"{cell} {unit}".strip(), spec.unit, difference=key == "conditions.isa_deviation")
    except UnitError as exc:
        raise ConfigError(str(exc), key=where, value=cell, file=source) from None
    if not spec.contains(x):
        raise ConfigError(f"outside the allowed range (= {x:g} {spec.unit})", key=where, value=cell,
                          file=source, allowed=spec.allowed())
    return x
