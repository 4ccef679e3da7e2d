"""The review document: one self-contained HTML file (and a PDF where a browser can print it) of a
results folder written by ``assess``, ``rank`` or a rare-event method.

:func:`read_results` reads the folder's JSON summary and SVG figures, :func:`render_html` renders them
with the Jinja2 templates shipped in ``templates/``, :func:`write_report` writes ``report.html`` and
:func:`print_pdf` prints it with headless Chromium.
"""

from landrisk.document.browser import BrowserError, find_browser, print_pdf, screenshot
from landrisk.document.reader import READERS, Reader, ResultFigure, ResultSet, read_results
from landrisk.document.render import FIGURE_PLACES, SECTIONS, render_html
from landrisk.document.write import REPORT_NAME, write_report

__all__ = [
    "FIGURE_PLACES",
    "READERS",
    "REPORT_NAME",
    "SECTIONS",
    "BrowserError",
    "Reader",
    "ResultFigure",
    "ResultSet",
    "find_browser",
    "print_pdf",
    "read_results",
    "render_html",
    "screenshot",
    "write_report",
]
