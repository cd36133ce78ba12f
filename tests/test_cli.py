"""The command line: every command's help, the demo end to end, a user's own files, one-line errors."""
import json
import shutil
import subprocess
import sys

import numpy as np
import pandas as pd
import pytest

from summarize_widgets.cli import main


def run(*args):
    """Run the installed entry point in a subprocess (what a user types)."""
    exe = shutil.which("summarize-widgets") or None
    cmd = [exe, *args] if exe else [sys.executable, "-m", "summarize_widgets.cli", *args]
    return subprocess.run(cmd, capture_output=True, text=True, timeout=600)


@pytest.fixture(scope="module")
def own_files(tmp_path_factory):
    d = tmp_path_factory.mktemp("own")
    rng = np.random.default_rng(3)
    n = 300
    X = pd.DataFrame({"age": rng.uniform(20, 80, n).round(), "tenure": rng.choice(["owner", "renter"], n)})
    T = (X["age"].to_numpy() > 50) * 2.0 + rng.normal(0, 0.5, (200, n))
    np.save(d / "draws.npy", T)
    pi = rng.uniform(0.2, 0.8, (200, n))
    np.save(d / "outcome_itt.npy", T * pi)
    np.save(d / "uptake_itt.npy", pi)
    X.to_csv(d / "cov.csv", index=False)
    return d


@pytest.mark.parametrize("command", [[], ["demo"], ["summarize"], ["report"]])
def test_help_everywhere(command, capsys):
    with pytest.raises(SystemExit) as exc:
        main([*command, "--help"])
    assert exc.value.code == 0
    assert "usage: summarize-widgets" in capsys.readouterr().out


def test_summarize_prints_the_subgroup_table(own_files, capsys):
    code = main(["summarize", str(own_files / "draws.npy"), "--covariates", str(own_files / "cov.csv"),
                 "--depth", "1", "--min-size", "30"])
    out = capsys.readouterr().out
    assert code == 0
    assert "age <= 50" in out and "age > 50" in out and "interval" in out


@pytest.mark.parametrize("table", ["subgroups", "contrasts", "fit", "linear", "trends"])
def test_summarize_json_tables_parse(own_files, capsys, table):
    code = main(["summarize", str(own_files / "draws.npy"), "--covariates", str(own_files / "cov.csv"),
                 "--depth", "2", "--table", table, "--format", "json"])
    assert code == 0
    doc = json.loads(capsys.readouterr().out)
    assert doc["rows"] and "mean" in doc["rows"][0] or "difference" in doc["rows"][0]


@pytest.mark.parametrize("fmt", ["csv", "markdown"])
def test_summarize_csv_and_markdown(own_files, capsys, fmt):
    assert main(["summarize", str(own_files / "draws.npy"), "--covariates", str(own_files / "cov.csv"),
                 "--table", "fit", "--format", fmt]) == 0
    out = capsys.readouterr().out
    assert ("depth" in out.splitlines()[0]) if fmt == "csv" else ("|" in out)


def test_complier_weighted_from_two_files(own_files, capsys):
    code = main(["summarize", str(own_files / "outcome_itt.npy"), "--uptake", str(own_files / "uptake_itt.npy"),
                 "--covariates", str(own_files / "cov.csv"), "--depth", "1"])
    out = capsys.readouterr().out
    assert code == 0 and "LATE" in out and "uptake_share" in out


def test_errors_are_one_line_without_traceback(own_files, tmp_path):
    r = run("summarize", str(own_files / "missing.npy"), "--covariates", str(own_files / "cov.csv"))
    assert r.returncode == 2
    assert "Traceback" not in r.stderr and len(r.stderr.strip().splitlines()) == 1
    assert "missing.npy" in r.stderr
    r = run("summarize", str(own_files / "draws.npy"), "--covariates", str(own_files / "cov.csv"), "--min-size", "100000")
    assert r.returncode == 2 and "`min_size` must be between 1 and 300" in r.stderr and "Traceback" not in r.stderr
    r = run("summarize", str(own_files / "draws.npy"), "--covariates", str(own_files / "cov.csv"), "--columns", "age,height")
    assert r.returncode == 2 and "'height'" in r.stderr
    r = run("report", str(own_files / "draws.npy"), "--covariates", str(own_files / "cov.csv"),
            "--out", str(tmp_path / "r"), "--group", "no equals sign")
    assert r.returncode == 2 and "LABEL=QUERY" in r.stderr


def test_demo_writes_everything_and_refuses_to_overwrite(tmp_path):
    out = tmp_path / "demo"
    r = run("demo", "--out", str(out), "--households", "500", "--n-draws", "200")
    assert r.returncode == 0, r.stderr
    assert "rule" in r.stdout and "interval" in r.stdout and "Summary R^2 at depth 3" in r.stdout
    for name in ["report.html", "provenance.json", "subgroups_depth3.tex", "subgroups_depth3.md",
                 "subgroups_depth3.csv", "subgroups_depth3.html", "linear.tex", "trends.csv"]:
        assert (out / name).stat().st_size > 100, name
    if shutil.which("chromium") or shutil.which("chromium-browser") or shutil.which("google-chrome"):
        for stem in ["subgroups", "fit_r2_by_depth", "trends", "coefficients", "contrasts"]:
            for ext in ["svg", "pdf", "png"]:
                assert (out / "figures" / f"{stem}.{ext}").stat().st_size > 2000
    before = (out / "report.html").read_bytes()
    r = run("demo", "--out", str(out), "--households", "500", "--n-draws", "200")
    assert r.returncode == 2
    assert "already exists and is not empty" in r.stderr and "--overwrite" in r.stderr
    assert (out / "report.html").read_bytes() == before
    prov = json.loads((out / "provenance.json").read_text())
    assert prov["package"]["name"] == "summarize_widgets" and prov["summaries"]


def test_report_for_own_draws_with_groups(own_files, tmp_path):
    out = tmp_path / "rep"
    code = main(["report", str(own_files / "draws.npy"), "--covariates", str(own_files / "cov.csv"), "--out", str(out),
                 "--group", "older=age >= 65", "--group", "owners=tenure == 'owner'", "--no-figures", "--depth", "2"])
    assert code == 0
    groups = pd.read_csv(out / "groups.csv")
    assert groups["subgroup"].tolist() == ["All units", "older", "owners"]
    prov = json.loads((out / "provenance.json").read_text())
    names = [i.get("name") for i in prov["inputs"]]
    assert "draws.npy" in names and "cov.csv" in names


def test_without_a_browser_the_folder_is_written_and_figures_are_skipped_with_a_note(own_files, tmp_path, monkeypatch, capsys):
    import summarize_widgets.figures.static as SE

    monkeypatch.delenv("BROWSER_PATH", raising=False)
    monkeypatch.setattr(SE.shutil, "which", lambda name: None)
    monkeypatch.setattr(SE, "_TYPICAL_PATHS", ())
    out = tmp_path / "nob"
    code = main(["report", str(own_files / "draws.npy"), "--covariates", str(own_files / "cov.csv"), "--out", str(out)])
    text = capsys.readouterr().out
    assert code == 0
    assert "Static figure files skipped" in text and "apt-get install chromium" in text
    assert (out / "report.html").exists() and not (out / "figures").exists()
