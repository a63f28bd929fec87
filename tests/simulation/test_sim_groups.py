"""The four-response-group designs: groups present, groups behave as named, learnable."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats
from sklearn.ensemble import HistGradientBoostingClassifier

from service.errors import DataError
from service.simulation import (
    RESPONSE_GROUPS,
    SimulatedCampaign,
    larkspur_campaign,
    response_groups,
    response_groups_two_arms,
)

Z99 = stats.norm.ppf(0.995)


def _observed_effect(c: SimulatedCampaign, rows: np.ndarray, arm: object) -> tuple[float, float]:
    treated, control = c.y[rows & (c.treatment == arm)], c.y[rows & (c.treatment == c.control)]
    se = np.sqrt(treated.var() / len(treated) + control.var() / len(control))
    return float(treated.mean() - control.mean()), float(se)


@pytest.mark.parametrize(
    "make",
    [response_groups, response_groups_two_arms, larkspur_campaign],
    ids=lambda f: f.__name__,
)
def test_all_four_groups_present_and_behave_as_named(make: object) -> None:
    c: SimulatedCampaign = make(100_000, random_state=3)  # type: ignore[operator]
    assert set(c.groups) == set(RESPONSE_GROUPS)  # type: ignore[arg-type]
    for group in RESPONSE_GROUPS:
        rows = np.asarray(c.groups == group)
        # Each group is a real share of the population (at least 5%).
        assert rows.mean() > 0.05, group
        for arm in c.arms:
            effect, se = _observed_effect(c, rows, arm)
            # Trade definitions of the groups (common practice, no source): contact moves
            # persuadables up and sleeping dogs down; sure things and lost causes barely.
            if group == "persuadable":
                assert effect - Z99 * se > 0.2, (group, arm, effect)
            elif group == "sleeping_dog":
                assert effect + Z99 * se < -0.1, (group, arm, effect)
            else:
                assert abs(effect) < 0.1, (group, arm, effect)


def test_single_arm_groups_respond_with_the_stated_probabilities() -> None:
    c = response_groups(200_000, random_state=4)
    stated = {
        "persuadable": (0.05, 0.60),
        "sure_thing": (0.80, 0.85),
        "lost_cause": (0.05, 0.07),
        "sleeping_dog": (0.55, 0.15),
    }
    for group, probabilities in stated.items():
        for label, p in zip((0, 1), probabilities, strict=True):
            y = c.y[(c.groups == group) & (c.treatment == label)]
            # Binomial 99% interval around the stated probability.
            assert abs(y.mean() - p) <= Z99 * np.sqrt(p * (1 - p) / len(y)), (group, label)


def test_treated_share_is_respected() -> None:
    c = response_groups(50_000, treated_share=0.2, random_state=5)
    np.testing.assert_allclose(c.propensity_matrix, np.tile([0.8, 0.2], (50_000, 1)))
    assert abs(c.treatment.mean() - 0.2) <= Z99 * np.sqrt(0.2 * 0.8 / 50_000)


def test_two_arm_design_has_different_best_arms() -> None:
    c = response_groups_two_arms(20_000, random_state=6)
    assert c.arms == ("email", "call") and c.control == "none"
    best = np.where(c.tau.max(axis=1) <= 0, "none", np.array(c.arms)[c.tau.argmax(axis=1)])
    shares = {arm: float(np.mean(best == arm)) for arm in ("none", "email", "call")}
    # A useful multi-arm test design: each choice is best for a real share of people.
    assert min(shares.values()) > 0.15, shares


def test_separation_sharpens_the_groups() -> None:
    soft = response_groups(20_000, separation=0.5, random_state=7)
    sharp = response_groups(20_000, separation=2.0, random_state=7)
    assert sharp.tau.std() > soft.tau.std() + 0.05


def test_a_plain_two_model_learner_ranks_by_true_uplift() -> None:
    # The design promises heterogeneity a good learner can find at 20,000 training rows.
    # Threshold 0.85 is a rule of thumb (common practice, no source); measured 0.94.
    train, test = response_groups(20_000, random_state=8), response_groups(20_000, random_state=9)

    def encoded(c: SimulatedCampaign) -> np.ndarray:
        codes = c.X["segment"].map({"a": 0, "b": 1, "c": 2}).to_numpy(dtype=float)
        return np.column_stack([c.X.drop(columns="segment").to_numpy(), codes])

    x_train, x_test = encoded(train), encoded(test)
    predictions = []
    for label in (0, 1):
        model = HistGradientBoostingClassifier(
            max_iter=40,
            learning_rate=0.15,
            max_leaf_nodes=15,
            early_stopping=False,
            categorical_features=[6],
            random_state=0,
        )
        rows = train.treatment == label
        model.fit(x_train[rows], train.y[rows])
        predictions.append(model.predict_proba(x_test)[:, 1])
    rho = stats.spearmanr(predictions[1] - predictions[0], test.tau[:, 0]).statistic
    assert rho > 0.85


@pytest.mark.parametrize(
    ("kwargs", "match"),
    [
        ({"treated_share": 1.0}, "must each lie strictly between 0 and 1"),
        ({"separation": 0.0}, "separation=0.0 is not usable"),
        ({"random_state": "seed"}, "random_state='seed' is not usable"),
    ],
)
def test_bad_arguments_are_refused(kwargs: dict[str, object], match: str) -> None:
    with pytest.raises(DataError, match=match):
        response_groups(100, **kwargs)  # type: ignore[arg-type]


def test_two_arm_shares_must_match_the_labels() -> None:
    with pytest.raises(DataError, match="give one share per label"):
        response_groups_two_arms(100, shares=(0.5, 0.5))  # type: ignore[arg-type]
