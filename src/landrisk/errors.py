"""Errors and warnings that landrisk reports to its users.

Every error a user can cause by what they write carries enough to fix it without reading code: the file,
the key, the value that was given and what would have been allowed.
"""

from __future__ import annotations

from typing import Any

__all__ = ["ConfigError", "LandriskError", "LandriskWarning", "SolveError"]


class LandriskError(Exception):
    """Base class of every error that the command line reports as a one-line message (exit status 2)."""


class ConfigError(LandriskError):
    """A scenario file or an override that cannot be used.

    Parameters
    ----------
    message
        What is wrong, in plain words.
    key
        The dotted key (``runway.lda``) concerned, or ``None`` for a problem with the whole file.
    value
        The value as the user wrote it.
    allowed
        What would have been accepted (a range, a list of choices, a unit).
    file
        Where the value came from: a path, ``"<demo>"`` or ``"--set"``.
    """

    def __init__(
        self,
        message: str,
        *,
        key: str | None = None,
        value: Any = None,
        allowed: str | None = None,
        file: str | None = None,
    ) -> None:
        self.reason = message
        self.key = key
        self.value = value
        self.allowed = allowed
        self.file = file
        super().__init__(self._format())

    def _format(self) -> str:
        parts = []
        if self.file:
            parts.append(f"{self.file}:")
        if self.key is not None:
            parts.append(f"{self.key} = {self.value!r}:" if self.value is not None else f"{self.key}:")
        elif self.value is not None:
            parts.append(f"{self.value!r}:")
        parts.append(self.reason)
        text = " ".join(parts)
        if self.allowed:
            text += f" (allowed: {self.allowed})"
        return text

    def with_file(self, file: str) -> ConfigError:
        """The same error, attributed to ``file`` when no file was known where it was raised."""
        if self.file:
            return self
        return ConfigError(self.reason, key=self.key, value=self.value, allowed=self.allowed, file=file)


class SolveError(LandriskError):
    """A single landing that the model cannot evaluate as given (for example lift above weight)."""


class LandriskWarning(UserWarning):
    """An input that is accepted but outside common practice; the command line prints it on stderr."""
