"""``upshot demo-data`` and ``upshot demo-day``: invented Larkspur Tea Club data for the demo.

``demo-data`` writes a simulated randomized campaign as a training table. ``demo-day``
plays one day of the demo against a running service: it scores a day of invented
customers over HTTP (``POST /v1/score/batch``), then draws what each customer did from
the simulation's known response law, given the action the service took, and writes the
outcomes as a file for ``upshot outcomes import``. The data is invented, for the demo only.
"""

from __future__ import annotations

import argparse
import datetime
import os
from pathlib import Path
from typing import Any

from service.errors import DataError

__all__ = ["register"]

_DEMO = "larkspur"


def register(subparsers: Any) -> None:
    """Add ``demo-data`` and ``demo-day``."""
    data = subparsers.add_parser(
        "demo-data", help="write the invented demo campaign as a training table",
        description="Write a simulated randomized campaign of the fictional Larkspur Tea "
        "Club (invented data, demo only): features, treatment (none, email, call), renewed.",
    )  # fmt: skip
    data.add_argument("out", type=Path, help="table to write (.csv or .parquet)")
    data.add_argument("--rows", type=int, default=20000, help="customers (default 20000)")
    data.add_argument("--seed", type=int, default=0, help="random seed (default 0)")
    data.set_defaults(handler=_data)

    day = subparsers.add_parser(
        "demo-day", help="score a day of invented customers and draw their outcomes",
        description=__doc__,
    )  # fmt: skip
    day.add_argument("day", type=int, help="day number (also the simulation seed)")
    day.add_argument("--campaign", default="larkspur-renewal", help="campaign id")
    day.add_argument("--customers", type=int, default=5000, help="customers (default 5000)")
    day.add_argument(
        "--url",
        default=f"http://127.0.0.1:{os.environ.get('UPSHOT_PORT', '8000')}",
        help="the service (default http://127.0.0.1:$UPSHOT_PORT or :8000)",
    )
    day.add_argument("--key", default=os.environ.get("UPSHOT_KEY"), help="API key ($UPSHOT_KEY)")
    day.add_argument("--out", type=Path, help="outcome file (default outcomes-dayN.csv)")
    day.set_defaults(handler=_day)


def _data(args: argparse.Namespace) -> int:
    from service.simulation import simulate

    frame = simulate(_DEMO, args.rows, random_state=args.seed).to_frame()
    if args.out.suffix.lower() in (".parquet", ".pq"):
        frame.to_parquet(args.out, index=False)
    else:
        frame.to_csv(args.out, index=False)
    print(f"wrote {len(frame):,} invented customers of Larkspur Tea Club to {args.out}")
    return 0


def _day(args: argparse.Namespace) -> int:
    import httpx
    import numpy as np
    import pandas as pd

    from service.simulation import simulate

    sim = simulate(_DEMO, args.customers, random_state=args.day)
    X = sim.X.astype(object).where(sim.X.notna(), None)
    ids = [f"DAY{args.day}-{i}" for i in (sim.ids if sim.ids is not None else range(len(X)))]
    columns = {"id": ids, **{str(c): X[c].tolist() for c in X}}
    started = datetime.datetime.now(datetime.UTC).strftime("%Y-%m-%dT%H:%M:%SZ")
    headers = {"Authorization": f"Bearer {args.key}"} if args.key else {}
    try:
        response = httpx.post(
            f"{args.url}/v1/score/batch", headers=headers, timeout=300,
            json={"campaign": args.campaign, "columns": columns},
        )  # fmt: skip
    except httpx.HTTPError as err:
        raise DataError(
            f"Cannot reach the service at {args.url} ({err}); start it first "
            "(scripts/demo in another terminal) or pass --url."
        ) from err
    if response.status_code != 200:
        raise DataError(
            f"The service answered {response.status_code} for campaign {args.campaign!r}: "
            f"{response.text[:500]}"
        )
    answer = response.json()["columns"]
    labels = [str(sim.control), *(str(a) for a in sim.arms)]
    position = {label: j for j, label in enumerate(labels)}
    action = np.array([position[a] for a in answer["action"]])
    p = sim.expected_outcomes()[np.arange(len(action)), action]
    outcome = (np.random.default_rng(args.day).random(len(action)) < p).astype(int)
    out = args.out or Path(f"outcomes-day{args.day}.csv")
    pd.DataFrame({"decision_id": answer["decision_id"], "outcome": outcome}).to_csv(
        out, index=False
    )
    mix = pd.Series(answer["action"]).value_counts().to_dict()
    print(
        f"day {args.day} starts at {started}: {len(ids):,} invented customers scored for "
        f"{args.campaign} ({', '.join(f'{k} {v:,}' for k, v in sorted(mix.items()))}); "
        f"outcomes in {out}"
    )
    return 0
