"""Reading a user's CSV file into a pandas DataFrame, with clear errors for files that cannot work.

What is handled: delimiter ``,`` ``;`` or tab (detected by counting, quote-aware), UTF-8 with or
without a byte-order mark, UTF-16 with a byte-order mark, a latin-1 fallback (with a warning),
quoted fields (delimiters and line breaks inside quotes), blank lines, decimal commas in
semicolon files, headers and fields of any length. Cells holding one of ``MISSING_MARKERS``
(empty, NA, N/A, n/a, #N/A, NaN, nan, NULL, null, None, ?, -, --, <NA>) are missing; a caller
may add markers (``missing_markers``) and declare a thousands separator or a decimal comma
(``thousands``, ``decimal``). What is refused, with a one-line :class:`DataError`: an empty
file, a header row without data, a first row that looks like data instead of names, blank or
duplicate column names, rows with a different number of fields than the header, binary files,
damaged UTF-16, a carriage return inside a line outside quotes (mixed line ends).

The user's file is only ever read (one ``read_bytes``), never written.
"""

from __future__ import annotations

import csv
import io
import logging
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd

from labbench.errors import DataError

log = logging.getLogger("labbench.data")

DELIMITERS = (",", ";", "\t")
_SAMPLE_RECORDS = 100          # records looked at to choose the delimiter
_SAMPLE_CHARS = 65536          # ... within about this many characters (whole lines, header whole)
MISSING_MARKERS = ("", "NA", "N/A", "n/a", "#N/A", "NaN", "nan", "NULL", "null", "None", "?",
                   "-", "--", "<NA>")
THOUSANDS = (",", ".", " ", "'", "_")
DECIMALS = (".", ",")
_UNNAMED = "\x00unnamed:"     # placeholder for a blank header cell (cannot occur in a text file)
_DELIM_NAMES = {",": "','", ";": "';'", "\t": "tab"}


@dataclass(frozen=True)
class ReadResult:
    """What :func:`read_file` found: the frame plus what the caller needs for messages."""

    frame: pd.DataFrame
    raw: bytes                     # the file's bytes (for the fingerprint)
    delimiter: str
    encoding: str                  # "utf-8", "utf-8-sig", "utf-16", "latin-1"
    lines: np.ndarray              # int64: the file line (1-based) where each data row starts
    warnings: tuple[str, ...]


def show(value: object, width: int = 40) -> str:
    """A value for a one-line message: repr, no line breaks, shortened."""
    if isinstance(value, np.generic):
        value = value.item()
    text = repr(value).replace("\n", "\\n").replace("\r", "\\r")
    return text if len(text) <= width else text[: width - 3] + "..."


def names_text(names, limit: int = 12, width: int = 30) -> str:
    """Names for a one-line message, plain (no quotes), comma separated: line breaks escaped,
    long names shortened, at most ``limit`` shown."""
    names = [str(n) for n in names]
    parts = []
    for n in names[:limit]:
        n = n.replace("\n", "\\n").replace("\r", "\\r")
        parts.append(n if len(n) <= width else n[: width - 3] + "...")
    return ", ".join(parts) + (f", ... ({len(names)} in all)" if len(names) > limit else "")


def read_csv(path: str | Path) -> pd.DataFrame:
    """Read a CSV file as it is (no target handling); see the module docstring for what is checked.

    Warnings (latin-1 fallback) are logged; :func:`load_table` also collects them in
    ``Table.warnings``.
    """
    return read_file(path).frame


def read_file(path: str | Path, *, missing_markers: tuple[str, ...] | list[str] = (),
              thousands: str | None = None, decimal: str | None = None) -> ReadResult:
    """The frame and what was found reading it. ``missing_markers`` add to ``MISSING_MARKERS``;
    ``thousands`` / ``decimal``: declared number format (``decimal=None``: a point, and decimal
    commas in semicolon files are recognised on their own)."""
    name = str(path)
    _check_format(name, thousands, decimal)
    try:
        raw = Path(path).read_bytes()
    except FileNotFoundError:
        raise DataError(f"{name}: no such file; check the path (relative paths start at the spec file's folder)") from None
    except IsADirectoryError:
        raise DataError(f"{name}: is a folder, not a CSV file; give the path of the file") from None
    except OSError as exc:
        raise DataError(f"{name}: cannot be read ({exc.strerror or exc}); check the path and its permissions") from None

    warnings: list[str] = []
    text, encoding, scan_bytes = _decode(raw, name, warnings)
    if not text.strip():
        raise DataError(f"{name}: the file is empty; it needs a header row of column names and at least one data row")
    if "\x00" in text:
        raise DataError(f"{name}: this is not a text CSV file (it holds binary bytes; a spreadsheet?); "
                        "save it as CSV (comma, semicolon or tab separated)")

    if "\r" in text and "\n" not in text:       # old Mac line ends: a lone CR per line
        text = text.replace("\r", "\n")
        scan_bytes = text.encode("utf-8")
    elif "\r" in text:
        _check_carriage_returns(scan_bytes, name)
    sample = _sample_text(text)
    delimiter = _choose_delimiter(sample, len(sample) < len(text))
    header = _header_fields(sample, delimiter, name)
    names = _check_header(header, name)
    fields, lines = _scan_records(scan_bytes, delimiter)
    if len(fields) <= 1:
        raise DataError(f"{name}: has a header row but no data rows; add the data below the header")
    bad = np.flatnonzero(fields != len(names))
    if bad.size:
        _raise_ragged(text, delimiter, len(names), name, fields, lines, bad)

    markers = list(dict.fromkeys((*MISSING_MARKERS, *missing_markers)))
    try:
        # the same text as bytes: pandas reading a StringIO holds ~4 bytes per character more
        # (measured: 425 against 267 MB peak on a 41 MB CSV)
        frame = pd.read_csv(
            io.BytesIO(scan_bytes if encoding != "latin-1" else text.encode("utf-8")),
            encoding="utf-8", sep=delimiter, header=0, names=names, index_col=False,
            skipinitialspace=True, skip_blank_lines=True, low_memory=False, quotechar='"',
            keep_default_na=False, na_values=markers, thousands=thousands, decimal=decimal or ".",
        )
    except (pd.errors.ParserError, csv.Error, ValueError) as exc:
        detail = str(exc).strip().splitlines()[-1] if str(exc).strip() else type(exc).__name__
        raise DataError(f"{name}: cannot be parsed as CSV ({detail}); check the quoting and the delimiter") from None
    lines = lines[1:]
    if len(frame) != len(lines):  # a quirk the scan did not foresee: fall back to row numbers
        lines = np.arange(2, len(frame) + 2, dtype=np.int64)
    frame = _unnamed_columns(frame, name, warnings)
    if delimiter == ";" and decimal is None:
        frame = _decimal_commas(frame)
    for text_ in warnings:
        log.warning(text_)
    return ReadResult(frame, raw, delimiter, encoding, lines, tuple(warnings))


def _check_format(name: str, thousands: str | None, decimal: str | None) -> None:
    if thousands is not None and thousands not in THOUSANDS:
        raise DataError(f"{name}: thousands = {show(thousands)}; use one of "
                        + ", ".join(show(t) for t in THOUSANDS) + " (or leave it out)")
    if decimal is not None and decimal not in DECIMALS:
        raise DataError(f"{name}: decimal = {show(decimal)}; use '.' or ','")
    if thousands is not None and thousands == (decimal or "."):
        raise DataError(f"{name}: thousands and decimal are both {show(thousands)}; "
                        "they must differ (e.g. thousands = '.' with decimal = ',')")


def _decode(raw: bytes, name: str, warnings: list[str]) -> tuple[str, str, bytes]:
    """Text, the encoding used, and ASCII-compatible bytes to scan for delimiters and quotes."""
    if raw.startswith((b"\xff\xfe", b"\xfe\xff")):
        try:
            text = raw.decode("utf-16")
        except UnicodeDecodeError as exc:
            what = "an odd number of bytes" if len(raw) % 2 else f"damaged bytes at byte {exc.start}"
            raise DataError(f"{name}: starts as UTF-16 text but has {what} (a cut-off or damaged "
                            "file?); save the file again, preferably as UTF-8") from None
        return text, "utf-16", text.encode("utf-8")
    if raw.startswith(b"\xef\xbb\xbf"):
        encoding, body = "utf-8-sig", raw[3:]
    else:
        encoding, body = "utf-8", raw
    try:
        return body.decode("utf-8"), encoding, body
    except UnicodeDecodeError as exc:
        line = body.count(b"\n", 0, exc.start) + 1
        warnings.append(
            f"{name}: not valid UTF-8 (first bad byte on line {line}); read it as latin-1 - "
            "check accented text, or save the file as UTF-8"
        )
        return body.decode("latin-1"), "latin-1", body


def _check_carriage_returns(data: bytes, name: str) -> None:
    """A carriage return outside quotes and not before a line feed: mixed line ends or a stray
    character, which the csv module and pandas would each split differently."""
    a = np.frombuffer(data, dtype=np.uint8)
    cr = np.flatnonzero(a == 13)
    lone = cr[(cr + 1 >= a.size) | (a[np.minimum(cr + 1, a.size - 1)] != 10)]
    lone = lone[lone != a.size - 1]                      # a CR ending the file is harmless
    if lone.size:
        quotes = np.flatnonzero(a == 34)
        lone = lone[(np.searchsorted(quotes, lone) & 1) == 0]
    if lone.size:
        line = int(np.count_nonzero(a[: int(lone[0])] == 10)) + 1
        raise DataError(f"{name}: line {line} holds a carriage return (\\r) inside the line - mixed "
                        "line ends or a stray character; save the file again with one kind of "
                        "line end, or remove that character")


def _sample_text(text: str) -> str:
    """The start of the file for choosing the delimiter: the whole header line and whole lines
    up to about ``_SAMPLE_CHARS`` characters."""
    header_end = text.find("\n")
    limit = max(_SAMPLE_CHARS, header_end + 1)
    end = text.find("\n", limit)
    return text if end < 0 else text[: end + 1]


def _sample_records(text: str, delimiter: str, cut: bool) -> list[list[str]]:
    reader = csv.reader(io.StringIO(text), delimiter=delimiter, skipinitialspace=True)
    out: list[list[str]] = []
    try:
        for row in reader:
            if row:
                out.append(row)
            if len(out) >= _SAMPLE_RECORDS:
                break
    except csv.Error:
        pass
    if cut and len(out) > 1:
        out.pop()  # the sample may cut the last record short
    return out


def _choose_delimiter(text: str, cut: bool = False) -> str:
    """The candidate that splits the header into most fields, with the same count in most rows.

    Counting on parsed records (quotes respected); a file with one column has no delimiter and
    reads as comma separated.
    """
    best, best_key = ",", (-1.0, 0, 0)
    for rank, delim in enumerate(DELIMITERS):
        records = _sample_records(text, delim, cut)
        if not records or len(records[0]) < 2:
            continue
        width = len(records[0])
        agree = sum(len(r) == width for r in records) / len(records)
        key = (agree, width, -rank)
        if key > best_key:
            best, best_key = delim, key
    return best


def _header_fields(text: str, delimiter: str, name: str) -> list[str]:
    reader = csv.reader(io.StringIO(text), delimiter=delimiter, skipinitialspace=True)
    try:
        first = next((r for r in reader if r), [])
    except csv.Error as exc:
        raise DataError(f"{name}: the header row (line {reader.line_num}) cannot be parsed ({exc}); "
                        "check its quotes and that it holds short column names") from None
    return [f.strip() for f in first]


def _check_header(header: list[str], name: str) -> list[str]:
    named = [col for col in header if col]
    if not named:
        raise DataError(f"{name}: the header row (line 1) has no column names; add a name for each column")
    numbers = 0
    for col in named:
        try:
            float(col)
            numbers += 1
        except ValueError:
            pass
    if numbers == len(named):
        raise DataError(f"{name}: line 1 holds numbers ({show(named[0])}, ...), not column names; "
                        "add a header row with a name for each column")
    header = [col or f"{_UNNAMED}{i}" for i, col in enumerate(header, start=1)]
    seen: dict[str, int] = {}
    for i, col in enumerate(header, start=1):
        if col in seen:
            raise DataError(f"{name}: columns {seen[col]} and {i} are both named {show(col)}; "
                            "rename one of them in the header row")
        seen[col] = i
    return header


def _scan_records(data: bytes, delimiter: str) -> tuple[np.ndarray, np.ndarray]:
    """Fields per non-blank record and the line each record starts on, vectorised over bytes.

    A record ends at a line break outside quotes; a delimiter counts when outside quotes (quote
    parity). Exact for well-formed quoting; a stray quote inside an unquoted value can confuse
    it, which is why a mismatch is confirmed with the csv module before it is reported.
    """
    a = np.frombuffer(data, dtype=np.uint8)
    newlines = np.flatnonzero(a == 10)
    delims = np.flatnonzero(a == ord(delimiter))
    quotes = np.flatnonzero(a == 34)
    if quotes.size:
        # a position is outside quotes when an even number of quotes comes before it
        delims = delims[(np.searchsorted(quotes, delims) & 1) == 0]
        ends = newlines[(np.searchsorted(quotes, newlines) & 1) == 0]
    else:
        ends = newlines
    if a.size and (ends.size == 0 or ends[-1] != a.size - 1):
        ends = np.append(ends, a.size)
    starts = np.concatenate(([0], ends[:-1] + 1))
    n_delims = np.searchsorted(delims, ends) - np.searchsorted(delims, starts)
    # blank: nothing but spaces and line-end bytes (pandas skips such lines too). Only a record
    # without a delimiter can be blank; there are few of them unless the file has one column.
    candidates = np.flatnonzero(n_delims == 0)
    blank = np.zeros(len(ends), dtype=bool)
    if len(candidates) <= 1000:
        for r in candidates:
            blank[r] = not data[starts[r]:ends[r]].strip(b" \r")
    else:
        content = np.flatnonzero((a != 32) & (a != 13) & (a != 10))
        blank = (np.searchsorted(content, ends) - np.searchsorted(content, starts)) == 0
    line = np.searchsorted(newlines, starts) + 1
    keep = ~blank
    return (n_delims + 1)[keep].astype(np.int64), line[keep].astype(np.int64)


def _raise_ragged(text: str, delimiter: str, width: int, name: str,
                  fields: np.ndarray, lines: np.ndarray, bad: np.ndarray) -> None:
    """Report the first record whose field count differs from the header's (csv-module check)."""
    if '"' not in text:
        first = int(bad[0])
        _ragged_error(name, int(lines[first]), int(fields[first]), width, delimiter)
    reader = csv.reader(io.StringIO(text), delimiter=delimiter, skipinitialspace=True)
    previous_end = 0
    try:
        for row in reader:
            start = previous_end + 1
            previous_end = reader.line_num
            if row and len(row) != width:
                _ragged_error(name, start, len(row), width, delimiter)
    except csv.Error as exc:
        raise DataError(f"{name}: line {reader.line_num} cannot be parsed ({exc}); "
                        "check the quotes on that line") from None
    # the byte scan was fooled by a stray quote; the csv module found nothing wrong


def _ragged_error(name: str, line: int, got: int, width: int, delimiter: str) -> None:
    word = "value" if got == 1 else "values"
    raise DataError(
        f"{name}: line {line} has {got} {word} but the header has {width} columns; "
        f"fix that row (a missing or extra {_DELIM_NAMES[delimiter]} delimiter, or a value "
        "containing it that needs double quotes)"
    )


def _unnamed_columns(frame: pd.DataFrame, name: str, warnings: list[str]) -> pd.DataFrame:
    """A blank header cell over an empty column (a trailing delimiter) is dropped; over data, refused."""
    unnamed = [c for c in frame.columns if str(c).startswith(_UNNAMED)]
    for col in unnamed:
        i = int(str(col)[len(_UNNAMED):])
        if frame[col].notna().any():
            raise DataError(f"{name}: column {i} has no name in the header row (line 1); "
                            "give every column a name")
        warnings.append(f"{name}: column {i} has no name and no values (a trailing delimiter?); ignored it")
    return frame.drop(columns=unnamed) if unnamed else frame


def _decimal_commas(frame: pd.DataFrame) -> pd.DataFrame:
    """Semicolon files often write 3,5 for 3.5: turn such text columns into numbers."""
    pattern = r"[+-]?\d+(?:,\d+)?"
    for col in frame.columns:
        s = frame[col]
        if pd.api.types.is_numeric_dtype(s) or pd.api.types.is_bool_dtype(s):
            continue
        present = s.notna()
        if not present.any():
            continue
        text = s[present].astype(str).str.strip()
        if text.str.fullmatch(pattern).all() and text.str.contains(",", regex=False).any():
            frame[col] = pd.to_numeric(s.astype(str).str.strip().str.replace(",", ".", regex=False)
                                       .where(present), errors="coerce")
    return frame
