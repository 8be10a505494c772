"""Read a dataset in record batches with pyarrow, with the same meaning as the in-memory reader.

A source is a CSV/TSV file, a Parquet file or a folder of Parquet files (its parts). Each
batch becomes group labels (exact text; missing tokens are missing) and float columns (NaN
where missing or not a number, counted with up to 3 examples), exactly as
:func:`sitebuild.ingest.read_table` reads them.
"""

from __future__ import annotations

import csv
import hashlib
from collections.abc import Iterator
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from ..cache import file_sha256
from ..errors import SitebuildError
from ..ingest import (
    MISSING_TOKENS,
    PARQUET_SUFFIXES,
    TEXT_SUFFIXES,
    ColumnProblem,
    _check_columns,
    _label_text,
    _to_numbers,
    arrow_group_text,
    check_group_type,
    read_head,
)
from ..manifest import DatasetSpec

BATCH_ROWS = 1 << 20  # rows per record batch: bounds the memory of every pass
CSV_BLOCK_BYTES = 1 << 23  # bytes of CSV text parsed at a time (about 200,000 short rows)


@dataclass(frozen=True)
class Source:
    """Where a dataset's rows come from and how to read them; small and picklable."""

    kind: str  # "csv" or "parquet"
    parts: tuple[str, ...]  # file paths; a Parquet folder has one part per file
    group: str
    numeric: tuple[str, ...]  # measures, then x (each once)
    file: str  # as written in the manifest
    delimiter: str | None = None
    encoding: str = "utf-8"
    header: tuple[str, ...] = ()
    warnings: tuple[str, ...] = field(default=(), compare=False)
    labels: tuple[str, ...] = ()  # kind "spill": the label of each stored group index
    body: bool = field(default=False, compare=False)  # text after a CSV header line

    @property
    def decimal_comma(self) -> bool:
        return self.delimiter == ";"


def parquet_parts(path: Path) -> list[Path]:
    """Return the Parquet files of a folder (recursively, sorted), skipping hidden files."""
    parts = [
        p
        for p in sorted(path.rglob("*"))
        if p.is_file()
        and p.suffix.lower() in PARQUET_SUFFIXES
        and not any(s.startswith((".", "_")) for s in p.relative_to(path).parts)
    ]
    return parts


def source_sha256(path: Path) -> str:
    """Return the SHA-256 of a file, or of a folder's (relative name, file hash) list."""
    if path.is_file():
        return file_sha256(path)
    digest = hashlib.sha256()
    for part in parquet_parts(path):
        digest.update(f"{part.relative_to(path).as_posix()}\0{file_sha256(part)}\n".encode())
    return digest.hexdigest()


def open_source(spec: DatasetSpec) -> Source:
    """Return the :class:`Source` of ``spec``, after checking the file and its columns."""
    import pyarrow.parquet as pq

    path = spec.path
    numeric = tuple(dict.fromkeys([*spec.measures, *([spec.x] if spec.x else [])]))
    if path.is_dir():
        parts = parquet_parts(path)
        if not parts:
            raise SitebuildError(
                f"{spec.file}: the folder holds no .parquet files; a folder dataset must be "
                "Parquet parts of one table."
            )
        kind = "parquet"
    else:
        parts = [path]
        suffix = path.suffix.lower()
        if path.stat().st_size == 0:
            raise SitebuildError(
                f"{spec.file}: the file is empty; export the data again with a header row."
            )
        if suffix in PARQUET_SUFFIXES:
            kind = "parquet"
        elif suffix in TEXT_SUFFIXES:
            kind = "csv"
        else:
            raise SitebuildError(
                f"{spec.file}: files ending '{suffix}' cannot be streamed; use .csv, .tsv, .txt "
                "or Parquet (a file or a folder of parts)."
            )
    if kind == "parquet":
        for part in parts:
            try:
                names = list(pq.read_schema(part).names)
            except Exception as exc:  # pyarrow raises several types for a bad file
                raise SitebuildError(
                    f"{spec.file}: {part.name} is not a readable Parquet file ({exc}); export it again."
                ) from None
            _check_columns(spec, names)
            check_group_type(spec, pq.read_schema(part).field(spec.group).type)
        return Source(
            kind="parquet",
            parts=tuple(str(p) for p in parts),
            group=spec.group,
            numeric=numeric,
            file=spec.file,
            encoding="parquet",
        )
    head = read_head(spec, path, path.suffix.lower())
    return Source(
        kind="csv",
        parts=(str(path),),
        group=spec.group,
        numeric=numeric,
        file=spec.file,
        delimiter=head.delimiter,
        encoding=head.encoding,
        header=tuple(head.header),
        warnings=tuple(head.warnings),
        body=head.body,
    )


@dataclass
class Batch:
    """One batch of rows as read: raw group values and float columns (NaN = missing)."""

    labels: list[str | None]  # label text per distinct group value in this batch
    label_index: np.ndarray  # int32 per row into ``labels``; -1 where the value is null
    columns: dict[str, np.ndarray]
    problems: dict[str, ColumnProblem]
    first_row: int  # row number of the batch's first row within its part

    @property
    def rows(self) -> int:
        return int(self.label_index.shape[0])


def _group_batch(array) -> tuple[list[str | None], np.ndarray]:
    """Return (label per distinct value, index per row) for one batch's group column."""
    import pyarrow as pa
    import pyarrow.compute as pc

    if isinstance(array, pa.ChunkedArray):
        array = array.combine_chunks()
    if not pa.types.is_dictionary(array.type):
        array = pc.dictionary_encode(array)
    index = array.indices.to_numpy(zero_copy_only=False)
    index = np.where(array.indices.is_null().to_numpy(zero_copy_only=False), -1, index)
    uniques = array.dictionary.to_pandas()
    return _label_text(uniques.to_numpy() if uniques.dtype.kind == "f" else uniques), index.astype(
        np.int32
    )


def _numbers_batch(array, name: str, decimal_comma: bool, text: bool):
    """Return (float64 values, problem) for one batch's column, as ingest would read it."""
    import pyarrow as pa
    import pyarrow.compute as pc

    if isinstance(array, pa.ChunkedArray):
        array = array.combine_chunks()
    if not text and (pa.types.is_floating(array.type) or pa.types.is_integer(array.type)):
        values = pc.cast(array, pa.float64()).to_numpy(zero_copy_only=False)
        values = np.where(array.is_null().to_numpy(zero_copy_only=False), np.nan, values)
        bad = np.isinf(values)
        if not bad.any():
            return values, None
        index = np.flatnonzero(bad)
        values[bad] = np.nan
        return values, ColumnProblem(
            count=int(index.size),
            examples=tuple(str(float(array[int(i)].as_py())) for i in index[:3]),
        )
    if pa.types.is_string(array.type) or pa.types.is_large_string(array.type):
        # Fast path: pyarrow parses plain numbers; anything it rejects goes through the same
        # pandas conversion as the in-memory reader, so the meaning never differs.
        try:
            cleaned = pc.replace_substring(array, ",", ".") if decimal_comma else array
            values = pc.cast(cleaned, pa.float64()).to_numpy(zero_copy_only=False)
        except (pa.ArrowInvalid, pa.ArrowNotImplementedError):
            values = None
        if values is not None:
            present = ~array.is_null().to_numpy(zero_copy_only=False)
            values = np.where(present, values, np.nan)
            bad = (np.isnan(values) & present) | np.isinf(values)
            if not bad.any():
                return values, None
            index = np.flatnonzero(bad)
            values[bad] = np.nan
            return values, ColumnProblem(
                count=int(index.size),
                examples=tuple(str(array[int(i)].as_py())[:40] for i in index[:3]),
            )
    return _to_numbers(array.to_pandas(), name, decimal_comma)


def _short_rows_batch(rows: list[str], source: Source):
    """Return a pyarrow table of CSV rows that had fewer fields than the header, padded."""
    import pyarrow as pa

    positions = {name: source.header.index(name) for name in (source.group, *source.numeric)}
    parsed = [next(csv.reader([text], delimiter=source.delimiter), []) for text in rows]
    data = {}
    for name, position in positions.items():
        values = [r[position] if position < len(r) else None for r in parsed]
        data[name] = pa.array([None if v in MISSING_TOKENS else v for v in values], pa.string())
    return pa.table(data)


def csv_chunks(path: str, block_bytes: int, delimiter: str = ",") -> Iterator[bytes]:
    """Yield the file as pieces of whole records, each starting with the header line.

    Lines end at CR, LF or CRLF (the in-memory reader's rule). A piece ends at a line end
    outside quotes (see :func:`sitebuild.ingest.quotes_outside`), so a quoted field holding a
    line break is never cut. Reading one piece at a time is what bounds memory: pyarrow's own
    streaming reader reads ahead of its consumer without limit.
    """
    with open(path, "rb") as handle:
        header, rest = _header_line(handle, block_bytes)
        while True:
            data = handle.read(block_bytes)
            if not data:
                if rest.strip():
                    yield header + rest
                return
            buffer = rest + data
            cut = _last_record_end(buffer, delimiter)
            if cut < 0:
                rest = buffer  # one record longer than a block: read on
                continue
            yield header + buffer[: cut + 1]
            rest = buffer[cut + 1 :]


def _header_line(handle, block_bytes: int) -> tuple[bytes, bytes]:
    """Return (the header line with its line end, the bytes read past it)."""
    data = b""
    while True:
        more = handle.read(block_bytes)
        data += more
        ends = [i for i in (data.find(b"\n"), data.find(b"\r")) if i >= 0]
        if ends:
            end = min(ends)
            if data[end : end + 2] == b"\r\n":
                end += 1
            elif data[end : end + 1] == b"\r" and end + 1 == len(data) and more:
                continue  # a CR at the end of what was read may be half of a CRLF
            return data[: end + 1], data[end + 1 :]
        if not more:
            return data, b""


def _last_record_end(buffer: bytes, delimiter: str) -> int:
    """Return the position of the last line end outside quotes in ``buffer`` (-1: none). A CR
    last in the buffer is not taken: the LF of its CRLF may be in the next block."""
    from ..ingest import quotes_outside

    raw = np.frombuffer(buffer, dtype=np.uint8)
    outside = quotes_outside(raw, delimiter)
    if outside is None:
        return _last_record_end_slow(buffer, delimiter)
    ends = np.flatnonzero(((raw == 10) | (raw == 13)) & outside)
    if ends.size and ends[-1] == raw.size - 1 and raw[-1] == 13:
        ends = ends[:-1]
    return int(ends[-1]) if ends.size else -1


def _last_record_end_slow(buffer: bytes, delimiter: str) -> int:
    """:func:`_last_record_end` by the CSV rule, byte by byte: a quote opens a quoted field only
    at the field's start; inside one, "" is a quote and a lone quote closes it."""
    sep, quote = ord(delimiter), 34
    last, inside, field_start, i, n = -1, False, True, 0, len(buffer)
    while i < n:
        byte = buffer[i]
        if inside:
            if byte == quote:
                if i + 1 < n and buffer[i + 1] == quote:
                    i += 1
                else:
                    inside = False
        elif byte == quote and field_start:
            inside, field_start = True, False
        elif byte == sep:
            field_start = True
        elif byte in (10, 13):
            field_start = True
            if not (byte == 13 and i + 1 == n):
                last = i
        else:
            field_start = False
        i += 1
    return last


def _csv_tables(source: Source, batch_rows: int, block_bytes: int = CSV_BLOCK_BYTES) -> Iterator:
    import pyarrow as pa
    import pyarrow.csv as pacsv

    names = (source.group, *source.numeric)
    short: list[str] = []
    long_rows: list[str] = []

    def invalid(row):
        if row.actual_columns < row.expected_columns:
            short.append(row.text)
            return "skip"
        long_rows.append(row.text)
        return "error"

    encoding = "utf8" if source.encoding.startswith("utf-8") else source.encoding
    options = {
        "read_options": pacsv.ReadOptions(encoding=encoding, use_threads=False),
        "parse_options": pacsv.ParseOptions(
            delimiter=source.delimiter, invalid_row_handler=invalid
        ),
        "convert_options": pacsv.ConvertOptions(
            include_columns=list(names),
            column_types={n: pa.string() for n in names},
            null_values=list(MISSING_TOKENS),
            strings_can_be_null=True,
            quoted_strings_can_be_null=True,
        ),
    }
    try:
        for chunk in csv_chunks(source.parts[0], block_bytes, source.delimiter or ","):
            table = pacsv.read_csv(pa.BufferReader(chunk), **options)
            del chunk
            for start in range(0, table.num_rows, batch_rows):
                yield table.slice(start, batch_rows)
    except pa.ArrowInvalid as exc:
        if long_rows:
            shown = long_rows[0][:60]
            raise SitebuildError(
                f"{source.file}: a row has more fields than the header (it starts '{shown}'); fix "
                "that row or quote fields that contain the delimiter."
            ) from None
        if "UTF8" in str(exc) or "utf8" in str(exc).lower():
            raise UnicodeError(str(exc)) from None
        raise SitebuildError(f"{source.file}: the file could not be read as CSV ({exc}).") from None
    if short:
        yield _short_rows_batch(short, source)


def _parquet_tables(path: str, source: Source, batch_rows: int) -> Iterator:
    import pyarrow.parquet as pq

    handle = pq.ParquetFile(path, read_dictionary=[source.group])
    yield from handle.iter_batches(batch_size=batch_rows, columns=[source.group, *source.numeric])


def batches(
    source: Source, part: int, batch_rows: int | None = None, block_bytes: int | None = None
) -> Iterator[Batch]:
    """Yield the rows of one part of ``source`` as :class:`Batch` objects, in file order.

    Defaults: :data:`BATCH_ROWS` rows per batch, :data:`CSV_BLOCK_BYTES` of CSV per piece.
    """
    batch_rows = batch_rows or BATCH_ROWS
    block_bytes = block_bytes or CSV_BLOCK_BYTES
    if source.kind == "spill":
        yield from _spill_batches(source)
        return
    if source.kind == "csv":
        tables = _csv_tables(source, batch_rows, block_bytes)
    else:
        tables = _parquet_tables(source.parts[part], source, batch_rows)
    text = source.kind == "csv"
    first = 0
    for table in tables:
        group = table.column(source.group)
        if not text:
            group = arrow_group_text(source.file, source.group, group)
        labels, index = _group_batch(group)
        columns, problems = {}, {}
        for name in source.numeric:
            values, problem = _numbers_batch(
                table.column(name), name, source.decimal_comma, text=text
            )
            columns[name] = values
            if problem:
                problems[name] = problem
        yield Batch(labels, index, columns, problems, first)
        first += table.num_rows


def _spill_batches(source: Source) -> Iterator[Batch]:
    """Yield the batches of a spill file (group index + float columns, Arrow IPC)."""
    import pyarrow as pa

    labels = list(source.labels)
    first = 0
    if not Path(source.parts[0]).exists():
        return  # a file with a header and no rows wrote no spill
    # Plain reads, one record batch at a time: a memory map of the whole spill would count
    # its full size against the address space.
    with pa.OSFile(source.parts[0], "rb") as handle:
        reader = pa.ipc.open_file(handle)
        for i in range(reader.num_record_batches):
            record = reader.get_batch(i)
            index = record.column(0).to_numpy()
            columns = {n: record.column(j + 1).to_numpy() for j, n in enumerate(source.numeric)}
            yield Batch(labels, index, columns, {}, first)
            first += record.num_rows


def write_spill(path: str, batches_with_codes) -> None:
    """Write (group index array, {column: float array}) pairs to an Arrow IPC file."""
    import pyarrow as pa

    writer = None
    try:
        for codes, columns in batches_with_codes:
            record = pa.record_batch(
                [
                    pa.array(codes, pa.int32()),
                    *(pa.array(v, pa.float64()) for v in columns.values()),
                ],
                names=["group index", *columns],
            )
            if writer is None:
                writer = pa.ipc.new_file(path, record.schema)
            writer.write_batch(record)
    finally:
        if writer is not None:
            writer.close()
