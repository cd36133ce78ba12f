"""The quickstart in JupyterLab, in headless Chromium: what a new user sees and does.

One JupyterLab session runs a generated copy of example_notebooks/quickstart.ipynb
(with one extra cell that prints, from the summaries engine directly, how many
subgroups each depth has and their rules). The tests then read the page.
"""
from __future__ import annotations

import re
from pathlib import Path

import nbformat
import pytest

REPO = Path(__file__).resolve().parents[2]

NOTEBOOK = "quickstart_browser.ipynb"
EXPECT_CELL = """\
import json as _json
_ref = sw.summarize_tree(draws, max_depth=4)
print("EXPECTED " + _json.dumps({
    str(d): {str(int(s)): r for s, r in zip(_ref.at_depth(d).table()["subgroup"], _ref.at_depth(d).table()["rule"])}
    for d in (1, 2, 3, 4)
}))
"""
FIND_EFFECTS = """() => [...document.querySelectorAll('.js-plotly-plot')]
  .find((el) => (el.data || []).some((t) => t.name === 'subgroups' || t.name === 'highlight'))"""
HIGHLIGHTED_RULE = f"""() => {{
  const el = ({FIND_EFFECTS})();
  if (!el) return null;
  const t = el.data.find((tr) => tr.name === 'highlight');
  return t && t.customdata && t.customdata.length ? String(t.customdata[0][0]) : null;
}}"""


def _plain(text: str) -> str:
    """A rule as figures.py prints it (escaped, wrapped with <br>, <= and >= typeset) back to one line."""
    import html

    return " ".join(html.unescape(text.replace("<br>", " ")).split())


def _typeset(rule: str) -> str:
    """A table rule as the figures print it: the one rule syntax of every output (core.rules.rule_text)."""
    from summarize_widgets.core.rules import rule_text

    return " ".join(rule_text(rule).split())


@pytest.fixture(scope="module")
def lab_page(lab_server, browser, run_for_expected):
    nb = nbformat.read(REPO / "example_notebooks" / "quickstart.ipynb", as_version=4)
    nb.cells.append(nbformat.v4.new_code_cell(EXPECT_CELL))
    nbformat.write(nb, lab_server.root / NOTEBOOK)
    page, expected = run_for_expected(browser, lab_server, NOTEBOOK, {"width": 1500, "height": 2400})
    from playwright.sync_api import expect

    explorer = page.locator(".swx-explorer")
    expect(explorer).to_be_visible()
    yield page, explorer, expected
    page.close()


def _leaves(explorer):
    return explorer.locator(".swtv-leaf")


def _set_depth(page, explorer, depth):
    from playwright.sync_api import expect

    handle = explorer.locator(".widget-slider .noUi-handle").first
    now = round(float(handle.get_attribute("aria-valuenow")))
    handle.focus()
    for _ in range(abs(depth - now)):
        handle.press("ArrowRight" if depth > now else "ArrowLeft")
    expect(handle).to_have_attribute("aria-valuenow", re.compile(rf"^{depth}(\.0+)?$"))


def test_tree_view_shows_one_box_per_subgroup(lab_page):
    from playwright.sync_api import expect

    page, explorer, expected = lab_page
    # The first view is at the default depth, the command line's (DEFAULT_DEPTH = 3).
    expect(_leaves(explorer)).to_have_count(len(expected["3"]))
    shown = sorted(int(x) for x in _leaves(explorer).evaluate_all("els => els.map(e => e.dataset.node)"))
    assert shown == sorted(int(k) for k in expected["3"])
    assert "subgroups at depth 3" in explorer.locator(".swtv-caption").inner_text()


def test_depth_control_reshapes_the_tree(lab_page):
    from playwright.sync_api import expect

    page, explorer, expected = lab_page
    assert len(expected["3"]) != len(expected["2"])
    _set_depth(page, explorer, 2)
    expect(_leaves(explorer)).to_have_count(len(expected["2"]))
    _set_depth(page, explorer, 1)
    expect(_leaves(explorer)).to_have_count(len(expected["1"]))
    _set_depth(page, explorer, 3)
    expect(_leaves(explorer)).to_have_count(len(expected["3"]))


def test_clicking_a_leaf_highlights_it_in_the_figure(lab_page, screenshot):
    from playwright.sync_api import expect

    page, explorer, expected = lab_page
    explorer.locator(".widget-tab .lm-TabBar-tab", has_text="Subgroup effects").click()
    page.wait_for_function(f"() => ({FIND_EFFECTS})() !== undefined")
    found = page.evaluate(HIGHLIGHTED_RULE)
    before = None if found is None else _plain(found)
    selected = explorer.locator(".swtv-selected").get_attribute("data-node")
    target = next(k for k in expected["3"] if k != selected and _typeset(expected["3"][k]) != before)
    explorer.locator(f'.swtv-leaf[data-node="{target}"]').click()
    expect(explorer.locator(".swtv-selected")).to_have_attribute("data-node", target)
    want = _typeset(expected["3"][target])
    page.wait_for_function(
        f"(want) => {{ const r = ({HIGHLIGHTED_RULE})(); return r !== null && "
        "r.replace(/<br>/g, ' ').replace(/&lt;/g, '<').replace(/&gt;/g, '>').replace(/&amp;/g, '&')"
        ".split(/\\s+/).join(' ') === want; }", arg=want)
    assert _plain(page.evaluate(HIGHLIGHTED_RULE)) == want != before
    # The status line names the selection too.
    expect(explorer.locator(".swx-status-line")).to_contain_text("Selected: ")
    screenshot(page, "explorer_selected.png")
    screenshot(explorer, "explorer_widget.png")


def test_every_figure_renders(lab_page, screenshot):
    from playwright.sync_api import expect

    page, explorer, expected = lab_page
    figure_tabs = ["Subgroup effects", "Fit by depth", "Trends", "Linear fit", "Contrasts"]
    for title in figure_tabs:
        explorer.locator(".widget-tab .lm-TabBar-tab", has_text=title).click()
        plot = explorer.locator(".widget-tab-contents > :not(.lm-mod-hidden) .js-plotly-plot")
        expect(plot).to_have_count(1)
        svg = plot.locator("svg.main-svg").first
        expect(svg).to_be_visible()
        box = svg.bounding_box()
        assert box and box["width"] > 300 and box["height"] > 150, (title, box)
        # The figure fills its panel (plotly's widget alone would stay at its default 700 px).
        drawn, room = plot.evaluate("el => [el._fullLayout.width, el.parentElement.clientWidth]")
        assert room - 80 <= drawn <= room, (title, drawn, room)
        # Something is drawn: points, lines or bands.
        expect(plot.locator(".scatterlayer .trace").first).to_be_attached()
        screenshot(explorer.locator(".widget-tab"), f"tab_{title.lower().replace(' ', '_')}.png")
    # One figure per figure tab (the Decisions tab draws its own curve when shown).
    assert explorer.locator(".js-plotly-plot:not(.swx-decisions .js-plotly-plot)").count() == len(figure_tabs)
    assert explorer.locator(".js-plotly-plot svg.main-svg").count() >= len(figure_tabs)
    explorer.locator(".widget-tab .lm-TabBar-tab", has_text="Table").click()
    expect(explorer.locator("table.sw-table:not(.swx-evidence table):not(.swx-decisions table) tbody tr")).to_have_count(len(expected["3"]))
    explorer.locator(".widget-tab .lm-TabBar-tab", has_text="Subgroup effects").click()


def test_an_impossible_setting_shows_a_message_in_the_widget(lab_page, screenshot):
    from playwright.sync_api import expect

    page, explorer, expected = lab_page
    box = explorer.locator(".widget-text", has_text="Smallest subgroup (units)").locator("input")
    box.fill("999999")
    box.press("Enter")
    error = explorer.locator(".swx-status-error")
    expect(error).to_be_visible()
    expect(error).to_contain_text("must be between 1 and")
    # In the words of the control, not of the Python argument.
    expect(error).to_contain_text("\u201cSmallest subgroup (units)\u201d")
    assert "min_size" not in error.inner_text()
    expect(error).to_contain_text("previous summaries are still shown")
    expect(_leaves(explorer)).to_have_count(len(expected["3"]))
    assert page.locator(".jp-OutputArea-output[data-mime-type='application/vnd.jupyter.stderr']").count() == 0
    assert "Traceback" not in page.locator(".jp-Notebook").inner_text()
    screenshot(page, "explorer_error.png")
