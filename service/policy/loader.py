"""Read and validate a campaign file (TOML) into :class:`Campaign` objects."""

from __future__ import annotations

import tomllib
from pathlib import Path
from typing import Any

from service.errors import PolicyError
from service.policy.campaign import NO_CONTACT, ArmCost, Campaign

__all__ = ["load_campaigns", "parse_campaigns"]

_KEYS = {
    "model",
    "model_version",
    "value",
    "exploration",
    "holdout",
    "capacity",
    "confidence",
    "dnc_margin",
    "salt",
    "suppression",
    "suppression_file",
    "arms",
    "pilot_shares",
}
_FLOAT_KEYS = ("value", "exploration", "holdout", "confidence", "dnc_margin")


def load_campaigns(path: str | Path) -> dict[str, Campaign]:
    """Load every campaign of a TOML file, validating each key.

    The file holds one table per campaign, ``[campaigns.<id>]``, with keys ``model``
    (registry name; leave it out for a randomized pilot, with optional ``pilot_shares``
    mapping ``none`` and every arm to its share), ``model_version`` (optional pin;
    default the champion), ``value``
    (value of a conversion, default 1.0), ``exploration`` and ``holdout`` (rates in
    [0, 1), default 0), ``capacity`` (default list length for ranking), ``confidence``
    (one-sided level of the do-not-contact bound, in (0.5, 1), default 0.90),
    ``dnc_margin`` (default 0), ``salt`` (required), ``suppression`` (opt-out ids) and/or
    ``suppression_file`` (one id per line, ``#`` comments; relative to the TOML file), and
    a sub-table ``arms`` mapping each arm to ``{ cost = ... }``.

    Raises
    ------
    PolicyError
        The file is missing or not TOML, or a key is unknown, of the wrong type or out of
        range; the message names the campaign and the key.
    """
    path = Path(path)
    try:
        with path.open("rb") as handle:
            document = tomllib.load(handle)
    except FileNotFoundError as err:
        raise PolicyError(
            f"Campaign file {str(path)!r} does not exist; create it or point the setting at it."
        ) from err
    except tomllib.TOMLDecodeError as err:
        raise PolicyError(f"Campaign file {str(path)!r} is not valid TOML: {err}.") from err
    return parse_campaigns(document, base_dir=path.parent)


def parse_campaigns(document: dict[str, Any], *, base_dir: Path) -> dict[str, Campaign]:
    """Validate an already parsed campaign document (see :func:`load_campaigns`)."""
    unknown = sorted(set(document) - {"campaigns"})
    if unknown:
        raise PolicyError(
            f"Campaign file has unknown top-level key(s) {unknown}; put every campaign under "
            "[campaigns.<id>]."
        )
    tables = document.get("campaigns")
    if not isinstance(tables, dict) or not tables:
        raise PolicyError("Campaign file declares no campaign; add a [campaigns.<id>] table.")
    campaigns = {}
    for campaign_id, table in tables.items():
        if not isinstance(table, dict):
            raise PolicyError(f"Campaign {campaign_id!r} must be a table, [campaigns.<id>].")
        campaigns[campaign_id] = _parse_campaign(campaign_id, table, base_dir)
    return campaigns


def _parse_campaign(cid: str, table: dict[str, Any], base_dir: Path) -> Campaign:
    unknown = sorted(set(table) - _KEYS)
    if unknown:
        raise PolicyError(
            f"Campaign {cid!r}: unknown key(s) {unknown}; allowed keys are {sorted(_KEYS)}."
        )
    if "salt" not in table:
        raise PolicyError(f"Campaign {cid!r}: key 'salt' is required; add it.")
    options: dict[str, Any] = {
        key: _number(cid, key, table[key]) for key in _FLOAT_KEYS if key in table
    }
    if "capacity" in table:
        options["capacity"] = _integer(cid, "capacity", table["capacity"])
    if "model_version" in table:
        options["model_version"] = _text(cid, "model_version", table["model_version"])
    arms = _arms(cid, table.get("arms"))
    if "pilot_shares" in table:
        options["pilot_shares"] = _shares(cid, table["pilot_shares"], arms)
    return Campaign(
        id=cid,
        model=_text(cid, "model", table["model"]) if "model" in table else None,
        salt=_text(cid, "salt", table["salt"]),
        arms=arms,
        suppression=_suppression(cid, table, base_dir),
        **options,
    )


def _shares(cid: str, table: object, arms: tuple[ArmCost, ...]) -> tuple[float, ...]:
    labels = [NO_CONTACT, *(arm.name for arm in arms)]
    if not isinstance(table, dict) or set(table) != set(labels):
        raise PolicyError(
            f"Campaign {cid!r}: key 'pilot_shares' must be a table with one share per action, "
            f"keys {labels}, e.g. `pilot_shares = {{ none = 0.5, ... }}`; got {table!r}."
        )
    return tuple(_number(cid, f"pilot_shares.{label}", table[label]) for label in labels)


def _text(cid: str, key: str, value: object) -> str:
    if not isinstance(value, str):
        raise PolicyError(f"Campaign {cid!r}: key {key!r} must be a string, got {value!r}.")
    return value


def _number(cid: str, key: str, value: object) -> float:
    # bool is an int in Python; `exploration = true` is a typo, not 1.0.
    if isinstance(value, bool) or not isinstance(value, int | float):
        raise PolicyError(f"Campaign {cid!r}: key {key!r} must be a number, got {value!r}.")
    return float(value)


def _integer(cid: str, key: str, value: object) -> int:
    if isinstance(value, bool) or not isinstance(value, int):
        raise PolicyError(f"Campaign {cid!r}: key {key!r} must be a whole number, got {value!r}.")
    return value


def _arms(cid: str, arms: object) -> tuple[ArmCost, ...]:
    if not isinstance(arms, dict) or not arms:
        raise PolicyError(
            f"Campaign {cid!r}: key 'arms' must be a table of arms, e.g. "
            f"[campaigns.{cid}.arms] with `email = {{ cost = 0.40 }}`."
        )
    parsed = []
    for name, spec in arms.items():
        key = f"arms.{name}"
        if not isinstance(spec, dict) or set(spec) != {"cost"}:
            raise PolicyError(
                f"Campaign {cid!r}: key {key!r} must be a table with exactly one key, "
                f"cost, e.g. `{name} = {{ cost = 0.40 }}`."
            )
        parsed.append(ArmCost(name=name, cost=_number(cid, f"{key}.cost", spec["cost"])))
    return tuple(parsed)


def _suppression(cid: str, table: dict[str, Any], base_dir: Path) -> frozenset[str]:
    ids: set[str] = set()
    listed = table.get("suppression", [])
    if not isinstance(listed, list):
        raise PolicyError(f"Campaign {cid!r}: key 'suppression' must be a list of ids.")
    for item in listed:
        if isinstance(item, bool) or not isinstance(item, str | int):
            raise PolicyError(
                f"Campaign {cid!r}: key 'suppression' holds {item!r}; ids must be strings."
            )
        ids.add(str(item).strip())
    if "suppression_file" in table:
        ids.update(
            _read_id_file(cid, _text(cid, "suppression_file", table["suppression_file"]), base_dir)
        )
    return frozenset(ids)


def _read_id_file(cid: str, name: str, base_dir: Path) -> set[str]:
    path = Path(name) if Path(name).is_absolute() else base_dir / name
    try:
        lines = path.read_text(encoding="utf-8").splitlines()
    except OSError as err:
        raise PolicyError(
            f"Campaign {cid!r}: key 'suppression_file' = {name!r} cannot be read ({err}); "
            "fix the path (it is relative to the campaign file)."
        ) from err
    stripped = (line.strip() for line in lines)
    return {line for line in stripped if line and not line.startswith("#")}
