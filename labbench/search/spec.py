"""The spec file: one human-editable TOML file holds a whole experiment.

```toml
[data]          path, target, ignore, task, kinds, missing, scaling, target_scaling,
                missing_markers, thousands, decimal, keep, label
[evaluation]    folds, repeats, holdout, seed, metric, seed_spread
[search]        trials, minutes, sampler, pruner, workers, together, storage, name
[model]         family (default "network"; labbench.families)
[space]         one entry per setting of the model family (see labbench.search.space)
```

``load_spec(path)`` reads and checks it (every problem a one-line ``SpecError`` naming the file,
the dotted key, the value and what is allowed); ``Spec.to_toml()`` / ``save_spec`` write it back.
The data path is stored absolute and written relative to the folder the spec is saved in.

A family that learns without a target (``needs_target = False``: the map and group families)
reads a ``[data]`` without ``target`` (or ``target = ""``); ``label = "column"`` then names a
column shown beside the groups, never an input. The section readers live in
``labbench.search.spec_reading``.
"""

from __future__ import annotations

import dataclasses
import os
import tomllib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Mapping

import tomli_w

from labbench.data import KINDS, MISSING_POLICIES, SCALINGS, TARGET_SCALINGS   # the data's own lists
from labbench.errors import SpecError
from labbench.families import DEFAULT as DEFAULT_FAMILY
from labbench.families import get_family
from labbench.nets.losses import TASKS         # the one list of tasks
from labbench.nets.metrics import UNSUPERVISED    # the task of a table without a target
from labbench.search.limits import (MAX_FOLDS, MAX_MODELS, MAX_REPEATS, MAX_SEED_SPREAD,
                                    MAX_TOGETHER, MAX_WORKERS, check_memory)
from labbench.search.space import SearchSpace, show, spec_error
from labbench.search.spec_reading import (DECIMALS, THOUSANDS,  # noqa: F401  (kept importable here)
                                          Section, check_target_for_family, number_format,
                                          target_text)

MISSING, SCALING, TARGET_SCALING = MISSING_POLICIES, SCALINGS, TARGET_SCALINGS   # labbench.data's
SAMPLERS = ("tpe", "random", "grid", "qmc", "cmaes")
PRUNERS = ("none", "median", "halving", "hyperband")
DEFAULT_TRIALS = 40


_SECTIONS = ("data", "evaluation", "search", "model", "space")


@dataclass(frozen=True)
class DataSpec:
    path: str                                   # absolute path of the CSV
    target: str = ""                            # "": no target (a family that learns without one)
    ignore: tuple[str, ...] = ()
    task: str | None = None                     # None: inferred from the target column
    kinds: Mapping[str, str] = field(default_factory=dict)   # column -> numeric | categorical
    missing: str = "impute"
    scaling: str = "standard"
    target_scaling: str = "standard"           # regression only: "standard" | "log" | "none"
    missing_markers: tuple[str, ...] = ()       # cells read as missing besides the usual markers
    thousands: str | None = None                # declared thousands separator
    decimal: str | None = None                  # declared decimal mark; None: "." (a semicolon file's "," found)
    keep: tuple[str, ...] = ()                  # columns used even when they look like row ids
    label: str | None = None                    # no target: a column shown beside the groups


@dataclass(frozen=True)
class EvaluationSpec:
    folds: int = 5
    repeats: int = 1
    holdout: float = 0.2
    seed: int = 0
    metric: str | None = None                   # None: the task's default metric
    seed_spread: int = 5                        # seeds for the winner's spread check; 0 = skip


@dataclass(frozen=True)
class SearchSettings:
    trials: int | None = DEFAULT_TRIALS
    minutes: float | None = None
    sampler: str = "tpe"
    pruner: str = "median"
    workers: int = 1
    together: int | None = None                 # trials trained as one stack; None: automatic
    storage: str | None = None                  # None: a SQLite file beside the spec
    name: str | None = None                     # None: the spec file's stem


@dataclass(frozen=True)
class Spec:
    data: DataSpec
    evaluation: EvaluationSpec = field(default_factory=EvaluationSpec)
    search: SearchSettings = field(default_factory=SearchSettings)
    space: SearchSpace = field(default_factory=SearchSpace.default)
    source_path: str | None = field(default=None, compare=False)

    def study_name(self) -> str:
        if self.search.name:
            return self.search.name
        return Path(self.source_path).stem if self.source_path else "labbench"

    def base_dir(self) -> str:
        return str(Path(self.source_path).resolve().parent) if self.source_path else os.getcwd()

    def to_dict(self, base_dir: str | os.PathLike | None = None, *,
                keep_password: bool = False) -> dict[str, Any]:
        """TOML-ready; the data path relative to ``base_dir`` (default: the spec's folder).

        A password in ``[search] storage`` is left out unless ``keep_password`` (only the user's
        own spec file keeps it, see ``save_spec``): the text goes into files labbench writes
        (winner.toml, the spec stored with the search, the report). Without it in the URL,
        PostgreSQL's client library takes it from PGPASSWORD or ~/.pgpass."""
        base = Path(base_dir if base_dir is not None else self.base_dir()).resolve()
        d, e, s = self.data, self.evaluation, self.search
        data: dict[str, Any] = {"path": _relative(d.path, base)}
        if d.target:
            data["target"] = d.target
        if d.label:
            data["label"] = d.label
        if d.ignore:
            data["ignore"] = list(d.ignore)
        if d.task:
            data["task"] = d.task
        if d.kinds:
            data["kinds"] = dict(d.kinds)
        data["missing"] = d.missing
        data["scaling"] = d.scaling
        if d.target:
            data["target_scaling"] = d.target_scaling
        if d.missing_markers:
            data["missing_markers"] = list(d.missing_markers)
        if d.thousands is not None:
            data["thousands"] = d.thousands
        if d.decimal is not None:
            data["decimal"] = d.decimal
        if d.keep:
            data["keep"] = list(d.keep)
        evaluation: dict[str, Any] = {"folds": e.folds, "repeats": e.repeats, "holdout": e.holdout,
                                      "seed": e.seed}
        if e.metric:
            evaluation["metric"] = e.metric
        evaluation["seed_spread"] = e.seed_spread
        search: dict[str, Any] = {}
        if s.trials is not None:
            search["trials"] = s.trials
        if s.minutes is not None:
            search["minutes"] = s.minutes
        search.update(sampler=s.sampler, pruner=s.pruner, workers=s.workers)
        if s.together is not None:
            search["together"] = s.together
        if s.storage:
            search["storage"] = s.storage if keep_password else without_password(s.storage)
        if s.name:
            search["name"] = s.name
        out = {"data": data, "evaluation": evaluation, "search": search}
        if self.space.family != DEFAULT_FAMILY:       # a network spec reads as it always did
            out["model"] = {"family": self.space.family}
        return {**out, "space": self.space.to_dict()}

    def to_toml(self, base_dir: str | os.PathLike | None = None, *,
                keep_password: bool = False) -> str:
        return tomli_w.dumps(self.to_dict(base_dir, keep_password=keep_password))

    # ---- validated copies (command-line overrides, the window's edits)

    def _rebuilt(self, section: str, changes: Mapping[str, Any]) -> "Spec":
        d = self.to_dict(keep_password=True)
        for key, value in changes.items():
            if value is None:
                d[section].pop(key, None)
            else:
                d[section][key] = list(value) if isinstance(value, tuple) else value
        if section == "search" and "trials" in changes and changes["trials"] is None \
                and "minutes" not in d["search"]:
            raise spec_error(self.source_path, "search.trials", "no budget left; give trials or minutes")
        return spec_from_dict(d, self.base_dir(), self.source_path)

    def with_data(self, **changes: Any) -> "Spec":
        return self._rebuilt("data", changes)

    def with_evaluation(self, **changes: Any) -> "Spec":
        return self._rebuilt("evaluation", changes)

    def with_search(self, **changes: Any) -> "Spec":
        """E.g. ``spec.with_search(trials=10, workers=2)``; ``None`` removes an optional key."""
        return self._rebuilt("search", changes)

    def with_space(self, space: SearchSpace) -> "Spec":
        spec = dataclasses.replace(self, space=space)
        _check_sampler_space(spec.search, space, self.source_path)
        return spec


def without_password(url: str) -> str:
    """The database URL with any password left out (``user:secret@host`` -> ``user@host``)."""
    try:
        from sqlalchemy.engine import make_url

        parsed = make_url(url)
        if parsed.password is None:
            return url
        return parsed._replace(password=None).render_as_string(hide_password=False)
    except Exception:  # not parseable: drop anything that looks like :password@
        import re

        return re.sub(r"(://[^:/@\s]*):[^@\s]*@", r"\1@", url)


def _relative(path: str, base: Path) -> str:
    p = Path(path)
    try:
        return Path(os.path.relpath(p, base)).as_posix()
    except ValueError:          # another drive (Windows)
        return p.as_posix()


# --------------------------------------------------------------------------------------------
# reading


def load_spec(path: str | os.PathLike) -> Spec:
    p = Path(path)
    source = str(p)
    try:
        raw = p.read_bytes()
    except FileNotFoundError:
        raise spec_error(None, source, "spec file not found; check the path") from None
    except OSError as exc:
        raise spec_error(None, source, f"cannot read the spec file ({exc.strerror})") from None
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError:
        raise spec_error(None, source, "not UTF-8 text; save the spec file as UTF-8") from None
    return loads_spec(text, p.resolve().parent, source)


def loads_spec(text: str, base_dir: str | os.PathLike, source: str | None = None) -> Spec:
    try:
        d = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        where = f"{source}: " if source else ""
        raise SpecError(f"{where}not valid TOML: {exc}; fix the syntax there") from None
    return spec_from_dict(d, base_dir, source)


def save_spec(spec: Spec, path: str | os.PathLike) -> Spec:
    """Write the spec to ``path`` (data path relative to its folder, atomically); returns it with
    that source. This is the user's spec file, so a password in its storage URL is kept."""
    from labbench.fileio import write_text

    p = Path(path)
    p.parent.mkdir(parents=True, exist_ok=True)
    # the user's own spec file: it keeps a password written in its storage URL
    write_text(p, spec.to_toml(p.resolve().parent, keep_password=True))
    return dataclasses.replace(spec, source_path=str(p))


def spec_from_dict(d: Mapping[str, Any], base_dir: str | os.PathLike,
                   source: str | None = None) -> Spec:
    """Check a parsed spec (all sections) and build the Spec. ``base_dir``: where a relative
    data path starts."""
    unknown = [k for k in d if k not in _SECTIONS]
    if unknown:
        raise spec_error(source, unknown[0], "unknown section; known sections are "
                         + ", ".join(f"[{s}]" for s in _SECTIONS))
    if "data" not in d:
        raise spec_error(source, "data", "missing section; a spec needs [data] with path and target "
                         "(or label, for a family that learns without a target)")

    ds = Section(d["data"], "data", ("path", "target", "ignore", "task", "kinds", "missing",
                                     "scaling", "target_scaling", "missing_markers", "thousands",
                                     "decimal", "keep", "label"),
                 source)
    path = ds.text("path", required=True)
    kinds = ds.d.get("kinds", {})
    if not isinstance(kinds, Mapping):
        raise ds.fail("kinds", f"{show(kinds)} is not a table; write kinds = {{ column = \"categorical\" }}")
    for col, kind in kinds.items():
        if kind not in KINDS:
            raise ds.fail(f"kinds.{col}", f"{show(kind)} is not allowed; use one of "
                          + ", ".join(f'"{k}"' for k in KINDS))
    data = DataSpec(
        path=os.path.normpath(os.path.join(os.path.abspath(base_dir), path)),
        target=target_text(ds),
        ignore=ds.texts("ignore"),
        task=ds.text("task", choices=TASKS),
        kinds=dict(kinds),
        missing=ds.text("missing", "impute", choices=MISSING),
        scaling=ds.text("scaling", "standard", choices=SCALING),
        # a spec written before this key existed gets the default (the target standardised)
        target_scaling=ds.text("target_scaling", "standard", choices=TARGET_SCALING),
        label=ds.text("label"),
        **number_format(ds),
    )
    if not data.target and data.task is not None:
        raise ds.fail("task", f"{show(data.task)} but no target is named; a table without a target "
                      "has no task to set: remove task (or name the target)")
    for key in ("ignore", "keep", "kinds"):
        if data.label and data.label in getattr(data, key):
            raise ds.fail(key, f"lists the label {show(data.label)}, which is never an input; "
                          f"remove it from {key}")
    if data.label and data.label == data.target:
        raise ds.fail("label", f"{show(data.label)} is the target; name another column or remove label")
    if data.target in data.ignore:
        raise ds.fail("ignore", f"lists the target {show(data.target)}; remove it from ignore")
    if data.target in data.keep:
        raise ds.fail("keep", f"lists the target {show(data.target)}; remove it from keep")
    if set(data.keep) & set(data.ignore):
        raise ds.fail("keep", f"{show(sorted(set(data.keep) & set(data.ignore))[0])} is also in ignore; "
                      "remove it from one of them")
    # [model] family: which kind of model (labbench.families); none = the network. Whether the
    # data needs a target depends on it.
    ms = Section(d.get("model", {}), "model", ("family",), source)
    family = get_family(ms.text("family", DEFAULT_FAMILY), source).name
    check_target_for_family(ds, data.target, data.label, get_family(family))

    es = Section(d.get("evaluation", {}), "evaluation",
                 ("folds", "repeats", "holdout", "seed", "metric", "seed_spread"), source)
    spread = es.integer("seed_spread", 5, least=0, most=MAX_SEED_SPREAD,
                        why="each seed retrains every fold of the winner")
    if spread == 1:
        raise es.fail("seed_spread", "1 is not allowed; write 0 to skip the check or 2 or more seeds")
    evaluation = EvaluationSpec(
        folds=es.integer("folds", 5, least=2, most=MAX_FOLDS,
                         why="5 or 10 folds is common practice"),
        repeats=es.integer("repeats", 1, least=1, most=MAX_REPEATS,
                           why="every repeat trains all folds again in every trial"),
        holdout=es.number("holdout", 0.2, above=0.0, below=0.9),
        seed=es.integer("seed", 0, least=0),
        metric=es.text("metric"),
        seed_spread=spread,
    )
    if evaluation.metric is not None:
        check_metric(evaluation.metric, data.task if data.target else UNSUPERVISED, source)
    if evaluation.folds * evaluation.repeats > MAX_MODELS:
        raise es.fail("repeats", f"{evaluation.folds} folds × {evaluation.repeats} repeats = "
                      f"{evaluation.folds * evaluation.repeats} networks per trial, more than "
                      f"{MAX_MODELS}; lower folds or repeats")

    ss = Section(d.get("search", {}), "search",
                 ("trials", "minutes", "sampler", "pruner", "workers", "together", "storage",
                  "name"), source)
    trials = ss.integer("trials", None, least=1)
    minutes = ss.number("minutes", None, above=0.0)
    if trials is None and minutes is None:
        trials = DEFAULT_TRIALS
    storage = ss.text("storage")
    if storage is not None and "://" not in storage:
        raise ss.fail("storage", f"{show(storage)} is not a database URL; write e.g. "
                      '"sqlite:///search.db" or "postgresql+psycopg://user@host/db"')
    search = SearchSettings(
        trials=trials,
        minutes=minutes,
        sampler=ss.text("sampler", "tpe", choices=SAMPLERS),
        pruner=ss.text("pruner", "median", choices=PRUNERS),
        workers=ss.integer("workers", 1, least=1, most=MAX_WORKERS,
                           why="one process per worker; more workers than CPU cores only share them"),
        together=ss.integer("together", None, least=1, most=MAX_TOGETHER,
                            why="trials of one network shape trained as one stack in a worker"),
        storage=storage,
        name=ss.text("name"),
    )

    # No [space] at all: the family's default searched space (labbench.search.defaults for the
    # network); with a [space] section, settings left out are fixed at their defaults.
    space_raw = d["space"] if "space" in d else _plain_copy(get_family(family).default_space)
    if not isinstance(space_raw, Mapping):
        raise spec_error(source, "space", f"{show(space_raw)} is not a table; write [space] "
                         "with one line per setting")
    space = SearchSpace.from_dict(space_raw, source, family)
    _check_sampler_space(search, space, source)
    spec = Spec(data, evaluation, search, space, source)
    check_memory(spec)
    return spec


def _plain_copy(space: Mapping[str, Any]) -> dict[str, Any]:
    return {k: (dict(v) if isinstance(v, Mapping) else v) for k, v in space.items()}


def _check_sampler_space(search: SearchSettings, space: SearchSpace, source: str | None) -> None:
    if search.sampler == "grid":
        space.grid()            # raises a SpecError naming the setting that cannot be gridded


def check_metric(metric: str, task: str | None, source: str | None = None,
                 key: str = "evaluation.metric") -> None:
    """Raise a SpecError when ``metric`` is unknown or (when the task is known) does not fit it."""
    from labbench.nets.metrics import METRICS

    if metric not in METRICS:
        raise spec_error(source, key, f"{show(metric)} is not a known metric; use one of "
                         + ", ".join(METRICS))
    if task is not None and task not in METRICS[metric].tasks:
        fits = [n for n, info in METRICS.items() if task in info.tasks]
        what = "a table without a target" if task == UNSUPERVISED else f"a {task} task"
        raise spec_error(source, key, f"{show(metric)} does not fit {what}; use one of "
                         + ", ".join(fits))
