"""The report in a real browser: headless Chromium renders it, takes a screenshot, and logs no console message.

Chromium is Debian's ``chromium`` package (``.ci/run`` installs it when it is missing); the test is skipped,
saying so, only where no Chromium can be found.
"""

from __future__ import annotations

import os
import shutil
import subprocess
from pathlib import Path

import pytest
from reading import breast_cancer_forest

pytest.importorskip("matplotlib")
pytest.importorskip("pandas")

CHROMIUM = next((shutil.which(name) for name in ("chromium", "chromium-browser") if shutil.which(name)), None)
pytestmark = pytest.mark.skipif(CHROMIUM is None, reason="no Chromium on this machine (Debian package `chromium`; "
                                "`.ci/run` installs it as root where apt-get can reach the package archive)")
FLAGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-background-networking",
         "--disable-component-update", "--disable-sync", "--no-first-run", "--hide-scrollbars",
         "--enable-logging=stderr", "--v=0"]
HEADINGS = ["What was fit", "Out-of-bag error", "How the out-of-bag votes fall", "Cases to look at first",
            "Which predictors matter", "How the prediction moves with the leading predictors",
            "Predictions for the new cases", "Before you act on it"]


def chromium(page: Path, profile: Path, *extra: str) -> subprocess.CompletedProcess:
    """One headless run on ``page`` with a fresh profile folder (``extra`` names the output, ``--dump-dom`` or
    ``--screenshot=...``, without which Chromium would not exit); stdout and stderr as text."""
    return subprocess.run([CHROMIUM, *FLAGS, f"--user-data-dir={profile}", *extra, page.as_uri()],
                          capture_output=True, text=True, timeout=60, env={**os.environ, "LANG": "C.UTF-8"})


def console_lines(run: subprocess.CompletedProcess) -> list[str]:
    return [line for line in run.stderr.splitlines() if ":CONSOLE" in line]


@pytest.fixture(scope="module")
def rendered(tmp_path_factory):
    folder = tmp_path_factory.mktemp("browser")
    forest, frame, _ = breast_cancer_forest()
    page = forest.report(folder / "forest.html", X_new=frame.iloc[:12])
    dom = chromium(page, folder / "profile-dom", "--dump-dom")
    shot = chromium(page, folder / "profile-shot", "--window-size=1280,2400", f"--screenshot={folder / 'page.png'}")
    return dom, shot, folder / "page.png"


def test_the_console_check_can_fail(tmp_path):
    """A check of the check: a page that writes to the console is caught."""
    page = tmp_path / "noisy.html"
    page.write_text('<!DOCTYPE html><html><head><title>t</title></head><body><script>console.error("boom")'
                    "</script></body></html>")
    assert any('"boom"' in line for line in console_lines(chromium(page, tmp_path / "profile", "--dump-dom")))


def test_the_page_renders_its_sections_without_console_messages(rendered):
    dom, shot, _ = rendered
    assert dom.returncode == 0 and shot.returncode == 0, dom.stderr[-2000:]
    assert console_lines(dom) == [] and console_lines(shot) == []
    shown = [h for h in HEADINGS if f"<h2>{h}</h2>" in dom.stdout]
    assert shown == HEADINGS
    assert dom.stdout.count("<figure") == 5 and dom.stdout.count("<table") == 8


def test_the_screenshot_shows_the_page(rendered):
    from PIL import Image  # matplotlib's own dependency

    _, _, png = rendered
    image = Image.open(png).convert("RGB")
    assert image.size == (1280, 2400)
    # the header band in the report's ink colour (#22313f), the paper colour (#fbfaf7) below it
    assert image.getpixel((640, 10)) == (0x22, 0x31, 0x3F)
    assert image.getpixel((5, 1200)) == (0xFB, 0xFA, 0xF7)
    assert len(image.resize((64, 120)).getcolors(64 * 120)) > 50   # text, tables and pictures, not a blank page
