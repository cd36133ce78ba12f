"""The self-contained HTML report: offline plotly, escaping, cautions, provenance, refusal to overwrite."""
from __future__ import annotations

import os
from concurrent.futures import ThreadPoolExecutor
import re
from html.parser import HTMLParser
from pathlib import Path

import numpy as np
import pandas as pd
import plotly.graph_objects as go
import pytest

import summarize_widgets
from summarize_widgets import EffectDraws, SummaryError
from summarize_widgets import export as ex
from summarize_widgets.export import report as rp
from summarize_widgets.summaries.additive import summarize_additive
from summarize_widgets.summaries.groups import summarize_groups
from summarize_widgets.summaries.linear import summarize_linear
from summarize_widgets.summaries.tree import summarize_tree

EVIL_NAME = "<script>alert(1)</script>"
EVIL_CATEGORY = 'a&b "q"'


@pytest.fixture(scope="module")
def results():
    """A simulated retrofit posterior whose tree splits on a covariate named like a script and a category with & and "."""
    rng = np.random.default_rng(11)
    n, S = 240, 100
    cov = pd.DataFrame({"baseline_bill": rng.uniform(40, 300, n), EVIL_NAME: rng.choice([EVIL_CATEGORY, "gas", "oil"], n)})
    mu = -0.08 * cov["baseline_bill"].to_numpy() + np.where(cov[EVIL_NAME] == EVIL_CATEGORY, -9.0, 0.0)
    draws = EffectDraws(mu + rng.normal(0, 2.0, (S, n)), cov, label="bill change")
    tree = summarize_tree(draws, max_depth=2)
    assert any(EVIL_NAME in r and EVIL_CATEGORY in r for r in tree.table()["rule"])  # the test needs this split
    groups = summarize_groups(draws, {"big & <b>bills</b>": "baseline_bill > 200"})
    linear = summarize_linear(draws)
    additive = summarize_additive(draws)
    return draws, tree, groups, linear, additive


class Page(HTMLParser):
    """Collects tags, script elements and visible text."""

    def __init__(self):
        super().__init__(convert_charrefs=True)
        self.tags, self.scripts, self.text, self._in_script = [], [], [], None

    def handle_starttag(self, tag, attrs):
        self.tags.append((tag, dict(attrs)))
        if tag == "script":
            self._in_script = [dict(attrs), ""]

    def handle_endtag(self, tag):
        if tag == "script" and self._in_script is not None:
            self.scripts.append(tuple(self._in_script))
            self._in_script = None

    def handle_data(self, data):
        if self._in_script is not None:
            self._in_script[1] += data
        else:
            self.text.append(data)


def parse(page: str) -> Page:
    p = Page()
    p.feed(page)
    p.close()
    return p


@pytest.fixture(scope="module")
def full_page(results):
    _, tree, groups, linear, additive = results
    return rp.render_report(tree=tree, groups=groups, linear=linear, additive=additive, title=f"Report {EVIL_NAME}")


def test_report_embeds_plotly_once_and_fetches_nothing(full_page):
    p = parse(full_page)
    n_figures = sum(1 for t, a in p.tags if t == "div" and "plotly-graph-div" in a.get("class", ""))
    assert n_figures == 6  # subgroups, R^2 by depth, contrasts, groups, trends, coefficients
    assert all("src" not in attrs for attrs, _ in p.scripts)  # no <script src="http...">
    assert len(p.scripts) == 1 + n_figures  # the library once, then one small script per figure
    lib = p.scripts[0][1]
    assert re.search(r"plotly\.js v\d", lib[:200]) and len(lib) > 1_000_000
    assert all("plotly.js v" not in body for _, body in p.scripts[1:])
    assert not [a for t, a in p.tags if any(str(v).startswith(("http:", "https:", "//")) for k, v in a.items() if k in ("src", "href"))]
    csp = [a["content"] for t, a in p.tags if t == "meta" and a.get("http-equiv") == "Content-Security-Policy"]
    assert csp and "default-src 'none'" in csp[0]


def test_report_escapes_every_text(full_page):
    p = parse(full_page)
    text = "".join(p.text)
    # The parser decodes entities: the names come back as text, so they were escaped in the source.
    assert EVIL_NAME in text and EVIL_CATEGORY in text and "big & <b>bills</b>" in text
    assert f"Report {EVIL_NAME}" in text
    assert [t for t, _ in p.tags].count("b") == 0  # the group label's <b> is not markup
    assert {t for t, _ in p.tags if t == "script"} and len(p.scripts) == 7  # no injected script element
    assert "<script>alert" not in full_page  # neither in the markup nor in the figures' JSON
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in full_page


def test_report_has_cautions_tables_settings_and_provenance(full_page, results):
    draws = results[0]
    p = parse(full_page)
    text = " ".join(" ".join(p.text).split())
    for caution in rp.CAUTIONS:
        assert caution in text
    assert f"summarize_widgets {summarize_widgets.__version__}" in text
    assert ex.provenance(draws)["draws"]["sha256"] in text
    tables = [a for t, a in p.tags if t == "table"]
    assert len(tables) == 7 and all(a["class"] == "sw-table" for a in tables)
    for heading in ("Subgroups from the summary tree", "Pre-specified groups", "Trends (additive summary)",
                    "Linear summary", "Settings and provenance"):
        assert heading in text
    assert "max_depth 2" in text and "min_size" in text and "level 0.95" in text


def test_write_report_refuses_then_overwrites(tmp_path, results):
    tree = results[1]
    path = rp.write_report(tmp_path, tree=tree, figures=None)
    assert path == tmp_path / "report.html"
    first = path.read_text()
    with pytest.raises(FileExistsError, match=r"report\.html.*already exists.*overwrite=True.*--overwrite"):
        rp.write_report(tmp_path, tree=tree.at_depth(1), figures=None)
    assert path.read_text() == first
    rp.write_report(tmp_path, tree=tree.at_depth(1), figures=None, overwrite=True)
    assert path.read_text() != first
    assert os.listdir(tmp_path) == ["report.html"]  # no temporary files left


def test_report_without_figures_has_no_script(results):
    tree = results[1]
    page = rp.render_report(tree=tree, figures=None)
    assert "<script" not in page and "plotly-graph-div" not in page
    assert parse(page).tags[0][0] == "html"


def test_report_with_own_figures_escapes_titles(results):
    tree = results[1]
    fig = go.Figure(go.Bar(x=[EVIL_NAME], y=[1]), layout_title_text=EVIL_NAME)
    page = rp.render_report(tree=tree, figures={'<img src=x onerror="alert(1)">': fig})
    p = parse(page)
    assert not [t for t, _ in p.tags if t == "img"]
    assert '<img src=x onerror="alert(1)">' in "".join(p.text)
    assert len(p.scripts) == 2 and "<script>alert" not in page


def test_report_uses_given_provenance(tmp_path, results):
    draws, tree = results[:2]
    f = tmp_path / "draws.npy"
    np.save(f, np.asarray(draws._values))
    prov = ex.provenance(tree, inputs={"draws": f}, settings={"depth": 2})
    text = " ".join(parse(rp.render_report(tree=tree, figures=None, provenance=prov)).text)
    assert f"draws.npy \u2014 SHA-256 {prov['inputs'][0]['sha256']}" in " ".join(text.split())


def test_report_errors(results):
    tree = results[1]
    with pytest.raises(SummaryError, match=r"`figures` must be 'auto', None, or a dict of title -> plotly figure; got 'all'"):
        rp.render_report(tree=tree, figures="all")
    with pytest.raises(SummaryError, match=r"`figures` must hold plotly figures; got str"):
        rp.render_report(tree=tree, figures={"x": "not a figure"})
    with pytest.raises(SummaryError, match=r"needs at least one of `tree`"):
        rp.render_report()
    with pytest.raises(SummaryError, match=r"`level` must be a number strictly between 0 and 1"):
        rp.render_report(tree=tree, level=95)
    with pytest.raises(SummaryError, match=r"`provenance` must be a dict made by"):
        rp.render_report(tree=tree, figures=None, provenance={"a": 1})



# ----------------------------------------------------------------------------- in a real browser, offline
CHROMIUM = os.environ.get("SUMMARIZE_WIDGETS_CHROMIUM", "/usr/bin/chromium")


@pytest.mark.browser
def test_report_renders_offline_in_chromium(tmp_path, full_page):
    if not (os.path.isfile(CHROMIUM) and os.access(CHROMIUM, os.X_OK)):
        if os.environ.get("CI", "").lower() == "true":
            pytest.fail(f"no chromium at {CHROMIUM} (apt-get install -y chromium)")
        pytest.skip(f"no chromium at {CHROMIUM}")
    path = tmp_path / "report.html"
    path.write_text(full_page, encoding="utf-8")
    # Playwright's sync API refuses to start in a thread where an earlier test (kaleido, nbclient)
    # left an asyncio loop marked as running; a fresh thread has none.
    with ThreadPoolExecutor(1) as pool:
        per_div, errors, outside, dialogs = pool.submit(_render_offline, path).result()
    assert len(per_div) == 6 and min(per_div) >= 1
    assert errors == [] and outside == [] and dialogs == []


def _render_offline(path):
    from playwright.sync_api import sync_playwright

    errors, outside, dialogs = [], [], []
    with sync_playwright() as pw:
        browser = pw.chromium.launch(executable_path=CHROMIUM, args=["--no-sandbox", "--disable-gpu"])
        try:
            page = browser.new_page()
            page.on("pageerror", lambda e: errors.append(str(e)))
            page.on("console", lambda m: errors.append(m.text) if m.type == "error" else None)
            page.on("dialog", lambda d: (dialogs.append(d.message), d.dismiss()))  # alert(1) would land here

            def block(route):  # any request that is not the file itself would need a network
                outside.append(route.request.url)
                route.abort()

            page.route(re.compile(r"^(?!file:).*"), block)
            page.goto(Path(path).as_uri())
            page.wait_for_function("document.querySelectorAll('.plotly-graph-div .main-svg').length >= 6", timeout=60_000)
            per_div = page.evaluate("[...document.querySelectorAll('.plotly-graph-div')].map(d => d.querySelectorAll('.main-svg').length)")
        finally:
            browser.close()
    return per_div, errors, outside, dialogs
