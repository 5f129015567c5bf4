"""Where a search lives: the Optuna storage and create-or-join/resume of the study (URLs: ``urls``).

One search is one Optuna study in an RDB storage. The default is a SQLite file beside the spec
(``sqlite:///<spec dir>/<spec stem>.db``); any SQLAlchemy URL Optuna's ``RDBStorage`` accepts works
(PostgreSQL for a search shared by several machines). Nothing here is SQLite-only.

The storage always runs with a heartbeat and claims every trial it starts for its process
(``labbench.search.orphans``): a trial of a process killed on this machine is reclaimed as soon as
another labbench process looks (at its start and every heartbeat interval); one of a process on
another machine once its heartbeat is older than the grace period. Reclaiming marks it FAIL with a
reason and queues a WAITING copy with the same settings, which the next ask picks up.

Several processes may start together on a new search name: creating the study and its attrs
tolerates losing that race and joins the winner's search (``open_study``).
"""

from __future__ import annotations

import logging
import os
import platform
import random
import re
import time
import warnings
from dataclasses import dataclass
from importlib.metadata import PackageNotFoundError, version
from pathlib import Path
from typing import Any, Mapping

from labbench.errors import SpecError
from labbench.search.optuna_adapter import (write_intermediate_values,  # noqa: F401
                                            write_study_attrs, write_user_attrs)
from labbench.search.orphans import RETRIES, claiming_storage_class, reclaim_orphans
from labbench.search.trialstore import HeartbeatThread  # noqa: F401
from labbench.search.urls import (_check_url, default_url, mask_password_text,  # noqa: F401
                                  mask_url, resolve_url)

# optuna and sqlalchemy are imported inside the functions that use them: ≈1 s each (python -X
# importtime, this machine), and the window imports this module for URL and heartbeat helpers
# long before it opens a database.

log = logging.getLogger("labbench.search.storage")

LABBENCH_FORMAT = 1

#: Environment variable with "INTERVAL,GRACE" in seconds (a testing knob; the CLI has a hidden
#: ``--heartbeat`` option that does the same).
HEARTBEAT_ENV = "LABBENCH_HEARTBEAT"

#: Study attrs that must agree between a stored study and the spec resuming it.
_MUST_MATCH = ("data_sha256", "metric", "direction", "task")


@dataclass(frozen=True)
class Heartbeat:
    """Heartbeat settings of the storage, in whole seconds (Optuna takes ints)."""

    interval: int = 20
    grace: int = 120

    def __post_init__(self) -> None:
        if int(self.interval) < 1 or int(self.grace) <= int(self.interval):
            raise SpecError(
                f"heartbeat: interval {self.interval} s and grace {self.grace} s are not usable; "
                "give an interval of at least 1 s and a grace period longer than the interval"
            )

    @classmethod
    def parse(cls, text: str, source: str = HEARTBEAT_ENV) -> "Heartbeat":
        try:
            interval, grace = (int(part) for part in str(text).split(","))
        except ValueError:
            raise SpecError(
                f"{source}: {text!r} is not 'INTERVAL,GRACE' in whole seconds, e.g. '20,120'"
            ) from None
        return cls(interval, grace)

    @classmethod
    def from_env(cls) -> "Heartbeat":
        text = os.environ.get(HEARTBEAT_ENV, "").strip()
        return cls.parse(text) if text else cls()


# --------------------------------------------------------------------------------------------
# Storage and study


def quiet_optuna_warnings() -> None:
    """Optuna's experimental-feature and heartbeat-with-ask/tell warnings say nothing to a user."""
    import optuna

    warnings.filterwarnings("ignore", category=optuna.exceptions.ExperimentalWarning)
    warnings.filterwarnings("ignore", message="Heartbeat of storage is supposed to be used")


def open_storage(url: str, heartbeat: Heartbeat | None = None, *, max_retry: int | None = None):
    """An ``optuna.storages.RDBStorage`` that claims its trials (``labbench.search.orphans``),
    with heartbeat, and a retry with the same settings for a reclaimed trial (``max_retry``
    times, default ``orphans.RETRIES``)."""
    import optuna
    from optuna.storages import RetryHeartbeatStaleTrialCallback

    heartbeat = heartbeat or Heartbeat.from_env()
    quiet_optuna_warnings()
    shown = mask_url(url)
    sqlite_file = re.match(r"^sqlite(?:\+\w+)?:///(?!:memory:)(.+)$", url)
    if sqlite_file and not Path(sqlite_file.group(1)).parent.exists():
        raise SpecError(
            f"storage {shown}: the folder {Path(sqlite_file.group(1)).parent} does not exist; "
            "create it or choose another path"
        )
    try:
        storage = _first_open(lambda: claiming_storage_class()(
            url,
            heartbeat_interval=int(heartbeat.interval),
            grace_period=int(heartbeat.grace),
            heartbeat_stale_trial_callback=RetryHeartbeatStaleTrialCallback(
                max_retry=RETRIES if max_retry is None else max_retry),
        ))
        if url.startswith("sqlite"):
            _sqlite_write_ahead(storage)
        return storage
    except ModuleNotFoundError as exc:
        raise SpecError(
            f"storage {shown}: the database driver '{exc.name}' is not installed "
            f"(pip install it, e.g. pip install 'labbench[postgres]')"
        ) from None
    except (optuna.exceptions.StorageInternalError, Exception) as exc:  # SQLAlchemy's errors vary
        reason = _one_line(exc)
        raise SpecError(
            f"storage {shown}: cannot open it ({reason}); check the URL in [search] storage or "
            "--storage"
        ) from None


def _first_open(make, attempts: int = 4):
    """Several processes opening a new database at once race to create Optuna's tables (seen on
    PostgreSQL as a duplicate key in pg_type, or "relation ... already exists"): the losers try
    again once the tables are there."""
    import sqlalchemy.exc

    for attempt in range(attempts):
        try:
            return make()
        except (sqlalchemy.exc.IntegrityError, sqlalchemy.exc.ProgrammingError):
            if attempt == attempts - 1:
                raise
            time.sleep(0.2 + random.random() * 0.5)
    raise AssertionError("unreachable")


def _sqlite_write_ahead(storage) -> None:
    """SQLite in write-ahead-log mode with ``synchronous=NORMAL``.

    The default (rollback journal, an fsync per commit) costs ≈ 4 ms per commit here, and a search
    commits once per epoch: that alone was most of the search overhead. In WAL mode a commit is a
    write to the log without fsync; a killed process loses nothing it committed (the log is in the
    OS cache), only a power cut can drop the last commits, and the file stays consistent. Readers
    (``labbench show``, the window watching) no longer block the writer either. WAL needs a local
    file system (not a network share) — use PostgreSQL to share a search between machines.
    """
    import sqlalchemy

    def pragmas(connection, _record) -> None:
        cursor = connection.cursor()
        cursor.execute("PRAGMA journal_mode=WAL")
        cursor.execute("PRAGMA synchronous=NORMAL")
        cursor.close()

    sqlalchemy.event.listen(storage.engine, "connect", pragmas)
    storage.engine.dispose()           # connections opened while Optuna set up the tables


def _one_line(exc: BaseException) -> str:
    text = str(getattr(exc, "orig", None) or exc).strip().splitlines()
    first = text[0] if text else type(exc).__name__
    return mask_password_text(first)[:200]


def study_exists(storage, name: str) -> bool:
    try:
        storage.get_study_id_from_name(name)
        return True
    except KeyError:
        return False


#: How long a process joining a just-created search waits for its creator's attrs (written
#: milliseconds after the study; generous for a loaded machine or a distant database).
JOIN_WAIT_S = 10.0


def _running(study) -> int:
    from optuna.trial import TrialState

    return len(study.get_trials(deepcopy=False, states=(TrialState.RUNNING,)))


def _advice(study) -> str:
    """How to get past a refusal, never advising ``--fresh`` while trials are running (another
    process may be working on the search; --fresh would delete its work)."""
    running = _running(study)
    if running:
        return (f"{running} of its trials are running, maybe in another process, so it must not "
                "be deleted: give another [search] name or storage (--storage / [search] storage)")
    return ("give another [search] name or storage (--storage / [search] storage), or run again "
            "with --fresh to start a new search under this name (the old trials are deleted)")


def check_resumable(study, expected: Mapping[str, Any], url: str) -> None:
    """Raise SpecError when the stored study was made for other data or another goal."""
    stored = study.user_attrs
    shown = mask_url(url)
    if stored.get("labbench_format") is None:
        if study.get_trials(deepcopy=False):
            how = "give another [search] name or storage (--storage / [search] storage)"
        else:
            how = ("give another [search] name or storage (--storage / [search] storage); if it "
                   "is an empty leftover of an interrupted start, --fresh removes it")
        raise SpecError(
            f"storage {shown}: study '{study.study_name}' exists but was not made by labbench; {how}"
        )
    if int(stored["labbench_format"]) > LABBENCH_FORMAT:
        raise SpecError(
            f"storage {shown}: study '{study.study_name}' was written by a newer labbench "
            f"(format {stored['labbench_format']}); upgrade labbench or use another storage"
        )
    what = {
        "data_sha256": "the data file's contents changed since the search began",
        "metric": "the metric differs",
        "direction": "the direction differs",
        "task": "the task differs",
    }
    for key in _MUST_MATCH:
        if key in stored and key in expected and stored[key] != expected[key]:
            old, new = stored[key], expected[key]
            if key == "data_sha256":
                old, new = str(old)[:12] + "…", str(new)[:12] + "…"
            raise SpecError(
                f"storage {shown}: study '{study.study_name}' cannot be resumed: {what[key]} "
                f"(stored {old}, spec {new}); {_advice(study)}"
            )


def _wait_for_creator(study) -> None:
    """A study without labbench attrs and without trials may be one another process has just
    created: wait (up to ``JOIN_WAIT_S``) for its attrs, which it writes in one transaction."""
    end = time.monotonic() + JOIN_WAIT_S
    while "labbench_format" not in study.user_attrs:
        if study.get_trials(deepcopy=False) or time.monotonic() > end:
            return
        time.sleep(0.2)


def _delete_unless_busy(storage, name: str, url: str) -> None:
    import optuna

    study = optuna.load_study(study_name=name, storage=storage)
    reclaim_orphans(study)                   # trials of dead processes do not count as busy
    running = _running(study)
    if running:
        raise SpecError(
            f"storage {mask_url(url)}: --fresh would delete search '{name}' while {running} of "
            "its trials are running (another process is working on it); stop it first, or give "
            "another [search] name or storage"
        )
    log.info("deleting study %s in %s (--fresh)", name, mask_url(url))
    optuna.delete_study(study_name=name, storage=storage)


def open_study(
    storage,
    name: str,
    *,
    url: str,
    direction: str,
    attrs: Mapping[str, Any],
    sampler=None,
    pruner=None,
    fresh: bool = False,
):
    """Create the study, or join/resume it after checking it fits; ``fresh`` deletes it first
    (refused while its trials are running).

    Returns ``(study, resumed)``. Any number of processes may call this together on a new name:
    one creates the study and writes its attrs in one transaction, the others lose the race
    (Optuna's DuplicatedStudyError, or the database's unique-key error), wait for those attrs and
    join. The spec-describing attrs (spec text, path, versions, searched settings) are rewritten
    on every run so they describe the latest run; the ones that must match (data fingerprint,
    metric, direction, task) are checked first.
    """
    import optuna

    if fresh and study_exists(storage, name):
        _delete_unless_busy(storage, name, url)
    created = False
    if not study_exists(storage, name):
        try:
            study = optuna.create_study(study_name=name, storage=storage, direction=direction,
                                        sampler=sampler, pruner=pruner)
            created = True
        except Exception as exc:            # lost the race (the error's kind varies by database)
            if not study_exists(storage, name):
                raise
            log.debug("study %s was created by another process meanwhile (%s)", name, exc)
    if not created:
        study = optuna.load_study(study_name=name, storage=storage, sampler=sampler, pruner=pruner)
        _wait_for_creator(study)
        check_resumable(study, {**attrs, "direction": direction}, url)
        if study.direction.name.lower() != direction:
            raise SpecError(
                f"storage {mask_url(url)}: study '{name}' optimises in another direction; "
                f"{_advice(study)}"
            )
    for attempt in range(5):                # joiners may write the same keys at the same moment
        try:
            write_study_attrs(study, attrs)
            break
        except Exception as exc:
            if attempt == 4:
                raise
            log.debug("study attrs not written (%s); again", exc)
            time.sleep(0.1 * (attempt + 1))
    return study, not created


def versions() -> dict[str, str]:
    """Package versions stored with a study (what it takes to reproduce a trial)."""
    out = {"python": platform.python_version(), "platform": platform.platform(terse=True)}
    for package in ("labbench", "numpy", "pandas", "optuna", "sqlalchemy", "scipy"):
        try:
            out[package] = version(package)
        except PackageNotFoundError:
            continue
    return out


def plain(value: Any) -> Any:
    """numpy scalars/arrays and tuples → plain Python (SQLite attrs refuse numpy values)."""
    if isinstance(value, Mapping):
        return {str(k): plain(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [plain(v) for v in value]
    if hasattr(value, "tolist"):  # numpy scalar or array
        return plain(value.tolist())
    if isinstance(value, Path):
        return str(value)
    return value
