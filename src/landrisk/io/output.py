"""Writing files: never over an existing file unless asked, and never half-written.

A results folder is written as a set (:class:`StagedFolder`): every file goes into a hidden sibling
folder, which replaces the results folder only once complete. A rerun with ``force`` therefore leaves
either the complete old set or the complete new set, never a mix; files in the folder that belong to
neither set are kept. A run stopped by SIGTERM or an error removes its staging folder.
"""

from __future__ import annotations

import os
import shutil
import signal
import tempfile
import threading
import uuid
from collections.abc import Iterable, Mapping
from pathlib import Path
from types import FrameType, TracebackType
from typing import Any

from landrisk.errors import ConfigError

__all__ = ["StagedFolder", "write_files", "write_text_new"]


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


class _Terminated(BaseException):
    """Raised in the main thread by SIGTERM while a result set is being written."""


def _on_sigterm(signum: int, frame: FrameType | None) -> None:
    raise _Terminated()


class StagedFolder:
    """A results folder written as one set: files go to a hidden sibling folder swapped in at the end.

    >>> with StagedFolder(Path("out"), names=["summary.json"], force=True) as stage:  # doctest: +SKIP
    ...     stage.write("summary.json", "{}")
    ...     stage.commit()

    Parameters
    ----------
    folder : Path
        The results folder (created if missing).
    names : iterable of str
        The files the new set will hold (checked against existing files before anything is written).
    force : bool
        Replace an existing result set; without it, refuse if any of ``names`` exists.
    previous : iterable of str
        Names of files of an earlier result set in ``folder`` (dropped at the swap even if the new set
        has no file of that name); other files in ``folder`` are kept.
    """

    def __init__(self, folder: Path, names: Iterable[str], *, force: bool = False,
                 previous: Iterable[str] = ()) -> None:
        self.folder = Path(folder)
        self.names = list(names)
        self.previous = set(previous)
        self.run_id = uuid.uuid4().hex[:12]
        self.stage = self.folder.parent / f".{self.folder.name}.{self.run_id}.tmp"
        self.committed = False
        self._old_handler: Any = None
        existing = [n for n in self.names if (self.folder / n).exists()]
        if existing and not force:
            raise ConfigError(f"{len(existing)} output file(s) exist, e.g. {existing[0]}; use --force "
                              "to replace them", file=str(self.folder))
        if self.folder.exists() and not self.folder.is_dir():
            raise ConfigError("exists and is not a folder", file=str(self.folder))

    def __enter__(self) -> StagedFolder:
        try:
            self.folder.parent.mkdir(parents=True, exist_ok=True)
            self.stage.mkdir()
        except OSError as exc:
            raise ConfigError(f"cannot write ({exc.strerror})", file=str(self.folder)) from None
        if threading.current_thread() is threading.main_thread():
            self._old_handler = signal.signal(signal.SIGTERM, _on_sigterm)
        return self

    def __exit__(self, kind: type[BaseException] | None, exc: BaseException | None,
                 tb: TracebackType | None) -> None:
        if self._old_handler is not None:
            signal.signal(signal.SIGTERM, self._old_handler)
        if not self.committed:
            shutil.rmtree(self.stage, ignore_errors=True)
        if isinstance(exc, _Terminated):  # leave as a process stopped by SIGTERM would
            raise SystemExit(128 + signal.SIGTERM)

    def path(self, name: str) -> Path:
        """Where to write ``name`` in the staging folder (for a file written in pieces)."""
        return self.stage / name

    def write(self, name: str, data: str | bytes) -> None:
        """Write one file of the set into the staging folder."""
        try:
            (self.stage / name).write_bytes(data.encode("utf-8") if isinstance(data, str) else data)
        except OSError as exc:
            raise ConfigError(f"cannot write ({exc.strerror})", file=str(self.folder / name)) from None

    def commit(self) -> list[Path]:
        """Swap the complete set in: keep the folder's other files, drop the earlier set's."""
        deferred: list[int] = []
        if self._old_handler is not None:  # a SIGTERM now waits until the swap is done
            signal.signal(signal.SIGTERM, lambda signum, frame: deferred.append(signum))
        moved: list[Path] = []
        old: Path | None = None
        try:
            mode = 0o777 & ~_umask()
            for p in self.stage.iterdir():
                os.chmod(p, 0o666 & ~_umask())
            if self.folder.exists():
                mode = self.folder.stat().st_mode & 0o7777
                drop = self.previous | set(self.names)
                for p in self.folder.iterdir():
                    if p.name not in drop and not (self.stage / p.name).exists():
                        os.replace(p, self.stage / p.name)  # a file of the user's own: kept
                        moved.append(p)
                old = self.folder.parent / f".{self.folder.name}.{self.run_id}.old"
                os.replace(self.folder, old)
            os.chmod(self.stage, mode)
            os.replace(self.stage, self.folder)
            self.committed = True
            if old is not None:
                shutil.rmtree(old, ignore_errors=True)
        except OSError as exc:
            if old is not None and old.exists() and not self.folder.exists():
                os.replace(old, self.folder)
            for p in moved:  # give the user's files back before the staging folder goes
                if not p.exists() and (self.stage / p.name).exists():
                    os.replace(self.stage / p.name, p)
            raise ConfigError(f"cannot write ({exc.strerror})", file=str(self.folder)) from None
        finally:
            if self._old_handler is not None:
                signal.signal(signal.SIGTERM, _on_sigterm)
        if deferred:
            raise _Terminated()
        return [self.folder / n for n in self.names]
