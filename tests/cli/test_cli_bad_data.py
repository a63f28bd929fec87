"""Bad data files: one clear line on standard error, exit code 1, nothing written."""

from __future__ import annotations

from collections.abc import Callable
from pathlib import Path

import pandas as pd
import pytest

from service.cli import main


def _wrong_column(frame: pd.DataFrame, path: Path) -> None:
    frame.rename(columns={"treatment": "arm"}).to_csv(path, index=False)


def _one_arm(frame: pd.DataFrame, path: Path) -> None:
    frame[frame["treatment"] == "email"].to_csv(path, index=False)


def _text_in_numeric(frame: pd.DataFrame, path: Path) -> None:
    frame = frame.astype({"tenure_months": object})
    frame.loc[41, "tenure_months"] = "ten"
    frame.to_csv(path, index=False)


def _text_outcome(frame: pd.DataFrame, path: Path) -> None:
    frame.assign(renewed=frame["renewed"].map({1: "yes", 0: "no"})).to_csv(path, index=False)


def _empty(frame: pd.DataFrame, path: Path) -> None:
    path.write_bytes(b"")


def _header_only(frame: pd.DataFrame, path: Path) -> None:
    frame.head(0).to_csv(path, index=False)


def _not_parquet(frame: pd.DataFrame, path: Path) -> None:
    path.with_suffix(".parquet").write_bytes(b"PAR1 but not really")


CASES: dict[str, tuple[Callable[[pd.DataFrame, Path], None], str]] = {
    "wrong column": (
        _wrong_column,
        r"Column 'treatment' \(the treatment\) is not in .*"
        r"the columns are: customer_id, .*arm, renewed\.",
    ),
    "one arm only": (_one_arm, r"holds only one group \('email'\).*control group"),
    "text in a numeric column": (
        _text_in_numeric,
        r"Column 'tenure_months' holds numbers but "
        r"also text in 1 row\(s\), e.g. 'ten' in row 42 after the "
        r"header",
    ),
    "text outcome": (_text_outcome, r"Outcome column 'renewed' holds text"),
    "empty file": (_empty, r"Data file .*bad\.csv is empty"),
    "header only": (_header_only, r"has a header but no rows"),
    "unreadable": (_not_parquet, r"Cannot read .*bad\.parquet as PARQUET"),
}


@pytest.mark.parametrize("case", list(CASES))
def test_bad_file_gives_one_clear_line_and_leaves_nothing(
    case: str, tmp_path: Path, demo_frame: pd.DataFrame, capsys: pytest.CaptureFixture[str]
) -> None:
    write, message = CASES[case]
    path = tmp_path / "bad.csv"
    write(demo_frame, path)
    if not path.exists():
        path = path.with_suffix(".parquet")
    models = tmp_path / "models"
    code = main(
        [
            "train",
            str(path),
            "--treatment",
            "treatment",
            "--outcome",
            "renewed",
            "--models-dir",
            str(models),
            "--learner",
            "t",
            "--base",
            "linear",
            "--quiet",
        ]
    )
    out, err = capsys.readouterr()
    assert code == 1
    assert err.count("\n") == 1 and err.startswith("upshot: error: ")
    assert "Traceback" not in err
    assert pytest.approx(0) == len(out)
    import re

    assert re.search(message, err), err
    assert not models.exists()
