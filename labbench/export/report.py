"""The HTML report of a search: one self-contained page (inline CSS and inline SVG pictures, no
script, nothing fetched from a network), in the window's palette.

It reads top-down like a bench sheet: first the winner and how sure we are, with the caution (one
screen), then the data, the search space, the trials, the checks of the winner and the machine.
Each part is a ``<section id=...>`` in the order of ``SECTIONS`` (a search of a map or group family
adds ``groups`` after the summary: ``MAP_SECTIONS``, ``labbench.export.report_maps``). The pictures are matplotlib
figures saved as SVG with real text (``labbench.export.report_plots``); matplotlib is imported
only when a report is written.
"""

from __future__ import annotations

import html
import logging
import os
from pathlib import Path
from typing import Any, Iterable

from labbench.export.bundle import CAUTION
from labbench.export.report_data import ReportData, collect
from labbench.export import report_maps as maps
from labbench.export import report_plots as plots
from labbench.export.report_style import CSS
from labbench.export.report_words import (STATE_ORDER, STATE_WORDS, better_words, counts,
                                          counts_sentence, family_settings_in_words, metric_label,
                                          num, params_in_words, setting_label, settings_in_words,
                                          state_of)

log = logging.getLogger("labbench.export.report")

SECTIONS = ("summary", "data", "space", "trials", "checks", "environment")
MAP_SECTIONS = ("summary", "groups", "data", "space", "trials", "checks", "environment")
TITLES = {"summary": "The winner and how sure we are", "groups": "The map and its groups",
          "data": "The data",
          "space": "The search space", "trials": "The trials",
          "checks": "The winner under test", "environment": "Machine and versions"}
MORE_CAUTIONS = (
    "The hold-out score is one draw of a limited number of rows; its own uncertainty can be as "
    "large as the differences between trials.",
    "The more trials a search runs on a small data set, the more its best cross-validated score "
    "flatters the winner (it was picked because it did well on these folds).",
)
MAX_ROWS = 300


def esc(value: Any) -> str:
    return html.escape("" if value is None else str(value), quote=True)


def table(header: Iterable[str], rows: Iterable[Iterable[Any]], numeric: Iterable[int] = ()) -> str:
    numeric = set(numeric)
    head = "".join(f"<th>{esc(h)}</th>" for h in header)
    body = []
    for row in rows:
        cells = [f'<td class="num">{esc(num(c))}</td>' if i in numeric else f"<td>{esc(c)}</td>"
                 for i, c in enumerate(row)]
        body.append("<tr>" + "".join(cells) + "</tr>")
    return f"<table><tr>{head}</tr>{''.join(body)}</table>"


def figure(svg: str | None, caption: str, missing: str = "nothing to draw yet") -> str:
    if svg is None:
        return f'<p class="note">{esc(caption)}: {esc(missing)}.</p>'
    return f"<figure>{svg}<figcaption>{esc(caption)}</figcaption></figure>"


def note(text: str) -> str:
    return f'<p class="note">{esc(text)}</p>'


def _target(data: ReportData) -> str:
    if maps.family_of(data):
        return "none (learned without a target)"
    return (data.spec.get("data") or {}).get("target") or (data.winner or {}).get("target") or "?"


def _metric(data: ReportData) -> str:
    return metric_label(data.attrs.get("metric") or (data.winner or {}).get("metric"))


def _task_words(data: ReportData) -> str:
    task = data.data.get("task") or (data.winner or {}).get("task")
    classes = data.data.get("classes") or (data.winner or {}).get("classes")
    if task == "regression":
        return "a quantity (regression)"
    if task == "unsupervised" or maps.family_of(data):
        return "groups of rows, without a target"
    if classes:
        return f"one of {len(classes)} classes ({task})"
    return task or "?"


def _best_trial(data: ReportData):
    best = plots.best_number(data)
    return next((t for t in data.trials if t.number == best), None)


# -- summary ------------------------------------------------------------------------------------

def _headline(pairs: list[tuple[str, str]]) -> str:
    cells = "".join(f"<div><span>{esc(k)}</span><b>{esc(v)}</b></div>" for k, v in pairs)
    return f'<div class="headline">{cells}</div>'


def summary_section(data: ReportData) -> str:
    metric, w, c = _metric(data), data.winner, counts(data.trials)
    path = data.data.get("path") or (data.spec.get("data") or {}).get("path") or "the data"
    family = maps.family_of(data)
    if family:
        goal = ("Find features of" if family == "hebbian" else "Group the rows of")
        parts = [f"<p>{goal} {esc(Path(str(path)).name)} without a target, with "
                 f"{esc(maps.family_words(family))}; trials ranked by cross-validated "
                 f"{esc(metric)} ({better_words(data.direction)}).</p>"]
    else:
        parts = [f"<p>Predict <b>{esc(_target(data))}</b>, {esc(_task_words(data))}, from "
                 f"{esc(Path(str(path)).name)} with a small neural network; trials ranked by "
                 f"cross-validated {esc(metric)} ({better_words(data.direction)}).</p>"]
    best = _best_trial(data)
    if w:
        folds = len(w.get("fold_scores") or [])
        spread = w.get("seed_spread") or {}
        pairs = [(f"cross-validated {metric}, {folds} folds",
                  f"{num(w.get('cv_mean'))} ± {num(w.get('cv_std'))}"),
                 (f"hold-out, {w.get('holdout_rows', '?')} unseen rows", num(w.get("holdout_score")))]
        stability = maps.winner_scores(data).get("stability") if family else None
        if stability and stability.get("ari_mean") is not None:
            pairs.append((f"groups agree across {len(stability.get('seeds') or [])} seeds",
                          f"{num(stability['ari_mean'], 3)} ({stability.get('verdict', '')})"))
        elif family:
            pairs.append(("groups across seeds", "not measured"))
        elif spread.get("scores"):
            pairs.append((f"seed spread, {len(spread['scores'])} seeds",
                          f"± {num(spread.get('std'), 3)}"))
        else:
            pairs.append(("seed spread", "not measured"))
        pairs.append(("winning trial", f"#{w.get('trial_number')} of {len(data.trials)}"))
        parts.append(_headline(pairs))
        parts.append(f"<p><b>Settings:</b> {esc(_settings_words(data, w.get('settings') or {}))}.</p>")
        if w.get("best_epoch") and not family:
            parts.append(f"<p>The trial did best at epoch {esc(w['best_epoch'])}; the refitted model "
                         f"was trained for that many epochs.</p>")
        verdict = (w.get("cv_vs_holdout") or {}).get("text")
        if verdict:
            parts.append(f"<p>{esc(verdict)}</p>")
        for warning in w.get("warnings") or []:
            parts.append(note(warning))
    elif best is not None:
        parts.append(_headline([(f"cross-validated {metric}", f"{num(best.value)} ± {num(best.cv_std)}"),
                                ("hold-out", "not computed"), ("seed spread", "not computed"),
                                ("best trial so far", f"#{best.number} of {len(data.trials)}")]))
        words = settings_in_words(best.settings) if best.settings else params_in_words(best.params)
        parts.append(f"<p><b>Settings:</b> {esc(words)}.</p>")
        parts.append(note("No winner.json was found in the output folder, so the refit, the hold-out "
                          "score and the seed spread are not known yet; labbench run writes them "
                          "when the search ends."))
    else:
        parts.append(note("No trial has finished with a score yet, so there is no winner."))
    parts.append(f"<p>{esc(counts_sentence(c))}</p>")
    parts.append(f'<div class="caution"><b>Caution.</b> {esc(CAUTION)}</div>')
    return '<div class="sheet">' + "".join(parts) + "</div>"


# -- data, space --------------------------------------------------------------------------------

def data_section(data: ReportData) -> str:
    d = data.data
    train, hold = d.get("train_rows"), d.get("holdout_rows")
    total = train + hold if isinstance(train, int) and isinstance(hold, int) else None
    rows = [("file", d.get("path") or "unknown"), ("target", _target(data)), ("task", _task_words(data)),
            ("rows used", f"{num(total)}: {num(train)} for the cross-validation folds, "
                          f"{num(hold)} locked away as the hold-out"),
            ("classes", ", ".join(map(str, d["classes"])) if d.get("classes") else "-"),
            ("fingerprint (SHA-256 of the file)", d.get("sha256") or "unknown")]
    parts = [table(("", ""), rows)]
    if d.get("changed"):
        parts.append(note("The data file has changed since the search ran (its fingerprint differs): "
                          "the numbers here describe the file as it was then."))
    columns = d.get("columns")
    if columns:
        spec_data = data.spec.get("data") or {}
        ignored = set(spec_data.get("ignore") or [])

        def role(col: str) -> str:
            if col == spec_data.get("target"):
                return "target"
            if spec_data.get("label") and col == spec_data.get("label"):
                return "label (shown beside the groups, not used in training)"
            return "left out" if col in ignored else "input"

        parts.append(f"<p>{len(columns)} columns in the file as it is now "
                     f"({esc(num(d.get('file_rows')))} rows):</p>")
        parts.append(table(("column", "read as", "role"), [(col, kind, role(col)) for col, kind in columns.items()]))
    elif d.get("path"):
        parts.append(note("The data file is not reachable from here, so its columns are not listed."))
    return "".join(parts)


def _describe_setting(name: str, value: Any) -> str:
    if isinstance(value, dict):
        if "choices" in value:
            return "searched: one of " + ", ".join(str(c) for c in value["choices"])
        if "low" in value and "high" in value:
            scale = " on a log scale" if value.get("log") else ""
            step = f", in steps of {value['step']}" if "step" in value else ""
            off = ", or off" if value.get("off") else ""
            return f"searched: from {value['low']} to {value['high']}{scale}{step}{off}"
        return ", ".join(f"{k} {v}" for k, v in value.items())
    return f"fixed at {value}"


SAMPLER_WORDS = {"tpe": "tree-structured Parzen estimator (TPE)", "random": "random sampling",
                 "grid": "a grid of every combination", "qmc": "quasi-Monte Carlo sequence",
                 "cmaes": "CMA-ES"}
PRUNER_WORDS = {"median": "a trial behind the median of earlier trials at the same epoch stops early",
                "none": "no trial is stopped early"}


def space_section(data: ReportData) -> str:
    spec = data.spec
    if not spec:
        return note("The search holds no spec text, so its search space cannot be shown.")
    rows = [(setting_label(k), _describe_setting(k, v)) for k, v in (spec.get("space") or {}).items()]
    parts = [table(("setting", "how it was set"), rows) if rows
             else "<p>No setting was listed: every setting had its default.</p>"]
    ev, se = spec.get("evaluation") or {}, spec.get("search") or {}
    repeats = ev.get("repeats", 1)
    parts.append(f"<p><b>Evaluation:</b> {esc(ev.get('folds', 5))}-fold cross-validation"
                 f"{esc(f' repeated {repeats} times' if repeats != 1 else '')} on the training rows, "
                 f"after {esc(num(100 * float(ev.get('holdout', 0.2)), 3))} % of the rows were locked "
                 f"away as the hold-out (seed {esc(ev.get('seed', 0))}); score: {esc(_metric(data))}.</p>")
    sampler = se.get("sampler", "tpe")
    pruner = se.get("pruner", "median")
    parts.append(f"<p><b>Search:</b> new settings drawn by {esc(SAMPLER_WORDS.get(sampler, sampler))}; "
                 f"{esc(PRUNER_WORDS.get(pruner, pruner + ' pruning'))}; "
                 f"{esc(se.get('workers', 1))} trial(s) at a time.</p>")
    parts.append(f"<p><b>Budget:</b> {esc(budget_sentence(data))}</p>")
    return "".join(parts)


def budget_sentence(data: ReportData) -> str:
    se = (data.spec or {}).get("search") or {}
    asked, ran = se.get("trials"), len(data.trials)
    minutes = f" (or {se['minutes']} minutes)" if se.get("minutes") else ""
    if not isinstance(asked, int):
        return f"{ran} trials ran{minutes}."
    if ran == asked:
        return f"{asked} trials{minutes}; all {ran} ran."
    if ran > asked:
        return (f"{ran} trials ran: the spec asks for {asked} per run{minutes}, and the search was "
                f"resumed or given more trials on the command line.")
    return (f"{ran} of the {asked} trials the spec asks for{minutes} ran (the search was stopped, "
            f"ran out of time, or is still going).")


# -- trials -------------------------------------------------------------------------------------

def trials_section(data: ReportData) -> str:
    c = counts(data.trials)
    metric = _metric(data)
    rows = [(STATE_WORDS[k], c[k]) for k in STATE_ORDER if c[k] or k in ("complete", "pruned", "failed")]
    parts = [f"<p>{esc(counts_sentence(c))}</p>",
             table(("state", "trials"), rows + [("total", sum(c.values()))], numeric=(1,))]
    parts.append(figure(plots.climb(data),
                        f"How far the best cross-validated {metric} climbed: each dot a finished trial, "
                        "the line the best so far, the milestones named by trial number; ticks at the "
                        "bottom mark the trials that stopped early or failed."))
    parts.append(figure(plots.good_ranges(data),
                        "Where good scores live: each searched setting's range as a grey bar, every "
                        "tried value as a tick, the span of the best quarter of the finished trials in "
                        "green, and the winner as a diamond."))
    parts.append(figure(plots.learning_band(data),
                        "Validation loss by epoch: the band holds 10-90 % of the trials at each epoch, "
                        "the thin line their median, the green line the winner."))
    importance = (data.winner or {}).get("importance") or {}
    values = importance.get("values") or {}
    if values:
        top = sorted(values.items(), key=lambda kv: -kv[1])[:3]
        parts.append(f"<p>The settings that moved the score most: "
                     f"{esc(', '.join(f'{setting_label(k)} ({100 * v:.0f} %)' for k, v in top))}"
                     f" of the explained variation.</p>")
    if importance.get("message"):
        parts.append(note(importance["message"]))
    best = plots.best_number(data)
    listed = data.trials[-MAX_ROWS:]
    table_rows = []
    for t in listed:
        state = STATE_WORDS.get(state_of(t), state_of(t)) + (" (winner)" if t.number == best else "")
        table_rows.append((t.number, state, t.value, t.cv_std, t.epochs_run, t.duration_s,
                           params_in_words(t.params), t.end_reason))
    parts.append("<h3>Every trial</h3>")
    if len(data.trials) > MAX_ROWS:
        parts.append(f"<p>The last {MAX_ROWS} of {len(data.trials)} are listed.</p>")
    parts.append(table(("trial", "state", f"CV {metric}", "spread over folds", "epochs", "seconds",
                        "settings tried", "why it ended"), table_rows, numeric=(0, 2, 3, 4, 5)))
    return "".join(parts)


# -- the winner under test ----------------------------------------------------------------------

def checks_section(data: ReportData) -> str:
    w = data.winner
    extra = "<ul>" + "".join(f"<li>{esc(t)}</li>" for t in MORE_CAUTIONS) + "</ul>"
    if not w:
        return note("The winner has not been refitted and checked yet (no winner.json).") + extra
    metric = metric_label(w.get("metric"))
    parts = [f"<p>Trial {esc(w.get('trial_number'))} won with cross-validated {esc(metric)} "
             f"{esc(num(w.get('cv_mean')))} ± {esc(num(w.get('cv_std')))} (mean ± sample standard "
             f"deviation over the folds). Refitted on all {esc(w.get('train_rows', '?'))} training rows, "
             f"it scored {esc(num(w.get('holdout_score')))} once on the {esc(w.get('holdout_rows', '?'))} "
             f"hold-out rows that no trial saw.</p>"]
    parts.append(figure(plots.fold_bars(data), f"The winner's {metric} on each fold, bars from zero; "
                        "the dashed line is their mean."))
    spread = w.get("seed_spread") or {}
    if spread.get("scores"):
        parts.append(figure(plots.seed_spread(data),
                            f"The winner's settings retrained with {len(spread['scores'])} seeds on the same "
                            f"folds: cross-validated {metric} {num(spread.get('mean'))} ± "
                            f"{num(spread.get('std'))}, range {num(spread.get('range'))}; the open "
                            "diamond is the hold-out score.", "fewer than two seeds"))
    elif maps.family_of(data):
        parts.append("<p>Seeds: how far the groups come back with other seeds is in the section "
                     "on the map and its groups above.</p>")
    else:
        parts.append("<p>Seed spread: not measured.</p>")
    runner = w.get("runner_up") or {}
    if runner.get("text") and runner["text"] not in (w.get("warnings") or []):
        parts.append(f"<p>{esc(runner['text'])}</p>")
    for fallback in w.get("refit_fallback") or []:
        parts.append(note(f"Trial {fallback.get('trial_number')} could not be refitted "
                          f"({fallback.get('reason')}); the next best was taken."))
    parts.append(f"<p>Settings of the winner: {esc(_settings_words(data, w.get('settings') or {}))}.</p>")
    parts.append(f'<p class="muted">Read from <code>{esc(data.winner_path)}</code>.</p>')
    return "".join(parts) + extra


def environment_section(data: ReportData) -> str:
    parts = []
    search_versions = data.attrs.get("versions") or {}
    if search_versions:
        parts.append("<p>The search ran with:</p>" + table(("package", "version"), search_versions.items()))
    winner_versions = (data.winner or {}).get("versions") or {}
    if winner_versions and winner_versions != search_versions:
        parts.append("<p>The winner was checked with:</p>" + table(("package", "version"), winner_versions.items()))
    parts.append("<p>This report was written on:</p>" + table(("", ""), data.machine.items()))
    parts.append(f"<p>Storage: <code>{esc(data.storage)}</code>, search name "
                 f"<code>{esc(data.study_name)}</code>.</p>")
    return "".join(parts)


def _settings_words(data: ReportData, settings) -> str:
    """A network's settings as one sentence; another family's as "label value" pairs from its
    settings table."""
    family = maps.family_of(data) or ((data.spec or {}).get("model") or {}).get("family")
    if not family or family == "network":
        return settings_in_words(settings)
    return family_settings_in_words(family, settings)


def sections_of(data: ReportData) -> tuple[str, ...]:
    return MAP_SECTIONS if maps.family_of(data) else SECTIONS


def render_html(data: ReportData) -> str:
    build = {"summary": summary_section, "groups": maps.groups_section, "data": data_section,
             "space": space_section, "trials": trials_section, "checks": checks_section,
             "environment": environment_section}
    titles = dict(TITLES, groups=maps.groups_title(data))
    sections = "".join(f'<section id="{k}"><h2>{esc(titles[k])}</h2>{build[k](data)}</section>'
                       for k in sections_of(data))
    return (f'<!DOCTYPE html>\n<html lang="en"><head><meta charset="utf-8">'
            f'<meta name="viewport" content="width=device-width, initial-scale=1">'
            f"<title>labbench report: {esc(data.study_name)}</title><style>{CSS}</style></head>"
            f"<body><h1>labbench report: {esc(data.study_name)}</h1>{sections}</body></html>\n")


def report_file_name(data: ReportData) -> str:
    """``<search name>_report.html``, the name made safe for a file name (labbench.fileio)."""
    from labbench.fileio import safe_file_name

    return f"{safe_file_name(data.study_name)}_report.html"


def default_report_path(data: ReportData) -> Path:
    folder = Path(data.out_dir) if data.out_dir else Path.cwd()
    return folder / report_file_name(data)


def report_path(data: ReportData, out_path: str | os.PathLike | None) -> Path:
    """``-o`` (a folder gets the default file name inside it), else the default place; never an
    input of the search (its spec, its data file, its database)."""
    from labbench.fileio import check_output

    target = Path(out_path) if out_path is not None else default_report_path(data)
    if target.is_dir():
        target = target / report_file_name(data)
    inputs = [("spec file", data.spec_path), ("data file", data.data.get("path"))]
    url = data.storage or ""
    if url.startswith("sqlite") and "///" in url:
        inputs.append(("search's database", url.split("///", 1)[1]))
    return check_output(target, inputs=inputs, what="report file")


def write_report(source: Any, out_path: str | os.PathLike | None = None, *, study: str | None = None) -> Path:
    """Write the report of a search; ``source``: a spec path, a database URL, or an Optuna study.

    Default place: ``<search name>_report.html`` in the search's output folder (where
    ``labbench run`` writes winner.json). Returns the path written.
    """
    from labbench.fileio import write_text
    from labbench.search.storage import mask_password_text

    data = collect(source, study)
    target = report_path(data, out_path)
    write_text(target, mask_password_text(render_html(data)))
    log.info("report written to %s", target)
    return target

