"""The HTML dossier in Debian's headless Chromium: loads cleanly, images decode, user text
is shown as text and never run."""
from __future__ import annotations

import re
from pathlib import Path

from .conftest import HOSTILE_SUMMARY, HOSTILE_TEAM
from ._chromium import inspect_page


def test_page_loads_clean_in_chromium(dossier, tmp_path):
    _, content = dossier
    page = Path(content["folder"]) / content["files"]["html"]
    seen = inspect_page(page, tmp_path)
    assert seen.console_errors == [] and seen.exceptions == []
    assert len(seen.images) == len(content["files"]["plots"])
    assert all(img["complete"] and img["width"] > 0 for img in seen.images)
    assert seen.screenshot.is_file() and seen.screenshot.stat().st_size > 10_000


def test_hostile_user_text_is_shown_not_run(dossier, tmp_path):
    _, content = dossier
    page = Path(content["folder"]) / content["files"]["html"]
    seen = inspect_page(page, tmp_path)
    assert not seen.hostile_ran and seen.scripts == 0
    assert HOSTILE_SUMMARY in seen.text and HOSTILE_TEAM in seen.text
    # the rendered page shows the reference predictors and their skill scores
    assert "Against references" in seen.text and "Accuracy against cost" in seen.text
    assert "eddy viscosity" in seen.text and "training mean" in seen.text
    assert "tensor-basis network" in seen.text and "on the front" in seen.text


def test_page_is_self_contained(dossier):
    _, content = dossier
    html = (Path(content["folder"]) / content["files"]["html"]).read_text()
    # No external script, font, style or image: every src is an embedded data URI.
    assert "<script" not in html and "<link" not in html and "@import" not in html
    assert all(src.startswith("data:image/png;base64,")
               for src in re.findall(r'src="([^"]*)"', html))
    assert "&lt;script&gt;" in html
