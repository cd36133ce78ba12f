"""A self-contained HTML report: figures, tables, settings, provenance and cautions in one file.

The page works offline: the plotly.js library is embedded once, inline, and a
Content-Security-Policy forbids the page from fetching anything. Every piece of text
from the data or the caller is HTML-escaped; plotly's figure JSON escapes ``<``, ``>``
and ``/`` itself, so a label cannot close a script element.
"""
from __future__ import annotations

import html
import json
import re
from collections.abc import Mapping
from pathlib import Path

from .provenance import jsonable, provenance as make_provenance, provenance_lines
from ..core.validate import SummaryError, check_interval, check_level
from ..core.files import refuse_existing, write_atomic
from .tables import summary_tables, to_html
from .layout import WEAK_MARK, table_layout
from .tree_diagram import tree_diagram_svg
from .. import figures as F

__all__ = ["write_report", "render_report", "default_figures", "CAUTIONS"]

#: The cautions every report carries (also in DEVELOPERS.md and the README).
CAUTIONS = (
    "These summaries describe the posterior of a model's unit-level effects. They inherit every "
    "assumption of that model and add none of their own evidence.",
    "Subgroups and trends found by looking at the posterior are exploratory, unless they were "
    "specified before the data were seen.",
    "A covariate along which the effect varies is a moderator, not a mechanism: the summaries show "
    "where effects differ, not why.",
    "Decisions about particular people or households should follow the analysis standards of your "
    "field, not these summaries alone.",
)

# Nothing may be fetched: scripts and styles are inline; plotly draws data: and blob: images.
_CSP = ("default-src 'none'; script-src 'unsafe-inline' 'unsafe-eval'; style-src 'unsafe-inline'; "
        "img-src data: blob:; font-src data:")

_CSS = """
:root { --ink:#2B2D33; --muted:#6B6E75; --paper:#F6F4EF; --card:#FFFFFF; --rule:#D9D5CC;
        --accent:#2E5F8A; --warm:#E39A2D; --font:"Helvetica Neue",Helvetica,Arial,"Liberation Sans",sans-serif; }
* { box-sizing:border-box; }
body { margin:0; background:var(--paper); color:var(--ink); font:15px/1.55 var(--font); }
.sw-page { max-width:1120px; margin:0 auto; padding:0 24px 48px; }
.sw-head { border-bottom:3px solid var(--accent); padding:28px 0 16px; margin-bottom:20px; }
.sw-head h1 { margin:0 0 4px; font-size:26px; letter-spacing:.2px; }
.sw-head .sw-sub { color:var(--muted); margin:0 0 12px; }
.sw-prov { display:grid; grid-template-columns:max-content 1fr; gap:2px 14px; font-size:13px; margin:0; }
.sw-prov dt { color:var(--muted); }
.sw-prov dd { margin:0; overflow-wrap:anywhere; }
.sw-prov code, .sw-mono { font-family:"DejaVu Sans Mono",Menlo,Consolas,monospace; font-size:12px; }
.sw-nav { display:flex; flex-wrap:wrap; gap:6px 18px; margin:0 0 20px; font-size:14px; }
.sw-nav a { color:var(--accent); text-decoration:none; border-bottom:1px dotted var(--accent); }
.sw-cautions { background:#FFF8EC; border-left:5px solid var(--warm); padding:12px 18px; margin:0 0 24px; }
.sw-cautions h2 { font-size:16px; margin:0 0 6px; }
.sw-cautions ul { margin:0; padding-left:20px; }
.sw-section { background:var(--card); border:1px solid var(--rule); border-radius:6px; padding:18px 22px; margin:0 0 22px; }
.sw-section h2 { margin:0 0 12px; font-size:20px; color:var(--accent); }
.sw-section h3 { margin:18px 0 8px; font-size:16px; }
.sw-figure { margin:8px 0 14px; min-height:320px; }
.sw-table { border-collapse:collapse; margin:6px 0 12px; font-size:14px; font-variant-numeric:tabular-nums; }
.sw-table caption { caption-side:top; text-align:left; font-weight:600; padding:0 0 6px; }
.sw-table thead tr { border-top:2px solid var(--ink); border-bottom:1px solid var(--ink); }
.sw-table tbody tr:last-child { border-bottom:2px solid var(--ink); }
.sw-table th, .sw-table td { padding:4px 10px; vertical-align:top; }
.sw-table th { font-weight:600; }
.sw-table tbody tr:nth-child(even) { background:#FAF9F6; }
.sw-table .sw-r { text-align:right; } .sw-table .sw-c { text-align:center; white-space:nowrap; }
.sw-table .sw-l { text-align:left; }
.sw-table .sw-rule { max-width:520px; }
.sw-table tfoot td { padding-top:6px; }
.sw-note { margin:2px 0; font-size:12px; color:var(--muted); }
.sw-scroll { overflow-x:auto; }
.sw-verdicts { margin:0 0 12px; }
.sw-verdict { margin:0 0 8px; padding:6px 10px; border-left:3px solid var(--accent); background:#F4F7FA; }
details summary { cursor:pointer; color:var(--accent); }
pre.sw-json { background:#F1EFEA; padding:10px 12px; overflow-x:auto; font-size:12px; }
.sw-foot { color:var(--muted); font-size:12px; margin-top:24px; }
.sw-tree-figure { margin:8px 0 16px; }
.sw-tree-figure figcaption { font-size:12px; color:var(--muted); margin-top:4px; }
.sw-shared-notes { margin:0 0 16px; }
@media print {
  @page { size:A4; margin:14mm 12mm; }
  body { background:#FFFFFF; font-size:11pt; }
  .sw-page { max-width:none; padding:0; }
  .sw-nav, .modebar, .modebar-container, details > summary::marker { display:none !important; }
  .sw-section { border:none; border-radius:0; padding:0; margin:0 0 14pt; background:none; }
  .sw-section + .sw-section { break-before:page; }
  .sw-figure, .sw-tree-figure, .sw-table, .sw-cautions, .sw-verdict, tr, h3 + .sw-figure { break-inside:avoid; }
  h2, h3, caption { break-after:avoid; }
  .sw-figure { min-height:0; }
  .sw-figure .js-plotly-plot, .sw-figure .plot-container, .sw-figure .svg-container { max-width:100% !important; }
  .sw-scroll { overflow:visible; }
  .sw-table { font-size:9.5pt; width:100%; }
  .sw-table thead { display:table-header-group; }
  .sw-table tbody tr:nth-child(even) { background:none; }
  details { display:block; }
  details > * { display:block; }
  pre.sw-json { white-space:pre-wrap; overflow-wrap:anywhere; max-height:none; }
  a { color:inherit; border:none; text-decoration:none; }
  .sw-cautions { background:none; border-left:3pt solid #999; }
}
"""


def default_figures(*, tree=None, groups=None, additive=None, linear=None, level: float = 0.95,
                    interval: str = "equal-tailed") -> dict[str, list]:
    """The report's standard figures, by section: ``{"tree": [(title, figure), ...], ...}``.

    Uses :mod:`summarize_widgets.figures` (imported here so the table exporters work without plotly).
    """

    out: dict[str, list] = {}
    if tree is not None:
        out["tree"] = [("Subgroup effects", F.plot_subgroups(tree, level=level, interval=interval)),
                       ("Summary R\u00b2 by depth", F.plot_fit_by_depth(tree, level=level, interval=interval))]
        if len(tree.leaf_ids) > 1:  # the subgroup with the largest benefit (in the draws' direction) against the others
            best = tree.best_subgroup(level=level, interval=interval)
            out["tree"].append((f"Differences from the subgroup with the largest benefit ({tree.label_of(best)})",
                                F.plot_contrasts(tree, best, level=level, interval=interval)))
    if groups is not None:
        out["groups"] = [("Pre-specified group effects", F.plot_subgroups(groups, level=level, interval=interval))]
    if additive is not None:
        out["additive"] = [("Trends along each covariate", F.plot_curves(additive, level=level))]
    if linear is not None:
        out["linear"] = [("Linear summary coefficients", F.plot_coefficients(linear, level=level))]
    return out


# Printing: plotly draws each figure at the screen width it had when the page loaded; redraw the
# figures at the printed column's width before printing (and back afterwards).
_PRINT_FIT = """(function () {
  function fit() {
    if (!window.Plotly) return;
    document.querySelectorAll(".sw-figure .js-plotly-plot").forEach(function (el) {
      var w = el.parentElement.getBoundingClientRect().width;
      if (w > 0) window.Plotly.relayout(el, {width: Math.floor(w), autosize: false});
    });
  }
  function back() {
    if (!window.Plotly) return;
    document.querySelectorAll(".sw-figure .js-plotly-plot").forEach(function (el) {
      window.Plotly.relayout(el, {width: null, autosize: true});
    });
  }
  window.addEventListener("beforeprint", fit);
  window.addEventListener("afterprint", back);
  if (window.matchMedia) {
    var mq = window.matchMedia("print");
    var on = function (e) { if (e.matches) fit(); else back(); };
    if (mq.addEventListener) mq.addEventListener("change", on); else if (mq.addListener) mq.addListener(on);
  }
})();"""


def _plotly_js() -> str:
    import plotly.offline

    js = plotly.offline.get_plotlyjs()
    if re.search(r"</script", js, re.IGNORECASE):  # would end the inline script early
        raise SummaryError("The installed plotly.js contains '</script' and cannot be inlined safely.")
    return js


def _figure_html(fig, div_id: str) -> str:
    import plotly.io as pio

    if not hasattr(fig, "to_plotly_json"):
        raise SummaryError(f"`figures` must hold plotly figures; got {type(fig).__name__}.")
    # include_plotlyjs=False: the library is inlined once in <head>, not once per figure.
    return pio.to_html(fig, full_html=False, include_plotlyjs=False, div_id=div_id, default_width="100%",
                       default_height="460px", config={"displaylogo": False, "responsive": True})


def _normalize_figures(figures, tree, groups, additive, linear, level, interval) -> dict[str, list]:
    if figures is None:
        return {}
    if isinstance(figures, str):
        if figures != "auto":
            raise SummaryError(f"`figures` must be 'auto', None, or a dict of title -> plotly figure; got {figures!r}.")
        return default_figures(tree=tree, groups=groups, additive=additive, linear=linear, level=level, interval=interval)
    if isinstance(figures, Mapping):
        return {"extra": list(figures.items())}
    raise SummaryError(f"`figures` must be 'auto', None, or a dict of title -> plotly figure; got {type(figures).__name__}.")


def _prov_header(prov: Mapping) -> str:
    esc = html.escape
    rows = [("Made with", f"{prov['package'].get('name')} {prov['package'].get('version')}", None),
            ("Created (UTC)", str(prov.get("created_utc", "?")), None)]
    draws_sha = prov.get("draws", {}).get("sha256")
    for d in prov.get("inputs", []):
        role, name = str(d.get("role") or "input"), str(d.get("name"))
        text = name if name.startswith(role) else f"{role}: {name}"  # never the same words twice
        digest = d.get("sha256") or d.get("sha256_of_row_hashes")
        rows.append(("Input", text, None if digest == draws_sha else digest))
    if "draws" in prov:
        d = prov["draws"]
        rows.append(("Draws", f"{d.get('n_draws')} draws \u00d7 {d.get('n_units')} units, {d.get('n_chains')} chain(s), "
                     f"{d.get('dtype')}", draws_sha))
    cells = []
    for key, text, digest in rows:
        sha = f" \u2014 SHA-256 <code>{esc(str(digest))}</code>" if digest else ""
        cells.append(f"<dt>{esc(key)}</dt><dd>{esc(text)}{sha}</dd>")
    return '<dl class="sw-prov">' + "".join(cells) + "</dl>"


def _section_of(table_name: str) -> str:
    """Which report section a table from :func:`summary_tables` belongs to."""
    for prefix, section in (("subgroups", "tree"), ("fit_r2", "tree"), ("contrasts", "tree"), ("groups", "groups"),
                            ("linear", "linear"), ("trends", "additive"), ("heterogeneity", "evidence"),
                            ("stability", "evidence"), ("size_path", "evidence"),
                            ("precision", "evidence")):
        if table_name.startswith(prefix):
            return section
    return "extra"


def _setting_text(value) -> str:
    """A setting for reading: lists joined by commas, dicts as "key: value" pairs, None as "default"."""
    if value is None:
        return "default"
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, (list, tuple)):
        return ", ".join(_setting_text(v) for v in value)
    if isinstance(value, Mapping):
        return "; ".join(f"{k}: {_setting_text(v)}" for k, v in value.items())
    return str(value)


def _settings_html(prov: Mapping) -> str:
    esc = html.escape
    summaries = {name: dict(s) for name, s in prov.get("summaries", {}).items()}
    for s in summaries.values():  # the structure fitted to these draws' own posterior: said by the label already
        if "structure_from" in s and s["structure_from"] == s.get("label"):
            s.pop("structure_from")
    # A setting every summary shares (same key, same value) is listed once, not under each summary.
    common = {}
    if len(summaries) > 1:
        first = next(iter(summaries.values()))
        common = {k: v for k, v in first.items() if k != "summary"
                  and all(k in s and _setting_text(s[k]) == _setting_text(v) for s in summaries.values())}
    blocks = [("Every summary", common)] if common else []
    blocks += [(f"Summary: {name}", {k: v for k, v in s.items() if k not in common}) for name, s in summaries.items()]
    if prov.get("settings"):
        blocks.append(("Export settings", prov["settings"]))
    parts = []
    for heading, s in blocks:
        items = "".join(f"<dt>{esc(str(k))}</dt><dd>{esc(_setting_text(v))}</dd>" for k, v in s.items())
        parts.append(f'<h3>{esc(heading)}</h3><dl class="sw-prov">{items}</dl>')
    full = esc(json.dumps(jsonable(prov), indent=2, ensure_ascii=False))
    parts.append(f'<details><summary>Full provenance record (JSON)</summary><pre class="sw-json">{full}</pre></details>')
    return "".join(parts)


def _tree_figure(tree, level, interval) -> str:
    """The static tree diagram with its key (the explorer's tree view, drawn without script)."""
    kind = "highest-density" if interval == "highest-density" else "equal-tailed"
    compliers = "complier_share" in tree.nodes(level=level, interval=interval).columns
    share = "units (share of units) \u00b7 share of compliers" if compliers else "units \u00b7 share of units"
    cap = (f"Each box: subgroup label and split; {share}; posterior mean and {100 * level:g}% {kind} interval. "
           "Subgroups are filled on the figures' colour scale of the mean.")
    if compliers:
        cap += f" {WEAK_MARK} and a dashed outline: weak uptake, an unstable ratio (left out of the colour range)."
    return (f'<h3>Summary tree (depth {tree.depth})</h3><figure class="sw-tree-figure"><div class="sw-scroll">'
            f"{tree_diagram_svg(tree, level=level, interval=interval)}</div>"
            f"<figcaption>{html.escape(cap)}</figcaption></figure>")


_SECTIONS = (("tree", "Subgroups from the summary tree"), ("groups", "Pre-specified groups"),
             ("additive", "Trends (additive summary)"), ("linear", "Linear summary"),
             ("evidence", "Evidence: heterogeneity, stability and summary size"), ("extra", "Figures"))


def render_report(*, tree=None, groups=None, additive=None, linear=None, figures="auto", provenance=None,
                  level: float = 0.95, interval: str = "equal-tailed", digits: int | None = None, points=None,
                  title: str = "Posterior summary report", evidence=None, decisions=None) -> str:
    """The report page as a string (see :func:`write_report` for the parameters)."""
    level = check_level(level)
    interval = check_interval(interval)
    results = {k: v for k, v in (("tree", tree), ("groups", groups), ("additive", additive), ("linear", linear))
               if v is not None}
    if not results and not (isinstance(figures, Mapping) and figures):
        raise SummaryError("A report needs at least one of `tree`, `groups`, `additive`, `linear` or a dict of `figures`.")
    prov = provenance if provenance is not None else make_provenance(
        results, settings={"level": level, "interval": interval, "digits": digits})
    provenance_lines(prov)  # validates the record's shape
    tables = summary_tables(tree=tree, groups=groups, linear=linear, additive=additive, level=level,
                            interval=interval, points=points, evidence=evidence)
    figs = _normalize_figures(figures, tree, groups, additive, linear, level, interval)
    esc = html.escape
    # A note that several tables share is stated once, above the sections, not under every table.
    seen: dict[str, int] = {}
    for df, _ in tables.values():
        for note in dict.fromkeys(table_layout(df)[0].notes):
            seen[note] = seen.get(note, 0) + 1
    shared = [n for n, k in seen.items() if k > 1]
    body, nav, fig_no = [], [], 0
    for key, heading in _SECTIONS:
        sec_tables = [(n, t) for n, t in tables.items() if _section_of(n) == key]
        sec_figs = figs.get(key, [])
        if not sec_tables and not sec_figs:
            continue
        nav.append(f'<a href="#sw-{key}">{esc(heading)}</a>')
        parts = [f'<section class="sw-section" id="sw-{key}"><h2>{esc(heading)}</h2>']
        if key == "evidence" and evidence is not None:
            parts.append('<div class="sw-verdicts">' + "".join(
                f'<p class="sw-verdict"><strong>{esc(h)}.</strong> {esc(m)}</p>' for h, m in evidence.messages) + "</div>")
        if key == "tree" and tree is not None:
            parts.append(_tree_figure(tree, level, interval))
        for fig_title, fig in sec_figs:
            fig_no += 1
            parts.append(f"<h3>{esc(str(fig_title))}</h3>"
                         f'<div class="sw-figure">{_figure_html(fig, f"sw-figure-{fig_no}")}</div>')
        for name, (df, caption) in sec_tables:
            table = '<div class="sw-scroll">' + to_html(df, caption=caption, digits=digits, omit_notes=shared) + "</div>"
            if "contrasts" in name:  # every pair of subgroups: long, so folded
                table = f"<details><summary>{esc(caption)} ({len(df)} pairs)</summary>{table}</details>"
            parts.append(table)
        parts.append("</section>")
        body.append("".join(parts))
    fig_no = _add_decisions(decisions, body, nav, fig_no, figures, level, digits)
    nav.append('<a href="#sw-settings">Settings and provenance</a>')
    body.append(f'<section class="sw-section" id="sw-settings"><h2>Settings and provenance</h2>{_settings_html(prov)}</section>')
    label = next((getattr(r, "label", None) for r in results.values() if getattr(r, "label", None)), None)
    subtitle = "" if label and label in title else (f"Posterior summaries of the {label}" if label else "")
    sub_html = f'<p class="sw-sub">{esc(subtitle)}</p>' if subtitle else ""
    notes_html = ('<aside class="sw-shared-notes">' + "".join(f'<p class="sw-note">{esc(n)}</p>' for n in shared)
                  + "</aside>\n") if shared else ""
    cautions = "".join(f"<li>{esc(c)}</li>" for c in CAUTIONS)
    scripts = f"<script>{_plotly_js()}\n{_PRINT_FIT}</script>" if fig_no else ""  # one script: the library, then its print fit
    return (
        "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n"
        f'<meta http-equiv="Content-Security-Policy" content="{esc(_CSP)}">\n'
        '<meta name="viewport" content="width=device-width, initial-scale=1">\n'
        f"<title>{esc(title)}</title>\n<style>{_CSS}</style>\n{scripts}\n</head>\n<body>\n"
        f'<div class="sw-page">\n<header class="sw-head"><h1>{esc(title)}</h1>{sub_html}'
        f"{_prov_header(prov)}</header>\n"
        f'<nav class="sw-nav">{"".join(nav)}</nav>\n'
        f'<aside class="sw-cautions" id="sw-cautions"><h2>Cautions</h2><ul>{cautions}</ul></aside>\n'
        + notes_html
        + "\n".join(body)
        # The header already names the package, time and inputs: the footer only points to the full record.
        + '\n<footer class="sw-foot">The full provenance record is under Settings and provenance '
          "(and in provenance.json beside exported tables).</footer>\n</div>\n</body>\n</html>\n"
    )


def _add_decisions(decisions, body, nav, fig_no, figures, level, digits) -> int:
    """Append the "Decisions" section (value of targeting, uptake drivers) when asked; returns the figure count."""
    if decisions is None:
        return fig_no
    from .decisions import decisions_section_html

    if not isinstance(decisions, Mapping) or not set(decisions) <= {"targeting", "uptake"} or not decisions:
        raise SummaryError("`decisions` must be a dict with 'targeting' (value_of_targeting(...)) and/or 'uptake' "
                           "(uptake_drivers(...)).")
    fig = None
    if figures is not None and decisions.get("targeting") is not None:
        from ..figures.decisions import plot_targeting_curve

        fig_no += 1
        fig = _figure_html(plot_targeting_curve(decisions["targeting"], level=level), f"sw-figure-{fig_no}")
    body.append(decisions_section_html(decisions.get("targeting"), decisions.get("uptake"), level=level,
                                       digits=digits,
                                       figure_html=fig))
    nav.append('<a href="#sw-decisions">Decisions</a>')
    return fig_no


def write_report(out_dir, *, tree=None, groups=None, additive=None, linear=None, figures="auto", provenance=None,
                 level: float = 0.95, interval: str = "equal-tailed", digits: int | None = None, points=None,
                 title: str = "Posterior summary report", filename: str = "report.html",
                 overwrite: bool = False, evidence=None, decisions=None) -> Path:
    """Write a self-contained ``report.html`` that opens offline in any browser.

    Parameters
    ----------
    out_dir : str or Path
        Folder (created if missing).
    tree, groups, additive, linear : summary results, optional
        ``TreeSummary`` (at its current depth), ``GroupSummary``, ``AdditiveSummary``, ``LinearSummary``.
    figures : "auto", None or dict of str -> plotly Figure, default "auto"
        "auto" draws the standard figures with :mod:`summarize_widgets.figures`; a dict adds
        your own figures (title -> figure) in a "Figures" section; None leaves figures out.
    provenance : dict, optional
        From :func:`summarize_widgets.export.provenance` (pass the one written beside the
        tables so both agree); built from the results when omitted.
    level, interval : float, str
        Credible level and interval kind of every table and figure.
    digits : int, optional
        Decimals of every number column; by default each column's own, from the size of its
        numbers and their Monte Carlo error (:mod:`summarize_widgets.core.numbers`), as in the
        exported tables.
    points : dict, optional
        Grid values of the additive table (see :func:`summarize_widgets.export.curve_points`).
    title : str
    filename : str, default "report.html"
    overwrite : bool, default False
        Replace an existing report; without it an existing file is refused (FileExistsError).
    evidence : EvidenceSet, optional
        Adds an "Evidence" section: the verdicts in plain language and their tables
        (:func:`summarize_widgets.summaries.evidence_set.gather_evidence`).
    decisions : dict, optional
        ``{"targeting": value_of_targeting(...), "uptake": uptake_drivers(...)}`` (either or both): adds a
        "Decisions" section with the headline, the gain-vs-share figure, the tables and their cautions.

    Returns
    -------
    Path
        The written report.
    """
    out_dir = Path(out_dir)
    target = out_dir / filename
    refuse_existing([target], overwrite=overwrite)  # before the (slow) rendering
    page = render_report(tree=tree, groups=groups, additive=additive, linear=linear, figures=figures,
                         provenance=provenance, level=level, interval=interval, digits=digits, points=points,
                         title=title, evidence=evidence, decisions=decisions)
    out_dir.mkdir(parents=True, exist_ok=True)
    return write_atomic(target, page, overwrite=overwrite)
