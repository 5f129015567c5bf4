"""``labbench run`` and ``labbench show``: the search without a window.

``labbench run SPEC.toml``  runs (or resumes) the search of a spec file, then checks the winner
                            (refit, hold-out, seed spread) and writes its files.
``labbench run SPEC.toml --pick N``  no new trial: refits and exports the stored trial N instead
                            of the best (e.g. one from the trade-off front of a map search), into
                            ``<spec name>_out/trial_N`` unless ``--out`` says otherwise.
``labbench show SPEC|URL``  lists the trials stored for a spec (or in a database URL); for a
                            search without a target also the trade-off front
                            (``labbench.search.front``).

Exit codes: 0 done, 1 the search ended without any complete trial (no winner), 2 bad input,
130 interrupted (Ctrl-C or SIGTERM; the trials in flight are told FAIL, none is left RUNNING).
"""

from __future__ import annotations

import argparse
import logging
import signal
import sys
import threading
from pathlib import Path
from typing import Any

from labbench.errors import SpecError
from labbench.numbers import duration, number, percent, setting
from labbench.search import states
from labbench.search.ending import OUTPUT_NAMES, out_dir, picked_dir
from labbench.search.stored import open_for_reading  # noqa: F401  (also used by tests)

log = logging.getLogger("labbench.search.commands")

EXIT_OK, EXIT_NO_WINNER, EXIT_BAD_INPUT, EXIT_INTERRUPTED = 0, 1, 2, 130
__all__ = ["OUTPUT_NAMES", "out_dir", "run_command", "show_command", "winner_text", "trials_table"]


def add_parser(subparsers) -> None:
    run = subparsers.add_parser(
        "run", help="run or resume the search of a spec file, headless",
        description="Run the cross-validated search of SPEC.toml (resuming it when the storage "
        "already holds it), then refit the winner, score it once on the hold-out, check its "
        "spread across seeds and write its files.",
        epilog="Exit codes: 0 done, 1 no trial completed (no winner), 2 bad input, "
        "130 interrupted (Ctrl-C; run the same command again to continue).")
    run.add_argument("spec", metavar="SPEC.toml", help="the experiment's spec file")
    run.add_argument("--trials", type=int, metavar="N",
                     help="trials to add in this run (default: [search] trials); 0: no new "
                     "trial, only check the winner of the stored trials and write its files")
    run.add_argument("--minutes", type=float, metavar="M",
                     help="stop starting trials after M minutes (default: [search] minutes)")
    run.add_argument("--workers", type=int, metavar="W",
                     help="trials trained at the same time, one process each "
                     "(default: [search] workers)")
    run.add_argument("--together", type=int, metavar="T",
                     help="trials of one network shape a worker trains as one stack; 1 trains "
                     "each alone (default: [search] together, else automatic)")
    run.add_argument("--storage", metavar="URL",
                     help="database URL (default: [search] storage, else a SQLite file "
                     "beside the spec)")
    run.add_argument("--out", metavar="DIR",
                     help="folder for the winner's files (default: <spec name>_out beside the spec)")
    run.add_argument("--fresh", action="store_true",
                     help="delete the stored search of this name first and start afresh")
    run.add_argument("--pick", type=int, metavar="TRIAL",
                     help="no new trial: refit and export the stored trial TRIAL instead of the "
                     "best (e.g. one of the trade-off front `labbench show` lists), into "
                     "<spec name>_out/trial_TRIAL unless --out is given")
    run.add_argument("--quiet", action="store_true", help="no progress line, errors only")
    run.add_argument("-v", "--verbose", action="count", default=argparse.SUPPRESS,
                     help="more log lines (-vv: debug)")
    run.add_argument("--heartbeat", metavar="INTERVAL,GRACE", help=argparse.SUPPRESS)
    run.set_defaults(func=run_command)

    show = subparsers.add_parser(
        "show", help="list the trials of a search",
        description="List the trials stored for SPEC.toml (or in a database URL) and the best "
        "so far. Works while a search is running, also from another machine.")
    show.add_argument("source", metavar="SPEC.toml|URL", help="a spec file or a database URL")
    show.add_argument("--search", "--study", dest="study", metavar="NAME",
                      help="the search's name in the database (default: the spec's, or the only one)")
    show.add_argument("--storage", metavar="URL", help="database URL to use with a spec file")
    show.add_argument("-v", "--verbose", action="count", default=argparse.SUPPRESS)
    show.set_defaults(func=show_command)


# --------------------------------------------------------------------------------------------
# run


class _Interrupts:
    """Ctrl-C / SIGTERM set the cancel event (first time) or raise KeyboardInterrupt (again).

    Once the search is over (``immediate``), the first one raises KeyboardInterrupt at once: the
    trials are all stored, and nobody waits for a refit after pressing Ctrl-C."""

    def __init__(self, cancel: threading.Event, say):
        self.cancel, self.say = cancel, say
        self.saved: dict[int, Any] = {}
        self.immediate = False

    def __enter__(self):
        if threading.current_thread() is threading.main_thread():
            for sig in (signal.SIGINT, signal.SIGTERM):
                self.saved[sig] = signal.signal(sig, self._handle)
        return self

    def _handle(self, signum, frame) -> None:
        if self.cancel.is_set() or self.immediate:
            self.cancel.set()
            raise KeyboardInterrupt
        self.cancel.set()
        self.say("stopping: the trials in flight end after their current epoch "
                 "(press Ctrl-C again to stop at once)")

    def __exit__(self, *exc) -> None:
        for sig, handler in self.saved.items():
            signal.signal(sig, handler)


def run_command(args) -> int:
    from labbench.search import events
    from labbench.search.ending import check_out
    from labbench.search.progress import ProgressLine
    from labbench.search.runner import SearchRunner
    from labbench.search.spec import load_spec
    from labbench.search.storage import Heartbeat

    spec = load_spec(args.spec)
    heartbeat = Heartbeat.parse(args.heartbeat, "--heartbeat") if args.heartbeat else None
    if args.workers is not None:
        _check_workers(spec, args.workers)
    if getattr(args, "together", None) is not None:
        _check_together(spec, args.together)
    pick = getattr(args, "pick", None)
    if pick is not None:
        _check_pick(args)
        target = picked_dir(spec, pick, args.out)
        check_out(spec, target, spec_path=args.spec)
        return _winner_only(args, spec, target, pick=pick)
    target = out_dir(spec, args.out)
    # checked before the search starts, not after it ran for hours
    check_out(spec, target, spec_path=args.spec)
    if args.trials == 0:
        if args.fresh:
            raise SpecError("--trials 0 with --fresh: that would delete the stored search and run "
                            "no trial; drop one of them")
        return _winner_only(args, spec, target)
    progress = ProgressLine(sys.stderr, quiet=args.quiet)
    ended: dict[str, int] = {}          # this run's trials by how they ended

    def emit(event) -> None:
        if isinstance(event, events.TrialEnded):
            ended[event.state] = ended.get(event.state, 0) + 1
        progress(event)

    runner = SearchRunner(spec, emit, storage=args.storage, trials=args.trials,
                          minutes=args.minutes, workers=args.workers, fresh=args.fresh,
                          together=getattr(args, "together", None),
                          heartbeat=heartbeat)
    cancel = threading.Event()

    def say(text: str) -> None:
        progress(events.Notice(text, "info"))

    with _Interrupts(cancel, say) as interrupts:
        try:
            outcome = runner.run(cancel)
        except KeyboardInterrupt:          # a second Ctrl-C while the trials were stopping
            progress.close()
            print(interrupted_text(ended, None, args.spec, after_search=False), file=sys.stderr)
            return EXIT_INTERRUPTED
        except Exception as exc:
            from labbench.search.storage_problems import storage_error

            raise storage_error(exc, _shown_url(spec, args.storage)) from None
        if outcome.cancelled or cancel.is_set():
            # also a Ctrl-C that came after the last trial: stop now, nothing is refit or written
            progress.close()
            print(interrupted_text(ended, outcome.storage, args.spec,
                                   after_search=not outcome.cancelled), file=sys.stderr)
            return EXIT_INTERRUPTED
        interrupts.immediate = True
        if outcome.best_number is None:
            print(f"labbench: no trial completed, so there is no winner; see `labbench show "
                  f"{args.spec}` for why the trials failed", file=sys.stderr)
            return EXIT_NO_WINNER
        try:
            return _finish(spec, runner.study, runner.prepared, target, progress)
        except KeyboardInterrupt:
            progress.close()
            print(f"labbench: interrupted while checking the winner; the trials are stored in "
                  f"{outcome.storage}, but the winner's files in {target} are not complete; "
                  f"`labbench run {args.spec} --trials 0` writes them without new trials",
                  file=sys.stderr)
            return EXIT_INTERRUPTED


def _check_workers(spec, workers: int) -> None:
    import dataclasses

    from labbench.search.limits import MAX_WORKERS, check_memory

    if workers > MAX_WORKERS:
        raise SpecError(f"--workers: {workers} is more than labbench allows ({MAX_WORKERS}; one "
                        f"process per worker); give a whole number from 1 to {MAX_WORKERS}")
    if workers >= 1:
        check_memory(dataclasses.replace(spec, search=dataclasses.replace(spec.search,
                                                                          workers=workers)))


def _check_together(spec, together: int) -> None:
    """``--together`` is checked as ``[search] together`` is (range, memory)."""
    import dataclasses

    from labbench.search.limits import MAX_TOGETHER, check_memory

    if not 1 <= together <= MAX_TOGETHER:
        raise SpecError(f"--together: {together} is not allowed; give a whole number from 1 to "
                        f"{MAX_TOGETHER} (1 trains each trial alone)")
    check_memory(dataclasses.replace(spec, search=dataclasses.replace(spec.search,
                                                                      together=together)))


def _check_pick(args) -> None:
    if args.pick < 0:
        raise SpecError(f"--pick: {args.pick} is not a trial number; give the number of a "
                        "finished trial (labbench show lists them)")
    for option, given in (("--trials", args.trials), ("--fresh", args.fresh),
                          ("--minutes", args.minutes), ("--workers", args.workers),
                          ("--together", getattr(args, "together", None))):
        if given:
            raise SpecError(f"--pick refits a stored trial and runs no new one, so {option} "
                            f"does nothing with it; drop {option} (or --pick)")


def _finish(spec, study, prepared, target: Path, progress, pick: int | None = None) -> int:
    """The one ending (``labbench.search.ending.finish_search``); prints the summary."""
    from labbench.search.ending import finish_search

    options = {} if pick is None else {"trial_number": pick}
    summary, _model, files = finish_search(spec, study, prepared, target, progress, **options)
    progress.close()
    print(winner_text(summary, files))
    return EXIT_OK


def _winner_only(args, spec, target: Path, pick: int | None = None) -> int:
    """``--trials 0`` (or ``--pick N``): no new trial; check the winner of the stored trials (or
    the picked one) and write its files."""
    from labbench.search.progress import ProgressLine

    study, _ = open_for_reading(args.spec, None, args.storage)
    progress = ProgressLine(sys.stderr, quiet=args.quiet)
    cancel = threading.Event()
    with _Interrupts(cancel, lambda text: None) as interrupts:
        interrupts.immediate = True
        try:
            return _finish(spec, study, None, target, progress, pick)
        except KeyboardInterrupt:
            progress.close()
            print(f"labbench: interrupted; the winner's files in {target} are not complete",
                  file=sys.stderr)
            return EXIT_INTERRUPTED


def interrupted_text(ended: dict[str, int], storage: str | None, spec_path: str, *,
                     after_search: bool) -> str:
    """The line ``labbench run`` prints on Ctrl-C: this run's trials by how they ended."""
    cancelled = ended.get("cancelled", 0)
    done = {k: n for k, n in ended.items() if k != "cancelled" and n}
    finished = sum(done.values())
    parts = states.counts_text(done)
    where = f" in {storage}" if storage else ""
    text = f"labbench: interrupted; {finished} trial(s) of this run ended"
    text += f" ({parts})" if parts else ""
    if cancelled:
        text += (f" and {cancelled} were cancelled (stored as failed, 'cancelled by the user', "
                 "never counted as results)")
    text += f"; they are stored{where}"
    if after_search:
        return (text + "; the interrupt came after the last trial, so the winner was not refit "
                f"and no file was written: `labbench run {spec_path} --trials 0` does that "
                "without new trials")
    return text + "; run the same command again to continue"


def _shown_url(spec, storage: str | None) -> str:
    from labbench.search.storage import mask_url, resolve_url

    try:
        return mask_url(resolve_url(spec, storage))
    except Exception:
        return "the storage"


def winner_text(summary: dict, files: list[str] = ()) -> str:
    """The winner summary ``labbench run`` prints at the end."""
    s, metric = summary, summary["metric"]
    folds = s.get("fold_scores") or []
    who = "picked" if s.get("picked") else "winner"
    lines = [f"{who}: trial {s['trial_number']} of search '{s.get('study_name', '')}'",
             f"  {metric}, cross-validated over {len(folds)} folds: {number(s['cv_mean'])} "
             f"± {number(s['cv_std'])} (mean ± standard deviation across folds)",
             "  per fold: " + "  ".join(number(v) for v in folds)]
    comparison = s.get("cv_vs_holdout") or {}
    lines.append(f"  hold-out ({s.get('holdout_rows', '?')} rows, scored once): "
                 f"{number(s.get('holdout_score'))}")
    if comparison.get("text"):
        lines.append(f"    {comparison['text']}")
    spread = s.get("seed_spread")
    if "stability" in s:                     # a family without a target (maps)
        from labbench.search.map_winner import summary_text

        lines += summary_text(s)
    elif spread and spread.get("scores"):
        lines.append(f"  seed spread ({len(spread['scores'])} seeds): {number(spread['mean'])} "
                     f"± {number(spread['std'])}, from {number(spread['min'])} to {number(spread['max'])}")
    else:
        lines.append("  seed spread: not measured")
    shown = "\n".join(lines)
    warnings = [w for w in s.get("warnings") or [] if w not in shown]   # said once
    if s.get("runner_up") and s["runner_up"].get("text") and s["runner_up"]["text"] not in warnings:
        lines.append(f"    {s['runner_up']['text']}")
    settings = s.get("settings") or {}
    if settings:
        lines.append("  settings: " + ", ".join(f"{k} {setting(v)}" for k, v in settings.items()))
    imp = s.get("importance") or {}
    if imp.get("values"):
        lines.append("  what moved the score: " + ", ".join(
            f"{param_label(k)} {percent(v)}" for k, v in imp["values"].items()))
    if imp.get("message"):
        lines.append(f"    {imp['message']}")
    counts = s.get("trials") or {}
    lines.append("  trials: " + states.counts_text(counts))
    for warning in warnings:
        lines.append(f"  warning: {warning}")
    if files:
        lines.append("  files: " + ", ".join(str(f) for f in files))
    if s.get("caution"):
        lines.append(f"  note: {s['caution']}")
    return "\n".join(lines)


# --------------------------------------------------------------------------------------------
# show




def param_label(name: str) -> str:
    """A searched parameter as the user knows it: the units of hidden layer i are stored as the
    parameter ``units_i`` and shown as ``layer_i_units``; ``l2_on`` is the l2 penalty's switch."""
    if name.startswith("units_") and name[6:].isdigit():
        return f"layer_{name[6:]}_units"
    return {"l2_on": "l2_used"}.get(name, name)


def trials_table(study, source: str | None = None) -> str:
    """The text ``labbench show`` prints for a study (also handy in tests); for a search without
    a target (the maps) it ends with the trade-off front (``labbench.search.front``)."""
    from labbench.search.front import front_text

    from labbench.search.ranking import best_trial

    trials = study.get_trials(deepcopy=False)
    attrs = study.user_attrs
    metric = attrs.get("metric", "value")
    direction = attrs.get("direction", study.direction.name.lower())
    params = list(attrs.get("searched") or sorted({p for t in trials for p in t.params}))
    header = ["trial", "state", metric, "±", "ran", "time"] + [param_label(p) for p in params]
    rows = []
    for t in trials:
        ua = t.user_attrs
        key = states.trial_key(t)
        done = key == "complete" and t.value is not None   # (Optuna gives a pruned trial its
        rows.append([str(t.number), states.WORDS[key],      # last step's value: not a score)
                     number(t.value) if done else "",
                     number(ua["cv_std"]) if done and ua.get("cv_std") is not None else "",
                     str(ua.get("epochs_run", "")),
                     duration(ua["duration_s"]) if "duration_s" in ua else "",
                     *[setting(t.params[p]) if p in t.params else "" for p in params]])
    widths = [max(len(h), *(len(r[i]) for r in rows)) if rows else len(h)
              for i, h in enumerate(header)]
    lines = [f"search '{study.study_name}': {direction} {metric}, {len(trials)} trials"]
    lines.append("  ".join(h.ljust(w) for h, w in zip(header, widths)).rstrip())
    lines += ["  ".join(c.ljust(w) for c, w in zip(r, widths)).rstrip() for r in rows]
    lines.append("(± = standard deviation across folds, ran = epochs trained)")
    best = best_trial(trials, direction)
    if best is not None:
        folds = best.user_attrs.get("fold_scores") or []
        std = best.user_attrs.get("cv_std")
        spread = f" ± {number(std)}" if std is not None else ""
        lines.append(f"best: trial {best.number}, {metric} {number(best.value)}{spread} over "
                     f"{len(folds)} folds; " + ", ".join(f"{param_label(k)}={setting(v)}" for k, v in
                                                      best.params.items()))
    else:
        lines.append(f"best: none yet (no {states.WORDS['complete']} trial with a score)")
    ended = [t for t in trials if states.trial_key(t) == "failed" and t.user_attrs.get("end_reason")]
    for t in ended[-5:]:
        lines.append(f"trial {t.number} {states.WORDS['failed']}: {t.user_attrs['end_reason']}")
    hint = ("to refit and export one of them instead of the best: labbench run "
            f"{source or 'SPEC.toml'} --pick TRIAL")
    front = front_text(trials, metric, hint)
    if front:
        lines += ["", front]
    return "\n".join(lines)


def show_command(args) -> int:
    study, _ = open_for_reading(args.source, args.study, args.storage)
    try:
        print(trials_table(study, args.source if str(args.source).endswith(".toml") else None))
        sys.stdout.flush()
    except BrokenPipeError:           # `labbench show ... | head`
        import os

        os.dup2(os.open(os.devnull, os.O_WRONLY), sys.stdout.fileno())
    return EXIT_OK

