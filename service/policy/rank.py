"""Ranked contact lists: best expected value first, cut at capacity and/or budget."""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
import numpy.typing as npt

from service.errors import DataError
from service.policy.decide import DecisionBatch
from service.policy.exploration import choice_probabilities

__all__ = ["EXCLUSION_REASONS", "RankResult", "budget_price", "rank"]

FloatArray = npt.NDArray[np.float64]
BoolArray = npt.NDArray[np.bool_]
IntArray = npt.NDArray[np.intp]

EXCLUSION_REASONS = (
    "opted_out",
    "do_not_contact",
    "no_positive_value",
    "explored",
    "beyond_capacity",
    "beyond_budget",
)
"""Why a candidate is not on the list ("explored": the exploration draw picked no contact
for a customer whose best arm had positive value)."""

# Relative slack so that a budget equal to a sum of costs is not missed by rounding.
_BUDGET_SLACK = 1e-9


@dataclass(frozen=True)
class RankResult:
    """An ordered contact list and what happened to every candidate.

    Per-candidate arrays have one entry per row of the decided batch, in input order.

    Attributes
    ----------
    order : (m,) rows on the list, rank 1 first. Holdout rows keep their place.
    contact_ids : ids of ``order``.
    rank : (n,) 1-based place on the list; 0 when not listed.
    listed : (n,) on the list (contacted or held out).
    arm : (n,) arm the list names for the row (1..K), also when held out; 0 if not listed.
    action : (n,) final action: ``arm`` unless held out or not listed, then 0.
    expected_value : (n,) EV of the action chosen before the cut (0 for no contact).
    holdout : (n,) listed and withheld as control.
    explored : (n,) the action was drawn by exploration.
    propensity : (n,) probability of ``action`` given the cut (see :func:`rank`).
    action_probs : (n, 1 + K) law of the final action given the cut.
    reason : (n,) exclusion reason (see :data:`EXCLUSION_REASONS`); None when listed.
    excluded : (q,) rows not on the list, in input order; ``excluded_ids`` and
        ``excluded_reason`` are aligned with it.
    cut_expected_value : EV of the last listed contact when capacity or budget cut the
        list short, else None.
    spend : contact cost of the listed rows that are not held out.
    reserved : contact cost of all listed rows, holdouts included (what the cut counts).
    budget_price : the Lagrange multiplier of the budget (EV per unit of cost given up);
        0 without a budget, where the order is plain EV.
    """

    order: IntArray
    contact_ids: list[object]
    rank: IntArray
    listed: BoolArray
    arm: IntArray
    action: IntArray
    expected_value: FloatArray
    holdout: BoolArray
    explored: BoolArray
    propensity: FloatArray
    action_probs: FloatArray
    reason: list[str | None]
    excluded: IntArray
    excluded_ids: list[object]
    excluded_reason: list[str]
    cut_expected_value: float | None
    spend: float
    reserved: float
    capacity: int | None
    budget: float | None
    budget_price: float = 0.0


def rank(
    batch: DecisionBatch,
    ids: Sequence[object],
    capacity: int | None = None,
    budget: float | None = None,
    *,
    costs: FloatArray | Sequence[float],
) -> RankResult:
    """Order the contacts of a decided batch and cut the list at capacity and/or budget.

    The candidates whose action before holdout (``batch.chosen``, greedy or explored)
    is an arm are sorted by the *key* of that arm, best first (ties: input order), and
    the list is the longest prefix of that order with at most ``capacity`` rows whose
    summed contact cost is at most ``budget``. Without a budget the key is the arm's EV
    (capacity alone is filled best EV first, which is optimal for it). Under a budget,
    sorting by EV wastes money when arms cost differently, so the budget is priced
    (:func:`budget_price`, Lagrangian relaxation of the multiple-choice knapsack): at
    price ``lam`` the greedy arm of a customer is the allowed arm with positive EV that
    maximises ``EV_a - lam * c_a``, and that is also the key. ``lam = 0`` gives back the
    plain EV order, which is kept whenever the budget does not bind or pricing does not
    help. Exploration keeps its drawn arms. Held-out rows keep their place and count
    against capacity and budget, so that the cut does not depend on the holdout draws.
    Expect about ``(1 - holdout)`` of capacity and budget to be used by real contacts.

    Meaning of the logged propensity. Let the *cut* be the place of the last listed row
    in the order (key, then input position). Given the cut and the budget price, a
    customer gets arm a exactly when the exploration draws choose a, the (key_a,
    position) pair sorts at or before the cut, and the holdout draw does not withhold it:

    ``P(a | cut) = (1 - h) * p_a * [key_a ranks at or before the cut]``, and
    ``P(none | cut) = 1 - sum_a P(a | cut)``,

    where ``p`` is the exploration law of :func:`decide`. These are exact for the
    customer's own exploration and holdout draws, holding the cut fixed. The cut itself
    depends on all candidates' draws, this customer's included: their own draw can move
    it by one place under a capacity limit (a few under a budget), which the conditioning
    ignores, and likewise the budget price, which all candidates set together; with lists
    of hundreds of rows the effect is negligible. ``p`` is the exploration law around the
    greedy arm at that price. When nothing is cut (and no price is set),
    the probabilities equal ``batch.action_probs``. Holdout within the list is exact
    without qualification: ``P(holdout | listed) = h``.

    Parameters
    ----------
    batch : decisions from :func:`decide`.
    ids : candidate ids aligned with the batch rows.
    capacity : most rows on the list (None: no limit).
    budget : most summed contact cost of the list (None: no limit).
    costs : (K,) contact cost per arm, as passed to :func:`decide`.

    References
    ----------
    Horvitz & Thompson (1952), JASA 47(260) (inverse-probability weighting, which is what
    the logged propensities are for); Sinha & Zoltners (1979), Operations Research 27(3)
    (the multiple-choice knapsack; cited from memory).
    """
    n, k = len(batch), batch.n_arms
    ids = list(ids)
    if len(ids) != n:
        raise DataError(f"ids has {len(ids)} entries for {n} decided candidates; align them.")
    cost = np.asarray(costs, dtype=np.float64)
    if cost.shape != (k,) or not np.isfinite(cost).all() or (cost < 0).any():
        raise DataError(f"costs must be {k} finite numbers >= 0, one per arm; got {costs!r}.")
    _check_limits(capacity, budget)

    price = 0.0 if budget is None else budget_price(batch, cost, capacity, budget)
    chosen, choice_probs, key = _priced_choice(batch, cost, price)
    order_all, key_sorted, n_list, reserved_cum = _cut(chosen, key, cost, capacity, budget)
    rows = order_all
    order = order_all[:n_list]

    eligible = _eligible(key, order_all, key_sorted, n_list)
    probs = choice_probs.copy()
    probs[:, 1:] *= (1.0 - batch.holdout_rate) * eligible
    probs[:, 0] = choice_probs[:, 0] + (choice_probs[:, 1:] - probs[:, 1:]).sum(1)

    listed = np.zeros(n, dtype=bool)
    listed[order] = True
    held = listed & batch.holdout
    arm = np.where(listed, chosen, 0).astype(np.intp)
    action = np.where(held, 0, arm).astype(np.intp)
    places = np.zeros(n, dtype=np.intp)
    places[order] = np.arange(1, n_list + 1)
    reason = _reasons(batch, order_all, n_list, capacity)
    excluded = np.flatnonzero(~listed)
    ev_with_none = np.column_stack([np.zeros(n), batch.ev_per_arm])
    return RankResult(
        order=order,
        contact_ids=[ids[i] for i in order.tolist()],
        rank=places,
        listed=listed,
        arm=arm,
        action=action,
        expected_value=ev_with_none[np.arange(n), chosen],
        holdout=held,
        explored=batch.explored.copy(),
        propensity=probs[np.arange(n), action],
        action_probs=probs,
        reason=reason,
        excluded=excluded,
        excluded_ids=[ids[i] for i in excluded.tolist()],
        excluded_reason=[str(reason[i]) for i in excluded.tolist()],
        cut_expected_value=float(ev_with_none[order[-1], chosen[order[-1]]])
        if 0 < n_list < len(rows)
        else None,
        spend=float(cost[chosen[order] - 1][~batch.holdout[order]].sum()),
        reserved=float(reserved_cum[n_list - 1]) if n_list else 0.0,
        capacity=capacity,
        budget=budget,
        budget_price=price,
    )


def _check_limits(capacity: int | None, budget: float | None) -> None:
    if capacity is not None and (
        isinstance(capacity, bool) or not isinstance(capacity, int | np.integer) or capacity < 0
    ):
        raise DataError(f"capacity={capacity!r} must be a whole number >= 0, or None.")
    if budget is not None and not (math.isfinite(budget) and budget >= 0):
        raise DataError(f"budget={budget!r} must be a finite number >= 0, or None.")


def _list_length(reserved_cum: FloatArray, capacity: int | None, budget: float | None) -> int:
    length = len(reserved_cum)
    if capacity is not None:
        length = min(length, int(capacity))
    if budget is not None:
        limit = budget + _BUDGET_SLACK * max(1.0, budget)
        # Costs are >= 0, so the running sum is sorted and the fitting prefix is a search.
        length = min(length, int(np.searchsorted(reserved_cum, limit, side="right")))
    return length


def _eligible(
    ev: FloatArray, order_all: IntArray, ev_sorted: FloatArray, n_list: int
) -> BoolArray:
    """Arms whose (EV, position) sorts at or before the cut; all arms when nothing is cut."""
    if n_list == len(order_all):
        return np.ones(ev.shape, dtype=bool)
    if n_list == 0:
        return np.zeros(ev.shape, dtype=bool)
    last_ev, last_row = ev_sorted[n_list - 1], order_all[n_list - 1]
    positions = np.arange(len(ev))[:, None]
    eligible: BoolArray = (ev > last_ev) | ((ev == last_ev) & (positions <= last_row))
    return eligible


def _reasons(
    batch: DecisionBatch, order_all: IntArray, n_list: int, capacity: int | None
) -> list[str | None]:
    n = len(batch)
    code = np.full(n, -1, dtype=np.intp)  # -1: listed
    quiet = batch.chosen == 0
    code[quiet] = 2  # no_positive_value
    code[quiet & (batch.greedy > 0)] = 3  # explored to no contact
    code[quiet & batch.do_not_contact] = 1
    code[quiet & batch.opted_out] = 0
    cut = order_all[n_list:]
    places = np.arange(n_list, len(order_all))
    limit = len(order_all) if capacity is None else capacity
    code[cut] = np.where(places >= limit, 4, 5)  # beyond_capacity, else beyond_budget
    labels: list[str | None] = [*EXCLUSION_REASONS, None]
    return [labels[c] for c in code.tolist()]


def _priced_choice(
    batch: DecisionBatch, cost: FloatArray, price: float
) -> tuple[IntArray, FloatArray, FloatArray]:
    """Action before holdout, its law, and the sort key per arm at a budget price.

    Without a price this is the batch as decided (key: EV). With a price ``lam`` the
    greedy arm is the allowed arm with positive EV that maximises ``EV_a - lam * c_a``
    (the Lagrangian of the budget), exploration keeps its draws, and the key of arm a is
    ``EV_a - lam * c_a``.
    """
    if price == 0.0:
        return batch.chosen, batch.choice_probs, batch.ev_per_arm
    greedy, chosen, key = _priced_arms(batch, cost, price)
    return chosen, choice_probabilities(greedy, batch.allowed, batch.exploration), key


def _priced_arms(
    batch: DecisionBatch, cost: FloatArray, price: float
) -> tuple[IntArray, IntArray, FloatArray]:
    ev = batch.ev_per_arm
    key: FloatArray = ev - price * cost[None, :]
    usable = batch.allowed & (ev > 0)
    best = np.argmax(np.where(usable, key, -np.inf), axis=1) + 1
    greedy = np.where(usable.any(axis=1), best, 0).astype(np.intp)
    chosen = np.where(batch.explored, batch.chosen, greedy).astype(np.intp)
    return greedy, chosen, key


def _cut(
    chosen: IntArray,
    key: FloatArray,
    cost: FloatArray,
    capacity: int | None,
    budget: float | None,
) -> tuple[IntArray, FloatArray, int, FloatArray]:
    """Rows with an arm sorted by key (ties: input order), the sorted keys, the length of
    the prefix within capacity and budget, and the running contact cost."""
    rows = np.flatnonzero(chosen > 0)
    k = key[rows, chosen[rows] - 1]
    by_key = np.lexsort((rows, -k))
    order_all, key_sorted = rows[by_key], k[by_key]
    reserved_cum = np.cumsum(cost[chosen[order_all] - 1])
    return order_all, key_sorted, _list_length(reserved_cum, capacity, budget), reserved_cum


def _listed_value(
    batch: DecisionBatch, cost: FloatArray, price: float, capacity: int | None, budget: float
) -> float:
    _, chosen, key = (
        (batch.greedy, batch.chosen, batch.ev_per_arm)
        if price == 0.0
        else (_priced_arms(batch, cost, price))
    )
    order_all, _, n_list, _ = _cut(chosen, key, cost, capacity, budget)
    listed = order_all[:n_list]
    return float(batch.ev_per_arm[listed, chosen[listed] - 1].sum())


def _priced_spend(
    batch: DecisionBatch, cost: FloatArray, price: float, capacity: int | None
) -> float:
    """Contact cost of the rows whose priced key is positive (best ``capacity`` of them)."""
    _, chosen, key = _priced_arms(batch, cost, price)
    rows = np.flatnonzero(chosen > 0)
    k = key[rows, chosen[rows] - 1]
    keep = rows[k > 0]
    if capacity is not None and len(keep) > capacity:
        top = np.argpartition(-key[keep, chosen[keep] - 1], capacity - 1)[:capacity]
        keep = keep[top]
    return float(cost[chosen[keep] - 1].sum())


def budget_price(
    batch: DecisionBatch, cost: FloatArray, capacity: int | None, budget: float
) -> float:
    """The budget's Lagrange multiplier for :func:`rank` (0 when the budget does not bind).

    Choosing one arm (or none) per customer to maximise total EV within a budget is a
    multiple-choice knapsack. Its Lagrangian relaxation prices the budget at ``lam``: each
    customer takes the arm with the largest ``EV_a - lam * c_a`` and is worth listing when
    that is positive. The spend of that choice falls as ``lam`` rises; bisection finds the
    smallest ``lam`` whose choice fits the budget; of that price, the largest that does
    not fit, and nine prices from half to twice it, the one whose key-ordered prefix (see
    :func:`rank`) holds the most EV is kept, EV order itself (``lam = 0``, the plain
    greedy) included, so the list is never worse than the greedy one. The loss against
    the LP bound is at most about one contact's EV (the LP splits one customer between
    two arms), so it vanishes as the list grows. Deterministic, so a retried request
    gets the same list.

    References
    ----------
    Sinha & Zoltners (1979), The multiple-choice knapsack problem, Operations Research
    27(3), 503-515 (Lagrangian relaxation and the LP bound of the multiple-choice
    knapsack; cited from memory); Everett (1963), Operations Research 11(3), 399-417
    (generalized Lagrange multipliers for resource allocation).
    """
    if _priced_spend(batch, cost, 0.0, capacity) <= budget:
        return 0.0
    positive = cost > 0
    if not positive.any():
        return 0.0
    ev = batch.ev_per_arm[:, positive]
    low, high = 0.0, float(max(ev.max(initial=0.0), 0.0) / cost[positive].min()) + 1.0
    # A relative precision of 1e-6 on the price is far finer than any EV difference
    # between neighbouring lists; the candidates below cover the rest.
    while high - low > 1e-6 * high:
        middle = 0.5 * (low + high)
        if _priced_spend(batch, cost, middle, capacity) <= budget:
            high = middle
        else:
            low = middle
    # The prefix loses part of the last contact's cost at each price; a few prices around
    # the bisection's pick the best boundary.
    candidates = [0.0, low, high, *np.geomspace(0.5 * high, 2.0 * high, 9).tolist()]
    values = np.array([_listed_value(batch, cost, lam, capacity, budget) for lam in candidates])
    # Near-ties (sums in another order) go to the first candidate: EV order when it is as good.
    best = np.flatnonzero(values >= values.max() - 1e-9 * max(1.0, abs(values.max())))[0]
    return float(candidates[int(best)])
