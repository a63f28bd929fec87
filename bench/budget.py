"""Budget-optimal contact lists against the LP bound and today's greedy-by-EV list.

Run: ``python bench/budget.py [--candidates 20000]``. Simulated candidates (invented
uplift per arm; arms that cost more lift more, with customer-level variation) with two
arms (email 0.40, call 3.50) or three (email 0.40, letter 1.50, call 3.50), at budgets of
2%, 10% and 30% of what contacting every customer through their best-EV arm would cost.
For each: the LP relaxation of the multiple-choice knapsack (scipy.optimize.linprog,
method="highs"; an upper bound on any list), the list ``service.policy.rank`` builds
under the budget (priced by Lagrangian relaxation), and the greedy list (best EV arm per
customer, sorted by EV, cut at the budget: the rule before pricing), with their ratio to
the LP bound and the time ``rank`` took. No exploration or holdout, so the lists are the
policy's own choices.
"""

from __future__ import annotations

import argparse
import time

import numpy as np
from scipy import sparse
from scipy.optimize import linprog

from service.policy import Draws, decide, rank
from service.policy.rank import _listed_value

_COSTS = {2: np.array([0.40, 3.50]), 3: np.array([0.40, 1.50, 3.50])}
_LIFT_SCALE = {2: np.array([1.0, 4.0]), 3: np.array([1.0, 2.2, 4.0])}


def _tau(n: int, k: int, seed: int) -> np.ndarray:
    rng = np.random.default_rng(seed)
    base = rng.gamma(2.0, 0.01, size=(n, 1))
    return base * _LIFT_SCALE[k] * rng.lognormal(0.0, 0.4, size=(n, k)) - 0.005


def _lp_bound(ev: np.ndarray, costs: np.ndarray, budget: float) -> float:
    n, k = ev.shape
    gain = np.where(ev > 0, ev, 0.0).ravel()
    one_arm = sparse.kron(sparse.identity(n, format="csr"), np.ones((1, k)), format="csr")
    spend = sparse.csr_matrix(np.tile(costs, n)[None, :])
    a_ub = sparse.vstack([one_arm, spend], format="csr")
    b_ub = np.concatenate([np.ones(n), [budget]])
    res = linprog(-gain, A_ub=a_ub, b_ub=b_ub, bounds=(0, 1), method="highs")
    if res.status != 0:
        raise RuntimeError(res.message)
    return float(-res.fun)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--candidates", type=int, default=20_000)
    args = parser.parse_args()
    n = args.candidates
    print(f"{n:,} candidates, value 40 per conversion; EV in currency units")
    head = (
        f"{'arms':>4} {'budget':>9} {'LP bound':>10} {'priced':>10} {'ratio':>7} "
        f"{'greedy EV':>10} {'ratio':>7} {'contacts':>9} {'rank ms':>8}"
    )
    print(head)
    print("-" * len(head))
    for k in (2, 3):
        costs = _COSTS[k]
        tau = _tau(n, k, seed=k)
        batch = decide(
            tau, tau - 0.04, tau + 0.04, np.full(n, 0.3), 40.0, costs, np.zeros(n, dtype=bool),
            Draws(*(np.full(n, 0.5) for _ in range(3))), exploration=0.0, holdout=0.0,
            margin=0.0,
        )  # fmt: skip
        everyone = float(costs[np.argmax(batch.ev_per_arm, axis=1)].sum())
        for share in (0.02, 0.10, 0.30):
            budget = share * everyone
            bound = _lp_bound(batch.ev_per_arm, costs, budget)
            start = time.perf_counter()
            result = rank(batch, list(range(n)), budget=budget, costs=costs)
            elapsed = (time.perf_counter() - start) * 1000
            order = result.order
            priced = float(batch.ev_per_arm[order, result.arm[order] - 1].sum())
            greedy = _listed_value(batch, costs, 0.0, None, budget)
            print(
                f"{k:>4} {budget:>9,.0f} {bound:>10,.1f} {priced:>10,.1f} "
                f"{priced / bound:>7.2%} {greedy:>10,.1f} {greedy / bound:>7.2%} "
                f"{len(order):>9,} {elapsed:>8.0f}"
            )


if __name__ == "__main__":
    main()
