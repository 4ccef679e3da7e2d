"""Writing files: never over an existing file unless asked, and never half-written."""

from __future__ import annotations

import os
import tempfile
from pathlib import Path

from landrisk.errors import ConfigError

__all__ = ["write_text_new"]


def write_text_new(path: Path, text: str, force: bool = False) -> Path:
    """Write ``text`` to ``path`` atomically (a temporary file renamed into place).

    Raises
    ------
    ConfigError
        If the file exists and ``force`` is false, or the folder cannot be written.
    """
    if path.exists() and not force:
        raise ConfigError("the file exists; use --force to replace it", file=str(path))
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        fd, tmp = tempfile.mkstemp(dir=path.parent, prefix=f".{path.name}.", suffix=".tmp")
        with os.fdopen(fd, "w", encoding="utf-8") as fh:
            fh.write(text)
        os.replace(tmp, path)
    except OSError as exc:
        raise ConfigError(f"cannot write the file ({exc.strerror})", file=str(path)) from None
    return path
