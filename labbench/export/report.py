"""The HTML report of a search: one self-contained file (inline CSS, images as base64 PNG data
URLs, no script, nothing fetched from a network).

Sections (each an ``<section id=...>``): job, data, space, trials, winner, environment, cautions.
Pictures are PNG files drawn by labbench itself (``labbench.export.charts``: numpy + zlib, no
plotting library and no Qt), so the report looks the same wherever it is opened, can be mailed
or archived as one file, and the core stays free of GUI dependencies.
"""

from __future__ import annotations

import base64
import html
import logging
import os
from pathlib import Path
from typing import Any, Iterable

from labbench.export.bundle import CAUTION
from labbench.export.report_data import ReportData, collect
from labbench.export import report_plots as plots
from labbench.numbers import number, setting
from labbench.search import states
from labbench.search.commands import param_label

log = logging.getLogger("labbench.export.report")

SECTIONS = ("job", "data", "space", "trials", "winner", "environment", "cautions")
_CSS = """
body{font-family:system-ui,-apple-system,"Segoe UI",sans-serif;max-width:960px;margin:2em auto;
padding:0 1em;color:#222;line-height:1.45}
h1{font-size:1.5em;margin-bottom:.2em}h2{border-bottom:1px solid #ccc;padding-bottom:.2em;margin-top:2em}
table{border-collapse:collapse;margin:.5em 0}td,th{border:1px solid #ddd;padding:.25em .6em;text-align:left;
vertical-align:top}th{background:#f3f3f3}td.num{text-align:right;font-variant-numeric:tabular-nums}
figure{margin:1em 0}figure img{max-width:100%;border:1px solid #eee}figcaption{color:#555;font-size:.9em}
.note{background:#fff6e0;border-left:4px solid #d99a1e;padding:.4em .8em;margin:.5em 0}
.job{font-size:1.1em}code{background:#f4f4f4;padding:0 .2em}
"""


def esc(value: Any) -> str:
    return html.escape("" if value is None else str(value), quote=True)


def num(value: Any, digits: int = 4) -> str:
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        return esc(value if value is not None else "n/a")
    if isinstance(value, int):
        return str(value)
    return number(value, digits)           # the one number formatting (labbench.numbers)


def table(header: Iterable[str], rows: Iterable[Iterable[Any]], numeric: Iterable[int] = ()) -> str:
    numeric = set(numeric)
    head = "".join(f"<th>{esc(h)}</th>" for h in header)
    body = []
    for row in rows:
        cells = [f'<td class="num">{num(c)}</td>' if i in numeric else f"<td>{esc(c)}</td>"
                 for i, c in enumerate(row)]
        body.append("<tr>" + "".join(cells) + "</tr>")
    return f"<table><tr>{head}</tr>{''.join(body)}</table>"


def figure(png: bytes | None, alt: str, caption: str) -> str:
    if png is None:
        return f'<p class="note">{esc(caption)}: nothing to draw yet.</p>'
    src = "data:image/png;base64," + base64.b64encode(png).decode("ascii")
    return f'<figure><img src="{src}" alt="{esc(alt)}"><figcaption>{esc(caption)}</figcaption></figure>'


def note(text: str) -> str:
    return f'<p class="note">{esc(text)}</p>'


# -- sections -----------------------------------------------------------------------------------

def _target(data: ReportData) -> str:
    return (data.spec.get("data") or {}).get("target") or (data.winner or {}).get("target") or "?"


def job_line(data: ReportData) -> str:
    counts = _counts(data)
    path = data.data.get("path") or (data.spec.get("data") or {}).get("path") or "the data"
    metric = data.attrs.get("metric") or "its metric"
    return (f"Search '{data.study_name}': predict {_target(data)} ({data.data.get('task') or '?'}) "
            f"from {Path(str(path)).name} with a small neural network; {len(data.trials)} trial(s), "
            f"{counts['complete']} {states.WORDS['complete']}, ranked by cross-validated {metric} ({data.direction}).")


def _counts(data: ReportData) -> dict[str, int]:
    return states.count(data.trials)


def data_section(data: ReportData) -> str:
    d = data.data
    train, hold = d.get("train_rows"), d.get("holdout_rows")
    total = train + hold if isinstance(train, int) and isinstance(hold, int) else None
    rows = [("file", d.get("path") or "unknown"), ("target", _target(data)), ("task", d.get("task")),
            ("rows used", f"{num(total)} ({num(train)} for the search's folds, {num(hold)} locked hold-out)"),
            ("classes", ", ".join(map(str, d["classes"])) if d.get("classes") else "-"),
            ("fingerprint (SHA-256 of the file)", d.get("sha256") or "unknown")]
    parts = [table(("", ""), rows)]
    if d.get("changed"):
        parts.append(note("The data file has changed since the search ran (its fingerprint differs): "
                          "the numbers below describe the file as it was then."))
    columns = d.get("columns")
    if columns:
        parts.append(f"<p>{len(columns)} column(s) in the file as it is now ({num(d.get('file_rows'))} rows):</p>")
        spec_data = data.spec.get("data") or {}
        ignored = set(spec_data.get("ignore") or [])

        def role(col: str) -> str:
            if col == spec_data.get("target"):
                return "target"
            return "ignored" if col in ignored else "input"

        parts.append(table(("column", "kind as read", "role"),
                           [(col, kind, role(col)) for col, kind in columns.items()]))
    elif d.get("path"):
        parts.append(note("The data file is not reachable from here, so its columns are not listed."))
    return "".join(parts)


def _describe_setting(value: Any) -> str:
    if isinstance(value, dict):
        if "choices" in value:
            return "one of " + ", ".join(str(c) for c in value["choices"])
        if "low" in value and "high" in value:
            scale = " on a log scale" if value.get("log") else ""
            step = f", step {value['step']}" if "step" in value else ""
            return f"from {value['low']} to {value['high']}{scale}{step}"
        return ", ".join(f"{k} = {v}" for k, v in value.items())
    return f"fixed at {value}"


def space_section(data: ReportData) -> str:
    spec = data.spec
    if not spec:
        return note("The study holds no spec text, so its search space cannot be shown.")
    searched = set(data.attrs.get("searched") or [])
    space_rows = [(k, _describe_setting(v)) for k, v in (spec.get("space") or {}).items()]
    parts = [table(("setting", "values tried"), space_rows) if space_rows
             else "<p>No [space] entries: every setting had its default.</p>"]
    ev, se = spec.get("evaluation") or {}, spec.get("search") or {}
    parts.append(f"<p>Evaluation: {esc(ev.get('folds', 5))}-fold cross-validation"
                 f"{esc(' × ' + str(ev['repeats']) + ' repeats' if ev.get('repeats', 1) != 1 else '')}, "
                 f"hold-out fraction {esc(ev.get('holdout', 0.2))}, seed {esc(ev.get('seed', 0))}, "
                 f"metric {esc(data.attrs.get('metric'))}. Search: sampler {esc(se.get('sampler', 'tpe'))}, "
                 f"pruner {esc(se.get('pruner', 'median'))}, {esc(se.get('workers', 1))} worker(s), "
                 f"budget {esc(se.get('trials', '?'))} trial(s)"
                 f"{esc(', ' + str(se['minutes']) + ' minutes' if se.get('minutes') else '')}.</p>")
    if searched:
        parts.append(f"<p>Searched parameters: {esc(', '.join(sorted(map(param_label, searched))))}.</p>")
    return "".join(parts)


def trials_section(data: ReportData) -> str:
    counts = _counts(data)
    parts = [table(("state", "trials"), [(states.WORDS[k], v) for k, v in counts.items()], numeric=(1,))]
    parts.append(figure(plots.score_by_trial(data), "score by trial",
                        f"Cross-validated {plots.metric_label(data, long=True)} of each complete trial, and the best so far."))
    parts.append(figure(plots.learning_curves(data), "learning curves",
                        "Validation loss by epoch (mean over the folds) of each trial; the winner in bold."))
    importance = (data.winner or {}).get("importance")
    if importance is None:
        from labbench.search.insight import param_importance

        importance = _importance_from_trials(data, param_importance)
    chart = plots.importance_chart(importance)
    if chart is not None:
        parts.append(figure(chart, "parameter importance",
                            f"How much of the score's variation each searched setting explains "
                            f"({importance.get('method')}, {importance.get('n_complete')} complete trials)."))
    if importance and importance.get("message"):
        parts.append(note(importance["message"]))
    for name in plots.searched_names(data):
        label = param_label(name)
        parts.append(figure(plots.setting_chart(data, name), f"{label} against the score",
                            f"Score of each complete trial against {label}."))
    best = plots.best_number(data)
    rows = []
    for t in data.trials[-300:]:
        params = ", ".join(f"{param_label(k)}={setting(v)}" for k, v in t.params.items())
        rows.append((t.number, states.word(t.state) + (" (winner)" if t.number == best else ""), t.value,
                     t.cv_std, t.epochs_run, t.duration_s, params, t.end_reason))
    parts.append("<h3>All trials</h3>" + ("<p>The last 300 are listed.</p>" if len(data.trials) > 300 else ""))
    parts.append(table(("trial", "state", "CV mean", "CV std", "epochs", "seconds", "parameters", "why it ended"),
                       rows, numeric=(0, 2, 3, 4, 5)))
    return "".join(parts)


def _importance_from_trials(data: ReportData, param_importance) -> dict[str, Any] | None:
    if data.study is None:
        return {"values": {}, "message": "Parameter importance is computed when the winner is "
                "checked (labbench run); no winner.json was found for this search."}
    return param_importance(data.study)


def winner_section(data: ReportData) -> str:
    w = data.winner
    if not w:
        best = plots.best_number(data)
        text = ("No winner.json was found in the output folder, so the refit, the hold-out score and "
                "its seed spread are not known yet; `labbench run` writes them when the search ends.")
        if best is not None:
            t = next(t for t in data.trials if t.number == best)
            text += f" The best complete trial so far is trial {best} with CV {num(t.value)} ± {num(t.cv_std)}."
        return note(text)
    metric = w.get("metric")
    parts = [f"<p>Trial {esc(w.get('trial_number'))} won: cross-validated {esc(metric)} "
             f"<b>{num(w.get('cv_mean'))} ± {num(w.get('cv_std'))}</b> (mean ± sample standard "
             f"deviation over the folds); hold-out {esc(metric)} <b>{num(w.get('holdout_score'))}</b> "
             f"on {esc(w.get('holdout_rows'))} rows never seen by any trial.</p>"]
    settings = w.get("settings") or {}
    parts.append(table(("setting", "value"), [(k, v) for k, v in settings.items()]))
    folds = w.get("fold_scores") or []
    parts.append(table(["fold"] + [str(i + 1) for i in range(len(folds))], [[metric] + list(folds)],
                       numeric=range(1, len(folds) + 1)))
    cmp_ = w.get("cv_vs_holdout") or {}
    if cmp_.get("text"):
        parts.append(f"<p>{esc(cmp_['text'])}</p>")
    spread = w.get("seed_spread")
    if spread and spread.get("scores"):
        parts.append(f"<p>Seed spread: retrained with {len(spread['scores'])} seeds, CV {esc(metric)} "
                     f"{num(spread.get('mean'))} ± {num(spread.get('std'))} (range {num(spread.get('range'))}).</p>")
        parts.append(table(("seed", "CV score"), zip(spread.get("seeds") or range(len(spread["scores"])),
                                                     spread["scores"]), numeric=(0, 1)))
    else:
        parts.append("<p>Seed spread: not measured.</p>")
    runner = w.get("runner_up")
    if runner and runner.get("text") and runner["text"] not in (w.get("warnings") or []):
        parts.append(f"<p>{esc(runner['text'])}</p>")
    for warning in w.get("warnings") or []:
        parts.append(note(warning))
    parts.append(f"<p>Read from <code>{esc(data.winner_path)}</code>.</p>")
    return "".join(parts)


def environment_section(data: ReportData) -> str:
    parts = []
    search_versions = data.attrs.get("versions") or {}
    if search_versions:
        parts.append("<p>The search ran with:</p>" + table(("package", "version"), search_versions.items()))
    winner_versions = (data.winner or {}).get("versions") or {}
    if winner_versions and winner_versions != search_versions:
        parts.append("<p>The winner was checked with:</p>" + table(("package", "version"), winner_versions.items()))
    parts.append("<p>This report was written on:</p>" + table(("", ""), data.machine.items()))
    parts.append(f"<p>Storage: <code>{esc(data.storage)}</code>, study <code>{esc(data.study_name)}</code>.</p>")
    return "".join(parts)


def cautions_section(data: ReportData) -> str:
    items = [CAUTION,
             "The hold-out score is one draw of a limited number of rows; its own uncertainty can be "
             "as large as the differences between trials.",
             "The more trials a search runs on a small data set, the more its best CV score flatters "
             "the winner (it was picked because it did well on these folds)."]
    return "<ul>" + "".join(f"<li>{esc(t)}</li>" for t in items) + "</ul>"


def render_html(data: ReportData) -> str:
    body = {"job": f'<p class="job">{esc(job_line(data))}</p>', "data": data_section(data),
            "space": space_section(data), "trials": trials_section(data),
            "winner": winner_section(data), "environment": environment_section(data),
            "cautions": cautions_section(data)}
    titles = {"job": "The job", "data": "The data", "space": "The search space", "trials": "The trials",
              "winner": "The winner and how sure we are", "environment": "Environment",
              "cautions": "Cautions"}
    sections = "".join(f'<section id="{k}"><h2>{titles[k]}</h2>{body[k]}</section>' for k in SECTIONS)
    return (f'<!DOCTYPE html>\n<html lang="en"><head><meta charset="utf-8">'
            f'<meta name="viewport" content="width=device-width, initial-scale=1">'
            f"<title>labbench report: {esc(data.study_name)}</title><style>{_CSS}</style></head>"
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

