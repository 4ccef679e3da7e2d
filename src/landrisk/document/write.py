"""Writing the review document of a results folder: ``report.html`` and, on request, ``report.pdf``."""

from __future__ import annotations

from pathlib import Path

from landrisk.document.browser import print_pdf
from landrisk.document.reader import read_results
from landrisk.document.render import render_html
from landrisk.errors import ConfigError
from landrisk.io.output import write_files

__all__ = ["REPORT_NAME", "write_report"]

REPORT_NAME = "report.html"


def write_report(folder: str | Path, out: str | Path | None = None, *, pdf: bool = False,
                 force: bool = False) -> list[Path]:
    """Write the review document of the results folder ``folder``; the paths written.

    Parameters
    ----------
    folder : str or Path
        A folder written by ``assess --out``, ``rank --out`` or a rare-event method.
    out : str or Path, optional
        The HTML file (default: ``report.html`` in ``folder``). With ``pdf`` the PDF is written beside it,
        same name with ``.pdf``.
    pdf : bool
        Also print the document to PDF with headless Chromium; raises
        :class:`landrisk.document.BrowserError` (after writing the HTML) when there is none.
    force : bool
        Replace existing files.
    """
    results = read_results(folder)
    html_path = Path(out) if out is not None else Path(folder) / REPORT_NAME
    if html_path.suffix.lower() not in (".html", ".htm"):
        raise ConfigError("the report file must end in .html", key="--out", value=str(html_path))
    pdf_path = html_path.with_suffix(".pdf")
    if pdf and pdf_path.exists() and not force:
        raise ConfigError("the file exists; use --force to replace it", file=str(pdf_path))
    written = write_files(html_path.parent, {html_path.name: render_html(results)}, force=force)
    if pdf:
        written.append(print_pdf(html_path, pdf_path))
    return written
