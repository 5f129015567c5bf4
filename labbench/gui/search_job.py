"""The search as the window runs it, in the search process: ``labbench run``'s steps, the budget
a resumed search has left, and the winner check an earlier run left on disk. No Qt here."""

from __future__ import annotations

from typing import Any



def budget_used(spec) -> int:
    """Trials of this search already stored that count against its trial budget: the finished
    ones (complete, pruned, failed); a trial stopped by the user is not counted, it is run again."""
    from labbench.gui.storage_list import storage_exists
    from labbench.search.storage import resolve_url

    url = resolve_url(spec)
    if not storage_exists(url):
        return 0
    import optuna
    from optuna.trial import TrialState

    from labbench.search.storage import quiet_optuna_warnings
    from labbench.search.strategy import route_optuna_logging

    route_optuna_logging()
    quiet_optuna_warnings()
    from labbench.search.stored import read_storage

    try:
        study = optuna.load_study(study_name=spec.study_name(), storage=read_storage(url))
    except Exception:           # no such search (yet), or no tables: nothing is used
        return 0
    used = 0
    for t in study.get_trials(deepcopy=False, states=(TrialState.COMPLETE, TrialState.PRUNED,
                                                      TrialState.FAIL)):
        reason = str(t.user_attrs.get("end_reason", "") or "").lower()
        if not (t.state == TrialState.FAIL and reason.startswith("cancel")):
            used += 1
    return used


def trials_to_run(spec, *, fresh: bool, more: int | None) -> int | None:
    """How many trials this run adds: ``more`` when asked for explicitly; otherwise what is left
    of the spec's budget (stopped at 20 of 30, Start runs 10 more). None: the spec's own budget."""
    if more is not None:
        return int(more)
    if fresh or spec.search.trials is None:
        return None
    return spec.search.trials - budget_used(spec)


def run_search(spec, emit, cancel, *, fresh: bool = False, more: int | None = None) -> dict[str, Any]:
    """What ``labbench run`` does: the search, then the one ending (in the search process):
    ``labbench.search.ending.finish_search`` writes every file into ``<spec name>_out``.

    A search resumed from the window continues the same budget; ``more`` adds that many trials."""
    from labbench.errors import SpecError
    from labbench.search.ending import finish_search
    from labbench.search.runner import SearchRunner

    trials = trials_to_run(spec, fresh=fresh, more=more)
    if trials is not None and trials <= 0:
        raise SpecError(f"all {spec.search.trials} trials of this search's budget are stored; "
                        "choose Search ▸ Run more trials… to add some, or Start afresh")
    runner = SearchRunner(spec, emit, fresh=fresh, trials=trials)
    outcome = runner.run(cancel)
    result: dict[str, Any] = {"outcome": outcome, "summary": None, "model": None, "files": ()}
    if outcome.cancelled or outcome.best_number is None or cancel.is_set():
        return result
    summary, model, files = finish_search(spec, runner.study, runner.prepared, None, emit)
    result.update(summary=summary, model=model, files=tuple(files))
    return result


def stored_winner(url: str | None, name: str, spec=None) -> tuple[dict | None, tuple[str, ...]]:
    """The winner check of an earlier run, when it was computed: ``winner.json`` in the folder
    ``labbench run`` writes it to (``<spec>_out``), or beside a SQLite storage
    (``<name>_out`` / ``<storage>_out``). Only a file for this search counts."""
    import json
    from pathlib import Path

    places = []
    if spec is not None:
        from labbench.search.commands import out_dir

        places.append(out_dir(spec, None))
    if url and url.startswith("sqlite") and ":///" in url:
        db = Path(url.split(":///", 1)[1])
        places += [db.parent / f"{name}_out", db.parent / f"{db.stem}_out"]
    for folder in places:
        path = folder / "winner.json"
        try:
            summary = json.loads(path.read_text(encoding="utf-8"))
        except (OSError, ValueError):
            continue
        if isinstance(summary, dict) and summary.get("study_name") == name and "settings" in summary:
            files = tuple(str(folder / f) for f in ("winner.json", "winner.toml") if (folder / f).exists())
            return summary, files
    return None, ()
