// @ts-check
/**
 * Summary-tree view for summarize_widgets: an anywidget ES module.
 *
 * No build step, no imports, no network: the module draws the subgroup tree
 * as SVG boxes (left to right, one column per depth) from the synced
 * `nodes` traitlet, colours leaves on a diverging scale centred at zero and
 * writes the clicked node's id into the synced `selected` traitlet.
 *
 * Synced traitlets read here (set by summarize_widgets/widgets/tree_view.py):
 *   nodes         NodeRecord[]  one record per node down to the current depth
 *   selected      number        node id, -1 for none
 *   palette       Palette       diverging colours shared with figures.py
 *   colour_limit  number        |mean| that gets the full colour (<= 0: from the leaves)
 *   caption       string        one line above the tree
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
 * @property {number} share      share of units (0..1)
 * @property {number|null} mean  posterior mean effect
 * @property {number|null} lower interval lower end
 * @property {number|null} upper interval upper end
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
 * The |mean| that gets the full colour: the largest |mean| among leaves,
 * or 1 when there is none.
 * @param {NodeRecord[]} nodes
 * @returns {number}
 */
export function colourLimit(nodes) {
  let lim = 0;
  for (const rec of nodes) {
    if (rec.is_leaf && rec.mean !== null && Number.isFinite(rec.mean)) lim = Math.max(lim, Math.abs(rec.mean));
  }
  return lim > 0 ? lim : 1;
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
 * The three text lines of a box.
 * @param {NodeRecord} rec
 * @returns {[string, string, string]}
 */
export function boxLines(rec) {
  const head = rec.parent === -1 || !rec.split ? "All units" : typeset(rec.split);
  return [
    head,
    `${formatCount(rec.n_units)} units \u00b7 ${formatShare(rec.share)}`,
    formatEstimate(rec.mean, rec.lower, rec.upper),
  ];
}

// ---------------------------------------------------------------------------
// DOM rendering (not used by the node tests)

const SVG_NS = "http://www.w3.org/2000/svg";

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
 * @param {NodeRecord[]} nodes
 * @param {number} selected
 * @param {Palette} palette
 * @param {number} limit
 * @param {(node: number) => void} onPick
 * @returns {SVGElement}
 */
function drawTree(nodes, selected, palette, limit, onPick) {
  const g = GEOMETRY;
  const layout = layoutTree(nodes, g);
  const svg = svgEl("svg", {
    class: "swtv-svg",
    width: layout.width,
    height: layout.height,
    viewBox: `0 0 ${layout.width} ${layout.height}`,
    role: "tree",
  });
  for (const { from, to } of layout.edges) {
    const x1 = from.x + g.width;
    const y1 = from.y + g.height / 2;
    const x2 = to.x;
    const y2 = to.y + g.height / 2;
    const xm = (x1 + x2) / 2;
    svg.appendChild(svgEl("path", { class: "swtv-edge", d: `M${x1},${y1} C${xm},${y1} ${xm},${y2} ${x2},${y2}` }));
  }
  for (const box of layout.boxes) {
    const rec = box.record;
    const fill = rec.is_leaf ? divergingColour(rec.mean, limit, palette) : "#ffffff";
    const ink = textColourOn(fill);
    const classes = ["swtv-node", rec.is_leaf ? "swtv-leaf" : "swtv-inner"];
    if (rec.node === selected) classes.push("swtv-selected");
    const group = svgEl("g", {
      class: classes.join(" "),
      transform: `translate(${box.x},${box.y})`,
      tabindex: 0,
      role: "treeitem",
      "data-node": rec.node,
      "aria-selected": rec.node === selected ? "true" : "false",
    });
    const title = svgEl("title", {});
    title.textContent = `${typeset(rec.rule) || "All units"}\n${formatCount(rec.n_units)} units (${formatShare(rec.share)})\n` +
      `mean ${formatNumber(rec.mean, 4)}, interval ${formatInterval(rec.lower, rec.upper)}`;
    group.appendChild(title);
    group.appendChild(svgEl("rect", { class: "swtv-box", width: g.width, height: g.height, rx: 5, fill }));
    const lines = boxLines(rec);
    lines.forEach((line, i) => {
      const text = svgEl("text", {
        class: i === 0 ? "swtv-split" : i === 1 ? "swtv-size" : "swtv-effect",
        x: 9,
        y: 17 + i * 16,
        fill: ink,
      });
      // A first cut by characters; fitText() trims to the measured width once drawn.
      text.textContent = i === 0 ? truncate(line, 34) : line;
      text.dataset.full = line;
      group.appendChild(text);
    });
    group.addEventListener("click", () => onPick(rec.node));
    group.addEventListener("keydown", (event) => {
      const key = /** @type {KeyboardEvent} */ (event).key;
      if (key === "Enter" || key === " ") {
        event.preventDefault();
        onPick(rec.node);
      }
    });
    svg.appendChild(group);
  }
  return svg;
}

/**
 * Shorten every condition line that is wider than its box (needs the SVG in the page).
 * @param {SVGElement} svg
 */
function fitText(svg) {
  const room = GEOMETRY.width - 16;
  for (const el of svg.querySelectorAll("text.swtv-split")) {
    const text = /** @type {SVGTextContentElement} */ (/** @type {unknown} */ (el));
    const full = text.dataset.full ?? text.textContent ?? "";
    text.textContent = full;
    if (!(text.getComputedTextLength() > room)) continue; // 0 when hidden: keep the first cut
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
 * Colour key: the scale from -limit to +limit.
 * @param {Palette} palette
 * @param {number} limit
 * @returns {HTMLElement}
 */
function drawKey(palette, limit) {
  const key = document.createElement("div");
  key.className = "swtv-key";
  const low = document.createElement("span");
  low.textContent = formatNumber(-limit);
  const bar = document.createElement("span");
  bar.className = "swtv-key-bar";
  bar.style.background = `linear-gradient(to right, ${palette.stops.join(", ")})`;
  const high = document.createElement("span");
  high.textContent = formatNumber(limit);
  const note = document.createElement("span");
  note.className = "swtv-key-note";
  note.textContent = "subgroup colour: posterior mean";
  key.append(note, low, bar, high);
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
  const scroller = document.createElement("div");
  scroller.className = "swtv-scroll";
  const footer = document.createElement("div");
  footer.className = "swtv-footer";
  root.append(caption, scroller, footer);
  el.appendChild(root);

  const pick = (/** @type {number} */ node) => {
    model.set("selected", node);
    model.save_changes();
  };

  const draw = () => {
    /** @type {NodeRecord[]} */
    const nodes = model.get("nodes") ?? [];
    const palette = { ...DEFAULT_PALETTE, ...(model.get("palette") ?? {}) };
    const given = Number(model.get("colour_limit"));
    const limit = Number.isFinite(given) && given > 0 ? given : colourLimit(nodes);
    caption.textContent = model.get("caption") ?? "";
    scroller.replaceChildren();
    footer.replaceChildren();
    if (nodes.length === 0) {
      scroller.textContent = "No subgroups to show.";
      return;
    }
    try {
      const svg = drawTree(nodes, Number(model.get("selected")), palette, limit, pick);
      scroller.appendChild(svg);
      fitText(svg);
      footer.appendChild(drawKey(palette, limit));
    } catch (err) {
      const msg = document.createElement("div");
      msg.className = "swtv-error";
      msg.textContent = String(err instanceof Error ? err.message : err);
      scroller.appendChild(msg);
    }
  };

  const events = ["change:nodes", "change:selected", "change:palette", "change:colour_limit", "change:caption"];
  for (const name of events) model.on(name, draw);
  draw();

  // Report the width available to the explorer, so the Python side can size its figures
  // (plotly's widget keeps the width it had when first drawn).
  /** @type {ReturnType<typeof setTimeout> | undefined} */
  let timer;
  const report = () => {
    const width = Math.round(root.clientWidth);
    if (width > 0 && Math.abs(width - Number(model.get("client_width") ?? 0)) >= WIDTH_STEP) {
      model.set("client_width", width);
      model.save_changes();
    }
  };
  const observer = typeof ResizeObserver === "undefined" ? null : new ResizeObserver(() => {
    clearTimeout(timer);
    timer = setTimeout(report, 150);
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
