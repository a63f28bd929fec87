"""Audience files in, decision files out: chunked reading and all-or-nothing writing.

Input is CSV (``.csv``, ``.tsv``, optionally gzipped) or Parquet (a ``.parquet`` file or a
directory of Parquet parts), read in chunks of a bounded number of rows. A file is cut
into :class:`Part` s (Parquet: groups of row groups; CSV: the whole file, streamed), and
a part is read chunk by chunk, so the whole table is never in memory. Output is written
to a temporary name beside the target and renamed over it only when complete
(:class:`OutputFile`), so a failed run leaves no partial output.
"""

from __future__ import annotations

import math
import os
from collections.abc import Iterator, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import pyarrow as pa
import pyarrow.csv as pacsv
import pyarrow.parquet as pq

from service.errors import DataError

__all__ = ["OutputFile", "Part", "count_rows", "iter_chunks", "output_format", "plan_parts"]

_MAX_ID = 256
_CSV_SUFFIXES = (".csv", ".tsv", ".csv.gz", ".tsv.gz")


@dataclass(frozen=True)
class Part:
    """A piece of the input that one task reads: a file and (Parquet) its row groups."""

    path: str
    row_groups: tuple[int, ...] | None  # None: the whole file (CSV)
    rows: int  # -1 when unknown until read (CSV)
    first_row: int  # number of its first row in the whole input (0-based)


def plan_parts(data: Path, rows_per_part: int) -> list[Part]:
    """Cut the input into parts of about ``rows_per_part`` rows, in input order.

    Raises
    ------
    DataError
        The path does not exist, is not CSV or Parquet, or a directory holds no Parquet.
    """
    files = _input_files(data)
    if _is_csv(files[0]):
        return [Part(str(files[0]), None, -1, 0)]  # one CSV file, streamed
    parts: list[Part] = []
    first = 0
    for path in files:
        meta = _parquet_meta(path)
        group: list[int] = []
        rows = 0
        for g in range(meta.num_row_groups):
            group.append(g)
            rows += meta.row_group(g).num_rows
            if rows >= rows_per_part:
                parts.append(Part(str(path), tuple(group), rows, first))
                first, group, rows = first + rows, [], 0
        if group:
            parts.append(Part(str(path), tuple(group), rows, first))
            first += rows
    return parts


def count_rows(parts: Sequence[Part]) -> int | None:
    """Rows in all parts, when known without reading the data (Parquet)."""
    if any(p.rows < 0 for p in parts):
        return None
    return sum(p.rows for p in parts)


def iter_chunks(
    part: Part, chunk_rows: int, *, id_column: str, columns: Sequence[str] | None = None
) -> Iterator[pa.Table]:
    """The rows of a part as tables of at most ``chunk_rows`` rows (ids read as text)."""
    path = Path(part.path)
    if part.row_groups is None:
        yield from _csv_chunks(path, chunk_rows, id_column)
        return
    parquet = pq.ParquetFile(path)
    _require_id(parquet.schema_arrow.names, id_column, path)
    for batch in parquet.iter_batches(
        batch_size=chunk_rows, row_groups=list(part.row_groups), columns=columns
    ):
        yield pa.Table.from_batches([batch])


def output_format(out: Path) -> str:
    """``"parquet"`` or ``"csv"`` from the output's extension."""
    name = out.name.lower()
    if name.endswith((".parquet", ".pq")):
        return "parquet"
    if name.endswith(".csv"):
        return "csv"
    raise DataError(f"Output {str(out)!r} has no known extension; end it in .parquet or .csv.")


class OutputFile:
    """Write tables to ``<out>.<pid>.partial`` and rename it to ``out`` on :meth:`commit`.

    Closing without committing (an error part-way) removes the temporary file, so a failed
    run never leaves a partial output under the requested name.
    """

    def __init__(self, out: Path) -> None:
        self.out = out
        self.format = output_format(out)
        if not out.parent.is_dir():
            raise DataError(
                f"The output directory {str(out.parent)!r} does not exist; create it first."
            )
        self.tmp = out.with_name(f".{out.name}.{os.getpid()}.partial")
        self._writer: pq.ParquetWriter | pacsv.CSVWriter | None = None
        self.rows = 0

    def write(self, table: pa.Table) -> None:
        """Append a table (every table must have the first one's columns)."""
        if self.format == "csv":
            table = _flat_for_csv(table)
        if self._writer is None:
            if self.format == "parquet":
                self._writer = pq.ParquetWriter(self.tmp, table.schema)
            else:
                self._writer = pacsv.CSVWriter(self.tmp, table.schema)
        self._writer.write_table(table)
        self.rows += table.num_rows

    def commit(self, empty_schema: pa.Schema) -> None:
        """Finish the file, flush it to disk and rename it to the target name."""
        if self._writer is None:
            self.write(empty_schema.empty_table())
        assert self._writer is not None
        self._writer.close()
        self._writer = None
        with open(self.tmp, "rb") as handle:
            os.fsync(handle.fileno())
        os.replace(self.tmp, self.out)

    def discard(self) -> None:
        """Drop the temporary file (after an error)."""
        if self._writer is not None:
            try:
                self._writer.close()
            except Exception:  # noqa: S110 - the original error matters, not this one
                pass
            self._writer = None
        self.tmp.unlink(missing_ok=True)


def chunk_columns(
    table: pa.Table, id_column: str, first_row: int
) -> tuple[list[str], dict[str, list[Any]], list[Any] | None]:
    """Ids, feature columns (lists of Python values) and optional values of a chunk.

    The same Python values a JSON request carries: numbers, text and None. An empty CSV
    cell and a NaN in a numeric column count as missing (files have no other way to say
    it).
    """
    names = table.column_names
    _require_id(names, id_column, None)
    ids = _ids(table.column(id_column), first_row)
    features: dict[str, list[Any]] = {}
    values: list[Any] | None = None
    for name in names:
        if name == id_column:
            continue
        column = table.column(name)
        data = column.to_pylist()
        if pa.types.is_floating(column.type):
            data = [None if v is not None and math.isnan(v) else v for v in data]
        if name == "value":
            values = data
        else:
            features[name] = data
    return ids, features, values


def _ids(column: pa.ChunkedArray, first_row: int) -> list[str]:
    if not (pa.types.is_string(column.type) or pa.types.is_large_string(column.type)):
        column = column.cast(pa.string())
    ids: list[Any] = column.to_pylist()
    for i, v in enumerate(ids):
        if not v or len(v) > _MAX_ID:
            raise DataError(
                f"Row {first_row + i}: customer id {v!r} must be non-empty text of at most "
                f"{_MAX_ID} characters; fix or drop that row."
            )
    return ids


def _require_id(names: Sequence[str], id_column: str, path: Path | None) -> None:
    if id_column not in names:
        where = f" of {str(path)!r}" if path is not None else ""
        raise DataError(
            f"The columns{where} have no customer id column {id_column!r} (found "
            f"{list(names)[:20]}); name it with --id-column."
        )


def _input_files(data: Path) -> list[Path]:
    if data.is_dir():
        files = sorted(p for p in data.rglob("*") if p.is_file() and _is_parquet(p))
        if not files:
            raise DataError(
                f"Directory {str(data)!r} holds no Parquet part (*.parquet); point to a "
                "Parquet file, a directory of Parquet parts, or a CSV file."
            )
        return files
    if not data.exists():
        raise DataError(f"Input {str(data)!r} does not exist; check the path.")
    if not (_is_csv(data) or _is_parquet(data)):
        raise DataError(
            f"Input {str(data)!r} is neither CSV (.csv, .tsv) nor Parquet (.parquet); "
            "convert it or rename it with the right extension."
        )
    return [data]


def _is_csv(path: Path) -> bool:
    return path.name.lower().endswith(_CSV_SUFFIXES)


def _is_parquet(path: Path) -> bool:
    return path.name.lower().endswith((".parquet", ".pq"))


def _parquet_meta(path: Path) -> pq.FileMetaData:
    try:
        return pq.ParquetFile(path).metadata
    except (OSError, pa.ArrowInvalid) as err:
        raise DataError(f"{str(path)!r} is not a readable Parquet file ({err}).") from err


def _csv_chunks(path: Path, chunk_rows: int, id_column: str) -> Iterator[pa.Table]:
    delimiter = "\t" if ".tsv" in path.name.lower() else ","
    try:
        reader = pacsv.open_csv(
            path,
            read_options=pacsv.ReadOptions(block_size=1 << 22),
            parse_options=pacsv.ParseOptions(delimiter=delimiter),
            convert_options=pacsv.ConvertOptions(
                column_types={id_column: pa.string()}, strings_can_be_null=True
            ),
        )
    except pa.ArrowInvalid as err:
        raise DataError(f"{str(path)!r} cannot be read as CSV: {err}") from err
    _require_id(reader.schema.names, id_column, path)
    pending: list[pa.RecordBatch] = []
    held = 0
    while True:
        try:
            batch = reader.read_next_batch()
        except StopIteration:
            break
        except pa.ArrowInvalid as err:
            raise DataError(
                f"{str(path)!r} cannot be read as CSV: {err}. A column whose first rows are "
                "numbers and later rows text is a common cause; fix the values."
            ) from err
        pending.append(batch)
        held += batch.num_rows
        while held >= chunk_rows:
            table = pa.Table.from_batches(pending)
            yield table.slice(0, chunk_rows)
            rest = table.slice(chunk_rows)
            pending, held = rest.to_batches(), rest.num_rows
    if held:
        yield pa.Table.from_batches(pending, schema=reader.schema)


def _flat_for_csv(table: pa.Table) -> pa.Table:
    """CSV has no lists: list columns (reasons) become ``;``-separated text."""
    for i, field in enumerate(table.schema):
        if pa.types.is_list(field.type) or pa.types.is_large_list(field.type):
            joined = [";".join(v) if v is not None else None for v in table.column(i).to_pylist()]
            table = table.set_column(i, field.name, pa.array(joined, pa.string()))
    return table
