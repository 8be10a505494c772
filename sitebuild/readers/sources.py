"""Files the plain text reader does not take: spreadsheets, gzip-compressed text, folders
and globs of same-shaped exports, SQLite, and text that needs its encoding or header line
chosen. Each returns every column as read (text, or the spreadsheet's own cell types)."""

from __future__ import annotations

import glob as globbing
import gzip
import io
import re
import sqlite3
from pathlib import Path

from ..errors import SitebuildError
from . import encodings

SPREADSHEET_SUFFIXES = (".xlsx", ".xlsm", ".xls", ".ods")
SQLITE_SUFFIXES = (".sqlite", ".sqlite3", ".db")
GZIP_SUFFIXES = (".csv.gz", ".tsv.gz", ".txt.gz", ".jsonl.gz", ".ndjson.gz")
TEXT_PARTS = (".csv", ".tsv", ".txt", *GZIP_SUFFIXES)
SOURCE_COLUMN = "source file"  # the column that names each row's file, for folders and globs
GLOB_CHARACTERS = "*?["
SNIFF_BYTES = 65536


def is_pattern(file: str) -> bool:
    """Return True when the manifest's ``file`` is a glob such as ``data/*.csv``."""
    return any(c in file for c in GLOB_CHARACTERS)


def full_suffix(path: Path) -> str:
    """Return the lower-case suffix, with ``.gz`` kept together with the one before it."""
    suffixes = [s.lower() for s in path.suffixes[-2:]]
    if suffixes and suffixes[-1] == ".gz":
        return "".join(suffixes)
    return path.suffix.lower()


def text_parts(spec) -> list[Path]:
    """Return the text files of a folder or glob dataset, in sorted order (by relative name)."""
    if is_pattern(spec.file):
        found = [Path(p) for p in globbing.glob(str(spec.path), recursive=True)]
    else:
        found = [p for p in spec.path.rglob("*") if p.is_file()]
    # Only files inside the folder (or the pattern's folder): a link leading out is skipped.
    base = _base(spec).resolve()
    return sorted(
        (
            p
            for p in found
            if p.is_file() and full_suffix(p) in TEXT_PARTS and p.resolve().is_relative_to(base)
        ),
        key=lambda p: p.as_posix(),
    )


def handles(spec) -> bool:
    """Return True when this module reads ``spec`` (instead of the plain text reader)."""
    if is_pattern(spec.file):
        return True
    path = spec.path
    if path.is_dir():
        return bool(text_parts(spec)) and not any(path.rglob("*.parquet"))
    suffix = full_suffix(path)
    if suffix in SPREADSHEET_SUFFIXES + SQLITE_SUFFIXES + GZIP_SUFFIXES:
        return True
    if suffix not in (".csv", ".tsv", ".txt"):
        return False
    if spec.encoding or spec.header_row != 1 or spec.decimal:
        return True
    with open(path, "rb") as handle:
        head = handle.read(SNIFF_BYTES)
    whole = len(head) < SNIFF_BYTES
    return encodings.bom_encoding(head) == "utf-16" or not encodings.is_utf8(head, whole)


def read_source(spec):
    """Return (DataFrame of every column, encoding, delimiter, warnings) for ``spec``."""
    if is_pattern(spec.file) or spec.path.is_dir():
        return _read_many(spec)
    return _read_one(spec, spec.path, spec.file)


def _read_one(spec, path: Path, shown: str):
    suffix = full_suffix(path)
    if suffix in SPREADSHEET_SUFFIXES:
        return read_spreadsheet(spec, path), suffix.lstrip("."), None, []
    if suffix in SQLITE_SUFFIXES:
        return read_sqlite(spec, path), "sqlite", None, []
    raw = path.read_bytes()
    if suffix.endswith(".gz"):
        try:
            raw = gzip.decompress(raw)
        except (OSError, EOFError) as exc:
            raise SitebuildError(
                f"{shown}: not a readable gzip file ({exc}); compress it again with gzip."
            ) from None
    if suffix in (".jsonl.gz", ".ndjson.gz"):
        import pandas as pd

        try:
            frame = pd.read_json(io.BytesIO(raw), lines=True, dtype=False)
        except ValueError as exc:
            raise SitebuildError(
                f"{shown}: not valid JSON Lines ({exc}); each line must be one JSON object."
            ) from None
        frame.columns = [str(c).strip() for c in frame.columns]
        return frame, "utf-8", None, []
    return read_text(spec, raw, shown, suffix)


def read_text(spec, raw: bytes, shown: str, suffix: str):
    """Return (frame of text columns, encoding, delimiter, warnings) from a text file's bytes."""
    import pandas as pd

    from .delimited import MISSING_TOKENS, sniff_delimiter

    if not raw.strip():
        raise SitebuildError(
            f"{shown}: the file is empty; export the data again with a header row."
        )
    text, encoding, warnings = encodings.decode(raw, shown, spec.encoding)
    text = text.lstrip("\ufeff")
    if spec.header_row > 1:
        lines = text.splitlines(keepends=True)
        if len(lines) < spec.header_row:
            raise SitebuildError(
                f"{shown}: header_row is {spec.header_row} but the file has only {len(lines)} "
                "lines; give the line number of the column names."
            )
        text = "".join(lines[spec.header_row - 1 :])
    delimiter = sniff_delimiter(text[:SNIFF_BYTES], suffix.replace(".gz", ""))
    try:
        frame = pd.read_csv(
            io.StringIO(text),
            sep=delimiter,
            # Plain numbers are parsed by pandas; columns with decimal commas, thousands marks
            # or dates stay text for sitebuild.readers. decimal set: every column is text.
            dtype=str if spec.decimal else {spec.group: str},
            na_values=list(MISSING_TOKENS),
            keep_default_na=False,
            index_col=False,
            engine="c",
        )
    except pd.errors.ParserError as exc:
        match = re.search(r"line (\d+)", str(exc))
        line = int(match.group(1)) + spec.header_row - 1 if match else None
        where = f" at line {line}" if line else ""
        raise SitebuildError(
            f"{shown}: a row has more fields than the header{where}; fix that row or quote "
            "fields that contain the delimiter."
        ) from None
    except pd.errors.EmptyDataError:
        raise SitebuildError(
            f"{shown}: the file has no columns; export it again with a header row."
        ) from None
    frame.columns = [str(c).strip() for c in frame.columns]
    return frame, encoding, delimiter, warnings


def read_spreadsheet(spec, path: Path):
    """Return one sheet as a DataFrame: the ``header_row``-th row names the columns."""
    import pandas as pd
    from python_calamine import CalamineWorkbook

    try:
        book = CalamineWorkbook.from_path(str(path))
    except Exception as exc:  # calamine raises its own types for a damaged or locked file
        raise SitebuildError(
            f"{spec.file}: not a readable spreadsheet ({exc}); save it again from the "
            "spreadsheet program, or export the sheet as CSV."
        ) from None
    names = list(book.sheet_names)
    listed = ", ".join(f"'{n}'" for n in names)
    sheet = spec.sheet if spec.sheet is not None else 0
    if isinstance(sheet, int):
        if not 0 <= sheet < len(names):
            raise SitebuildError(
                f"{spec.file}: sheet = {sheet} but the workbook has {len(names)} sheet"
                f"{'s' if len(names) != 1 else ''} (counted from 0): {listed}; give a number "
                "in range or a sheet name."
            )
        name = names[sheet]
    else:
        if sheet not in names:
            raise SitebuildError(
                f"{spec.file}: the workbook has no sheet '{sheet}'; its sheets are {listed} — "
                "set sheet to one of those names."
            )
        name = sheet
    rows = book.get_sheet_by_name(name).to_python(skip_empty_area=False)
    start = spec.header_row - 1
    if len(rows) <= start or not any(str(c).strip() for c in rows[start]):
        raise SitebuildError(
            f"{spec.file}: sheet '{name}' has no column names on row {spec.header_row}; set "
            "header_row to the row that names the columns."
        )
    header = [str(c).strip() for c in rows[start]]
    body = [r for r in rows[start + 1 :] if any(c != "" for c in r)]
    frame = pd.DataFrame(body, columns=header, dtype=object)
    # calamine gives "" for an empty cell; whole numbers in a label column read as 1.0.
    frame = frame.replace("", None)
    # Columns of plain number cells become float64 and of date cells datetime64, so they
    # skip the text parsing that mixed columns need.
    frame = frame.infer_objects()
    if spec.group in frame.columns:
        frame[spec.group] = frame[spec.group].map(_cell_text)
    return frame


def _cell_text(value) -> str | None:
    if value is None:
        return None
    if isinstance(value, float) and value.is_integer():
        return str(int(value))
    return str(value)


def read_sqlite(spec, path: Path):
    """Return a table (``table``) or a read-only query's rows (``query``) of a SQLite file."""
    import pandas as pd

    if bool(spec.table) == bool(spec.query):
        raise SitebuildError(
            f"{spec.file}: a SQLite dataset needs exactly one of table or query in the "
            'manifest; add table = "name".'
        )
    uri = f"{path.resolve().as_uri()}?mode=ro"
    try:
        connection = sqlite3.connect(uri, uri=True)
    except sqlite3.Error as exc:
        raise SitebuildError(f"{spec.file}: cannot open the database ({exc}).") from None
    try:
        connection.execute("PRAGMA query_only = ON")
        try:
            tables = [
                r[0]
                for r in connection.execute(
                    "SELECT name FROM sqlite_master WHERE type IN ('table', 'view') ORDER BY name"
                )
            ]
        except sqlite3.DatabaseError as exc:
            raise SitebuildError(f"{spec.file}: not a readable SQLite database ({exc}).") from None
        if spec.table:
            if spec.table not in tables:
                raise SitebuildError(
                    f"{spec.file}: the database has no table '{spec.table}'; its tables are "
                    + (", ".join(f"'{t}'" for t in tables) or "none")
                    + "."
                )
            query = 'SELECT * FROM "' + spec.table.replace('"', '""') + '"'
        else:
            query = spec.query
        try:
            frame = pd.read_sql_query(query, connection)
        except (sqlite3.Error, pd.errors.DatabaseError) as exc:
            raise SitebuildError(
                f"{spec.file}: the query failed ({exc}); the database is opened read-only, "
                "so only SELECT queries work."
            ) from None
    finally:
        connection.close()
    frame.columns = [str(c).strip() for c in frame.columns]
    return frame


def _read_many(spec):
    import pandas as pd

    parts = text_parts(spec)
    if not parts:
        raise SitebuildError(
            f"{spec.file}: matches no .csv, .tsv, .txt or .gz text files; check the folder or "
            "pattern."
        )
    base = _base(spec).resolve()
    frames, header, first, encodings_used, delimiters, warnings = [], None, None, set(), set(), []
    for part in parts:
        try:
            shown = part.resolve().relative_to(base).as_posix()
        except ValueError:
            shown = part.name
        frame, encoding, delimiter, notes = _read_one(spec, part, shown)
        if header is None:
            header, first = list(frame.columns), shown
        elif list(frame.columns) != header:
            raise SitebuildError(
                f"{spec.file}: '{shown}' has the columns "
                + ", ".join(f"'{c}'" for c in list(frame.columns)[:12])
                + f" but '{first}' has "
                + ", ".join(f"'{c}'" for c in header[:12])
                + "; files read as one table must share one header — move the odd file out."
            )
        frame[SOURCE_COLUMN] = shown
        frames.append(frame)
        encodings_used.add(encoding)
        delimiters.add(delimiter)
        warnings += notes
    combined = pd.concat(frames, ignore_index=True)
    encoding = "/".join(sorted(e for e in encodings_used if e))
    delimiter = delimiters.pop() if len(delimiters) == 1 else None
    warnings.insert(
        0,
        f"{len(parts)} files read as one table, in name order; each row's file is "
        f"in the column '{SOURCE_COLUMN}'.",
    )
    return combined, encoding, delimiter, warnings


def _base(spec) -> Path:
    """Return the folder of a folder dataset, or the last folder of a glob before any pattern."""
    base = spec.path
    while is_pattern(base.as_posix()):
        base = base.parent
    return base


def digest(spec) -> str:
    """Return a SHA-256 over (relative name, file hash) of every file of a folder or glob."""
    import hashlib

    from ..cache import file_sha256

    h = hashlib.sha256()
    base = _base(spec)
    for part in text_parts(spec):
        name = part.relative_to(base).as_posix()
        h.update(f"{name}\0{file_sha256(part)}\n".encode())
    return h.hexdigest()
