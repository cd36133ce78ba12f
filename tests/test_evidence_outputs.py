"""Evidence in every output: the orchestrator, table exports, the report section and the command line."""
import json
import re

import numpy as np
import pandas as pd
import pytest

import summarize_widgets as sw
from summarize_widgets.cli import main
from summarize_widgets.export import export_tables, to_latex, to_markdown
from summarize_widgets.export.report import render_report
from summarize_widgets.summaries.evidence_set import gather_evidence

from conftest import household_covariates


@pytest.fixture(scope="module")
def bundle():
    rng = np.random.default_rng(30)
    n, S = 300, 80
    X = household_covariates(n, rng)
    X["fuel"] = X["fuel"].replace({"oil": "oil & <wood>"})  # text that must be escaped everywhere
    T = 1.0 + 1.0 * (X["age"].to_numpy() > 50) + rng.normal(0, 0.3, (S, n))
    d = sw.EffectDraws(T, X)
    return sw.summarize_all(d, depth=2, groups={"older": "age > 50", "younger": "age <= 50", "gas": "fuel == 'gas'"},
                            additive=False, evidence=True, stability_fits=10)


def test_summarize_all_gathers_evidence_only_when_asked(bundle):
    ev = bundle.evidence
    assert ev.heterogeneity.verdict == "supported"
    assert ev.group_heterogeneity is not None and ev.stability is not None
    assert ev.tree_path is not None and ev.linear_path is not None
    assert [h for h, _ in ev.messages] == ["Heterogeneity (tree subgroups)", "Heterogeneity (pre-specified groups)",
                                           "Structure stability", "Tree size", "Linear summary size", "Monte Carlo precision"]
    plain = sw.summarize_all(bundle.draws, depth=2, additive=False)
    assert plain.evidence is None
    quick = gather_evidence(bundle.draws, bundle.tree)
    assert quick.stability is None and quick.linear_path is None
    assert list(quick.tables()) == ["heterogeneity", "size_path_tree", "precision"]
    with pytest.raises(sw.SummaryError, match="`stability_fits`"):
        gather_evidence(bundle.draws, bundle.tree, stability_fits=1)


def test_every_evidence_table_renders_in_every_format(bundle, tmp_path):
    tables = bundle.evidence.tables()
    assert set(tables) == {"heterogeneity", "heterogeneity_groups", "stability", "stability_agreement",
                           "size_path_tree", "size_path_linear", "precision"}
    for name, (df, caption) in tables.items():
        tex = to_latex(df, caption=caption)
        assert "<wood>" not in tex and "\\toprule" in tex
        md = to_markdown(df, caption=caption)
        assert md.count("\n|") >= len(df) + 1, name
    written = export_tables(tmp_path, tree=bundle.tree, linear=bundle.linear, evidence=bundle.evidence)
    for name in tables:
        for ext in ("tex", "md", "csv", "html"):
            assert f"{name}.{ext}" in written
    back = pd.read_csv(written["heterogeneity.csv"])
    np.testing.assert_allclose(back["mean"], tables["heterogeneity"][0]["mean"])
    html = written["size_path_linear.html"].read_text()
    assert "Smallest within tolerance" in html and "<wood>" not in html


def test_report_has_an_evidence_section_with_the_verdicts(bundle):
    page = render_report(tree=bundle.tree, groups=bundle.groups, linear=bundle.linear, figures=None,
                         evidence=bundle.evidence)
    assert 'id="sw-evidence"' in page and 'href="#sw-evidence"' in page
    section = page[page.index('id="sw-evidence"'):]
    section = section[: section.index("</section>")]
    assert "Heterogeneity supported" in section and "First split" in section
    assert section.count('class="sw-verdict"') == 6  # five evidence verdicts and the Monte Carlo precision one
    assert "<wood>" not in page and "oil &amp; &lt;wood&gt;" in page
    assert 'id="sw-evidence"' not in render_report(tree=bundle.tree, figures=None)


def test_folder_writes_evidence_tables_and_provenance(bundle, tmp_path):
    files = sw.write_summary_folder(bundle, tmp_path / "out", figures=False)
    names = {p.name for p in files}
    assert {"heterogeneity.tex", "stability.md", "size_path_tree.csv"} <= names
    prov = json.loads((tmp_path / "out" / "provenance.json").read_text())
    ev = [v for v in prov["summaries"].values() if v.get("summary") == "evidence"]
    assert ev and ev[0]["stability_fits"] == 10


def test_cli_evidence_option(tmp_path, capsys):
    rng = np.random.default_rng(31)
    n = 200
    X = pd.DataFrame({"age": rng.uniform(20, 80, n).round(), "tenure": rng.choice(["owner", "renter"], n)})
    np.save(tmp_path / "draws.npy", (X["age"].to_numpy() > 50) * 2.0 + 1.0 + rng.normal(0, 0.5, (60, n)))
    X.to_csv(tmp_path / "cov.csv", index=False)
    code = main(["summarize", str(tmp_path / "draws.npy"), "--covariates", str(tmp_path / "cov.csv"), "--depth", "1",
                 "--evidence", "--stability-fits", "8"])
    out = capsys.readouterr().out
    assert code == 0
    assert re.search(r"Heterogeneity \(tree subgroups\): Heterogeneity supported", out)
    assert "Structure stability: First split supported: 100% of 8 trees" in out
    code = main(["report", str(tmp_path / "draws.npy"), "--covariates", str(tmp_path / "cov.csv"), "--depth", "1",
                 "--out", str(tmp_path / "rep"), "--no-figures", "--evidence", "--stability-fits", "0",
                 "--threshold", "5"])
    out = capsys.readouterr().out
    assert code == 0 and "Little evidence of heterogeneity" in out and "Structure stability" not in out
    assert (tmp_path / "rep" / "heterogeneity.tex").exists() and not (tmp_path / "rep" / "stability.tex").exists()
    code = main(["summarize", str(tmp_path / "draws.npy"), "--covariates", str(tmp_path / "cov.csv"),
                 "--evidence", "--stability-fits", "1"])
    err = capsys.readouterr().err
    assert code == 2 and "`stability_fits`" in err and err.count("\n") == 1
