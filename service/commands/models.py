"""``upshot models``: list, show, verify, promote and roll back model versions."""

from __future__ import annotations

import argparse
import json
from typing import Any

from service.commands._common import add_models_dir, default_actor, print_metrics, resolve_ref
from service.commands._gate import add_replay_options, enforce_replay
from service.errors import BundleError, NotFoundError

__all__ = ["register"]


def register(subparsers: Any) -> None:
    """Add ``models`` and its actions to the ``upshot`` sub-commands."""
    parser = subparsers.add_parser(
        "models",
        help="list, inspect, verify, promote and roll back model versions",
        description="Manage the model registry: one champion (and optionally a "
        "challenger) per model name; every change is recorded with who, when and why.",
    )
    actions = parser.add_subparsers(title="actions", metavar="ACTION", required=True)

    listing = actions.add_parser("list", help="every version with its role and status")
    listing.add_argument("--json", action="store_true", help="print JSON")
    listing.set_defaults(handler=_list)

    show = actions.add_parser("show", help="summary of one version")
    show.add_argument(
        "ref",
        metavar="NAME[:VERSION]",
        help="model, optionally with version (default: champion, else latest)",
    )
    show.add_argument("--json", action="store_true", help="print the whole manifest")
    show.set_defaults(handler=_show)

    promote = actions.add_parser("promote", help="make a version the champion")
    promote.add_argument("name")
    promote.add_argument("version")
    promote.add_argument(
        "--challenger", action="store_true", help="mark it as challenger instead of champion"
    )
    add_replay_options(promote)
    promote.set_defaults(handler=_promote)

    rollback = actions.add_parser("rollback", help="restore the previous champion")
    rollback.add_argument("name")
    rollback.set_defaults(handler=_rollback)

    for sub in (promote, rollback):
        sub.add_argument("--reason", required=True, help="why (kept in the history)")
        sub.add_argument(
            "--actor", default=default_actor(), help="who (default: the current user)"
        )

    verify = actions.add_parser("verify", help="check every bundle's hashes (no unpickling)")
    verify.add_argument(
        "ref", nargs="?", metavar="NAME[:VERSION]", help="limit to one model or version"
    )
    verify.set_defaults(handler=_verify)

    history = actions.add_parser("history", help="who changed what, when and why")
    history.add_argument("name")
    history.set_defaults(handler=_history)

    for sub in (listing, show, promote, rollback, verify, history):
        add_models_dir(sub)


def _registry(args: argparse.Namespace) -> Any:
    from service.registry import ModelRegistry

    return ModelRegistry(args.models_dir)


def _role(registry: Any, name: str, version: str) -> str:
    if registry.champion(name) == version:
        return "champion"
    return "challenger" if registry.challenger(name) == version else ""


def _mean_qini(manifest: dict[str, Any]) -> float | None:
    values = [m["qini_normalized"] for m in manifest["metrics"]["arms"].values()]
    present = [v for v in values if v is not None]
    return sum(present) / len(present) if present else None


def _rows(registry: Any) -> list[dict[str, Any]]:
    rows = []
    for name in registry.names():
        for version in registry.versions(name):
            row: dict[str, Any] = {
                "name": name,
                "version": version,
                "role": _role(registry, name, version),
            }
            try:
                manifest = registry.verify(name, version)
            except BundleError as err:
                row.update(status="FAILED", problem=str(err))
            else:
                row.update(
                    status="ok",
                    created_at=manifest["created_at"],
                    learner=f"{manifest['learner']['name']}/{manifest['learner']['base']}",
                    rows=manifest["training_data"]["rows"],
                    qini_normalized=_mean_qini(manifest),
                )
            rows.append(row)
    return rows


def _list(args: argparse.Namespace) -> int:
    registry = _registry(args)
    rows = _rows(registry)
    if args.json:
        print(json.dumps(rows, indent=2))
        return 0
    if not rows:
        print(f"no models in {registry.root}; train one with `upshot train`")
        return 0
    header = (
        f"{'NAME':<20} {'VERSION':<8} {'ROLE':<10} {'STATUS':<6} {'CREATED (UTC)':<19} "
        f"{'LEARNER':<16} {'ROWS':>8} {'QINI':>7}"
    )
    print(header)
    for r in rows:
        if r["status"] != "ok":
            print(f"{r['name']:<20} {r['version']:<8} {r['role']:<10} FAILED {r['problem']}")
            continue
        qini = "n/a" if r["qini_normalized"] is None else f"{r['qini_normalized']:.3f}"
        print(
            f"{r['name']:<20} {r['version']:<8} {r['role']:<10} {'ok':<6} "
            f"{r['created_at'][:19].replace('T', ' '):<19} {r['learner']:<16} "
            f"{r['rows']:>8} {qini:>7}"
        )
    print("QINI: normalised Qini, out-of-fold, mean over arms (0 = random, 1 = best possible)")
    return 0


def _show(args: argparse.Namespace) -> int:
    registry = _registry(args)
    name, version = resolve_ref(registry, args.ref)
    m = registry.verify(name, version)
    if args.json:
        print(json.dumps(m, indent=2))
        return 0
    role = _role(registry, name, version)
    learner, data = m["learner"], m["training_data"]
    stat = "response rate" if m["outcome_type"] == "binary" else "mean outcome"
    features = ", ".join(f"{f['name']} ({f['kind'][:3]})" for f in m["features"])
    print(f"{name} {version}" + (f" ({role})" if role else ""))
    print(f"  created      {m['created_at']}")
    print(
        f"  learner      {learner['name']} on {learner['base']} base models "
        f"({m['selection']['mode']}), {learner['bootstrap']['n_bootstrap']} bootstrap refits"
    )
    print(
        f"  outcome      {m['outcome_type']}; control {m['control']!r}; "
        f"arms {', '.join(map(repr, m['arms']))}"
    )
    print(f"  data         {data['rows']} rows, sha256 {data['sha256'][:16]}...")
    for label, g in data["groups"].items():
        print(f"               {label}: {g['rows']} rows, {stat} {g['outcome_mean']:.4g}")
    print(f"  features     {features}")
    from service.registry.forms import pick_form

    form, why = pick_form(m)
    print(f"  serving form {form} ({why})")
    print("  metrics (cross-validated, out-of-fold):")
    print_metrics(m)
    print(f"  report       {registry.path(name, version) / 'report' / 'index.html'}")
    return 0


def _promote(args: argparse.Namespace) -> int:
    registry = _registry(args)
    role = "challenger" if args.challenger else "champion"
    before = registry.champion(args.name)
    if args.require_replay and role == "champion":
        enforce_replay(args, registry)
    registry.promote(args.name, args.version, actor=args.actor, reason=args.reason, role=role)
    if role == "champion" and before == args.version:
        print(f"{args.name} {args.version} already is the champion; nothing changed")
    else:
        print(
            f"{args.name} {args.version} is now the {role}"
            + (f" (was {before})" if role == "champion" and before else "")
        )
    return 0


def _rollback(args: argparse.Namespace) -> int:
    registry = _registry(args)
    before = registry.champion(args.name)
    version = registry.rollback(args.name, actor=args.actor, reason=args.reason)
    print(f"{args.name} rolled back: {version} is the champion again (was {before})")
    return 0


def _verify(args: argparse.Namespace) -> int:
    from service.registry import parse_ref

    registry = _registry(args)
    if args.ref:
        name, version = parse_ref(args.ref)
        targets = (
            [(name, registry.resolve(name, version))]
            if version
            else [(name, v) for v in registry.versions(name)]
        )
        if not targets:
            raise NotFoundError(f"Model {name!r} has no versions in {registry.root}.")
    else:
        targets = [(n, v) for n in registry.names() for v in registry.versions(n)]
    failed = 0
    for name, version in targets:
        try:
            registry.verify(name, version)
        except BundleError as err:
            failed += 1
            print(f"FAILED {name} {version}: {err}")
        else:
            print(f"ok     {name} {version}")
    print(
        f"{len(targets) - failed} of {len(targets)} bundle(s) verified"
        + (f"; {failed} FAILED" if failed else "")
    )
    return 1 if failed else 0


def _history(args: argparse.Namespace) -> int:
    registry = _registry(args)
    events = registry.history(args.name)
    if not events:
        raise NotFoundError(f"Model {args.name!r} has no history in {registry.root}.")
    for e in events:
        who = f" by {e['actor']}: {e.get('reason', '')}" if "actor" in e else ""
        print(f"{e['at'][:19].replace('T', ' ')}  {e['action']:<11} {e['version']}{who}")
    return 0
