"""The review document in a real browser: headless Chromium prints it to PDF and takes a screenshot.

Skipped, with the reason, where Chromium is not installed (``.ci/run`` installs the system package where
it can: ``apt-get install chromium``). In the slow set: each browser start takes seconds.
"""

from __future__ import annotations

import re
from pathlib import Path

import numpy as np
import pytest

from landrisk import api
from landrisk.document import find_browser, print_pdf, screenshot, write_report

pytestmark = [
    pytest.mark.slow,
    pytest.mark.skipif(find_browser() is None, reason="Chromium is not installed (apt-get install chromium, "
                       "or set LANDRISK_CHROMIUM): the report cannot be printed or screenshot here"),
]


@pytest.fixture(scope="module")
def report(tmp_path_factory: pytest.TempPathFactory) -> Path:
    out = tmp_path_factory.mktemp("browser") / "demo"
    scenario, uncertain = api.load_study()
    api.write_assessment(api.assess(scenario, uncertain, samples=20_000, seed=5), out)
    write_report(out, pdf=True)
    return out


def pdf_pages(data: bytes) -> int:
    """Page objects of a PDF (``/Type /Page``, not ``/Pages``); the page tree's root count must agree.

    PDF 1.7 (ISO 32000-1:2008) section 7.7.3: each leaf of the page tree is a dictionary with /Type /Page,
    and the root /Pages node's /Count is the number of leaves. Chromium writes no object streams, so the
    dictionaries are in plain text (checked: no /ObjStm).
    """
    assert b"/ObjStm" not in data
    leaves = len(re.findall(rb"/Type\s*/Page(?![a-zA-Z])", data))
    counts = [int(c) for c in re.findall(rb"/Count\s+(\d+)", data)]
    assert counts and max(counts) == leaves
    return leaves


def test_pdf_of_the_demo_report(report: Path) -> None:
    pdf = report / "report.pdf"
    data = pdf.read_bytes()
    assert data.startswith(b"%PDF-")
    pages = pdf_pages(data)
    # The demo document: two pages of text before the figures, three full-width figures, the tables of
    # the inputs: at least 4 A4 pages; more than 30 would mean the print styles broke (a figure per page).
    assert 4 <= pages <= 30, pages
    again = print_pdf(report / "report.html", report / "again.pdf")
    assert pdf_pages(again.read_bytes()) == pages  # the same document prints the same


def test_screenshot_is_not_blank_and_opens_with_the_caution(report: Path) -> None:
    from PIL import Image

    shot = screenshot(report / "report.html", report / "shot.png", width=1000, height=1400)
    image = np.asarray(Image.open(shot).convert("RGB"), dtype=float)
    assert image.shape[:2] == (1400, 1000)
    ink = (image.sum(axis=2) < 600).mean()  # pixels clearly darker than white
    assert 0.01 < ink < 0.6, ink
    # The caution box is outlined in #b00000; it must be on the first screen, in its upper half.
    red = (np.abs(image[..., 0] - 176) < 30) & (image[..., 1] < 60) & (image[..., 2] < 60)
    rows = np.nonzero(red.any(axis=1))[0]
    assert rows.size > 0 and rows[0] < 700, rows[:5]
