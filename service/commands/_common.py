"""Arguments and helpers shared by the sub-commands."""

from __future__ import annotations

import argparse
import getpass
import os
import re
from pathlib import Path
from typing import Any

from service.errors import DataError, NotFoundError

__all__ = [
    "add_models_dir",
    "default_actor",
    "name_from_path",
    "parse_assignments",
    "parse_cost",
    "print_metrics",
    "resolve_ref",
]


def add_models_dir(parser: argparse.ArgumentParser) -> None:
    """``--models-dir``, defaulting to ``$UPSHOT_MODELS_DIR`` or ``models``."""
    parser.add_argument(
        "--models-dir",
        type=Path,
        default=Path(os.environ.get("UPSHOT_MODELS_DIR", "models")),
        help="registry directory (default: $UPSHOT_MODELS_DIR or ./models)",
    )


def default_actor() -> str:
    """Who is running the command, for the registry history."""
    try:
        return os.environ.get("USER") or getpass.getuser()
    except (KeyError, OSError):
        return "unknown"


def parse_assignments(text: str, what: str) -> dict[str, str]:
    """``"a=1,b=2"`` -> ``{"a": "1", "b": "2"}``."""
    pairs: dict[str, str] = {}
    for part in filter(None, (p.strip() for p in text.split(","))):
        key, sep, value = part.partition("=")
        if not sep or not key.strip() or not value.strip():
            raise DataError(
                f"{what} {text!r} is not a list of LABEL=VALUE pairs; write e.g. "
                "email=0.1,call=2.5."
            )
        pairs[key.strip()] = value.strip()
    return pairs


def parse_cost(text: str) -> float | dict[str, float]:
    """A single contact cost (``"0.5"``) or one per arm (``"email=0.1,call=2.5"``)."""
    try:
        return (
            float(text)
            if "=" not in text
            else {k: float(v) for k, v in parse_assignments(text, "--cost").items()}
        )
    except ValueError:
        raise DataError(
            f"--cost {text!r} is not a number or a list of ARM=NUMBER pairs; write e.g. "
            "--cost 0.5 or --cost email=0.1,call=2.5."
        ) from None


def name_from_path(path: Path) -> str:
    """A model name derived from a data file name: ``larkspur_2024.csv`` -> ``larkspur_2024``."""
    stem = path.name.split(".")[0]
    name = re.sub(r"[^A-Za-z0-9_.-]+", "-", stem).strip("-._")[:64]
    return name or "model"


def _num(value: Any, digits: int = 3) -> str:
    return "n/a" if value is None else f"{value:.{digits}g}"


def print_metrics(manifest: dict[str, Any]) -> None:
    """Headline cross-validated metrics, two lines per arm."""
    control = manifest["control"]
    for arm, m in manifest["metrics"]["arms"].items():
        tops = "; ".join(_top(t) for t in m["uplift_at_top"])
        print(
            f"  {arm} vs {control}: Qini {_num(m['qini_normalized'])} (normalised), "
            f"{_num(m['qini'])} (raw); AUUC {_num(m['auuc'])}"
        )
        print(f"      observed uplift, 95% CI: {tops}")


def _top(t: dict[str, Any]) -> str:
    low, high = t.get("low"), t.get("high")
    if low is None or high is None or not high > low:
        # A zero-width interval comes from a handful of rows with identical outcomes; it
        # says nothing, so it is not printed as if it did.
        return f"top {t['fraction']:.0%} n/a (too few rows or no variation)"
    return f"top {t['fraction']:.0%} {_num(t['estimate'])} [{_num(low)}, {_num(high)}]"


def resolve_ref(registry: Any, ref: str) -> tuple[str, str]:
    """``NAME[:VERSION]`` -> (name, version); without a version the champion, else the latest."""
    from service.registry import parse_ref

    name, version = parse_ref(ref)
    if version is None:
        version = registry.champion(name) or (registry.versions(name) or [None])[-1]
        if version is None:
            raise NotFoundError(
                f"Model {name!r} has no versions in {registry.root}; train one with "
                "`upshot train`."
            )
    return name, registry.resolve(name, version)
