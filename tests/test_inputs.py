"""Inputs from samplers without glue, unit identity in every entry point, complier inputs that differ."""
import numpy as np
import pandas as pd
import pytest
import xarray as xr

from builders import SamplerResults, household_study, posterior_dataset, write_sampler_netcdf, write_sampler_zarr
from summarize_widgets import EffectDraws, SummaryError, load_draws, summarize_groups, summarize_tree


@pytest.fixture(scope="module")
def study():
    return household_study()


def _chain_major(cube):
    return cube.reshape(cube.shape[0] * cube.shape[1], cube.shape[2])


def _same_summary(a, b):
    """Tree tables (rules, sizes, every statistic) of two draw sets are identical."""
    ta = summarize_tree(a, max_depth=2, min_size=10).table()
    tb = summarize_tree(b, max_depth=2, min_size=10).table()
    pd.testing.assert_frame_equal(ta, tb)


# -- 1. inputs accepted directly, chains kept -----------------------------------------------------
def test_sampler_results_object_with_posterior_attribute_is_accepted_with_chains(study):
    cov, tau, _, _ = study
    post = posterior_dataset({"tau": tau, "mu": tau[..., :1].sum(-1, keepdims=True) * np.ones_like(tau)}, cov.index)
    d = EffectDraws(SamplerResults(post), cov, variable="tau")
    assert (d.n_chains, d.draws_per_chain, d.n_units) == (2, 40, 60)
    np.testing.assert_array_equal(d.values, _chain_major(tau))


def test_mapping_with_posterior_key_and_single_variable_needs_no_variable_name(study):
    cov, tau, _, _ = study
    d = EffectDraws({"posterior": posterior_dataset({"tau": tau}, cov.index)}, cov)
    assert d.n_chains == 2
    np.testing.assert_array_equal(d.values, _chain_major(tau))


def test_dataset_needs_a_variable_name_when_it_holds_several(study):
    cov, tau, itt, _ = study
    ds = posterior_dataset({"tau": tau, "itt": itt}, cov.index)
    with pytest.raises(SummaryError, match=r"holds 2 variables; name one with `variable=` \('tau', 'itt'\)"):
        EffectDraws(ds, cov)
    with pytest.raises(SummaryError, match=r"`variable` 'cate' is not in the Dataset; variables there: 'tau', 'itt'"):
        EffectDraws(ds, cov, variable="cate")
    d = EffectDraws(ds, cov, variable="itt")
    np.testing.assert_array_equal(d.values, _chain_major(itt))


def test_three_dimensional_array_is_read_as_chain_draw_unit(study):
    cov, tau, _, _ = study
    d = EffectDraws(tau, cov.reset_index(drop=True))
    assert (d.n_chains, d.n_draws) == (2, 80)
    np.testing.assert_array_equal(d.values, _chain_major(tau))
    with pytest.raises(SummaryError, match=r"`chains` = 4 but `values` records 2 chains"):
        EffectDraws(tau, cov.reset_index(drop=True), chains=4)


def test_chains_kept_after_transposing_a_stacked_sample_dim(study):
    cov, tau, _, _ = study
    da = posterior_dataset({"tau": tau}, cov.index)["tau"]
    stacked = da.stack(sample=("chain", "draw")).transpose("household", "sample")  # (units, draws)
    d = EffectDraws(stacked, cov)
    assert d.n_chains == 2
    np.testing.assert_array_equal(d.values, _chain_major(tau))


def test_netcdf_posterior_group_found_without_naming_it(tmp_path, study):
    cov, tau, itt, _ = study
    path = write_sampler_netcdf(tmp_path / "fit.nc", {"tau": tau, "itt": itt}, cov.index)
    d = load_draws(path, cov, variable="tau")
    assert (d.n_chains, d.n_units) == (2, 60)
    np.testing.assert_array_equal(d.values, _chain_major(tau))


def test_netcdf_errors_list_groups_and_variables(tmp_path, study):
    cov, tau, itt, _ = study
    path = write_sampler_netcdf(tmp_path / "fit.nc", {"tau": tau, "itt": itt}, cov.index)
    with pytest.raises(SummaryError, match=r"holds 2 variables; name one of 'tau', 'itt' .*posterior: 'tau', 'itt'; "
                                           r"sample_stats: 'lp'"):
        load_draws(path, cov)
    with pytest.raises(SummaryError, match=r"`variable` 'cate' is not in .*\(root\): \(no variables\); "
                                           r"posterior: 'tau', 'itt'; sample_stats: 'lp'"):
        load_draws(path, cov, variable="cate")
    with pytest.raises(SummaryError, match=r"`group` 'warmup' is not in .*posterior: 'tau', 'itt'"):
        load_draws(path, cov, variable="tau", group="warmup")


def test_zarr_store_is_read_with_its_posterior_group(tmp_path, study):
    cov, tau, _, _ = study
    path = write_sampler_zarr(tmp_path / "fit.zarr", {"tau": tau}, cov.index)
    d = load_draws(path, cov)
    assert d.n_chains == 2
    np.testing.assert_array_equal(d.values, _chain_major(tau))
    d2 = load_draws(path, cov, group="posterior", variable="tau")
    np.testing.assert_array_equal(d2.values, d.values)


def test_plain_directory_is_still_refused(tmp_path, study):
    cov = study[0]
    (tmp_path / "empty").mkdir()
    with pytest.raises(SummaryError, match=r"is a directory, not a file \(nor a zarr store\)"):
        load_draws(tmp_path / "empty", cov)


# -- 2. unit identity everywhere --------------------------------------------------------------------
def _shuffled(cov, seed=5):
    return cov.sample(frac=1.0, random_state=seed)


def test_dataarray_unit_coordinate_matched_to_a_shuffled_covariate_index(study):
    cov, tau, _, _ = study
    da = posterior_dataset({"tau": tau}, cov.index)["tau"]
    _same_summary(EffectDraws(da, cov), EffectDraws(da, _shuffled(cov)))


def test_dataframe_columns_matched_to_a_shuffled_covariate_index(study):
    cov, tau, _, _ = study
    wide = pd.DataFrame(_chain_major(tau), columns=cov.index)
    _same_summary(EffectDraws(wide, cov), EffectDraws(wide, _shuffled(cov)))


def test_weights_series_matched_by_index(study):
    cov, tau, _, _ = study
    da = posterior_dataset({"tau": tau}, cov.index)["tau"]
    w = pd.Series(np.linspace(0.5, 2.0, len(cov)), index=cov.index)
    a = EffectDraws(da, cov, weights=w)
    b = EffectDraws(da, _shuffled(cov), weights=w.sample(frac=1.0, random_state=9))
    _same_summary(a, b)
    with pytest.raises(SummaryError, match=r"`weights` is labelled by unit, but its labels do not match .*e\.g\. 'h1'"):
        EffectDraws(da, cov, weights=w.set_axis([f"x{i}" for i in range(len(w))]))


def test_mismatched_unit_labels_are_an_error_naming_examples(study):
    cov, tau, _, _ = study
    da = posterior_dataset({"tau": tau}, [f"g{i}" for i in range(len(cov))])["tau"]
    with pytest.raises(SummaryError, match=r"60 covariate units have no draws \(e\.g\. 'h1', 'h2', 'h3'.*"
                                           r"60 draw units are not in the covariates \(e\.g\. 'g0', 'g1', 'g2'"):
        EffectDraws(da, cov)


def test_id_column_holding_the_draw_labels_is_used_for_matching_and_not_as_a_covariate(study):
    cov, tau, _, _ = study
    da = posterior_dataset({"tau": tau}, cov.index)["tau"]
    with_col = _shuffled(cov).reset_index()  # 'household' is now a column, the index 0..n-1
    d = EffectDraws(da, with_col)
    assert "household" not in d.covariates.columns
    assert any("'household'" in note and "not used as a covariate" in note for note in d.notes)
    _same_summary(d, EffectDraws(da, cov))
    d2 = EffectDraws(da, with_col, unit_column="household")
    _same_summary(d2, d)


def test_text_id_column_is_never_a_covariate_even_without_labels(study):
    cov, tau, _, _ = study
    plain = cov.reset_index()  # plain matrix, 'household' column h1..h60 in draw order
    d = EffectDraws(_chain_major(tau), plain)
    assert list(d.covariates.columns) == ["age", "tenure"]
    assert "Not used as covariates: 'household'" in " ".join(d.notes)
    with pytest.raises(SummaryError, match=r"'household'"):
        summarize_tree(d, columns=["household"])


def test_from_itt_matches_labels_of_both_inputs_to_shuffled_covariates(study):
    cov, _, itt, up = study
    ds = posterior_dataset({"itt_y": itt, "itt_d": up}, cov.index)
    a = EffectDraws.from_itt(ds, ds, cov, outcome_variable="itt_y", uptake_variable="itt_d")
    # the uptake's units in another order: matched by label
    up_df = pd.DataFrame(_chain_major(up), columns=cov.index)[list(_shuffled(cov).index)]
    b = EffectDraws.from_itt(ds["itt_y"], up_df, _shuffled(cov))
    _same_summary(a, b)


def test_group_query_on_user_index_and_shuffled_rows(study):
    cov, tau, _, _ = study
    da = posterior_dataset({"tau": tau}, cov.index)["tau"]
    num = cov.set_axis(np.arange(100, 100 + len(cov)))
    da_num = da.assign_coords(household=num.index)
    g1 = summarize_groups(EffectDraws(da_num, num), {"first": "index < 150"}).table()
    g2 = summarize_groups(EffectDraws(da_num, _shuffled(num)), {"first": "index < 150"}).table()
    assert g1.loc[1, "n_units"] == 50
    pd.testing.assert_frame_equal(g1, g2)


def test_load_draws_matches_a_shuffled_covariate_index_and_id_column(tmp_path, study):
    cov, tau, _, _ = study
    path = write_sampler_netcdf(tmp_path / "fit.nc", {"tau": tau}, cov.index)
    ordered = load_draws(path, cov)
    _same_summary(ordered, load_draws(path, _shuffled(cov)))
    _same_summary(ordered, load_draws(path, _shuffled(cov).reset_index(), unit_column="household"))


def test_long_table_text_ids_sort_naturally_not_as_text(tmp_path):
    # units h1..h12 in the covariates' natural order; a text sort would put h10, h11, h12 after h1
    n, S = 12, 5
    rng = np.random.default_rng(1)
    T = rng.normal(size=(S, n)) + np.arange(n)
    long = pd.DataFrame({"draw": np.repeat(np.arange(S), n), "unit": [f"h{j + 1}" for j in range(n)] * S,
                         "value": T.ravel()}).sample(frac=1.0, random_state=2)
    long.to_csv(tmp_path / "long.csv", index=False)
    cov = pd.DataFrame({"x": np.arange(n, dtype=float)})
    d = load_draws(tmp_path / "long.csv", cov)
    np.testing.assert_array_equal(d.values, T)


# -- 3. complier inputs must differ -------------------------------------------------------------------
def test_identical_outcome_and_uptake_are_refused(study):
    cov, _, itt, up = study
    ds = posterior_dataset({"itt_y": itt, "itt_d": up}, cov.index)
    with pytest.raises(SummaryError, match=r"`outcome_itt` and `uptake_itt` hold the same numbers"):
        EffectDraws.from_itt(ds, ds, cov, outcome_variable="itt_d", uptake_variable="itt_d")
    with pytest.raises(SummaryError, match=r"hold the same numbers"):
        EffectDraws.from_itt(_chain_major(up), _chain_major(up).copy(), cov)


def test_outcome_and_uptake_with_different_unit_labels_are_refused(study):
    cov, _, itt, up = study
    a = pd.DataFrame(_chain_major(itt), columns=cov.index)
    b = pd.DataFrame(_chain_major(up), columns=[f"z{i}" for i in range(len(cov))])
    with pytest.raises(SummaryError, match=r"carry different unit labels"):
        EffectDraws.from_itt(a, b, cov)


def test_zero_uptake_everywhere_names_uptake_itt(study):
    cov, _, itt, up = study
    with pytest.raises(SummaryError, match=r"`uptake_itt` is zero for every unit in every draw"):
        EffectDraws.from_itt(_chain_major(itt), np.zeros_like(_chain_major(up)), cov)
