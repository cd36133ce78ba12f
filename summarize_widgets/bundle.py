"""The main job in one call: summarize draws and write a folder of tables, figures and a report.

Used by the command line (``summarize-widgets demo`` / ``report``) and usable from a notebook.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

from ._validate import SummaryError, check_int, check_interval, check_level

__all__ = ["SummaryBundle", "summarize_all", "write_summary_folder"]

#: Figure file formats written by :func:`write_summary_folder`.
FIGURE_FORMATS = ("svg", "pdf", "png")


@dataclass
class SummaryBundle:
    """The summaries of one set of draws (any may be None), and the files written from them."""

    draws: object
    tree: object
    additive: object = None
    linear: object = None
    groups: object = None
    files: list = field(default_factory=list)
    notes: list = field(default_factory=list)

    @property
    def results(self) -> dict:
        return {k: v for k, v in (("tree", self.tree), ("additive", self.additive), ("linear", self.linear),
                                  ("groups", self.groups)) if v is not None}


def summarize_all(draws, *, depth: int = 3, max_depth: int | None = None, min_size=None, columns=None,
                  groups=None, additive: bool = True, linear: bool = True, progress=None) -> SummaryBundle:
    """Tree (at ``depth``, grown to ``max_depth``), additive and linear summaries, and optional groups.

    Parameters
    ----------
    draws : EffectDraws
    depth : int, default 3
        Depth of the reported subgroups.
    max_depth : int, optional
        Depth the tree is grown to (default ``max(depth, 4)``), so summary R^2 is shown for every depth.
    min_size, columns
        Passed to :func:`summarize_tree` (``columns`` also to the additive and linear summaries).
    groups : mapping label -> pandas query, optional
        Pre-specified groups (:func:`summarize_groups`).
    """
    from .additive import summarize_additive
    from .groups import summarize_groups
    from .linear import summarize_linear
    from .tree import summarize_tree

    depth = check_int(depth, "depth", low=1, high=8)
    max_depth = max(depth, 4) if max_depth is None else check_int(max_depth, "max_depth", low=depth, high=8)
    tree = summarize_tree(draws, max_depth=max_depth, min_size=min_size, columns=columns, progress=progress).depth(depth)
    return SummaryBundle(
        draws=draws,
        tree=tree,
        additive=summarize_additive(draws, columns=columns) if additive else None,
        linear=summarize_linear(draws, columns=columns) if linear else None,
        groups=summarize_groups(draws, groups) if groups else None,
    )


def _folder_ready(out_dir: Path, overwrite: bool) -> None:
    if out_dir.exists() and not out_dir.is_dir():
        raise FileExistsError(f"{out_dir} exists and is not a folder; choose another output folder.")
    if out_dir.is_dir() and any(out_dir.iterdir()) and not overwrite:
        raise FileExistsError(
            f"Output folder {out_dir} already exists and is not empty; nothing was written. "
            "Choose a new folder, or pass overwrite=True (command line: --overwrite) to replace its files."
        )


def write_summary_folder(bundle: SummaryBundle, out_dir, *, level: float = 0.95, interval: str = "equal-tailed",
                         inputs=None, figures="auto", figure_formats=FIGURE_FORMATS, digits: int = 2,
                         title: str | None = None, overwrite: bool = False) -> list[Path]:
    """Write tables (LaTeX, Markdown, CSV, HTML), figures (SVG, PDF, PNG), ``report.html`` and
    ``provenance.json`` into ``out_dir``.

    Parameters
    ----------
    figures : {"auto", True, False}, default "auto"
        Static figure files need a Chromium-family browser (kaleido drives it). "auto" writes
        them when one is found and otherwise skips them (``bundle.notes`` says so; the report's
        interactive figures need no browser); True requires them; False skips them.

    An existing non-empty folder is refused unless ``overwrite=True``; every file is written
    atomically. Returns the written paths.
    """
    from .export import export_tables, provenance
    from .report import write_report

    level = check_level(level)
    interval = check_interval(interval)
    out_dir = Path(out_dir)
    _folder_ready(out_dir, overwrite)
    prov = provenance([bundle.draws, *bundle.results.values()], inputs=inputs,
                      settings={"level": level, "interval": interval, "digits": digits})
    written = list(export_tables(out_dir, tree=bundle.tree, groups=bundle.groups, linear=bundle.linear,
                                 additive=bundle.additive, level=level, interval=interval, digits=digits,
                                 provenance=prov, overwrite=overwrite).values())
    written.append(write_report(out_dir, tree=bundle.tree, groups=bundle.groups, additive=bundle.additive,
                                linear=bundle.linear, provenance=prov, level=level, interval=interval,
                                digits=digits, title=title or f"Posterior summary: {bundle.draws.label}",
                                overwrite=overwrite))
    if figures == "auto":
        from ._static_export import BrowserNotFoundError, find_browser
        try:
            find_browser()
        except BrowserNotFoundError as exc:
            figures = False
            bundle.notes.append(f"Static figure files skipped: {exc}")
    if figures:
        written.extend(_write_figures(bundle, out_dir / "figures", level, interval, figure_formats, overwrite))
    bundle.files = written
    return written


def _write_figures(bundle, fig_dir: Path, level, interval, formats, overwrite) -> list[Path]:
    from . import figures as F

    bad = [f for f in formats if f not in FIGURE_FORMATS]
    if bad:
        raise SummaryError(f"`figure_formats` must be among {list(FIGURE_FORMATS)}; got {bad}.")
    figs = {"subgroups": F.plot_subgroups(bundle.tree, level=level, interval=interval),
            "fit_r2_by_depth": F.plot_fit_by_depth(bundle.tree, level=level, interval=interval)}
    ids = list(bundle.tree.leaf_ids)
    if len(ids) > 1:
        best = int(bundle.tree.table(level=level, interval=interval).sort_values("mean").iloc[-1]["subgroup"])
        figs["contrasts"] = F.plot_contrasts(bundle.tree, best, level=level, interval=interval)
    if bundle.additive is not None:
        figs["trends"] = F.plot_trends(bundle.additive, level=level, interval=interval)
    if bundle.linear is not None:
        figs["coefficients"] = F.plot_coefficients(bundle.linear, level=level, interval=interval)
    if bundle.groups is not None:
        figs["groups"] = F.plot_subgroups(bundle.groups, level=level, interval=interval)
    fig_dir.mkdir(parents=True, exist_ok=True)
    items = {fig_dir / f"{name}.{fmt}": fig for name, fig in figs.items() for fmt in formats}
    return list(F.save_figures(items, overwrite=overwrite))
