"""Reading a user's CSV file into a pandas DataFrame, with clear errors for files that cannot work.

What is handled: delimiter ``,`` ``;`` or tab (detected by counting, quote-aware), UTF-8 with or
without a byte-order mark, UTF-16 with a byte-order mark, a latin-1 fallback (with a warning),
quoted fields (delimiters and line breaks inside quotes), blank lines, decimal commas in
semicolon files. What is refused, with a one-line :class:`DataError`: an empty file, a header
row without data, a first row that looks like data instead of names, blank or duplicate column
names, rows with a different number of fields than the header, binary files.

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


def read_csv(path: str | Path) -> pd.DataFrame:
    """Read a CSV file as it is (no target handling); see the module docstring for what is checked.

    Warnings (latin-1 fallback) are logged; :func:`load_table` also collects them in
    ``Table.warnings``.
    """
    return read_file(path).frame


def read_file(path: str | Path) -> ReadResult:
    name = str(path)
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
    delimiter = _choose_delimiter(text)
    header = _header_fields(text, delimiter)
    names = _check_header(header, name)
    fields, lines = _scan_records(scan_bytes, delimiter)
    if len(fields) <= 1:
        raise DataError(f"{name}: has a header row but no data rows; add the data below the header")
    bad = np.flatnonzero(fields != len(names))
    if bad.size:
        _raise_ragged(text, delimiter, len(names), name, fields, lines, bad)

    try:
        frame = pd.read_csv(
            io.StringIO(text), sep=delimiter, header=0, names=names, index_col=False,
            skipinitialspace=True, skip_blank_lines=True, low_memory=False, quotechar='"',
        )
    except (pd.errors.ParserError, csv.Error, ValueError) as exc:
        detail = str(exc).strip().splitlines()[-1] if str(exc).strip() else type(exc).__name__
        raise DataError(f"{name}: cannot be parsed as CSV ({detail}); check the quoting and the delimiter") from None
    lines = lines[1:]
    if len(frame) != len(lines):  # a quirk the scan did not foresee: fall back to row numbers
        lines = np.arange(2, len(frame) + 2, dtype=np.int64)
    frame = _unnamed_columns(frame, name, warnings)
    if delimiter == ";":
        frame = _decimal_commas(frame)
    for text_ in warnings:
        log.warning(text_)
    return ReadResult(frame, raw, delimiter, encoding, lines, tuple(warnings))


def _decode(raw: bytes, name: str, warnings: list[str]) -> tuple[str, str, bytes]:
    """Text, the encoding used, and ASCII-compatible bytes to scan for delimiters and quotes."""
    if raw.startswith((b"\xff\xfe", b"\xfe\xff")):
        text = raw.decode("utf-16")
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


def _sample_records(text: str, delimiter: str) -> list[list[str]]:
    reader = csv.reader(io.StringIO(text[:65536]), delimiter=delimiter, skipinitialspace=True)
    out: list[list[str]] = []
    try:
        for row in reader:
            if row:
                out.append(row)
            if len(out) >= _SAMPLE_RECORDS:
                break
    except csv.Error:
        pass
    if len(text) > 65536 and len(out) > 1:
        out.pop()  # the sample may cut the last record short
    return out


def _choose_delimiter(text: str) -> str:
    """The candidate that splits the header into most fields, with the same count in most rows.

    Counting on parsed records (quotes respected); a file with one column has no delimiter and
    reads as comma separated.
    """
    best, best_key = ",", (-1.0, 0, 0)
    for rank, delim in enumerate(DELIMITERS):
        records = _sample_records(text, delim)
        if not records or len(records[0]) < 2:
            continue
        width = len(records[0])
        agree = sum(len(r) == width for r in records) / len(records)
        key = (agree, width, -rank)
        if key > best_key:
            best, best_key = delim, key
    return best


def _header_fields(text: str, delimiter: str) -> list[str]:
    first = next((r for r in csv.reader(io.StringIO(text[:65536]), delimiter=delimiter,
                                        skipinitialspace=True) if r), [])
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
