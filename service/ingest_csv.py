"""Reading logger CSV files column-wise with pyarrow, and classifying text cells.

The dialect is sniffed from the first 64 KiB: delimiter (``,``, ``;`` or tab), decimal
comma (only with ``;`` or tab as delimiter: cells such as ``1013,25`` and none such as
``1013.25``), an optional UTF-8 byte order mark, Windows-1252 text when the file is not UTF-8,
and preamble lines before the header (a logger's metadata: any lines before the first line
whose field count the following lines repeat). ``.csv.gz`` is decompressed on the fly.

The body is read by pyarrow's multithreaded CSV reader with the value columns typed as
float64; only when a value column holds text (a logger's over-range or error markers) is it
read again as text and classified cell by cell with vectorised pyarrow compute functions.
Blank lines are kept as empty rows while reading, so data row ``k`` is always physical line
``first_data_line + k``; the caller drops them.

Markers in value cells (case-insensitive, surrounding blanks ignored)

- gap: empty, ``nan``, ``na``, ``n/a``, ``#n/a``, ``null``, ``none``, ``-``, ``--``, ``---``,
  ``err``, ``error``, ``fault``, ``fail``, ``invalid``, ``#value!``, ``#num!``
- over range: ``ovr``, ``+ovr``, ``over``, ``+over``, ``overrange``, ``over-range``,
  ``over range``, ``>range``, ``hi``, ``high``, ``+inf``, ``inf``, ``sat``, ``saturated``
- under range: ``udr``, ``-ovr``, ``-over``, ``under``, ``underrange``, ``under-range``,
  ``under range``, ``<range``, ``lo``, ``low``, ``-inf``
"""

from __future__ import annotations

import codecs
import csv
import gzip
import re
from dataclasses import dataclass
from pathlib import Path
from typing import Sequence

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc
import pyarrow.csv as pacsv

__all__ = [
    "CsvFormatError",
    "CsvDialect",
    "CellClasses",
    "GAP_MARKERS",
    "OVER_RANGE_MARKERS",
    "UNDER_RANGE_MARKERS",
    "sniff_dialect",
    "read_csv_columns",
    "classify_cells",
]

GAP_MARKERS = (
    "", "nan", "na", "n/a", "#n/a", "null", "none", "-", "--", "---", "err", "error",
    "fault", "fail", "invalid", "#value!", "#num!",
)
OVER_RANGE_MARKERS = (
    "ovr", "+ovr", "over", "+over", "overrange", "over-range", "over range", ">range", "hi",
    "high", "+inf", "inf", "sat", "saturated",
)
UNDER_RANGE_MARKERS = (
    "udr", "-ovr", "-over", "under", "underrange", "under-range", "under range", "<range",
    "lo", "low", "-inf",
)
# What the fast float64 read may treat as missing without losing information.
_FAST_NULLS = sorted({m for m in GAP_MARKERS for m in (m, m.upper(), m.capitalize())}
                     - {"inf", "INF", "Inf"})
_NUMBER = r"^[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?$"
_SNIFF_BYTES = 65536
_ISO_NAIVE = r"\d{4}-\d{2}-\d{2}[T ]\d{2}:\d{2}(:\d{2}(\.\d{1,9})?)?"
_ISO_OFFSET = r"(Z|[+-]\d{2}(:?\d{2})?)"


class CsvFormatError(ValueError):
    """The file is not a readable logger CSV; ``line`` is the 1-based line, if known."""

    def __init__(self, message: str, line: int | None = None):
        super().__init__(message)
        self.line = line


@dataclass(frozen=True)
class CsvDialect:
    """How a logger CSV file is written."""

    delimiter: str
    decimal_comma: bool
    encoding: str
    header_line: int  # 1-based physical line of the header
    header: tuple[str, ...]
    sample_rows: tuple[tuple[str, ...], ...] = ()  # the first data rows, as text

    @property
    def first_data_line(self) -> int:
        """1-based physical line of data row 0."""
        return self.header_line + 1


@dataclass(frozen=True)
class CellClasses:
    """Text cells of one column sorted into numbers and markers (one entry per row)."""

    values: np.ndarray  # float64, NaN where not a number
    empty: np.ndarray  # bool: an empty cell
    gap: np.ndarray  # bool: empty or an error marker
    over: np.ndarray  # bool: over-range marker
    under: np.ndarray  # bool: under-range marker
    unrecognised: np.ndarray  # bool: text that is neither a number nor a known marker


def _open_text_sample(path: Path) -> bytes:
    opener = gzip.open if path.name.lower().endswith(".gz") else open
    try:
        with opener(path, "rb") as handle:
            return handle.read(_SNIFF_BYTES)
    except (OSError, EOFError) as exc:
        raise CsvFormatError(f"cannot read the file: {exc}") from None


def _decode(sample: bytes) -> tuple[str, str]:
    if sample.startswith(codecs.BOM_UTF8):
        sample = sample[len(codecs.BOM_UTF8):]
    try:
        return sample.decode("utf-8"), "utf8"
    except UnicodeDecodeError as exc:
        if exc.start > len(sample) - 4:  # a character cut at the end of the sample
            return sample[: exc.start].decode("utf-8"), "utf8"
    return sample.decode("cp1252", errors="replace"), "cp1252"


def _field_counts(lines: Sequence[str], delimiter: str) -> list[int]:
    return [len(row) for row in csv.reader(lines, delimiter=delimiter)]


def _find_header(lines: Sequence[str], delimiter: str) -> int | None:
    """Index of the first non-comment line with >= 2 fields that most following lines share.

    Lines starting with ``#`` are a logger's metadata, never the header. "Most" (at least
    half of the next ten non-blank lines) lets a ragged row near the top be reported as such
    instead of hiding the header.
    """
    counts = _field_counts(lines, delimiter)
    for index, count in enumerate(counts):
        if count < 2 or lines[index].lstrip().startswith("#"):
            continue
        following = [c for c, line in zip(counts[index + 1:], lines[index + 1:])
                     if line.strip()][:10]
        if not following or 2 * sum(c == count for c in following) >= len(following):
            return index
    return None


def _is_decimal_comma(lines: Sequence[str], delimiter: str) -> bool:
    if delimiter == ",":
        return False
    cells = [cell.strip() for row in csv.reader(lines, delimiter=delimiter) for cell in row]
    comma = sum(1 for c in cells if re.fullmatch(r"[+-]?\d*,\d+([eE][+-]?\d+)?", c))
    point = sum(1 for c in cells if re.fullmatch(r"[+-]?\d*\.\d+([eE][+-]?\d+)?", c))
    return comma > 0 and point == 0


def sniff_dialect(path: Path) -> CsvDialect:
    """Delimiter, decimal sign, encoding and header line of a logger CSV (see module notes).

    Raises
    ------
    CsvFormatError
        Empty file, or no line with a time column and at least one value column.
    """
    text, encoding = _decode(_open_text_sample(path))
    lines = text.splitlines()
    if len(text) >= _SNIFF_BYTES - 4 and lines:
        lines = lines[:-1]  # the last line may be cut
    if not any(line.strip() for line in lines):
        raise CsvFormatError("the file is empty; expected a header line and data rows")
    best: tuple[int, int, str] | None = None
    for delimiter in (";", ",", "\t"):
        index = _find_header(lines, delimiter)
        if index is None:
            continue
        width = _field_counts([lines[index]], delimiter)[0]
        if best is None or (index, -width) < (best[0], -best[1]):
            best = (index, width, delimiter)
    if best is None:
        raise CsvFormatError(
            "no header line with a time column and at least one value column separated by "
            "',', ';' or tab was found", 1)
    index, _, delimiter = best
    header = tuple(next(csv.reader([lines[index]], delimiter=delimiter)))
    header = tuple(name.strip().lstrip("\ufeff") for name in header)
    decimal_comma = _is_decimal_comma(lines[index + 1:], delimiter)
    body = [line for line in lines[index + 1:index + 21] if line.strip()]
    rows = tuple(tuple(cell.strip() for cell in row)
                 for row in csv.reader(body, delimiter=delimiter))
    return CsvDialect(delimiter, decimal_comma, encoding, index + 1, header, rows)


def _guess_time_type(dialect: CsvDialect, column: int) -> pa.DataType:
    """Timestamp type pyarrow can parse the time column as, judged from the first rows."""
    cells = [row[column] for row in dialect.sample_rows if len(row) > column]
    if not cells:
        return pa.string()
    if all(re.fullmatch(_ISO_NAIVE + _ISO_OFFSET, c) for c in cells):
        return pa.timestamp("ns", tz="UTC")
    if all(re.fullmatch(_ISO_NAIVE, c) for c in cells):
        return pa.timestamp("ns")
    return pa.string()


def _options(dialect: CsvDialect, column_types: dict, use_threads: bool, recorder: list):
    names = [f"c{i}" for i in range(len(dialect.header))]

    def handler(row):
        recorder.append(row)
        return "skip"

    read = pacsv.ReadOptions(skip_rows=dialect.header_line, column_names=names,
                             use_threads=use_threads, encoding=dialect.encoding,
                             block_size=1 << 24)
    parse = pacsv.ParseOptions(delimiter=dialect.delimiter, ignore_empty_lines=False,
                               invalid_row_handler=handler)
    convert = pacsv.ConvertOptions(
        column_types=column_types, include_columns=list(column_types),
        null_values=_FAST_NULLS, strings_can_be_null=False, quoted_strings_can_be_null=False,
        decimal_point="," if dialect.decimal_comma else ".",
    )
    return read, parse, convert


def _read(path: Path, dialect: CsvDialect, column_types: dict) -> pa.Table:
    recorder: list = []
    read, parse, convert = _options(dialect, column_types, True, recorder)
    table = pacsv.read_csv(path, read_options=read, parse_options=parse,
                           convert_options=convert)
    if recorder:
        first = recorder[0]
        if first.number is None:  # only the single-threaded reader knows line numbers
            recorder.clear()
            read, parse, convert = _options(dialect, column_types, False, recorder)
            pacsv.read_csv(path, read_options=read, parse_options=parse,
                           convert_options=convert)
            first = recorder[0]
        raise CsvFormatError(
            f"line {first.number} has {first.actual_columns} fields but the header has "
            f"{first.expected_columns} (text: {first.text[:80]!r}); every row must have one "
            "field per header column", first.number)
    return table


def read_csv_columns(
    path: Path,
    dialect: CsvDialect,
    text_columns: Sequence[int],
    value_columns: Sequence[int],
    time_column: int | None = None,
) -> dict[int, pa.ChunkedArray]:
    """Read the chosen columns of a logger CSV, column-wise.

    Parameters
    ----------
    text_columns : sequence of int
        Columns read as text (sensor id, quality flag, unit).
    value_columns : sequence of int
        Columns read as float64 where every cell is a number or a gap marker, else as text
        (then classify them with :func:`classify_cells`).
    time_column : int or None
        Read as a timestamp when the first rows are plain ISO 8601 (pyarrow parses them while
        reading, which is much faster than parsing text afterwards), else as text.

    Returns
    -------
    dict
        Column index -> pyarrow array (string, float64 or timestamp), one entry per physical
        line from the first data line on (blank lines included as empty rows).
    """
    types = {f"c{i}": pa.string() for i in text_columns}
    types.update({f"c{i}": pa.float64() for i in value_columns})
    if time_column is not None:
        types[f"c{time_column}"] = _guess_time_type(dialect, time_column)
    for _ in range(3):
        try:
            table = _read(path, dialect, types)
            break
        except pa.ArrowInvalid as exc:
            message = str(exc)
            if "conversion error" not in message:
                raise CsvFormatError(f"unreadable CSV: {message}") from None
            if "timestamp" in message.split("invalid value")[0]:
                types[f"c{time_column}"] = pa.string()
            else:
                types.update({f"c{i}": pa.string() for i in value_columns})
        except (OSError, EOFError) as exc:
            raise CsvFormatError(f"cannot read the file: {exc}") from None
    else:  # pragma: no cover - every column is text by now
        raise CsvFormatError("unreadable CSV")
    return {int(name[1:]): table.column(name) for name in table.column_names}


def classify_cells(column: pa.ChunkedArray | pa.Array, decimal_comma: bool = False) -> CellClasses:
    """Sort the cells of a text column into numbers, gaps, range markers and the rest.

    Parameters
    ----------
    column : pyarrow array of strings
    decimal_comma : bool
        Read ``1013,25`` as 1013.25.

    Returns
    -------
    CellClasses
        Vectorised masks, one entry per cell; see the module notes for the markers.
    """
    if isinstance(column, pa.ChunkedArray):
        column = column.combine_chunks()
    text = pc.utf8_lower(pc.utf8_trim_whitespace(pc.fill_null(column.cast(pa.string()), "")))
    if decimal_comma:
        text = pc.replace_substring(text, ",", ".")

    def mask(expression) -> np.ndarray:
        return np.asarray(expression.to_numpy(zero_copy_only=False), dtype=bool)

    empty = mask(pc.equal(text, ""))
    gap = mask(pc.is_in(text, value_set=pa.array(GAP_MARKERS)))
    over = mask(pc.is_in(text, value_set=pa.array(OVER_RANGE_MARKERS)))
    under = mask(pc.is_in(text, value_set=pa.array(UNDER_RANGE_MARKERS)))
    numeric = pc.match_substring_regex(text, _NUMBER)
    values = pc.cast(pc.if_else(numeric, text, pa.scalar(None, pa.string())), pa.float64())
    values = np.asarray(values.to_numpy(zero_copy_only=False), dtype=np.float64)
    unrecognised = ~(mask(numeric) | gap | over | under)
    return CellClasses(values, empty, gap, over, under, unrecognised)
