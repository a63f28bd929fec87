"""Read a campaign table from CSV or Parquet, turning every failure into a clear error."""

from __future__ import annotations

from pathlib import Path

import pandas as pd

from service.errors import DataError

__all__ = ["read_table"]

_CSV = (".csv", ".txt", ".csv.gz", ".csv.bz2", ".csv.zip", ".csv.xz")
_TSV = (".tsv", ".tsv.gz")
_PARQUET = (".parquet", ".pq", ".parq")


def _kind(path: Path) -> str:
    name = path.name.lower()
    for kind, suffixes in (("csv", _CSV), ("tsv", _TSV), ("parquet", _PARQUET)):
        if name.endswith(suffixes):
            return kind
    raise DataError(
        f"Cannot tell the format of {path} from its name; save it as .csv (comma-separated "
        "with a header row), .tsv or .parquet."
    )


def read_table(path: Path | str) -> pd.DataFrame:
    """Read a CSV (``.csv``, ``.txt``, compressed ``.csv.gz`` ...), TSV or Parquet file.

    Raises
    ------
    DataError
        The file does not exist, is empty, cannot be parsed, or has no rows.
    """
    path = Path(path)
    if not path.exists():
        raise DataError(f"Data file {path} does not exist; check the path.")
    if not path.is_file():
        raise DataError(f"{path} is not a file; pass the path of a .csv or .parquet file.")
    kind = _kind(path)
    if path.stat().st_size == 0:
        raise DataError(
            f"Data file {path} is empty; export the campaign with a header row and one row "
            "per customer."
        )
    try:
        if kind == "parquet":
            frame = pd.read_parquet(path)
        else:
            frame = pd.read_csv(path, sep="\t" if kind == "tsv" else ",")
    except pd.errors.EmptyDataError:
        raise DataError(
            f"Data file {path} holds no columns; export the campaign with a header row and "
            "one row per customer."
        ) from None
    except (pd.errors.ParserError, UnicodeDecodeError, OSError, ValueError) as err:
        reason = str(err).strip().splitlines()[0] if str(err).strip() else type(err).__name__
        hint = "UTF-8 encoded, " if kind != "parquet" else ""
        raise DataError(
            f"Cannot read {path} as {kind.upper()} ({reason}); check that it is a complete "
            f"{kind.upper()} file, {hint}written by the tool that exported it."
        ) from err
    if len(frame) == 0:
        raise DataError(
            f"Data file {path} has a header but no rows; export the campaign rows too."
        )
    frame.columns = pd.Index([str(c).strip() for c in frame.columns])
    return frame
