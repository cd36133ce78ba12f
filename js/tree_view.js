// @ts-check
/**
 * Summary-tree view for summarize_widgets: an anywidget ES module.
 *
 * No build step, no imports, no network: the module draws the subgroup tree
 * as SVG boxes (left to right, one column per depth) from the synced
 * `nodes` traitlet, colours leaves on a diverging scale centred at zero and
 * writes the clicked node's id into the synced `selected` traitlet.
 *
 * The tree is drawn in a frame of bounded height, scaled to fit it ("Fit"), with
 * zoom (buttons, Ctrl + wheel, + and - keys) and pan (drag); how much text a box
 * shows follows its size on screen (three lines, two, one, or none: the box's
 * title and aria-label always carry everything).
 *
 * Keyboard (the tree pattern of WAI-ARIA): Tab reaches the tree at the selected
 * box; Right moves to the first child, Left to the parent, Down / Up to the next /
 * previous box of the same column (the sibling first), Home / End to the root /
 * the last subgroup; Enter or Space selects.
 *
 * Synced traitlets read here (set by summarize_widgets/widgets/tree_view.py):
 *   nodes          NodeRecord[]  one record per node down to the current depth
 *   selected       number        node id, -1 for none
 *   palette        Palette       diverging colours shared with figures.py
 *   colour_limit   number        |mean| that gets the full colour (<= 0: from the unflagged leaves)
 *   caption        string        one line above the tree
 *   share_basis    string        "units" or "compliers": what `share` is a share of
 *   interval_label string        e.g. "95% equal-tailed interval" (read out by screen readers)
 * and writes:
 *   selected      on a click (or Enter / Space on a focused box)
 *   client_width  the px width of the view, when it changes
 *
 * The pure functions (layout, colour scale, formatting) are exported so that
 * tests/js/ can check them with `node --test`.
 */

/**
 * @typedef {object} NodeRecord
 * @property {number} node       node id (stable across depths)
 * @property {number} parent     parent id, -1 for the root
 * @property {number} depth      0 for the root
 * @property {string} split      condition on the edge from the parent ("" for the root)
 * @property {string} rule       full path rule
 * @property {boolean} is_leaf   a subgroup at the current depth
 * @property {number} n_units
 * @property {number} share      weighted share (0..1): of units, or of compliers for complier-weighted draws
 * @property {number} [unit_share] share of units (n_units / all units), when `share` is not it
 * @property {boolean} [weak]    weak uptake: the subgroup's ratio estimate is unstable
 * @property {number|null} mean  posterior mean effect
 * @property {number|null} lower interval lower end
 * @property {number|null} upper interval upper end
 * @property {string} [label]          the subgroup's printed label (S1..Sk), "" for inner nodes
 * @property {string} [mean_text]      the mean as every table prints it (core/numbers.py)
 * @property {string} [interval_text]  "[lower, upper]" as every table prints it
 * @property {string} [share_text]     `share` as a percentage, as the tables print it
 * @property {string} [unit_share_text] `unit_share` as a percentage
 * @property {string} [rule_text]      `rule` in the one rule syntax of every output ("and", "\u2208")
 * @property {string} [split_text]     `split` in that syntax
 */

/**
 * @typedef {object} Palette
 * @property {string[]} stops   colours from the most negative to the most positive (#rrggbb),
 *                              evenly spaced, the middle one at zero
 * @property {string} [missing] colour for a non-finite value
 */

/**
 * @typedef {object} Placed
 * @property {NodeRecord} record
 * @property {number} x  left edge of the box
 * @property {number} y  top edge of the box
 */

/**
 * @typedef {object} Layout
 * @property {Placed[]} boxes  in the order of the records
 * @property {{from: Placed, to: Placed}[]} edges
 * @property {number} width    total width in px
 * @property {number} height   total height in px
 */

/** Box geometry in px. */
export const GEOMETRY = Object.freeze({ width: 224, height: 58, gapX: 34, gapY: 10, margin: 6 });

/** Fallback palette: a copy of figures.py's DIVERGING and MUTED (the Python side sends the live one). */
export const DEFAULT_PALETTE = Object.freeze({
  stops: Object.freeze(["#1D4E79", "#6F9BC4", "#F3F0EA", "#E2A066", "#9A4A12"]),
  missing: "#A7A9AC",
});

const MINUS = "\u2212";
// Width changes smaller than this (px) are not reported back to Python.
const WIDTH_STEP = 8;
const DARK_TEXT = "#222222";

/**
 * Place every node: leaves take consecutive rows in depth-first order,
 * a parent sits level with the middle of its children, x grows with depth.
 *
 * @param {NodeRecord[]} nodes
 * @param {{width:number,height:number,gapX:number,gapY:number,margin:number}} [geometry]
 * @returns {Layout}
 */
export function layoutTree(nodes, geometry = GEOMETRY) {
  const g = geometry;
  if (!Array.isArray(nodes) || nodes.length === 0) {
    return { boxes: [], edges: [], width: 0, height: 0 };
  }
  /** @type {Map<number, NodeRecord>} */
  const byId = new Map();
  for (const rec of nodes) {
    if (byId.has(rec.node)) throw new Error(`tree view: node id ${rec.node} appears twice`);
    byId.set(rec.node, rec);
  }
  /** @type {Map<number, NodeRecord[]>} */
  const children = new Map();
  const roots = [];
  for (const rec of nodes) {
    if (rec.parent === -1 || rec.parent === null || rec.parent === undefined) {
      roots.push(rec);
      continue;
    }
    if (!byId.has(rec.parent)) {
      throw new Error(`tree view: node ${rec.node} names parent ${rec.parent}, which is not among the nodes`);
    }
    const list = children.get(rec.parent) ?? [];
    list.push(rec);
    children.set(rec.parent, list);
  }
  if (roots.length !== 1) throw new Error(`tree view: expected one root node, found ${roots.length}`);

  /** @type {Map<number, Placed>} */
  const placed = new Map();
  /** @type {{from: Placed, to: Placed}[]} */
  const edges = [];
  let row = 0;
  let maxDepth = 0;
  /** @type {Set<number>} */
  const seen = new Set();
  const rowHeight = g.height + g.gapY;

  /**
   * Returns the box's centre row (a fractional row index).
   * @param {NodeRecord} rec
   * @param {number} level
   * @returns {number}
   */
  const place = (rec, level) => {
    if (seen.has(rec.node)) throw new Error(`tree view: node ${rec.node} is its own ancestor`);
    seen.add(rec.node);
    maxDepth = Math.max(maxDepth, level);
    const kids = children.get(rec.node) ?? [];
    let centre;
    if (kids.length === 0) {
      centre = row;
      row += 1;
    } else {
      const centres = kids.map((k) => place(k, level + 1));
      centre = (centres[0] + centres[centres.length - 1]) / 2;
    }
    const box = { record: rec, x: g.margin + level * (g.width + g.gapX), y: g.margin + centre * rowHeight };
    placed.set(rec.node, box);
    return centre;
  };
  place(roots[0], 0);
  if (seen.size !== nodes.length) {
    throw new Error(`tree view: ${nodes.length - seen.size} node(s) are not connected to the root`);
  }
  for (const rec of nodes) {
    const to = placed.get(rec.node);
    const from = placed.get(rec.parent);
    if (from && to) edges.push({ from, to });
  }
  return {
    boxes: nodes.map((rec) => /** @type {Placed} */ (placed.get(rec.node))),
    edges,
    width: 2 * g.margin + (maxDepth + 1) * g.width + maxDepth * g.gapX,
    height: 2 * g.margin + row * rowHeight - g.gapY,
  };
}

/**
 * @param {string} hex  "#rrggbb"
 * @returns {[number, number, number]}
 */
export function parseHex(hex) {
  const m = /^#([0-9a-f]{6})$/i.exec(String(hex).trim());
  if (!m) throw new Error(`tree view: colour must look like #rrggbb, got ${JSON.stringify(hex)}`);
  const v = parseInt(m[1], 16);
  return [(v >> 16) & 255, (v >> 8) & 255, v & 255];
}

/**
 * @param {[number, number, number]} rgb
 * @returns {string}
 */
function toHex(rgb) {
  return "#" + rgb.map((c) => Math.round(Math.min(255, Math.max(0, c))).toString(16).padStart(2, "0")).join("");
}

/**
 * Colour for `value` on a diverging scale centred at zero: position
 * t = 0.5 + 0.5 * clamp(value / limit, -1, 1) along evenly spaced `stops`,
 * linear in sRGB between neighbouring stops (as plotly interpolates
 * colorscales and as figures.py's effect_color does).
 *
 * @param {number|null|undefined} value
 * @param {number} limit  the |value| that gets an end colour (> 0; otherwise 1)
 * @param {Palette} [palette]
 * @returns {string} "#rrggbb"
 */
export function divergingColour(value, limit, palette = DEFAULT_PALETTE) {
  if (value === null || value === undefined || !Number.isFinite(value)) {
    return (palette.missing ?? DEFAULT_PALETTE.missing).toLowerCase();
  }
  const stops = palette.stops;
  if (!Array.isArray(stops) || stops.length < 2) {
    throw new Error(`tree view: palette.stops must list at least two colours, got ${JSON.stringify(stops)}`);
  }
  const lim = Number.isFinite(limit) && limit > 0 ? limit : 1;
  const t = 0.5 + 0.5 * Math.max(-1, Math.min(1, value / lim));
  const pos = t * (stops.length - 1);
  const i = Math.min(stops.length - 2, Math.floor(pos));
  const f = pos - i;
  const a = parseHex(stops[i]);
  const b = parseHex(stops[i + 1]);
  return toHex(/** @type {[number, number, number]} */ (a.map((c, k) => c + f * (b[k] - c))));
}

/**
 * WCAG 2 relative luminance of an sRGB colour (0 = black, 1 = white).
 * @param {string} hex
 * @returns {number}
 */
export function relativeLuminance(hex) {
  const [r, g, b] = parseHex(hex).map((c) => {
    const s = c / 255;
    return s <= 0.04045 ? s / 12.92 : ((s + 0.055) / 1.055) ** 2.4;
  });
  return 0.2126 * r + 0.7152 * g + 0.0722 * b;
}

/**
 * Dark or light text, whichever has the larger WCAG contrast ratio on `background`.
 * @param {string} background
 * @returns {string}
 */
export function textColourOn(background) {
  const L = relativeLuminance(background);
  const dark = relativeLuminance(DARK_TEXT);
  // WCAG contrast ratio (L1 + 0.05) / (L2 + 0.05); white text has L = 1.
  return (L + 0.05) / (dark + 0.05) >= 1.05 / (L + 0.05) ? DARK_TEXT : "#ffffff";
}

/**
 * The |mean| that gets the full colour: the largest |mean| among leaves not
 * flagged for weak uptake (an unstable ratio must not wash out every other box),
 * or among all leaves when every one is flagged; 1 when there is none.
 * @param {NodeRecord[]} nodes
 * @returns {number}
 */
export function colourLimit(nodes) {
  const largest = (/** @type {NodeRecord[]} */ recs) => {
    let lim = 0;
    for (const rec of recs) {
      if (rec.is_leaf && rec.mean !== null && Number.isFinite(rec.mean)) lim = Math.max(lim, Math.abs(rec.mean));
    }
    return lim;
  };
  const lim = largest(nodes.filter((r) => !r.weak)) || largest(nodes);
  return lim > 0 ? lim : 1;
}

/**
 * Whether a box's mean lies beyond the colour scale (drawn at the end colour and marked).
 * @param {NodeRecord} rec
 * @param {number} limit
 * @returns {boolean}
 */
export function beyondScale(rec, limit) {
  return rec.mean !== null && rec.mean !== undefined && Number.isFinite(rec.mean) && Math.abs(rec.mean) > limit * (1 + 1e-9);
}

/**
 * Decimals that give the number of largest magnitude `digits` significant digits.
 * @param {number} maxAbs
 * @param {number} [digits]
 * @returns {number}
 */
export function decimalsFor(maxAbs, digits = 3) {
  if (!Number.isFinite(maxAbs) || maxAbs === 0) return digits - 1;
  // Rounding can carry into a new digit (9.996 -> 10.0): decide on the rounded value.
  let decimals = Math.max(0, digits - 1 - Math.floor(Math.log10(Math.abs(maxAbs))));
  const rounded = Math.abs(Number(Math.abs(maxAbs).toFixed(Math.min(decimals, 20))));
  if (rounded > 0 && decimals > 0 && Math.floor(Math.log10(rounded)) > Math.floor(Math.log10(Math.abs(maxAbs)))) {
    decimals -= 1;
  }
  return Math.min(decimals, 20);
}

/**
 * A number with a fixed number of decimals, thousands separators and a true minus sign.
 * @param {number|null|undefined} x
 * @param {number} decimals
 * @returns {string}
 */
export function formatFixed(x, decimals) {
  if (x === null || x === undefined || !Number.isFinite(x)) return "n/a";
  const text = Math.abs(x).toFixed(decimals);
  if (Number(text) === 0) return text; // no "-0.00"
  const [whole, frac] = text.split(".");
  const grouped = whole.replace(/\B(?=(\d{3})+(?!\d))/g, ",");
  const body = frac ? `${grouped}.${frac}` : grouped;
  return x < 0 ? MINUS + body : body;
}

/**
 * A number with `digits` significant digits (never fewer than its integer part),
 * thousands separators, and a true minus sign.
 * @param {number|null|undefined} x
 * @param {number} [digits]
 * @returns {string}
 */
export function formatNumber(x, digits = 3) {
  if (x === null || x === undefined || !Number.isFinite(x)) return "n/a";
  if (x === 0) return "0";
  const text = formatFixed(x, decimalsFor(x, digits));
  return /^[0.]+$/.test(text) ? "0" : text;
}

/**
 * Mean and interval with shared decimals, so the three numbers line up:
 * the largest |value| gets `digits` significant digits.
 * @param {number|null|undefined} mean
 * @param {number|null|undefined} lower
 * @param {number|null|undefined} upper
 * @param {number} [digits]
 * @returns {string} "mean [lower, upper]"
 */
export function formatEstimate(mean, lower, upper, digits = 3) {
  const finite = [mean, lower, upper].filter((v) => v !== null && v !== undefined && Number.isFinite(v));
  const maxAbs = finite.length ? Math.max(...finite.map((v) => Math.abs(/** @type {number} */ (v)))) : 0;
  const d = decimalsFor(maxAbs, digits);
  return `${formatFixed(mean, d)} [${formatFixed(lower, d)}, ${formatFixed(upper, d)}]`;
}

/**
 * @param {number|null|undefined} lower
 * @param {number|null|undefined} upper
 * @returns {string} "[lower, upper]"
 */
export function formatInterval(lower, upper) {
  return `[${formatNumber(lower)}, ${formatNumber(upper)}]`;
}

/**
 * A share as a percentage: whole percent, "<1%" for small non-zero shares.
 * @param {number} share  0..1
 * @returns {string}
 */
export function formatShare(share) {
  if (!Number.isFinite(share)) return "n/a";
  if (share > 0 && share < 0.005) return "<1%";
  return `${Math.round(share * 100)}%`;
}

/**
 * @param {number} n
 * @returns {string}
 */
export function formatCount(n) {
  return Number.isFinite(n) ? String(Math.round(n)).replace(/\B(?=(\d{3})+(?!\d))/g, ",") : "n/a";
}

/**
 * Shorten text to at most `max` characters, ending with an ellipsis.
 * @param {string} text
 * @param {number} max
 * @returns {string}
 */
export function truncate(text, max) {
  const s = String(text ?? "");
  return s.length <= max ? s : s.slice(0, Math.max(0, max - 1)) + "\u2026";
}

/**
 * A condition as printed: "<=" and ">=" typeset as the figures print them.
 * @param {string} text
 * @returns {string}
 */
export function typeset(text) {
  return String(text ?? "").replaceAll("<=", "\u2264").replaceAll(">=", "\u2265");
}

/**
 * A record's rule as every output prints it: the kernel's `rule_text` (core/rules.py), or the raw
 * rule typeset when a record carries no printed text.
 * @param {NodeRecord} rec
 * @returns {string}
 */
export function ruleText(rec) {
  return rec.rule_text ?? typeset(rec.rule);
}

/**
 * A record's edge condition as every output prints it (see ruleText).
 * @param {NodeRecord} rec
 * @returns {string}
 */
export function splitText(rec) {
  return rec.split_text ?? typeset(rec.split);
}

/** Mark after a weak-uptake subgroup's estimate (the tables' footnote symbol). */
export const WEAK_MARK = "\u2020";

/**
 * The second line of a box: units, and what its share is a share of.
 * @param {NodeRecord} rec
 * @param {string} [basis] "units" or "compliers"
 * @returns {string}
 */
export function sizeLine(rec, basis = "units") {
  const share = rec.share_text ?? formatShare(rec.share);
  if (basis === "compliers") {
    const units = rec.unit_share ?? null;
    const unitText = rec.unit_share_text ?? (units === null ? null : formatShare(units));
    const ofUnits = unitText === null ? "" : ` (${unitText})`;
    return `${formatCount(rec.n_units)} units${ofUnits} \u00b7 ${share} of compliers`;
  }
  return `${formatCount(rec.n_units)} units \u00b7 ${share}`;
}

/**
 * The posterior mean as printed: the record's `mean_text` (the tables' formatter, sent from
 * Python) when present, else formatted here.
 * @param {NodeRecord} rec
 * @returns {string}
 */
export function meanText(rec) {
  return rec.mean_text ?? formatNumber(rec.mean);
}

/**
 * "mean [lower, upper]" as printed: the record's texts when present, else formatted here.
 * @param {NodeRecord} rec
 * @returns {string}
 */
export function estimateText(rec) {
  if (rec.mean_text !== undefined && rec.interval_text !== undefined) return `${rec.mean_text} ${rec.interval_text}`;
  return formatEstimate(rec.mean, rec.lower, rec.upper);
}

/**
 * The first line of a box: "All units" for the root, else the subgroup label (leaves) and
 * the split condition.
 * @param {NodeRecord} rec
 * @returns {string}
 */
export function headLine(rec) {
  if (rec.parent === -1 || !rec.split) return "All units";
  return rec.label ? `${rec.label} \u00b7 ${splitText(rec)}` : splitText(rec);
}

/**
 * The three text lines of a box.
 * @param {NodeRecord} rec
 * @param {string} [basis] "units" or "compliers": what `share` is a share of
 * @returns {[string, string, string]}
 */
export function boxLines(rec, basis = "units") {
  const mark = rec.weak ? ` ${WEAK_MARK}` : "";
  return [headLine(rec), sizeLine(rec, basis), estimateText(rec) + mark];
}

/**
 * What a screen reader says for a box: rule, size, effect, and the flags.
 * @param {NodeRecord} rec
 * @param {{basis?: string, interval?: string, limit?: number, selected?: boolean}} [ctx]
 * @returns {string}
 */
export function ariaLabel(rec, ctx = {}) {
  const basis = ctx.basis ?? "units";
  const rule = ruleText(rec) || "All units";
  let size = `${formatCount(rec.n_units)} units`;
  const share = rec.share_text ?? formatShare(rec.share);
  if (basis === "compliers") {
    if (rec.unit_share !== undefined && rec.unit_share !== null) size += `, ${rec.unit_share_text ?? formatShare(rec.unit_share)} of units`;
    size += `, ${share} of compliers`;
  } else {
    size += `, ${share} of units`;
  }
  const mean = rec.mean_text ?? formatNumber(rec.mean, 4);
  const iv = rec.interval_text ?? formatInterval(rec.lower, rec.upper);
  const parts = [
    rec.is_leaf ? `Subgroup${rec.label ? ` ${rec.label}` : ""}: ${rule}` : `${rule} (split further)`,
    size,
    `posterior mean ${mean}, ${ctx.interval || "interval"} ${iv}`,
  ];
  if (rec.weak) parts.push("weak uptake: the estimate is unstable");
  if (ctx.limit !== undefined && rec.is_leaf && beyondScale(rec, ctx.limit)) parts.push("beyond the colour scale");
  if (ctx.selected) parts.push("selected");
  return parts.join("; ") + ".";
}

// ---------------------------------------------------------------------------
// Fitting, zooming, panning (pure: transforms are {scale, x, y}, screen = x + scale * world)

/** Frame and zoom limits (px, and scale factors). */
export const FRAME = Object.freeze({ minHeight: 150, maxHeight: 640, pad: 8, minScale: 0.05, maxScale: 2.5 });

/**
 * Height of the frame for a layout drawn `width` px wide: the tree's height once
 * scaled to the width (never enlarged), within FRAME's bounds.
 * @param {{width: number, height: number}} layout
 * @param {number} width
 * @returns {number}
 */
export function frameHeight(layout, width) {
  const f = FRAME;
  if (!(layout.width > 0 && layout.height > 0)) return f.minHeight;
  const scale = width > 0 ? Math.min(1, (width - 2 * f.pad) / layout.width) : 1;
  return Math.round(Math.min(f.maxHeight, Math.max(f.minHeight, layout.height * scale + 2 * f.pad)));
}

/**
 * The transform that shows the whole layout in a `width` x `height` frame:
 * the largest scale (at most 1) leaving `pad` px around it, left-aligned and
 * centred vertically.
 * @param {{width: number, height: number}} layout
 * @param {number} width
 * @param {number} height
 * @param {number} [pad]
 * @returns {{scale: number, x: number, y: number}}
 */
export function fitTransform(layout, width, height, pad = FRAME.pad) {
  if (!(layout.width > 0 && layout.height > 0 && width > 2 * pad && height > 2 * pad)) return { scale: 1, x: 0, y: 0 };
  const scale = Math.min(1, (width - 2 * pad) / layout.width, (height - 2 * pad) / layout.height);
  return { scale, x: pad, y: (height - layout.height * scale) / 2 };
}

/**
 * Zoom by `factor` about the screen point (cx, cy), the scale kept within FRAME's bounds.
 * @param {{scale: number, x: number, y: number}} t
 * @param {number} factor
 * @param {number} cx
 * @param {number} cy
 * @returns {{scale: number, x: number, y: number}}
 */
export function zoomAt(t, factor, cx, cy) {
  const scale = Math.min(FRAME.maxScale, Math.max(FRAME.minScale, t.scale * factor));
  const k = scale / t.scale;
  return { scale, x: cx - (cx - t.x) * k, y: cy - (cy - t.y) * k };
}

/**
 * Geometry and layout for a frame `width` px wide: when the tree is limited by its
 * height (many subgroups), the boxes are widened into the width that would stay
 * empty (up to three times the default), so each line can hold more text.
 * @param {NodeRecord[]} nodes
 * @param {number} width
 * @returns {{geometry: typeof GEOMETRY, layout: Layout, height: number}}
 */
export function fitGeometry(nodes, width) {
  let geometry = GEOMETRY;
  let layout = layoutTree(nodes, geometry);
  const height = frameHeight(layout, width);
  const fit = fitTransform(layout, width, height);
  const room = (width - 2 * FRAME.pad) / fit.scale;
  if (fit.scale < 1 && layout.width > 0 && room > layout.width * 1.02) {
    const columns = Math.round((layout.width - 2 * GEOMETRY.margin + GEOMETRY.gapX) / (GEOMETRY.width + GEOMETRY.gapX));
    const wide = (room - 2 * GEOMETRY.margin - (columns - 1) * GEOMETRY.gapX) / columns;
    geometry = Object.freeze({ ...GEOMETRY, width: Math.min(3 * GEOMETRY.width, Math.floor(wide)) });
    layout = layoutTree(nodes, geometry);
  }
  return { geometry, layout, height };
}

/**
 * The smallest pan that brings a box fully into a `width` x `height` frame
 * (`margin` px from its edges); the box's top-left wins when it cannot fit.
 * @param {{scale: number, x: number, y: number}} t
 * @param {{x: number, y: number}} box  world position of the box's top-left corner
 * @param {{width: number, height: number}} size  world size of the box
 * @param {number} width
 * @param {number} height
 * @param {number} [margin]
 * @returns {{scale: number, x: number, y: number}}
 */
export function ensureVisible(t, box, size, width, height, margin = 10) {
  const shift = (start, extent, room) => {
    if (start + extent > room - margin) start -= start + extent - (room - margin);
    if (start < margin) start = margin;
    return start;
  };
  const sx = t.x + box.x * t.scale;
  const sy = t.y + box.y * t.scale;
  const nx = shift(sx, size.width * t.scale, width);
  const ny = shift(sy, size.height * t.scale, height);
  return { scale: t.scale, x: t.x + (nx - sx), y: t.y + (ny - sy) };
}

/**
 * How much text a box shows at a scale: the lines that fit at a readable size on
 * screen, and the font size in world units that gives that size.
 * @param {number} scale
 * @param {{height: number}} [geometry]
 * @returns {{lines: number, font: number}}  lines: 3 (all), 2 (condition and mean), 1 (mean), 0 (none)
 */
export function detailFor(scale, geometry = GEOMETRY) {
  const READABLE = 9.5; // px on screen for two or three lines (common practice: about 9 px is the floor for UI text)
  const SMALLEST = 8.5; // px on screen for a single line, the box's one label
  const BASE = 12;
  if (!(scale > 0)) return { lines: 3, font: BASE };
  if (BASE * scale >= READABLE) return { lines: 3, font: BASE };
  const room = geometry.height - 6;
  const two = READABLE / scale;
  if (2 * 1.25 * two <= room) return { lines: 2, font: two };
  const one = SMALLEST / scale;
  if (1.1 * one <= geometry.height - 2) return { lines: 1, font: one };
  return { lines: 0, font: one };
}

// ---------------------------------------------------------------------------
// Keyboard navigation and selection sets (pure)

/**
 * The node a key moves to from `id`, or null if none (the tree pattern of WAI-ARIA,
 * laid out left to right): ArrowRight -> first child, ArrowLeft -> parent,
 * ArrowDown / ArrowUp -> next / previous node of the same depth in depth-first
 * order (the sibling first, then the neighbouring subtree's), Home -> root,
 * End -> the last subgroup.
 * @param {NodeRecord[]} nodes  in depth-first order (as TreeSummary.nodes gives them)
 * @param {number} id
 * @param {string} key
 * @returns {number|null}
 */
export function neighbour(nodes, id, key) {
  if (!nodes.length) return null;
  const order = depthFirst(nodes);
  const root = order[0];
  const rec = order.find((r) => r.node === id);
  if (!rec) return key.startsWith("Arrow") || key === "Home" || key === "End" ? root.node : null;
  if (key === "Home") return root.node;
  if (key === "End") return order[order.length - 1].node === id ? null : lastLeaf(order).node;
  if (key === "ArrowRight") {
    const child = order.find((r) => r.parent === id);
    return child ? child.node : null;
  }
  if (key === "ArrowLeft") return rec.parent >= 0 ? rec.parent : null;
  if (key === "ArrowDown" || key === "ArrowUp") {
    const column = order.filter((r) => r.depth === rec.depth);
    const i = column.indexOf(rec) + (key === "ArrowDown" ? 1 : -1);
    return i >= 0 && i < column.length ? column[i].node : null;
  }
  return null;
}

/**
 * Records in depth-first order (children in record order), the root first.
 * @param {NodeRecord[]} nodes
 * @returns {NodeRecord[]}
 */
export function depthFirst(nodes) {
  /** @type {Map<number, NodeRecord[]>} */
  const kids = new Map();
  let root = null;
  for (const r of nodes) {
    if (r.parent === -1 || r.parent === null || r.parent === undefined) root = r;
    else kids.set(r.parent, [...(kids.get(r.parent) ?? []), r]);
  }
  if (!root) return [];
  const out = [];
  const stack = [root];
  while (stack.length) {
    const r = /** @type {NodeRecord} */ (stack.pop());
    out.push(r);
    const k = kids.get(r.node) ?? [];
    for (let i = k.length - 1; i >= 0; i -= 1) stack.push(k[i]);
  }
  return out;
}

/** @param {NodeRecord[]} order */
function lastLeaf(order) {
  for (let i = order.length - 1; i >= 0; i -= 1) if (order[i].is_leaf) return order[i];
  return order[order.length - 1];
}

/**
 * Ids of the subgroups (leaves) inside node `id` (itself if it is a leaf).
 * @param {NodeRecord[]} nodes
 * @param {number} id
 * @returns {Set<number>}
 */
export function leavesUnder(nodes, id) {
  /** @type {Map<number, NodeRecord[]>} */
  const kids = new Map();
  for (const r of nodes) kids.set(r.parent, [...(kids.get(r.parent) ?? []), r]);
  const out = new Set();
  const start = nodes.find((r) => r.node === id);
  if (!start) return out;
  const stack = [start];
  while (stack.length) {
    const r = /** @type {NodeRecord} */ (stack.pop());
    if (r.is_leaf) out.add(r.node);
    for (const k of kids.get(r.node) ?? []) stack.push(k);
  }
  return out;
}

// ---------------------------------------------------------------------------
// DOM rendering (not used by the node tests)

const SVG_NS = "http://www.w3.org/2000/svg";
// Pointer travel (px) that turns a press into a pan instead of a click.
const DRAG_PX = 4;
const ZOOM_STEP = 1.25;

/**
 * @param {string} tag
 * @param {Record<string, string|number>} attrs
 * @returns {SVGElement}
 */
function svgEl(tag, attrs) {
  const el = /** @type {SVGElement} */ (document.createElementNS(SVG_NS, tag));
  for (const [k, v] of Object.entries(attrs)) el.setAttribute(k, String(v));
  return el;
}

/**
 * @param {string} label
 * @param {string} cls
 * @param {string} title
 * @returns {HTMLButtonElement}
 */
function button(label, cls, title) {
  const b = document.createElement("button");
  b.type = "button";
  b.className = `swtv-button ${cls}`;
  b.textContent = label;
  b.title = title;
  b.setAttribute("aria-label", title);
  return b;
}

/**
 * The boxes and edges of the tree, in world coordinates, inside `world`.
 * @param {SVGElement} world
 * @param {Layout} layout
 * @param {{selected: number, focus: number, palette: Palette, limit: number, basis: string, geometry: typeof GEOMETRY,
 *          interval: string, detail: {lines: number, font: number}, inSelection: Set<number>}} o
 */
function drawBoxes(world, layout, o) {
  const g = o.geometry;
  for (const { from, to } of layout.edges) {
    const x1 = from.x + g.width;
    const y1 = from.y + g.height / 2;
    const x2 = to.x;
    const y2 = to.y + g.height / 2;
    const xm = (x1 + x2) / 2;
    world.appendChild(svgEl("path", { class: "swtv-edge", d: `M${x1},${y1} C${xm},${y1} ${xm},${y2} ${x2},${y2}` }));
  }
  const depthOf = new Map(layout.boxes.map((b) => [b.record.node, b.record.depth]));
  const siblings = new Map();
  for (const b of layout.boxes) siblings.set(b.record.parent, [...(siblings.get(b.record.parent) ?? []), b.record.node]);
  for (const box of layout.boxes) {
    const rec = box.record;
    const fill = rec.is_leaf ? divergingColour(rec.mean, o.limit, o.palette) : "#ffffff";
    const ink = textColourOn(fill);
    const beyond = rec.is_leaf && beyondScale(rec, o.limit);
    const classes = ["swtv-node", rec.is_leaf ? "swtv-leaf" : "swtv-inner"];
    if (rec.node === o.selected) classes.push("swtv-selected");
    if (o.inSelection.has(rec.node) && rec.node !== o.selected) classes.push("swtv-in-selection");
    if (rec.weak) classes.push("swtv-weak");
    if (beyond) classes.push("swtv-beyond");
    const sibs = siblings.get(rec.parent) ?? [rec.node];
    const group = svgEl("g", {
      class: classes.join(" "),
      transform: `translate(${box.x},${box.y})`,
      tabindex: rec.node === o.focus ? 0 : -1,
      role: "treeitem",
      "aria-level": (depthOf.get(rec.node) ?? 0) + 1,
      "aria-setsize": sibs.length,
      "aria-posinset": sibs.indexOf(rec.node) + 1,
      "aria-selected": rec.node === o.selected ? "true" : "false",
      "aria-label": ariaLabel(rec, { basis: o.basis, interval: o.interval, limit: o.limit, selected: rec.node === o.selected }),
      "data-node": rec.node,
    });
    if (!rec.is_leaf) group.setAttribute("aria-expanded", "true");
    const title = svgEl("title", {});
    const lines = boxLines(rec, o.basis);
    title.textContent = `${rec.label ? `${rec.label}: ` : ""}${ruleText(rec) || "All units"}\n${lines[1]}\n` +
      `mean ${rec.mean_text ?? formatNumber(rec.mean, 4)}, ` +
      `${o.interval || "interval"} ${rec.interval_text ?? formatInterval(rec.lower, rec.upper)}` +
      (rec.weak ? `\n${WEAK_MARK} weak uptake: the estimate is unstable` : "") +
      (beyond ? "\nbeyond the colour scale: drawn at its end colour" : "");
    group.appendChild(title);
    group.appendChild(svgEl("rect", { class: "swtv-box", width: g.width, height: g.height, rx: 5, fill }));
    if (beyond) {
      // A corner notch: this mean lies outside the colour key's range.
      const s = 14;
      group.appendChild(svgEl("path", { class: "swtv-beyond-mark", d: `M${g.width - s},0 L${g.width - 5},0 Q${g.width},0 ${g.width},5 L${g.width},${s} Z`, fill: ink }));
    }
    const d = o.detail;
    const mean = meanText(rec) + (rec.weak ? ` ${WEAK_MARK}` : "");
    // [text, class, shorter text to use before truncating]
    /** @type {[string, string, string][]} */
    const shown = d.lines >= 3 ? [[lines[0], "swtv-split", ""], [lines[1], "swtv-size", ""], [lines[2], "swtv-effect", mean]]
      : d.lines === 2 ? [[lines[0], "swtv-split", ""], [lines[2], "swtv-effect", mean]]
        : d.lines === 1 ? [rec.is_leaf ? [`${mean} \u00b7 ${lines[0]}`, "swtv-effect", ""] : [lines[0], "swtv-split", ""]] : [];
    const step = d.lines >= 3 ? 16 : 1.2 * d.font;
    const top = (g.height - step * shown.length) / 2 + 0.8 * (d.lines >= 3 ? 12 : d.font);
    shown.forEach(([line, cls, alt], i) => {
      const text = svgEl("text", { class: cls, x: 9, y: top + i * step, fill: ink });
      text.style.fontSize = `${d.font}px`;
      // A first cut by characters; fitText() trims to the measured width once drawn.
      text.textContent = truncate(line, Math.max(4, Math.floor((g.width - 16) / (0.5 * d.font))));
      text.dataset.full = line;
      if (alt) text.dataset.alt = alt;
      group.appendChild(text);
    });
    world.appendChild(group);
  }
}

/**
 * Shorten every line that is wider than its box (needs the SVG in the page): its
 * shorter form first (an estimate without its interval), then an ellipsis.
 * @param {SVGElement} svg
 * @param {number} boxWidth
 */
function fitText(svg, boxWidth) {
  const room = boxWidth - 16;
  for (const el of svg.querySelectorAll("text")) {
    const text = /** @type {SVGTextContentElement} */ (/** @type {unknown} */ (el));
    let full = text.dataset.full ?? text.textContent ?? "";
    text.textContent = full;
    if (!(text.getComputedTextLength() > room)) continue; // 0 when hidden: keep the first cut
    if (text.dataset.alt) {
      full = text.dataset.alt;
      text.textContent = full;
      if (!(text.getComputedTextLength() > room)) continue;
    }
    let lo = 1;
    let hi = full.length;
    while (lo < hi) {
      const mid = Math.ceil((lo + hi) / 2);
      text.textContent = truncate(full, mid);
      if (text.getComputedTextLength() <= room) lo = mid;
      else hi = mid - 1;
    }
    text.textContent = truncate(full, lo);
  }
}

/**
 * Colour key: the scale from -limit to +limit, and what the marks mean.
 * @param {Palette} palette
 * @param {number} limit
 * @param {{weak: boolean, beyond: boolean, basis: string}} flags
 * @returns {HTMLElement}
 */
function drawKey(palette, limit, flags) {
  const key = document.createElement("div");
  key.className = "swtv-key";
  const note = document.createElement("span");
  note.className = "swtv-key-note";
  note.textContent = "subgroup colour: posterior mean";
  const low = document.createElement("span");
  low.textContent = formatNumber(-limit);
  const bar = document.createElement("span");
  bar.className = "swtv-key-bar";
  bar.style.background = `linear-gradient(to right, ${palette.stops.join(", ")})`;
  const high = document.createElement("span");
  high.textContent = formatNumber(limit);
  key.append(note, low, bar, high);
  const extras = [];
  if (flags.beyond) extras.push("\u25e5 corner: mean beyond this range, drawn at the end colour");
  if (flags.weak) extras.push(`${WEAK_MARK} dashed box: weak uptake, an unstable ratio (left out of the colour range)`);
  if (flags.basis === "compliers") extras.push("shares: (% of units) \u00b7 % of compliers");
  for (const text of extras) {
    const span = document.createElement("span");
    span.className = "swtv-key-flag";
    span.textContent = text;
    key.append(span);
  }
  return key;
}

/**
 * anywidget entry point.
 * @param {{model: any, el: HTMLElement}} ctx
 * @returns {() => void} cleanup
 */
function render({ model, el }) {
  const root = document.createElement("div");
  root.className = "swtv-root";
  const caption = document.createElement("div");
  caption.className = "swtv-caption";
  caption.setAttribute("aria-live", "polite");
  const toolbar = document.createElement("div");
  toolbar.className = "swtv-toolbar";
  const fitButton = button("Fit", "swtv-fit", "Fit the whole tree in the frame");
  const zoomOut = button("\u2212", "swtv-zoom-out", "Zoom out");
  const zoomIn = button("+", "swtv-zoom-in", "Zoom in");
  const actual = button("100%", "swtv-actual", "Full size (text at its normal size)");
  const hint = document.createElement("span");
  hint.className = "swtv-hint";
  hint.textContent = "Drag to move \u00b7 Ctrl + scroll to zoom \u00b7 Tab, arrow keys and Enter to select";
  toolbar.append(fitButton, zoomOut, zoomIn, actual, hint);
  const frame = document.createElement("div");
  frame.className = "swtv-frame";
  const footer = document.createElement("div");
  footer.className = "swtv-footer";
  root.append(caption, toolbar, frame, footer);
  el.appendChild(root);

  /** What the view keeps between redraws. */
  const view = {
    /** @type {"fit"|"manual"} */ mode: "fit",
    t: { scale: 1, x: 0, y: 0 },
    structure: "",
    lastSelected: Number.NaN,
    focus: Number.NaN,
    /** @type {Layout|null} */ layout: null,
    geometry: GEOMETRY,
    /** @type {SVGElement|null} */ svg: null,
    /** @type {SVGElement|null} */ world: null,
    width: 0,
    height: 0,
    detail: "",
  };

  const pick = (/** @type {number} */ node) => {
    view.focus = node;
    model.set("selected", node);
    model.save_changes();
  };

  const applyTransform = () => {
    const t = view.t;
    view.world?.setAttribute("transform", `translate(${t.x},${t.y}) scale(${t.scale})`);
    root.dataset.scale = t.scale.toFixed(4);
  };

  /** Move the view so node `id` is fully in the frame (no redraw unless the text detail changes). */
  const reveal = (/** @type {number} */ id) => {
    const box = view.layout?.boxes.find((b) => b.record.node === id);
    if (!box) return;
    view.t = ensureVisible(view.t, box, view.geometry, view.width, view.height);
    applyTransform();
  };

  const draw = () => {
    /** @type {NodeRecord[]} */
    const nodes = model.get("nodes") ?? [];
    const palette = { ...DEFAULT_PALETTE, ...(model.get("palette") ?? {}) };
    const given = Number(model.get("colour_limit"));
    const limit = Number.isFinite(given) && given > 0 ? given : colourLimit(nodes);
    const basis = String(model.get("share_basis") || "units");
    const interval = String(model.get("interval_label") || "interval");
    const selected = Number(model.get("selected"));
    caption.textContent = model.get("caption") ?? "";
    const hadFocus = root.contains(document.activeElement) && frame.contains(document.activeElement);
    frame.replaceChildren();
    footer.replaceChildren();
    view.svg = view.world = null;
    if (nodes.length === 0) {
      frame.textContent = "No subgroups to show.";
      frame.style.height = "";
      return;
    }
    try {
      const width = frame.clientWidth || root.clientWidth || layoutTree(nodes).width + 2 * FRAME.pad;
      const structure = nodes.map((r) => r.node).join(",");
      if (structure !== view.structure) {
        view.mode = "fit";
        view.structure = structure;
      }
      // The geometry follows the frame while the tree is fitted; zoomed or moved, it stays put.
      if (view.mode === "fit" || !view.layout || width !== view.width) {
        const fitted = fitGeometry(nodes, width);
        view.geometry = fitted.geometry;
        view.height = fitted.height;
      }
      const layout = layoutTree(nodes, view.geometry);
      view.layout = layout;
      const height = view.height;
      frame.style.height = `${height}px`;
      view.width = width;
      if (view.mode === "fit") view.t = fitTransform(layout, width, height);
      const ids = new Set(nodes.map((r) => r.node));
      if (!ids.has(view.focus)) view.focus = ids.has(selected) ? selected : nodes[0].node;
      const detail = detailFor(view.t.scale);
      view.detail = `${detail.lines}:${detail.font.toFixed(2)}`;
      const svg = svgEl("svg", {
        class: "swtv-svg", width: "100%", height, role: "tree",
        "aria-label": `${caption.textContent} Arrow keys move between boxes, Enter selects.`,
      });
      const world = svgEl("g", { class: "swtv-world" });
      svg.appendChild(world);
      const inSelection = leavesUnder(nodes, selected);
      drawBoxes(world, layout, {
        selected, focus: view.focus, palette, limit, basis, interval, detail, inSelection, geometry: view.geometry,
      });
      frame.appendChild(svg);
      view.svg = svg;
      view.world = world;
      applyTransform();
      fitText(svg, view.geometry.width);
      if (selected !== view.lastSelected && ids.has(selected)) reveal(selected);
      view.lastSelected = selected;
      const leaves = nodes.filter((r) => r.is_leaf);
      footer.appendChild(drawKey(palette, limit, {
        weak: leaves.some((r) => r.weak), beyond: leaves.some((r) => beyondScale(r, limit)), basis,
      }));
      if (hadFocus) focusNode(view.focus);
    } catch (err) {
      const msg = document.createElement("div");
      msg.className = "swtv-error";
      msg.textContent = String(err instanceof Error ? err.message : err);
      frame.appendChild(msg);
    }
  };

  /** @param {number} id */
  const focusNode = (id) => {
    const target = /** @type {SVGGElement|null} */ (frame.querySelector(`.swtv-node[data-node="${id}"]`));
    if (!target) return;
    for (const other of frame.querySelectorAll(".swtv-node[tabindex='0']")) other.setAttribute("tabindex", "-1");
    target.setAttribute("tabindex", "0");
    view.focus = id;
    reveal(id);
    target.focus({ preventScroll: true });
  };

  /** Zoom by `factor` about a frame point; redraw when the amount of text changes. */
  const zoom = (/** @type {number} */ factor, /** @type {number} */ cx, /** @type {number} */ cy) => {
    view.mode = "manual";
    view.t = zoomAt(view.t, factor, cx, cy);
    const d = detailFor(view.t.scale);
    if (`${d.lines}:${d.font.toFixed(2)}` !== view.detail) draw();
    else applyTransform();
  };

  fitButton.addEventListener("click", () => {
    view.mode = "fit";
    draw();
  });
  zoomIn.addEventListener("click", () => zoom(ZOOM_STEP, view.width / 2, view.height / 2));
  zoomOut.addEventListener("click", () => zoom(1 / ZOOM_STEP, view.width / 2, view.height / 2));
  actual.addEventListener("click", () => {
    view.mode = "manual";
    view.t = { scale: 1, x: FRAME.pad, y: FRAME.pad };
    draw();
    if (Number.isFinite(view.lastSelected)) reveal(view.lastSelected);
  });

  // Click selects; a press that travels more than DRAG_PX pans instead.
  /** @type {{id: number, x: number, y: number, tx: number, ty: number, moved: boolean}|null} */
  let press = null;
  frame.addEventListener("pointerdown", (event) => {
    if (event.button !== 0) return;
    press = { id: event.pointerId, x: event.clientX, y: event.clientY, tx: view.t.x, ty: view.t.y, moved: false };
  });
  frame.addEventListener("pointermove", (event) => {
    if (!press || event.pointerId !== press.id) return;
    const dx = event.clientX - press.x;
    const dy = event.clientY - press.y;
    if (!press.moved && Math.hypot(dx, dy) < DRAG_PX) return;
    if (!press.moved) {
      press.moved = true;
      frame.setPointerCapture(event.pointerId);
      frame.classList.add("swtv-panning");
    }
    view.mode = "manual";
    view.t = { ...view.t, x: press.tx + dx, y: press.ty + dy };
    applyTransform();
  });
  const release = (/** @type {PointerEvent} */ event) => {
    if (!press || event.pointerId !== press.id) return;
    const wasDrag = press.moved;
    press = null;
    frame.classList.remove("swtv-panning");
    if (frame.hasPointerCapture(event.pointerId)) frame.releasePointerCapture(event.pointerId);
    if (wasDrag || event.type !== "pointerup") return;
    const target = /** @type {Element|null} */ (event.target instanceof Element ? event.target.closest(".swtv-node") : null);
    if (target) pick(Number(target.getAttribute("data-node")));
  };
  frame.addEventListener("pointerup", release);
  frame.addEventListener("pointercancel", release);
  frame.addEventListener("wheel", (event) => {
    if (!(event.ctrlKey || event.metaKey)) return; // plain scrolling scrolls the notebook
    event.preventDefault();
    const r = frame.getBoundingClientRect();
    zoom(event.deltaY < 0 ? ZOOM_STEP : 1 / ZOOM_STEP, event.clientX - r.left, event.clientY - r.top);
  }, { passive: false });
  frame.addEventListener("keydown", (event) => {
    const target = /** @type {Element|null} */ (event.target instanceof Element ? event.target.closest(".swtv-node") : null);
    if (!target) return;
    const id = Number(target.getAttribute("data-node"));
    const key = event.key;
    if (key === "Enter" || key === " ") {
      event.preventDefault();
      pick(id);
      return;
    }
    if (key === "+" || key === "=" || key === "-") {
      event.preventDefault();
      zoom(key === "-" ? 1 / ZOOM_STEP : ZOOM_STEP, view.width / 2, view.height / 2);
      focusNode(id);
      return;
    }
    const next = neighbour(model.get("nodes") ?? [], id, key);
    if (next === null) return;
    event.preventDefault();
    focusNode(next);
  });
  frame.addEventListener("focusin", (event) => {
    const target = event.target instanceof Element ? event.target.closest(".swtv-node") : null;
    if (target) reveal(Number(target.getAttribute("data-node")));
  });

  const events = ["change:nodes", "change:selected", "change:palette", "change:colour_limit", "change:caption",
    "change:share_basis", "change:interval_label"];
  for (const name of events) model.on(name, draw);
  draw();

  // Report the width available to the explorer, so the Python side can size its figures
  // (plotly's widget keeps the width it had when first drawn); a fitted tree refits.
  /** @type {ReturnType<typeof setTimeout> | undefined} */
  let timer;
  const resized = () => {
    const width = Math.round(root.clientWidth);
    if (width > 0 && Math.abs(width - Number(model.get("client_width") ?? 0)) >= WIDTH_STEP) {
      model.set("client_width", width);
      model.save_changes();
    }
    if (frame.clientWidth > 0 && Math.abs(frame.clientWidth - view.width) >= 1) draw();
  };
  const observer = typeof ResizeObserver === "undefined" ? null : new ResizeObserver(() => {
    clearTimeout(timer);
    timer = setTimeout(resized, 120);
  });
  observer?.observe(root);
  return () => {
    for (const name of events) model.off(name, draw);
    observer?.disconnect();
    clearTimeout(timer);
    root.remove();
  };
}

export default { render };
