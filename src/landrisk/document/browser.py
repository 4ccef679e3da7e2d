"""Printing the review document with a headless Chromium (the system's package): PDF and screenshots.

Chromium is looked for as ``$LANDRISK_CHROMIUM``, then ``chromium`` and ``chromium-browser`` on the PATH
(Debian and Ubuntu install it with ``apt-get install chromium``). It runs headless with a throw-away
profile, no sandbox (it may run as root in CI), no GPU and no background network traffic; the document
needs no network.
"""

from __future__ import annotations

import os
import shutil
import subprocess
import tempfile
from pathlib import Path

from landrisk.errors import LandriskError

__all__ = ["CHROMIUM_NAMES", "BrowserError", "find_browser", "print_pdf", "screenshot"]

CHROMIUM_NAMES = ("chromium", "chromium-browser")

_FLAGS = ("--headless", "--no-sandbox", "--disable-gpu", "--no-first-run", "--disable-background-networking",
          "--disable-component-update", "--disable-sync", "--disable-extensions", "--hide-scrollbars",
          "--mute-audio")


class BrowserError(LandriskError):
    """No browser to print with, or the browser failed."""


def find_browser() -> str | None:
    """The path of a Chromium executable, or None."""
    given = os.environ.get("LANDRISK_CHROMIUM")
    if given:
        return shutil.which(given) or (given if Path(given).is_file() else None)
    for name in CHROMIUM_NAMES:
        found = shutil.which(name)
        if found:
            return found
    return None


def _run(args: list[str], out: Path, timeout: float) -> Path:
    browser = find_browser()
    if browser is None:
        raise BrowserError("no PDF engine: Chromium was not found (install it, e.g. apt-get install "
                           "chromium, or set LANDRISK_CHROMIUM to its path)")
    out.parent.mkdir(parents=True, exist_ok=True)
    tmp_out = out.with_name(f".part-{out.name}")
    tmp_out.unlink(missing_ok=True)
    with tempfile.TemporaryDirectory(prefix="landrisk-chromium-") as profile:
        cmd = [browser, *_FLAGS, f"--user-data-dir={profile}",
               *(a.replace("{out}", str(tmp_out)) for a in args)]
        try:
            done = subprocess.run(cmd, capture_output=True, text=True, timeout=timeout, check=False)
        except subprocess.TimeoutExpired:
            tmp_out.unlink(missing_ok=True)
            raise BrowserError(f"{browser} did not finish within {timeout:g} s") from None
        except OSError as exc:
            raise BrowserError(f"{browser} could not be run ({exc})") from None
    if done.returncode != 0 or not tmp_out.is_file() or tmp_out.stat().st_size == 0:
        tmp_out.unlink(missing_ok=True)
        last = (done.stderr.strip().splitlines() or ["no message"])[-1]
        raise BrowserError(f"{browser} failed (exit {done.returncode}): {last}")
    tmp_out.replace(out)
    return out


def print_pdf(html: str | Path, pdf: str | Path, *, timeout: float = 120.0) -> Path:
    """Print the HTML file ``html`` to the PDF file ``pdf`` (A4, the document's print styles, no
    browser header or footer). Raises :class:`BrowserError` without Chromium or when it fails."""
    uri = Path(html).resolve().as_uri()
    return _run(["--no-pdf-header-footer", "--print-to-pdf={out}", uri], Path(pdf), timeout)


def screenshot(html: str | Path, png: str | Path, *, width: int = 1000, height: int = 1400,
               timeout: float = 120.0) -> Path:
    """A PNG screenshot of the top ``width`` x ``height`` CSS pixels of the HTML file ``html``."""
    uri = Path(html).resolve().as_uri()
    return _run([f"--window-size={width},{height}", "--screenshot={out}", uri], Path(png), timeout)
