"""Opening a stored search for reading: the one place that does it (``labbench show``, the report,
the window's "watch a stored search", its importance helper and its storage list).

A search being written is opened by ``storage.open_storage`` (heartbeat, claiming); everything
that only reads goes through here: Optuna's logging routed into labbench's, its warnings quieted,
Optuna's tables never created in a database that does not hold them, and a one-line error naming
the storage (password masked) when it cannot be read.
"""

from __future__ import annotations

from pathlib import Path

from labbench.errors import SpecError
from labbench.search.spec import load_spec
from labbench.search.storage import quiet_optuna_warnings
from labbench.search.storage_problems import first_line, storage_error
from labbench.search.strategy import route_optuna_logging
from labbench.search.urls import mask_url, resolve_url

# optuna is imported inside the functions: ≈1 s (python -X importtime), and `labbench --help`
# imports this module through labbench.search.commands.


def read_storage(url: str):
    """An Optuna RDB storage at ``url`` for reading (no table creation, no heartbeat)."""
    import optuna

    route_optuna_logging()
    quiet_optuna_warnings()
    return optuna.storages.RDBStorage(url, skip_table_creation=True)


def _unreadable(exc: BaseException, shown: str) -> SpecError:
    error = storage_error(exc, shown)
    if isinstance(error, SpecError):
        return error
    return SpecError(f"storage {shown}: cannot read it ({first_line(exc)}); check the URL")


def study_names(url: str) -> list[str]:
    """Names of the searches stored at ``url`` (sorted); a one-line SpecError when unreadable."""
    import optuna

    if "://" not in url:
        raise SpecError(f"{url!r} is not a database URL; write e.g. sqlite:///search.db or "
                        "postgresql+psycopg://user@host/db")
    try:
        return sorted(optuna.get_all_study_names(storage=read_storage(url)))
    except Exception as exc:
        raise _unreadable(exc, mask_url(url)) from None


def load_stored(url: str, name: str):
    """The stored search ``name`` at ``url``; a one-line SpecError when it is not there."""
    import optuna

    try:
        return optuna.load_study(study_name=name, storage=read_storage(url))
    except KeyError:
        raise SpecError(f"storage {mask_url(url)}: no search named '{name}' is stored "
                        "there yet") from None
    except Exception as exc:
        raise _unreadable(exc, mask_url(url)) from None


def open_for_reading(source: str, study: str | None, storage: str | None):
    """``(study, shown URL)`` of a stored search, from a spec path or a database URL; with one
    search in the storage ``study`` may be None."""
    import optuna

    if "://" in source:
        url, name = source, study
    else:
        spec = load_spec(source)
        url, name = resolve_url(spec, storage), study or spec.study_name()
    shown = mask_url(url)
    if url.startswith("sqlite") and "///" in url:
        path = url.split("///", 1)[1]
        if path and not path.startswith(":memory:") and not Path(path).exists():
            raise SpecError(f"storage {shown}: no search is stored there yet; run "
                            f"`labbench run {source}` first")
    try:
        rdb = read_storage(url)
        names = [s.study_name for s in optuna.get_all_study_summaries(storage=rdb,
                                                                      include_best_trial=False)]
    except Exception as exc:
        raise _unreadable(exc, shown) from None
    if name is None:
        if len(names) != 1:
            raise SpecError(f"storage {shown}: holds {len(names)} searches "
                            f"({', '.join(names) or 'none'}); choose one with --search NAME")
        name = names[0]
    if name not in names:
        raise SpecError(f"storage {shown}: no search named '{name}' (stored: "
                        f"{', '.join(names) or 'none'}); run `labbench run` first or pick one with --search NAME")
    return optuna.load_study(study_name=name, storage=rdb), shown
