"""Drift over the decision log against the serving bundle's training reference."""

from __future__ import annotations

import dataclasses

import orjson
from loop_world import CAMPAIGN

from service.loop import read_logged
from service.monitoring import DriftCollector, log_drift
from service.registry import ModelRegistry


def test_same_population_is_stable_and_a_shift_is_flagged(world) -> None:
    logged = read_logged(world.log_path, CAMPAIGN)
    bundle = ModelRegistry(world.models_dir).load("larkspur", world.first_version)
    report = log_drift(logged, bundle, last=2000)
    assert report.n == 2000
    kinds = {(i.kind, i.name) for i in report.items}
    assert ("score", "email") in kinds and ("feature", "monthly_spend") in kinds
    # Fresh customers of the same simulated population: nothing to act on.
    assert report.level in ("stable", "watch")
    assert all(i.level == "stable" for i in report.items if i.kind == "feature")
    # The same customers with tenure tripled and missing regions: flagged.
    shifted = [
        orjson.dumps(
            {**row, "tenure_months": 3 * (row["tenure_months"] or 0), "region": None}
        ).decode()
        for row in logged.feature_rows()
    ]
    detail = dataclasses.replace(logged.detail, features=shifted)
    moved = log_drift(dataclasses.replace(logged, detail=detail), bundle, last=2000)
    levels = {i.name: i.level for i in moved.items if i.kind == "feature"}
    assert levels["tenure_months"] == "act" and levels["region"] == "act"
    assert levels["plan"] == "stable"


def test_drift_gauges_publish_psi_per_campaign_and_feature(world) -> None:
    bundle = ModelRegistry(world.models_dir).load("larkspur", world.first_version)
    collector = DriftCollector(lambda: (world.log_path, {CAMPAIGN: bundle}), window=1000)
    collector.refresh()
    (family,) = list(collector.collect())
    samples = {(s.labels["kind"], s.labels["name"]): s.value for s in family.samples}
    assert family.name == "upshot_drift_psi"
    assert ("feature", "tenure_months") in samples and ("score", "call") in samples
    assert all(v >= 0 for v in samples.values())
