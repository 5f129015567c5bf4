"""Storage URLs: where a search lives by default, resolving the spec's or the command's URL, and
masking passwords in anything shown."""

from __future__ import annotations

import os
import re
from pathlib import Path
from typing import Any

from labbench.errors import SpecError




# sqlalchemy is imported inside mask_url: ≈0.9 s (python -X importtime), and `labbench --help`
# imports this module.


def mask_url(url: str) -> str:
    """The URL with any password replaced by ``***`` (for messages, events and the window)."""
    try:
        from sqlalchemy.engine import make_url

        parsed = make_url(url)
        if parsed.password is None:
            return url
        return parsed.render_as_string(hide_password=True)
    except Exception:  # not parseable: mask anything that looks like user:password@
        return re.sub(r"(://[^:/@]*:)[^@]*@", r"\1***@", url)


def default_url(spec_path: str | os.PathLike) -> str:
    """``sqlite:///<spec dir>/<spec stem>.db`` (absolute path)."""
    path = Path(spec_path).resolve()
    return f"sqlite:///{path.with_suffix('.db').as_posix()}"


def _anchor_sqlite(url: str, base_dir: Path) -> str:
    """A relative SQLite path in a spec file is relative to the spec file's folder."""
    prefix_match = re.match(r"^(sqlite(?:\+\w+)?:///)(.*)$", url)
    if not prefix_match:
        return url
    prefix, rest = prefix_match.groups()
    if not rest or rest.startswith("/") or rest.startswith(":memory:") or rest.startswith("file:"):
        return url
    if re.match(r"^[A-Za-z]:[\\/]", rest):  # a Windows drive path is absolute
        return url
    return prefix + (base_dir / rest).resolve().as_posix()


def resolve_url(spec: Any, override: str | None = None) -> str:
    """The storage URL of a spec: ``override`` (CLI/window), else ``[search] storage``, else default.

    A relative SQLite path written in the spec is taken relative to the spec file; one given as an
    override is taken as SQLite takes it (relative to the current folder).
    """
    if override:
        return _check_url(str(override), "--storage")
    spec_path = getattr(spec, "source_path", None)
    configured = getattr(getattr(spec, "search", None), "storage", None)
    if configured:
        base = Path(spec_path).resolve().parent if spec_path else Path.cwd()
        return _check_url(_anchor_sqlite(str(configured), base), "[search] storage")
    if not spec_path:
        raise SpecError(
            "[search] storage: the spec has no file to put the default database beside; "
            "save the spec first or give a storage URL (e.g. sqlite:///search.db)"
        )
    return default_url(spec_path)


def _check_url(url: str, source: str) -> str:
    if "://" not in url:
        raise SpecError(
            f"{source}: {mask_url(url)!r} is not a database URL; write e.g. "
            "'sqlite:///search.db' or 'postgresql+psycopg://user@host/db'"
        )
    return url


def mask_password_text(text: str) -> str:
    return re.sub(r"(://[^:/@\s]*:)[^@\s]*@", r"\1***@", text)
