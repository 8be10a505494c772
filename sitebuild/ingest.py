"""Read one dataset's file into a :class:`Table`: group labels as text, measures as floats.

Rows with a missing group are dropped and counted; a missing or unparsable value in one
measure never drops the row for the others. Everything that happened is in the
:class:`IngestReport`.
"""

from __future__ import annotations

import csv
import io
import os
import re
import threading
import warnings as warnings_module
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from .cache import file_sha256
from .errors import SitebuildError
from .manifest import DatasetSpec
from .readers.delimited import (  # noqa: F401 (re-exported for the engines)
    DELIMITERS,
    LINE_END,
    MISSING_TOKENS,
    sniff_delimiter,
    split_lines,
)

TEXT_SUFFIXES = (".csv", ".tsv", ".txt")
PARQUET_SUFFIXES = (".parquet", ".pq")
JSONL_SUFFIXES = (".jsonl", ".ndjson")


@dataclass(frozen=True)
class ColumnProblem:
    """Values in one column that could not be read as finite numbers."""

    count: int
    examples: tuple[str, ...]


@dataclass(frozen=True)
class IngestReport:
    """What reading one file did: rows read, used and dropped (and why), values not parsed."""

    file: str
    sha256: str
    rows_read: int
    rows_used: int
    rows_dropped: int
    drop_reasons: dict[str, int]
    missing: dict[str, int]
    unparsed: dict[str, ColumnProblem]
    encoding: str
    delimiter: str | None
    warnings: tuple[str, ...] = ()
    # What reading did to the data beyond parsing (filters, trimmed labels, decimal commas).
    notes: tuple[str, ...] = ()
    # Set when x holds dates: x is then days since ``origin`` (see sitebuild.readers.dates).
    x_time: dict | None = None

    def to_json(self) -> dict:
        """Return the ``source`` block of results.json."""
        return {
            "file": self.file,
            "sha256": self.sha256,
            "rows_read": self.rows_read,
            "rows_used": self.rows_used,
            "rows_dropped": self.rows_dropped,
            "drop_reasons": dict(self.drop_reasons),
            "missing": dict(self.missing),
            "unparsed": {
                k: {"count": v.count, "examples": list(v.examples)}
                for k, v in self.unparsed.items()
            },
            "encoding": self.encoding,
            "delimiter": self.delimiter,
            "warnings": list(self.warnings),
            **({"notes": list(self.notes)} if self.notes else {}),
            **({"x_time": dict(self.x_time)} if self.x_time else {}),
        }


_KEEP_LOCK = threading.Lock()


@dataclass(frozen=True, eq=False)
class Table:
    """A dataset ready for statistics.

    ``codes[i]`` is the index into ``groups`` of row ``i``; ``columns[name]`` is a float64
    array per measure (and ``x``), NaN where missing or unparsable.
    """

    spec: DatasetSpec
    groups: tuple[str, ...]
    codes: np.ndarray
    columns: dict[str, np.ndarray]
    report: IngestReport
    # Set by the streaming and Dask engines: exact summaries of every row (see
    # sitebuild.streaming.engine.Streamed), while ``codes``/``columns`` hold a bounded sample.
    exact: object | None = None
    _kept: dict = field(default_factory=dict, repr=False)  # what rows_by_group() made

    @property
    def n_rows(self) -> int:
        return int(self.codes.shape[0])

    def values(self, name: str) -> np.ndarray:
        """Return the float column ``name`` (NaN = missing), one entry per used row."""
        return self.columns[name]

    def rows_by_group(self) -> tuple[np.ndarray, np.ndarray]:
        """Return :func:`group_order` of every row (positions sorted by group, each group's
        in their original order, and the group bounds).

        Made once and kept: every section asks for it (at 10M rows each sort took about
        0.1 s), and the positions are stored in 32 bits when they fit (40 MB at 10M rows).
        """
        with _KEEP_LOCK:
            if "rows" not in self._kept:
                order, bounds = group_order(self.codes, len(self.groups))
                if order.size < 2**31:
                    order = order.astype(np.int32)
                self._kept["rows"] = (order, bounds)
            return self._kept["rows"]

    def by_group(self, name: str) -> list[np.ndarray]:
        """Return the non-missing values of ``name`` per group, in display order.

        Made afresh on each call (each caller asks once per column): kept, they would hold a
        copy of every column for the whole build (10M rows: 400 MB).
        """
        ordered, bounds = in_group_order(
            self.columns[name], self.codes, len(self.groups), self.rows_by_group()
        )
        return [ordered[bounds[i] : bounds[i + 1]] for i in range(len(self.groups))]


def in_group_order(
    values: np.ndarray,
    codes: np.ndarray,
    n_groups: int,
    rows: tuple[np.ndarray, np.ndarray] | None = None,
) -> tuple[np.ndarray, np.ndarray]:
    """Return (the non-missing values in group order, each group's in their original order;
    the group bounds). ``rows`` is :func:`group_order` of every code when the caller keeps it
    (:meth:`Table.rows_by_group`): with no value missing, neither the column nor the codes are
    then copied (10M rows: 160 MB)."""
    keep = ~np.isnan(values)
    if keep.all():
        order, bounds = rows if rows is not None else group_order(codes, n_groups)
        return values[order], bounds
    order, bounds = group_order(codes[keep], n_groups)
    return values[keep][order], bounds


def group_order(codes: np.ndarray, n_groups: int) -> tuple[np.ndarray, np.ndarray]:
    """Return (order, bounds): positions sorted by group code, each group's in their original
    order, group g at ``order[bounds[g]:bounds[g + 1]]``.

    Small codes sort as int16, by radix (linear); a stable sort gives the same order.

    Examples
    --------
    >>> order, bounds = group_order(np.array([1, 0, 1, 0]), 2)
    >>> order.tolist(), bounds.tolist()
    ([1, 3, 0, 2], [0, 2, 4])
    """
    narrow = codes.astype(np.int16) if n_groups < 32_000 else codes
    order = np.argsort(narrow, kind="stable")
    return order, np.searchsorted(narrow[order], np.arange(n_groups + 1))


def natural_key(label: str):
    """Sort key that puts 'Line 2' before 'Line 10' and numbers before words."""
    parts = re.split(r"(\d+)", label)
    return [(0, int(p), p) if p.isdigit() else (1, 0, p.casefold()) for p in parts]


def display_key(order: tuple[str, ...] = ()):
    """Return the sort key for group labels: those in the manifest's ``order`` first, in that
    order (early, late, night), then the rest by :func:`natural_key`.

    Examples
    --------
    >>> sorted(["Night", "Line 10", "Early", "Line 2"], key=display_key(("Early", "Night")))
    ['Early', 'Night', 'Line 2', 'Line 10']
    """
    position = {label: i for i, label in enumerate(order)}

    def key(label: str):
        at = position.get(label)
        return (0, at, []) if at is not None else (1, 0, natural_key(label))

    return key


def _decode_head(path: Path, raw: bytes, shown: str | None = None) -> tuple[str, str, list[str]]:
    """Return (encoding for pandas, decoded head, warnings)."""
    if b"\x00" in raw[:8192]:
        raise SitebuildError(
            f"{path.name}: this looks like a binary file, not delimited text; export the data "
            "as CSV, Parquet or JSON Lines."
        )
    if raw.startswith(b"\xef\xbb\xbf"):
        return "utf-8-sig", raw[3:].decode("utf-8", errors="replace"), []
    try:
        raw.decode("utf-8")
        return "utf-8", raw.decode("utf-8"), []
    except UnicodeDecodeError as exc:
        # A multi-byte character cut by the head's end is still UTF-8.
        if exc.start >= len(raw) - 4:
            return "utf-8", raw[: exc.start].decode("utf-8"), []
    # Windows-1252, as the in-memory reader (sitebuild.readers.encodings); Latin-1 only when
    # the head holds a byte Windows-1252 leaves undefined, as a streaming decoder needs one
    # codec for the whole file.
    from .readers.encodings import LEGACY, decode

    try:
        raw.decode(LEGACY)
    except UnicodeDecodeError:
        return (
            "latin-1",
            raw.decode("latin-1"),
            [
                f"{shown or path.name} is not UTF-8; it was read as Latin-1 — check that accented "
                "labels look right, or set encoding in the manifest."
            ],
        )
    text, encoding, warnings = decode(raw, shown or path.name)
    return encoding, text, warnings


def _needed(spec: DatasetSpec) -> list[str]:
    names = [spec.group, *spec.measures]
    if spec.x and spec.x not in names:
        names.append(spec.x)
    names += [c for c in spec.where if c not in names]  # filter columns (readers.tidy)
    return names


def _short(text: str, limit: int = 60) -> str:
    """Return ``text`` cut to ``limit`` characters with '…' when longer (for messages)."""
    return text if len(text) <= limit else text[: limit - 1] + "…"


def _check_columns(spec: DatasetSpec, header: list[str]) -> None:
    seen: dict[str, int] = {}
    for name in header:
        seen[name] = seen.get(name, 0) + 1
    # Never the whole header: a file may have a million columns or names a megabyte long.
    available = ", ".join(f"'{_short(h)}'" for h in header[:40])
    if len(header) > 40:
        available += f" and {len(header) - 40:,} more"
    from .readers.tidy import did_you_mean

    for role, name in [
        ("group", spec.group),
        *(("measures", m) for m in spec.measures),
        ("x", spec.x),
        *(("where", c) for c in spec.where),
    ]:
        if name is None:
            continue
        if name not in seen:
            raise SitebuildError(
                f"{spec.file}: column '{name}' (key '{role}' of dataset '{spec.name}') is not in "
                f"the file{did_you_mean(name, list(seen))}; the columns are {available}."
            )
        if seen[name] > 1:
            raise SitebuildError(
                f"{spec.file}: column '{name}' appears {seen[name]} times in the header; rename "
                "the duplicates so each column name is unique."
            )


def _to_numbers(
    raw, name: str, decimal_comma: bool, override: str | None = None, notes: list | None = None
) -> tuple[np.ndarray, ColumnProblem | None]:
    """Convert a pandas Series to float64; count values that are not finite numbers.

    The decimal mark of a text column is ``override`` (the manifest's ``decimal``) or, unless
    ``decimal_comma`` says it is a comma, decided from its values; a note saying so is
    appended to ``notes``.
    """
    from .readers.decimals import as_floats, choose_decimal

    if raw.dtype.kind in "fiu":
        values = raw.to_numpy(dtype=np.float64, na_value=np.nan)
        bad = np.isinf(values)
        text = None
    else:
        text = raw.astype("string")
        cleaned = text.str.strip()
        if decimal_comma and not override:
            mark = ","
        else:
            choice = choose_decimal(cleaned, name, override)
            mark = choice.mark
            if choice.note and notes is not None:
                notes.append(choice.note)
        values = as_floats(cleaned, mark)
        present = text.notna().to_numpy() & ~cleaned.isin(MISSING_TOKENS).fillna(False).to_numpy()
        bad = (np.isnan(values) & present) | np.isinf(values)
    count = int(bad.sum())
    if not count:
        return values, None
    index = np.flatnonzero(bad)[:3]
    if text is not None:
        examples = tuple(str(text.iloc[i])[:40] for i in index)
    else:
        examples = tuple(str(values[i]) for i in index)
    values = values.copy()
    values[bad] = np.nan
    return values, ColumnProblem(count=count, examples=examples)


def _label_text(uniques) -> list[str | None]:
    """Return each distinct raw group value as its label text (None where it means missing)."""
    import pandas as pd

    if uniques.dtype.kind == "f":
        # A numeric group code stored as float: 1.0 -> "1", keep others as written.
        return [str(int(v)) if float(v).is_integer() else repr(float(v)) for v in uniques]
    text = pd.Series(uniques).astype("string")
    missing = (text.isna() | text.str.strip().isin(MISSING_TOKENS)).to_numpy()
    return [None if gone else str(t) for t, gone in zip(text.tolist(), missing, strict=True)]


def json_group_labels(spec: DatasetSpec, path: Path) -> list[str | None]:
    """Return the group label of each JSON Lines record from the value's own text: ``true``,
    ``1`` and ``1.0`` are three groups (pandas would merge them, as True == 1 == 1.0 in
    Python); null or an absent key is None. A JSON object or list is refused."""
    import json

    labels: list[str | None] = []
    with open(path, encoding="utf-8", errors="replace") as handle:
        for number, line in enumerate(handle, 1):
            if not line.strip():
                continue
            try:
                record = json.loads(line, parse_float=str, parse_int=str, parse_constant=str)
            except ValueError as exc:
                raise SitebuildError(
                    f"{spec.file}: not valid JSON Lines at line {number} ({exc}); each line "
                    "must be one JSON object."
                ) from None
            value = record.get(spec.group) if isinstance(record, dict) else None
            if isinstance(value, dict | list):
                kind = "an object" if isinstance(value, dict) else "a list"
                raise SitebuildError(
                    f"{spec.file}: column '{spec.group}' holds {kind} at line {number}; group "
                    "values must be text, numbers or true/false; choose another group column."
                )
            if isinstance(value, bool):
                value = "true" if value else "false"
            labels.append(value)
    return labels


def check_group_type(spec: DatasetSpec, arrow_type) -> None:
    """Refuse a Parquet group column whose values are not text, numbers, true/false or dates:
    lists, structs and maps have no label text."""
    import pyarrow as pa

    if pa.types.is_dictionary(arrow_type):
        arrow_type = arrow_type.value_type
    nested = (
        pa.types.is_list(arrow_type)
        or pa.types.is_large_list(arrow_type)
        or pa.types.is_fixed_size_list(arrow_type)
        or pa.types.is_struct(arrow_type)
        or pa.types.is_map(arrow_type)
        or pa.types.is_union(arrow_type)
    )
    if nested:
        raise SitebuildError(
            f"{spec.file}: column '{spec.group}' is of type {arrow_type}; group values must be "
            "text, numbers or true/false; choose another group column."
        )


def arrow_group_text(file: str, group: str, array):
    """Return a Parquet group column (array or chunked array) with binary values decoded as
    UTF-8 text, refused with a sentence when they are not UTF-8; other types come back as
    they are."""
    import pyarrow as pa
    import pyarrow.compute as pc

    def binary(kind) -> bool:
        return (
            pa.types.is_binary(kind)
            or pa.types.is_large_binary(kind)
            or pa.types.is_fixed_size_binary(kind)
        )

    kind = array.type.value_type if pa.types.is_dictionary(array.type) else array.type
    if not binary(kind):
        return array
    if isinstance(array, pa.ChunkedArray):
        array = array.combine_chunks()

    def text(values):
        return pc.cast(
            values if pa.types.is_binary(values.type) else pc.cast(values, pa.binary()), pa.string()
        )

    try:
        if pa.types.is_dictionary(array.type):
            return pa.DictionaryArray.from_arrays(array.indices, text(array.dictionary))
        return text(array)
    except (pa.ArrowInvalid, pa.ArrowNotImplementedError):
        raise SitebuildError(
            f"{file}: column '{group}' holds bytes that are not UTF-8 text (type {kind}); "
            "store the group labels as text, or choose another group column."
        ) from None


def unordered_warnings(spec: DatasetSpec, groups: tuple[str, ...]) -> list[str]:
    """Warnings for the groups the manifest's ``order`` names but the data does not have: one
    per label up to five, then one warning summing up the rest (with the first few names)."""
    present = set(groups)
    missing = [label for label in spec.order if label not in present]
    unknown_codes = [
        f"labels names '{code}', which is not a group in column '{spec.group}'; check the "
        "spelling (codes are compared exactly, so 01 and 1 differ)."
        for code in spec.labels
        if code not in present
    ]
    if len(missing) > 5:
        shown = ", ".join(f"'{_short(label, 30)}'" for label in missing[:3])
        return [
            f"order names {len(missing):,} labels that are not groups in column "
            f"'{spec.group}' (such as {shown}); check the spelling (labels are compared exactly)."
        ] + unknown_codes
    return [
        f"order names '{label}', which is not a group in column '{spec.group}'; check the "
        "spelling (labels are compared exactly)."
        for label in missing
    ] + unknown_codes


def group_codes(raw, order: tuple[str, ...] = ()) -> tuple[np.ndarray, tuple[str, ...]]:
    """Return (int32 code per row, -1 where the group is missing; labels in display order).

    Labels are the exact text as written; display order is :func:`display_key` (the
    manifest's ``order``, then natural order), ties kept in order of first appearance. The work per row is one hash factorisation; everything else
    touches only the distinct values.
    """
    import pandas as pd

    raw_codes, uniques = pd.factorize(raw, sort=False, use_na_sentinel=True)
    texts = _label_text(uniques)
    # Distinct raw values can share a label (1 and "1" in JSON Lines): merge them.
    first: dict[str, int] = {}
    label_of = np.full(len(texts) + 1, -1, dtype=np.int64)  # last slot: raw NaN sentinel
    for i, label in enumerate(texts):
        if label is not None:
            label_of[i] = first.setdefault(label, len(first))
    labels = list(first)
    key = display_key(order)
    order = sorted(range(len(labels)), key=lambda i: key(labels[i]))
    rank = np.empty(len(labels) + 1, dtype=np.int32)
    rank[order] = np.arange(len(labels), dtype=np.int32)
    rank[-1] = -1
    codes = rank[label_of[raw_codes]]  # -1 indexes the sentinel slots
    return codes.astype(np.int32, copy=False), tuple(labels[i] for i in order)


HEAD_BYTES = 65536  # bytes read to decode, sniff and find the header of a text file
MAX_HEADER_BYTES = 64 << 20  # a header line longer than this is refused, not read on


@dataclass(frozen=True)
class Head:
    """The start of a delimited text file: how to read it and its header."""

    text: str  # the decoded first HEAD_BYTES bytes (more when the header line is longer)
    whole: bool  # the text is the whole file
    encoding: str
    delimiter: str
    header: list[str]
    warnings: list[str]
    body: bool = False  # something other than blank lines follows the header line


def _head_bytes(spec: DatasetSpec, path: Path) -> tuple[bytes, bool]:
    """Return (the file's first HEAD_BYTES bytes, or up to the end of its first line when that
    is longer; True when that is the whole file)."""
    with open(path, "rb") as handle:
        data = handle.read(HEAD_BYTES)
        whole = len(data) < HEAD_BYTES
        while not whole and b"\n" not in data and b"\r" not in data:
            more = handle.read(HEAD_BYTES)
            whole = len(more) < HEAD_BYTES
            data += more
            if len(data) > MAX_HEADER_BYTES:
                raise SitebuildError(
                    f"{spec.file}: the first line is longer than {MAX_HEADER_BYTES >> 20} MB "
                    "without a line end; check that this is a delimited text file with a header "
                    "row."
                )
    return data, whole


def read_head(spec: DatasetSpec, path: Path, suffix: str) -> Head:
    """Decode the start of a text file, sniff its delimiter and check its header's columns
    (shared by the in-memory reader and the stream engine). Lines end at CR, LF or CRLF."""
    head_bytes, whole = _head_bytes(spec, path)
    encoding, text, warnings = _decode_head(path, head_bytes, spec.file)
    delimiter = sniff_delimiter(text, suffix)
    lines = split_lines(text)
    first = lines[0] if lines else ""
    try:
        header = next(csv.reader([first], delimiter=delimiter), [])
    except csv.Error as exc:
        raise SitebuildError(
            f"{spec.file}: the header line could not be split into column names ({exc}); "
            "check that the first line names the columns."
        ) from None
    if not any(h.strip() for h in header):
        raise SitebuildError(
            f"{spec.file}: the first line is empty; the first line must name the columns."
        )
    header = [h.strip() for h in header]  # ' Kosten (€) ' names the column 'Kosten (€)'
    _check_columns(spec, header)
    body = any(line.strip() for line in lines[1:3])
    return Head(text, whole, encoding, delimiter, header, warnings, body)


def no_rows_error(spec: DatasetSpec) -> SitebuildError:
    """Return the error for a text file with lines after its header that gave no rows."""
    return SitebuildError(
        f"{spec.file}: the lines after the header gave no rows; check the line ends and the "
        "delimiter (export the data again as CSV if in doubt)."
    )


def check_label_lengths(spec: DatasetSpec, groups: tuple[str, ...]) -> None:
    """Refuse group labels longer than MAX_LABEL: every chart, table and CSV repeats them."""
    longest = max(groups, key=len, default="")
    if len(longest) > MAX_LABEL:
        raise SitebuildError(
            f"{spec.file}: a group label in column '{spec.group}' is {len(longest):,} characters "
            f"long (it starts '{longest[:20]}'); group labels can be at most {MAX_LABEL} "
            "characters — shorten them, or group by a shorter code column."
        )


def read_frame(spec: DatasetSpec):
    """Return (pandas DataFrame of the needed columns as read, encoding, delimiter, warnings)."""
    import pandas as pd

    from .readers import sources

    path = spec.path
    suffix = path.suffix.lower()
    needed = _needed(spec)
    if sources.handles(spec):  # spreadsheets, .gz, folders/globs, SQLite, legacy encodings
        frame, encoding, delimiter, warnings = sources.read_source(spec)
        _check_columns(spec, [str(c) for c in frame.columns])
        return frame[needed], encoding, delimiter, warnings
    if path.stat().st_size == 0:
        raise SitebuildError(
            f"{spec.file}: the file is empty; export the data again with a header row."
        )
    if suffix in PARQUET_SUFFIXES:
        import pyarrow.parquet as pq

        try:
            schema = pq.read_schema(path)
        except Exception as exc:  # pyarrow raises several types for a bad file
            raise SitebuildError(
                f"{spec.file}: not a readable Parquet file ({exc}); export it again."
            ) from None
        _check_columns(spec, list(schema.names))
        check_group_type(spec, schema.field(spec.group).type)
        table = pq.read_table(path, columns=needed)
        group = table.column(spec.group)
        table = table.set_column(
            table.schema.get_field_index(spec.group),
            spec.group,
            arrow_group_text(spec.file, spec.group, group),
        )
        frame = table.to_pandas()
        return frame, "parquet", None, []
    if suffix in JSONL_SUFFIXES:
        try:
            frame = pd.read_json(path, lines=True, dtype=False)
        except ValueError as exc:
            raise SitebuildError(
                f"{spec.file}: not valid JSON Lines ({exc}); each line must be one JSON object."
            ) from None
        _check_columns(spec, [str(c) for c in frame.columns])
        frame = frame[needed].copy()
        labels = json_group_labels(spec, path)
        if len(labels) != len(frame):
            raise SitebuildError(
                f"{spec.file}: not valid JSON Lines (the lines and the rows read do not "
                "match); each line must be one JSON object."
            )
        frame[spec.group] = pd.Series(labels, index=frame.index, dtype=object)
        return frame, "utf-8", None, []
    if suffix not in TEXT_SUFFIXES:
        raise SitebuildError(
            f"{spec.file}: files ending '{suffix}' are not supported; use .csv, .tsv, .txt, "
            ".xlsx, .xls, .ods, .parquet, .jsonl, .sqlite, or one of those text files "
            "compressed as .gz."
        )
    head = read_head(spec, path, suffix)
    encoding, delimiter, header = head.encoding, head.delimiter, head.header
    warnings = head.warnings
    decimal_comma = delimiter == ";"
    positions = [header.index(c) for c in needed]
    # pandas drops the extra fields of a long row without a word when asked for some columns
    # only, so such files are scanned for long rows afterwards. When every column is needed it
    # reads them all and raises on a long row itself, except on the first data row (which it
    # would take as an index, or trim with index_col=False); that row is checked here.
    every_column = len(header) == len(set(positions)) == len(set(header))
    if every_column:
        extra = _long_first_row(head.text, head.whole, delimiter, len(header))
        every_column = extra != UNSURE
        if every_column and extra is not None:
            raise SitebuildError(
                f"{spec.file}: a row has more fields than the header at line {extra}; fix that "
                f"row or quote fields that contain the delimiter (the header has "
                f"{len(header)} fields)."
            )

    def read(enc: str):
        def attempt(whole: bool):
            return pd.read_csv(
                path,
                sep=delimiter,
                encoding=enc,
                usecols=None if every_column else positions,
                index_col=False,
                dtype={spec.group: str},
                na_values=list(MISSING_TOKENS),
                keep_default_na=False,
                decimal="," if decimal_comma else ".",
                skipinitialspace=False,
                engine="c",
                low_memory=not whole,
            )

        # In chunks (about twice as fast on large files), each chunk's column types are
        # decided alone: a column with numbers in one chunk and text in another comes back
        # with mixed Python objects, whose numbers would then be read again as text. Such a
        # file (rare, and found from the column types alone) is read again whole.
        with warnings_module.catch_warnings():
            warnings_module.simplefilter("ignore", pd.errors.DtypeWarning)
            frame = attempt(whole=False)
        if any(_mixed(frame[column]) for column in frame.columns):
            frame = attempt(whole=True)
        return frame

    try:
        try:
            frame = read(encoding)
        except UnicodeDecodeError:
            # Not UTF-8 past the head: read as Windows-1252 (see sitebuild.readers.encodings).
            from .readers.sources import read_source

            frame, encoding, delimiter, warnings = read_source(spec)
            _check_columns(spec, [str(c) for c in frame.columns])
            return frame[needed], encoding, delimiter, warnings
    except pd.errors.ParserError as exc:
        if "EOF inside string" in str(exc):
            raise SitebuildError(
                f"{spec.file}: the quoted field opened at line {_unclosed_quote_line(path)} is "
                'never closed; add the closing " or remove the stray one.'
            ) from None
        # pandas counts rows, not lines; a quoted line break moves the physical line.
        line = first_overlong_line(path, delimiter, len(header))
        match = re.search(r"line (\d+)", str(exc))
        where = f" at line {line}" if line else (f" at row {match.group(1)}" if match else "")
        raise SitebuildError(
            f"{spec.file}: a row has more fields than the header{where}; fix that row or quote "
            "fields that contain the delimiter."
        ) from None
    except pd.errors.EmptyDataError:
        raise SitebuildError(
            f"{spec.file}: the file has no columns; export it again with a header row."
        ) from None
    if len(frame) == 0 and head.body:
        raise no_rows_error(spec)
    frame.columns = header if every_column else [header[p] for p in sorted(positions)]
    extra = None if every_column else first_overlong_line(path, delimiter, len(header))
    if extra is not None:
        raise SitebuildError(
            f"{spec.file}: a row has more fields than the header at line {extra}; fix that row "
            f"or quote fields that contain the delimiter (the header has {len(header)} fields)."
        )
    return frame[needed], encoding, delimiter, warnings


def _mixed(column) -> bool:
    """True when a column read in chunks holds Python objects of more than one kind (pandas
    before 3 also keeps plain text columns as objects; those are not mixed)."""
    import pandas as pd

    if column.dtype != object:
        return False
    return pd.api.types.infer_dtype(column, skipna=True) not in ("string", "empty")


def _x_values(raw, spec: DatasetSpec, decimal_comma: bool, notes: list):
    """Return (x as floats, problem, time-axis block or None): numbers, or dates as days."""
    from .readers.dates import looks_like_dates, time_axis

    text = None if raw.dtype.kind in "fiuM" else raw.astype("string").str.strip()
    if raw.dtype.kind == "M" or (
        text is not None
        and looks_like_dates(text.where(~text.isin(MISSING_TOKENS)), spec.date_format)
    ):
        if text is None:
            text = raw.astype("string")
        missing = (text.isna() | text.isin(MISSING_TOKENS)).fillna(True).to_numpy()
        axis = time_axis(raw, text.where(~text.isin(MISSING_TOKENS)), spec.date_format, missing)
        problem = ColumnProblem(axis.bad, axis.examples) if axis.bad else None
        if axis.origin:
            notes.append(
                f"x '{spec.x}' holds dates: it is used as days since {axis.origin}, so slopes "
                "are per day."
            )
        return axis.days, problem, (axis.to_json() if axis.origin else None)
    values, problem = _to_numbers(raw, spec.x, decimal_comma, spec.decimal, notes)
    if problem and not np.isfinite(values).any():
        hint = (
            f" (date_format '{spec.date_format}' matched none of them)" if spec.date_format else ""
        )
        raise SitebuildError(
            f"{spec.file}: column '{spec.x}' (key 'x' of dataset '{spec.name}') holds neither "
            f"numbers nor dates{hint} (e.g. {', '.join(repr(e) for e in problem.examples)}); "
            'choose a numeric or date column for x, or set date_format (e.g. "%d/%m/%Y").'
        )
    return values, problem, None


def _refuse_unreadable(spec: DatasetSpec, name: str, values, problem) -> None:
    """Refuse a measure with values but not one readable number: its pages would be empty."""
    if problem is None or np.isfinite(values).any():
        return
    examples = ", ".join(repr(e) for e in problem.examples)
    raise SitebuildError(
        f"{spec.file}: column '{name}' has {problem.count:,} "
        f"{'value' if problem.count == 1 else 'values'} but not one readable number "
        f'(e.g. {examples}); fix the column, set decimal = "," or "." in the manifest, '
        "or remove it from measures."
    )


UNSURE = -1


def _long_first_row(head: str, whole: bool, delimiter: str, fields: int) -> int | None:
    """Return the line where the first data row starts if it has more than ``fields`` fields.

    ``head`` is the decoded start of the file (``whole`` when it is all of it). A row cut off
    at the end of ``head`` can only show fewer fields than it has, so when the first data row
    may run past it (no third row started within ``head``) this returns :data:`UNSURE` and
    the caller falls back to :func:`first_overlong_line`'s full scan.
    """
    reader = csv.reader(io.StringIO(head, newline=""), delimiter=delimiter)
    rows = []
    starts = []
    for row in reader:
        starts.append(reader.line_num)
        rows.append(row)
        if len(rows) == 3:
            break
    if len(rows) < 2:
        return None
    if len(rows) < 3 and not whole:
        return UNSURE
    if len(rows[1]) > fields:
        return starts[0] + 1
    return None


def _unclosed_quote_line(path: Path) -> int:
    """Return the line of the quote that opens a field never closed (the file's last quote
    byte, as their count is odd: "" inside a field counts twice)."""
    data = path.read_bytes()
    return _line_of(data, data.rfind(b'"'))


def _line_of(data: bytes, position: int) -> int:
    """Return the 1-based line of byte ``position``, lines ending at CR, LF or CRLF."""
    before = data[:position]
    return before.count(b"\n") + before.count(b"\r") - before.count(b"\r\n") + 1


def quotes_outside(raw: np.ndarray, delimiter: str) -> np.ndarray | None:
    """Return a mask of the bytes outside quoted fields, or None when a quote sits where the
    vectorised rule cannot place it (the caller then reads the file with a real parser).

    The rule: an odd number of quote bytes before a position means it is inside quotes (""
    toggles twice, staying put). It holds only when every quote opens a field (at a line
    start or after a delimiter) or closes one (before a delimiter, a line end, the file's end
    or the next quote of a "" pair). A stray quote in an unquoted field, an inch mark in
    ``5"`` say, is data to a CSV reader, and would flip the parity for the rest of the file.
    """
    is_quote = raw == 34
    where = np.flatnonzero(is_quote)
    if not where.size:
        return np.ones(raw.size, dtype=bool)
    # uint8 sums wrap at 256, which keeps the parity and an eighth of the memory.
    inside_after = (np.cumsum(is_quote, dtype=np.uint8) & 1).astype(bool)
    opening = inside_after[where]  # this quote leaves us inside: it opens a field
    separators = np.array([ord(delimiter), 10, 13], dtype=np.uint8)
    previous = np.where(where > 0, raw[np.maximum(where - 1, 0)], 10)
    following = np.where(where + 1 < raw.size, raw[np.minimum(where + 1, raw.size - 1)], 10)
    # An opening quote right after a closing one is the second half of a "" pair.
    after_close = np.zeros(where.size, dtype=bool)
    after_close[1:] = (where[1:] == where[:-1] + 1) & ~opening[:-1]
    start = np.isin(previous, separators) | (where == 0) | after_close
    if raw[:3].tobytes() == b"\xef\xbb\xbf":
        start |= where == 3  # a quoted first name right after a UTF-8 byte-order mark
    end = np.isin(following, separators) | (following == 34) | (where + 1 == raw.size)
    if not (np.all(start[opening]) and np.all(end[~opening])):
        return None
    return ~inside_after | is_quote


def first_overlong_line(path: Path, delimiter: str, fields: int) -> int | None:
    """Return the 1-based number of the first line with more fields than the header, or None.

    pandas' reader, when asked for some columns only, drops extra fields without a word, so
    they are counted here, vectorised over the bytes: a line's fields are its delimiters
    outside quotes plus one. The delimiter, quote and line ends (CR, LF, CRLF) are ASCII, so
    UTF-8 and Latin-1 text cannot hide them. Quotes the vectorised rule cannot place (see
    :func:`quotes_outside`) send the file through the csv module instead.
    """
    data = path.read_bytes()
    raw = np.frombuffer(data, dtype=np.uint8)
    outside = quotes_outside(raw, delimiter)
    if outside is None:
        return _overlong_by_parser(data, delimiter, fields)
    delimiters = (raw == ord(delimiter)) & outside
    carriage = raw == 13
    next_is_lf = np.zeros(raw.size, dtype=bool)
    next_is_lf[:-1] = raw[1:] == 10
    newlines = ((raw == 10) | (carriage & ~next_is_lf)) & outside
    ends = np.flatnonzero(newlines)
    if ends.size == 0 or ends[-1] != raw.size - 1:
        ends = np.append(ends, raw.size)
    hits = np.flatnonzero(delimiters)
    per_line = np.diff(np.concatenate([[0], np.searchsorted(hits, ends, side="right")]))
    over = np.flatnonzero(per_line + 1 > fields)
    if not over.size:
        return None
    # Report the physical line, counting line ends inside quoted fields too.
    start = 0 if over[0] == 0 else int(ends[over[0] - 1]) + 1
    return _line_of(data, start)


def _overlong_by_parser(data: bytes, delimiter: str, fields: int) -> int | None:
    """:func:`first_overlong_line` by the csv module, which reads quotes as pandas does (a quote
    inside an unquoted field is data). Latin-1 keeps every ASCII byte where it was."""
    reader = csv.reader(io.StringIO(data.decode("latin-1"), newline=""), delimiter=delimiter)
    line = 1
    for row in reader:
        if len(row) > fields:
            return line
        line = reader.line_num + 1
    return None


MAX_LABEL = 200  # characters; every chart, table and CSV repeats a group's label
# A Parquet file is read into memory by default when its rows fit half of this machine's
# physical memory at this many bytes per cell (row × column read, the group included), and
# streamed otherwise. Measured with benchmarks/speed.py: 10,000,000 rows × 6 columns built in
# memory at a 4.6 GB peak when this limit was set, about 72 bytes per cell over the libraries'
# own 0.3 GB; since then the peak fell to 2.4 GB (about 35 bytes per cell). 90 stays, a margin
# for shapes whose temporaries grow faster (many measures: the correlation ranks hold several
# copies of every column). On a 24 GB machine that keeps files of up to about 22 million such
# rows in memory, every statistic exact. Total (not free) memory, so the same file always gets
# the same engine on a machine.
BYTES_PER_CELL = 90
MEMORY_SHARE = 0.5
STREAM_ROWS: int | None = None  # a fixed row limit instead of the memory-based one (tests)
FALLBACK_ROWS = 5_000_000  # when the machine's memory cannot be read


def memory_row_limit(columns: int) -> int:
    """Return the most rows of ``columns`` columns the in-memory engine takes by default."""
    if STREAM_ROWS is not None:
        return STREAM_ROWS
    try:
        total = os.sysconf("SC_PAGE_SIZE") * os.sysconf("SC_PHYS_PAGES")
    except (AttributeError, ValueError, OSError):  # not a POSIX system
        return FALLBACK_ROWS
    if total <= 0:
        return FALLBACK_ROWS
    return int(total * MEMORY_SHARE / (BYTES_PER_CELL * max(columns, 1)))


STREAM_BYTES = 1 << 30  # a CSV/TSV or Parquet file larger than this is streamed by default


def memory_digest(spec: DatasetSpec) -> str:
    """Return the SHA-256 results.json records for data the memory engine reads: of the file,
    or of the (name, hash) list of a folder or glob of text files (see
    :func:`sitebuild.engines.source_digest` for every engine)."""
    from .readers import sources

    if sources.is_pattern(spec.file) or (spec.path.is_dir() and sources.handles(spec)):
        return sources.digest(spec)
    return file_sha256(spec.path)


def engine_for(spec: DatasetSpec) -> str:
    """Return the engine that reads ``spec``: "memory", "stream" or "dask".

    ``engine = "stream"`` or ``"dask"`` in the manifest is followed as written. A folder
    (Parquet parts) is always streamed. With ``"auto"`` (the default), a file over
    :data:`STREAM_BYTES`, or a Parquet file with more rows (read from its footer) than
    :func:`memory_row_limit` allows on this machine, is streamed; ``"memory"`` keeps any single file in memory.
    """
    if spec.engine in ("stream", "dask"):
        return spec.engine
    from .readers.sources import handles

    if handles(spec):  # spreadsheets, .gz, folders of text files, SQLite: read whole
        return "memory"
    if spec.path.is_dir():
        return "stream"
    if spec.engine == "memory":
        return "memory"
    suffix = spec.path.suffix.lower()
    if suffix in TEXT_SUFFIXES + PARQUET_SUFFIXES and spec.path.stat().st_size > STREAM_BYTES:
        return "stream"
    if suffix in PARQUET_SUFFIXES:
        import pyarrow.parquet as pq

        try:
            rows = pq.ParquetFile(spec.path).metadata.num_rows
        except Exception:  # an unreadable file gets its clear error from the reader itself
            return "memory"
        columns = len({*spec.measures, *([spec.x] if spec.x else [])}) + 1
        if rows > memory_row_limit(columns):
            return "stream"
    return "memory"


def read_table(
    spec: DatasetSpec, rng: np.random.Generator | None = None, sha256: str | None = None
) -> Table:
    """Return the dataset read into memory as a :class:`Table`, with an :class:`IngestReport`
    of what happened (the "memory" engine).

    :func:`sitebuild.engines.read_table` picks the engine (see :func:`engine_for`) and is what
    the build calls; this raises ValueError for a dataset another engine reads. ``rng`` is
    accepted for the same call shape. ``sha256``, when the caller has already hashed the file,
    saves hashing it a second time.
    """
    engine = engine_for(spec)
    if engine != "memory":
        # The streamed engines import this module; reading through them happens one level
        # up, so the modules form no import cycle.
        raise ValueError(
            f"{spec.name} is read by the {engine} engine: use sitebuild.engines.read_table"
        )
    del rng  # every row is read: nothing is sampled
    from .readers import tidy

    frame, encoding, delimiter, warnings = read_frame(spec)
    rows_read = int(len(frame))
    prepared = tidy.prepare(frame, spec, [str(c) for c in frame.columns])
    frame, notes = prepared.frame, list(prepared.notes)
    all_codes, groups = group_codes(frame[spec.group], spec.order)
    check_label_lengths(spec, groups)
    has_group = all_codes >= 0
    every_row = bool(has_group.all())

    decimal_comma = delimiter == ";"
    columns: dict[str, np.ndarray] = {}
    unparsed: dict[str, ColumnProblem] = {}
    missing: dict[str, int] = {}
    x_time = None
    for name in dict.fromkeys([*spec.measures, *([spec.x] if spec.x else [])]):
        if name == spec.x and name not in spec.measures:
            values, problem, x_time = _x_values(frame[name], spec, decimal_comma, notes)
        else:
            values, problem = _to_numbers(frame[name], name, decimal_comma, spec.decimal, notes)
        _refuse_unreadable(spec, name, values, problem)
        if problem:
            unparsed[name] = problem
        columns[name] = values if every_row else values[has_group]
    codes = all_codes if every_row else all_codes[has_group]
    for name, values in columns.items():
        missing[name] = int(np.isnan(values).sum())
    no_group = len(frame) - int(has_group.sum())
    reasons = dict(prepared.dropped)
    if no_group:
        reasons["missing group label"] = no_group
    dropped = rows_read - int(has_group.sum())
    if rows_read == 0:
        warnings = [*warnings, f"{spec.file} has a header but no data rows."]
    warnings = [
        *warnings,
        *unordered_warnings(spec, groups),
        *tidy.reference_warnings(spec, groups),
        *tidy.similar_label_warnings(groups, spec.group),
    ]
    for name, count in missing.items():
        if len(codes) and count == len(codes):
            warnings = [*warnings, f"column '{name}' has no values (all {count:,} are missing)."]
    report = IngestReport(
        file=spec.file,
        sha256=sha256 or memory_digest(spec),
        rows_read=rows_read,
        rows_used=rows_read - dropped,
        rows_dropped=dropped,
        drop_reasons=reasons,
        missing=missing,
        unparsed=unparsed,
        encoding=encoding,
        delimiter=delimiter,
        warnings=tuple(warnings),
        notes=tuple(notes),
        x_time=x_time,
    )
    return Table(
        spec=spec, groups=groups, codes=codes.astype(np.int32), columns=columns, report=report
    )
