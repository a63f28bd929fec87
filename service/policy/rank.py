"""Ranked contact lists: best expected value first, cut at capacity and/or budget."""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
import numpy.typing as npt

from service.errors import DataError
from service.policy.decide import DecisionBatch

__all__ = ["EXCLUSION_REASONS", "RankResult", "rank"]

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


def rank(
    batch: DecisionBatch,
    ids: Sequence[object],
    capacity: int | None = None,
    budget: float | None = None,
    *,
    costs: FloatArray | Sequence[float],
) -> RankResult:
    """Order the contacts of a decided batch by expected value and cut the list.

    The candidates whose action before holdout (``batch.chosen``, greedy or explored)
    is an arm are sorted by the EV of that arm, best first (ties: input order). The list
    is the longest prefix of that order with at most ``capacity`` rows whose summed
    contact cost is at most ``budget``; a cheaper contact further down never fills left
    over budget, so the list stays an EV prefix. Held-out rows keep their place and count
    against capacity and budget, so that the cut does not depend on the holdout draws.
    Expect about ``(1 - holdout)`` of capacity and budget to be used by real contacts.

    Meaning of the logged propensity. Let the *cut* be the place of the last listed row
    in the order (EV, then input position). Given the cut, a customer gets arm a exactly
    when the exploration draws choose a, the (EV_a, position) pair sorts at or before
    the cut, and the holdout draw does not withhold it, so

    ``P(a | cut) = (1 - h) * p_a * [EV_a ranks at or before the cut]``, and
    ``P(none | cut) = 1 - sum_a P(a | cut)``,

    where ``p`` is the exploration law of :func:`decide`. These are exact for the
    customer's own exploration and holdout draws, holding the cut fixed. The cut itself
    depends on all candidates' draws, this customer's included: their own draw can move
    it by one place under a capacity limit (a few under a budget), which the conditioning
    ignores; with lists of hundreds of rows the effect is negligible. When nothing is cut,
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
    the logged propensities are for).
    """
    n, k = len(batch), batch.n_arms
    ids = list(ids)
    if len(ids) != n:
        raise DataError(f"ids has {len(ids)} entries for {n} decided candidates; align them.")
    cost = np.asarray(costs, dtype=np.float64)
    if cost.shape != (k,) or not np.isfinite(cost).all() or (cost < 0).any():
        raise DataError(f"costs must be {k} finite numbers >= 0, one per arm; got {costs!r}.")
    _check_limits(capacity, budget)

    chosen = batch.chosen
    rows = np.flatnonzero(chosen > 0)
    ev = batch.ev_per_arm[rows, chosen[rows] - 1]
    by_value = np.lexsort((rows, -ev))
    order_all, ev_sorted = rows[by_value], ev[by_value]
    reserved_cum = np.cumsum(cost[chosen[order_all] - 1])
    n_list = _list_length(reserved_cum, capacity, budget)
    order = order_all[:n_list]

    eligible = _eligible(batch.ev_per_arm, order_all, ev_sorted, n_list)
    probs = batch.choice_probs.copy()
    probs[:, 1:] *= (1.0 - batch.holdout_rate) * eligible
    probs[:, 0] = batch.choice_probs[:, 0] + (batch.choice_probs[:, 1:] - probs[:, 1:]).sum(1)

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
        cut_expected_value=float(ev_sorted[n_list - 1]) if 0 < n_list < len(rows) else None,
        spend=float(cost[chosen[order] - 1][~batch.holdout[order]].sum()),
        reserved=float(reserved_cum[n_list - 1]) if n_list else 0.0,
        capacity=capacity,
        budget=budget,
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
