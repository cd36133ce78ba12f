"""Exported PDF figures keep every label: the lowest line of text on each page is drawn whole.

Each exported PDF page is rendered to pixels with poppler's ``pdftoppm``; ``pdftotext -bbox``
gives the boxes of its words. A line of text that a page clips stops short of its baseline:
its ink ends above where the glyphs sit. The clip seen in the past left a blank band below
the cut, so looking only for a blank page edge would not catch it; the check compares the ink
with the word boxes instead.
"""
import os
import re
import shutil
import subprocess

import numpy as np
import pytest
from PIL import Image

import summarize_widgets.figures.plots as F
from summarize_widgets.datasets.retrofit import simulate_retrofit_study
from summarize_widgets.export.folder import write_summary_folder
from summarize_widgets.summaries.bundle import summarize_all


def _have_browser() -> bool:
    try:
        F.find_browser()
        return True
    except F.BrowserNotFoundError:
        return False


_POPPLER = shutil.which("pdftoppm") is not None and shutil.which("pdftotext") is not None
# Like the other figure tests: skipped locally without the tools, never skipped in CI (CI=true).
pytestmark = pytest.mark.skipif((not _have_browser() or not _POPPLER) and os.environ.get("CI") != "true",
                                reason="needs chromium (static export) and poppler-utils (pdftoppm, pdftotext)")

DPI = 288  # 4 pixels per point
# Where a line's glyphs sit inside its pdftotext box. The box spans the font's ascent to its descent;
# for Liberation Sans / Helvetica / Arial these are 0.905 and 0.212 em (the fonts' hhea metrics, from
# memory), so the baseline is 0.212 / 1.117 = 0.19 of the box height above the box's bottom. Glyphs
# without descenders end at the baseline; a clipped line ends above it.
DESCENT_SHARE = 0.19
TOLERANCE_SHARE = 0.05  # antialiasing and rounding of the rendered edge


def _words(pdf, page):
    out = subprocess.run(["pdftotext", "-bbox", "-f", str(page), "-l", str(page), str(pdf), "-"],
                         capture_output=True, text=True, check=True).stdout
    size = re.search(r'<page width="([\d.]+)" height="([\d.]+)"', out)
    words = [(float(a), float(b), float(c), float(d), w) for a, b, c, d, w in
             re.findall(r'<word xMin="(-?[\d.]+)" yMin="(-?[\d.]+)" xMax="(-?[\d.]+)" yMax="(-?[\d.]+)">([^<]*)</word>', out)]
    return (float(size.group(1)), float(size.group(2))), words


def _pages(pdf) -> int:
    out = subprocess.run(["pdfinfo", str(pdf)], capture_output=True, text=True, check=True).stdout
    return int(re.search(r"Pages:\s+(\d+)", out).group(1))


def _ink(pdf, page, tmp_path) -> np.ndarray:
    stem = tmp_path / f"{pdf.stem}-p{page}"
    subprocess.run(["pdftoppm", "-r", str(DPI), "-gray", "-png", "-f", str(page), "-l", str(page), "-singlefile",
                    str(pdf), str(stem)], check=True)
    return np.asarray(Image.open(f"{stem}.png").convert("L")) < 160


def lowest_line_report(words, height, ink):
    """(shortfall in points, text of the lowest line, its baseline, where its ink ends); shortfall > 0: clipped."""
    bottom = max(w[3] for w in words)
    line = [w for w in words if abs(w[3] - bottom) < 0.5]
    scale = ink.shape[0] / height
    x0, x1 = min(w[0] for w in line), max(w[2] for w in line)
    y0 = min(w[1] for w in line)
    box_h = bottom - y0
    top = int(np.floor(y0 * scale))
    band = ink[top:, int(np.floor(x0 * scale)):int(np.ceil(x1 * scale))]
    rows = np.flatnonzero(band.any(axis=1))
    ink_end = (top + rows.max() + 1) / scale if rows.size else y0
    baseline = bottom - DESCENT_SHARE * box_h
    return baseline - TOLERANCE_SHARE * box_h - ink_end, " ".join(w[4] for w in line), baseline, ink_end


def _page_report(pdf, page, tmp_path):
    (_, height), words = _words(pdf, page)
    assert words, f"{pdf.name} page {page} has no text"
    return lowest_line_report(words, height, _ink(pdf, page, tmp_path))


@pytest.fixture(scope="module")
def exported(tmp_path_factory):
    out = tmp_path_factory.mktemp("pdf_figures")
    study = simulate_retrofit_study(n_households=600, n_draws=200, seed=7)
    bundle = summarize_all(study.effect_draws(), max_depth=3, depth=3)
    write_summary_folder(bundle, out / "offer", figures=True, figure_formats=("pdf", "svg"))
    complier = summarize_all(study.complier_draws(), max_depth=2, depth=2, additive=False)
    write_summary_folder(complier, out / "late", figures=True, figure_formats=("pdf", "svg"))
    return sorted(out.glob("*/figures/*.pdf"))


def test_every_exported_pdf_page_draws_its_lowest_text_line_whole(exported, tmp_path):
    assert len(exported) >= 8, [p.name for p in exported]
    failures = []
    for pdf in exported:
        for page in range(1, _pages(pdf) + 1):
            shortfall, text, baseline, ink_end = _page_report(pdf, page, tmp_path)
            if shortfall > 0:
                failures.append(f"{pdf.parent.parent.name}/{pdf.name} p{page}: {text!r} ink ends at {ink_end:.1f} pt, "
                                f"baseline at {baseline:.1f} pt")
    assert not failures, "clipped text:\n" + "\n".join(failures)


def test_every_axis_title_word_is_on_the_pdf_page(exported):
    # A title wider than its figure is cut at the page's side; poppler then reports none of the words
    # beyond the edge. Every word of every axis title and note (the SVG's own text) must be on the page.
    import xml.etree.ElementTree as ET

    missing = []
    for pdf in exported:
        _, words = _words(pdf, 1)
        on_page = {w[4] for w in words}
        svg = ET.parse(pdf.with_suffix(".svg")).getroot()
        titles = []
        for t in svg.iter("{http://www.w3.org/2000/svg}text"):
            if not any(k in (t.get("class") or "") for k in ("xtitle", "ytitle", "annotation-text")):
                continue
            lines = [ts for ts in t if "line" in (ts.get("class") or "")] or [t]  # plotly draws <br> lines as tspans
            titles += [" ".join("".join(ln.itertext()).split()) for ln in lines]
        for title in titles:
            lost = [w for w in title.split() if w not in on_page]
            if lost:
                missing.append(f"{pdf.parent.parent.name}/{pdf.name}: {title!r} lacks {lost}")
    assert not missing, "\n".join(missing)


def test_the_check_catches_a_line_cut_above_its_baseline(exported, tmp_path):
    # The check itself, on a page drawn whole: blank every pixel from a third of the way up the
    # lowest line's box down to the page edge (a cut with a blank band below it, as a clip leaves).
    pdf = exported[0]
    (_, height), words = _words(pdf, 1)
    ink = _ink(pdf, 1, tmp_path)
    assert lowest_line_report(words, height, ink)[0] <= 0
    bottom = max(w[3] for w in words)
    y0 = min(w[1] for w in words if abs(w[3] - bottom) < 0.5)
    cut = ink.copy()
    cut[int((bottom - 0.33 * (bottom - y0)) * ink.shape[0] / height):] = False
    assert lowest_line_report(words, height, cut)[0] > 0
