"""``upshot segments``: who is persuadable, as readable segments with honest figures."""

from __future__ import annotations

import argparse
import json
from pathlib import Path
from typing import Any

from service.commands._common import add_models_dir, resolve_ref

__all__ = ["register"]

_DESCRIPTION = """\
Print the honest segments of a model version: for each contact arm, a shallow tree
grown on half of the training rows and estimated on the other half, with each
segment's share, observed uplift and 95% interval, control rate, mean predicted uplift
and reading (persuadables, do-not-disturb, sure things, lost causes). Every version
stores its segments at the default depth and minimum share; other settings need the
training table again (--data), checked against the version's data fingerprint.
"""


def register(subparsers: Any) -> None:
    """Add ``segments`` to the ``upshot`` sub-commands."""
    parser = subparsers.add_parser(
        "segments", help="readable segments of who is persuadable", description=_DESCRIPTION
    )
    parser.add_argument(
        "ref",
        metavar="NAME[:VERSION]",
        help="model, optionally with version (default: champion, else latest)",
    )
    parser.add_argument("--depth", type=int, help="tree depth, 1-4 (default: as stored, 3)")
    parser.add_argument(
        "--min-share",
        type=float,
        help="smallest segment as a share of the rows growing the tree (default: as stored, 0.05)",
    )
    parser.add_argument(
        "--data",
        type=Path,
        metavar="FILE",
        help="the training table, to compute segments at another depth or minimum share",
    )
    parser.add_argument("--json", action="store_true", help="print JSON")
    add_models_dir(parser)
    parser.set_defaults(handler=run)


def _recompute(
    registry: Any, name: str, version: str, manifest: dict[str, Any], args: Any
) -> dict[str, Any]:
    from service.errors import DataError
    from service.training import data_fingerprint, prepare_training_data, read_table
    from service.training.train import SEGMENT_DEPTH, SEGMENT_MIN_SHARE, segments_entry

    columns = manifest["training_data"]["columns"]
    data = prepare_training_data(
        read_table(args.data),
        treatment=columns["treatment"],
        outcome=columns["outcome"],
        control=manifest["control"],
        features=columns["features"],
        sample_weight=columns.get("sample_weight"),
        propensity=columns.get("propensity"),
        n_splits=int(manifest["metrics"]["n_splits"]),
        source=str(args.data),
    )
    if data_fingerprint(data)["sha256"] != manifest["training_data"]["sha256"]:
        raise DataError(
            f"{args.data} is not the table {name}:{version} was trained on (its data "
            "fingerprint differs); pass the same file, so that the stored out-of-fold "
            "predictions line up with its rows."
        )
    oof = registry.out_of_fold(name, version)
    scores = oof.scores[:, [list(oof.arms).index(arm) for arm in data.arms]]
    stored = manifest.get("segments") or {}
    return segments_entry(
        data,
        scores,
        depth=args.depth or stored.get("depth", SEGMENT_DEPTH),
        min_share=args.min_share or stored.get("min_share", SEGMENT_MIN_SHARE),
        random_state=int(stored.get("random_state", 0)),
    )


def run(args: argparse.Namespace) -> int:
    """Print the stored segments, or compute them again from the training table."""
    from service.errors import DataError
    from service.registry import ModelRegistry
    from service.reporting.segments import segments_text

    registry = ModelRegistry(args.models_dir)
    name, version = resolve_ref(registry, args.ref)
    manifest = registry.verify(name, version)
    stored = manifest.get("segments")
    same = (
        stored is not None
        and (args.depth in (None, stored["depth"]))
        and (args.min_share in (None, stored["min_share"]))
    )
    if args.data is not None:
        entry = _recompute(registry, name, version, manifest, args)
    elif same and stored is not None:
        entry = stored
    else:
        what = (
            "was trained before segments were stored"
            if stored is None
            else f"stores segments at depth {stored['depth']} and min share "
            f"{stored['min_share']:g}"
        )
        raise DataError(
            f"{name}:{version} {what}; to compute others pass --data FILE with the table it "
            "was trained on."
        )
    if args.json:
        body = {"model": name, "version": version, **entry}
        body["importance"] = manifest.get("importance")
        print(json.dumps(body, indent=2))
    else:
        print(f"{name}:{version}")
        print("\n".join(segments_text(entry)))
    return 0
