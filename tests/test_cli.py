"""The command line: every command's help, the demo end to end, a user's own files, one-line errors."""
import json
import re
import shutil
import subprocess
import sys

import numpy as np
import pandas as pd
import pytest

from builders import household_study, write_sampler_netcdf, write_sampler_zarr

import summarize_widgets as sw
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
    assert "age \u2264 50" in out and "age > 50" in out and "interval" in out


def test_terminal_table_reads_as_the_markdown_table(own_files, capsys):
    # One formatter: every number, label and rule the terminal prints is the Markdown table's cell text
    # (export.to_markdown), so no "[-34.6, -24]" (ragged digits, hyphen minus) and no probability "0".
    from summarize_widgets.cli import _text_table
    from summarize_widgets.export import to_markdown
    draws = np.load(own_files / "draws.npy")
    cov = pd.read_csv(own_files / "cov.csv")
    tree = sw.summarize_tree(sw.EffectDraws(draws, cov.drop(columns=["unit"], errors="ignore")), max_depth=2, min_size=30)
    tab = tree.table()
    text = _text_table(tab)
    md_rows = [[c.strip().strip("`") for c in line.strip().strip("|").split("|")]
               for line in to_markdown(tab).splitlines() if re.match(r"\| S\d", line)]
    assert len(md_rows) == len(tab)
    for cells in md_rows:
        line = next(x for x in text.splitlines() if x.startswith(cells[0] + " "))
        for cell in cells:
            assert cell.replace("\\", "") in line, (cell, line)
    rows = text.splitlines()[2:2 + len(tab)]
    assert not re.search(r"[\[ ]-\d", "\n".join(rows))  # true minus signs only
    assert all(r.split()[-1] not in ("0", "1") for r in rows)  # P(>0) reads <0.001 / >0.999 at the ends


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
    assert code == 0 and "LATE" in out and "Share of compliers" in out and "Uptake (95% interval)" in out
    assert "ratio of sums" in out  # the complier note reaches the terminal too


def test_errors_are_one_line_without_traceback(own_files, tmp_path):
    r = run("summarize", str(own_files / "missing.npy"), "--covariates", str(own_files / "cov.csv"))
    assert r.returncode == 2
    assert "Traceback" not in r.stderr and len(r.stderr.strip().splitlines()) == 1
    assert "missing.npy" in r.stderr
    r = run("summarize", str(own_files / "draws.npy"), "--covariates", str(own_files / "cov.csv"), "--min-size", "100000")
    assert r.returncode == 2 and "--min-size must be between 1 and 300" in r.stderr and "Traceback" not in r.stderr
    r = run("summarize", str(own_files / "draws.npy"), "--covariates", str(own_files / "cov.csv"), "--columns", "age,height")
    assert r.returncode == 2 and "'height'" in r.stderr
    r = run("report", str(own_files / "draws.npy"), "--covariates", str(own_files / "cov.csv"),
            "--out", str(tmp_path / "r"), "--group", "no equals sign")
    assert r.returncode == 2 and "LABEL=QUERY" in r.stderr


def test_demo_writes_everything_and_refuses_to_overwrite(tmp_path):
    out = tmp_path / "demo"
    r = run("demo", "--out", str(out), "--households", "500", "--n-draws", "200")
    assert r.returncode == 0, r.stderr
    assert "Rule" in r.stdout and "interval" in r.stdout and "Summary R^2 at depth 3" in r.stdout
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


# -- sampler files, per-input variables, errors before work, one line always -----------------------
@pytest.fixture(scope="module")
def sampler_files(tmp_path_factory):
    d = tmp_path_factory.mktemp("sampler")
    cov, tau, itt, up = household_study(n_units=80, n_draws=30)
    write_sampler_netcdf(d / "fit.nc", {"tau": tau, "itt_y": itt, "itt_d": up}, cov.index)
    write_sampler_zarr(d / "fit.zarr", {"tau": tau}, cov.index)
    cov.reset_index().to_csv(d / "cov.csv", index=False)  # ids in a 'household' column
    return d


def test_netcdf_posterior_group_and_zarr_store_on_the_command_line(sampler_files, capsys):
    args = ["--covariates", str(sampler_files / "cov.csv"), "--unit-column", "household", "--depth", "1",
            "--min-size", "10", "--format", "csv"]
    assert main(["summarize", str(sampler_files / "fit.nc"), "--variable", "tau", *args]) == 0
    from_nc = capsys.readouterr().out
    assert main(["summarize", str(sampler_files / "fit.nc"), "--variable", "tau", "--nc-group", "posterior", *args]) == 0
    assert capsys.readouterr().out == from_nc
    assert main(["summarize", str(sampler_files / "fit.zarr"), *args]) == 0
    assert capsys.readouterr().out == from_nc
    assert "age <= 5" in from_nc or "age > 5" in from_nc


def test_outcome_and_uptake_variables_of_one_file(sampler_files, capsys):
    base = ["summarize", str(sampler_files / "fit.nc"), "--covariates", str(sampler_files / "cov.csv"),
            "--unit-column", "household", "--depth", "1", "--min-size", "10"]
    assert main([*base, "--outcome-var", "itt_y", "--uptake", str(sampler_files / "fit.nc"), "--uptake-var", "itt_d"]) == 0
    out = capsys.readouterr().out
    assert "LATE" in out and "Share of compliers" in out


def test_the_same_variable_for_outcome_and_uptake_is_refused(sampler_files, capsys):
    base = ["summarize", str(sampler_files / "fit.nc"), "--covariates", str(sampler_files / "cov.csv"),
            "--unit-column", "household"]
    # the old bug: one --variable applied to both files divided a matrix by itself (an effect of exactly 1)
    assert main([*base, "--variable", "itt_d", "--uptake", str(sampler_files / "fit.nc")]) == 2
    assert "--uptake-var" in capsys.readouterr().err
    assert main([*base, "--variable", "itt_d", "--uptake", str(sampler_files / "fit.nc"), "--uptake-var", "itt_d"]) == 2
    assert "--uptake-var" in capsys.readouterr().err


def test_output_folder_below_a_file_is_refused_before_any_computation(own_files, tmp_path, capsys):
    (tmp_path / "afile").write_text("x")
    code = main(["report", str(own_files / "draws.npy"), "--covariates", str(own_files / "cov.csv"),
                 "--out", str(tmp_path / "afile" / "out")])
    captured = capsys.readouterr()
    assert code == 2 and "which is a file, not a folder" in captured.err
    assert captured.out == ""  # nothing was computed or printed first


def test_bad_group_query_is_refused_before_any_computation(own_files, tmp_path, capsys):
    code = main(["report", str(own_files / "draws.npy"), "--covariates", str(own_files / "cov.csv"),
                 "--out", str(tmp_path / "r"), "--group", "x=__import__('os').getcwd() == 1"])
    captured = capsys.readouterr()
    assert code == 2 and "the call" in captured.err and captured.out == ""
    assert not (tmp_path / "r").exists()


def test_hints_use_command_line_spellings(own_files, tmp_path, capsys):
    (tmp_path / "draws.dat").write_bytes(b"123")
    assert main(["summarize", str(tmp_path / "draws.dat"), "--covariates", str(own_files / "cov.csv")]) == 2
    err = capsys.readouterr().err
    assert "--draws-format" in err and "format=" not in err


BAD_INPUTS = [
    ["summarize", "{own}/missing.npy", "--covariates", "{own}/cov.csv"],
    ["summarize", "{own}/draws.npy", "--covariates", "{own}/missing.csv"],
    ["summarize", "{own}/draws.npy", "--covariates", "{own}/cov.csv", "--variable", "tau"],
    ["summarize", "{own}/draws.npy", "--covariates", "{own}/cov.csv", "--nc-group", "posterior"],
    ["summarize", "{own}/draws.npy", "--covariates", "{own}/cov.csv", "--chains", "7"],
    ["summarize", "{own}/draws.npy", "--covariates", "{own}/cov.csv", "--depth", "0"],
    ["summarize", "{own}/draws.npy", "--covariates", "{own}/cov.csv", "--level", "2"],
    ["summarize", "{own}/draws.npy", "--covariates", "{own}/cov.csv", "--uptake", "{own}/draws.npy"],
    ["summarize", "{own}/draws.npy", "--covariates", "{own}/cov.csv", "--uptake-var", "x"],
    ["summarize", "{own}/draws.npy", "--covariates", "{own}/cov.csv", "--depth", "notanumber"],
    ["summarize", "{own}"],
    ["report", "{own}/draws.npy", "--covariates", "{own}/cov.csv", "--out", "{own}/draws.npy"],
    ["report", "{own}/draws.npy", "--covariates", "{own}/cov.csv", "--out", "{tmp}/r", "--group", "a=age +"],
    ["report", "{own}/draws.npy", "--covariates", "{own}/cov.csv", "--out", "{tmp}/r", "--group", "a=height > 3"],
    ["report", "{own}/uptake_itt.npy", "--covariates", "{own}/cov.csv", "--out", "{tmp}/r", "--columns", "nope"],
    ["demo", "--households", "-5", "--out", "{tmp}/d"],
    ["demo", "--out", "{own}/draws.npy/x"],
    ["frobnicate"],
]


@pytest.mark.parametrize("argv", BAD_INPUTS, ids=lambda a: " ".join(a)[:60])
def test_every_subcommand_with_bad_input_fails_in_one_line_without_traceback(argv, own_files, tmp_path, capsys):
    argv = [a.format(own=own_files, tmp=tmp_path) for a in argv]
    with pytest.raises(SystemExit) if argv[0] == "frobnicate" or "notanumber" in argv or len(argv) == 2 else _nothing():
        code = main(argv)
        assert code == 2
    err = capsys.readouterr().err
    assert "Traceback" not in err
    assert len(err.strip().splitlines()) == 1, err


class _nothing:
    def __enter__(self):
        return self

    def __exit__(self, *exc):
        return False


@pytest.mark.parametrize("command", [
    ["summarize", "{own}/draws.npy", "--covariates", "{own}/cov.csv", "--variable", "tau"],
    ["report", "{own}/draws.npy", "--covariates", "{own}/cov.csv", "--out", "{own}/draws.npy/x"],
    ["demo", "--households", "1", "--out", "{tmp}/d"],
], ids=["summarize", "report", "demo"])
def test_each_subcommand_run_as_a_program_prints_no_traceback(command, own_files, tmp_path):
    r = run(*[a.format(own=own_files, tmp=tmp_path) for a in command])
    assert r.returncode == 2 and "Traceback" not in r.stderr and len(r.stderr.strip().splitlines()) == 1, r.stderr


def test_many_level_text_column_is_refused_by_name_and_pooled_with_the_option(tmp_path, capsys):
    rng = np.random.default_rng(12)
    n = 600
    X = pd.DataFrame({"age": rng.uniform(20, 80, n).round(), "street": [f"st{i}" for i in rng.integers(0, 300, n)]})
    X.to_csv(tmp_path / "cov.csv", index=False)
    np.save(tmp_path / "d.npy", (X["age"].to_numpy() > 50) * 2.0 + rng.normal(0, 1, (40, n)))
    args = ["summarize", str(tmp_path / "d.npy"), "--covariates", str(tmp_path / "cov.csv"), "--table", "linear"]
    assert main(args) == 2
    err = capsys.readouterr().err
    assert len(err.strip().splitlines()) == 1 and "'street'" in err and "--pool-levels K" in err
    assert "max_levels" not in err and "pool_levels" not in err  # the options a command-line user types
    assert main([*args, "--pool-levels", "5"]) == 0
    out = capsys.readouterr().out
    assert "street = (other)" in out
