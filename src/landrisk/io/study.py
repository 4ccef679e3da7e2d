"""Reading a study file (TOML): one base scenario, its cases, a grid, comparisons and the exposure.

```toml
[study]
name = "two runways"
scenario = "demo.toml"           # the base scenario, relative to this file ("<demo>": the embedded demo)
samples = 20000                  # Monte Carlo samples per case
seed = 1
method = "auto"                  # auto, mc or subset
min_events = 50                  # auto: Monte Carlo when it sees at least this many overruns

[[case]]                         # a name and overrides of any key of the scenario
name = "aim"
'uncertain."procedure.touchdown_distance".median' = "380 m"   # a parameter of an uncertain input

[grid]                           # the product of value lists, crossed with every [[case]]
"runway.lda" = ["1800 m", "2100 m"]
"runway.condition_code" = [6, 5, 3]

[[comparison]]
baseline = "none"
alternative = "aim"

[exposure]
landings_per_year = 30000
target_per_year = 0.01           # target level of safety, or target_per_landing
mix = { "none" = 0.8, "aim" = 0.2 }   # share of the landings in each case (optional)
```

Every problem is a :class:`~landrisk.errors.ConfigError` naming the study file, the key, the value and
what is allowed; a case whose overrides the scenario reader refuses names the case too.
"""

from __future__ import annotations

import itertools
import json
import math
import os
import pickle
import tomllib
from collections.abc import Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from landrisk.errors import ConfigError
from landrisk.io.config import DEMO_SOURCE, demo_text, parse_study
from landrisk.io.uncertain import UncertainSet
from landrisk.model import KEYS, Scenario

__all__ = ["CaseCache", "CaseSpec", "ComparisonSpec", "ExposureSpec", "StudySpec", "format_override",
           "load_study_file", "parse_study_file", "resolve_case"]

_SECTIONS = ("study", "case", "grid", "comparison", "exposure")
_STUDY_KEYS = ("name", "description", "scenario", "samples", "seed", "method", "min_events",
               "subset_samples", "split")
_METHODS = ("auto", "mc", "subset")
_EXPOSURE_KEYS = ("landings_per_year", "target_per_year", "target_per_landing", "mix", "source")
#: Path of an override: (key,) for a scenario key, ("uncertain", key, parameter) or ("uncertain", key).
OverridePath = tuple[str, ...]


@dataclass(frozen=True)
class CaseSpec:
    """One case: its name, the [[case]] it came from ("" for a grid alone) and its overrides in order."""

    name: str
    group: str
    overrides: tuple[tuple[OverridePath, Any], ...]

    def written(self) -> dict[str, Any]:
        """The overrides as written (dotted text -> value)."""
        return {format_override(p): v for p, v in self.overrides}


@dataclass(frozen=True)
class ComparisonSpec:
    baseline: str
    alternative: str


@dataclass(frozen=True)
class ExposureSpec:
    landings_per_year: float
    mix: dict[str, float] | None
    target_per_year: float | None
    target_per_landing: float | None
    source: str


@dataclass(frozen=True)
class StudySpec:
    """A checked study file."""

    name: str
    description: str
    source: str
    text: str
    scenario_source: str
    scenario_text: str
    scenario_dir: Path | None
    samples: int
    seed: int
    method: str
    min_events: int
    subset_samples: int
    split: int
    cases: tuple[CaseSpec, ...]
    comparisons: tuple[ComparisonSpec, ...]
    exposure: ExposureSpec | None


def format_override(path: OverridePath) -> str:
    """``runway.lda`` or ``uncertain."runway.braking_mu".mode``."""
    if path[0] == "uncertain":
        return ".".join(["uncertain", f'"{path[1]}"', *path[2:]])
    return path[0]


def _override_path(text: str, file: str, where: str) -> OverridePath:
    """Split a written override key into its path, checking the scenario key it names."""
    if text.startswith("uncertain."):
        rest = text[len("uncertain."):]
        if rest.startswith('"'):
            key, sep, tail = rest[1:].partition('"')
            if not sep:
                raise ConfigError("unclosed quote", key=f"{where}.{text}", file=file,
                                  allowed='uncertain."<key>".<parameter>')
            params = tuple(p for p in tail.split(".") if p)
        else:
            key, params = rest, ()
        if key not in KEYS:
            raise ConfigError("unknown scenario key", key=f"{where}.{text}", value=key, file=file,
                              allowed='uncertain."<key>".<parameter> with a key of the scenario')
        if len(params) > 1:
            raise ConfigError("too many parts", key=f"{where}.{text}", file=file,
                              allowed='uncertain."<key>".<parameter>')
        return ("uncertain", key, *params)
    if text not in KEYS:
        import difflib

        close = difflib.get_close_matches(text, list(KEYS), n=1)
        hint = f"; did you mean {close[0]!r}?" if close else ""
        raise ConfigError("unknown key" + hint, key=f"{where}.{text}", file=file,
                          allowed='a scenario key, e.g. "runway.lda", or uncertain."<key>".<parameter>')
    return (text,)


def _flat_overrides(table: Mapping[str, Any], file: str, where: str) -> list[tuple[OverridePath, Any]]:
    """Overrides written as quoted dotted keys or as nested tables (runway.lda = ... in TOML)."""
    out: list[tuple[OverridePath, Any]] = []

    def walk(prefix: str, node: Any) -> None:
        if prefix.startswith("uncertain.") and isinstance(node, dict) and prefix.count('"') == 2 \
                and prefix.endswith('"'):
            for k, v in node.items():
                walk(f"{prefix}.{k}", v)
            return
        if prefix == "uncertain" and isinstance(node, dict):
            for k, v in node.items():
                walk(f'uncertain."{k}"', v)
            return
        if isinstance(node, dict) and prefix.split(".")[0] in ("aircraft", "conditions", "runway",
                                                                 "procedure", "scenario") \
                and prefix not in KEYS:
            for k, v in node.items():
                walk(f"{prefix}.{k}", v)
            return
        out.append((_override_path(prefix, file, where), node))

    for key, value in table.items():
        walk(key, value)
    return out


def _int(body: Mapping[str, Any], key: str, default: int, lo: int, file: str) -> int:
    v = body.get(key, default)
    if isinstance(v, bool) or not isinstance(v, int) or v < lo:
        raise ConfigError("must be a whole number", key=f"study.{key}", value=v, file=file,
                          allowed=f">= {lo}")
    return v


def _positive(body: Mapping[str, Any], key: str, file: str, *, upper: float | None = None) -> float:
    v = body[key]
    if isinstance(v, bool) or not isinstance(v, int | float) or not math.isfinite(v) or v <= 0 \
            or (upper is not None and v > upper):
        allowed = "a number > 0" + (f" and <= {upper:g}" if upper is not None else "")
        raise ConfigError("must be a positive number", key=f"exposure.{key}", value=v, file=file,
                          allowed=allowed)
    return float(v)


def load_study_file(path: str | Path) -> StudySpec:
    """Read and check the study file at ``path``."""
    p = Path(path)
    try:
        text = p.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise ConfigError("no such file", file=str(p)) from None
    except (OSError, UnicodeDecodeError) as exc:
        raise ConfigError(f"cannot read the file ({exc})", file=str(p)) from None
    return parse_study_file(text, str(p), base_dir=p.parent)


def parse_study_file(text: str, source: str = "<text>", base_dir: Path | None = None) -> StudySpec:
    """Check the TOML ``text`` of a study file (scenario paths relative to ``base_dir``)."""
    try:
        raw = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise ConfigError(f"not valid TOML ({exc})", file=source) from None
    for section in raw:
        if section not in _SECTIONS:
            raise ConfigError("unknown section", key=section, file=source, allowed=", ".join(_SECTIONS))
    body = raw.get("study")
    if not isinstance(body, dict):
        raise ConfigError("a [study] table is required", key="study", file=source,
                          allowed='[study] with scenario = "<file>" (or "<demo>")')
    for k in body:
        if k not in _STUDY_KEYS:
            raise ConfigError("unknown key", key=f"study.{k}", value=body[k], file=source,
                              allowed=", ".join(_STUDY_KEYS))
    name = body.get("name", Path(source).stem)
    if not isinstance(name, str):
        raise ConfigError("must be text in quotes", key="study.name", value=name, file=source)
    scen = body.get("scenario")
    if not isinstance(scen, str) or not scen:
        raise ConfigError("is required: the base scenario file", key="study.scenario", value=scen,
                          file=source, allowed='a path relative to the study file, or "<demo>"')
    if scen == DEMO_SOURCE:
        scen_text, scen_source, scen_dir = demo_text(), DEMO_SOURCE, None
    else:
        sp = Path(scen) if Path(scen).is_absolute() or base_dir is None else base_dir / scen
        try:
            scen_text = sp.read_text(encoding="utf-8")
        except (OSError, UnicodeDecodeError):
            raise ConfigError("cannot read the base scenario", key="study.scenario", value=scen,
                              file=source, allowed="an existing scenario file") from None
        scen_source, scen_dir = str(sp), sp.parent
    method = body.get("method", "auto")
    if method not in _METHODS:
        raise ConfigError("unknown method", key="study.method", value=method, file=source,
                          allowed=", ".join(_METHODS))
    cases = _cases(raw, source)
    names = [c.name for c in cases]
    return StudySpec(
        name=name, description=str(body.get("description", "")), source=source, text=text,
        scenario_source=scen_source, scenario_text=scen_text, scenario_dir=scen_dir,
        samples=_int(body, "samples", 20_000, 100, source), seed=_int(body, "seed", 1, 0, source),
        method=method, min_events=_int(body, "min_events", 50, 1, source),
        subset_samples=_int(body, "subset_samples", 1000, 100, source),
        split=_int(body, "split", 1 << 20, 1000, source),
        cases=cases, comparisons=_comparisons(raw, source, cases),
        exposure=_exposure(raw, source, names),
    )


def _cases(raw: Mapping[str, Any], source: str) -> tuple[CaseSpec, ...]:
    tables = raw.get("case", [])
    if not isinstance(tables, list) or not all(isinstance(t, dict) for t in tables):
        raise ConfigError("must be a list of [[case]] tables", key="case", file=source)
    base: list[CaseSpec] = []
    for i, t in enumerate(tables):
        name = t.get("name")
        if not isinstance(name, str) or not name.strip():
            raise ConfigError("every [[case]] needs a name", key=f"case[{i + 1}].name", value=name,
                              file=source, allowed="text in quotes")
        body = {k: v for k, v in t.items() if k != "name"}
        base.append(CaseSpec(name, name, tuple(_flat_overrides(body, source, f"case {name!r}"))))
    grid_table = raw.get("grid", {})
    if not isinstance(grid_table, dict):
        raise ConfigError("must be a table of value lists", key="grid", file=source)
    grid = _flat_overrides(grid_table, source, "grid")
    for path, values in grid:
        if not isinstance(values, list) or not values:
            raise ConfigError("must be a non-empty list of values", key=f"grid.{format_override(path)}",
                              value=values, file=source, allowed='e.g. ["1800 m", "2100 m"]')
    if not base and not grid:
        raise ConfigError("no cases: give [[case]] tables, a [grid] or both", key="case", file=source)
    points: list[tuple[tuple[OverridePath, Any], ...]] = [()]
    if grid:
        points = [tuple(zip([p for p, _ in grid], combo, strict=True))
                  for combo in itertools.product(*[v for _, v in grid])]
    cases = []
    for b in base or [CaseSpec("", "", ())]:
        for point in points:
            label = ", ".join(f"{format_override(p).split('.')[-1]}={v}" for p, v in point)
            name = " | ".join(x for x in (b.name, label) if x)
            cases.append(CaseSpec(name, b.group, b.overrides + point))
    seen = set()
    for c in cases:
        if c.name in seen:
            raise ConfigError("two cases have the same name", key="case.name", value=c.name, file=source,
                              allowed="distinct names")
        seen.add(c.name)
    return tuple(cases)


def _comparisons(raw: Mapping[str, Any], source: str, cases: tuple[CaseSpec, ...]
                 ) -> tuple[ComparisonSpec, ...]:
    """Comparisons by case name; between [[case]] names with a grid: one per grid point."""
    tables = raw.get("comparison", [])
    if not isinstance(tables, list) or not all(isinstance(t, dict) for t in tables):
        raise ConfigError("must be a list of [[comparison]] tables", key="comparison", file=source)
    names = [c.name for c in cases]
    groups = {c.group for c in cases}
    out = []
    for i, t in enumerate(tables):
        unknown = set(t) - {"baseline", "alternative"}
        if unknown:
            k = sorted(unknown)[0]
            raise ConfigError("unknown key", key=f"comparison[{i + 1}].{k}", value=t[k], file=source,
                              allowed="baseline, alternative")
        b, a = t.get("baseline"), t.get("alternative")
        for role, v in (("baseline", b), ("alternative", a)):
            if v not in names and v not in groups:
                raise ConfigError("is not the name of a case", key=f"comparison[{i + 1}].{role}", value=v,
                                  file=source, allowed=", ".join(repr(n) for n in names[:6])
                                  + (", ..." if len(names) > 6 else ""))
        if b == a:
            raise ConfigError("baseline and alternative are the same case", key=f"comparison[{i + 1}]",
                              value=b, file=source)
        if b in names and a in names:
            out.append(ComparisonSpec(str(b), str(a)))
            continue
        suffix = [c.name[len(c.group):] for c in cases if c.group == b]
        for s in suffix:
            if f"{a}{s}" in names:
                out.append(ComparisonSpec(f"{b}{s}", f"{a}{s}"))
    return tuple(out)


def _exposure(raw: Mapping[str, Any], source: str, names: list[str]) -> ExposureSpec | None:
    body = raw.get("exposure")
    if body is None:
        return None
    if not isinstance(body, dict):
        raise ConfigError("must be a table", key="exposure", file=source)
    for k in body:
        if k not in _EXPOSURE_KEYS:
            raise ConfigError("unknown key", key=f"exposure.{k}", value=body[k], file=source,
                              allowed=", ".join(_EXPOSURE_KEYS))
    if "landings_per_year" not in body:
        raise ConfigError("is required", key="exposure.landings_per_year", file=source,
                          allowed="a number of landings > 0")
    n = _positive(body, "landings_per_year", source)
    if "target_per_year" in body and "target_per_landing" in body:
        raise ConfigError("give the target per year or per landing, not both", key="exposure.target_per_year",
                          file=source)
    tpy = _positive(body, "target_per_year", source) if "target_per_year" in body else None
    tpl = _positive(body, "target_per_landing", source, upper=1.0) if "target_per_landing" in body else None
    mix = body.get("mix")
    if mix is not None:
        if not isinstance(mix, dict) or not mix:
            raise ConfigError("must be a table of case name = share", key="exposure.mix", value=mix,
                              file=source)
        for k, v in mix.items():
            if k not in names:
                raise ConfigError("is not the name of a case", key=f"exposure.mix.{k}", file=source,
                                  allowed=", ".join(repr(x) for x in names[:6]))
            if isinstance(v, bool) or not isinstance(v, int | float) or not 0 <= v <= 1:
                raise ConfigError("must be a share between 0 and 1", key=f"exposure.mix.{k}", value=v,
                                  file=source, allowed="0..1")
        total = float(sum(mix.values()))
        if abs(total - 1.0) > 1e-9:
            raise ConfigError(f"the shares add up to {total:g}", key="exposure.mix", file=source,
                              allowed="shares that add up to 1")
        mix = {str(k): float(v) for k, v in mix.items()}
    return ExposureSpec(n, mix, tpy, tpl, str(body.get("source", "")))


def _toml_value(v: Any) -> str:
    if isinstance(v, float) and not math.isfinite(v):
        raise ValueError(v)
    return json.dumps(v)


def resolve_case(study: StudySpec, case: CaseSpec) -> tuple[Scenario, UncertainSet]:
    """The checked scenario and uncertain inputs of one case.

    A scenario key is overridden as ``--set`` does (an uncertain key set to a value is fixed there);
    ``uncertain."<key>".<parameter>`` changes one parameter of that key's distribution (``uncertain.
    "<key>"`` with a table replaces the whole distribution).
    """
    sets, tables = [], {}
    try:
        for path, value in case.overrides:
            if path[0] == "uncertain":
                tables[path] = value
            else:
                sets.append(f"{path[0]}={_toml_value(value)}")
    except (TypeError, ValueError):
        raise ConfigError("cannot be used as a value", key=f"case {case.name!r}", file=study.source) from None
    try:
        return parse_study(study.scenario_text, study.scenario_source, sets, base_dir=study.scenario_dir,
                           assign=tables)
    except ConfigError as exc:
        raise ConfigError(exc.reason, key=exc.key, value=exc.value, allowed=exc.allowed,
                          file=f"{study.source}, case {case.name!r}") from None


class CaseCache:
    """Finished case results stored by key in a folder (one pickle file each, written atomically).

    The files are this tool's own: read them back only from a folder you wrote.
    """

    def __init__(self, folder: str | Path) -> None:
        self.folder = Path(folder)

    def _path(self, key: str) -> Path:
        return self.folder / f"{key}.pkl"

    def get(self, key: str) -> Any | None:
        p = self._path(key)
        if not p.is_file():
            return None
        try:
            with p.open("rb") as f:
                return pickle.load(f)
        except (OSError, pickle.UnpicklingError, EOFError, AttributeError):
            return None

    def put(self, key: str, value: Any) -> None:
        self.folder.mkdir(parents=True, exist_ok=True)
        tmp = self.folder / f".{key}.{os.getpid()}.tmp"
        with tmp.open("wb") as f:
            pickle.dump(value, f)
        os.replace(tmp, self._path(key))
