"""Tables (LaTeX, Markdown, CSV, HTML), atomic writes and provenance records."""
from __future__ import annotations

import hashlib
import io
import json
import os
import re
import shutil
import subprocess
from datetime import datetime, timedelta, timezone
from html.parser import HTMLParser
from importlib.metadata import version as dist_version

import numpy as np
import pandas as pd
import pytest

import summarize_widgets
from summarize_widgets import EffectDraws, SummaryError
from summarize_widgets import export as ex
from summarize_widgets.summaries.additive import summarize_additive
from summarize_widgets.summaries.groups import summarize_groups
from summarize_widgets.summaries.linear import summarize_linear
from summarize_widgets.summaries.tree import summarize_tree

NASTY = "a&b%c$d#e_f{g}h~i^j\\k"  # every LaTeX special in one name


def plain(tex: str) -> str:
    """LaTeX without the break points placed inside long words (so tests compare the text)."""
    return tex.replace(r"\penalty5000{}", "")


# ----------------------------------------------------------------------------- fixtures
def subgroup_table(weak=None, rules=None) -> pd.DataFrame:
    """A tree table with the documented columns (DEVELOPERS.md), numbers chosen by hand."""
    df = pd.DataFrame({
        "subgroup": np.array([3, 4, 6]),
        "rule": rules or ["baseline_bill <= 120 & tenure in {owner, co-op}", "120 < baseline_bill <= 240", "baseline_bill > 240"],
        "n_units": [412, 1288, 300],
        "share": [0.206, 0.644, 0.15],
        "mean": [-12.3456, -4.0, 0.004],
        "sd": [1.5, 0.8, 2.0],
        "lower": [-15.12345, -5.5, -3.9],
        "upper": [-9.5, -2.44449, 4.0],
        "prob_positive": [0.0, 0.0125, 0.5],
    })
    if weak is not None:
        df["uptake_share"] = [0.6, 0.05, 0.4]
        df["uptake_lower"] = [0.5, 0.01, 0.3]
        df["weak_uptake"] = weak
    df.attrs.update({"level": 0.9, "interval": "equal-tailed", "label": "bill change", "depth": 2})
    return df


def contrast_table() -> pd.DataFrame:
    df = pd.DataFrame({"subgroup_a": [3, 3], "subgroup_b": [4, 6], "rule_a": ["x <= 1", "x <= 1"],
                       "rule_b": ["x > 1 & fuel = oil", "x > 1 & fuel = gas"], "difference": [1.25, -0.5],
                       "lower": [0.5, -1.5], "upper": [2.0, 0.5], "prob_a_greater": [0.99, 0.2]})
    df.attrs.update({"level": 0.95, "interval": "highest-density"})
    return df


def linear_table() -> pd.DataFrame:
    return pd.DataFrame({"term": ["intercept", "baseline_bill", f"fuel[{NASTY}]"], "mean": [-3.0, -0.1, 2.5],
                         "sd": [1.0, 0.01, 0.7], "lower": [-5.0, -0.12, 1.1], "upper": [-1.0, -0.08, 3.9],
                         "prob_positive": [0.0, 0.0, 1.0]})


def curves_table() -> pd.DataFrame:
    x = np.linspace(50, 300, 11)
    rows = [{"covariate": "baseline_bill", "covariate_type": "numeric", "x": v, "mean": -v / 10, "lower": -v / 10 - 1,
             "upper": -v / 10 + 1, "lower_joint": -v / 10 - 2, "upper_joint": -v / 10 + 2} for v in x]
    rows += [{"covariate": "fuel", "covariate_type": "categorical", "x": c, "mean": m, "lower": m - 1, "upper": m + 1,
              "lower_joint": m - 2, "upper_joint": m + 2} for c, m in (("gas", -3.0), ("oil", -8.0), ('a&b "q"', 1.0))]
    df = pd.DataFrame(rows)
    df.attrs["level"] = 0.95
    return df


@pytest.fixture(scope="module")
def real():
    """Small simulated retrofit posterior whose tree splits on a nasty covariate name and category."""
    rng = np.random.default_rng(7)
    n, S = 240, 120
    cov = pd.DataFrame({
        "baseline_bill": rng.uniform(40, 300, n),
        "<script>alert(1)</script>": rng.choice(['a&b "q"', "gas", "oil"], n),
        NASTY: rng.normal(size=n),
    })
    mu = -0.08 * cov["baseline_bill"].to_numpy() + np.where(cov["<script>alert(1)</script>"] == 'a&b "q"', -9.0, 0.0)
    draws = EffectDraws(mu + rng.normal(0, 2.0, (S, n)), cov, label="bill change")
    tree = summarize_tree(draws, max_depth=3).at_depth(2)
    groups = summarize_groups(draws, {"big & <b>bills</b>": "baseline_bill > 200", "small": "baseline_bill <= 100"})
    return draws, tree, groups


@pytest.fixture(scope="module")
def smooth(real):
    draws = real[0]
    return summarize_linear(draws), summarize_additive(draws, columns=["baseline_bill", "<script>alert(1)</script>"])


# ----------------------------------------------------------------------------- escaping
@pytest.mark.parametrize("char, escaped", [
    ("&", r"\&"), ("%", r"\%"), ("$", r"\$"), ("#", r"\#"), ("_", r"\_"), ("{", r"\{"), ("}", r"\}"),
    ("~", r"\textasciitilde{}"), ("^", r"\textasciicircum{}"), ("\\", r"\textbackslash{}"),
    ("<", r"\textless{}"), (">", r"\textgreater{}"), ("|", r"\textbar{}"),
])
def test_escape_latex_every_special(char, escaped):
    assert ex.escape_latex(f"x{char}y") == f"x{escaped}y"


def test_escape_latex_is_one_pass_and_drops_line_breaks():
    # One pass: the backslash of "\&" must not be escaped again.
    assert ex.escape_latex(NASTY) == (r"a\&b\%c\$d\#e\_f\{g\}h\textasciitilde{}i\textasciicircum{}j\textbackslash{}k")
    assert ex.escape_latex("two\nlines\r\tand\x07bell") == "two lines  andbell"


def test_rules_typeset_readably():
    # A line may break between conditions (around "and"/"or"), never inside one (~ ties a condition).
    assert ex.rule_to_latex("age <= 40 & region in {east, west}") == r"age~$\leq$~40 and region~$\in$~\{east, west\}"
    assert ex.rule_to_latex("30 < age <= 50") == r"30~$<$~age~$\leq$~50"
    assert ex.rule_to_latex("bill >= 2 | x != 1") == r"bill~$\geq$~2 or x~$\neq$~1"
    assert ex.rule_to_latex("(size > 3 or missing)") == r"(size~$>$~3 or missing)"
    assert ex.rule_to_latex("fuel not in {oil}") == r"fuel~$\notin$~\{oil\}"
    # Operators count only between spaces; names and categories keep their characters, escaped.
    assert ex.rule_to_latex("R&D_share > 0.5") == r"R\&D\_share~$>$~0.5"
    assert ex.rule_to_latex('fuel in {a&b "q", 50%}') == r'fuel~$\in$~\{a\&b "q", 50\%\}'
    assert ex.rule_to_latex("tenure == 'owner'") == r"tenure~$=$~``owner''"
    assert ex.rule_to_text("age <= 40 & region in {a&b, c}") == "age \u2264 40 and region \u2208 {a&b, c}"


# ----------------------------------------------------------------------------- LaTeX
def test_latex_booktabs_caption_label_and_intervals():
    tex = ex.to_latex(subgroup_table(), caption=f"Subgroups {NASTY}", label="tab:subgroups")
    lines = tex.splitlines()
    # booktabs rules in order: top, header, mid, 3 body rows, bottom
    i_top, i_mid, i_bot = lines.index(r"\toprule"), lines.index(r"\midrule"), lines.index(r"\bottomrule")
    assert i_top < i_mid < i_bot and i_bot - i_mid == 4
    assert r"\caption{Subgroups " + ex.escape_latex(NASTY) + "}" in tex
    assert r"\label{tab:subgroups}" in tex
    # The rule column takes the room left and wraps, so the table fits the text width.
    assert r"\begin{tabularx}{\linewidth}{@{}l>{\raggedright\arraybackslash}Xrrrcr@{}}" in tex
    row = plain(lines[i_mid + 1])
    # digits per column: the largest |mean| or sd (12.3) gets 3 significant digits; P(>0) = 0 reads <0.001
    assert row == (r"3 & baseline\_bill~$\leq$~120 and tenure~$\in$~\{owner, co-op\} & 412 & 20.6\% & "
                   r"$-$12.3 & [$-$15.1, $-$9.5] & $<$0.001 \\")
    assert "90\\%\\\\interval" in lines[i_top + 1]
    assert "90\\% equal-tailed posterior credible intervals" in tex
    assert "--" not in tex.replace("co-op", "")  # no "-0.00"-style artefacts or doubled dashes


def test_latex_digits_option():
    df = subgroup_table()
    for digits in (0, 1, 3, 5):
        tex = ex.to_latex(df, digits=digits)
        # Expected strings from Python's own fixed-point formatting (independent of the renderer).
        for value in df["mean"]:
            s = f"{value:.{digits}f}"
            s = s.lstrip("-") if float(s) == 0 else s
            assert s.replace("-", "$-$") in tex
        lo, hi = df.loc[1, "lower"], df.loc[1, "upper"]
        assert f"[$-${abs(lo):.{digits}f}, $-${abs(hi):.{digits}f}]" in tex
    with pytest.raises(SummaryError, match=r"`digits` must be between 0 and 15; got 16"):
        ex.to_latex(df, digits=16)
    with pytest.raises(SummaryError, match=r"`digits` must be an integer"):
        ex.to_latex(df, digits=2.5)


def test_latex_no_negative_zero():
    df = subgroup_table()
    df.loc[0, "mean"] = -0.0004
    assert "$-$0.00" not in ex.to_latex(df) and " 0.00$^" not in ex.to_latex(df)


def test_latex_weak_uptake_footnote_marker():
    tex = ex.to_latex(subgroup_table(weak=[False, True, False]))
    body = tex.split(r"\midrule")[1].split(r"\bottomrule")[0].strip().splitlines()
    # many number columns: each rule goes on its own line under its subgroup's numbers
    body = [line for line in body if not line.startswith(r"\multicolumn")]
    assert r"$-$4.0$^{\dagger}$" in body[1]
    assert r"\dagger" not in body[0] and r"\dagger" not in body[2]
    assert r"$^{\dagger}$ Weak uptake" in tex
    assert "Weak uptake" not in ex.to_latex(subgroup_table(weak=[False, False, False]))


def test_latex_row_opening_with_bracket_is_protected():
    df = linear_table()
    df.loc[0, "term"] = "[0, 10) band"
    assert r"{}[0, 10) band & " in ex.to_latex(df)


def test_latex_label_and_kind_errors():
    with pytest.raises(SummaryError, match=r"`label` must use only letters"):
        ex.to_latex(subgroup_table(), label="tab:{x}")
    with pytest.raises(SummaryError, match=r"`df` is not a summary table.*Got \['a'\]"):
        ex.to_latex(pd.DataFrame({"a": [1]}))
    with pytest.raises(SummaryError, match=r"`df` lacks the columns a 'linear' table needs: \['term'\]"):
        ex.to_latex(subgroup_table(), table="linear")
    with pytest.raises(SummaryError, match=r"`table` must be one of"):
        ex.to_latex(subgroup_table(), table="pie")
    with pytest.raises(SummaryError, match=r"`df` must be a pandas DataFrame"):
        ex.to_latex([1, 2])


def test_latex_every_table_kind():
    tex = ex.to_latex(contrast_table())
    assert r"Difference\\$A - B$" in tex and r"$P(A > B)$" in tex
    assert r"x~$\leq$~1 & x~$>$~1 and fuel~$=$~oil & 1.25 & [0.50, 2.00] & 0.99 \\" in tex
    assert "highest-density" in tex
    tex = plain(ex.to_latex(linear_table()))
    assert "] & 2.50 & [1.10, 3.90] & $>$0.999" in tex and r"a\&b\%c" in tex
    tex = ex.to_latex(ex.curve_points(curves_table(), {"baseline_bill": [100], "fuel": ['a&b "q"']}))
    assert r"baseline\_\penalty5000{}bill & 100 & $-$10.0 & [$-$11.0, $-$9.0] & [$-$12.0, $-$8.0] \\" in tex
    assert r'fuel & a\&b "q" & 1.0 & [0.0, 2.0] & [$-$1.0, 3.0] \\' in tex
    tex = ex.to_latex(ex.curve_points(curves_table(), n_points=2))  # a covariate is named on its first row only
    assert tex.count("baseline\\_\\penalty5000{}bill & ") == 1 and r" & 300 & $-$30.0 &" in tex
    assert tex.count("fuel & ") == 1 and r" & oil & $-$8.0 &" in tex
    r2 = pd.DataFrame({"depth": [1, 2], "n_subgroups": [2, 4], "mean": [0.41, 0.6], "lower": [0.3, 0.5], "upper": [0.5, 0.7]})
    assert r"2 & 4 & 0.600 & [0.500, 0.700] \\" in ex.to_latex(r2)


def _compile(tmp_path, body: str, preamble: str = "") -> str:
    """Compile ``body`` inside a plain article (default margins); return the log."""
    (tmp_path / "t.tex").write_text("\\documentclass{article}\n\\usepackage{booktabs,tabularx,rotating}\n" + preamble
                                    + "\\begin{document}\n" + body + "\\end{document}\n", encoding="utf-8")
    run = subprocess.run(["pdflatex", "-interaction=nonstopmode", "-halt-on-error", "t.tex"], cwd=tmp_path,
                         capture_output=True, text=True, timeout=120)
    assert run.returncode == 0, run.stdout[-3000:]
    return (tmp_path / "t.log").read_text(errors="replace")


def overfull(log: str, tolerance_pt: float = 2.0) -> list[str]:
    """Every overfull box in a LaTeX log wider than ``tolerance_pt`` (a table running off the page)."""
    return [m.group(0) for m in re.finditer(r"Overfull \\[hv]box \(([0-9.]+)pt too (?:wide|high)\)[^\n]*", log)
            if float(m.group(1)) > tolerance_pt]


def test_overfull_detector_catches_a_wide_table(tmp_path):
    # The check must be able to fail: a plain tabular with a long rule runs off the page.
    wide = "\\begin{tabular}{ll}" + "x & " + "word " * 120 + "\\\\ \\end{tabular}\n"
    wide = "\\begin{tabular}{ll}x & " + "\\mbox{" + "w" * 200 + "} \\\\ \\end{tabular}\n"
    assert overfull(_compile(tmp_path, wide))


@pytest.mark.skipif(shutil.which("pdflatex") is None, reason="pdflatex not installed (apt-get install texlive-latex-recommended)")
def test_latex_compiles_with_pdflatex(tmp_path, real, smooth):
    # The real check of "escaped and valid": LaTeX itself must accept every table, and every
    # table must fit the text width of a plain article (no overfull box wider than 2 pt).
    _, tree, groups = real
    linear, additive = smooth
    prov = ex.provenance([tree, groups], settings={"note": NASTY})
    body = "".join([
        ex.to_latex(subgroup_table(weak=[True, False, False], rules=[f"{NASTY} <= 1 & z in {{{NASTY}, b}}", "[x] = y", "q > 1"]),
                    caption=NASTY, label="tab:a", provenance=prov),
        ex.to_latex(tree.table(), provenance=prov), ex.to_latex(tree.contrasts()), ex.to_latex(tree.fit_r2_by_depth()),
        ex.to_latex(groups.table()), ex.to_latex(linear_table()), ex.to_latex(ex.curve_points(curves_table())),
        ex.to_latex(linear.table()), ex.to_latex(ex.curve_points(additive.curves())),
        ex.to_latex(tree.table(), landscape=True), ex.to_latex(tree.table(), width="0.7\\linewidth"),
    ])
    log = _compile(tmp_path, body)
    assert "Missing character" not in log and "Undefined control sequence" not in log
    assert overfull(log) == []


@pytest.mark.skipif(shutil.which("pdflatex") is None, reason="pdflatex not installed")
def test_demo_and_complier_tables_fit_a_plain_article(tmp_path):
    from summarize_widgets.datasets.retrofit import simulate_retrofit_study

    study = simulate_retrofit_study(n_households=1200, n_draws=300, seed=20261201)
    body = []
    for draws in (study.effect_draws(), study.complier_draws()):
        tree = summarize_tree(draws, max_depth=3)
        groups = summarize_groups(draws, {"owners": "tenure == 'owner'", "older homes": "dwelling_age > 60"})
        for name, (df, caption) in ex.summary_tables(tree=tree, groups=groups, linear=summarize_linear(draws)).items():
            body.append(ex.to_latex(df, caption=caption, provenance=ex.provenance([tree])))
    tex = "".join(body)
    assert "ratio of sums" in tex and "Share of compliers" in tex and "Made with" not in tex.replace("% Made with", "")
    log = _compile(tmp_path, tex)
    assert overfull(log) == []


# ----------------------------------------------------------------------------- Markdown
def test_markdown_pipe_table_escaped():
    df = subgroup_table(rules=["a|b <= 1", "x > 1 & <script>", "x`y = 1"])
    md = ex.to_markdown(df, caption="Tree *depth* 2", digits=1)
    lines = md.splitlines()
    assert lines[0] == r"**Tree \*depth\* 2**"
    assert lines[2] == "| Subgroup | Rule | n | Share of units | Mean | 90% interval | P(\\>0) |"
    assert lines[3] == "| :--- | :--- | ---: | ---: | ---: | :---: | ---: |"
    assert lines[4] == "| 3 | `a\\|b \u2264 1` | 412 | 20.6% | \u221212.3 | [\u221215.1, \u22129.5] | <0.001 |"
    assert "`x > 1 and <script>`" in lines[5]  # inside a code span, < is literal text, never markup
    assert "| ``x`y = 1`` |" in lines[6]  # a longer fence around a backtick
    # Every row has the header's number of cells (escaped pipes do not split cells).
    assert {len(re.split(r"(?<!\\)\|", line)) for line in lines[2:7]} == {9}


def test_markdown_text_cells_escaped():
    md = ex.to_markdown(linear_table().assign(term=["<b>x</b>", "a_b*c", "[link](http://x)"]))
    assert r"\<b\>x\</b\>" in md and r"a\_b\*c" in md and r"\[link\](http://x)" in md


# ----------------------------------------------------------------------------- HTML
class _Collect(HTMLParser):
    def __init__(self):
        super().__init__()
        self.tags, self.text = [], []

    def handle_starttag(self, tag, attrs):
        self.tags.append(tag)

    def handle_data(self, data):
        self.text.append(data)


def test_html_escapes_specials_and_has_our_class():
    df = subgroup_table(rules=["x <= 1 & name = <script>alert(1)</script>", "q in {a&b \"q\", 'it'}", "y > 2"])
    out = ex.to_html(df, caption="Caption <i>&\"'</i>")
    assert out.startswith('<table class="sw-table">')
    assert "<caption>Caption &lt;i&gt;&amp;&quot;&#x27;&lt;/i&gt;</caption>" in out
    assert "name = &lt;script&gt;alert(1)&lt;/script&gt;" in out
    assert "q \u2208 {a&amp;b &quot;q&quot;, &#x27;it&#x27;}" in out
    p = _Collect()
    p.feed(out)
    assert set(p.tags) == {"table", "caption", "thead", "tr", "th", "tbody", "td", "tfoot", "p"}
    assert "x \u2264 1 and name = <script>alert(1)</script>" in p.text  # round trip: the parser reads the text back


# ----------------------------------------------------------------------------- CSV
def test_csv_full_precision_round_trip():
    rng = np.random.default_rng(3)
    df = subgroup_table(weak=[True, False, True])
    for col in ("share", "mean", "sd", "lower", "upper", "prob_positive", "uptake_share", "uptake_lower"):
        df[col] = rng.normal(size=3) * 10.0 ** rng.integers(-12, 12, 3)
    df.loc[0, "rule"] = 'has "quotes", commas & \n a newline'
    text = ex.to_csv(df)
    back = pd.read_csv(io.StringIO(text))  # pandas 3 reads floats exactly by default
    pd.testing.assert_frame_equal(back, df, check_exact=True, check_dtype=False)
    assert list(pd.read_csv(io.StringIO(text)).columns) == list(df.columns)


# ----------------------------------------------------------------------------- atomic writes
def test_write_atomic_refuses_and_overwrites(tmp_path):
    target = tmp_path / "table.tex"
    ex.write_atomic(target, "first")
    with pytest.raises(FileExistsError, match=r"table\.tex.*already exists.*overwrite=True.*--overwrite"):
        ex.write_atomic(target, "second")
    assert target.read_text() == "first"
    ex.write_atomic(target, b"second", overwrite=True)
    assert target.read_bytes() == b"second"
    assert os.listdir(tmp_path) == ["table.tex"]  # no temporary files left behind


def test_write_atomic_mode_matches_plain_open(tmp_path):
    ex.write_atomic(tmp_path / "a.txt", "x")
    with open(tmp_path / "b.txt", "w") as fh:  # what the user's umask gives a normal file
        fh.write("x")
    assert (tmp_path / "a.txt").stat().st_mode == (tmp_path / "b.txt").stat().st_mode


def test_write_atomic_failure_leaves_old_file_and_no_temp(tmp_path, monkeypatch):
    target = tmp_path / "t.csv"
    target.write_text("old")

    def boom(src, dst):
        raise OSError("disk full")

    monkeypatch.setattr(os, "replace", boom)
    with pytest.raises(OSError, match="disk full"):
        ex.write_atomic(target, "new", overwrite=True)
    assert target.read_text() == "old" and os.listdir(tmp_path) == ["t.csv"]


def test_write_atomic_errors(tmp_path):
    with pytest.raises(SummaryError, match=r"folder .*missing.* does not exist"):
        ex.write_atomic(tmp_path / "missing" / "x.txt", "x")
    with pytest.raises(SummaryError, match=r"`data` must be str or bytes; got int"):
        ex.write_atomic(tmp_path / "x.txt", 3)


# ----------------------------------------------------------------------------- provenance
def test_hash_array_matches_hashlib_in_blocks(tmp_path):
    rng = np.random.default_rng(0)
    a = rng.normal(size=(37, 11)).astype(np.float32)
    expected = hashlib.sha256(a.tobytes()).hexdigest()
    assert ex.hash_array(a, block_bytes=100) == expected  # many blocks
    assert ex.hash_array(np.asfortranarray(a), block_bytes=100) == expected  # C-order bytes whatever the layout
    mm = np.lib.format.open_memmap(tmp_path / "d.npy", mode="w+", dtype=a.dtype, shape=a.shape)
    mm[:] = a
    assert ex.hash_array(mm, block_bytes=64) == expected
    assert ex.hash_array(a[:, :5]) == hashlib.sha256(np.ascontiguousarray(a[:, :5]).tobytes()).hexdigest()
    with pytest.raises(SummaryError, match="dtype object"):
        ex.hash_array(np.array([{}, 1], dtype=object))


def test_provenance_record(tmp_path):
    f = tmp_path / "draws.npy"
    arr = np.arange(12.0).reshape(3, 4)
    np.save(f, arr)
    cov = pd.DataFrame({"x": [1, 2, 3, 4]})
    before = datetime.now(timezone.utc).replace(microsecond=0)
    prov = ex.provenance(inputs={"draws": f, "weights": arr, "covariates": cov},
                         settings={"level": 0.9, "interval": "equal-tailed", "columns": ["x"]})
    assert prov["package"] == {"name": "summarize_widgets", "version": summarize_widgets.__version__}
    assert prov["package"]["version"] == dist_version("summarize_widgets")
    created = datetime.fromisoformat(prov["created_utc"])
    assert created.utcoffset() == timedelta(0) and before <= created <= datetime.now(timezone.utc)
    by_role = {d["role"]: d for d in prov["inputs"]}
    assert by_role["draws"]["sha256"] == hashlib.sha256(f.read_bytes()).hexdigest()
    assert by_role["draws"]["name"] == "draws.npy" and by_role["draws"]["bytes"] == f.stat().st_size
    assert by_role["weights"] == {"role": "weights", "name": "weights (in-memory array)", "shape": [3, 4],
                                  "dtype": "float64", "sha256": hashlib.sha256(arr.tobytes()).hexdigest()}
    changed = ex.provenance(inputs={"covariates": cov.assign(x=[1, 2, 3, 5])})
    assert changed["inputs"][0]["sha256_of_row_hashes"] != by_role["covariates"]["sha256_of_row_hashes"]
    assert prov["settings"] == {"level": 0.9, "interval": "equal-tailed", "columns": ["x"]}
    json.dumps(prov)  # JSON-ready


def test_provenance_from_results(real):
    draws, tree, groups = real
    prov = ex.provenance({"tree": tree, "groups": groups})
    values = draws._values  # the matrix the user passed (same object, not a copy)
    assert prov["draws"]["sha256"] == hashlib.sha256(np.ascontiguousarray(values).tobytes()).hexdigest()
    assert prov["draws"]["n_draws"] == 120 and prov["draws"]["n_units"] == 240
    assert prov["summaries"]["tree"]["depth"] == 2 and prov["summaries"]["tree"]["min_size"] == tree.min_size
    assert prov["summaries"]["tree"]["columns"] == tree.columns
    assert prov["summaries"]["groups"]["summary"] == "groups"
    assert "other_draws" not in prov  # shared draws hashed once


def test_provenance_errors(tmp_path):
    with pytest.raises(SummaryError, match=r"`inputs\['draws'\]` is .*nope\.npy.*not an existing file"):
        ex.provenance(inputs={"draws": tmp_path / "nope.npy"})
    with pytest.raises(SummaryError, match=r"`inputs\['x'\]` must be a file path, a NumPy array or a DataFrame; got int"):
        ex.provenance(inputs={"x": 3})
    with pytest.raises(SummaryError, match=r"items must be EffectDraws or summary results with `.settings`; got int"):
        ex.provenance([3])
    with pytest.raises(SummaryError, match=r"`settings` must be a dict; got list"):
        ex.provenance(settings=[1])
    with pytest.raises(SummaryError, match=r"`provenance` must be a dict made by"):
        ex.to_latex(subgroup_table(), provenance={"x": 1})


def test_provenance_in_every_table_format(tmp_path):
    f = tmp_path / "draws.npy"
    np.save(f, np.zeros((2, 2)))
    prov = ex.provenance(inputs={"draws": f}, settings={"depth": 2})
    digest = hashlib.sha256(f.read_bytes()).hexdigest()
    tex = ex.to_latex(subgroup_table(), provenance=prov)
    comments = [line for line in tex.splitlines() if line.startswith("%")]
    assert comments[0].startswith(f"% Made with summarize_widgets {summarize_widgets.__version__}")
    assert f"% input draws: draws.npy sha256={digest}" in comments and "% settings: depth=2" in comments
    # Provenance is in comments only: the printed notes never carry a "Made with ... sha256" line.
    printed = [line for line in tex.splitlines() if not line.startswith("%")]
    assert not any("Made with" in line or "sha256" in line for line in printed)
    md = ex.to_markdown(subgroup_table(), provenance=prov)
    assert f"<!-- input draws: draws.npy sha256={digest} -->" in md
    assert not any("sha256" in line for line in md.splitlines() if not line.startswith("<!--"))
    page = ex.to_html(subgroup_table(), provenance=prov)
    assert f"<!-- input draws: draws.npy sha256={digest} -->" in page
    p = _Collect()
    p.feed(page)
    assert not any("sha256" in t or "Made with" in t for t in p.text)


# ----------------------------------------------------------------------------- curve points
def test_curve_points_selection():
    c = curves_table()
    default = ex.curve_points(c, n_points=3)
    assert default.loc[default.covariate == "baseline_bill", "x"].tolist() == [50.0, 175.0, 300.0]
    assert default.loc[default.covariate == "fuel", "x"].tolist() == ["gas", "oil", 'a&b "q"']
    picked = ex.curve_points(c, {"baseline_bill": [99, 101, 290]})
    assert picked["x"].tolist() == [100.0, 300.0]  # nearest grid values, each once
    assert picked.attrs["level"] == 0.95
    with pytest.raises(SummaryError, match=r"`points` names covariates not in the curves: \['age'\]"):
        ex.curve_points(c, {"age": [1]})
    with pytest.raises(SummaryError, match=r"`points\['fuel'\]` names categories not on the curve: \['coal'\]"):
        ex.curve_points(c, {"fuel": ["coal"]})
    with pytest.raises(SummaryError, match=r"`points` must be a dict"):
        ex.curve_points(c, [1])


# ----------------------------------------------------------------------------- real results, batch export
def test_real_tables_escape_names_from_the_data(real):
    _, tree, groups = real
    table = tree.table()
    assert any("<script>" in r for r in table["rule"])  # the fixture's tree does split on the nasty name
    tex = plain(ex.to_latex(table))
    assert r"\textless{}script\textgreater{}alert(1)\textless{}/script\textgreater{}" in tex
    assert "<script>" not in tex
    html_out = ex.to_html(groups.contrasts())
    assert "big &amp; &lt;b&gt;bills&lt;/b&gt;" in html_out and "big and" not in html_out  # labels are not rules
    p = _Collect()
    p.feed(ex.to_html(table) + html_out)
    assert "script" not in p.tags and "b" not in p.tags


def test_export_tables_writes_refuses_and_overwrites(tmp_path, real):
    _, tree, groups = real
    out = tmp_path / "tables"
    files = ex.export_tables(out, tree=tree, groups=groups, formats=("tex", "csv"), level=0.8)
    names = sorted(p.name for p in out.iterdir())
    assert names == sorted(files) == sorted(
        [f"{t}.{e}" for t in ("subgroups_depth2", "contrasts_depth2", "fit_r2_by_depth", "groups", "groups_contrasts")
         for e in ("tex", "csv")] + ["provenance.json"])
    back = pd.read_csv(out / "subgroups_depth2.csv")
    pd.testing.assert_frame_equal(back, tree.table(level=0.8).reset_index(drop=True), check_exact=True, check_dtype=False)
    prov = json.loads((out / "provenance.json").read_text())
    assert prov["settings"]["level"] == 0.8 and prov["summaries"]["tree"]["depth"] == 2
    assert "80\\% equal-tailed" in (out / "subgroups_depth2.tex").read_text()
    stamp = {p.name: p.stat().st_mtime_ns for p in out.iterdir()}
    with pytest.raises(FileExistsError, match=r"subgroups_depth2\.tex.*already exist.*overwrite=True"):
        ex.export_tables(out, tree=tree, formats=("tex", "md"))
    assert not (out / "subgroups_depth2.md").exists()  # a refused export writes nothing
    assert {p.name: p.stat().st_mtime_ns for p in out.iterdir()} == stamp
    ex.export_tables(out, tree=tree, formats="md", overwrite=True)
    assert (out / "subgroups_depth2.md").exists()
    assert not [p for p in out.iterdir() if p.name.startswith(".")]


def test_export_tables_errors(tmp_path, real):
    _, tree, _ = real
    with pytest.raises(SummaryError, match=r"`formats` must be a non-empty subset of \['tex', 'md', 'csv', 'html'\]; got \['pdf'\]"):
        ex.export_tables(tmp_path, tree=tree, formats=("pdf",))
    with pytest.raises(SummaryError, match="needs at least one of `tree`"):
        ex.export_tables(tmp_path)


def test_real_linear_and_additive_tables(smooth):
    linear, additive = smooth
    lt = linear.table(level=0.9)
    tex = plain(ex.to_latex(lt, digits=3))
    for row in lt.itertuples():  # every coefficient with its interval, formatted independently
        name = ex.escape_latex(row.term)
        assert f"{name} & {row.mean:.3f}".replace("-", "$-$") in tex
    assert "Reference categories: " in tex and "90\\% equal-tailed" in tex
    curves = additive.curves()
    picked = ex.curve_points(curves, {"baseline_bill": [150.0], "<script>alert(1)</script>": ['a&b "q"']})
    grid = curves[curves.covariate == "baseline_bill"]["x"].to_numpy()
    assert picked["x"].iloc[0] == grid[np.argmin(np.abs(grid - 150.0))]
    html_out = ex.to_html(picked)
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in html_out and "a&amp;b &quot;q&quot;" in html_out
    assert "<script>" not in html_out


def test_complier_weighted_weak_uptake_from_real_groups():
    # Renters rarely take the retrofit (complier share about 0.03): their Wald ratio is flagged.
    rng = np.random.default_rng(5)
    n, S = 300, 80
    cov = pd.DataFrame({"baseline_bill": rng.uniform(40, 300, n), "tenure": rng.choice(["owner", "renter"], n)})
    share = np.where(cov["tenure"] == "owner", 0.6, 0.03)
    uptake = np.clip(share + rng.normal(0, 0.02, (S, n)), 0, None)
    itt = uptake * (-0.1 * cov["baseline_bill"].to_numpy()) + rng.normal(0, 0.2, (S, n))
    draws = EffectDraws.from_itt(itt, uptake, cov)
    table = summarize_groups(draws, {"owners": "tenure == 'owner'", "renters": "tenure == 'renter'"}).table()
    assert table["weak_uptake"].tolist() == [False, False, True]
    tex = ex.to_latex(table)
    rows = tex.split(r"\midrule")[1].split(r"\bottomrule")[0].strip().splitlines()
    rows = [r for r in rows if not r.startswith(r"\multicolumn")]  # rule lines under the numbers
    assert [r"\dagger" in r for r in rows] == [False, False, True]
    assert "Weak uptake" in tex and "below 0.05" in tex
    assert "ratio of sums" in tex and "Share of compliers" in tex
    md = ex.to_markdown(table)
    assert md.count("\u2020") == 3  # the marked mean, the marked uptake share and the note


def test_export_tables_all_four_summaries(tmp_path, real, smooth):
    _, tree, groups = real
    linear, additive = smooth
    prov = ex.provenance([tree, groups, linear, additive], settings={"level": 0.95})
    files = ex.export_tables(tmp_path, tree=tree, groups=groups, linear=linear, additive=additive,
                             formats=("md",), contrasts=False, provenance=prov)
    assert sorted(files) == ["fit_r2_by_depth.md", "groups.md", "linear.md", "provenance.json", "subgroups_depth2.md",
                             "trends.md"]
    saved = json.loads((tmp_path / "provenance.json").read_text())
    assert saved["created_utc"] == prov["created_utc"] and set(saved["summaries"]) == {"tree", "groups", "linear", "additive"}
    assert all(prov["created_utc"] in (tmp_path / f).read_text() for f in files if f.endswith(".md"))

