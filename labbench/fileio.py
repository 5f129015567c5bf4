"""Writing files safely: every file labbench writes goes through here.

* ``atomic_path(target)`` / ``write_text`` / ``write_bytes``: the content goes to a temporary
  file in the target's own folder and is moved over the target with ``os.replace`` only when it
  is complete, so a crash or Ctrl-C never leaves a half-written file under the final name (and
  the old file, if any, stays intact until then).
* ``check_output(path, inputs=..., what=...)``: refuses, with one line, an output path that is
  an existing folder or one of the command's inputs (spec, data, bundle), before anything runs.
* ``safe_file_name(name)``: a search name made safe for a file name (``../``, slashes, control
  characters and the like replaced), so a report never lands outside its folder.
* ``csv_safe_cell(value)``: neutralises a text cell a spreadsheet would run as a formula.
"""

from __future__ import annotations

import contextlib
import os
import re
import tempfile
from pathlib import Path
from typing import Any, Iterable, Iterator

from labbench.errors import LabbenchError


class OutputError(LabbenchError):
    """An output path that would overwrite an input or cannot be written."""


@contextlib.contextmanager
def atomic_path(target: str | os.PathLike, suffix: str | None = None) -> Iterator[Path]:
    """Yield a temporary path beside ``target``; on success it replaces ``target`` at once.

    The caller writes the whole file to the yielded path (by name). On any exception, including
    KeyboardInterrupt, the temporary file is removed and ``target`` is left as it was.
    """
    target = Path(target)
    try:
        target.parent.mkdir(parents=True, exist_ok=True)
        fd, tmp = tempfile.mkstemp(prefix=f".{target.name}.", suffix=suffix or ".part",
                                   dir=target.parent)
    except OSError as exc:
        raise _cannot_write(target, exc) from None
    os.close(fd)
    try:
        yield Path(tmp)
        if target.is_dir():
            raise OutputError(f"{target}: is a folder; choose another file name")
        os.replace(tmp, target)
    except OSError as exc:         # disk full, permissions, a folder in the way ...
        Path(tmp).unlink(missing_ok=True)
        raise _cannot_write(target, exc) from None
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise


def _cannot_write(target: Path, exc: OSError) -> OutputError:
    reason = exc.strerror or type(exc).__name__
    return OutputError(f"{target}: cannot write it ({reason}); nothing was changed there; "
                       "choose another place (or free some disk space)")


def write_bytes(target: str | os.PathLike, data: bytes) -> Path:
    with atomic_path(target) as tmp:
        with open(tmp, "wb") as handle:
            handle.write(data)
            handle.flush()
            os.fsync(handle.fileno())
    return Path(target)


def write_text(target: str | os.PathLike, text: str, encoding: str = "utf-8") -> Path:
    return write_bytes(target, text.encode(encoding))


# -- outputs never onto inputs ----------------------------------------------------------------

def _same_file(a: Path, b: Path) -> bool:
    try:
        if a.exists() and b.exists():
            return os.path.samefile(a, b)
    except OSError:
        pass
    return a.resolve() == b.resolve()


def check_output(path: str | os.PathLike, *, inputs: Iterable[tuple[str, str | os.PathLike]] = (),
                 what: str = "output file", option: str = "-o") -> Path:
    """Refuse an output file that is a folder or one of ``inputs`` ((role, path) pairs)."""
    out = Path(path)
    if out.is_dir():
        raise OutputError(f"{out}: is a folder; give a file name for the {what} with {option} "
                          f"(e.g. {option} {out / _example(what)})")
    for role, given in inputs:
        if given is not None and _same_file(out, Path(given)):
            raise OutputError(f"{out}: is the {role} itself; labbench never overwrites an input, "
                              f"choose another {what} with {option}")
    _check_parent(out.parent, out, option)
    return out


def _check_parent(folder: Path, out: Path, option: str) -> None:
    """The nearest existing folder above ``out`` must be a writable folder, not a file."""
    probe = folder
    while not probe.exists() and probe.parent != probe:
        probe = probe.parent
    if probe.exists() and not probe.is_dir():
        raise OutputError(f"{out}: {probe} is a file, so nothing can be written below it; "
                          f"choose another place with {option}")
    if probe.exists() and not os.access(probe, os.W_OK | os.X_OK):
        raise OutputError(f"{out}: the folder {probe} is not writable; choose another place "
                          f"with {option}")


def check_out_dir(path: str | os.PathLike, *, inputs: Iterable[tuple[str, str | os.PathLike]] = (),
                  option: str = "--out") -> Path:
    """Refuse an output folder that exists as a file (or is an input); checked before a search."""
    out = Path(path)
    if out.exists() and not out.is_dir():
        raise OutputError(f"{out}: is a file, not a folder; give a folder for the winner's files "
                          f"with {option} (it is created when missing)")
    for role, given in inputs:
        if given is not None and _same_file(out, Path(given)):
            raise OutputError(f"{out}: is the {role} itself; choose another folder with {option}")
    _check_parent(out, out, option)
    return out


def _example(what: str) -> str:
    return "report.html" if "report" in what else "predictions.csv"


# -- names --------------------------------------------------------------------------------------

_UNSAFE = re.compile(r"[^A-Za-z0-9._\- ]+")


def safe_file_name(name: str, default: str = "search") -> str:
    """``name`` with anything but letters, digits, ``.``, ``_``, ``-`` and spaces (and any ``..``)
    turned into ``_``; no leading dot (never a hidden file), at most 100 characters."""
    text = _UNSAFE.sub("_", str(name))
    text = re.sub(r"_+", "_", re.sub(r"\.{2,}", "_", text)).strip(" _.") or default
    return text[:100]


# -- CSV cells ----------------------------------------------------------------------------------

_FORMULA_START = ("=", "+", "-", "@", "\t", "\r")


def csv_safe_cell(value: Any) -> Any:
    """Prefix ``'`` to a text cell starting with = + - @ tab or CR (OWASP, "CSV Injection"), so a
    spreadsheet shows it as text; numbers, and text that reads as a plain number (``-1.5``), are
    left as they are."""
    if not isinstance(value, str) or not value.startswith(_FORMULA_START):
        return value
    try:
        float(value)
    except ValueError:
        return "'" + value
    return value
