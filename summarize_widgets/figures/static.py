"""Static export of plotly figures to SVG, PDF and PNG through kaleido and a local Chromium.

Nothing is downloaded: the browser is found on this machine (``BROWSER_PATH``, then PATH, then
the usual install locations). Files are written atomically and never replace an existing file
unless asked.
"""
from __future__ import annotations

import asyncio
import os
import shutil
import threading
from collections.abc import Mapping
from pathlib import Path

import numpy as np
import plotly.graph_objects as go

from ..core.files import write_atomic
from ..core.validate import SummaryError

__all__ = ["save_figure", "save_figures", "find_browser", "BrowserNotFoundError"]

# -- static export ---------------------------------------------------------------------------
# kaleido 1.x renders through a Chromium-family browser driven by choreographer. We locate the
# browser ourselves (so the error says how to install one) and never download one: offline
# machines and CI use Debian's `chromium`. MathJax is switched off because kaleido would fetch
# it from a CDN; plotly.js comes from the plotly package itself.
_FORMATS = ("svg", "pdf", "png")
_BROWSER_NAMES = ("chromium", "chromium-browser", "google-chrome-stable", "google-chrome", "chrome",
                  "microsoft-edge", "brave-browser")
_TYPICAL_PATHS = ("/usr/bin/chromium", "/usr/bin/chromium-browser", "/usr/bin/google-chrome-stable",
                  "/usr/bin/google-chrome", "/snap/bin/chromium",
                  "/Applications/Google Chrome.app/Contents/MacOS/Google Chrome",
                  "/Applications/Chromium.app/Contents/MacOS/Chromium")
_INSTALL_HINT = ("Static figure export needs a Chromium-family browser; install chromium "
                 "(for example `apt-get install chromium` on Debian/Ubuntu) or set BROWSER_PATH "
                 "to the browser's executable.")


class BrowserNotFoundError(RuntimeError):
    """No Chromium-family browser for static export (kaleido needs one)."""


def _is_exe(path) -> bool:
    return bool(path) and os.path.isfile(path) and os.access(path, os.X_OK)


def find_browser() -> str:
    """Path of the browser kaleido will drive for static export.

    Order: the ``BROWSER_PATH`` environment variable (kaleido's own setting), then
    ``chromium``/Chrome/Edge/Brave on ``PATH``, then their usual install locations.
    Nothing is downloaded.

    Raises
    ------
    BrowserNotFoundError
        When no browser is found (the message says how to install one).
    """
    env = os.environ.get("BROWSER_PATH")
    if env:
        if _is_exe(env):
            return env
        raise BrowserNotFoundError(f"BROWSER_PATH is set to {env!r}, which is not an executable file. "
                                   + _INSTALL_HINT)
    for name in _BROWSER_NAMES:
        found = shutil.which(name)
        if _is_exe(found):
            return found
    for path in _TYPICAL_PATHS:
        if _is_exe(path):
            return path
    raise BrowserNotFoundError("No Chromium-family browser found. " + _INSTALL_HINT)


def _resolve_target(path, format, overwrite: bool) -> tuple[Path, str]:
    """Check the output path and format before any rendering (fail fast, name the file)."""
    if not isinstance(path, (str, os.PathLike)):
        raise SummaryError(f"`path` must be a file path (str or os.PathLike); got {type(path).__name__}.")
    target = Path(path)
    suffix = target.suffix.lower().lstrip(".")
    if format is None:
        if suffix not in _FORMATS:
            raise SummaryError(f"`format` was not given and the file name {str(target)!r} does not end in "
                               f"one of .svg, .pdf, .png; pass `format=` or change the suffix.")
        format = suffix
    format = str(format).lower()
    if format not in _FORMATS:
        raise SummaryError(f"`format` must be one of 'svg', 'pdf', 'png'; got {format!r}.")
    if suffix in _FORMATS and suffix != format:
        raise SummaryError(f"`format` is {format!r} but the file name {str(target)!r} ends in .{suffix}; "
                           "make them agree.")
    if not target.parent.is_dir():
        raise SummaryError(f"The folder {str(target.parent)!r} for {str(target)!r} does not exist; create it first.")
    if target.exists() and not overwrite:
        raise FileExistsError(f"{str(target)!r} already exists; pass overwrite=True to replace it.")
    return target, format


def _check_size(value, name: str, *, allow_float: bool = False):
    ok = (float, int, np.floating, np.integer) if allow_float else (int, np.integer)
    if value is None:
        return None
    if isinstance(value, bool) or not isinstance(value, ok) or not np.isfinite(value) or value <= 0:
        what = "a positive number" if allow_float else "a positive integer (pixels)"
        raise SummaryError(f"`{name}` must be {what}; got {value!r}.")
    return float(value) if allow_float else int(value)


# kaleido prints a PDF through Chromium's printToPDF with 0.1 inch page margins, on a page the size
# of the figure: Chromium shrinks the figure to the narrower printable width and cuts off what falls
# below the printable height, so the bottom line of text (an axis title, a note) lost its lower
# part while PNG and SVG kept it. A CSS page rule with no margin, in kaleido's own page template
# (its public ``PageGenerator``), makes the printable area the whole page: the PDF page is the
# figure, drawn at full size, as in the PNG and the SVG.
_PAGE_STYLE = "<style>@page { margin: 0; } html, body { margin: 0; padding: 0; } img { display: block; }</style>"


def _page_template(kaleido, plotly=None):
    """kaleido's page template with zero page margins (see ``_PAGE_STYLE``); MathJax off (no CDN)."""

    class FullBleedPage(kaleido.PageGenerator):
        header = kaleido.PageGenerator.header.replace("</style>", "</style>\n        " + _PAGE_STYLE, 1)

    kwargs = {"mathjax": False}
    if plotly:
        kwargs["plotly"] = plotly
    return FullBleedPage(**kwargs)


def _render(jobs: list[tuple[dict, dict]]) -> list[bytes]:
    """Render (figure dict, options) pairs in one browser session; returns the bytes of each."""
    try:
        import kaleido
    except ImportError as err:  # pragma: no cover - kaleido is a dependency
        raise BrowserNotFoundError("Static figure export needs the `kaleido` package (pip install kaleido).") from err
    browser = find_browser()
    import plotly

    plotly_js = Path(plotly.__file__).parent / "package_data" / "plotly.min.js"
    page = _page_template(kaleido, plotly=str(plotly_js) if plotly_js.is_file() else None)
    kopts = dict(n=1, path=browser, page_generator=page)

    async def run():
        async with kaleido.Kaleido(**kopts) as k:
            return [await k.calc_fig(fig, opts=opts) for fig, opts in jobs]

    # A thread with its own event loop: works from plain scripts and from inside Jupyter's loop.
    box: dict = {}

    def target():
        try:
            box["out"] = asyncio.run(run())
        except BaseException as err:  # noqa: BLE001 - re-raised below in the caller's thread
            box["err"] = err

    t = threading.Thread(target=target, name="summarize-widgets-export")
    t.start()
    t.join()
    if "err" in box:
        raise RuntimeError(f"Static export through kaleido with the browser {browser!r} failed: "
                           f"{type(box['err']).__name__}: {box['err']}") from box["err"]
    return box["out"]


def save_figures(items, *, overwrite: bool = False, width: int | None = None, height: int | None = None,
                 scale: float = 1.0) -> list[Path]:
    """Save several figures with one browser start (much faster than one :func:`save_figure` each).

    Parameters
    ----------
    items : mapping path -> Figure, or iterable of (Figure, path)
        Formats come from the suffixes (.svg, .pdf, .png).
    overwrite, width, height, scale
        As in :func:`save_figure`.

    Returns
    -------
    list of pathlib.Path
        The files written, in order. Every target is checked before anything is rendered,
        so an existing file stops the whole batch without writing any file.
    """
    pairs = list(items.items()) if isinstance(items, Mapping) else [(p, f) for f, p in items]
    width, height = _check_size(width, "width"), _check_size(height, "height")
    scale = _check_size(scale, "scale", allow_float=True)
    targets, jobs, seen = [], [], set()
    for path, fig in pairs:
        if not isinstance(fig, go.Figure):
            raise SummaryError(f"`fig` for {str(path)!r} must be a plotly.graph_objects.Figure; "
                               f"got {type(fig).__name__}.")
        target, fmt = _resolve_target(path, None, overwrite)
        if target.resolve() in seen:
            raise SummaryError(f"{str(target)!r} is listed twice in `items`.")
        seen.add(target.resolve())
        targets.append(target)
        jobs.append(_job(fig, fmt, width, height, scale))
    for target, data in zip(targets, _render(jobs)):
        write_atomic(target, data, overwrite=overwrite)
    return targets


def _job(fig: go.Figure, fmt: str, width, height, scale) -> tuple[dict, dict]:
    layout = fig.layout
    # Vector files keep the layout size: a scale there would only enlarge the page, not add detail.
    opts = dict(format=fmt, width=width or layout.width or 900, height=height or layout.height or 500,
                scale=scale if fmt == "png" else 1)
    return fig.to_dict(), opts


def save_figure(fig: go.Figure, path, *, format: str | None = None, overwrite: bool = False,
                width: int | None = None, height: int | None = None, scale: float = 1.0) -> Path:
    """Save a figure as SVG, PDF or PNG (through kaleido and a local Chromium; nothing is downloaded).

    Parameters
    ----------
    fig : plotly.graph_objects.Figure
    path : str or os.PathLike
        Output file; its folder must exist.
    format : {"svg", "pdf", "png"}, optional
        Default: from the file suffix.
    overwrite : bool, default False
        Replace an existing file; otherwise an existing file raises ``FileExistsError`` naming it.
    width, height : int, optional
        Size in layout pixels; default the figure's own size, else 900 x 500.
    scale : float, default 1.0
        Pixel multiplier for PNG (a PNG is ``width*scale`` x ``height*scale`` pixels; 3 gives
        about 300 dpi at print size). SVG and PDF keep the layout size.

    Returns
    -------
    pathlib.Path
        The file written (atomically: a temporary file in the same folder, then a rename).

    Raises
    ------
    BrowserNotFoundError
        No Chromium-family browser (install chromium, e.g. ``apt-get install chromium``).
    """
    if not isinstance(fig, go.Figure):
        raise SummaryError(f"`fig` must be a plotly.graph_objects.Figure; got {type(fig).__name__}.")
    target, fmt = _resolve_target(path, format, overwrite)
    width, height = _check_size(width, "width"), _check_size(height, "height")
    scale = _check_size(scale, "scale", allow_float=True)
    (data,) = _render([_job(fig, fmt, width, height, scale)])
    write_atomic(target, data, overwrite=overwrite)
    return target

