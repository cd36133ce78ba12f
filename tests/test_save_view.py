"""Saving one explorer view as a folder: tables and figures, never over existing files, all or nothing."""
from __future__ import annotations

import json
import os

import numpy as np
import pandas as pd
import pytest

from summarize_widgets import SummaryError, summarize_linear, summarize_tree
from summarize_widgets.datasets import simulate_retrofit_study
from summarize_widgets.export import view as view_module
from summarize_widgets.export.view import write_view_folder
from summarize_widgets.figures.static import BrowserNotFoundError, find_browser


def _has_browser() -> bool:
    try:
        find_browser()
        return True
    except BrowserNotFoundError:
        return False


@pytest.fixture(scope="module")
def study():
    return simulate_retrofit_study(n_households=300, n_draws=120, seed=3)


@pytest.fixture(scope="module")
def tree(study):
    return summarize_tree(study.effect_draws(), max_depth=3).at_depth(2)


def test_the_view_folder_holds_the_subgroup_table_as_shown(tree, tmp_path):
    leaf = int(tree.leaf_ids[-1])
    out = tmp_path / "views" / "depth2"
    written = write_view_folder(out, tree=tree, level=0.9, interval="highest-density", selected=leaf,
                                view={"depth": 2, "selected_rule": "x"}, figures=False)
    assert out.is_dir() and all(p.exists() for p in written)
    # The CSV is the table the widget shows at this depth, level and interval kind (pandas reads it back).
    saved = pd.read_csv(out / "subgroups_depth2.csv")
    shown = tree.table(level=0.9, interval="highest-density")
    assert saved["subgroup"].tolist() == shown["subgroup"].tolist()
    np.testing.assert_allclose(saved["lower"], shown["lower"], rtol=1e-12)
    np.testing.assert_allclose(saved["upper"], shown["upper"], rtol=1e-12)
    record = json.loads((out / "view.json").read_text())
    assert record["level"] == 0.9 and record["interval"] == "highest-density" and record["selected"] == leaf
    assert record["view"]["depth"] == 2 and "subgroups_depth2.csv" in record["files"]
    readme = (out / "README.md").read_text()
    assert "exploratory" in readme and "moderator, not a mechanism" in readme
    # Nothing is left behind beside the folder (the hidden working folder was renamed into place).
    assert sorted(p.name for p in out.parent.iterdir()) == ["depth2"]


def test_an_existing_non_empty_folder_is_refused_and_untouched(tree, tmp_path):
    out = tmp_path / "taken"
    out.mkdir()
    (out / "notes.txt").write_text("mine")
    with pytest.raises(FileExistsError, match=r"already exists and is not empty; nothing was saved"):
        write_view_folder(out, tree=tree, figures=False)
    assert [p.name for p in out.iterdir()] == ["notes.txt"] and (out / "notes.txt").read_text() == "mine"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["taken"]
    # An empty folder is fine (it is filled).
    empty = tmp_path / "empty"
    empty.mkdir()
    write_view_folder(empty, tree=tree, figures=False)
    assert (empty / "subgroups_depth2.csv").exists()


def test_bad_names_are_refused_in_one_line(tree, tmp_path):
    with pytest.raises(SummaryError, match=r"Name a folder to save the view into"):
        write_view_folder("  ", tree=tree, figures=False)
    (tmp_path / "a_file").write_text("x")
    with pytest.raises(FileExistsError, match=r"exists and is not a folder"):
        write_view_folder(tmp_path / "a_file", tree=tree, figures=False)
    with pytest.raises(SummaryError, match=r"`figure_formats` must be a non-empty subset"):
        write_view_folder(tmp_path / "v", tree=tree, figure_formats=("gif",))
    assert sorted(p.name for p in tmp_path.iterdir()) == ["a_file"]


def test_a_failure_midway_leaves_no_folder(tree, tmp_path, monkeypatch):
    def broken(*args, **kwargs):
        raise OSError("disk full")
    monkeypatch.setattr(view_module, "_readme", broken)
    with pytest.raises(OSError, match="disk full"):
        write_view_folder(tmp_path / "v", tree=tree, figures=False)
    assert list(tmp_path.iterdir()) == []  # neither the folder nor the hidden working folder


def test_a_folder_filled_meanwhile_is_not_replaced(tree, tmp_path, monkeypatch):
    out = tmp_path / "v"
    real = view_module._readme

    def sneaky(*args, **kwargs):
        out.mkdir()
        (out / "other.txt").write_text("someone else's")
        return real(*args, **kwargs)
    monkeypatch.setattr(view_module, "_readme", sneaky)
    with pytest.raises(FileExistsError, match=r"appeared or filled while the view was being saved"):
        write_view_folder(out, tree=tree, figures=False)
    assert [p.name for p in out.iterdir()] == ["other.txt"]
    assert sorted(p.name for p in tmp_path.iterdir()) == ["v"]


@pytest.mark.skipif(not _has_browser() and os.environ.get("CI", "").lower() != "true",
                    reason="static figures need a Chromium-family browser")
def test_the_figures_of_the_view_are_written(study, tree, tmp_path):
    linear = summarize_linear(study.effect_draws())
    leaf = int(tree.leaf_ids[0])
    out = tmp_path / "v"
    written = write_view_folder(out, tree=tree, selected=leaf, linear=linear)
    names = sorted(p.relative_to(out).as_posix() for p in written if p.parent.name == "figures")
    assert names == sorted(f"figures/{n}.{f}" for n in ("subgroups", "fit_r2_by_depth", "contrasts", "coefficients")
                           for f in ("svg", "png"))
    png = (out / "figures" / "subgroups.png").read_bytes()
    # PNG signature, then the IHDR chunk: width and height as 4-byte big-endian integers (PNG specification).
    assert png[:8] == b"\x89PNG\r\n\x1a\n"
    assert int.from_bytes(png[16:20], "big") > 300 and int.from_bytes(png[20:24], "big") > 200
    assert (out / "figures" / "subgroups.svg").read_text().lstrip().startswith(("<svg", "<?xml"))


# -- the explorer's control ----------------------------------------------------------------------
def test_the_explorer_saves_its_current_view(study, tmp_path):
    from summarize_widgets.widgets import Explorer

    draws = study.effect_draws()
    ex = Explorer(draws, max_depth=3, depth=2, background=False, trends=False)
    leaf = int(ex.tree.leaf_ids[0])
    ex.apply(depth=3, level=0.8, selected=leaf)
    ex.save_folder_control.value = str(tmp_path / "mine")
    ex.save_button.click()
    assert "swx-status-error" not in ex.save_status.value and "Saved" in ex.save_status.value
    saved = pd.read_csv(tmp_path / "mine" / "subgroups_depth3.csv")
    shown = ex.tree.table(level=0.8)
    assert saved["subgroup"].tolist() == shown["subgroup"].tolist()
    np.testing.assert_allclose(saved["lower"], shown["lower"], rtol=1e-12)
    record = json.loads((tmp_path / "mine" / "view.json").read_text())
    assert record["view"]["depth"] == 3 and record["selected"] == leaf and record["level"] == 0.8
    assert (tmp_path / "mine" / "linear.csv").exists()
    # The same name again: refused, in words, and the folder is as it was.
    before = sorted(p.name for p in (tmp_path / "mine").iterdir())
    ex.save_button.click()
    assert "swx-status-error" in ex.save_status.value and "already exists and is not empty" in ex.save_status.value
    assert sorted(p.name for p in (tmp_path / "mine").iterdir()) == before
    ex.save_folder_control.value = ""
    ex.save_button.click()
    assert "Name a folder" in ex.save_status.value and not ex.save_button.disabled
