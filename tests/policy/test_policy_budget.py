"""Budget-optimal lists: the priced choice against the LP bound and exhaustive search."""

from __future__ import annotations

import itertools

import numpy as np
import pytest
from scipy.optimize import linprog

from service.policy import DecisionBatch, Draws, decide, rank, uniform_draws
from service.policy.rank import _listed_value

COSTS3 = np.array([0.40, 1.50, 3.50])  # email, letter, call


def _batch(
    tau: np.ndarray, costs: np.ndarray, exploration: float = 0.0, holdout: float = 0.0,
    salt: str = "b", value: float = 40.0,
) -> DecisionBatch:  # fmt: skip
    n = len(tau)
    ids = [f"C{i}" for i in range(n)]
    draws = uniform_draws(salt, "budget", ids) if exploration or holdout else None
    return decide(
        tau, tau - 0.04, tau + 0.04, np.full(n, 0.3), value, costs, np.zeros(n, dtype=bool),
        draws if draws is not None else Draws(*(np.full(n, 0.5) for _ in range(3))),
        exploration=exploration, holdout=holdout, margin=0.0,
    )  # fmt: skip


def _simulated_tau(n: int, k: int, seed: int) -> np.ndarray:
    # Arms that cost more tend to lift more, with customer-level variation.
    rng = np.random.default_rng(seed)
    base = rng.gamma(2.0, 0.01, size=(n, 1))
    scale = np.array([1.0, 2.2, 4.0])[:k]
    return base * scale * rng.lognormal(0.0, 0.4, size=(n, k)) - 0.005


def lp_bound(ev: np.ndarray, costs: np.ndarray, budget: float, capacity: int | None) -> float:
    """LP relaxation of the multiple-choice knapsack (scipy HiGHS): x_ia in [0, 1],
    sum_a x_ia <= 1, sum c_a x_ia <= budget, sum x_ia <= capacity; arms with EV <= 0 are
    never worth taking."""
    n, k = ev.shape
    gain = np.where(ev > 0, ev, 0.0).ravel()
    rows = np.kron(np.eye(n), np.ones(k))
    a_ub = [rows, np.tile(costs, n)[None, :]]
    b_ub = [np.ones(n), [budget]]
    if capacity is not None:
        a_ub.append(np.ones((1, n * k)))
        b_ub.append([capacity])
    res = linprog(-gain, A_ub=np.vstack(a_ub), b_ub=np.concatenate(b_ub), bounds=(0, 1),
                  method="highs")  # fmt: skip
    assert res.status == 0
    return float(-res.fun)


def _listed_ev(result, batch: DecisionBatch) -> float:  # type: ignore[no-untyped-def]
    order = result.order
    return float(batch.ev_per_arm[order, result.arm[order] - 1].sum())


@pytest.mark.parametrize(("k", "share"), [(2, 0.1), (2, 0.4), (3, 0.1), (3, 0.3)])
def test_budgeted_list_reaches_99_percent_of_the_lp_bound(k: int, share: float) -> None:
    # Reference: scipy.optimize.linprog (HiGHS) on the LP relaxation, an upper bound on
    # any integer list.
    costs = COSTS3[[0, 2] if k == 2 else [0, 1, 2]]
    n = 1500
    batch = _batch(_simulated_tau(n, k, seed=k), costs)
    spend_all = costs[np.argmax(batch.ev_per_arm, axis=1)].sum()
    budget = share * spend_all
    result = rank(batch, list(range(n)), budget=budget, costs=costs)
    bound = lp_bound(batch.ev_per_arm, costs, budget, None)
    assert result.reserved <= budget + 1e-9
    assert _listed_ev(result, batch) >= 0.99 * bound
    # The plain EV prefix (price 0, the rule before pricing) is never better.
    assert _listed_ev(result, batch) >= _listed_value(batch, costs, 0.0, None, budget) - 1e-9


def test_capacity_and_budget_together_stay_within_both() -> None:
    costs = COSTS3
    batch = _batch(_simulated_tau(300, 3, seed=5), costs)
    result = rank(batch, list(range(300)), capacity=60, budget=90.0, costs=costs)
    assert result.listed.sum() <= 60 and result.reserved <= 90.0 + 1e-9
    assert _listed_ev(result, batch) >= 0.99 * lp_bound(batch.ev_per_arm, costs, 90.0, 60)


def test_small_instances_match_exhaustive_search_closely() -> None:
    # Exhaustive search over every arm assignment of 7 customers: the priced list is never
    # below 90% of the integer optimum here (the LP gap of tiny instances), and never below
    # the EV-prefix list of the greedy rule.
    costs = np.array([0.4, 3.5])
    for seed in range(20):
        batch = _batch(_simulated_tau(7, 2, seed=100 + seed), costs)
        ev = batch.ev_per_arm
        budget = 4.0
        best = 0.0
        for choice in itertools.product(range(3), repeat=7):
            pick = np.array(choice)
            arms = pick[pick > 0] - 1
            if costs[arms].sum() <= budget:
                best = max(best, float(ev[np.flatnonzero(pick), arms].sum()))
        got = _listed_ev(rank(batch, list(range(7)), budget=budget, costs=costs), batch)
        assert got <= best + 1e-9
        assert got >= 0.9 * best - 1e-9, (seed, got, best)


def test_priced_list_logs_its_propensity_given_the_cut() -> None:
    # The greedy arm under a budget price maximises EV - price * cost; the logged law is
    # (1 - h) * p_a * [key of a sorts at or before the cut], as without a budget.
    costs = np.array([0.4, 3.5])
    h, eps = 0.2, 0.1
    batch = _batch(_simulated_tau(2000, 2, seed=9), costs, exploration=eps, holdout=h)
    result = rank(batch, list(range(2000)), budget=300.0, costs=costs)
    assert result.budget_price > 0
    np.testing.assert_allclose(result.action_probs.sum(axis=1), 1.0, atol=1e-12)
    rows = np.arange(2000)
    np.testing.assert_allclose(result.propensity, result.action_probs[rows, result.action])
    shown = np.flatnonzero(result.listed & ~result.holdout)
    key = np.where(batch.ev_per_arm > 0, batch.ev_per_arm - result.budget_price * costs, -np.inf)
    arm = result.arm[shown]
    best = np.argmax(key[shown], axis=1) + 1
    # A row not explored took the arm with the best priced key among its positive arms.
    greedy = ~batch.explored[shown]
    assert np.all(arm[greedy] == best[greedy])
    expected = (1 - h) * ((1 - eps) * (arm == best) + eps / 3)
    np.testing.assert_allclose(result.propensity[shown], expected, atol=1e-12)


def test_priced_probabilities_match_frequencies_over_salts() -> None:
    # Same estimates, 200 salts: the average logged P(a | cut, price) must match how often
    # a happens (tower property; cut and price move with the salt). Bound: 4 binomial SDs.
    costs = np.array([0.4, 3.5])
    tau = _simulated_tau(500, 2, seed=21)
    counts, expected, variance = np.zeros((500, 3)), np.zeros((500, 3)), np.zeros((500, 3))
    for s in range(200):
        batch = _batch(tau, costs, exploration=0.2, holdout=0.1, salt=f"s{s}")
        result = rank(batch, list(range(500)), budget=150.0, costs=costs)
        counts[np.arange(500), result.action] += 1
        expected += result.action_probs
        variance += result.action_probs * (1 - result.action_probs)
    for action in range(3):
        gap = abs(counts[:, action].sum() - expected[:, action].sum())
        assert gap <= 4 * np.sqrt(variance[:, action].sum()), (action, gap)
