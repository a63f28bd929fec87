"""The compact serving form against the full model and against known truth.

References: scikit-learn 1.9's own predictions of the fitted models (the learners'
``predict_effects`` for the point estimates, ``HistGradientBoostingRegressor.predict``
for the spread models); for coverage, the known effects of Nie & Wager (2021) setup B,
"randomized trial" (``service.simulation``).
"""

from __future__ import annotations

from collections.abc import Iterator
from pathlib import Path

import numpy as np
import pytest
from scipy.stats import norm
from test_compiled import _campaign, _fitted, _scoring_frame
from threadpoolctl import threadpool_limits

from service.errors import BundleError
from service.evaluation.fidelity import interval_coverage
from service.simulation import simulate
from service.uplift import BootstrapUplift, make_learner
from service.uplift._flatten import Program
from service.uplift.compact import (
    bootstrap_sd,
    compact_form,
    fit_spread_models,
    interval_sd,
    load_form,
    save_form,
    synthetic_rows,
)
from service.uplift.compiled import compile_model

TOLERANCE = 1e-9


@pytest.fixture(autouse=True)
def _one_openmp_thread() -> Iterator[None]:
    with threadpool_limits(1):
        yield


def _compact(model: BootstrapUplift, design: str) -> tuple[object, list[object]]:
    full = compile_model(model, warm_up=False)
    encoded = full.encode(_campaign(design)[0])
    spread = fit_spread_models(full, encoded, seed=0)
    return compact_form(model, spread), spread


@pytest.mark.parametrize(
    ("name", "base", "design"),
    [
        ("t", "gbm", "one_arm"),
        ("s", "gbm", "two_arms"),
        ("x", "linear", "two_arms"),
        ("dr", "gbm", "one_arm"),
        ("transformed", "linear", "one_arm"),
    ],
)
def test_compact_points_equal_the_full_data_fit(name: str, base: str, design: str) -> None:
    model = _fitted(name, base, design)
    compact, spread = _compact(model, design)
    X = _scoring_frame(design)
    tau, mu0, low, high = compact.predict_interval(X, confidence=0.9)  # type: ignore[attr-defined]
    expected_tau, expected_mu0 = model.predict_effects(X)  # scikit-learn
    np.testing.assert_allclose(tau, expected_tau, rtol=0, atol=TOLERANCE)
    np.testing.assert_allclose(mu0, expected_mu0, rtol=0, atol=TOLERANCE)
    # The half-width is z * exp(g_a(x)), g_a as scikit-learn predicts it.
    encoded = model.encoder_.transform(X)
    sd = np.column_stack([np.exp(g.predict(encoded)) for g in spread])  # type: ignore[attr-defined]
    np.testing.assert_allclose(high - tau, norm.ppf(0.95) * sd, rtol=1e-9, atol=TOLERANCE)
    np.testing.assert_allclose(tau - low, high - tau, rtol=0, atol=TOLERANCE)


def test_compact_walks_far_fewer_trees() -> None:
    # With the 20 refits training uses: the other tests' 3 refits would make the full
    # form look small next to the spread models' fixed 200 trees per arm.
    X, y, t = _campaign("two_arms")
    learner = make_learner("s", control="none", random_state=0)
    model = BootstrapUplift(learner, n_bootstrap=20, random_state=0).fit(X, y, t)
    compact, _ = _compact(model, "two_arms")
    full = compile_model(model, warm_up=False)
    assert compact.n_bootstrap_ == 0  # type: ignore[attr-defined]
    assert compact.interval_method == "spread_model"  # type: ignore[attr-defined]
    assert len(compact.program.tree_roots) < len(full.program.tree_roots)  # type: ignore[attr-defined]


def test_saved_form_loads_without_pickle_and_scores_the_same(tmp_path: Path) -> None:
    model = _fitted("t", "gbm", "one_arm")
    compact, _ = _compact(model, "one_arm")
    path = tmp_path / "compact.npz"
    save_form(compact, path)  # type: ignore[arg-type]
    with np.load(path, allow_pickle=False) as data:  # refuses any pickled member
        assert "meta" in data.files
    loaded = load_form(path)
    X = _scoring_frame("one_arm")
    for got, want in zip(
        loaded.predict_interval(X),
        compact.predict_interval(X),  # type: ignore[attr-defined]
        strict=True,
    ):
        np.testing.assert_array_equal(got, want)
    assert loaded.arms_ == ["mail"] and loaded.control_ == "none"
    row = _scoring_frame("one_arm").iloc[3].to_dict()
    assert np.isfinite(loaded.predict_row(row)[3]).all()


def test_form_with_other_spread_sizes_still_loads(tmp_path: Path) -> None:
    # Forms saved before the spread models' sizes changed (200 trees of 15 leaves, rate
    # 0.1): the file holds the trees themselves, so any size loads and scores as fitted.
    from sklearn.ensemble import HistGradientBoostingRegressor

    model = _fitted("t", "gbm", "one_arm")
    full = compile_model(model, warm_up=False)
    X = _scoring_frame("one_arm")
    encoded = full.encode(_campaign("one_arm")[0])
    previous = HistGradientBoostingRegressor(
        learning_rate=0.1, max_iter=200, max_leaf_nodes=15, min_samples_leaf=40,
        l2_regularization=1.0, early_stopping=False, random_state=0,
    )  # fmt: skip
    previous.fit(encoded, np.log(bootstrap_sd(full, encoded)[:, 0]))
    path = tmp_path / "compact.npz"
    save_form(compact_form(model, [previous]), path)
    tau, _, _, high = load_form(path).predict_interval(X, confidence=0.9)
    sd = np.exp(previous.predict(model.encoder_.transform(X)))  # scikit-learn
    np.testing.assert_allclose(high[:, 0] - tau[:, 0], norm.ppf(0.95) * sd, rtol=1e-9)


def test_synthetic_rows_stay_near_the_data() -> None:
    # MUNGE (Bucilua et al. 2006): categories come from the data, missing values stay
    # missing, and numbers keep about the data's range (common practice, no source).
    model = _fitted("t", "gbm", "one_arm")
    encoded = model.encoder_.transform(_campaign("one_arm")[0])
    mask = model.encoder_.categorical_mask
    rows = synthetic_rows(encoded, mask, 3 * len(encoded), np.random.default_rng(0))
    assert rows.shape == (3 * len(encoded), encoded.shape[1])
    assert np.array_equal(np.isnan(rows).mean(axis=0) > 0, np.isnan(encoded).mean(axis=0) > 0)
    for j in np.flatnonzero(mask):
        assert set(rows[~np.isnan(rows[:, j]), j]) <= set(encoded[~np.isnan(encoded[:, j]), j])
    numeric = ~mask
    low, high = np.nanmin(encoded[:, numeric], 0), np.nanmax(encoded[:, numeric], 0)
    inside = (rows[:, numeric] >= low - (high - low) / 2) & (
        rows[:, numeric] <= high + (high - low) / 2
    )
    assert np.mean(inside | np.isnan(rows[:, numeric])) > 0.99
    assert not np.array_equal(rows[: len(encoded)], encoded)


def test_damaged_program_is_refused(tmp_path: Path) -> None:
    model = _fitted("t", "gbm", "one_arm")
    compact, _ = _compact(model, "one_arm")
    arrays = compact.program.arrays()  # type: ignore[attr-defined]
    internal = int(np.flatnonzero(arrays["node_head"] >= 0)[0])
    arrays["node_right"] = arrays["node_right"].copy()
    arrays["node_right"][internal] = internal  # a loop
    with pytest.raises(BundleError, match="depth-first order"):
        Program.from_arrays(arrays, "test")
    path = tmp_path / "broken.npz"
    path.write_bytes(b"not an npz file")
    with pytest.raises(BundleError, match="cannot be read as a serving form"):
        load_form(path)


@pytest.mark.slow
def test_compact_interval_covers_the_true_effect_like_the_full_one() -> None:
    # Nie & Wager (2021) setup B: randomized trial, known effect per customer.
    train = simulate("nw_b", 3000, random_state=0)
    test = simulate("nw_b", 4000, random_state=1)
    learner = make_learner("t", base="linear", random_state=0)
    model = BootstrapUplift(learner, n_bootstrap=20, random_state=0)
    model.fit(train.X, train.y, train.treatment)
    full = compile_model(model, warm_up=False)
    encoded = full.encode(train.X)
    spread = fit_spread_models(full, encoded, seed=0)
    compact = compact_form(model, spread)
    coverage, width = {}, {}
    for form, scorer in (("full", full), ("compact", compact)):
        tau, _, _, high = scorer.predict_interval(test.X, confidence=0.9)
        sd = interval_sd(tau, high, 0.9)
        coverage[form] = interval_coverage(test.tau, tau, sd, 0.9)
        width[form] = float(np.median(sd))
    # The project's target: no more than 2 points below the full form's coverage, with
    # intervals of about the same width (a very wide interval would cover anything).
    assert coverage["compact"] >= coverage["full"] - 0.02, coverage
    assert 0.8 < width["compact"] / width["full"] < 1.25, width
