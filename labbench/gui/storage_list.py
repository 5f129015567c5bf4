"""Which searches a storage holds (for "Watch a stored search")."""

from __future__ import annotations

from labbench.errors import SpecError


def study_names(url: str) -> list[str]:
    """Names of the studies in a storage URL; a one-line SpecError when it cannot be read."""
    import optuna

    from labbench.search.storage import mask_password_text, mask_url, quiet_optuna_warnings
    from labbench.search.strategy import route_optuna_logging

    route_optuna_logging()
    quiet_optuna_warnings()
    if "://" not in url:
        raise SpecError(f"{url!r} is not a database URL; write e.g. sqlite:///search.db or "
                        "postgresql+psycopg://user@host/db")
    try:
        from labbench.search.stored import read_storage

        storage = read_storage(url)
        return sorted(optuna.get_all_study_names(storage=storage))
    except Exception as exc:
        first = (str(exc).strip().splitlines() or [type(exc).__name__])[0]
        raise SpecError(f"storage {mask_url(url)}: cannot read it ({mask_password_text(first)[:160]}); "
                        "check the URL") from None


def masked(url: str) -> str:
    from labbench.search.storage import mask_url

    return mask_url(url)


def storage_exists(url: str) -> bool:
    """Whether a storage URL points at something already there (a SQLite file that exists)."""
    from pathlib import Path

    if url.startswith("sqlite") and ":///" in url:
        return Path(url.split(":///", 1)[1]).exists()
    return True
