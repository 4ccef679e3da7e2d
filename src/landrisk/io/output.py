"""Writing files: never over an existing file unless asked, and never half-written."""

from __future__ import annotations

import json
import os
import tempfile
from collections.abc import Mapping
from pathlib import Path
from typing import Any

from landrisk.errors import ConfigError

__all__ = ["comment_header", "write_files", "write_text_new"]


def _umask() -> int:
    mask = os.umask(0)
    os.umask(mask)
    return mask


def _atomic_write(path: Path, data: bytes) -> None:
    fd, tmp = tempfile.mkstemp(dir=path.parent, prefix=f".{path.name}.", suffix=".tmp")
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
        os.chmod(tmp, 0o666 & ~_umask())  # mkstemp makes 0600; give the usual permissions
        os.replace(tmp, path)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise


def write_text_new(path: Path, text: str, force: bool = False) -> Path:
    """Write ``text`` to ``path`` atomically (a temporary file renamed into place).

    Raises
    ------
    ConfigError
        If the file exists and ``force`` is false, or the folder cannot be written.
    """
    if path.exists() and not force:
        raise ConfigError("the file exists; use --force to replace it", file=str(path))
    write_files(path.parent, {path.name: text}, force=True)
    return path


def write_files(folder: Path, files: Mapping[str, str | bytes], force: bool = False) -> list[Path]:
    """Write several files into ``folder``, each atomically; refuse if any exists unless ``force``.

    All names are checked before anything is written, so a refusal leaves the folder as it was.
    """
    paths = [folder / name for name in files]
    existing = [p for p in paths if p.exists()]
    if existing and not force:
        raise ConfigError(f"{len(existing)} output file(s) exist, e.g. {existing[0].name}; use --force "
                          "to replace them", file=str(folder))
    try:
        folder.mkdir(parents=True, exist_ok=True)
        for path, data in zip(paths, files.values(), strict=True):
            _atomic_write(path, data.encode("utf-8") if isinstance(data, str) else data)
    except OSError as exc:
        raise ConfigError(f"cannot write ({exc.strerror})", file=str(folder)) from None
    return paths


def comment_header(record: Mapping[str, Any]) -> str:
    """Lines ``# key: value`` that record a run's provenance at the top of a CSV file."""
    return "".join(f"# {k}: {json.dumps(v, default=str)}\n" for k, v in record.items())
