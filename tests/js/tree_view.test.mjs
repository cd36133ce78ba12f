// Pure functions of js/tree_view.js, run with `node --test tests/js/`.
import test from "node:test";
import assert from "node:assert/strict";
import {
  headLine,
  estimateText,
  meanText,
  GEOMETRY,
  DEFAULT_PALETTE,
  layoutTree,
  parseHex,
  divergingColour,
  relativeLuminance,
  textColourOn,
  colourLimit,
  formatNumber,
  formatFixed,
  formatEstimate,
  decimalsFor,
  formatInterval,
  formatShare,
  formatCount,
  truncate,
  typeset,
  ruleText,
  splitText,
  boxLines,
  sizeLine,
  ariaLabel,
  beyondScale,
  WEAK_MARK,
  FRAME,
  frameHeight,
  fitTransform,
  fitGeometry,
  zoomAt,
  ensureVisible,
  detailFor,
  neighbour,
  depthFirst,
  leavesUnder,
} from "../../js/tree_view.js";
import view from "../../js/tree_view.js";

/** A record with defaults for the fields a test does not care about. */
function rec(node, parent, depth, extra = {}) {
  return {
    node, parent, depth, split: parent === -1 ? "" : `x${node}`, rule: "", is_leaf: false,
    n_units: 10, share: 0.1, mean: 0, lower: -1, upper: 1, ...extra,
  };
}

// Depth-2 tree in scikit-learn's depth-first numbering: 0 -> (1 -> 2, 3), (4 -> 5, 6).
const balanced = [
  rec(0, -1, 0), rec(1, 0, 1), rec(2, 1, 2, { is_leaf: true }), rec(3, 1, 2, { is_leaf: true }),
  rec(4, 0, 1), rec(5, 4, 2, { is_leaf: true }), rec(6, 4, 2, { is_leaf: true }),
];

test("default export is an anywidget module with render", () => {
  assert.equal(typeof view.render, "function");
});

test("layout: leaves on consecutive rows in depth-first order, parents centred on their children", () => {
  const g = GEOMETRY;
  const row = g.height + g.gapY;
  const lay = layoutTree(balanced);
  const y = Object.fromEntries(lay.boxes.map((b) => [b.record.node, b.y]));
  const x = Object.fromEntries(lay.boxes.map((b) => [b.record.node, b.x]));
  assert.deepEqual([y[2], y[3], y[5], y[6]], [0, 1, 2, 3].map((r) => g.margin + r * row));
  assert.equal(y[1], g.margin + 0.5 * row);
  assert.equal(y[4], g.margin + 2.5 * row);
  assert.equal(y[0], g.margin + 1.5 * row);
  assert.deepEqual([x[0], x[1], x[2]], [0, 1, 2].map((d) => g.margin + d * (g.width + g.gapX)));
  assert.equal(lay.edges.length, balanced.length - 1);
  assert.equal(lay.width, 2 * g.margin + 3 * g.width + 2 * g.gapX);
  assert.equal(lay.height, 2 * g.margin + 4 * row - g.gapY);
});

test("layout: unbalanced tree, boxes never overlap", () => {
  const nodes = [rec(0, -1, 0), rec(1, 0, 1, { is_leaf: true }), rec(2, 0, 1), rec(3, 2, 2, { is_leaf: true }),
    rec(4, 2, 2), rec(5, 4, 3, { is_leaf: true }), rec(6, 4, 3, { is_leaf: true })];
  const lay = layoutTree(nodes);
  for (const a of lay.boxes) {
    for (const b of lay.boxes) {
      if (a === b || a.x !== b.x) continue;
      assert.ok(Math.abs(a.y - b.y) >= GEOMETRY.height, `nodes ${a.record.node} and ${b.record.node} overlap`);
    }
  }
  assert.equal(lay.boxes.filter((b) => b.record.is_leaf).length, 4);
});

test("layout: a root alone, and no nodes", () => {
  const one = layoutTree([rec(0, -1, 0, { is_leaf: true })]);
  assert.equal(one.boxes.length, 1);
  assert.equal(one.edges.length, 0);
  assert.equal(one.height, 2 * GEOMETRY.margin + GEOMETRY.height);
  assert.deepEqual(layoutTree([]), { boxes: [], edges: [], width: 0, height: 0 });
});

test("layout: malformed records are reported", () => {
  assert.throws(() => layoutTree([rec(0, -1, 0), rec(0, -1, 0)]), /node id 0 appears twice/);
  assert.throws(() => layoutTree([rec(0, -1, 0), rec(1, 7, 1)]), /names parent 7, which is not among the nodes/);
  assert.throws(() => layoutTree([rec(0, -1, 0), rec(1, -1, 0)]), /expected one root node, found 2/);
  assert.throws(() => layoutTree([rec(0, -1, 0), rec(1, 2, 1), rec(2, 1, 1)]), /2 node\(s\) are not connected to the root/);
});

test("colour: centre stop at zero, end stops at +-limit, clamped beyond, linear between stops", () => {
  const p = DEFAULT_PALETTE;
  const lower = (h) => h.toLowerCase();
  assert.equal(divergingColour(0, 2, p), lower(p.stops[2]));
  assert.equal(divergingColour(2, 2, p), lower(p.stops[4]));
  assert.equal(divergingColour(-2, 2, p), lower(p.stops[0]));
  assert.equal(divergingColour(1, 2, p), lower(p.stops[3]), "half the limit lands on the next stop of five");
  assert.equal(divergingColour(50, 2, p), lower(p.stops[4]));
  assert.equal(divergingColour(-50, 2, p), lower(p.stops[0]));
  // A quarter of the limit: halfway between the centre stop and the next one.
  const mid = parseHex(divergingColour(0.5, 2, p));
  const a = parseHex(p.stops[2]);
  const b = parseHex(p.stops[3]);
  mid.forEach((c, i) => assert.ok(Math.abs(c - (a[i] + b[i]) / 2) <= 0.5 + 1e-9));
  assert.equal(divergingColour(Number.NaN, 2, p), lower(p.missing));
  assert.equal(divergingColour(null, 2, p), lower(p.missing));
  assert.equal(divergingColour(1, 0, p), lower(p.stops[4]), "a zero limit falls back to 1");
});

test("colour: custom palette and bad colours", () => {
  const pal = { stops: ["#0000ff", "#ffffff", "#ff0000"] };
  assert.equal(divergingColour(-1, 1, pal), "#0000ff");
  assert.equal(divergingColour(0.5, 1, pal), "#ff8080");
  assert.equal(divergingColour(Number.NaN, 1, pal), DEFAULT_PALETTE.missing.toLowerCase());
  assert.deepEqual(parseHex("#0A0b0C"), [10, 11, 12]);
  assert.throws(() => parseHex("red"), /colour must look like #rrggbb, got "red"/);
  assert.throws(() => divergingColour(1, 1, { stops: ["#000000"] }), /palette.stops must list at least two colours/);
});

test("luminance and text colour follow WCAG 2 definitions", () => {
  // WCAG 2.x relative luminance: L = 0.2126 R + 0.7152 G + 0.0722 B on linearized sRGB.
  assert.equal(relativeLuminance("#ffffff"), 1);
  assert.equal(relativeLuminance("#000000"), 0);
  assert.ok(Math.abs(relativeLuminance("#ff0000") - 0.2126) < 1e-12);
  assert.ok(Math.abs(relativeLuminance("#00ff00") - 0.7152) < 1e-12);
  // #777777 on white has a contrast ratio of about 4.48:1 (widely quoted value, from memory).
  const ratio = 1.05 / (relativeLuminance("#777777") + 0.05);
  assert.ok(Math.abs(ratio - 4.48) < 0.01, `ratio ${ratio}`);
  assert.equal(textColourOn("#ffffff"), "#222222");
  assert.equal(textColourOn("#000000"), "#ffffff");
  assert.equal(textColourOn(DEFAULT_PALETTE.stops[2]), "#222222");
  assert.equal(textColourOn(DEFAULT_PALETTE.stops[0]), "#ffffff");
  assert.equal(textColourOn(DEFAULT_PALETTE.stops[4]), "#ffffff");
});

test("colour limit: largest |mean| among leaves, weak-uptake leaves left out", () => {
  const nodes = [rec(0, -1, 0, { mean: 9 }), rec(1, 0, 1, { is_leaf: true, mean: -3 }), rec(2, 0, 1, { is_leaf: true, mean: 2 })];
  assert.equal(colourLimit(nodes), 3);
  const weak = [rec(0, -1, 0), rec(1, 0, 1, { is_leaf: true, mean: -257, weak: true }), rec(2, 0, 1, { is_leaf: true, mean: 20 })];
  assert.equal(colourLimit(weak), 20);
  assert.ok(beyondScale(weak[1], 20) && !beyondScale(weak[2], 20));
  assert.equal(colourLimit([rec(0, -1, 0, { is_leaf: true, mean: -5, weak: true })]), 5, "all flagged: use them");
  assert.equal(colourLimit([rec(0, -1, 0, { is_leaf: true, mean: 0 })]), 1);
  assert.equal(colourLimit([rec(0, -1, 0, { is_leaf: true, mean: null })]), 1);
});

test("numbers: three significant digits, agreeing with Intl.NumberFormat below 1000", () => {
  // Reference: ECMA-402 Intl.NumberFormat with 3 significant digits (outside this module).
  const ref = new Intl.NumberFormat("en-US", { minimumSignificantDigits: 3, maximumSignificantDigits: 3 });
  for (const x of [1.2345, -0.012345, 0.5, 99.94, 9.996, -123.4, 0.000123456, 42, -7.0049]) {
    assert.equal(formatNumber(x), ref.format(x).replace("-", "\u2212"), `x = ${x}`);
  }
  assert.equal(formatNumber(123456.7), "123,457");
  assert.equal(formatNumber(-999.7), "\u22121,000");
  assert.equal(formatNumber(0), "0");
  assert.equal(formatNumber(-0), "0");
  assert.equal(formatNumber(Number.NaN), "n/a");
  assert.equal(formatNumber(null), "n/a");
  assert.equal(formatNumber(Infinity), "n/a");
  assert.equal(formatNumber(1.23456, 5), "1.2346");
});

test("intervals, shares, counts, truncation, box lines", () => {
  assert.equal(formatInterval(-1.5, 2), "[\u22121.50, 2.00]");
  assert.equal(formatShare(0.1234), "12%");
  assert.equal(formatShare(0.001), "<1%");
  assert.equal(formatShare(0), "0%");
  assert.equal(formatShare(1), "100%");
  assert.equal(formatCount(1234567), "1,234,567");
  assert.equal(formatCount(12), "12");
  assert.equal(truncate("abcdef", 4), "abc\u2026");
  assert.equal(truncate("abc", 4), "abc");
  const lines = boxLines(rec(3, 1, 2, { split: "age < 45.5", n_units: 1520, share: 0.152, mean: -12.3, lower: -20, upper: -4.56 }));
  assert.equal(typeset("age <= 4 & b >= 2"), "age \u2264 4 & b \u2265 2");
  assert.equal(boxLines(rec(2, 0, 1, { split: "x <= 1" }))[0], "x \u2264 1");
  assert.deepEqual(lines, ["age < 45.5", "1,520 units \u00b7 15%", "\u221212.3 [\u221220.0, \u22124.6]"]);
  assert.equal(boxLines(rec(0, -1, 0))[0], "All units");
});

test("boxes and read-outs print the kernel's rule text (one rule syntax) when the record carries it", () => {
  const r = rec(4, 1, 2, { split: "region in {coast}", rule: "age <= 40 & region in {coast}",
    split_text: "region \u2208 {coast}", rule_text: "age \u2264 40 and region \u2208 {coast}", label: "S2" });
  assert.equal(splitText(r), "region \u2208 {coast}");
  assert.equal(ruleText(r), "age \u2264 40 and region \u2208 {coast}");
  assert.equal(boxLines(r)[0], "S2 \u00b7 region \u2208 {coast}");
  assert.match(ariaLabel(r), /age \u2264 40 and region \u2208 \{coast\}/);
  assert.ok(!ariaLabel(r).includes("&"));
});

test("estimates share decimals: the largest |value| gets three significant digits", () => {
  assert.equal(decimalsFor(14), 1);
  assert.equal(decimalsFor(8), 2);
  assert.equal(decimalsFor(9.996), 1, "rounds up to 10.0");
  assert.equal(decimalsFor(0.0123), 4);
  assert.equal(decimalsFor(1234), 0);
  assert.equal(decimalsFor(0), 2);
  assert.equal(formatEstimate(-10, -14, -6), "\u221210.0 [\u221214.0, \u22126.0]");
  assert.equal(formatEstimate(-4, -8, 0.5), "\u22124.00 [\u22128.00, 0.50]");
  assert.equal(formatEstimate(1500.4, 1200, 1800.6), "1,500 [1,200, 1,801]");
  assert.equal(formatEstimate(null, 1, 2), "n/a [1.00, 2.00]");
  assert.equal(formatFixed(-0.0001, 2), "0.00", "no negative zero");
  assert.equal(formatFixed(-1234.5, 1), "\u22121,234.5");
});

// Depth-3 tree (scikit-learn's depth-first numbering): 0 -> 1 (-> 2, 3 -> (4, 5)), 6 (-> 7, 8).
const deeper = [
  rec(0, -1, 0), rec(1, 0, 1), rec(2, 1, 2, { is_leaf: true }), rec(3, 1, 2), rec(4, 3, 3, { is_leaf: true }),
  rec(5, 3, 3, { is_leaf: true }), rec(6, 0, 1), rec(7, 6, 2, { is_leaf: true }), rec(8, 6, 2, { is_leaf: true }),
];

test("keyboard: right to the first child, left to the parent, up/down within a column, home/end", () => {
  assert.equal(neighbour(deeper, 0, "ArrowRight"), 1);
  assert.equal(neighbour(deeper, 1, "ArrowRight"), 2);
  assert.equal(neighbour(deeper, 2, "ArrowRight"), null, "a subgroup has no children");
  assert.equal(neighbour(deeper, 4, "ArrowLeft"), 3);
  assert.equal(neighbour(deeper, 0, "ArrowLeft"), null);
  assert.equal(neighbour(deeper, 1, "ArrowDown"), 6, "the sibling");
  assert.equal(neighbour(deeper, 6, "ArrowUp"), 1);
  assert.equal(neighbour(deeper, 6, "ArrowDown"), null);
  assert.equal(neighbour(deeper, 3, "ArrowDown"), 7, "past the last sibling: the next box of the column");
  assert.equal(neighbour(deeper, 7, "ArrowUp"), 3);
  assert.equal(neighbour(deeper, 5, "Home"), 0);
  assert.equal(neighbour(deeper, 0, "End"), 8);
  assert.equal(neighbour(deeper, 8, "End"), null);
  assert.equal(neighbour(deeper, 99, "ArrowDown"), 0, "an unknown node starts at the root");
  assert.equal(neighbour(deeper, 0, "x"), null);
  assert.equal(neighbour([], 0, "ArrowDown"), null);
  // Up/Down follow the drawn order: the same rows as the layout.
  const lay = layoutTree(deeper);
  const y = new Map(lay.boxes.map((b) => [b.record.node, b.y]));
  for (const r of deeper) {
    const down = neighbour(deeper, r.node, "ArrowDown");
    if (down !== null) assert.ok(y.get(down) > y.get(r.node), `${r.node} -> ${down} goes down`);
  }
  assert.deepEqual(depthFirst(deeper).map((r) => r.node), [0, 1, 2, 3, 4, 5, 6, 7, 8]);
});

test("the subgroups inside a node", () => {
  assert.deepEqual([...leavesUnder(deeper, 1)].sort(), [2, 4, 5]);
  assert.deepEqual([...leavesUnder(deeper, 0)].sort(), [2, 4, 5, 7, 8]);
  assert.deepEqual([...leavesUnder(deeper, 7)], [7]);
  assert.equal(leavesUnder(deeper, 42).size, 0);
});

test("fit: the whole layout inside the frame, never enlarged, detail follows the scale", () => {
  const lay = { width: 1600, height: 3000 };
  const t = fitTransform(lay, 900, 600);
  assert.ok(Math.abs(t.scale - 584 / 3000) < 1e-12);
  assert.ok(t.x >= 0 && t.x + lay.width * t.scale <= 900);
  assert.ok(t.y >= 0 && t.y + lay.height * t.scale <= 600 + 1e-9);
  assert.equal(fitTransform({ width: 100, height: 50 }, 900, 600).scale, 1, "small trees keep their size");
  assert.deepEqual(fitTransform({ width: 0, height: 0 }, 900, 600), { scale: 1, x: 0, y: 0 });
  assert.equal(frameHeight({ width: 100, height: 50 }, 900), FRAME.minHeight);
  assert.equal(frameHeight({ width: 100, height: 5000 }, 900), FRAME.maxHeight);
  assert.equal(frameHeight({ width: 1800, height: 700 }, 908), Math.round(700 * (892 / 1800) + 16));
  assert.deepEqual(detailFor(1), { lines: 3, font: 12 });
  assert.equal(detailFor(0.5).lines, 2);
  assert.equal(detailFor(0.3).lines, 1);
  assert.equal(detailFor(0.19).lines, 1, "one label in a box about 11 px tall");
  assert.equal(detailFor(0.1).lines, 0);
  for (const s of [0.17, 0.25, 0.4, 0.6]) {
    const d = detailFor(s);
    assert.ok(d.lines > 0, `some text at scale ${s}`);
    assert.ok(d.font * s >= (d.lines === 1 ? 8.5 : 9.5) - 1e-9, "text stays readable on screen");
    assert.ok(d.lines * 1.1 * d.font <= GEOMETRY.height, "and fits its box");
  }
});

test("fit geometry: a tall tree gets wider boxes, the frame still holds it", () => {
  const leaves = [];
  const nodes = [rec(0, -1, 0)];
  // A comb: 40 leaves under a chain of inner nodes, 3 columns deep.
  for (let i = 1; i <= 40; i += 1) nodes.push(rec(100 + i, i <= 20 ? 1 : 2, 2, { is_leaf: true }));
  nodes.splice(1, 0, rec(1, 0, 1), rec(2, 0, 1));
  const { geometry, layout, height } = fitGeometry(nodes, 900);
  assert.ok(geometry.width > GEOMETRY.width);
  assert.ok(geometry.width <= 3 * GEOMETRY.width);
  const t = fitTransform(layout, 900, height);
  assert.ok(layout.width * t.scale <= 900 - 2 * FRAME.pad + 1e-6);
  assert.ok(layout.height * t.scale <= height - 2 * FRAME.pad + 1e-6);
  assert.equal(fitGeometry(balanced, 2000).geometry.width, GEOMETRY.width, "a tree drawn at full size keeps its boxes");
  void leaves;
});

test("zoom about a point keeps that point still; ensureVisible pans the least", () => {
  const t = { scale: 0.5, x: 10, y: 20 };
  const z = zoomAt(t, 2, 300, 200);
  assert.equal(z.scale, 1);
  // World point under (300, 200) before: ((300-10)/0.5, (200-20)/0.5) = (580, 360).
  assert.ok(Math.abs(z.x + 580 * z.scale - 300) < 1e-9 && Math.abs(z.y + 360 * z.scale - 200) < 1e-9);
  assert.equal(zoomAt(t, 1000, 0, 0).scale, FRAME.maxScale);
  const size = { width: 200, height: 50 };
  const inside = ensureVisible({ scale: 1, x: 0, y: 0 }, { x: 100, y: 100 }, size, 800, 400);
  assert.deepEqual(inside, { scale: 1, x: 0, y: 0 }, "already visible: no move");
  const below = ensureVisible({ scale: 1, x: 0, y: 0 }, { x: 100, y: 700 }, size, 800, 400, 10);
  assert.equal(below.y, 400 - 10 - 750);
  const left = ensureVisible({ scale: 2, x: 0, y: 0 }, { x: -50, y: 0 }, size, 800, 400, 10);
  assert.equal(left.x, 10 + 100);
});

test("complier designs: shares named, weak uptake marked and read out", () => {
  const r = rec(4, 1, 2, { is_leaf: true, n_units: 109, share: 0.0071, unit_share: 0.0545, mean: -257, lower: -589,
    upper: -39, weak: true, rule: "tenure = renter", split: "tenure = renter" });
  assert.equal(sizeLine(r, "compliers"), "109 units (5%) \u00b7 1% of compliers");
  assert.equal(sizeLine(r), "109 units \u00b7 1%");
  assert.ok(boxLines(r, "compliers")[2].endsWith(` ${WEAK_MARK}`));
  const said = ariaLabel(r, { basis: "compliers", interval: "95% equal-tailed interval", limit: 64, selected: true });
  assert.equal(said, "Subgroup: tenure = renter; 109 units, 5% of units, 1% of compliers; posterior mean \u2212257.0, "
    + "95% equal-tailed interval [\u2212589, \u221239.0]; weak uptake: the estimate is unstable; beyond the colour scale; selected.");
  assert.ok(ariaLabel(rec(0, -1, 0)).startsWith("All units (split further); 10 units, 10% of units"));
});

test("boxes print the S label and the texts Python formatted for every output", () => {
  const r = rec(4, 1, 2, { is_leaf: true, n_units: 109, share: 0.0083, unit_share: 0.0545, mean: -257.4, lower: -589.2,
    upper: -39.1, weak: true, rule: "tenure = renter", split: "tenure = renter", label: "S5",
    mean_text: "\u2212257", interval_text: "[\u2212589, \u221239]", share_text: "0.8%", unit_share_text: "5.5%" });
  assert.equal(headLine(r), "S5 \u00b7 tenure = renter");
  assert.equal(meanText(r), "\u2212257");
  assert.equal(estimateText(r), "\u2212257 [\u2212589, \u221239]");
  assert.equal(sizeLine(r, "compliers"), "109 units (5.5%) \u00b7 0.8% of compliers");
  assert.deepEqual(boxLines(r, "compliers"), ["S5 \u00b7 tenure = renter", "109 units (5.5%) \u00b7 0.8% of compliers",
    `\u2212257 [\u2212589, \u221239] ${WEAK_MARK}`]);
  assert.ok(ariaLabel(r, { basis: "compliers" }).startsWith("Subgroup S5: tenure = renter; 109 units, 5.5% of units, 0.8% of compliers; "
    + "posterior mean \u2212257, interval [\u2212589, \u221239]"));
  // saved state without the texts still draws, formatting here
  const old = rec(4, 1, 2, { is_leaf: true, mean: -10, lower: -14, upper: -6, split: "x > 1" });
  assert.equal(estimateText(old), formatEstimate(-10, -14, -6));
  assert.equal(headLine(old), "x > 1");
});
