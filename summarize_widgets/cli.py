"""Command line: ``summarize-widgets demo | summarize | report | targeting``.

Errors the user can fix (bad files, bad settings, a folder that would be overwritten)
end in one line on stderr and exit status 2, never a traceback.
"""
from __future__ import annotations

import argparse
import json
import sys
from datetime import datetime
from pathlib import Path

from .summaries.bundle import DEFAULT_DEPTH, summarize_all

__all__ = ["main"]

_TABLES = ("subgroups", "contrasts", "fit", "linear", "trends")
DRAW_FORMAT_NAMES = ("npy", "npz", "csv", "parquet", "netcdf", "zarr", "sampler-csv")


def _add_summary_options(p: argparse.ArgumentParser) -> None:
    g = p.add_argument_group("summary settings")
    g.add_argument("--depth", type=int, default=DEFAULT_DEPTH,
                   help=f"depth of the reported subgroup tree (default {DEFAULT_DEPTH})")
    g.add_argument("--max-depth", type=int, default=None, help="depth the tree is grown to (default max(depth, 4))")
    g.add_argument("--min-size", type=int, default=None, help="smallest subgroup in units (default 5%% of units, at most 1000)")
    g.add_argument("--columns", default=None, help="comma-separated covariates to use (default: all)")
    g.add_argument("--pool-levels", type=int, default=None, metavar="K",
                   help="linear and additive summaries: keep the K most common levels of a text column with more than "
                        "50 levels and pool the rest as '(other)' (default: such a column is refused)")
    g.add_argument("--level", type=float, default=0.95, help="credible level (default 0.95)")
    g.add_argument("--interval", choices=("equal-tailed", "highest-density"), default="equal-tailed",
                   help="kind of credible interval (default equal-tailed)")


def _add_evidence_options(p: argparse.ArgumentParser) -> None:
    g = p.add_argument_group("evidence (heterogeneity, structure stability, summary size)")
    g.add_argument("--evidence", action="store_true",
                   help="also report whether effects vary at all, whether the tree is stable across posterior draws "
                        "and how small a summary suffices (tables, report section and printed verdicts)")
    g.add_argument("--stability-fits", type=int, default=200, metavar="N",
                   help="with --evidence: posterior draws to refit the tree to (default 200; 0 skips this check, "
                        "the only slow one)")
    g.add_argument("--threshold", type=float, default=None, metavar="C",
                   help="with --evidence: a difference between subgroup effects that matters, on the effect's scale "
                        "(default: a rule of thumb, a quarter of the average effect or of the sd of unit effects)")
    g.add_argument("--tolerance", type=float, default=0.05,
                   help="with --evidence: summary R^2 a smaller summary may give up (default 0.05)")


def _add_input_options(p: argparse.ArgumentParser) -> None:
    p.add_argument("draws", metavar="DRAWS",
                   help="draws file: .npy, .npz, .csv, .parquet, .nc (netCDF, groups allowed), a .zarr store, or sampler CSV")
    p.add_argument("--covariates", required=True, metavar="FILE", help="covariates, one row per unit (.csv or .parquet)")
    g = p.add_argument_group("reading the draws")
    g.add_argument("--variable", "--outcome-var", dest="variable", default=None, metavar="NAME",
                   help="variable in DRAWS holding the effects (or, with --uptake, the outcome ITT): a .npz array, "
                        "a netCDF/zarr variable or a sampler column prefix")
    g.add_argument("--nc-group", default=None, metavar="GROUP",
                   help="netCDF/zarr group holding the variables (default: the root, else a 'posterior' group)")
    g.add_argument("--draws-format", default=None, choices=DRAW_FORMAT_NAMES,
                   help="format of DRAWS (default: from the extension)")
    g.add_argument("--unit-column", default="unit", metavar="NAME",
                   help="covariate column holding unit ids, matched to the ids the draws carry (default 'unit'; "
                        "without one, units are matched by position)")
    g.add_argument("--chains", type=int, default=None, help="number of chains, stored chain-major")
    g.add_argument("--uptake", default=None, metavar="FILE",
                   help="draws of the offer's effect on uptake: DRAWS is then the outcome ITT and every subgroup "
                        "effect is complier-weighted (LATE); FILE may be DRAWS itself with another --uptake-var")
    g.add_argument("--uptake-var", default=None, metavar="NAME",
                   help="variable in the --uptake file holding the uptake ITT (needed when that file holds several)")
    g.add_argument("--uptake-format", default=None, choices=DRAW_FORMAT_NAMES,
                   help="format of the --uptake file (default: from the extension)")
    g.add_argument("--label", default=None, help="what the effect is, for titles (default 'effect' or 'LATE')")


def build_parser() -> argparse.ArgumentParser:
    from . import __version__

    parser = _Parser(
        prog="summarize-widgets",
        description="Summarize posterior draws of unit-level effects into subgroups, trends and tables.",
    )
    parser.add_argument("--version", action="version", version=f"%(prog)s {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")

    demo = sub.add_parser("demo", help="run the whole job on the built-in simulated retrofit study (no data needed)",
                          description="Simulate the built-in home-retrofit lottery study, summarize its posterior, "
                                      "print the subgroup table and write tables, figures and report.html into a folder.")
    demo.add_argument("--out", default=None, metavar="DIR", help="output folder (default: a new folder here)")
    demo.add_argument("--overwrite", action="store_true", help="replace files in an existing non-empty folder")
    demo.add_argument("--compliers", action="store_true",
                      help="summarize the retrofit's effect among compliers (LATE) instead of the offer's effect")
    demo.add_argument("--households", type=int, default=2000, help="simulated households (default 2000)")
    demo.add_argument("--n-draws", type=int, default=1000, help="posterior draws (default 1000)")
    demo.add_argument("--seed", type=int, default=20261201, help="random seed (default 20261201)")
    demo.add_argument("--no-figures", action="store_true", help="skip the SVG/PDF/PNG figure files")
    _add_summary_options(demo)
    _add_evidence_options(demo)

    summ = sub.add_parser("summarize", help="print a summary table of your own draws",
                          description="Summarize your own draws and print one table.")
    _add_input_options(summ)
    _add_summary_options(summ)
    _add_evidence_options(summ)
    summ.add_argument("--table", choices=_TABLES, default="subgroups", help="which table to print (default subgroups)")
    summ.add_argument("--format", choices=("text", "csv", "markdown", "json"), default="text",
                      help="output format (default text)")

    rep = sub.add_parser("report", help="write tables, figures and report.html for your own draws",
                         description="Summarize your own draws and write tables (LaTeX, Markdown, CSV, HTML), "
                                     "figures (SVG, PDF, PNG), report.html and provenance.json into a folder.")
    _add_input_options(rep)
    _add_summary_options(rep)
    _add_evidence_options(rep)
    rep.add_argument("--out", required=True, metavar="DIR", help="output folder")
    rep.add_argument("--overwrite", action="store_true", help="replace files in an existing non-empty folder")
    rep.add_argument("--group", action="append", default=[], metavar="LABEL=QUERY",
                     help="a pre-specified group as LABEL=QUERY, e.g. --group \"older=age >= 65\" (repeatable; comparisons, "
                          "'in' lists, 'is missing', and/or/not)")
    rep.add_argument("--no-figures", action="store_true", help="skip the SVG/PDF/PNG figure files")
    _add_targeting_parser(sub)
    return parser


_TARGET_TABLES = ("gain", "subgroups", "curve", "halves", "uptake")


def _add_targeting_parser(sub) -> None:
    tg = sub.add_parser("targeting", help="what offering to some subgroups would gain (in-sample and cross-fitted)",
                        description="Fit the subgroup tree, then print the posterior of what offering to the subgroups "
                                    "with a high probability of benefit gains over offering to all or to none. Cross-"
                                    "fitted figures (a tree and rule chosen on one half of the units, judged on the other) "
                                    "stand beside the in-sample ones. Decisions about people follow your field's standards.")
    src = tg.add_mutually_exclusive_group(required=True)
    src.add_argument("--demo", action="store_true", help="use the built-in simulated retrofit study (no data needed)")
    src.add_argument("--draws", dest="draws", default=None, metavar="DRAWS", help="draws file (as for `summarize`)")
    tg.add_argument("--covariates", default=None, metavar="FILE", help="covariates, one row per unit (with --draws)")
    g = tg.add_argument_group("reading the draws (with --draws)")
    g.add_argument("--variable", default=None, metavar="NAME", help="variable in DRAWS holding the effects")
    g.add_argument("--nc-group", default=None, metavar="GROUP", help="netCDF/zarr group holding the variables")
    g.add_argument("--draws-format", default=None, choices=DRAW_FORMAT_NAMES, help="format of DRAWS")
    g.add_argument("--unit-column", default="unit", metavar="NAME", help="covariate column holding unit ids")
    g.add_argument("--chains", type=int, default=None, help="number of chains, stored chain-major")
    g.add_argument("--uptake", default=None, metavar="FILE", help="uptake ITT draws (complier design)")
    g.add_argument("--uptake-var", default=None, metavar="NAME", help="variable in the --uptake file")
    g.add_argument("--uptake-format", default=None, choices=DRAW_FORMAT_NAMES, help="format of the --uptake file")
    g.add_argument("--label", default=None, help="what the effect is, for titles")
    d = tg.add_argument_group("the decision")
    d.add_argument("--better", choices=("higher", "lower"), default=None,
                   help="which direction of the outcome is good (default: higher; the demo's bills: lower)")
    d.add_argument("--cost", type=float, default=0.0, help="cost of one offer, in the outcome's units (default 0)")
    d.add_argument("--min-prob", type=float, default=0.9,
                   help="offer a subgroup when its posterior probability of benefit is at least this (default 0.9)")
    d.add_argument("--split-seed", type=int, default=0, help="seed of the random halves for cross-fitting (default 0)")
    d.add_argument("--population", type=float, default=None, help="scale totals to this many units (default: the study's)")
    d.add_argument("--compliers", action="store_true", help="with --demo: complier design (uptake and LATE tables too)")
    d.add_argument("--depth", type=int, default=DEFAULT_DEPTH, help=f"depth of the subgroup tree (default {DEFAULT_DEPTH})")
    d.add_argument("--min-size", type=int, default=None, help="smallest subgroup in units")
    d.add_argument("--level", type=float, default=0.95, help="credible level (default 0.95)")
    d.add_argument("--table", choices=_TARGET_TABLES, default=None,
                   help="print one table only (default: the gain table, then the subgroups)")
    d.add_argument("--format", choices=("text", "csv", "markdown", "json"), default="text", help="output format")


def _columns(text):
    return None if text is None else [c.strip() for c in text.split(",") if c.strip()]


def _groups(items):
    from .core.query import parse_query

    out = {}
    for item in items:
        label, sep, query = item.partition("=")
        if not sep or not label.strip() or not query.strip():
            raise ValueError(f"--group must look like LABEL=QUERY (e.g. \"older=age >= 65\"); got {item!r}.")
        try:
            parse_query(query.strip())  # refuse a malformed query before any computation
        except ValueError as exc:
            raise ValueError(f"--group {label.strip()!r}: {exc}") from None
        out[label.strip()] = query.strip()
    return out


def _load(args):
    from .core.draws import EffectDraws
    from .io.load import load_draws

    common = dict(chains=args.chains, group=args.nc_group, unit_column=args.unit_column or None)
    if args.uptake is None:
        if args.uptake_var is not None:
            raise ValueError("--uptake-var names the variable of the --uptake file; pass --uptake FILE too.")
        return load_draws(args.draws, args.covariates, format=args.draws_format, variable=args.variable,
                          label=args.label or "effect", **common)
    if Path(args.uptake).resolve() == Path(args.draws).resolve() and (args.uptake_var or None) == (args.variable or None):
        raise ValueError(
            "--uptake names the DRAWS file itself with the same variable, so the uptake would be the outcome; "
            "pass --variable for the outcome ITT and --uptake-var for the uptake ITT."
        )
    outcome = load_draws(args.draws, args.covariates, format=args.draws_format, variable=args.variable,
                         source=str(args.draws), **common)
    try:
        uptake = load_draws(args.uptake, args.covariates, format=args.uptake_format, variable=args.uptake_var,
                            source=str(args.uptake), **common)
    except ValueError as exc:  # name the uptake file's own options in the hint
        msg = str(exc).replace("`variable`", "--uptake-var").replace("`format=`", "--uptake-format")
        raise ValueError(f"--uptake file: {msg}") from None
    # Both files were matched to the same covariate rows, so their columns are the same units in the same order.
    cov = outcome.covariates.set_axis(outcome.unit_ids, axis=0)
    return EffectDraws.from_itt(outcome.values, uptake.values, cov, chains=outcome.n_chains,
                                label=args.label or "LATE", source=str(args.draws))


def _text_table(df) -> str:
    """A terminal rendering of a summary table: the exporters' own layout and number formatter.

    The columns, labels (S1 .. Sk), rule text ("and", "∈", ≤) and numbers (digits per column from
    the Monte Carlo error, ``<0.001`` for a probability at the end) are those of the Markdown and
    HTML tables (``export.layout``, ``core.numbers``), so the terminal reads as every other output.
    """
    from .export.layout import format_cell, rule_to_text, table_layout

    lay, digits = table_layout(df)
    heads = [h[0] for h in lay.headers]
    rows = [[rule_to_text(c[1]) if c[0] == "rule" else str(c[1]) if c[0] == "text" else format_cell(c, digits, "text")
             for c in row] for row in lay.rows]
    widths = [max([len(h)] + [len(r[k]) for r in rows]) for k, h in enumerate(heads)]
    right = [h[2] == "r" for h in lay.headers]

    def line(cells):
        return "  ".join(c.rjust(w) if r else c.ljust(w) for c, w, r in zip(cells, widths, right)).rstrip()

    level = df.attrs.get("level")
    head = f"{df.attrs.get('label', '')}  ({int(round(100 * level))}% {df.attrs.get('interval', '')} intervals)" if level else ""
    out = ([head] if head else []) + [line(heads)] + [line(r) for r in rows]
    out += ["", *(f"Note: {n}" for n in lay.notes)] if lay.notes else []
    return "\n".join(out)


def _render(df, fmt: str) -> str:
    if fmt == "text":
        return _text_table(df)
    if fmt == "csv":
        return df.to_csv(index=False)
    if fmt == "markdown":
        from .export import to_markdown
        return to_markdown(df)
    return json.dumps({"attrs": {k: v for k, v in df.attrs.items() if isinstance(v, (str, int, float, bool))},
                       "rows": json.loads(df.to_json(orient="records"))}, indent=2)


def _pick_table(bundle, name, level, interval):
    tree = bundle.tree
    if name == "subgroups":
        return tree.table(level=level, interval=interval)
    if name == "contrasts":
        return tree.contrasts(level=level, interval=interval)
    if name == "fit":
        return tree.fit_r2_by_depth(level=level, interval=interval)
    if name == "linear":
        return bundle.linear.table(level=level, interval=interval)
    return bundle.additive.curves(level=level, interval=interval)


def _summaries(draws, args, groups=None, need=("additive", "linear")):

    if args.evidence:
        need = (*need, "linear")  # the linear summary's size path is part of the evidence
    return summarize_all(draws, depth=args.depth, max_depth=args.max_depth, min_size=args.min_size,
                         columns=_columns(args.columns), groups=groups,
                         additive="additive" in need, linear="linear" in need,
                         evidence=args.evidence, stability_fits=args.stability_fits if args.evidence else 0,
                         threshold=args.threshold, tolerance=args.tolerance, level=args.level, interval=args.interval,
                         pool_levels=getattr(args, "pool_levels", None))


def _print_evidence(bundle) -> None:
    if bundle.evidence is None:
        return
    print("\nEvidence")
    for heading, message in bundle.evidence.messages:
        print(f"- {heading}: {message}")


def _print_headline(bundle, level, interval) -> None:
    tree = bundle.tree
    print(_text_table(tree.table(level=level, interval=interval)))
    try:
        r2 = tree.fit_r2_by_depth(level=level, interval=interval)
        row = r2[r2["depth"] == tree.depth].iloc[0]
        print(f"\nSummary R^2 at depth {tree.depth}: {row['mean']:.2f} "
              f"[{row['lower']:.2f}, {row['upper']:.2f}] (share of each draw's heterogeneity the subgroups capture)")
    except Exception as exc:  # noqa: BLE001 - R^2 can be undefined (constant effects); say so, go on
        print(f"\nSummary R^2: {exc}")


def _finish(bundle, files, out) -> None:
    for note in bundle.notes:
        print(f"\nNote: {note}")
    print(f"\nWrote {len(files)} files into {out} (open {out / 'report.html'} in a browser).")


def _cmd_demo(args) -> int:
    from .export.folder import write_summary_folder
    from .datasets.retrofit import simulate_retrofit_study

    out = Path(args.out) if args.out else Path.cwd() / f"summary_output_{datetime.now():%Y%m%d-%H%M%S}"
    from .export.folder import check_output_folder
    check_output_folder(out, args.overwrite)  # refuse before the work, not after
    study = simulate_retrofit_study(n_households=args.households, n_draws=args.n_draws, seed=args.seed)
    draws = study.complier_draws() if args.compliers else study.effect_draws()
    print(f"Simulated retrofit study: {draws}")
    bundle = _summaries(draws, args)
    _print_headline(bundle, args.level, args.interval)
    _print_evidence(bundle)
    files = write_summary_folder(bundle, out, level=args.level, interval=args.interval,
                                 figures=False if args.no_figures else "auto",
                                 inputs={"simulated study (seed {})".format(args.seed): draws.values},
                                 overwrite=args.overwrite)
    _finish(bundle, files, out)
    return 0


def _cmd_summarize(args) -> int:
    draws = _load(args)
    need = {"linear": ("linear",), "trends": ("additive",)}.get(args.table, ())
    bundle = _summaries(draws, args, need=need)
    print(_render(_pick_table(bundle, args.table, args.level, args.interval), args.format))
    if bundle.evidence is not None:
        if args.format == "text":
            _print_evidence(bundle)
        else:
            for name, (df, _) in bundle.evidence.tables(args.level, args.interval).items():
                print(f"\n{name}\n{_render(df, args.format)}")
    return 0


def _cmd_report(args) -> int:
    from .export.folder import check_output_folder, write_summary_folder

    out = Path(args.out)
    check_output_folder(out, args.overwrite)  # every output check before any computation
    groups = _groups(args.group)
    draws = _load(args)
    bundle = _summaries(draws, args, groups=groups or None)
    _print_headline(bundle, args.level, args.interval)
    _print_evidence(bundle)
    inputs = [args.draws, args.covariates] + ([args.uptake] if args.uptake else [])
    files = write_summary_folder(bundle, out, level=args.level, interval=args.interval, inputs=inputs,
                                 figures=False if args.no_figures else "auto", overwrite=args.overwrite)
    _finish(bundle, files, out)
    return 0


def _targeting_draws(args):
    from .core.draws import EffectDraws

    if args.demo:
        from .datasets.retrofit import simulate_retrofit_study

        study = simulate_retrofit_study()
        draws = study.complier_draws() if args.compliers else study.effect_draws()
        if args.better is not None and args.better != draws.better:
            raise ValueError("--better: the demo's outcome is a winter bill, where lower is better; leave --better unset.")
        return draws
    if args.covariates is None:
        raise ValueError("--draws needs --covariates FILE (one row per unit).")
    if args.compliers:
        raise ValueError("--compliers is for --demo; with your own draws pass --uptake FILE.")
    for name in ("interval", "max_depth", "columns"):
        setattr(args, name, None)
    args.interval = "equal-tailed"
    draws = _load(args)
    better = args.better or "higher"
    if draws.is_complier_weighted:
        return EffectDraws.from_itt(draws.values, draws.uptake_values, draws.covariates, chains=draws.n_chains,
                                    label=draws.label, better=better, source=draws.source)
    return EffectDraws(draws.values, draws.covariates, chains=draws.n_chains, label=draws.label, better=better,
                       source=draws.source, weights=draws.weights)


def _cmd_targeting(args) -> int:
    from .summaries.targeting import TARGETING_CAUTION, value_of_targeting
    from .summaries.tree import summarize_tree
    from .summaries.uptake import uptake_drivers

    if args.table == "uptake" and not (args.uptake or args.compliers):
        raise ValueError("--table uptake needs a complier design: --uptake FILE (or --demo --compliers).")
    draws = _targeting_draws(args)
    tree = summarize_tree(draws, max_depth=max(args.depth, 1), min_size=args.min_size)
    res = value_of_targeting(tree, min_prob=args.min_prob, cost=args.cost, seed=args.split_seed,
                             population=args.population)
    tables = {"gain": lambda: res.table(level=args.level), "subgroups": lambda: res.subgroups(level=args.level),
              "curve": lambda: res.curve(level=args.level), "halves": lambda: res.half_subgroups(level=args.level),
              "uptake": lambda: uptake_drivers(tree).table(level=args.level)}
    names = [args.table] if args.table else ["gain", "subgroups"] + (["uptake"] if draws.is_complier_weighted else [])
    if args.format == "text":
        print(res.headline(args.level))
        print(res.note)
    for name in names:
        df = tables[name]()
        if args.format == "text":
            print(f"\n{name}")
            print(_target_text(df))
            if name == "uptake":
                print(f"{df.attrs['note']}\n{df.attrs['caution']}")
        else:
            print(_render(df, args.format))
    if args.format == "text":
        print(f"\nCaution: {TARGETING_CAUTION}")
    return 0


def _target_text(df) -> str:
    import pandas as pd

    show = df.drop(columns=[c for c in df.columns if c.startswith(("ess_", "mcse_")) or c in ("rhat", "sd")])
    for c in show.columns:
        if pd.api.types.is_float_dtype(show[c]):
            show[c] = show[c].map(lambda v: f"{v:.3g}")
    with pd.option_context("display.max_colwidth", 60, "display.width", 220, "display.max_columns", 40):
        return show.to_string(index=False)


# Python argument spellings in library messages -> the options a command-line user types.
_CLI_SPELLINGS = [
    (r"`format=`|`format`|format=", "--draws-format"),
    (r"`variable`|variable=", "--variable"),
    (r"`group=`|`group`|group=", "--nc-group"),
    (r"`unit_column`|unit_column=None", "--unit-column ''"),
    (r"unit_column=", "--unit-column "),
    (r"`chains`|chains=", "--chains"),
    (r"`min_size`|min_size=", "--min-size"),
    (r"\(max_levels=(\d+): ", r"(at most \1 levels: "),
    (r", or raise max_levels\.", "."),
    (r"pass pool_levels=k to keep its k", "pass --pool-levels K to keep its K"),
    (r"`max_depth`|max_depth=", "--max-depth"),
    (r"`columns`|columns=", "--columns"),
    (r"`level`|level=", "--level"),
    (r"`depth`|depth=", "--depth"),
    (r"`min_prob`", "--min-prob"),
    (r"`cost`", "--cost"),
    (r"`population`", "--population"),
    (r"`uptake_itt`", "the --uptake draws"),
    (r"`outcome_itt`", "the outcome draws (DRAWS)"),
    (r"`covariates`", "--covariates"),
    (r"`path`", "DRAWS"),
    (r"overwrite=True \(command line: --overwrite\)|overwrite=True", "--overwrite"),
]


def cli_message(msg: str) -> str:
    """One line, with the library's Python argument names replaced by command-line option spellings."""
    import re

    line = " ".join(str(msg).split())
    for pattern, repl in _CLI_SPELLINGS:
        line = re.sub(pattern, repl, line)
    return line


class _Parser(argparse.ArgumentParser):
    """An argument parser whose usage errors are one line (no usage block)."""

    def error(self, message):
        self.exit(2, f"{self.prog}: error: {cli_message(message)} (see {self.prog} --help)\n")


def main(argv=None) -> int:
    """Entry point of ``summarize-widgets``."""
    parser = build_parser()
    args = parser.parse_args(argv)
    if args.command is None:
        parser.print_help()
        return 0
    handler = {"demo": _cmd_demo, "summarize": _cmd_summarize, "report": _cmd_report,
               "targeting": _cmd_targeting}[args.command]
    try:
        return handler(args)
    except (ValueError, FileExistsError, FileNotFoundError, PermissionError, RuntimeError, OSError) as exc:
        # SummaryError is a ValueError; BrowserNotFoundError a RuntimeError: all say what to fix.
        msg = cli_message(exc) if str(exc) else type(exc).__name__
        print(f"summarize-widgets {args.command}: error: {msg}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("summarize-widgets: interrupted", file=sys.stderr)
        return 130
    except Exception as exc:  # noqa: BLE001 - an unexpected failure is still one line, never a traceback
        print(f"summarize-widgets {args.command}: error: unexpected {type(exc).__name__}: {cli_message(exc)} "
              "(please report this with the command you ran)", file=sys.stderr)
        return 1


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
