"""``upshot serve`` and ``upshot demo``: run the scoring service on uvicorn."""

from __future__ import annotations

import argparse
import logging
import os
from pathlib import Path
from typing import Any

__all__ = ["register"]

logger = logging.getLogger(__name__)

DEMO_MODEL = "larkspur"
DEMO_CAMPAIGNS = Path("campaigns/larkspur.toml")
DEMO_ROWS = 20000

_SERVE = """\
Serve contact decisions over HTTP: POST /v1/score, /v1/score/batch and /v1/rank, with
/docs, /healthz, /readyz and /metrics. Settings come from UPSHOT_* environment variables
(UPSHOT_MODELS_DIR, UPSHOT_CAMPAIGNS_FILE, UPSHOT_DECISION_LOG, UPSHOT_HOST, UPSHOT_PORT,
UPSHOT_API_KEYS, ...); the options below override them. Without API keys the service
only binds to loopback.
"""

_DEMO = """\
The demo in one command: if model "larkspur" has no champion yet, simulate the fictional
Larkspur Tea Club campaign (20,000 customers), train a model on it and promote it; then
serve campaigns/larkspur.toml on 127.0.0.1:8000 with the decision log in
var/decisions.sqlite3. The data is invented, for the demo only.
"""


def register(subparsers: Any) -> None:
    """Add ``serve`` and ``demo`` to the ``upshot`` sub-commands."""
    serve = subparsers.add_parser(
        "serve", help="serve contact decisions over HTTP", description=_SERVE
    )
    _server_options(serve)
    serve.add_argument("--host", help="interface to bind (env UPSHOT_HOST; default 127.0.0.1)")
    serve.add_argument("--port", type=int, help="port (env UPSHOT_PORT; default 8000)")
    serve.set_defaults(handler=_serve)

    demo = subparsers.add_parser(
        "demo", help="build the demo model if needed and serve it", description=_DEMO
    )
    _server_options(demo)
    demo.add_argument("--port", type=int, default=8000, help="port (default 8000)")
    demo.set_defaults(handler=_demo)


def _server_options(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--models-dir", type=Path, help="model registry (env UPSHOT_MODELS_DIR)")
    parser.add_argument(
        "--campaigns", type=Path, help="campaign file, TOML (env UPSHOT_CAMPAIGNS_FILE)"
    )
    parser.add_argument(
        "--decision-log", help="SQLite decision log path (env UPSHOT_DECISION_LOG)"
    )
    parser.add_argument(
        "--access-log", action="store_true", help="log every request (off by default)"
    )
    parser.add_argument(
        "--form",
        choices=("compact", "full"),
        help="model form to serve (env UPSHOT_FORM; default compact where a version has one, "
        "else full): compact = the full-data fit plus a model of the bootstrap spread, "
        "checked for fidelity at training; full = every bootstrap refit",
    )


def _overrides(args: argparse.Namespace) -> dict[str, Any]:
    given = {
        "models_dir": args.models_dir,
        "campaigns_file": args.campaigns,
        "decision_log": args.decision_log,
        "form": args.form,
        "host": getattr(args, "host", None),
        "port": getattr(args, "port", None),
    }
    return {key: value for key, value in given.items() if value is not None}


def _serve(args: argparse.Namespace) -> int:
    from service.config import load_settings

    return _run(load_settings(**_overrides(args)), access_log=args.access_log)


def _run(settings: Any, *, access_log: bool, banner: str = "") -> int:
    import uvicorn

    from service.api.app import create_app
    from service.api.logs import configure_logging

    configure_logging(settings.log_level)
    app = create_app(settings)
    if banner:
        print(banner, flush=True)
    uvicorn.run(
        app,
        host=settings.host,
        port=settings.port,
        log_config=None,
        access_log=access_log,
        log_level=settings.log_level,
        timeout_keep_alive=30,
    )
    return 0


def _demo(args: argparse.Namespace) -> int:
    from service.config import load_settings

    defaults = {
        "models_dir": Path("models"),
        "campaigns_file": DEMO_CAMPAIGNS,
        "decision_log": "var/decisions.sqlite3",
    }
    # The demo's own defaults, unless the environment or an option says otherwise.
    overrides = {
        **{k: v for k, v in defaults.items() if f"UPSHOT_{k.upper()}" not in os.environ},
        **_overrides(args),
        "host": "127.0.0.1",
    }
    settings = load_settings(**overrides)
    ensure_demo_model(settings.models_dir)
    return _run(settings, access_log=args.access_log, banner=_curl_examples(settings.port))


def ensure_demo_model(models_dir: Path, *, rows: int = DEMO_ROWS) -> str:
    """The champion version of the demo model, training and promoting one if needed."""
    from service.registry import ModelRegistry

    registry = ModelRegistry(models_dir)
    champion = registry.champion(DEMO_MODEL)
    if champion is not None:
        return champion
    from service.simulation import simulate
    from service.training import train_model

    print(
        f"No champion of model {DEMO_MODEL!r} in {models_dir}/: simulating the fictional "
        f"Larkspur Tea Club campaign ({rows:,} customers) and training a model on it. "
        "This happens once and takes a few minutes.",
        flush=True,
    )
    campaign = simulate(DEMO_MODEL, n=rows, random_state=0)
    result = train_model(
        campaign.to_frame(),
        treatment=campaign.treatment_name,
        outcome=campaign.outcome_name,
        features=list(campaign.X.columns),
        name=DEMO_MODEL,
        models_dir=models_dir,
        random_state=0,
        value=40.0,
        cost={"email": 0.40, "call": 3.50},
        progress=True,
        source="the simulated Larkspur Tea Club campaign (invented demo data)",
    )
    registry.promote(
        DEMO_MODEL, result.version, actor="upshot demo", reason="demo model built by upshot demo"
    )
    print(f"Trained and promoted {DEMO_MODEL}:{result.version}.", flush=True)
    return result.version


def _curl_examples(port: int) -> str:
    base = f"http://127.0.0.1:{port}"
    customer = (
        '{"campaign": "larkspur-renewal", "customer": {"id": "LTC-000123", "features": '
        '{"tenure_months": 14, "monthly_spend": 18.5, "cups_logged_last_30d": 9, '
        '"support_tickets_90d": 0, "plan": "classic", "region": "north", '
        '"signup_channel": "web"}}}'
    )
    ranked = (
        '{"campaign": "larkspur-renewal", "capacity": 2, "columns": {"id": ["LTC-000001", '
        '"LTC-000002", "LTC-000003"], "tenure_months": [3, 40, 12], "monthly_spend": [12.0, '
        '36.5, null], "cups_logged_last_30d": [2, 30, 11], "support_tickets_90d": [0, 4, 1], '
        '"plan": ["sampler", "connoisseur", "classic"], "region": ["south", "west", "east"], '
        '"signup_channel": ["web", "gift", "app"]}}'
    )
    return f"""
upshot demo: Larkspur Tea Club (a fictional tea subscription; invented data, demo only)
  API docs      {base}/docs
  one customer  curl -s {base}/v1/score -H 'Content-Type: application/json' -d '{customer}'
  ranked list   curl -s {base}/v1/rank -H 'Content-Type: application/json' -d '{ranked}'
  campaigns     curl -s {base}/v1/campaigns
  readiness     curl -s {base}/readyz
Decisions are estimates, not advice: honour opt-outs and the contact law where each
customer lives (see README, "Responsible use"). Stop with Ctrl-C.
"""


def _main() -> int:
    """``python -m service.commands.serve serve|demo ...`` (same as ``upshot serve|demo``)."""
    parser = argparse.ArgumentParser(prog="upshot")
    register(parser.add_subparsers(title="commands", metavar="COMMAND", required=True))
    args = parser.parse_args()
    code: int = args.handler(args)
    return code


if __name__ == "__main__":
    raise SystemExit(_main())
