"""Reading a results folder: its JSON summary and its figures, as written by :mod:`landrisk.export`.

A folder is recognised by the first :class:`Reader` in :data:`READERS` whose summary file is present
and whose ``accepts`` test passes on the parsed summary. To add a kind of result, append a Reader naming
its summary file, add its section template
``templates/_<kind>.html.j2`` and the figure placement in :data:`landrisk.document.render.FIGURE_PLACES`.
"""

from __future__ import annotations

import json
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from landrisk.errors import LandriskError
from landrisk.export import inputs_hash

__all__ = ["READERS", "Reader", "ResultFigure", "ResultSet", "read_results"]


@dataclass(frozen=True)
class Reader:
    """One kind of results folder: its name, its summary file and a test on the parsed summary."""

    kind: str
    summary_name: str
    accepts: Callable[[Mapping[str, Any]], bool]
    inputs_key: str = "inputs"  # the summary key holding the resolved scenario values


def _is_rare(s: Mapping[str, Any]) -> bool:
    return s.get("method") in ("auto", "form", "sorm", "importance", "subset")


#: Kinds of results folder, tried in order.
READERS: tuple[Reader, ...] = (
    Reader("study", "study.json", lambda s: "cases" in s),
    Reader("ranking", "ranking.json", lambda s: "inputs_used" in s, inputs_key="inputs_used"),
    Reader("rare", "summary.json", _is_rare),
    Reader("assessment", "summary.json", lambda s: "percentiles_m" in s and not _is_rare(s)),
)


@dataclass(frozen=True)
class ResultFigure:
    """A figure of the folder: its stem, the SVG text and the PNG file name beside it (if any)."""

    stem: str
    svg: str
    png_name: str | None


@dataclass(frozen=True)
class ResultSet:
    """A results folder, read: its kind, the parsed summary and the figures it lists."""

    folder: Path
    kind: str
    summary_name: str
    summary: Mapping[str, Any]
    figures: tuple[ResultFigure, ...]
    inputs_key: str = "inputs"
    missing: tuple[str, ...] = field(default_factory=tuple)  # files the summary lists but that are absent

    @property
    def inputs(self) -> Mapping[str, Any]:
        """The resolved scenario values (key -> value in the key's SI unit)."""
        return self.summary.get(self.inputs_key) or {}

    @property
    def hash_matches(self) -> bool | None:
        """Whether the recorded hash of the inputs equals the one recomputed from the summary (None:
        the summary holds no hash, as files written before the hash was recorded)."""
        recorded = self.summary.get("inputs_sha256")
        if not recorded:
            return None
        return bool(recorded == inputs_hash(self.inputs, self.summary.get("uncertain")))


def _load_json(path: Path) -> dict[str, Any]:
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, UnicodeDecodeError) as exc:
        raise LandriskError(f"{path}: cannot be read ({exc})") from None
    except json.JSONDecodeError as exc:
        raise LandriskError(f"{path}: not valid JSON (line {exc.lineno}: {exc.msg})") from None
    if not isinstance(data, dict):
        raise LandriskError(f"{path}: not a landrisk summary (a JSON object is expected)")
    return data


def read_results(folder: str | Path) -> ResultSet:
    """Read the results folder ``folder``: its summary (``summary.json``, ``ranking.json``) and figures.

    Raises
    ------
    landrisk.errors.LandriskError
        If the folder does not exist or holds no summary that landrisk wrote.
    """
    root = Path(folder)
    if not root.is_dir():
        raise LandriskError(f"{root}: no such results folder")
    names = sorted({r.summary_name for r in READERS})
    for reader in READERS:
        path = root / reader.summary_name
        if not path.is_file():
            continue
        summary = _load_json(path)
        if summary.get("tool") != "landrisk":
            raise LandriskError(f"{path}: not written by landrisk (no \"tool\": \"landrisk\" entry)")
        if reader.accepts(summary):
            figures, missing = _figures(root, summary)
            return ResultSet(root, reader.kind, reader.summary_name, summary, figures, reader.inputs_key,
                             missing)
    raise LandriskError(f"{root}: no landrisk results here (expected one of {', '.join(names)} written by "
                        "landrisk assess --out, landrisk rank --out or landrisk study --out)")


def _figures(root: Path, summary: Mapping[str, Any]) -> tuple[tuple[ResultFigure, ...], tuple[str, ...]]:
    """The SVG figures the summary lists, in its order; the listed files that are missing."""
    listed = [str(n) for n in (summary.get("files") or {}).values()]
    missing = tuple(n for n in listed if not (root / n).is_file())
    out = []
    for name in listed:
        if not name.endswith(".svg") or name in missing:
            continue
        stem = name.removesuffix(".svg")
        png = f"{stem}.png"
        out.append(ResultFigure(stem, (root / name).read_text(encoding="utf-8"),
                                png if (root / png).is_file() else None))
    return tuple(out), missing
