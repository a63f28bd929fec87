"""A small world for the loop tests: a trained Larkspur Tea Club model (invented demo
data), a campaign file, a decision log, and simulated days with known truth."""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from service.decisions import DecisionLog
from service.decisions.outcomes import Outcome
from service.registry import ModelRegistry
from service.scoring import Catalog, bind_campaigns, decide_chunk, emit_columns
from service.simulation import SimulatedCampaign, simulate
from service.training import train_model

CAMPAIGN = "renewal"
VALUE = 40.0
COSTS = {"email": 0.40, "call": 3.50}

CAMPAIGN_TOML = """
[campaigns.renewal]
model = "larkspur"
value = 40.0
exploration = {exploration}
holdout = {holdout}
capacity = 500
confidence = 0.90
salt = "loop-test"
suppression = ["D1-LTC-000007"]

[campaigns.renewal.arms]
email = {{ cost = 0.40 }}
call = {{ cost = 3.50 }}
"""


def write_campaigns(path: Path, *, exploration: float = 0.2, holdout: float = 0.2) -> Path:
    """The campaign file of the loop tests."""
    path.write_text(CAMPAIGN_TOML.format(exploration=exploration, holdout=holdout))
    return path


def train_first_model(models_dir: Path, *, n: int = 4000, seed: int = 1) -> str:
    """Train and promote the first model on a randomized campaign; return its version."""
    frame = simulate("larkspur", n, random_state=seed).to_frame()
    result = train_model(
        frame, treatment="treatment", outcome="renewed", control="none", learner="t",
        base="linear", name="larkspur", models_dir=models_dir, n_bootstrap=5, n_splits=3,
    )  # fmt: skip
    ModelRegistry(models_dir).promote("larkspur", result.version, actor="test", reason="first")
    return result.version


@dataclass(frozen=True)
class Day:
    """One simulated day: the customers, the truth, and what the service decided."""

    sim: SimulatedCampaign
    ids: list[str]
    decision_ids: list[str]
    action: np.ndarray  # 0 none, 1 email, 2 call (campaign arm order)
    chosen: np.ndarray  # action before holdout
    probs: np.ndarray
    outcome: np.ndarray


def customers(sim: SimulatedCampaign, day: int) -> tuple[list[str], dict[str, list[Any]]]:
    """Ids unique to the day and the feature columns as JSON values (None for missing)."""
    assert sim.ids is not None
    ids = [f"D{day}-{i}" for i in sim.ids]
    columns = {
        name: [None if _missing(v) else _plain(v) for v in sim.X[name].tolist()]
        for name in sim.X.columns
    }
    return ids, columns


def _missing(value: Any) -> bool:
    return value is None or (isinstance(value, float) and np.isnan(value))


def _plain(value: Any) -> Any:
    return value.item() if hasattr(value, "item") else value


def draw_outcomes(sim: SimulatedCampaign, action: np.ndarray, seed: int) -> np.ndarray:
    """Outcomes drawn from the true law of each customer under the action taken.

    The stream is keyed (seed, 2) so that it never coincides with a simulate() stream.
    """
    rng = np.random.default_rng((seed, 2))
    expected = sim.expected_outcomes()  # columns none, email, call (campaign order)
    return (rng.random(len(action)) < expected[np.arange(len(action)), action]).astype(float)


def run_day_in_process(
    catalog: Catalog, log: DecisionLog, store: DecisionLog | None, day: int, n: int
) -> Day:
    """Score a day's customers through the scoring engine, log them, post outcomes (unless
    ``store`` is None)."""
    sim = simulate("larkspur", n, random_state=100 + day)
    ids, columns = customers(sim, day)
    bound = catalog.get(CAMPAIGN)
    table = bound.schema.table_from_columns(columns, n)
    decided = decide_chunk(bound, ids, table, None)
    logged = emit_columns(decided)
    log.append_columns_sync([logged])
    batch = decided.batch
    y = draw_outcomes(sim, batch.action, seed=200 + day)
    if store is not None:
        store.record_outcomes(
            [Outcome(d, float(v)) for d, v in zip(logged.decision_id, y, strict=True)]
        )
    d_ids = list(logged.decision_id)
    return Day(sim, ids, d_ids, batch.action, batch.chosen, batch.action_probs, y)


def bind(models_dir: Path, campaigns_file: Path) -> Catalog:
    """The campaign catalog bound to the registry's champions (scikit-learn path)."""
    from service.policy import load_campaigns

    return bind_campaigns(ModelRegistry(models_dir), load_campaigns(campaigns_file), compile=False)


def true_policy_value(expected: np.ndarray, target: np.ndarray) -> float:
    """True net value per decision of a policy given as (n, 3) action probabilities."""
    costs = np.array([0.0, COSTS["email"], COSTS["call"]])
    net = VALUE * expected - costs
    return float((target * net).sum(axis=1).mean())


def expected_for(days: list[Day], decision_ids: list[str]) -> np.ndarray:
    """True expected outcomes (n, 3) of the logged decisions, aligned by decision id."""
    where = {d: (k, i) for k, day in enumerate(days) for i, d in enumerate(day.decision_ids)}
    out = np.empty((len(decision_ids), 3))
    for row, d in enumerate(decision_ids):
        k, i = where[d]
        out[row] = days[k].sim.expected_outcomes()[i]
    return out


def train_worse_model(models_dir: Path, *, n: int = 4000, seed: int = 7) -> str:
    """A version trained on a campaign whose treatment labels were shuffled: no signal."""
    frame = simulate("larkspur", n, random_state=seed).to_frame()
    rng = np.random.default_rng((seed, 1))  # not simulate()'s own stream
    frame["treatment"] = rng.permutation(frame["treatment"].to_numpy())
    result = train_model(
        frame, treatment="treatment", outcome="renewed", control="none", learner="t",
        base="linear", name="larkspur", models_dir=models_dir, n_bootstrap=5, n_splits=3,
    )  # fmt: skip
    return result.version


class started:  # noqa: N801 - used like a function: `async with started(app) as http`
    """Run an app's lifespan and give an httpx client talking to it in-process."""

    def __init__(self, app: Any) -> None:
        import httpx

        self.app = app
        self._lifespan = app.router.lifespan_context(app)
        self._client = httpx.AsyncClient(
            transport=httpx.ASGITransport(app=app), base_url="http://upshot.test"
        )

    async def __aenter__(self) -> Any:
        await self._lifespan.__aenter__()
        return self._client

    async def __aexit__(self, *exc: object) -> None:
        await self._client.aclose()
        await self._lifespan.__aexit__(*exc)


def make_app(models_dir: Path, campaigns_file: Path, log_path: Path | str) -> Any:
    """The real service app on this world (scikit-learn scoring path, no API keys)."""
    from service.api.app import create_app
    from service.config import load_settings

    settings = load_settings(
        models_dir=models_dir,
        campaigns_file=campaigns_file,
        decision_log=str(log_path),
        compiled=False,
    )
    return create_app(settings)


async def score_columns(client: Any, sim: SimulatedCampaign, day: int) -> dict[str, Any]:
    """POST a day's customers to /v1/score/batch in column form; return the columns."""
    ids, columns = customers(sim, day)
    response = await client.post(
        "/v1/score/batch", json={"campaign": CAMPAIGN, "columns": {"id": ids, **columns}}
    )
    assert response.status_code == 200, response.text
    cols: dict[str, Any] = response.json()["columns"]
    return cols


ACTIONS = {"none": 0, "email": 1, "call": 2}


def expected_qini(model: Any, sim: SimulatedCampaign, rows: np.ndarray | None = None) -> float:
    """Mean over arms of the normalised Qini coefficient of ``model``'s uplift scores on a
    fresh randomized campaign, with each outcome replaced by its true expectation under
    the assigned arm (removes outcome noise; the ranking is what is judged)."""
    from service.evaluation import qini_coefficient

    rows = np.arange(len(sim.y)) if rows is None else rows
    tau = np.asarray(model.predict(sim.X.iloc[rows]))
    labels = list(sim.labels)
    assigned = np.array([labels.index(t) for t in sim.treatment[rows]])
    y = sim.expected_outcomes()[rows, assigned]
    return float(
        np.mean(
            [
                qini_coefficient(y, sim.treatment[rows], tau[:, j], control=sim.control, arm=arm)
                for j, arm in enumerate(sim.arms)
            ]
        )
    )
