"""The report's section about a map or group winner (self-organising map, competitive learning,
neural gas, Hebbian features): what it was tuned for, its held-out measures, whether its groups
come back with other seeds, the groups' sizes and profiles, and for a self-organising map its
U-matrix.

What it reads: the saved winner (``model.npz`` beside ``winner.json``, a
``labbench.model.TrainedModel`` whose ``scores`` hold ``holdout_measures`` and ``stability`` as
MAPS.md describes) and the rows of the data file.

Group profiles are computed from ROWS: every row of the data file (training and hold-out rows
alike) is placed by the saved model, and each group gets the mean of each numeric column (and the
most frequent value of each categorical column) over its rows, in the columns' own units. These
are the rows the groups are about, and means of real rows need no inverse of the scaling. Only
when the data file cannot be read are the profiles taken from the prototypes instead (the mean of
a group's unit prototypes through the inverse of the numeric scaling, the category with the
largest one-hot value), and the page says so.
"""

from __future__ import annotations

import html
from typing import Any

import numpy as np
import pandas as pd

from labbench.export.report_map_plots import u_matrix_picture
from labbench.export.report_words import metric_label, num
from labbench.families.maps_export import is_prototype

MAP_FAMILIES = ("som", "competitive", "neural_gas", "hebbian")
FAMILY_WORDS = {"som": "a self-organising map (Kohonen)",
                "competitive": "competitive learning (winner takes all)",
                "neural_gas": "neural gas (winner takes most; Martinetz et al. 1993)",
                "hebbian": "Hebbian features (Oja's rule / Sanger's generalised Hebbian algorithm)"}
MEASURES = (("quantisation_error", "quantisation error",
             "mean distance of a held-out row to its best-matching unit, in the scaled inputs"),
            ("topographic_error", "topographic error",
             "share of held-out rows whose two best units are not neighbours on the grid"),
            ("reconstruction_error", "reconstruction error",
             "share of the held-out rows' energy the components do not rebuild"),
            ("relative_error", "relative error",
             "quantisation error as a share of one prototype at the training mean"),
            ("units", "units", "prototypes (or components) the model has"))
MAX_PROFILE_COLUMNS = 40
MAX_GROUPS_SHOWN = 16
MAX_SIZE_ROWS = 40            # groups listed in the sizes table


def esc(value: Any) -> str:
    return html.escape("" if value is None else str(value), quote=True)


def family_of(data) -> str | None:
    """The map family of a report's search, or None for any other search."""
    candidates = [((data.spec or {}).get("model") or {}).get("family"),
                  (data.winner or {}).get("family"), getattr(data.model, "family", None)]
    for name in candidates:
        if name in MAP_FAMILIES:
            return name
    if (data.attrs or {}).get("task") == "unsupervised":
        return getattr(data.model, "family", None) or "som"
    return None


def family_words(name: str | None) -> str:
    return FAMILY_WORDS.get(name or "", f"the {name} family")


# -- numbers --------------------------------------------------------------------------------------

def group_sizes(record, groups: np.ndarray | None) -> pd.DataFrame:
    """Per group: units, rows (when rows were placed) and their share."""
    g = record.n_groups
    out = pd.DataFrame({"group": np.arange(g),
                        "units": np.bincount(record.unit_group, minlength=g)})
    if groups is not None:
        rows = np.bincount(np.asarray(groups, dtype=np.int64), minlength=g)
        out["rows"] = rows
        out["share"] = rows / max(1, rows.sum())
    return out


def profiles_from_rows(model, frame: pd.DataFrame, groups: np.ndarray) -> pd.DataFrame:
    """Column x group: numeric means (missing values left out), categorical most frequent value
    with its share, over the rows of each group; in the columns' own units."""
    from labbench.data.roles import as_float, category_text

    g = model.record.n_groups
    table = {}
    for col in model.features:
        cells = []
        if model.kinds[col] == "numeric":
            values = as_float(frame[col], col, where="the data")
            for j in range(g):
                v = values[groups == j]
                v = v[np.isfinite(v)]
                cells.append(num(float(v.mean())) if v.size else "-")
        else:
            text = category_text(frame[col])
            for j in range(g):
                v = pd.Series(text[groups == j]).dropna()
                if v.empty:
                    cells.append("-")
                    continue
                counts = v.value_counts()
                cells.append(f"{counts.index[0]} ({100 * counts.iloc[0] / len(v):.0f} %)")
        table[col] = cells
    return pd.DataFrame(table, index=[f"group {j}" for j in range(g)]).T


def profiles_from_prototypes(model) -> pd.DataFrame:
    """Column x group from the prototypes (when no rows can be read): each group's mean unit
    prototype, numeric columns back through the inverse of the scaling (x = x' * scale + center),
    a categorical column's category with the largest one-hot value."""
    record, state = model.record, model.preprocessor.to_state()
    g = record.n_groups
    means = np.vstack([record.prototypes[record.unit_group == j].mean(axis=0) for j in range(g)])
    table, at = {}, 0
    for i, col in enumerate(state["numeric"]):
        values = means[:, i] * state["scale"][i] + state["center"][i]
        table[col] = [num(float(v)) for v in values]
    at = len(state["numeric"])
    for col, cats in zip(state["categorical"], state["categories"]):
        block = means[:, at:at + len(cats)]
        at += len(cats)
        table[col] = [cats[int(np.argmax(b))] if len(cats) else "-" for b in block]
    ordered = {c: table[c] for c in model.features if c in table}
    return pd.DataFrame(ordered, index=[f"group {j}" for j in range(g)]).T


def place_rows(model, frame: pd.DataFrame | None) -> tuple[pd.DataFrame | None, str | None]:
    """(the model's predict table of the rows, or None, and why not)."""
    if frame is None:
        return None, "the data file cannot be read from here"
    missing = [c for c in model.features if c not in frame.columns]
    if missing:
        return None, f"the data file lacks the column(s) {', '.join(missing)}"
    try:
        return model.predict(frame), None
    except Exception as exc:          # a changed file: say so, draw from the prototypes
        return None, f"its rows cannot be placed ({exc})"


# -- words ----------------------------------------------------------------------------------------

def stability_words(stability: dict | None) -> str:
    """The seed-stability result in plain words (MAPS.md scores["stability"])."""
    if not stability:
        return ("Stability across seeds: not measured, so nobody can yet say whether another seed "
                "would give the same groups.")
    seeds = stability.get("seeds") or []
    parts = [f"The winning settings were retrained with {len(seeds)} seeds"
             + (f" ({', '.join(str(s) for s in seeds)})" if seeds else "") + "."]
    if stability.get("ari_mean") is not None:
        parts.append(f"Between every pair of seeds the rows' groups agreed with an adjusted Rand "
                     f"index of {num(stability['ari_mean'], 3)} on average (lowest pair "
                     f"{num(stability.get('ari_min'), 3)}; 1 means the same groups, 0 no more "
                     f"agreement than chance).")
    if stability.get("layout_mean") is not None:
        parts.append(f"The map's layout agreed with a correlation of "
                     f"{num(stability['layout_mean'], 3)} on average (lowest "
                     f"{num(stability.get('layout_min'), 3)}; 1 means the same layout up to "
                     f"rotation or mirroring).")
    verdict = stability.get("verdict")
    if verdict:
        parts.append(f"Verdict: {verdict} (index at least 0.9 reproducible, 0.7 to 0.9 mostly "
                     f"reproducible, below 0.7 not: thresholds of common practice).")
    if stability.get("message"):
        parts.append(str(stability["message"]))
    return " ".join(parts)


def measures_rows(measures: dict | None) -> list[tuple[str, str, str]]:
    rows = []
    for key, label, what in MEASURES:
        value = (measures or {}).get(key)
        if value is not None:
            rows.append((label, num(value), what))
    return rows


# -- the section ----------------------------------------------------------------------------------

def _table(header, rows, numeric=()) -> str:
    numeric = set(numeric)
    head = "".join(f"<th>{esc(h)}</th>" for h in header)
    body = "".join("<tr>" + "".join(f'<td class="num">{esc(c)}</td>' if i in numeric else
                                    f"<td>{esc(c)}</td>" for i, c in enumerate(row)) + "</tr>"
                   for row in rows)
    return f"<table><tr>{head}</tr>{body}</table>"


def _note(text: str) -> str:
    return f'<p class="note">{esc(text)}</p>'


def groups_title(data) -> str:
    return "The features" if family_of(data) == "hebbian" else "The map and its groups"


def winner_scores(data) -> dict:
    """The winner's scores: the saved model's (MAPS.md), each missing one from winner.json."""
    scores = dict(getattr(data.model, "scores", None) or {})
    for key in ("cv_mean", "cv_std", "holdout_score", "holdout_measures", "stability"):
        if scores.get(key) is None and (data.winner or {}).get(key) is not None:
            scores[key] = data.winner[key]
    return scores


def groups_section(data) -> str:
    """HTML of the map winner's section (see the module docstring)."""
    model, family = data.model, family_of(data)
    scores = winner_scores(data)
    metric = metric_label(getattr(model, "metric", None) or (data.winner or {}).get("metric"))
    parts = [f"<p>The winner is {esc(family_words(family))}, tuned on cross-validated "
             f"{esc(metric)} (lower is better): {esc(num(scores.get('cv_mean')))} ± "
             f"{esc(num(scores.get('cv_std')))} over the folds, {esc(num(scores.get('holdout_score')))} "
             f"once on the hold-out rows. Every measure is computed on rows the model was not "
             f"trained on.</p>"]
    if (data.winner or {}).get("picked"):
        parts.append("<p>This is the trial you picked (for example from the trade-off front), "
                     "not necessarily the one with the best score.</p>")
    measures = measures_rows(scores.get("holdout_measures"))
    if measures:
        parts.append("<h3>Held-out measures</h3>")
        parts.append(_table(("measure", "hold-out", "what it is"), measures, numeric=(1,)))
    parts.append("<h3>Stability across seeds</h3>")
    parts.append(f"<p>{esc(stability_words(scores.get('stability')))}</p>")
    if model is None:
        parts.append(_note("The saved winner (model.npz beside winner.json) was not found, so its "
                           "groups cannot be shown; labbench run writes it when the search ends."))
        return "".join(parts)
    record = model.record
    if not is_prototype(record):
        parts.append(_components(model))
        return "".join(parts)
    frame = getattr(data, "rows", None)
    placed, why = place_rows(model, frame)
    groups = None if placed is None else placed["group"].to_numpy()
    sizes = group_sizes(record, groups)
    parts.append("<h3>Group sizes</h3>")
    if groups is not None:
        parts.append(f"<p>Every one of the {len(groups)} rows of the data file (training and "
                     f"hold-out rows) placed by the saved model; groups and units are numbered "
                     f"from 0, as in labbench predict.</p>")
        rows = [(int(r.group), int(r.units), int(r.rows), f"{100 * r.share:.1f} %")
                for r in sizes.itertuples()][:MAX_SIZE_ROWS]
        if len(sizes) > MAX_SIZE_ROWS:
            parts.append(f"<p>The first {MAX_SIZE_ROWS} of {len(sizes)} groups are listed.</p>")
        parts.append(_table(("group", "units", "rows", "share of rows"), rows, numeric=(0, 1, 2, 3)))
    else:
        parts.append(_note(f"Rows per group not counted: {why}."))
        parts.append(_table(("group", "units"), [(int(r.group), int(r.units))
                                                 for r in sizes.itertuples()][:MAX_SIZE_ROWS],
                            numeric=(0, 1)))
    parts.append("<h3>Group profiles</h3>")
    if groups is not None:
        profile = profiles_from_rows(model, frame, groups)
        parts.append("<p>Mean of each numeric column over each group's rows, in the column's own "
                     "units (missing values left out); for a category column its most frequent "
                     "value and that value's share of the group.</p>")
        label = _label_column(data)
        if label and label in frame.columns:
            values = frame[label].astype("string")
            tops = []
            for j in range(record.n_groups):
                v = values[groups == j].dropna()
                counts = v.value_counts()
                tops.append(f"{counts.index[0]} ({100 * counts.iloc[0] / len(v):.0f} %)" if len(v) else "-")
            profile.loc[f"{label} (label, not used in training)"] = tops
    else:
        profile = profiles_from_prototypes(model)
        parts.append(_note("These profiles come from the prototypes, not from rows: the mean "
                           "prototype of each group's units through the inverse of the numeric "
                           "scaling; for a category column, the category with the largest weight."))
    shown = profile.iloc[:MAX_PROFILE_COLUMNS, :MAX_GROUPS_SHOWN]
    if shown.shape != profile.shape:
        parts.append(f"<p>The first {shown.shape[0]} columns and {shown.shape[1]} groups are shown.</p>")
    parts.append(_table(["column"] + list(shown.columns),
                        [[idx] + list(row) for idx, row in zip(shown.index, shown.to_numpy())],
                        numeric=range(1, shown.shape[1] + 1)))
    if record.shape is not None:
        hits = None if placed is None else np.bincount(placed["unit"].to_numpy(), minlength=record.n_units)
        caption = ("U-matrix (Ultsch 1990): each cell is one unit of the "
                   f"{record.shape[0]} x {record.shape[1]} {record.topology} map, shaded by the mean "
                   "distance of its prototype to those of its grid neighbours; dark cells separate, "
                   "light cells sit inside a group. "
                   + ("Green lines are the group borders" if record.n_groups < record.n_units else
                      "Every unit is its own group (the map's units were not merged)")
                   + ("; the number in a cell is how many rows of the data file it holds." if hits is not None else "."))
        parts.append(f"<figure>{u_matrix_picture(record, hits)}<figcaption>{esc(caption)}"
                     f"</figcaption></figure>")
    else:
        parts.append(_note("Competitive learning and neural gas have no grid, so there is no "
                           "U-matrix: every unit is its own group."))
    return "".join(parts)


def _label_column(data) -> str | None:
    label = ((data.spec or {}).get("data") or {}).get("label") or (data.winner or {}).get("label")
    return str(label) if label else None


def _components(model) -> str:
    record, names = model.record, model.preprocessor.feature_names_
    W = record.components
    order = np.argsort(-np.abs(W).max(axis=0))[:MAX_PROFILE_COLUMNS]
    rows = [[names[i]] + [num(float(W[j, i]), 3) for j in range(W.shape[0])] for i in order]
    return ("<h3>The components</h3><p>The weight of each scaled input column in each learned "
            "component (rows ordered by their largest weight); a row's feature is its projection "
            f"on the component ({esc(record.rule)} rule).</p>"
            + _table(["input"] + [f"component {j + 1}" for j in range(W.shape[0])], rows,
                     numeric=range(1, W.shape[0] + 1)))
