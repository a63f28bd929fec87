"""Encode one customer given as ``{feature: value}`` without building a DataFrame."""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import Any

import numpy as np
import pandas as pd

from service.errors import DataError
from service.uplift._features import FeatureEncoder

__all__ = ["RowEncoder"]

_PLAIN_NUMBERS = (int, float, np.integer, np.floating)
_INT64 = 2**63


class RowEncoder:
    """The per-row twin of :meth:`FeatureEncoder.transform`.

    ``encode({feature: value})`` equals ``encoder.transform(pd.DataFrame([features]))[0]``:
    numbers (and booleans) become floats, ``None`` and NaN become NaN, categorical
    values are looked up by their text and unknown ones become NaN. Values of other
    types (text in a numeric feature, pandas missing markers, ...) take the DataFrame
    path, so the rules stay exactly those of the encoder.

    Parameters
    ----------
    encoder : FeatureEncoder
        The fitted encoder of the model (``model.encoder_``).
    """

    def __init__(self, encoder: FeatureEncoder) -> None:
        self.encoder = encoder
        self._names = list(encoder.names)
        self._lookups: list[dict[str, float] | None] = [
            {c: float(i) for i, c in enumerate(s.categories)} if s.kind == "categorical" else None
            for s in encoder.specs
        ]

    def encode(self, features: Mapping[str, Any]) -> np.ndarray:
        """Return the encoded row, shape (n_features,)."""
        out = np.empty(len(self._names))
        for j, (name, lookup) in enumerate(zip(self._names, self._lookups, strict=True)):
            try:
                value = features[name]
            except KeyError:
                return self._slow(features)
            code = _numeric(value) if lookup is None else _category(value, lookup)
            if code is None:
                return self._slow(features)
            out[j] = code
        return out

    def _slow(self, features: Mapping[str, Any]) -> np.ndarray:
        missing = [n for n in self._names if n not in features]
        if missing:
            raise DataError(
                f"Feature(s) {missing} are missing; the model was trained on {self._names}. "
                "Send every feature (null is allowed for an unknown value)."
            )
        frame = pd.DataFrame([{name: features[name] for name in self._names}])
        encoded: np.ndarray = self.encoder.transform(frame)[0]
        return encoded


def _numeric(value: Any) -> float | None:
    """The float of a plain number, NaN for None; None when pandas must decide."""
    if value is None:
        return math.nan
    if isinstance(value, bool | np.bool_):
        return float(value)
    if isinstance(value, _PLAIN_NUMBERS) and not (
        isinstance(value, int) and not -_INT64 <= value < _INT64
    ):
        return float(value)
    return None


def _category(value: Any, lookup: dict[str, float]) -> float | None:
    """The code of a category, NaN when missing or unknown; None when pandas must decide."""
    if value is None:
        return math.nan
    if isinstance(value, np.generic):
        value = value.item()
    if isinstance(value, float) and math.isnan(value):
        return math.nan
    if isinstance(value, str | bool | int | float):
        return lookup.get(str(value), math.nan)
    return None
