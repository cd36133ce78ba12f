"""Controls of the Explorer that ipywidgets does not have as such.

* :class:`CovariateChooser`: a list of checkboxes with "All" / "None" and an
  apply button (a recompute costs a pass over the draws, so ticking boxes does not
  start one by itself);
* :func:`explorer_style`: the explorer's own CSS (scoped to ``.swx-explorer``),
  so the chosen interval type is marked unmistakably;
* :func:`in_control_words`: an error message from the summaries with argument
  names replaced by the labels of the controls that set them.
"""
from __future__ import annotations

import html
import re

import ipywidgets as widgets
import traitlets

__all__ = ["CovariateChooser", "explorer_style", "in_control_words", "CONTROL_LABELS"]

#: The Python argument behind each control, and the control's label.
CONTROL_LABELS = {
    "min_size": "Smallest subgroup (units)",
    "columns": "Covariates used",
    "depth": "Tree depth",
    "max_depth": "Tree depth",
    "level": "Interval level",
    "interval": "Interval type",
}


def in_control_words(message: str) -> str:
    """``message`` with every `argument` that a control sets named by the control's label.

    >>> in_control_words("`min_size` must be between 1 and 400; got 401.")
    '“Smallest subgroup (units)” must be between 1 and 400; got 401.'
    """
    def name(match):
        arg = match.group(1)
        return f"\u201c{CONTROL_LABELS[arg]}\u201d" if arg in CONTROL_LABELS else match.group(0)
    return re.sub(r"`([A-Za-z_][A-Za-z0-9_]*)`", name, str(message))


class CovariateChooser(widgets.VBox):
    """Checkboxes for the covariates, "All" / "None", and a button that applies the ticks.

    Parameters
    ----------
    options : list of str
        Every covariate, in the order shown.
    value : tuple of str
        The covariates in use (ticked at the start).

    Attributes
    ----------
    value : tuple of str
        The covariates in use. Set by the apply button (observe it to recompute); setting
        it from code ticks the boxes to match.
    ticked : tuple of str
        The boxes ticked now (may differ from ``value`` until the button is pressed).
    """

    value = traitlets.Tuple()

    def __init__(self, options, value, *, description: str = CONTROL_LABELS["columns"], height: str = "150px"):
        self._options = [str(o) for o in options]
        self.boxes = {name: widgets.Checkbox(value=name in value, description=name, indent=False,
                                             layout=widgets.Layout(width="auto", margin="0 0 0 4px"))
                      for name in self._options}
        self.boxes_area = widgets.VBox(list(self.boxes.values()),
                                       layout=widgets.Layout(max_height=height, overflow="auto", width="100%",
                                                             border="1px solid #b9bcc1", padding="2px 4px"))
        self.all_button = widgets.Button(description="All", tooltip="Tick every covariate",
                                         layout=widgets.Layout(width="52px"))
        self.none_button = widgets.Button(description="None", tooltip="Untick every covariate",
                                          layout=widgets.Layout(width="58px"))
        self.apply_button = widgets.Button(description="Recompute with these", button_style="primary",
                                           tooltip="Recompute the summaries with the ticked covariates (one pass over the draws)",
                                           layout=widgets.Layout(width="auto"))
        self.count = widgets.HTML()
        title = widgets.HTML(f'<span style="font-size:13px">{html.escape(description)}</span>')
        self.count.layout.margin = "0 0 0 8px"
        for b in (self.all_button, self.none_button):
            b.layout.margin = "0 4px 0 0"
        head = widgets.HBox([title, self.count], layout=widgets.Layout(align_items="baseline"))
        buttons = widgets.HBox([self.all_button, self.none_button, self.apply_button],
                               layout=widgets.Layout(margin="3px 0 0 0"))
        super().__init__([head, self.boxes_area, buttons], layout=widgets.Layout(width="340px"))
        self.add_class("swx-covariates")
        self.value = tuple(v for v in self._options if v in set(value))
        for box in self.boxes.values():
            box.observe(lambda change: self._update(), names="value")
        self.all_button.on_click(lambda _: self._tick_all(True))
        self.none_button.on_click(lambda _: self._tick_all(False))
        self.apply_button.on_click(lambda _: self.apply())
        self._update()

    @property
    def options(self) -> list[str]:
        return list(self._options)

    @property
    def ticked(self) -> tuple[str, ...]:
        return tuple(name for name in self._options if self.boxes[name].value)

    def apply(self) -> None:
        """Make the ticked covariates the ones in use (what the button does)."""
        self.value = self.ticked

    @traitlets.observe("value")
    def _value_changed(self, change):
        chosen = set(change["new"])
        for name, box in self.boxes.items():
            box.value = name in chosen
        self._update()

    def _tick_all(self, on: bool) -> None:
        for box in self.boxes.values():
            box.value = on

    def _update(self):
        ticked = self.ticked
        in_use = set(getattr(self, "value", ()) or ())
        changed = set(ticked) != in_use
        self.apply_button.disabled = not changed or not ticked
        self.count.value = (f'<span style="font-size:12px;color:#555">{len(in_use)} of {len(self._options)} in use'
                            + ("; ticks not applied yet" if changed else "") + "</span>")


def explorer_style(scope: str = "swx-explorer") -> str:
    """CSS for the explorer's controls (a ``<style>`` element), scoped to ``.{scope}``.

    The chosen interval type gets a dark fill, white bold text and a check mark; the
    other option stays a plain outlined button.
    """
    s = f".{html.escape(scope)}"
    rules = [
        f"{s} .swx-interval .widget-toggle-button {{background:#ffffff;color:#222222;border:1px solid #8a8a8a;"
        "box-shadow:none;font-weight:400;}",
        f"{s} .swx-interval .widget-toggle-button.mod-active {{background:#1d4e79;color:#ffffff;"
        "border-color:#1d4e79;font-weight:600;}",
        f"{s} .swx-interval .widget-toggle-button.mod-active::before {{content:'\\2713\\00a0';}}",
        f"{s} .swx-covariates .widget-checkbox input {{accent-color:#1d4e79;}}",
        # Tabs as wide as their titles (shrinking when the row is full), so "Linear fit (computing…)"
        # is read whole instead of cut at ipywidgets' fixed tab width.
        f"{s} .jupyter-widget-tab > .lm-TabBar .lm-TabBar-tab {{flex:0 1 auto;}}",
    ]
    return f"<style>{' '.join(rules)}</style>"
