"""The HTML summary rendered by a real headless browser (Chromium from the OS packages).

Checks that the page of the real demo run paints (the screenshot is not blank) and that hostile member
text stays inert when a browser runs the page: the fixture's ``<img onerror=...>`` probe would mark ``<body>`` if it were ever
parsed as markup (OWASP XSS Filter Evasion Cheat Sheet, the classic img/onerror vector). Skipped only
when no Chromium is installed (CI installs it through .ci/run).
"""

from __future__ import annotations

import re
from pathlib import Path

import numpy as np
import pytest
from matplotlib.image import imread

from tests.reports_tools import CHROMIUM, chromium, with_frequent_probes
from tests.test_reports_fixture import IMG_PROBE, SCRIPT_PROBE, real_run
from valuation.reports import write_html

pytestmark = pytest.mark.skipif(CHROMIUM is None, reason="chromium is not installed (apt-get install chromium)")
_run = chromium


@pytest.fixture(scope="module")
def page(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """The real run's page, its probe reasons common enough to be listed (the page lists the commonest)."""
    result, experience = real_run()
    return write_html(with_frequent_probes(result, [SCRIPT_PROBE, IMG_PROBE]),
                      tmp_path_factory.mktemp("browser") / "summary.html", experience)


def test_screenshot_is_not_blank(page: Path, tmp_path: Path) -> None:
    png = tmp_path / "shot.png"
    proc = _run(tmp_path, f"--screenshot={png}", "--window-size=1200,1600", page.as_uri())
    assert png.exists(), proc.stderr[-2000:]
    img = imread(png)[..., :3]
    assert img.shape[:2] == (1600, 1200)
    grey = img.mean(axis=2)
    background = np.median(grey)
    assert grey.std() > 0.03  # a blank page has no variance
    assert (np.abs(grey - background) > 0.1).mean() > 0.02  # text, cards and charts cover part of it


def test_hostile_text_stays_inert_in_a_browser(page: Path, tmp_path: Path) -> None:
    proc = _run(tmp_path, "--dump-dom", page.as_uri())
    dom = proc.stdout
    assert "headline" in dom, proc.stderr[-2000:]
    assert re.search(r"<body[^>]*data-pwned", dom) is None
    assert re.search(r"<img\b", dom) is None
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in dom
