"""The notebook Explorer: subgroups, fit, trends and contrasts behind a few controls.

Two kinds of change, two costs:

* depth, interval level, interval type and the selected subgroup only re-read
  stored results (``TreeSummary.at_depth(d)`` and per-draw subgroup effects), never
  the draws: :meth:`Explorer.apply` does it and returns;
* the smallest subgroup size and the covariates used change the summaries
  themselves: one pass over the draws per summary, run on a worker thread (the
  widget stays usable, a progress bar appears when it takes a while). A setting
  that cannot work is reported in the widget's status line and the previous
  view stays.

Panels in hidden tabs are redrawn when their tab is opened, so a change costs
the tree view plus the panel in sight.
"""
from __future__ import annotations

import threading
import time
from collections.abc import Mapping

import ipywidgets as widgets
import numpy as np
import plotly.graph_objects as go

from ..core.rules import rule_text
from ..core.validate import SummaryError, check_columns, check_int, check_interval, check_level
from ..core.draws import EffectDraws
from ..figures.palette import effect_palette
from ..summaries.bundle import DEFAULT_DEPTH
from . import panels as P
from .controls import CovariateChooser, explorer_style, in_control_words
from .results import Results
from .tree_view import TreeView
from .decisions_panel import DecisionsPanel
from .evidence_panel import EvidencePanel
from ..export.view import write_view_folder

__all__ = ["Explorer"]

LEVELS = (0.5, 0.8, 0.9, 0.95, 0.99)
INTERVALS = (("Equal-tailed", "equal-tailed"), ("Highest density", "highest-density"))
# A recompute that has run this long shows its progress bar (shorter ones would only flicker).
PROGRESS_AFTER_S = 0.3
MIN_FIGURE_WIDTH = 420
_WIDE = {"description_width": "initial"}
_PANEL_SUMMARY = {"trends": "additive", "linear": "linear"}
_STAGES = {"tree": "Regrouping", "groups": "Groups", "linear": "Linear fit", "additive": "Trends"}


class _Panel:
    """One tab: its widget, the figure (or HTML) inside, and the key of what it shows."""

    def __init__(self, name: str, title: str, body, figure=None):
        self.name, self.title, self.body, self.figure = name, title, body, figure
        self.key = None


#: Panels drawn only when their tab is opened (never as part of the first view).
_DRAWN_WHEN_OPENED = ("decisions",)
#: Synced names wait() does not send again: fixed model names, front-end modules, plotly's edit messages.
_NOT_RESENT = ("_model_", "_view_", "_esm", "_css", "_anywidget_id", "_py2js", "_js2py")


def _main_loop():
    """The IPython kernel's main loop, or None outside a kernel."""
    try:
        from IPython import get_ipython

        return getattr(getattr(get_ipython(), "kernel", None), "io_loop", None)
    except Exception:  # noqa: BLE001 - no IPython: no loop
        return None


def _on_main_loop(fn) -> None:
    """Run ``fn`` on the IPython kernel's main loop (thread-safe hand-over), or at once outside a kernel."""
    loop = _main_loop()
    if loop is None:
        fn()
    else:
        loop.add_callback(fn)


def _start_figure_import() -> threading.Thread:
    """Import plotly's FigureWidget on a thread: its first import pulls in nbformat and jsonschema
    (about 1.4 s here), and plotly's first figure reads its table of property validators (about
    0.25 s); the explorer's first view need not wait for either when they overlap the tree's pass
    or whatever the notebook does after importing the widgets."""
    def run():
        try:
            import plotly.graph_objs._figurewidget  # noqa: F401

            go.Figure(data=[go.Scatter(x=[0], y=[0], mode="markers")], layout=dict(height=300, template="none"))
        except Exception:  # noqa: BLE001 - the main thread's own import reports the problem
            pass
    thread = threading.Thread(target=run, name="summarize-widgets-import", daemon=True)
    thread.start()
    return thread


_FIGURE_IMPORT = _start_figure_import()


def _figure_widget(**layout):
    """A new plotly FigureWidget (waits for the import thread first)."""
    _FIGURE_IMPORT.join()
    return go.FigureWidget(layout=layout)


class Explorer(widgets.VBox):
    """Interactive summaries of a posterior of unit-level effects.

    Display it by putting it last in a notebook cell.

    Parameters
    ----------
    draws : EffectDraws
        The posterior draws (plain or complier-weighted) with their covariates.
    max_depth : int, default 4
        Deepest tree offered by the "Tree depth" control (1 to 8).
    depth : int, optional
        Depth shown first; default ``min(DEFAULT_DEPTH, max_depth)`` (3, as on the command line).
    min_size : int, optional
        Smallest subgroup in units; default that of :func:`summarize_tree`.
    columns : list of str, optional
        Covariates the summaries may use (default: all).
    level : float, default 0.95
        Credible level of every interval.
    interval : {"equal-tailed", "highest-density"}, default "equal-tailed"
    trends : bool, default True
        Compute the additive summary (one smooth curve per covariate) for the "Trends" tab.
        Its smoothing search is the slowest part of the start-up.
    linear : bool, default True
        Compute the linear summary for the "Linear fit" tab.
    additive_options : dict, optional
        Extra keyword arguments for :func:`summarize_widgets.summarize_additive`
        (for example ``{"lam": 1.0}`` to skip the smoothing search).
    background : bool, default True
        Run the work that reads the draws on worker threads: the linear and additive summaries
        after the first view (with ``fill_in_background``) and the recomputations the controls
        trigger, so the widget stays usable meanwhile. False computes everything before the
        explorer is shown (one fused pass) and recomputes in the foreground.
    fill_in_background : bool, default True
        With ``background``: the first view (tree view and subgroup effects) appears after the
        tree's pass, and the linear and additive summaries are computed on a worker thread
        (one more pass, shared by both); their tabs say "(computing…)" and show a progress bar
        until they are ready, then are drawn on the kernel's main loop. Tabs not in sight are
        drawn after the first view (on the kernel's main loop) or when opened. False computes
        every summary before the first view.

    Notes
    -----
    Code that needs everything computed and drawn (a script reading :attr:`linear`, a notebook
    run headlessly with nbclient or nbconvert before its widget state is saved) calls
    :meth:`wait` first.

    Attributes
    ----------
    tree : TreeSummary
        The summary tree at the depth shown.
    additive, linear : AdditiveSummary or LinearSummary or None
    tree_view : TreeView
    """

    def __init__(self, draws, *, max_depth: int = 4, depth: int | None = None, min_size: int | None = None,
                 columns=None, level: float = 0.95, interval: str = "equal-tailed", trends: bool = True,
                 linear: bool = True, additive_options: Mapping | None = None, background: bool = True,
                 fill_in_background: bool = True):
        if not isinstance(draws, EffectDraws):
            raise SummaryError(f"`draws` must be an EffectDraws (see summarize_widgets.EffectDraws); "
                               f"got {type(draws).__name__}.")
        max_depth = check_int(max_depth, "max_depth", low=1, high=8)
        depth = min(DEFAULT_DEPTH, max_depth) if depth is None else check_int(depth, "depth", low=1, high=max_depth)
        level = check_level(level)
        interval = check_interval(interval)
        columns = check_columns(columns, list(draws.covariates.columns))
        if additive_options is not None and not isinstance(additive_options, Mapping):
            raise SummaryError(f"`additive_options` must be a dict of keyword arguments; "
                               f"got {type(additive_options).__name__}.")
        self._draws = draws
        self._options = {"trends": bool(trends), "linear": bool(linear), "additive_options": dict(additive_options or {})}
        self._background = bool(background)
        # Figure widgets are only ever changed on the kernel's main loop (the worker threads hand their
        # results over): changed from a worker thread, they fell out of step with the browser.
        self._extras_later = self._background and bool(fill_in_background)
        self._lock = threading.RLock()  # one view update at a time (main thread or worker)
        self._pending = None
        self._worker: threading.Thread | None = None
        # Set while the code itself moves a control. Per thread: observers run in the thread that
        # sets a trait, so the worker's own moves must not swallow a click handled meanwhile.
        self._local = threading.local()
        self._figure_width = None  # px, once the browser has reported the explorer's width

        self._extras_pending = None  # Results whose linear/additive summaries are still to compute
        self._extras_worker: threading.Thread | None = None
        # View updates a worker thread prepared, waiting for the kernel's main loop (or wait()), in order.
        self._handover: list = []
        # With a worker thread the first view needs the tree only (one pass); the linear and
        # additive summaries follow on the thread (one more pass, shared) and fill their tabs.
        self._res = Results.compute(draws, max_depth=max_depth, min_size=min_size, columns=columns,
                                    extras_later=self._extras_later, **self._options)
        first = self._res.standout(depth)
        # "anchor" is the node last picked; "selected" is what is shown: the anchor, or its
        # ancestor while the tree is shallower than the anchor (so depth 3 -> 1 -> 3 comes back).
        self._state = {"depth": depth, "level": level, "interval": interval, "anchor": first,
                       "selected": first, "densities": False, "covariate": None}
        self._build_controls(max_depth, level, interval, columns)
        self._build_panels()
        self._build_save_row()
        super().__init__(children=[self._header, self._controls, self._status_row, self.tree_view, self._tabs,
                                   self._save_row])
        self.add_class("swx-explorer")
        # The first view: the tree view and the tab in sight. The other tabs follow on the kernel's
        # main loop once this cell has shown the explorer (or when opened, or in wait()).
        self._refresh()
        self._start_extras(self._res)
        self._draw_hidden_later()

    # -- public API --------------------------------------------------------------------------
    def apply(self, *, depth: int | None = None, level: float | None = None, interval: str | None = None,
              selected: int | None = None) -> None:
        """Change what is shown without a pass over the draws; returns when the view is updated.

        Parameters
        ----------
        depth : int, optional
            Tree depth, 1 to the largest offered.
        level : float, optional
            Credible level, strictly between 0 and 1.
        interval : {"equal-tailed", "highest-density"}, optional
        selected : int, optional
            Node id of the selected subgroup (any node of the tree at the current depth;
            -1 for none). A later depth change shows its ancestor while the tree is
            shallower, and the node itself again when the tree is deep enough.

        Notes
        -----
        This is the hook the benchmark times: it updates the tree view and the visible
        panel; panels in other tabs are redrawn when their tab is opened.
        """
        with self._lock:
            s = dict(self._state)
            if depth is not None:
                s["depth"] = check_int(depth, "depth", low=1, high=self._res.tree.max_depth)
            if level is not None:
                s["level"] = check_level(level)
            if interval is not None:
                s["interval"] = check_interval(interval)
            if selected is not None:
                sel = check_int(selected, "selected", low=-1)
                known = set(self._res.nodes(s["depth"], s["level"], s["interval"])["node"].tolist()) | {-1}
                if sel not in known:
                    raise SummaryError(f"`selected` must be a node of the tree at depth {s['depth']} "
                                       f"(one of {sorted(known)}) or -1; got {selected!r}.")
                s["selected"] = s["anchor"] = sel
            elif s["depth"] != self._state["depth"]:
                s["selected"] = self._res.follow(s["anchor"], s["depth"])
            self._state = s
            self._sync_controls()
            self._refresh()

    def recompute(self, *, min_size: int | None = None, columns=None) -> None:
        """Recompute the summaries for a new smallest subgroup size or covariate set (one pass each).

        Raises :class:`SummaryError` for an impossible setting; the view is unchanged then.
        """
        min_size = self._res.tree.min_size if min_size is None else min_size
        columns = self._res.tree.columns if columns is None else columns
        self._regroup(min_size, columns, progress=None, raise_errors=True)

    def wait(self, timeout: float | None = None) -> bool:
        """Block until the background work is done and every tab is drawn; True if so, False on timeout.

        The background work is the linear and additive summaries computed after the first view
        and any recomputation the controls started. Then every tab not drawn yet is drawn (the
        Decisions tab excepted: it is computed when opened), so :attr:`linear`, :attr:`additive`
        and a notebook's saved widget state hold everything. Call it in scripts, tests and
        notebooks run headlessly (nbclient, nbconvert) before reading or saving the results.

        Parameters
        ----------
        timeout : float, optional
            Seconds to wait at most (default: no limit).
        """
        if timeout is not None:
            try:
                timeout = float(timeout)
            except (TypeError, ValueError):
                raise SummaryError(f"`timeout` must be a number of seconds or None; got {timeout!r}.") from None
            if not timeout >= 0:
                raise SummaryError(f"`timeout` must be a number of seconds >= 0 or None; got {timeout!r}.")
        end = None if timeout is None else time.monotonic() + timeout
        while True:
            busy = self._busy_workers()
            if not busy:
                # Results handed over but not drawn yet (the main loop is busy with this call); drawing
                # a recompute's results can start the extras' worker, so look again afterwards.
                self._run_handover()
                if self._busy_workers():
                    continue
                self._draw_hidden()
                self._send_view_state()
                return True
            left = None if end is None else end - time.monotonic()
            if left is not None and left <= 0:
                return False
            busy[0].join(left)

    def _busy_workers(self) -> list:
        return [w for w in (self._worker, self._extras_worker) if w is not None and w.is_alive()]

    @property
    def pending(self) -> set:
        """The summaries ("linear", "additive") still being computed in the background."""
        return set(self._res.pending)

    @property
    def tree(self):
        """The summary tree at the depth shown (a :class:`TreeSummary`)."""
        return self._res.at(self._state["depth"])

    @property
    def additive(self):
        """The additive summary (None if not computed)."""
        return self._res.additive

    @property
    def linear(self):
        """The linear summary (None if not computed)."""
        return self._res.linear

    @property
    def settings(self) -> dict:
        """What the view shows: depth, level, interval kind, selection and the tree's settings."""
        s = self._state
        return {**self.tree.settings, "level": s["level"], "interval": s["interval"], "selected": s["selected"]}

    def save_view(self, folder, *, figures="auto") -> list:
        """Write what is shown (subgroup table and the other tables, the figures) into a new folder.

        The folder must not exist or be empty; it appears whole or not at all
        (:func:`summarize_widgets.export.view.write_view_folder`). Returns the written paths.
        """
        with self._lock:
            s = dict(self._state)
            res = self._res
            tree = res.at(s["depth"])
            rule = res.rule_of(s["selected"])
            view = {"depth": s["depth"], "min_size": tree.min_size, "columns": list(tree.columns),
                    "selected_rule": rule or "", "covariate": s["covariate"] or ""}
        return write_view_folder(folder, tree=tree, level=s["level"], interval=s["interval"], selected=s["selected"],
                                 linear=res.linear, additive=res.additive,
                                 covariate=s["covariate"] if res.additive is not None else None, view=view,
                                 figures=figures)

    def _build_save_row(self):
        self.save_folder_control = widgets.Text(value="", placeholder="a new folder, e.g. views/depth3",
                                                description="Folder", style=_WIDE, layout=widgets.Layout(width="340px"))
        self.save_button = widgets.Button(description="Save this view", icon="download",
                                          tooltip="Write the subgroup table, the other tables and the figures "
                                                  "into a new folder (never over existing files)",
                                          layout=widgets.Layout(width="160px"))
        self.save_button.add_class("swx-save")
        self.save_status = widgets.HTML()
        self.save_status.add_class("swx-save-status")
        self.save_button.on_click(lambda _: self._guard_save())
        self._save_row = widgets.HBox([self.save_folder_control, self.save_button, self.save_status],
                                      layout=widgets.Layout(align_items="center", flex_flow="row wrap",
                                                            margin="8px 0 0 0"))

    def _guard_save(self):
        folder = self.save_folder_control.value
        self.save_button.disabled = True
        self.save_status.value = P.status_html("Saving the view…", tone="busy")
        try:
            written = self.save_view(folder)
        except (SummaryError, FileExistsError, PermissionError) as exc:
            self.save_status.value = P.status_html(in_control_words(str(exc)), tone="error")
        except Exception as exc:  # noqa: BLE001 - the output area must not get a traceback
            self.save_status.value = P.status_html(f"Could not save ({type(exc).__name__}): {exc}", tone="error")
        else:
            where = written[0].parent if written else folder
            n_fig = sum(1 for p in written if p.parent.name == "figures")
            self.save_status.value = P.status_html(f"Saved {len(written)} files ({n_fig} figure files) into "
                                                   f"{where.resolve() if hasattr(where, 'resolve') else where}.")
        finally:
            self.save_button.disabled = False

    # -- controls and panels -----------------------------------------------------------
    def _build_controls(self, max_depth, level, interval, columns):
        d = self._draws
        kind = "complier-weighted (LATE) draws" if d.is_complier_weighted else "draws"
        self._header = widgets.HTML(explorer_style() + P.header_html(
            d.label, f"{d.n_draws:,} {kind} \u00d7 {d.n_units:,} units, {d.covariates.shape[1]} covariates"))
        self.depth_control = widgets.IntSlider(value=self._state["depth"], min=1, max=max_depth, step=1,
                                               description="Tree depth", continuous_update=False, style=_WIDE,
                                               layout=widgets.Layout(width="300px"))
        self.level_control = widgets.Dropdown(options=[(f"{100 * v:g}%", v) for v in sorted(set(LEVELS) | {level})],
                                              value=level, description="Interval level", style=_WIDE,
                                              layout=widgets.Layout(width="190px"))
        self.interval_control = widgets.ToggleButtons(options=INTERVALS, value=interval, description="Interval type",
                                                      style={**_WIDE, "button_width": "146px"})
        self.interval_control.add_class("swx-interval")
        self.min_size_control = widgets.IntText(value=self._res.tree.min_size, description="Smallest subgroup (units)",
                                                continuous_update=False, style=_WIDE,
                                                layout=widgets.Layout(width="270px"))
        self.columns_control = CovariateChooser(list(d.covariates.columns), tuple(columns))
        self.progress = widgets.FloatProgress(value=0.0, min=0.0, max=1.0, description="Recomputing",
                                              style=_WIDE, layout=widgets.Layout(width="320px", display="none"))
        self.status = widgets.HTML(self._selection_text())
        self.status.add_class("swx-status-line")
        self.tree_view = TreeView(palette=effect_palette(d.better))  # warm end = the better direction, as in the figures
        for control in (self.depth_control, self.level_control, self.interval_control, self.min_size_control,
                        self.progress):
            control.layout.margin = "2px 18px 2px 0"
        row1 = widgets.HBox([self.depth_control, self.level_control, self.interval_control],
                            layout=widgets.Layout(flex_flow="row wrap", align_items="center"))
        row2 = widgets.HBox([self.min_size_control, self.columns_control],
                            layout=widgets.Layout(flex_flow="row wrap", align_items="flex-start"))
        self._controls = widgets.VBox([row1, row2])
        self._status_row = widgets.HBox([self.status, self.progress],
                                        layout=widgets.Layout(align_items="center", min_height="28px"))
        for control in (self.depth_control, self.level_control, self.interval_control):
            control.observe(self._guard(self._on_view_control), names="value")
        self.tree_view.observe(self._guard(self._on_pick), names="selected")
        self.tree_view.observe(self._guard(self._on_width), names="client_width")
        self.min_size_control.observe(self._guard(self._on_regroup_control), names="value")
        self.columns_control.observe(self._guard(self._on_regroup_control), names="value")

    def _build_panels(self):
        def fig_widget():
            return _figure_widget(height=300, template="none")

        panels = []
        effects = fig_widget()
        self.densities_control = widgets.Checkbox(value=False, description="Show posterior densities", indent=False)
        self.densities_control.observe(self._guard(self._on_panel_control), names="value")
        panels.append(_Panel("effects", "Subgroup effects", widgets.VBox([self.densities_control, effects]), effects))
        fit = fig_widget()
        panels.append(_Panel("fit", "Fit by depth", widgets.VBox([fit]), fit))
        self._waiting = {}
        if self._options["trends"]:
            trend = fig_widget()
            names = self._res.additive.columns if self._res.additive is not None else []
            self.covariate_control = widgets.Dropdown(options=names, value=names[0] if names else None,
                                                      description="Covariate", style=_WIDE)
            self.covariate_control.observe(self._guard(self._on_panel_control), names="value")
            panels.append(_Panel("trends", "Trends", widgets.VBox([self._waiting_box("additive"),
                                                                   self.covariate_control, trend]), trend))
        if self._options["linear"]:
            lin = fig_widget()
            panels.append(_Panel("linear", "Linear fit", widgets.VBox([self._waiting_box("linear"), lin]), lin))
        self._table_html = widgets.HTML()
        panels.append(_Panel("table", "Table", widgets.VBox([self._table_html])))
        con = fig_widget()
        panels.append(_Panel("contrasts", "Contrasts", widgets.VBox([con]), con))
        self.evidence_panel = EvidencePanel(self._draws, background=self._background)
        panels.append(_Panel("evidence", "Evidence", self.evidence_panel))
        self.decisions_panel = DecisionsPanel()
        panels.append(_Panel("decisions", "Decisions", self.decisions_panel))
        self._panels = {p.name: p for p in panels}
        self._tabs = widgets.Tab(children=[p.body for p in panels], titles=[self._tab_title(p) for p in panels])
        self._tabs.observe(self._guard(self._on_tab), names="selected_index")

    def _waiting_box(self, summary: str):
        """The line a background summary's tab shows while it is computed: a message and a progress bar."""
        text = widgets.HTML()
        bar = widgets.FloatProgress(value=0.0, min=0.0, max=1.0, description="Progress", style=_WIDE,
                                    layout=widgets.Layout(width="260px"))
        box = widgets.HBox([text, bar], layout=widgets.Layout(align_items="center", display="none"))
        box.add_class("swx-waiting")
        self._waiting[summary] = (box, text, bar)
        return box

    def _tab_title(self, panel) -> str:
        summary = _PANEL_SUMMARY.get(panel.name)
        return f"{panel.title} (computing…)" if summary in self._res.pending else panel.title

    def _show_waiting(self, summary: str) -> None:
        """Show or hide the waiting line of ``summary``'s tab, and its error if it failed."""
        if summary not in self._waiting:
            return
        box, text, bar = self._waiting[summary]
        if summary in self._res.pending:
            what = {"additive": "the trends (additive summary)", "linear": "the linear summary"}[summary]
            text.value = P.status_html(f"Computing {what} in the background: one pass over the draws, shared by "
                                       "the linear and additive summaries. The other tabs are ready.", tone="busy")
            bar.layout.display = None
            box.layout.display = None
        elif summary in self._res.errors:
            text.value = P.status_html(f"Could not compute: {self._res.errors[summary]}", tone="error")
            bar.layout.display = "none"
            box.layout.display = None
        else:
            box.layout.display = "none"

    def _start_extras(self, res) -> None:
        """Compute ``res``'s pending linear and additive summaries on the worker thread (newest request wins)."""
        if not res.pending:
            return
        with self._lock:
            self._extras_pending = res
            if self._extras_worker is None or not self._extras_worker.is_alive():
                self._extras_worker = threading.Thread(target=self._extras_work, name="summarize-widgets-extras",
                                                       daemon=True)
                self._extras_worker.start()

    def _extras_work(self):
        while True:
            with self._lock:
                res, self._extras_pending = self._extras_pending, None
                if res is None:
                    self._extras_worker = None
                    return
            if res is not self._res:  # overtaken by a recompute before it started
                continue
            bars = [self._waiting[name][2] for name in res.pending if name in self._waiting]

            def progress(stage, k, n_stages, done, total, bars=bars):
                for bar in bars:
                    bar.value = done / max(total, 1)
            res.fill_extras(self._draws, progress=progress)  # never raises: failures go to res.errors
            self._hand_over(lambda res=res: self._show_extras(res))

    def _hand_over(self, action) -> None:
        """Run ``action``, a view update prepared on a worker thread, on the kernel's main loop.

        The widgets are updated there, between the messages the loop handles (the figures' size
        reports, clicks): figure widgets changed from a worker thread while the front end synced
        fell out of step with the browser. Queued actions run in order, each once: on the loop, or
        in :meth:`wait` when it is called first (it holds the loop).
        """
        with self._lock:
            self._handover.append(action)
        _on_main_loop(self._run_handover)

    def _run_handover(self) -> None:
        while True:
            with self._lock:
                if not self._handover:
                    return
                action = self._handover.pop(0)
            try:
                action()
            except Exception as exc:  # noqa: BLE001 - no output area to report to
                self._show_error(f"Unexpected error ({type(exc).__name__}): {exc}")

    def _send_view_state(self) -> None:
        """Send the synced state of every widget in the explorer once more.

        A notebook run headlessly (nbclient, nbconvert) keeps only the widget messages sent while
        a cell runs; what the main loop drew between cells (tabs out of sight, the extras) reaches
        a live page but not the saved widget state. :meth:`wait`, run in a cell, sends it again.
        plotly's edit messages and the front-end modules are not resent.
        """
        seen, stack = set(), [self]
        while stack:
            w = stack.pop()
            if id(w) in seen or getattr(w, "comm", None) is None:
                continue
            seen.add(id(w))
            if not isinstance(w, widgets.Output):  # an output area's content travels in its own messages
                w.send_state([k for k in w.keys if not k.startswith(_NOT_RESENT)])
            for k in w.keys:
                value = getattr(w, k, None)
                stack.extend(v for v in (value if isinstance(value, (list, tuple)) else (value,))
                             if isinstance(v, widgets.Widget))

    def _show_extras(self, res) -> None:
        """Draw the linear and additive tabs of ``res`` once its extras are computed (main loop)."""
        try:
            with self._lock:
                if res is not self._res:
                    return
                if self._options["trends"]:
                    names = res.additive.columns if res.additive is not None else []
                    self._set_covariates(names)
                for i, panel in enumerate(self._panels.values()):
                    if panel.name in ("trends", "linear", "evidence"):
                        panel.key = None
                    self._tabs.set_title(i, self._tab_title(panel))
                    if panel.name in ("trends", "linear"):
                        # Drawn now, seen or not: a saved notebook's widget state then holds them.
                        self._draw_panel(panel)
                self._refresh()
        except Exception as exc:  # noqa: BLE001 - no output area to report to
            self._show_error(f"Unexpected error ({type(exc).__name__}): {exc}")

    def _draw_hidden(self) -> None:
        """Draw every tab whose drawing is behind the current view (the Decisions tab only when opened)."""
        with self._lock:
            for panel in self._panels.values():
                if panel.name not in _DRAWN_WHEN_OPENED:
                    self._draw_panel(panel)

    def _draw_hidden_later(self) -> None:
        """On the kernel's main loop, draw the tabs not in sight one per turn (clicks are handled between
        them); outside a kernel nothing is shown, so they wait until opened or :meth:`wait`."""
        loop = _main_loop()
        if loop is None:
            return
        queue = [p for p in self._panels.values() if p.name not in _DRAWN_WHEN_OPENED]

        def step():
            try:
                with self._lock:
                    while queue:
                        panel = queue.pop(0)
                        if panel.key != self._panel_key(panel.name):
                            self._draw_panel(panel)
                            break
            except Exception as exc:  # noqa: BLE001 - no output area to report to
                self._show_error(f"Unexpected error ({type(exc).__name__}): {exc}")
                return
            if queue:
                loop.add_callback(step)
        loop.add_callback(step)

    # -- event handlers ------------------------------------------------------------------
    def _guard(self, handler):
        """Run a control's handler; a failure becomes a message in the widget, never a traceback."""
        def run(change):
            if self._quiet:
                return
            try:
                handler(change)
            except SummaryError as exc:
                self._show_error(in_control_words(str(exc)))
            except Exception as exc:  # noqa: BLE001 - the output area must not get a traceback
                self._show_error(f"Unexpected error ({type(exc).__name__}): {exc}")
        return run

    @property
    def _quiet(self) -> bool:
        return getattr(self._local, "quiet", False)

    def _quietly(self, action):
        before = self._quiet
        self._local.quiet = True
        try:
            action()
        finally:
            self._local.quiet = before

    def _on_view_control(self, change):
        self.apply(depth=self.depth_control.value, level=self.level_control.value,
                   interval=self.interval_control.value)

    def _on_pick(self, change):
        self.apply(selected=int(change["new"]))

    def _on_panel_control(self, change):
        with self._lock:
            self._state["densities"] = bool(self.densities_control.value)
            if self._options["trends"]:
                self._state["covariate"] = self.covariate_control.value
            self._refresh()

    def _on_tab(self, change):
        with self._lock:
            self._refresh()

    def _on_width(self, change):
        view = int(change["new"])
        # The tab panel's border and padding take about 40 px of the explorer's width.
        width = None if view <= 0 else max(MIN_FIGURE_WIDTH, view - 40)
        with self._lock:
            if width == self._figure_width:
                return
            self._figure_width = width
            for panel in self._panels.values():
                if panel.figure is not None:
                    P.set_width(panel.figure, width)

    def _on_regroup_control(self, change):
        columns = list(self.columns_control.value)
        if not columns:
            raise SummaryError("Choose at least one covariate under \u201cCovariates used\u201d.")
        request = (int(self.min_size_control.value), columns)
        if not self._background:
            self._regroup(*request, progress=self._progress_callback(time.monotonic()))
            return
        with self._lock:
            self._pending = request
            if self._worker is None:
                self._worker = threading.Thread(target=self._work, name="summarize-widgets-regroup", daemon=True)
                self._worker.start()

    # -- recomputation -----------------------------------------------------------------------
    def _work(self):
        """Worker thread: run the newest request; drop results a newer request has overtaken."""
        while True:
            with self._lock:
                request, self._pending = self._pending, None
                if request is None:
                    self._worker = None
                    return
            try:
                self._regroup(*request, progress=self._progress_callback(time.monotonic()),
                              stale=lambda: self._pending is not None, hand_over=True)
            except Exception as exc:  # noqa: BLE001 - a worker thread has no output area to report to
                self._show_error(f"Unexpected error ({type(exc).__name__}): {exc}")

    def _progress_callback(self, started):
        def progress(stage, k, n_stages, done, total):
            if time.monotonic() - started < PROGRESS_AFTER_S:
                return
            self.progress.layout.display = None
            self.progress.description = _STAGES[stage]
            self.progress.value = (k + done / max(total, 1)) / n_stages
        return progress

    def _regroup(self, min_size, columns, *, progress, stale=lambda: False, raise_errors=False, hand_over=False):
        """Recompute for ``min_size`` and ``columns``; the new results are drawn at once, or with
        ``hand_over`` (on a worker thread) on the kernel's main loop, unless ``stale()`` by then."""
        before = {"min_size": self._res.tree.min_size, "columns": self._res.tree.columns}
        self.status.value = P.status_html("Recomputing the summaries (one pass over the draws each)\u2026", tone="busy")
        try:
            min_size = check_int(min_size, "min_size", low=1, high=self._draws.n_units)
            previous = self._anchor_rule()
            res = Results.compute(self._draws, max_depth=self._res.tree.max_depth, min_size=min_size,
                                  columns=columns, progress=progress, extras_later=self._extras_later, **self._options)
        except SummaryError as exc:
            if raise_errors:
                self._refresh_status()
                raise
            self._quietly(lambda: (setattr(self.min_size_control, "value", before["min_size"]),
                                   setattr(self.columns_control, "value", tuple(before["columns"]))))
            self._show_error(f"Could not recompute: {in_control_words(str(exc))} The previous summaries are still "
                             f"shown (smallest subgroup {before['min_size']:,} units).")
            return
        finally:
            self.progress.layout.display = "none"
            self.progress.value = 0.0
        if stale():
            return
        if hand_over:
            self._hand_over(lambda: self._show_results(res, previous, stale))
        else:
            self._show_results(res, previous, stale)

    def _show_results(self, res, previous, stale) -> None:
        """Show a recompute's results (keeping the subgroup with the rule ``previous``) and start its extras."""
        if stale():  # a newer request came while this waited for the main loop
            return
        with self._lock:
            self._res = res
            s = self._state
            # Keep the user's subgroup when the new tree still has it (the same rule); else the standout.
            kept = res.node_with_rule(previous)
            if kept is None:
                s["selected"] = s["anchor"] = res.standout(s["depth"])
            else:
                s["anchor"], s["selected"] = kept, res.follow(kept, s["depth"])
            if self._options["trends"]:
                names = res.additive.columns if res.additive is not None else []
                self._set_covariates(names)
            self._sync_controls()
            for i, p in enumerate(self._panels.values()):
                p.key = None
                self._tabs.set_title(i, self._tab_title(p))
            self._refresh()
        self._start_extras(res)
        self._draw_hidden_later()

    # -- drawing -------------------------------------------------------------------------------
    def _sync_controls(self):
        s = self._state

        def move():
            self.depth_control.value = s["depth"]
            values = [v for _, v in self.level_control.options]
            if s["level"] not in values:
                self.level_control.options = [(f"{100 * v:g}%", v) for v in sorted(set(values) | {s["level"]})]
            self.level_control.value = s["level"]
            self.interval_control.value = s["interval"]
            self.min_size_control.value = self._res.tree.min_size
            self.columns_control.value = tuple(self._res.tree.columns)
        self._quietly(move)

    def _set_covariates(self, names) -> None:
        """Offer ``names`` in the Trends tab's covariate control, keeping the covariate shown if it is
        still there, else the first (the options of a Dropdown alone leave no covariate chosen)."""
        names = list(names)
        keep = self._state["covariate"] if self._state["covariate"] in names else (names[0] if names else None)

        def move():
            self.covariate_control.options = names
            self.covariate_control.value = keep
        self._quietly(move)
        self._state["covariate"] = keep

    def _anchor_rule(self):
        """The rule of the node last picked (None for no pick): what a recompute looks for."""
        return self._res.rule_of(self._state["anchor"])

    def _show_error(self, text: str) -> None:
        self.status.value = P.status_html(text, tone="error")

    def _selection_text(self) -> str:
        s = self._state
        nodes = self._res.nodes(s["depth"], s["level"], s["interval"])
        row = nodes[nodes["node"] == s["selected"]]
        if s["selected"] < 0 or row.empty:
            return P.status_html("Click a box in the tree to select a subgroup.")
        r = row.iloc[0]
        rule = rule_text(r["rule"]) or "All units"
        if not bool(r["is_leaf"]):
            return P.status_html(f"Selected: {rule} (split further at this depth; click one of its coloured "
                                 "subgroups to compare it with the others).")
        # the tables' digits (one formatter for every output)
        t = self._res.texts(s["depth"], s["level"], s["interval"]).loc[row.index[0]]
        label = f"{r['label']}: " if r.get("label") else ""
        return P.status_html(f"Selected: {label}{rule} ({t['n_text']} units): posterior mean and "
                             f"{100 * s['level']:g}% interval {t['mean_text']} {t['interval_text']}.")

    def _refresh_status(self):
        self.status.value = self._selection_text()

    def _refresh(self):
        """Redraw the tree view, the status line and the tab in sight if its inputs changed."""
        s = self._state
        view = (s["depth"], s["level"], s["interval"])
        n_leaves = len(self._res.leaf_ids(s["depth"]))
        kind = "highest-density" if s["interval"] == "highest-density" else "equal-tailed"
        limit = self._res.colour_limit(*view)
        compliers = self._draws.is_complier_weighted
        shares = "units, shares of units and of compliers" if compliers else "units"

        def update_view():
            # Quietly: the view's "selected" observer is for clicks, not for the code's own moves.
            with self.tree_view.hold_sync():
                self.tree_view.nodes = self._res.records(*view)
                self.tree_view.selected = s["selected"]
                self.tree_view.colour_limit = limit
                self.tree_view.share_basis = "compliers" if compliers else "units"
                self.tree_view.interval_label = f"{100 * s['level']:g}% {kind} interval"
                self.tree_view.caption = (f"{n_leaves} subgroups at depth {s['depth']}; boxes show {shares}, "
                                          f"posterior mean and {100 * s['level']:g}% {kind} interval. "
                                          "Click a subgroup to select it.")
        self._quietly(update_view)
        self._refresh_status()
        # Tabs out of sight are drawn when opened (or after the first view, or in wait()). The
        # Decisions tab (value of targeting, with cross-fitted trees) only when opened: at scale it
        # costs more than the rest of the first view together.
        self._draw_panel(list(self._panels.values())[self._tabs.selected_index or 0])

    def _panel_key(self, name):
        s = self._state
        view = (s["depth"], s["level"], s["interval"])
        return {
            "effects": (*view, s["selected"], s["densities"]),
            "fit": view,
            "trends": (s["level"], s["interval"], s["covariate"]),
            "linear": (s["level"], s["interval"]),
            "table": (*view, s["selected"]),
            "contrasts": (*view, s["selected"]),
            "evidence": (*view, id(self._res), id(self._res.linear)),
            "decisions": (*view, id(self._res)),
        }[name]

    def _draw_panel(self, panel: _Panel) -> None:
        key = self._panel_key(panel.name)
        if key == panel.key:
            return
        getattr(self, f"_draw_{panel.name}")(panel)
        panel.key = key

    def _show(self, panel, fig):
        if self._figure_width is not None:
            fig.layout.width = self._figure_width
        P.show_figure(panel.figure, fig)

    def _highlight(self):
        """The selected node if it is a subgroup at the current depth, else None."""
        sel = self._state["selected"]
        return sel if sel in self._res.leaf_ids(self._state["depth"]) else None

    def _highlighted(self) -> list[int]:
        """The subgroups inside the selected node at the current depth (itself if it is one)."""
        s = self._state
        return self._res.inside(s["selected"], s["depth"])

    def _weak_ids(self) -> set[int]:
        """Subgroups at the current depth flagged for weak uptake (complier-weighted draws)."""
        s = self._state
        return set(self._res.weak_ids(s["depth"], s["level"], s["interval"]))

    def _draw_effects(self, panel):
        s = self._state
        table = self._res.table(s["depth"], s["level"], s["interval"])
        self._show(panel, P.subgroups_figure(self.tree, table, highlight=self._highlighted(), densities=s["densities"]))

    def _draw_fit(self, panel):
        s = self._state
        self._show(panel, P.fit_figure(self._res.fit_table(s["level"], s["interval"]), self._res.fit_draws,
                                       current_depth=s["depth"]))

    def _draw_trends(self, panel):
        s = self._state
        self._show_waiting("additive")
        if "additive" in self._res.pending:
            self._show(panel, P.message_figure("The trends appear here when the additive summary is ready."))
            return
        if self._res.additive is None:
            why = self._res.errors.get("additive", "The additive summary was not computed.")
            self._show(panel, P.message_figure(f"No trends: {why}"))
            return
        covariate = s["covariate"] or self.covariate_control.value
        self._show(panel, P.trends_figure(self._res.curves(s["level"], s["interval"]), covariate,
                                          label=self._res.additive.label))

    def _draw_linear(self, panel):
        s = self._state
        self._show_waiting("linear")
        if "linear" in self._res.pending:
            self._show(panel, P.message_figure("The linear summary appears here when it is ready."))
            return
        if self._res.linear is None:
            why = self._res.errors.get("linear", "The linear summary was not computed.")
            self._show(panel, P.message_figure(f"No linear fit: {why}"))
            return
        self._show(panel, P.coefficients_figure(self._res.linear_table(s["level"], s["interval"])))

    def _draw_table(self, panel):
        s = self._state
        table = self._res.table(s["depth"], s["level"], s["interval"])
        hit = np.flatnonzero(np.isin(table["subgroup"].to_numpy(), self._highlighted()))
        self._table_html.value = P.table_html(table, selected_rows=[int(i) for i in hit],
                                              css_scope=f"swx-table-{self.model_id[:8]}")

    def _draw_evidence(self, panel):
        s = self._state
        self.evidence_panel.show(self.tree, self._res.linear, level=s["level"], interval=s["interval"])

    def _draw_decisions(self, panel):
        self.decisions_panel.show(self.tree, level=self._state["level"])

    def _draw_contrasts(self, panel):
        s = self._state
        sel = self._highlight()
        if sel is None:
            inside = self._highlighted()
            fig = P.message_figure(
                f"The selected box holds {len(inside)} subgroups (outlined in the tree, marked in the other tabs). "
                "Select one of them to compare it with the others." if inside else
                "Select a subgroup (a coloured box in the tree) to compare it with the others.")
        elif len(self._res.leaf_ids(s["depth"])) < 2:
            fig = P.message_figure("Only one subgroup at this depth: nothing to compare.")
        else:
            fig = P.contrasts_figure(self._res.contrasts(s["depth"], s["level"], s["interval"], sel), sel,
                                     weak=self._weak_ids())
        self._show(panel, fig)
