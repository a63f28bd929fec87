"""Every registered design: lookup by name, seeded determinism, shapes and speed."""

from __future__ import annotations

import inspect
import time

import numpy as np
import pandas as pd
import pytest

import service.simulation as simulation
from service.errors import NotFoundError
from service.simulation import DESIGNS, simulate

ARMS = {
    "nw_a": 1,
    "nw_b": 1,
    "nw_c": 1,
    "nw_d": 1,
    "groups": 1,
    "groups_two_arms": 2,
    "larkspur": 2,
}


def test_registry_holds_the_documented_designs() -> None:
    assert set(DESIGNS) == set(ARMS)
    with pytest.raises(TypeError):
        DESIGNS["new"] = simulate  # type: ignore[index]


def test_all_lists_exactly_the_public_names() -> None:
    public = {
        name
        for name, value in vars(simulation).items()
        if not name.startswith("_") and not inspect.ismodule(value) and name != "annotations"
    }
    assert set(simulation.__all__) == public


def test_unknown_design_is_refused() -> None:
    with pytest.raises(NotFoundError, match="design 'nw_z' does not exist; choose one of"):
        simulate("nw_z")


@pytest.mark.parametrize("name", sorted(ARMS))
def test_same_seed_same_campaign_other_seed_other_campaign(name: str) -> None:
    first, again, other = (simulate(name, 500, random_state=s) for s in (1, 1, 2))
    pd.testing.assert_frame_equal(first.to_frame(truth=True), again.to_frame(truth=True))
    assert not np.array_equal(first.y, other.y) or not first.X.equals(other.X)
    generator = simulate(name, 500, random_state=np.random.default_rng(1))
    pd.testing.assert_frame_equal(first.to_frame(truth=True), generator.to_frame(truth=True))


@pytest.mark.parametrize("name", sorted(ARMS))
def test_shapes_and_kinds(name: str) -> None:
    c = simulate(name, 321, random_state=0)
    k = ARMS[name]
    assert c.name == name and len(c.X) == 321 and c.n_arms == k
    assert c.treatment.shape == c.y.shape == c.mu0.shape == c.propensity.shape == (321,)
    assert c.tau.shape == (321, k) and c.propensity_matrix.shape == (321, k + 1)
    assert c.y.dtype == np.float64 and c.tau.dtype == np.float64
    assert set(np.unique(c.treatment)) <= set(c.labels)
    assert c.outcome_type == ("continuous" if name.startswith("nw_") else "binary")
    assert not set(c.X.columns) & {"treatment", "outcome", "renewed"}


def test_options_reach_the_design() -> None:
    c = simulate("nw_c", 100, random_state=0, d=12, sigma=0.5)
    assert c.X.shape == (100, 12)


@pytest.mark.parametrize("name", sorted(ARMS))
def test_hundred_thousand_rows_in_under_a_second(name: str) -> None:
    simulate(name, 1000)  # warm up imports and caches
    start = time.perf_counter()
    simulate(name, 100_000, random_state=1)
    assert time.perf_counter() - start < 1.0
