"""Randomized pilots: draws at the pilot shares, exact propensities, opt-outs respected."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from scipy import stats

from service.errors import PolicyError
from service.policy import (
    PILOT_REASON,
    load_campaigns,
    parse_campaigns,
    pilot_decide,
    pilot_decide_one,
    uniform_draw,
    uniform_draws,
)

PILOT = """
[campaigns.trial]
salt = "pilot-tests"
pilot_shares = { none = 0.5, email = 0.3, call = 0.2 }
suppression = ["OUT-1", "OUT-2"]
[campaigns.trial.arms]
email = { cost = 0.4 }
call = { cost = 3.5 }
"""


def _campaign(text: str = PILOT, tmp_path: Path | None = None):  # type: ignore[no-untyped-def]
    import tomllib

    return parse_campaigns(tomllib.loads(text), base_dir=Path("."))["trial"]


def test_pilot_draws_match_the_shares_and_log_them_exactly() -> None:
    campaign = _campaign()
    assert campaign.is_pilot and campaign.shares() == (0.5, 0.3, 0.2)
    ids = [f"C{i}" for i in range(30_000)] + ["OUT-1", "OUT-2"]
    draws = uniform_draws(campaign.salt, campaign.id, ids)
    batch = pilot_decide(campaign.shares(), campaign.opted_out(ids), draws.arm)
    counts = np.bincount(batch.action[:-2], minlength=3)
    # Reference: scipy.stats.chisquare goodness of fit to the shares (a correct draw
    # fails at the 0.1% level once in a thousand seeds).
    assert stats.chisquare(counts, 30_000 * np.array([0.5, 0.3, 0.2])).pvalue > 0.001
    np.testing.assert_allclose(batch.propensity[:-2], np.array([0.5, 0.3, 0.2])[batch.action[:-2]])
    assert batch.action[-2:].tolist() == [0, 0] and batch.propensity[-2:].tolist() == [1.0, 1.0]
    assert batch.reasons[0] == [PILOT_REASON] and batch.reasons[-1] == ["opted_out"]
    np.testing.assert_allclose(batch.action_probs.sum(axis=1), 1.0)


def test_one_customer_matches_the_batch_bit_for_bit() -> None:
    campaign = _campaign()
    ids = [f"C{i}" for i in range(500)]
    batch = pilot_decide(
        campaign.shares(), campaign.opted_out(ids), uniform_draws(campaign.salt, "trial", ids).arm
    )
    for i, cid in enumerate(ids):
        one = pilot_decide_one(
            campaign.shares(), False, uniform_draw(campaign.salt, "trial", cid)[1]
        )
        assert one.action == batch.action[i] and one.propensity == batch.propensity[i]


def test_default_shares_are_equal_and_the_hash_depends_on_them(tmp_path: Path) -> None:
    path = tmp_path / "c.toml"
    path.write_text(PILOT.replace("pilot_shares = { none = 0.5, email = 0.3, call = 0.2 }\n", ""))
    equal = load_campaigns(path)["trial"]
    assert equal.shares() == pytest.approx((1 / 3, 1 / 3, 1 / 3))
    assert equal.hash != _campaign().hash
    assert equal.describe()["model"] is None and equal.describe()["pilot_shares"]


@pytest.mark.parametrize(
    ("edit", "message"),
    [
        ("pilot_shares = { none = 0.5, email = 0.5 }", "one share per action"),
        ("pilot_shares = { none = 0.5, email = 0.3, call = 0.3 }", "sum to 1"),
        ("pilot_shares = { none = 1.0, email = 0.0, call = 0.0 }", "> 0"),
    ],
)
def test_bad_shares_name_the_key(edit: str, message: str) -> None:
    text = PILOT.replace("pilot_shares = { none = 0.5, email = 0.3, call = 0.2 }", edit)
    with pytest.raises(PolicyError, match=message):
        _campaign(text)


def test_shares_with_a_model_are_refused() -> None:
    with pytest.raises(PolicyError, match="applies only to a pilot"):
        _campaign(PILOT.replace('salt = "pilot-tests"', 'salt = "p"\nmodel = "larkspur"'))
