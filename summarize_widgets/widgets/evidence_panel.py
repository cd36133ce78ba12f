"""The explorer's "Evidence" tab: is there heterogeneity, is the tree stable, how small can a summary be.

The cheap evidence (heterogeneity for the tree at the depth shown, size paths of the
tree and the linear summary) is redrawn whenever the view changes; it reads stored
per-draw sums only. The structure stability check refits the tree to single draws
(one CART fit per draw), so it runs only when its button is pressed, on a worker
thread, and its result is kept for the tree it was run on.
"""
from __future__ import annotations

import html
import threading

import ipywidgets as widgets

from ..core.validate import SummaryError
from ..export.tables import to_html
from ..summaries.evidence import heterogeneity_evidence, unit_sd_draws
from ..summaries.evidence_set import DEFAULT_STABILITY_FITS
from ..summaries.precision import precision_check
from ..summaries.size_path import linear_size_path, tree_size_path
from ..summaries.stability import structure_stability

__all__ = ["EvidencePanel"]

_STYLE = (
    ".{s} table {{border-collapse: collapse; font-size: 13px; margin: 4px 0 10px;}}"
    ".{s} th, .{s} td {{padding: 3px 10px; border-bottom: 1px solid #e3e3e3;}}"
    ".{s} thead th {{border-bottom: 2px solid #333; text-align: left;}}"
    ".{s} .sw-r {{text-align: right; font-variant-numeric: tabular-nums;}}"
    ".{s} .sw-c {{text-align: center; font-variant-numeric: tabular-nums; white-space: nowrap;}}"
    ".{s} caption {{caption-side: top; text-align: left; font-weight: 600; padding: 4px 0;}}"
    ".{s} .sw-note {{font-size: 12px; color: #555; margin: 2px 0;}}"
    ".{s} .swx-verdict {{margin: 4px 0 8px; padding: 6px 10px; border-left: 3px solid #2E5F8A; background: #F4F7FA;"
    " font-size: 13px; line-height: 1.45;}}"
    ".{s} .swx-verdict-warn {{border-left-color: #B5651D; background: #FFF6EC;}}"
    ".{s} h4 {{margin: 12px 0 4px; font-size: 14px;}}"
)


def _status(text: str, tone: str = "info") -> str:
    """One escaped status line of the panel ("info", "busy" or "error")."""
    colour = {"info": "#444444", "busy": "#2E5F8A", "error": "#9b1c1c"}[tone]
    role = ' role="alert"' if tone == "error" else ""
    return (f'<div class="swx-evidence-status"{role} style="color:{colour};font-size:13px;line-height:1.4;'
            f'margin:4px 0">{html.escape(text)}</div>')


def _tree_key(tree) -> tuple:
    return (id(tree.draws), int(tree.depth), tree.min_size, tuple(tree.columns))


class EvidencePanel(widgets.VBox):
    """Evidence for the summaries shown: verdicts in plain language and their tables.

    Parameters
    ----------
    draws : EffectDraws
    stability_fits : int, default 200
        Draw-trees the stability button fits (changeable in the panel).
    threshold : float, optional
        ``c`` of ``P(largest - smallest subgroup effect > c)``; default: the rule of thumb of
        :func:`~summarize_widgets.summaries.evidence.heterogeneity_evidence`.
    tolerance : float, default 0.05
        Summary R^2 tolerance of the size paths.
    background : bool, default True
        Run the stability check on a worker thread.
    """

    def __init__(self, draws, *, stability_fits: int = DEFAULT_STABILITY_FITS, threshold=None, tolerance: float = 0.05,
                 background: bool = True):
        self._draws = draws
        self._threshold = threshold
        self._tolerance = tolerance
        self._background = bool(background)
        self._unit_sd = None
        self._linear_paths = {}  # id(linear) -> SizePath
        self._stability = {}  # tree key -> StabilityCheck
        self._view = None  # (tree, linear, level, interval) last shown
        self._worker = None
        self._lock = threading.RLock()
        self._scope = f"swx-evidence-{id(self):x}"
        self.summary_html = widgets.HTML()
        self.stability_html = widgets.HTML()
        self.fits_control = widgets.BoundedIntText(value=stability_fits, min=2, max=100_000, description="Draw-trees",
                                                   style={"description_width": "initial"},
                                                   layout=widgets.Layout(width="170px"))
        self.stability_button = widgets.Button(description="Check structure stability", icon="refresh",
                                               tooltip="Refit the tree to single posterior draws (one fit per draw)",
                                               layout=widgets.Layout(width="230px"))
        self.stability_button.on_click(lambda _: self.run_stability())
        self.progress = widgets.FloatProgress(value=0.0, min=0.0, max=1.0, description="Fitting",
                                              layout=widgets.Layout(width="260px", display="none"))
        row = widgets.HBox([self.stability_button, self.fits_control, self.progress],
                           layout=widgets.Layout(align_items="center", flex_flow="row wrap"))
        super().__init__(children=[self.summary_html, row, self.stability_html])
        self.add_class("swx-evidence")

    # -- drawing -----------------------------------------------------------------------------
    def _wrap(self, inner: str) -> str:
        return f'<div class="{self._scope}"><style>{_STYLE.format(s=self._scope)}</style>{inner}</div>'

    def _verdict(self, heading: str, text: str, *, warn: bool = False) -> str:
        cls = "swx-verdict swx-verdict-warn" if warn else "swx-verdict"
        role = ' role="alert"' if warn else ""
        return f'<div class="{cls}"{role}><strong>{html.escape(heading)}.</strong> {html.escape(text)}</div>'

    def show(self, tree, linear=None, *, level: float = 0.95, interval: str = "equal-tailed") -> None:
        """Redraw for ``tree`` (at the depth shown) and the linear summary; no pass over the draws
        after the first call."""
        with self._lock:
            self._view = (tree, linear, level, interval)
            if self._unit_sd is None:
                self._unit_sd = unit_sd_draws(self._draws)
            parts = []
            checked = {"subgroups": tree.table(level=level, interval=interval)}
            if linear is not None:
                checked["linear summary"] = linear.table(level=level, interval=interval)
            try:
                het = heterogeneity_evidence(self._draws, tree, threshold=self._threshold, level=level,
                                             interval=interval, unit_sd=self._unit_sd)
                parts.append(self._verdict("Heterogeneity", het.message))
                checked["heterogeneity"] = het.table(level, interval)
                parts.append(to_html(checked["heterogeneity"], caption="Spread of the effects"))
            except SummaryError as exc:
                parts.append(_status(f"Heterogeneity: {exc}", tone="error"))
            if tree.max_depth > 1:
                tp = tree_size_path(tree, tolerance=self._tolerance)
                parts.append(self._verdict("Tree size", tp.message))
                checked["tree sizes"] = tp.table(level, interval)
                parts.append(to_html(checked["tree sizes"], caption="Summary R\u00b2 by number of subgroups"))
            if linear is not None:
                lp = self._linear_paths.get(id(linear))
                if lp is None:
                    lp = self._linear_paths[id(linear)] = linear_size_path(self._draws, linear, tolerance=self._tolerance)
                parts.append(self._verdict("Linear summary size", lp.message))
                checked["linear sizes"] = lp.table(level, interval)
                parts.append(to_html(checked["linear sizes"], caption="Summary R\u00b2 of nested linear summaries"))
            # Monte Carlo precision (ESS < 400 or R-hat > 1.01 in any row's mc_warning) of every number shown,
            # first: a flagged number should be read before the verdicts it feeds.
            prec = precision_check(checked)
            parts.insert(0, self._verdict("Monte Carlo precision", prec.message, warn=not prec.ok))
            self.summary_html.value = self._wrap("".join(parts))
            self._draw_stability()

    def _draw_stability(self) -> None:
        tree, _, level, interval = self._view
        check = self._stability.get(_tree_key(tree))
        if check is None:
            self.stability_html.value = _status(
                "Structure stability: press the button to refit this tree to single posterior draws "
                f"(depth {tree.depth}, smallest subgroup {tree.min_size:,} units). It takes one tree fit per draw.")
            return
        self.stability_html.value = self._wrap(
            self._verdict("Structure stability", check.message)
            + to_html(check.table(), caption=f"Splits of {len(check.rows)} trees refitted to single draws")
            + to_html(check.agreement(level, interval), caption="Agreement with the summary tree"))

    # -- the on-request check ------------------------------------------------------------------
    def run_stability(self) -> None:
        """Refit the tree shown to ``fits_control.value`` single draws (on a worker thread when ``background``)."""
        with self._lock:
            if self._view is None or (self._worker is not None and self._worker.is_alive()):
                return
            tree = self._view[0]
            n_fits = int(self.fits_control.value)
        if not self._background:
            self._stability_job(tree, n_fits)
            return
        self._worker = threading.Thread(target=self._stability_job, args=(tree, n_fits),
                                        name="summarize-widgets-stability", daemon=True)
        self._worker.start()

    def _stability_job(self, tree, n_fits: int) -> None:
        self.stability_button.disabled = True
        self.progress.layout.display = None
        self.progress.value = 0.0
        self.stability_html.value = _status(f"Refitting the tree to {n_fits:,} single draws\u2026", tone="busy")

        def progress(done, total):
            self.progress.value = done / max(total, 1)

        try:
            check = structure_stability(tree, n_fits=n_fits, progress=progress)
            with self._lock:
                self._stability[_tree_key(tree)] = check
                self._draw_stability()
        except Exception as exc:  # noqa: BLE001 - a worker thread has no output area: report in the panel
            self.stability_html.value = _status(f"Structure stability failed: {exc}", tone="error")
        finally:
            self.progress.layout.display = "none"
            self.stability_button.disabled = False

    def wait(self, timeout: float | None = None) -> bool:
        """Wait for a running stability check; True if none is running."""
        worker = self._worker
        if worker is not None:
            worker.join(timeout)
        return worker is None or not worker.is_alive()
