"""The summary-tree view: an anywidget whose ES module lives in the repository's ``js/``.

The Python side only holds state: the node records of
:meth:`TreeSummary.nodes` (one dict per node, with the weak-uptake flag), the
selected node id, the diverging palette, the colour range and a caption. Everything drawn is computed in
``js/tree_view.js`` from that state, so the view also renders from saved
widget state (a static HTML export) with no kernel.
"""
from __future__ import annotations

import math
from importlib import resources
from pathlib import Path

import anywidget
import traitlets

from ..core.validate import SummaryError
from ..core.rules import rule_text
from ..export.layout import subgroup_texts
from ..figures.palette import EFFECT_PALETTE

__all__ = ["TreeView", "NODE_FIELDS", "RECORD_FIELDS", "TEXT_FIELDS", "node_records", "asset_path", "DEFAULT_PALETTE"]

# Columns of TreeSummary.nodes() the records are made from (DEVELOPERS.md, the result contract).
NODE_FIELDS = ("node", "parent", "depth", "split", "rule", "is_leaf", "n_units", "share", "mean", "lower", "upper")
# Fields of every record the ES module reads: the columns above (``share`` is the share of compliers when
# ``nodes`` has ``complier_share``, i.e. for complier-weighted draws, else the share of units), plus
# ``unit_share`` (the share of units), ``weak`` (weak uptake: an unstable ratio, flagged in the box and
# left out of the colour range), ``label`` (the subgroup's S1..Sk label, "" for inner nodes) and the
# numbers as every table prints them (``export.layout.subgroup_texts``, core/numbers.py): ``mean_text``,
# ``interval_text``, ``share_text`` (of ``share``) and ``unit_share_text``; ``rule_text`` and
# ``split_text``, the rule and the edge condition in the one rule syntax (core.rules.rule_text).
TEXT_FIELDS = ("label", "mean_text", "interval_text", "share_text", "unit_share_text", "rule_text", "split_text")
RECORD_FIELDS = NODE_FIELDS + ("unit_share", "weak") + TEXT_FIELDS
_INT_FIELDS = ("node", "parent", "depth", "n_units")
_FLOAT_FIELDS = ("share", "mean", "lower", "upper", "unit_share")

# The figures' diverging scale, so a leaf's fill matches its marker in every figure.
DEFAULT_PALETTE = EFFECT_PALETTE


def asset_path(name: str) -> Path:
    """Locate a front-end file shipped with the package: ``summarize_widgets/_static/<name>``.

    ``summarize_widgets/_static`` is a link to the repository's top-level ``js/`` folder, so
    a source checkout, an editable install and a wheel (which stores the linked files) all
    find the files the same way.

    Parameters
    ----------
    name : str
        File name inside ``js/``, for example ``"tree_view.js"``.

    Returns
    -------
    pathlib.Path
    """
    path = Path(str(resources.files("summarize_widgets") / "_static" / name))
    if not path.is_file():
        raise FileNotFoundError(
            f"front-end file {name!r} not found in {path.parent}. Reinstall the package "
            "(pip install summarize_widgets) so its JavaScript is included."
        )
    return path


def _clean(value, field):
    if value is None:
        return None
    if field in _INT_FIELDS:
        return int(value)
    if field in _FLOAT_FIELDS:
        value = float(value)
        # JSON has no NaN: a missing number travels as null and the view prints "n/a".
        return value if math.isfinite(value) else None
    if field == "is_leaf":
        return bool(value)
    return str(value)


def node_records(nodes, weak=()) -> list[dict]:
    """Turn a ``TreeSummary.nodes()`` DataFrame into JSON-ready dicts for the view.

    Parameters
    ----------
    nodes : pandas.DataFrame
        One row per node with at least the columns of ``NODE_FIELDS``.
    weak : iterable of int, default ()
        Node ids of subgroups flagged for weak uptake (``TreeSummary.table()["weak_uptake"]``).

    Returns
    -------
    list of dict
        One dict per node with exactly the keys of ``RECORD_FIELDS``; ids and
        counts as int, numbers as float (None for NaN), flags as bool, printed texts as str
        (the same digits as the subgroup table: one formatter for every output).
    """
    missing = [f for f in NODE_FIELDS if f not in getattr(nodes, "columns", ())]
    if missing:
        have = list(getattr(nodes, "columns", ()))
        raise SummaryError(
            f"`nodes` must be a DataFrame with columns {list(NODE_FIELDS)}; missing {missing} (got columns {have})."
        )
    weak = {int(w) for w in weak}
    texts = subgroup_texts(nodes)
    compliers = "complier_share" in nodes.columns
    rows = nodes.loc[:, list(NODE_FIELDS)].to_dict("records")
    roots = [r["n_units"] for r in rows if int(r["parent"]) == -1]
    total = float(roots[0]) if roots and roots[0] else None
    labels = nodes["label"].tolist() if "label" in nodes.columns else [""] * len(rows)
    out = []
    for k, row in enumerate(rows):
        rec = {f: _clean(row[f], f) for f in NODE_FIELDS}
        t = texts.iloc[k]
        if compliers:  # the boxes say "of compliers": the share of the compliers, beside the share of units
            rec["unit_share"] = rec["share"]
            rec["share"] = _clean(nodes["complier_share"].iloc[k], "share")
            rec["share_text"], rec["unit_share_text"] = str(t["complier_share_text"]), str(t["share_text"])
        else:
            rec["unit_share"] = _clean(rec["n_units"] / total if total else None, "unit_share")
            rec["share_text"] = rec["unit_share_text"] = str(t["share_text"])
        rec["weak"] = rec["node"] in weak
        rec["label"] = "" if labels[k] is None or (isinstance(labels[k], float) and math.isnan(labels[k])) else str(labels[k])
        rec["mean_text"], rec["interval_text"] = str(t["mean_text"]), str(t["interval_text"])
        rec["rule_text"], rec["split_text"] = rule_text(rec["rule"]), rule_text(rec["split"])
        out.append(rec)
    return out


class TreeView(anywidget.AnyWidget):
    """The subgroup tree drawn as boxes; clicking a box selects that node.

    Parameters
    ----------
    nodes : list of dict, optional
        Node records as returned by :func:`node_records`.
    selected : int, default -1
        Selected node id (-1: none).
    palette : dict, optional
        ``stops``: colours from the most negative to the most positive effect, evenly
        spaced with the middle one at zero; ``missing``: colour of a missing value.
        Default: figures.py's ``DIVERGING`` and ``MUTED``.
    colour_limit : float, default 0
        The |posterior mean| that gets the full colour; 0 or less means the
        largest |mean| among the leaves shown that are not flagged for weak uptake.
        Means beyond it are drawn at the end colour and marked.
    caption : str, default ""
        One line above the tree.
    share_basis : {"units", "compliers"}, default "units"
        What the records' ``share`` is a share of (the boxes say so).
    interval_label : str, default ""
        How the interval is read out, for example "95% equal-tailed interval".

    Attributes
    ----------
    client_width : int
        Width of the drawn view in px, written by the browser (0 before it is drawn).
    """

    _esm = asset_path("tree_view.js")
    _css = asset_path("tree_view.css")

    nodes = traitlets.List(traitlets.Dict()).tag(sync=True)
    selected = traitlets.Int(-1).tag(sync=True)
    palette = traitlets.Dict(dict(DEFAULT_PALETTE)).tag(sync=True)
    colour_limit = traitlets.Float(0.0).tag(sync=True)
    caption = traitlets.Unicode("").tag(sync=True)
    share_basis = traitlets.Enum(("units", "compliers"), "units").tag(sync=True)
    interval_label = traitlets.Unicode("").tag(sync=True)
    #: Width of the view in px as the browser reports it (0 until drawn); the Explorer sizes its figures by it.
    client_width = traitlets.Int(0).tag(sync=True)

    @traitlets.validate("palette")
    def _check_palette(self, proposal):
        value = dict(proposal["value"])
        stops = value.get("stops")
        if not isinstance(stops, (list, tuple)) or len(stops) < 2:
            raise SummaryError(f"`palette['stops']` must list at least two colours; got {stops!r}.")
        named = [(f"palette['stops'][{i}]", c) for i, c in enumerate(stops)]
        for name, colour in named + [("palette['missing']", value.get("missing", EFFECT_PALETTE["missing"]))]:
            text = str(colour)
            if not (len(text) == 7 and text.startswith("#") and all(c in "0123456789abcdefABCDEF" for c in text[1:])):
                raise SummaryError(f"`{name}` must be a colour like '#1f77b4'; got {colour!r}.")
        return {"stops": [str(c) for c in stops], "missing": str(value.get("missing", EFFECT_PALETTE["missing"]))}

    @property
    def leaf_ids(self) -> list[int]:
        """Ids of the leaves currently drawn."""
        return [r["node"] for r in self.nodes if r["is_leaf"]]
