"""Reading logger Parquet files column-wise with pyarrow.

Only the columns the ingest needs are read (``pyarrow.parquet.read_table(columns=...)``), so
a file with many channels of which few are configured costs little. Column types are kept as
stored: numbers and timestamps stay typed; text columns are classified by the caller.
"""

from __future__ import annotations

from pathlib import Path
from typing import Sequence

import pyarrow as pa
import pyarrow.parquet as pq

__all__ = ["ParquetFormatError", "parquet_schema", "read_parquet_columns"]


class ParquetFormatError(ValueError):
    """The file is not a readable Parquet file."""


def parquet_schema(path: Path) -> pa.Schema:
    """The Arrow schema of a Parquet file, without reading its data.

    Raises
    ------
    ParquetFormatError
        The file is not Parquet, or is truncated.
    """
    try:
        return pq.read_schema(path)
    except (pa.ArrowInvalid, OSError) as exc:
        raise ParquetFormatError(
            f"not a readable Parquet file ({exc}); expected a complete Parquet file"
        ) from None


def read_parquet_columns(path: Path, names: Sequence[str]) -> dict[str, pa.ChunkedArray]:
    """The named columns of a Parquet file, as stored (dictionary columns decoded)."""
    try:
        table = pq.read_table(path, columns=list(names), use_threads=False)
    except (pa.ArrowInvalid, OSError) as exc:
        raise ParquetFormatError(f"cannot read the Parquet data ({exc})") from None
    columns = {}
    for name in names:
        column = table.column(name)
        if pa.types.is_dictionary(column.type):
            column = column.cast(column.type.value_type)
        columns[name] = column
    return columns
