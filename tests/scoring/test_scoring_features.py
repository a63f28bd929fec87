"""FeatureSchema: per-field refusals, flags for missing, out-of-range and new categories."""

from __future__ import annotations

import math
import random
from typing import Any

import numpy as np
import pytest

from service.scoring import FeatureSchema, InvalidFeatures
from service.uplift import FeatureSpec

SCHEMA = FeatureSchema(
    [
        FeatureSpec("age_months", "numeric", minimum=1.0, maximum=120.0),
        FeatureSpec("spend", "numeric", minimum=0.0, maximum=50.0),
        FeatureSpec("plan", "categorical", categories=("basic", "gold")),
        FeatureSpec("gift", "categorical", categories=("False", "True")),
    ]
)


def test_clean_row_passes_with_flags() -> None:
    clean, reasons = SCHEMA.check_row({"age_months": 200, "plan": "platinum", "gift": True})
    assert clean == {"age_months": 200.0, "spend": None, "plan": "platinum", "gift": "True"}
    assert reasons == ["missing:spend", "out_of_range:age_months", "unknown_category:plan"]


@pytest.mark.parametrize(
    ("value", "words"),
    [
        ("NaN", "must be a number"),
        ("3", "must be a number"),
        (True, "must be a number"),
        (math.nan, "finite"),
        (math.inf, "finite"),
        ([1], "must be a number"),
    ],
)
def test_numeric_values_are_refused_per_field(value: Any, words: str) -> None:
    with pytest.raises(InvalidFeatures, match=words) as caught:
        SCHEMA.check_row({"spend": value})
    assert caught.value.details["problems"][0]["feature"] == "spend"


def test_categories_must_be_text_and_names_must_be_known() -> None:
    with pytest.raises(InvalidFeatures, match="must be text"):
        SCHEMA.check_row({"plan": 2.5})
    with pytest.raises(InvalidFeatures, match="'colour'.*not a feature"):
        SCHEMA.check_row({"colour": "red"})


def test_columns_agree_with_rows_on_random_input() -> None:
    # Seeded fuzz: the vectorised column path must give what row-by-row checks give.
    rng = random.Random(0)
    choices: dict[str, list[Any]] = {
        "age_months": [None, 0, 1, 60, 121, 3.5, 120.0],
        "spend": [None, -1.0, 0.0, 49.9, 50.1, 7],
        "plan": [None, "basic", "gold", "silver"],
        "gift": [None, True, False, "True", "maybe"],
    }
    rows = [{k: rng.choice(v) for k, v in choices.items() if rng.random() < 0.9}
            for _ in range(300)]  # fmt: skip
    table = SCHEMA.table_from_rows(rows)
    for i, row in enumerate(rows):
        clean, reasons = SCHEMA.check_row(row)
        assert table.reasons[i] == reasons
        assert table.row(i) == clean


def test_one_bad_cell_names_its_row() -> None:
    columns = {"spend": [1.0, 2.0, "x", 4.0], "plan": ["gold", None, "basic", 2.5]}
    with pytest.raises(InvalidFeatures) as caught:
        SCHEMA.table_from_columns(columns, 4)
    problems = caught.value.details["problems"]
    assert [(p["row"], p["feature"]) for p in problems] == [(2, "spend"), (3, "plan")]
    assert str(caught.value).startswith("customer 2, feature 'spend'")


def test_numeric_columns_become_float_arrays_with_nan_for_missing() -> None:
    table = SCHEMA.table_from_columns({"age_months": [1, None, 7.5]}, 3)
    column = table.columns["age_months"]
    assert column.dtype == np.float64
    assert column[0] == 1.0 and np.isnan(column[1]) and column[2] == 7.5
    assert table.reasons[1] == ["missing:age_months", "missing:gift", "missing:plan",
                                "missing:spend"]  # fmt: skip
