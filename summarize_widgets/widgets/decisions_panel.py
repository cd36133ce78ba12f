"""The explorer's "Decisions" tab: what offering to some subgroups would gain, in-sample and cross-fitted.

It composes :func:`~summarize_widgets.summaries.targeting.value_of_targeting` (and, for complier
designs, :func:`~summarize_widgets.summaries.uptake.uptake_drivers`) with the gain-vs-share figure and
the decision tables; the threshold and the cost per offer are its own controls.
"""
from __future__ import annotations

import html

import ipywidgets as widgets

from ..core.validate import SummaryError
from ..export.decisions import decisions_section_html
from ..figures.decisions import plot_targeting_curve
from ..summaries.targeting import value_of_targeting
from ..summaries.uptake import uptake_drivers

__all__ = ["DecisionsPanel"]


class DecisionsPanel(widgets.VBox):
    """Value of targeting for the tree shown: rule threshold and cost controls, the curve, the tables.

    ``show(tree, level=...)`` redraws for a tree (cached per tree, threshold and cost).
    """

    def __init__(self, *, min_prob: float = 0.9, cost: float = 0.0):
        self.min_prob_control = widgets.FloatSlider(value=min_prob, min=0.5, max=0.99, step=0.01,
                                                    description="P(benefit) >=", readout_format=".2f",
                                                    style={"description_width": "110px"})
        self.cost_control = widgets.FloatText(value=cost, description="Cost per offer", style={"description_width": "110px"})
        self.figure = widgets.Output()
        self.tables = widgets.HTML()
        self.status = widgets.HTML('<div style="color:#555">The value of targeting is computed when this tab is '
                                   "opened (its cross-fitted trees take a while with many units).</div>")
        self._tree = None
        self._level = 0.95
        self._key = None
        self.result = None
        for c in (self.min_prob_control, self.cost_control):
            c.observe(lambda change: self._redraw(), names="value")
        super().__init__([widgets.HBox([self.min_prob_control, self.cost_control]), self.status, self.figure, self.tables])
        self.add_class("swx-decisions")

    def show(self, tree, *, level: float = 0.95) -> None:
        self._tree, self._level = tree, level
        self._redraw()

    def _redraw(self) -> None:
        if self._tree is None:
            return
        key = (id(self._tree), int(self._tree.depth), self._level, self.min_prob_control.value, self.cost_control.value)
        if key == self._key:
            return
        try:
            res = value_of_targeting(self._tree, min_prob=float(self.min_prob_control.value),
                                     cost=float(self.cost_control.value))
            up = uptake_drivers(self._tree) if self._tree.draws.is_complier_weighted else None
        except SummaryError as exc:
            self.status.value = f'<div role="alert" style="color:#9b1c1c">{html.escape(str(exc))}</div>'
            return
        self.result = res
        self.status.value = ""
        self.figure.clear_output(wait=True)
        from IPython import get_ipython

        if get_ipython() is not None:  # outside IPython an Output widget captures nothing: draw nothing
            from IPython.display import display

            with self.figure:
                display(plot_targeting_curve(res, level=self._level))
        self.tables.value = decisions_section_html(res, up, level=self._level)
        self._key = key
