"""One explorer view saved as a folder: its subgroup table (and the other tables) and its figures.

The explorer's "Save this view" control calls :func:`write_view_folder`. The folder
appears whole or not at all: everything is written into a hidden folder beside it,
which is renamed to the name asked for only when every file is there. A folder that
exists and is not empty is refused before anything is computed.
"""
from __future__ import annotations

import errno
import json
import os
import shutil
import tempfile
from pathlib import Path

from .. import figures as F
from ..core.files import write_atomic
from ..core.validate import SummaryError, check_interval, check_level
from ..figures.static import BrowserNotFoundError, find_browser
from .folder import check_output_folder
from .provenance import jsonable, provenance
from .report import CAUTIONS
from .tables import export_tables

__all__ = ["write_view_folder", "check_view_folder", "VIEW_FIGURE_FORMATS"]

#: Figure formats a saved view carries by default (PDF on request: it is the slowest to render).
VIEW_FIGURE_FORMATS = ("svg", "png")


def check_view_folder(out_dir) -> Path:
    """The folder to save a view into, refused (one clear line) if it cannot take one.

    Refused: an empty name, an existing non-empty folder (a saved view never replaces files),
    a path that is a file or below a file, and a place that is not writable.
    """
    if out_dir is None or not str(out_dir).strip():
        raise SummaryError("Name a folder to save the view into (for example views/depth3).")
    out_dir = Path(str(out_dir).strip()).expanduser()
    if out_dir.is_dir() and any(out_dir.iterdir()):
        raise FileExistsError(f"Folder {out_dir} already exists and is not empty; nothing was saved. "
                              "Name a new folder (or an empty one): a saved view never replaces files.")
    check_output_folder(out_dir, overwrite=False)
    return out_dir


def write_view_folder(out_dir, *, tree, level: float = 0.95, interval: str = "equal-tailed", selected=None,
                      linear=None, additive=None, covariate=None, view=None, figures="auto",
                      figure_formats=VIEW_FIGURE_FORMATS, digits: int | None = None) -> list[Path]:
    """Write the tables and figures of one view into a new folder ``out_dir``.

    Parameters
    ----------
    out_dir : str or Path
        A folder that does not exist yet, or an empty one (its parents are created).
    tree : TreeSummary
        At the depth shown.
    level, interval
        Of every interval in the tables and figures.
    selected : int, optional
        Node id of the selected subgroup: highlighted in the subgroup figure; when it is a
        subgroup at this depth, the contrasts figure compares it with the others.
    linear, additive : optional
        The linear and additive summaries (their tables and figures are added when given).
    covariate : str, optional
        The covariate whose trend is shown (all covariates' curves when None).
    view : dict, optional
        What the view shows (depth, selection, ...), saved in ``view.json`` beside the settings.
    figures : {"auto", True, False}, default "auto"
        Static figures need a Chromium-family browser: "auto" writes them when one is found
        and otherwise says in ``README.md`` that they were skipped.
    figure_formats : sequence of {"svg", "pdf", "png"}
    digits : int, optional
        Digits of the text tables (default: per column).

    Returns
    -------
    list of Path
        The written files, at their final place.

    Raises
    ------
    FileExistsError
        ``out_dir`` exists and is not empty (nothing is written).
    SummaryError
        A setting that cannot work.
    """
    out_dir = check_view_folder(out_dir)
    level, interval = check_level(level), check_interval(interval)
    bad = [f for f in figure_formats if f not in ("svg", "pdf", "png")]
    if bad or not figure_formats:
        raise SummaryError(f"`figure_formats` must be a non-empty subset of ['svg', 'pdf', 'png']; got {list(figure_formats)}.")
    if figures not in ("auto", True, False):
        raise SummaryError(f"`figures` must be 'auto', True or False; got {figures!r}.")
    notes = []
    if figures == "auto":
        try:
            find_browser()
            figures = True
        except BrowserNotFoundError as exc:
            figures = False
            notes.append(f"Static figure files were skipped: {exc}")
    leaf_ids = [int(i) for i in tree.leaf_ids]
    sel = None if selected is None or int(selected) < 0 else int(selected)

    out_dir.parent.mkdir(parents=True, exist_ok=True)
    # Built beside the target (same file system), renamed into place at the end: the folder is whole or absent.
    work = Path(tempfile.mkdtemp(prefix=f".{out_dir.name}.", suffix=".partial", dir=out_dir.parent))
    try:
        results = [tree.draws, tree, *(r for r in (linear, additive) if r is not None)]
        settings = {"level": level, "interval": interval, "digits": digits, **dict(view or {})}
        prov = provenance(results, settings=settings)
        names = [p.name for p in export_tables(work, tree=tree, linear=linear, additive=additive, level=level,
                                               interval=interval, digits=digits, provenance=prov).values()]
        if figures:
            figs = {"subgroups": F.plot_subgroups(tree, level=level, interval=interval,
                                                  highlight=sel if sel in leaf_ids else None),
                    "fit_r2_by_depth": F.plot_fit_by_depth(tree, level=level, interval=interval,
                                                           current_depth=int(tree.depth))}
            if sel in leaf_ids and len(leaf_ids) > 1:
                figs["contrasts"] = F.plot_contrasts(tree, sel, level=level, interval=interval)
            if additive is not None:
                figs["trends"] = F.plot_curves(additive, covariate=covariate, level=level, interval=interval)
            if linear is not None:
                figs["coefficients"] = F.plot_coefficients(linear, level=level, interval=interval)
            (work / "figures").mkdir()
            items = {work / "figures" / f"{name}.{fmt}": fig for name, fig in figs.items() for fmt in figure_formats}
            names += [f"figures/{p.name}" for p in F.save_figures(items)]
        record = {"view": jsonable(dict(view or {})), "level": level, "interval": interval,
                  "selected": sel, "files": sorted(names) + ["README.md"], "notes": notes}
        write_atomic(work / "view.json", json.dumps(record, indent=2) + "\n")
        names.append("view.json")
        write_atomic(work / "README.md", _readme(tree, level, interval, view or {}, sorted(names), notes))
        names.append("README.md")
        _move_into_place(work, out_dir)
    except BaseException:
        shutil.rmtree(work, ignore_errors=True)
        raise
    return [out_dir / n for n in names]


def _move_into_place(work: Path, out_dir: Path) -> None:
    """Rename the finished folder to ``out_dir``; refuse if something appeared there meanwhile."""
    try:
        if out_dir.is_dir():
            out_dir.rmdir()  # empty (checked): fails, and so refuses, if a file appeared since
        os.rename(work, out_dir)
    except OSError as exc:
        if exc.errno in (errno.ENOTEMPTY, errno.EEXIST) or out_dir.exists():
            raise FileExistsError(f"Folder {out_dir} appeared or filled while the view was being saved; "
                                  "nothing was replaced. Name another folder.") from None
        raise


def _readme(tree, level, interval, view, names, notes) -> str:
    kind = "highest-density" if interval == "highest-density" else "equal-tailed"
    lines = [f"# Saved view: {tree.label}", "",
             f"Tree depth {tree.depth}, {len(tree.leaf_ids)} subgroups, {100 * level:g}% {kind} credible intervals.", ""]
    shown = {k: v for k, v in view.items() if k not in ("level", "interval")}
    if shown:
        lines += ["## What the view showed", ""] + [f"- {k}: {v}" for k, v in shown.items()] + [""]
    lines += ["## Files", ""] + [f"- `{n}`" for n in names] + [""]
    if notes:
        lines += ["## Notes", ""] + [f"- {n}" for n in notes] + [""]
    lines += ["## Read with care", ""] + [f"- {c}" for c in CAUTIONS] + [""]
    return "\n".join(lines)
