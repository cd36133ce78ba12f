"""Write a folder of tables, figures, ``report.html`` and ``provenance.json`` from a :class:`SummaryBundle`."""
from __future__ import annotations

import os
from pathlib import Path

from ..core.validate import SummaryError, check_interval, check_level
from ..summaries.bundle import SummaryBundle
from .. import figures as F
from ..figures.static import BrowserNotFoundError, find_browser
from .provenance import provenance
from .report import write_report
from .tables import export_tables

__all__ = ["write_summary_folder", "check_output_folder", "FIGURE_FORMATS"]

#: Figure file formats written by :func:`write_summary_folder`.
FIGURE_FORMATS = ("svg", "pdf", "png")


def check_output_folder(out_dir: Path, overwrite: bool) -> None:
    """Refuse an output folder that cannot be written, before any computation.

    Refused: a path that is a file, a path below a file, a folder whose nearest existing
    parent is not writable, and (unless ``overwrite``) an existing non-empty folder.
    """
    out_dir = Path(out_dir)
    if out_dir.exists() and not out_dir.is_dir():
        raise FileExistsError(f"{out_dir} exists and is not a folder; choose another output folder.")
    parent = out_dir if out_dir.exists() else out_dir.parent
    while not parent.exists() and parent != parent.parent:
        parent = parent.parent
    if parent.exists() and not parent.is_dir():
        raise FileExistsError(f"{out_dir} is below {parent}, which is a file, not a folder; choose another output folder.")
    if parent.exists() and not os.access(parent, os.W_OK | os.X_OK):
        raise PermissionError(f"{out_dir} cannot be created: {parent} is not writable; choose another output folder.")
    if out_dir.is_dir() and any(out_dir.iterdir()) and not overwrite:
        raise FileExistsError(
            f"Output folder {out_dir} already exists and is not empty; nothing was written. "
            "Choose a new folder, or pass overwrite=True (command line: --overwrite) to replace its files."
        )


def write_summary_folder(bundle: SummaryBundle, out_dir, *, level: float = 0.95, interval: str = "equal-tailed",
                         inputs=None, figures="auto", figure_formats=FIGURE_FORMATS, digits: int | None = None,
                         title: str | None = None, overwrite: bool = False, decisions: bool = True) -> list[Path]:
    """Write tables (LaTeX, Markdown, CSV, HTML), figures (SVG, PDF, PNG), ``report.html`` and
    ``provenance.json`` into ``out_dir``.

    Parameters
    ----------
    figures : {"auto", True, False}, default "auto"
        Static figure files need a Chromium-family browser (kaleido drives it). "auto" writes
        them when one is found and otherwise skips them (``bundle.notes`` says so; the report's
        interactive figures need no browser); True requires them; False skips them.
    decisions : bool, default True
        Also write the value of targeting the tree's subgroups (rule: P(benefit) >= 0.9, no cost;
        in-sample and cross-fitted) and, for complier designs, the uptake drivers: their tables
        and a report section (``summarize-widgets targeting`` sets the rule and the cost).

    An existing non-empty folder is refused unless ``overwrite=True``; every file is written
    atomically. Returns the written paths.
    """

    level = check_level(level)
    interval = check_interval(interval)
    out_dir = Path(out_dir)
    check_output_folder(out_dir, overwrite)
    evidence = [bundle.evidence] if bundle.evidence is not None else []
    prov = provenance([bundle.draws, *bundle.results.values(), *evidence], inputs=inputs,
                      settings={"level": level, "interval": interval, "digits": digits})
    chosen = _decisions(bundle) if decisions else None
    written = list(export_tables(out_dir, tree=bundle.tree, groups=bundle.groups, linear=bundle.linear,
                                 additive=bundle.additive, level=level, interval=interval, digits=digits,
                                 provenance=prov, overwrite=overwrite, evidence=bundle.evidence).values())
    written.append(write_report(out_dir, tree=bundle.tree, groups=bundle.groups, additive=bundle.additive,
                                linear=bundle.linear, provenance=prov, level=level, interval=interval,
                                digits=digits, title=title or f"Posterior summary: {bundle.draws.label}",
                                overwrite=overwrite, evidence=bundle.evidence, decisions=chosen))
    if chosen:
        from .decisions import write_decision_tables

        written.extend(write_decision_tables(out_dir, chosen.get("targeting"), chosen.get("uptake"), level=level,
                                             overwrite=overwrite))
    if figures == "auto":
        try:
            find_browser()
        except BrowserNotFoundError as exc:
            figures = False
            bundle.notes.append(f"Static figure files skipped: {exc}")
    if figures:
        written.extend(_write_figures(bundle, out_dir / "figures", level, interval, figure_formats, overwrite))
    bundle.files = written
    return written


def _decisions(bundle: SummaryBundle):
    """Value of targeting (and uptake drivers for complier designs) on the bundle's tree, or None with a note."""
    from ..core.validate import SummaryError
    from ..summaries.targeting import value_of_targeting
    from ..summaries.uptake import uptake_drivers

    if bundle.tree is None:
        return None
    try:
        out = {"targeting": value_of_targeting(bundle.tree)}
        if bundle.draws.is_complier_weighted:
            out["uptake"] = uptake_drivers(bundle.tree)
    except SummaryError as exc:
        bundle.notes.append(f"Decision tables skipped: {exc}")
        return None
    return out


def _write_figures(bundle, fig_dir: Path, level, interval, formats, overwrite) -> list[Path]:

    bad = [f for f in formats if f not in FIGURE_FORMATS]
    if bad:
        raise SummaryError(f"`figure_formats` must be among {list(FIGURE_FORMATS)}; got {bad}.")
    figs = {"subgroups": F.plot_subgroups(bundle.tree, level=level, interval=interval),
            "fit_r2_by_depth": F.plot_fit_by_depth(bundle.tree, level=level, interval=interval)}
    ids = list(bundle.tree.leaf_ids)
    if len(ids) > 1:
        best = bundle.tree.best_subgroup(level=level, interval=interval)
        figs["contrasts"] = F.plot_contrasts(bundle.tree, best, level=level, interval=interval)
    if bundle.additive is not None:
        figs["trends"] = F.plot_curves(bundle.additive, level=level, interval=interval)
    if bundle.linear is not None:
        figs["coefficients"] = F.plot_coefficients(bundle.linear, level=level, interval=interval)
    if bundle.groups is not None:
        figs["groups"] = F.plot_subgroups(bundle.groups, level=level, interval=interval)
    fig_dir.mkdir(parents=True, exist_ok=True)
    items = {fig_dir / f"{name}.{fmt}": fig for name, fig in figs.items() for fmt in formats}
    return list(F.save_figures(items, overwrite=overwrite))
