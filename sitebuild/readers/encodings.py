"""Decode exported text: a byte-order mark first, then UTF-8, then Windows-1252.

Spreadsheet programs on Windows save "CSV" as Windows-1252 and "Unicode text" as UTF-16
with a byte-order mark; both are read here, and the encoding used is reported.
"""

from __future__ import annotations

import codecs

from ..errors import SitebuildError

LEGACY = "windows-1252"
_ERRORS = "sitebuild-latin1"


def _undefined_as_latin1(error: UnicodeDecodeError) -> tuple[str, int]:
    # Windows-1252 leaves five bytes undefined (0x81, 0x8D, 0x8F, 0x90, 0x9D); Latin-1
    # maps every byte, so such a byte keeps its Latin-1 meaning instead of failing the file.
    bad = error.object[error.start : error.end]
    return bytes(bad).decode("latin-1"), error.end


codecs.register_error(_ERRORS, _undefined_as_latin1)  # idempotent: same name, same function

BOMS = (
    (codecs.BOM_UTF8, "utf-8-sig"),
    (codecs.BOM_UTF16_LE, "utf-16"),
    (codecs.BOM_UTF16_BE, "utf-16"),
)


def bom_encoding(raw: bytes) -> str | None:
    """Return the encoding a byte-order mark at the start of ``raw`` announces, or None."""
    for mark, name in BOMS:
        if raw.startswith(mark):
            return name
    return None


def is_utf8(raw: bytes, whole: bool) -> bool:
    """Return True when ``raw`` is UTF-8 (a character cut by the end of a head still counts)."""
    try:
        raw.decode("utf-8")
    except UnicodeDecodeError as exc:
        return not whole and exc.start >= len(raw) - 4
    return True


def decode(raw: bytes, file: str, encoding: str | None = None) -> tuple[str, str, list[str]]:
    """Return (text, encoding used, warnings) for the bytes of a text file.

    ``encoding`` (the manifest's ``encoding`` key) overrides detection. Otherwise a
    byte-order mark decides; then UTF-8; then Windows-1252, with a warning naming it.

    Examples
    --------
    >>> decode("Linie \\u201eS\\u00fcd\\u201c".encode("cp1252"), "x.csv")[:2]
    ('Linie „Süd“', 'windows-1252')
    """
    if encoding:
        try:
            return raw.decode(encoding), encoding, []
        except LookupError:
            raise SitebuildError(
                f"{file}: encoding '{encoding}' is not one we know; use e.g. \"utf-8\", "
                '"windows-1252", "utf-16" or "latin-1".'
            ) from None
        except UnicodeDecodeError as exc:
            raise SitebuildError(
                f"{file}: byte {exc.start:,} cannot be read as {encoding}; check the "
                "manifest's encoding key or remove it to let the file be detected."
            ) from None
    found = bom_encoding(raw)
    if found:
        return raw.decode(found), found.replace("-sig", ""), []
    if is_utf8(raw, whole=True):
        return raw.decode("utf-8"), "utf-8", []
    text = raw.decode(LEGACY, errors=_ERRORS)
    return (
        text,
        LEGACY,
        [
            f"{file} is not UTF-8; it was read as Windows-1252 (what spreadsheet programs on "
            "Windows save) — check that accented labels look right, or set encoding in the "
            "manifest."
        ],
    )
