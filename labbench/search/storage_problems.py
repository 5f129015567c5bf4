"""Database problems a user can fix, told in one line naming the storage and the fix.

``storage_error(exc, shown)`` looks through an exception's chain (Optuna wraps SQLAlchemy, which
wraps the driver's own error) for what the driver said: a file that is not a SQLite database, a
database locked by another program, a refused password, a server that does not answer, a missing
database. ``shown`` is the storage URL with its password masked. Used by ``labbench run``,
``show`` and ``report`` around the calls into ``labbench.search.storage``.
"""

from __future__ import annotations

from labbench.errors import LabbenchError, SpecError
from labbench.search.urls import mask_password_text


def _chain_text(exc: BaseException) -> str:
    """Every message in an exception's chain (Optuna wraps SQLAlchemy wraps the driver's)."""
    seen, texts, todo = set(), [], [exc]
    while todo:
        e = todo.pop()
        if e is None or id(e) in seen:
            continue
        seen.add(id(e))
        texts.append(str(e))
        todo += [getattr(e, "orig", None), e.__cause__, e.__context__]
    return " | ".join(texts).lower()


# (what the database driver says, what labbench says, the fix)
_STORAGE_PROBLEMS = (
    (("file is not a database", "file is encrypted", "disk image is malformed"),
     "is not a SQLite database (or is damaged)",
     "move that file away or give another storage path with --storage or [search] storage"),
    (("database is locked", "database table is locked"),
     "is locked by another program (an open database browser, or a process writing to it)",
     "close that program or wait for it, then run the command again"),
    (("password authentication failed", "no password supplied", "password is required"),
     "refused the user name or password",
     "check the user; give the password in PGPASSWORD or ~/.pgpass (or in the URL)"),
    (("connection refused", "could not connect", "could not translate host name",
      "name or service not known", "timeout expired"),
     "does not answer",
     "check the host and port in the URL and that the database server is running"),
    (("does not exist",),
     "has no such database",
     "create it first (e.g. createdb NAME as a user allowed to) or fix the name in the URL"),
)


def storage_error(exc: BaseException, shown: str) -> BaseException:
    """A one-line SpecError for a database problem the user can fix; other errors unchanged."""

    ours = isinstance(exc, SpecError) and str(exc).startswith("storage ")
    if not (ours or _is_database_error(exc)):
        return exc
    text = _chain_text(exc)
    for needles, what, fix in _STORAGE_PROBLEMS:
        if any(n in text for n in needles):
            return SpecError(f"storage {shown}: {what}; {fix}")
    if isinstance(exc, LabbenchError):
        return exc
    return SpecError(f"storage {shown}: cannot use it ({first_line(exc)}); check the URL in "
                     "--storage or [search] storage")


def _is_database_error(exc: BaseException) -> bool:
    names = {type(e).__module__.split(".")[0] for e in _chain(exc)}
    return bool(names & {"sqlalchemy", "sqlite3", "psycopg", "psycopg2"}) or \
        any(type(e).__name__ == "StorageInternalError" for e in _chain(exc))


def _chain(exc: BaseException):
    while exc is not None:
        yield exc
        exc = exc.__cause__ or exc.__context__


def first_line(exc: BaseException) -> str:

    lines = str(getattr(exc, "orig", None) or exc).strip().splitlines()
    return mask_password_text(lines[0] if lines else type(exc).__name__)[:200]
