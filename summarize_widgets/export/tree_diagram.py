"""A static drawing of the summary tree for the report: inline SVG, no script, no network.

It carries what the explorer's tree view shows (widgets/tree_view.py, js/tree_view.js): one box per
node, left to right by depth, each with the subgroup label (S1..Sk) and its split, the units and
their share (of units, and of compliers for complier-weighted draws), the posterior mean and
interval, and the weak-uptake mark; leaves are filled on the figures' diverging scale (warm end = the better direction). The numbers
come from :func:`summarize_widgets.export.layout.subgroup_texts`, so they read as in every table.
"""
from __future__ import annotations

import html

from ..figures.palette import INK, benefit_sign, effect_color
from .layout import WEAK_MARK, rule_to_text, subgroup_texts

__all__ = ["tree_diagram_svg", "tree_box_lines"]

_W_CHAR = 6.9   # px per character of 12 px sans-serif text (a generous average, so text stays inside its box)
_BOX_H = 62
_GAP_X = 34
_GAP_Y = 12
_PAD = 8


def _luminance(hex_colour: str) -> float:
    """WCAG 2 relative luminance (as js/tree_view.js relativeLuminance)."""
    def lin(c):
        s = c / 255
        return s / 12.92 if s <= 0.04045 else ((s + 0.055) / 1.055) ** 2.4
    r, g, b = (int(hex_colour[i:i + 2], 16) for i in (1, 3, 5))
    return 0.2126 * lin(r) + 0.7152 * lin(g) + 0.0722 * lin(b)


def _text_on(fill: str) -> str:
    lum, dark = _luminance(fill), _luminance(INK)
    return INK if (lum + 0.05) / (dark + 0.05) >= 1.05 / (lum + 0.05) else "#ffffff"


def tree_box_lines(nodes, weak=()) -> dict[int, list[str]]:
    """The three text lines of every box, by node id: label and split, size, estimate.

    Parameters
    ----------
    nodes : DataFrame
        ``TreeSummary.nodes()``.
    weak : iterable of int
        Node ids flagged for weak uptake.
    """
    texts = subgroup_texts(nodes)
    weak = {int(w) for w in weak}
    compliers = "complier_share" in nodes.columns
    out = {}
    for k, r in enumerate(nodes.itertuples(index=False)):
        t = texts.iloc[k]
        if int(r.parent) == -1:
            head = "All units"
        else:
            split = rule_to_text(r.split)
            head = f"{r.label} \u00b7 {split}" if getattr(r, "label", "") else split
        size = (f"{t['n_text']} units ({t['share_text']}) \u00b7 {t['complier_share_text']} of compliers" if compliers
                else f"{t['n_text']} units \u00b7 {t['share_text']}")
        est = f"{t['mean_text']} {t['interval_text']}" + (f" {WEAK_MARK}" if int(r.node) in weak else "")
        out[int(r.node)] = [head, size, est]
    return out


def tree_diagram_svg(tree, *, level: float = 0.95, interval: str = "equal-tailed") -> str:
    """The summary tree at its current depth as one ``<svg>`` element (escaped, self-contained).

    The drawing scales to the width of its container (``viewBox``); boxes are wide enough for
    their longest line, so no text is cut.
    """
    nodes = tree.nodes(level=level, interval=interval)
    table = tree.table(level=level, interval=interval)
    weak = set(table.loc[table["weak_uptake"], "subgroup"].astype(int)) if "weak_uptake" in table.columns else set()
    lines = tree_box_lines(nodes, weak)
    width = max(150.0, _W_CHAR * max(len(s) for ls in lines.values() for s in ls) + 20)
    children: dict[int, list[int]] = {}
    for r in nodes.itertuples(index=False):
        children.setdefault(int(r.parent), []).append(int(r.node))
    depth = {int(r.node): int(r.depth) for r in nodes.itertuples(index=False)}
    leaf = {int(r.node): bool(r.is_leaf) for r in nodes.itertuples(index=False)}
    mean = {int(r.node): float(r.mean) for r in nodes.itertuples(index=False)}
    # Leaves one per row in tree order (depth first, children by node id: S1..Sk top to bottom);
    # an inner node sits level with the middle of its children.
    y: dict[int, float] = {}
    row = [0]

    def place(node: int) -> float:
        kids = sorted(children.get(node, []))
        if not kids or leaf[node]:
            y[node] = _PAD + row[0] * (_BOX_H + _GAP_Y)
            row[0] += 1
        else:
            ys = [place(c) for c in kids]
            y[node] = (ys[0] + ys[-1]) / 2
        return y[node]

    root = children[-1][0]
    place(root)
    steady = [abs(mean[n]) for n in y if leaf[n] and n not in weak and mean[n] == mean[n]]
    every = [abs(mean[n]) for n in y if leaf[n] and mean[n] == mean[n]]
    vmax = max(steady or every or [0.0])
    sign = benefit_sign(tree.draws.better)
    x = {n: _PAD + depth[n] * (width + _GAP_X) for n in y}
    total_w = _PAD * 2 + (max(depth.values()) + 1) * width + max(depth.values()) * _GAP_X
    total_h = _PAD * 2 + row[0] * (_BOX_H + _GAP_Y) - _GAP_Y
    esc = html.escape
    parts = []
    for n in y:  # edges first, under the boxes
        for c in children.get(n, []) if not leaf[n] else []:
            x1, y1, x2, y2 = x[n] + width, y[n] + _BOX_H / 2, x[c], y[c] + _BOX_H / 2
            xm = (x1 + x2) / 2
            parts.append(f'<path class="sw-tree-edge" d="M{x1:.1f},{y1:.1f} C{xm:.1f},{y1:.1f} {xm:.1f},{y2:.1f} '
                         f'{x2:.1f},{y2:.1f}" fill="none" stroke="#8A8C91" stroke-width="1.2"/>')
    for n in y:
        fill = effect_color(sign * mean[n], vmax) if leaf[n] else "#FFFFFF"  # warm end = better direction
        ink = _text_on(fill)
        head, size, est = lines[n]
        cls = "sw-tree-leaf" if leaf[n] else "sw-tree-inner"
        stroke = ' stroke-dasharray="4 3"' if n in weak else ""
        parts.append(
            f'<g class="sw-tree-node {cls}" transform="translate({x[n]:.1f},{y[n]:.1f})">'
            f"<title>{esc(head)}\n{esc(size)}\n{esc(est)}</title>"
            f'<rect width="{width:.1f}" height="{_BOX_H}" rx="5" fill="{fill}" stroke="{INK}" stroke-width="1"{stroke}/>'
            f'<text x="9" y="18" fill="{ink}" font-weight="600">{esc(head)}</text>'
            f'<text x="9" y="36" fill="{ink}">{esc(size)}</text>'
            f'<text x="9" y="54" fill="{ink}">{esc(est)}</text></g>')
    label = (f"Summary tree at depth {tree.depth}: {int(sum(leaf[n] for n in y))} subgroups; each box gives the "
             "subgroup label and split, units and share, posterior mean and interval.")
    return (f'<svg class="sw-tree" role="img" aria-label="{esc(label)}" viewBox="0 0 {total_w:.0f} {total_h:.0f}" '
            f'width="100%" style="max-width:{total_w:.0f}px" preserveAspectRatio="xMinYMin meet" '
            f'font-family="Helvetica Neue, Helvetica, Arial, Liberation Sans, DejaVu Sans, sans-serif" font-size="12" '
            f'xmlns="http://www.w3.org/2000/svg">' + "".join(parts) + "</svg>")
