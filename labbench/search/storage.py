"""Where a search lives: storage URL resolution, the Optuna storage, create-or-resume of the study.

One search is one Optuna study in an RDB storage. The default is a SQLite file beside the spec
(``sqlite:///<spec dir>/<spec stem>.db``); any SQLAlchemy URL Optuna's ``RDBStorage`` accepts works
(PostgreSQL for a search shared by several machines). Nothing here is SQLite-only.

The storage always runs with a heartbeat: a process killed in the middle of a trial leaves that
trial RUNNING until its heartbeat is older than the grace period; the next ``fail_stale_trials``
call (the runner makes one before every ask) then marks it FAIL and queues a WAITING copy with the
same parameters, which the next ask picks up.
"""

from __future__ import annotations

import json
import logging
import os
import platform
import re
import threading
import warnings
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Mapping

from labbench.errors import SpecError

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
# URLs


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


# --------------------------------------------------------------------------------------------
# Storage and study


def quiet_optuna_warnings() -> None:
    """Optuna's experimental-feature and heartbeat-with-ask/tell warnings say nothing to a user."""
    import optuna

    warnings.filterwarnings("ignore", category=optuna.exceptions.ExperimentalWarning)
    warnings.filterwarnings("ignore", message="Heartbeat of storage is supposed to be used")


def open_storage(url: str, heartbeat: Heartbeat | None = None, *, max_retry: int = 3):
    """An ``optuna.storages.RDBStorage`` with heartbeat and retry of stale trials."""
    import optuna
    from optuna.storages import RDBStorage, RetryHeartbeatStaleTrialCallback

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
        storage = RDBStorage(
            url,
            heartbeat_interval=int(heartbeat.interval),
            grace_period=int(heartbeat.grace),
            heartbeat_stale_trial_callback=RetryHeartbeatStaleTrialCallback(max_retry=max_retry),
        )
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


def mask_password_text(text: str) -> str:
    return re.sub(r"(://[^:/@\s]*:)[^@\s]*@", r"\1***@", text)


def study_exists(storage, name: str) -> bool:
    try:
        storage.get_study_id_from_name(name)
        return True
    except KeyError:
        return False


def check_resumable(study, expected: Mapping[str, Any], url: str) -> None:
    """Raise SpecError when the stored study was made for other data or another goal."""
    stored = study.user_attrs
    shown = mask_url(url)
    how = (
        "run again with --fresh to start a new search under this name (the old trials are "
        "deleted), or give another storage (--storage / [search] storage)"
    )
    if stored.get("labbench_format") is None:
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
                f"(stored {old}, spec {new}); {how}"
            )


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
    """Create the study, or resume it after checking it fits; ``fresh`` deletes it first.

    Returns ``(study, resumed)``. The spec-describing attrs (spec text, path, versions, searched
    settings) are rewritten on every run so they describe the latest run; the ones that must
    match (data fingerprint, metric, direction, task) are checked first.
    """
    import optuna

    exists = study_exists(storage, name)
    if exists and fresh:
        log.info("deleting study %s in %s (--fresh)", name, mask_url(url))
        optuna.delete_study(study_name=name, storage=storage)
        exists = False
    if exists:
        study = optuna.load_study(study_name=name, storage=storage, sampler=sampler, pruner=pruner)
        check_resumable(study, {**attrs, "direction": direction}, url)
        if study.direction.name.lower() != direction:
            raise SpecError(
                f"storage {mask_url(url)}: study '{name}' optimises in another direction; "
                "run with --fresh to start afresh"
            )
    else:
        study = optuna.create_study(
            study_name=name, storage=storage, direction=direction, sampler=sampler, pruner=pruner,
            load_if_exists=True,
        )
    for key, value in attrs.items():
        study.set_user_attr(key, value)
    return study, exists


def write_intermediate_values(study, trial_id: int, values: list[tuple[int, float]]) -> None:
    """Store a trial's new per-epoch values (step, value) in one transaction.

    Optuna's ``trial.report`` opens a transaction and looks the trial and the step up for every
    value (≈0.9 ms each with SQLite); a search reports every epoch, so that was the largest part of
    the controller's work. On an RDB storage this inserts the rows in one go (≈0.05 ms each) through
    Optuna 5.0's storage models; anything unexpected falls back to the public per-step call.
    """
    if not values:
        return
    backend = getattr(study._storage, "_backend", study._storage)
    try:
        from optuna.storages import RDBStorage
        from optuna.storages._rdb import models
        from optuna.storages._rdb.storage import _create_scoped_session

        if not isinstance(backend, RDBStorage):
            raise TypeError("not an RDB storage")
        with _create_scoped_session(backend.scoped_session, True) as session:
            trial = models.TrialModel.find_or_raise_by_id(trial_id, session)
            backend.check_trial_is_updatable(trial_id, trial.state)
            rows = []
            for step, value in values:
                stored, kind = models.TrialIntermediateValueModel.intermediate_value_to_stored_repr(
                    float(value))
                rows.append(models.TrialIntermediateValueModel(
                    trial_id=trial_id, step=int(step), intermediate_value=stored,
                    intermediate_value_type=kind))
            session.add_all(rows)
    except (ImportError, AttributeError, TypeError) as exc:
        log.debug("per-step intermediate values (%s)", exc)
        for step, value in values:
            study._storage.set_trial_intermediate_value(trial_id, int(step), float(value))


def write_user_attrs(trial, attrs: Mapping[str, Any]) -> None:
    """``trial.set_user_attr`` for several keys in one transaction (same fallback as above)."""
    study = trial.study
    backend = getattr(study._storage, "_backend", study._storage)
    try:
        from optuna.storages import RDBStorage
        from optuna.storages._rdb import models
        from optuna.storages._rdb.storage import _create_scoped_session

        if not isinstance(backend, RDBStorage):
            raise TypeError("not an RDB storage")
        model = models.TrialUserAttributeModel
        with _create_scoped_session(backend.scoped_session, True) as session:
            row = models.TrialModel.find_or_raise_by_id(trial._trial_id, session)
            backend.check_trial_is_updatable(trial._trial_id, row.state)
            existing = {a.key: a for a in model.where_trial_id(trial._trial_id, session)}
            for key, value in attrs.items():
                text = json.dumps(value)
                if key in existing:
                    existing[key].value_json = text
                else:
                    session.add(model(trial_id=trial._trial_id, key=key, value_json=text))
        trial._cached_frozen_trial.user_attrs.update(attrs)
    except (ImportError, AttributeError, TypeError) as exc:
        log.debug("per-key user attrs (%s)", exc)
        for key, value in attrs.items():
            trial.set_user_attr(key, value)


class HeartbeatThread:
    """Records a heartbeat for every trial in flight every ``interval`` seconds."""

    def __init__(self, storage, interval: float):
        self._storage, self._interval = storage, interval
        self._ids: set[int] = set()
        self._lock = threading.Lock()
        self._stop = threading.Event()
        self._thread = threading.Thread(target=self._beat, name="labbench-heartbeat", daemon=True)

    def start(self) -> None:
        self._thread.start()

    def add(self, trial_id: int) -> None:
        self._storage.record_heartbeat(trial_id)
        with self._lock:
            self._ids.add(trial_id)

    def discard(self, trial_id: int) -> None:
        with self._lock:
            self._ids.discard(trial_id)

    def beat_now(self) -> None:
        """Record every heartbeat now (the controller does this before it fails stale trials,
        so a starved heartbeat thread on a busy machine never makes its own trials look stale)."""
        with self._lock:
            ids = list(self._ids)
        for trial_id in ids:
            try:
                self._storage.record_heartbeat(trial_id)
            except Exception as exc:  # a busy database must not kill the search
                log.warning("heartbeat of trial id %s not recorded: %s", trial_id, exc)

    def _beat(self) -> None:
        while not self._stop.wait(self._interval):
            self.beat_now()

    def stop(self) -> None:
        self._stop.set()
        if self._thread.is_alive():
            self._thread.join(5.0)


def versions() -> dict[str, str]:
    """Package versions stored with a study (what it takes to reproduce a trial)."""
    from importlib.metadata import PackageNotFoundError, version

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
