"""A first look at each column before a search: a short profile, and the traps a new table hides.

Qt-free; the window's data page shows what this returns, and the rules are the command line's:

* **id-like / constant / empty**: ``labbench.data.screen`` (``id_reason`` and ``screen_columns``,
  the functions ``load_table`` uses), so the window and ``labbench run`` agree on every column.
* **stray text**: ``labbench.data.roles.stray_cells`` (what ``load_table`` stops on), with the
  same marker words its message proposes.
* **a quantity read as classes**: the target is numeric and ``infer_task`` calls it multiclass.
* **leak suspect** (a single column that predicts the target almost perfectly; rule of this
  module, common practice for a first screen, not a proof):
  - regression target, numeric column: ``|Spearman rank correlation| >= LEAK_LEVEL`` (0.98);
  - otherwise a one-column rule learnt on the even rows and scored on the odd ones (a two-fold
    check, so an id column cannot learn its rows by heart): for classes, the majority class of
    each value (a number cut into up to ``LEAK_BINS`` quantile bins first) and balanced accuracy
    ``>= LEAK_LEVEL``; for a regression target and a categorical column, the mean target of each
    value and the Spearman correlation of that prediction ``>= LEAK_LEVEL``.

Profiles judge at most ``PROFILE_ROWS`` rows (an even sample when the table is larger).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Iterable, Sequence

import numpy as np
import pandas as pd

from labbench.data.roles import infer_task, is_numeric, stray_cells
from labbench.data.screen import id_reason, screen_columns

LEAK_LEVEL = 0.98
LEAK_BINS = 32
HIST_BINS = 12
PROFILE_ROWS = 100_000


@dataclass(frozen=True)
class ColumnProfile:
    name: str
    kind: str                          # "numeric" | "categorical"
    missing_share: float               # share of empty cells, 0..1
    distinct: int                      # different non-missing values
    counts: tuple[int, ...] = ()       # histogram bars (numbers) or top values' counts (text)
    labels: tuple[str, ...] = ()       # bar labels: bin edges "a–b" or the values
    flags: tuple[str, ...] = ()        # "id-like", "constant", "empty", "leak suspect"
    why: tuple[str, ...] = ()          # one phrase per flag, the reason


@dataclass(frozen=True)
class Remedy:
    label: str                         # button text, the user's words
    change: dict[str, Any]             # what it does to the [data] section (see ``apply_remedy``)


@dataclass(frozen=True)
class Trap:
    column: str
    kind: str                          # "id-like" | "stray text" | "quantity as classes" | "leak"
    reason: str                        # one sentence in the user's words
    remedies: tuple[Remedy, ...] = field(default_factory=tuple)


def _sample(frame: pd.DataFrame) -> pd.DataFrame:
    if len(frame) <= PROFILE_ROWS:
        return frame
    step = int(np.ceil(len(frame) / PROFILE_ROWS))
    return frame.iloc[::step]


def histogram(series: pd.Series, kind: str, bins: int = HIST_BINS) -> tuple[tuple[int, ...], tuple[str, ...]]:
    """Bars for a small picture: numpy's histogram of the numbers, or the most frequent values."""
    values = series.dropna()
    if not len(values):
        return (), ()
    if kind == "numeric" and is_numeric(values):
        v = values.to_numpy(dtype=np.float64)
        v = v[np.isfinite(v)]
        if not len(v):
            return (), ()
        counts, edges = np.histogram(v, bins=min(bins, max(1, len(np.unique(v)))))
        labels = tuple(f"{edges[i]:.4g}–{edges[i + 1]:.4g}" for i in range(len(counts)))
        return tuple(int(c) for c in counts), labels
    top = values.astype(str).value_counts().head(bins)
    return tuple(int(c) for c in top.to_numpy()), tuple(str(i) for i in top.index)


def spearman(x: np.ndarray, y: np.ndarray) -> float:
    """Spearman's rank correlation (average ranks for ties); nan when either side is constant."""
    rx = pd.Series(x).rank().to_numpy()
    ry = pd.Series(y).rank().to_numpy()
    if np.std(rx) == 0 or np.std(ry) == 0:
        return float("nan")
    return float(np.corrcoef(rx, ry)[0, 1])


def balanced_accuracy(y_true: np.ndarray, y_pred: np.ndarray) -> float:
    """The mean of the per-class recalls (classes of ``y_true``)."""
    recalls = [float(np.mean(y_pred[y_true == c] == c)) for c in np.unique(y_true)]
    return float(np.mean(recalls))


def _codes(series: pd.Series, kind: str) -> np.ndarray:
    """One code per row for a one-column rule: quantile bins of a number, or the value itself."""
    if kind == "numeric" and is_numeric(series):
        v = series.to_numpy(dtype=np.float64, na_value=np.nan)
        ranked = pd.Series(v).rank(method="dense")
        if ranked.max() > LEAK_BINS:
            binned = pd.qcut(pd.Series(v), LEAK_BINS, labels=False, duplicates="drop")
            return binned.fillna(-1).to_numpy(dtype=np.int64)
        return ranked.fillna(-1).to_numpy(dtype=np.int64)
    return pd.factorize(series.astype(object).where(series.notna(), "\0missing"))[0]


def leak_score(x: pd.Series, y: pd.Series, kind: str, task: str) -> tuple[float, str]:
    """(score, what it is) for the leak rule of the module text; nan when it cannot be judged."""
    keep = y.notna().to_numpy()
    x, y = x[keep].reset_index(drop=True), y[keep].reset_index(drop=True)
    if len(y) < 20:
        return float("nan"), ""
    if task == "regression" and kind == "numeric" and is_numeric(x):
        both = x.notna().to_numpy()
        if both.sum() < 20:
            return float("nan"), ""
        r = spearman(x.to_numpy(dtype=np.float64, na_value=np.nan)[both],
                     pd.to_numeric(y, errors="coerce").to_numpy(dtype=np.float64)[both])
        return abs(r), "rank correlation with the target"
    codes = _codes(x, kind)
    learn = np.arange(len(y)) % 2 == 0
    test = ~learn
    if task == "regression":
        target = pd.to_numeric(y, errors="coerce").to_numpy(dtype=np.float64)
        means = pd.Series(target[learn]).groupby(codes[learn]).mean()
        pred = pd.Series(codes[test]).map(means).fillna(float(np.nanmean(target[learn]))).to_numpy()
        r = spearman(pred, target[test])
        return (abs(r) if np.isfinite(r) else float("nan")), "rank correlation of a per-value mean"
    labels = y.astype(str).to_numpy()
    table = pd.DataFrame({"c": codes[learn], "y": labels[learn]})
    majority = table.groupby("c")["y"].agg(lambda s: s.value_counts().index[0])
    overall = pd.Series(labels[learn]).value_counts().index[0]
    pred = pd.Series(codes[test]).map(majority).fillna(overall).to_numpy()
    return balanced_accuracy(labels[test], pred), "balanced accuracy of a one-column rule"


def profile_columns(frame: pd.DataFrame, kinds: dict[str, str], target: str | None,
                    task: str | None, *, features: Iterable[str] | None = None,
                    forced: Iterable[str] = ()) -> dict[str, ColumnProfile]:
    """One ``ColumnProfile`` per column of ``frame`` (the target gets one too, without flags).
    ``target`` None: a table without a target (no leak check)."""
    part = _sample(frame)
    rows = part[part[target].notna()] if target in part.columns else part
    features = set(map(str, features)) if features is not None else {str(c) for c in part.columns} - {target}
    forced = set(forced)
    out: dict[str, ColumnProfile] = {}
    for col in map(str, part.columns):
        s = part[col]
        kind = kinds.get(col, "numeric" if is_numeric(s) else "categorical")
        distinct = int(s.nunique(dropna=True))
        counts, labels = histogram(s, kind)
        flags: list[str] = []
        why: list[str] = []
        if col != target and col in features:
            r = rows[col]
            nd = int(r.nunique(dropna=True))
            if nd == 0:
                flags.append("empty")
                why.append("no value in any row")
            elif nd == 1:
                flags.append("constant")
                why.append("one value in every row")
            elif col not in forced:
                reason = id_reason(r)
                if reason:
                    flags.append("id-like")
                    why.append(reason)
            if task and nd > 1 and target in rows.columns:
                score, what = leak_score(r, rows[target], kind, task)
                if np.isfinite(score) and score >= LEAK_LEVEL:
                    flags.append("leak suspect")
                    why.append(f"{what} {score:.3f} ≥ {LEAK_LEVEL} from this column alone")
        out[col] = ColumnProfile(col, kind, float(s.isna().mean()) if len(s) else 0.0, distinct,
                                 counts, labels, tuple(flags), tuple(why))
    return out


def stray_markers(series: pd.Series) -> tuple[list[str], int, str]:
    """(words to declare missing, how many stray cells, an example) for a mostly numeric text
    column, or ([], 0, "") when it has no stray text (``roles.stray_cells``)."""
    bad = stray_cells(series)
    if bad is None:
        return [], 0, ""
    values = [str(series.iloc[int(p)]).strip() for p in bad]
    words = list(dict.fromkeys(v for v in values if v and not any(ch.isdigit() for ch in v)))
    return words[:4], len(bad), values[0]


def find_traps(frame: pd.DataFrame, target: str | None, features: Sequence[str], *, task: str | None = None,
               forced: Iterable[str] = (), where: str = "table",
               profiles: dict[str, ColumnProfile] | None = None) -> list[Trap]:
    """What would surprise a new user at Start, each with a reason and one-click remedies.
    ``target`` None or "": a table without a target (the column checks only, on every row)."""
    traps: list[Trap] = []
    forced = set(forced)
    if target and target not in frame.columns:
        return traps
    rows = frame[frame[target].notna()] if target else frame     # no target: every row counts
    for col in features:
        words, n_bad, example = stray_markers(rows[col])
        if n_bad:
            remedies = []
            if words:
                shown = ", ".join(f"“{w}”" for w in words)
                remedies.append(Remedy(f"Treat {shown} as missing", {"missing_markers": words}))
            remedies.append(Remedy("Use it as categories", {"kinds": {col: "categorical"}}))
            remedies.append(Remedy("Leave it out", {"ignore": [col]}))
            traps.append(Trap(col, "stray text", f"“{col}” holds numbers, but {n_bad} cell(s) are "
                              f"text (e.g. “{example[:20]}”); the search would stop on them.",
                              tuple(remedies)))
    try:
        kept, _notes = screen_columns(rows, list(features), where, forced=forced) if features else ([], [])
    except Exception:        # no column left: every feature is flagged below
        kept = []
    for col in features:
        if col in kept or col in forced:
            continue
        reason = id_reason(rows[col])
        if reason:
            traps.append(Trap(col, "id-like", f"“{col}” looks like a row id ({reason}); it is left "
                              "out, since a model cannot learn from a label that names each row.",
                              (Remedy("Keep it out", {"ignore": [col]}),
                               Remedy("Use it anyway", {"keep": [col]}))))
    y = rows[target] if target else None
    if y is not None and task is None and is_numeric(y) and not pd.api.types.is_bool_dtype(y):
        try:
            inferred = infer_task(y)
        except Exception:       # a constant target: the page shows the core's message
            inferred = None
        if inferred == "multiclass":
            v = y.dropna()
            traps.append(Trap(target, "quantity as classes",
                              f"The target “{target}” has {v.nunique()} whole-number values "
                              f"({v.min():g} to {v.max():g}) and is read as classes; if it is an "
                              "amount or a measurement, predict it as a number.",
                              (Remedy("Predict it as a number", {"task": "regression"}),
                               Remedy("Keep it as classes", {"task": "multiclass"}))))
    for col, p in (profiles or {}).items():
        if "leak suspect" in p.flags and col in features:
            i = p.flags.index("leak suspect")
            traps.append(Trap(col, "leak", f"“{col}” alone predicts the target almost perfectly "
                              f"({p.why[i]}); it may carry the answer.",
                              (Remedy("Leave it out", {"ignore": [col]}),)))
    return traps


def apply_remedy(data: dict[str, Any], change: dict[str, Any]) -> dict[str, Any]:
    """The [data] section with a remedy applied: lists are merged, ``kinds`` updated, the rest set;
    a column kept is taken off ``ignore`` and one left out off ``keep``."""
    d = {k: (list(v) if isinstance(v, (list, tuple)) else dict(v) if isinstance(v, dict) else v)
         for k, v in data.items()}
    for key, value in change.items():
        if key in ("ignore", "keep", "missing_markers"):
            d[key] = list(dict.fromkeys(list(d.get(key, [])) + list(value)))
        elif key == "kinds":
            d.setdefault("kinds", {}).update(value)
        else:
            d[key] = value
    if "keep" in change:
        d["ignore"] = [c for c in d.get("ignore", []) if c not in change["keep"]]
    if "ignore" in change:
        d["keep"] = [c for c in d.get("keep", []) if c not in change["ignore"]]
    return {k: v for k, v in d.items() if v not in ([], {})}
