"""Predict with a labbench model bundle using numpy only (plus Python's csv module).

Usage:  python predict_with_numpy.py DATA.csv [OUT.csv]      (writes to the screen without OUT)
In your own code:  model = load(BUNDLE); values, probabilities = predict(model, columns)
where ``columns`` maps each input column name to a list of its values as text (None = missing).
A model without a target (a map or group model) gives ({output column: values}, None): per row
its unit, group and distance (numbered from 0), or its components component_1..c.

Written by labbench next to the bundle; it needs nothing from labbench. Missing numbers get the
training median, missing categories the most frequent training value; a category the model never
saw encodes as all zeros. Scores of a model are estimates, not guarantees (see "caution" below).
"""

import csv
import json
import sys
from pathlib import Path

import numpy as np

BUNDLE = "model.npz"   # the bundle file, looked for next to this script
MISSING = {"", "#N/A", "#N/A N/A", "#NA", "-1.#IND", "-1.#QNAN", "-NaN", "-nan", "1.#IND",
           "1.#QNAN", "<NA>", "N/A", "NA", "NULL", "NaN", "None", "n/a", "nan", "null"}
BOOLS = {"True": 1.0, "true": 1.0, "TRUE": 1.0, "False": 0.0, "false": 0.0, "FALSE": 0.0}


def load(path):
    """The bundle as a dict of plain arrays plus its metadata ("meta")."""
    with np.load(path, allow_pickle=False) as f:
        model = {key: f[key] for key in f.files}
    model["meta"] = json.loads(model["meta"].tobytes().decode("utf-8"))
    return model


def read_csv(path):
    """{column: [text or None, ...]} from a comma, semicolon or tab separated file."""
    raw = Path(path).read_bytes()
    if raw.startswith((b"\xff\xfe", b"\xfe\xff")):
        text = raw.decode("utf-16")
    else:
        try:
            text = raw.decode("utf-8-sig")
        except UnicodeDecodeError:
            text = raw.decode("latin-1")
    first = text.splitlines()[0] if text else ""
    delimiter = max((",", ";", "\t"), key=first.count)
    rows = [r for r in csv.reader(text.splitlines(), delimiter=delimiter, skipinitialspace=True) if r]
    header = [h.strip() for h in rows[0]]
    columns = {name: [] for name in header}
    for row in rows[1:]:
        for name, value in zip(header, row):
            value = value.strip()
            columns[name].append(None if value in MISSING else value)
    if delimiter == ";":  # decimal commas: "1,5" means 1.5
        for values in columns.values():
            fixed = [v.replace(",", ".") if v is not None else None for v in values]
            if all(v is None or _is_number(v) for v in fixed):
                values[:] = fixed
    return columns


def _is_number(text):
    try:
        float(text)
        return True
    except ValueError:
        return text in BOOLS


def _number(text):
    if text is None:
        return np.nan
    return BOOLS[text] if text in BOOLS else float(text)


def _category_text(values):
    """Category labels as labbench writes them: whole numbers without ".0", booleans as True/False."""
    present = [v for v in values if v is not None]
    if present and all(_is_number(v) for v in present):
        if all(v in BOOLS for v in present):
            return [None if v is None else str(BOOLS[v] == 1.0) for v in values]
        out = []
        for v in values:
            x = None if v is None else float(v)
            out.append(None if x is None else str(int(x)) if x.is_integer() and abs(x) < 1e15 else repr(x))
        return out
    return values


def inputs(model, columns):
    """The network's input matrix: scaled numeric columns, then one-hot blocks of categories."""
    missing = [c for c in model["meta"]["features"] if c not in columns]
    if missing:
        raise SystemExit(f"missing column(s): {', '.join(missing)}")
    blocks = []
    for j, name in enumerate(model["numeric_names"].tolist()):
        x = np.array([_number(v) for v in columns[name]], dtype=np.float64)
        x = np.where(np.isnan(x), model["numeric_impute"][j], x)
        blocks.append(((x - model["numeric_center"][j]) / model["numeric_scale"][j])[:, None])
    for j, name in enumerate(model["categorical_names"].tolist()):
        fill = str(model["categorical_impute"][j])
        values = np.array([fill if v is None else v for v in _category_text(columns[name])])
        blocks.append((values[:, None] == model[f"categories{j}"][None, :]).astype(np.float64))
    return np.hstack(blocks)


# The hidden activations of labbench.nets.activations.ACTIVATIONS plus the output "identity"
# (labbench's tests check that every registered activation is here).
ACTIVATIONS = {
    "relu": lambda z: np.maximum(z, 0),
    "tanh": np.tanh,
    "sigmoid": lambda z: 1 / (1 + np.exp(-z)),
    "identity": lambda z: z,
}


def forward(model, X):
    """Model output: regression (n,) in training units (see target_units), P(second class)
    (n,) for binary, class probabilities (n, C). The bundle's "family" says which kind of model
    computes it (none: a network); another family's function is added to FORWARD below."""
    family = model["meta"].get("family", "network")
    if family not in FORWARD:
        raise SystemExit(f"this script cannot compute a model of the family {family!r}")
    return FORWARD[family](model, X)


def network_forward(model, X):
    """A network's output from its layers (bundle entries layer{i}_W, layer{i}_b)."""
    n = model["meta"]["network"]["layers"]
    h = X.astype(model["layer0_W"].dtype)
    for i in range(n):
        h = h @ model[f"layer{i}_W"] + model[f"layer{i}_b"]
        if i < n - 1:
            h = ACTIVATIONS[model["meta"]["network"]["activation"]](h)
    output = model["meta"]["network"]["output"]
    if output == "softmax":
        e = np.exp(h - h.max(axis=1, keepdims=True))
        return e / e.sum(axis=1, keepdims=True)
    return ACTIVATIONS[output](h)[:, 0]


FORWARD = {"network": network_forward}
# family -> function(model, output) giving {column: values} for a model without a target (its
# "task" is "unsupervised"); added below with the family's FORWARD entry
COLUMNS = {}


def target_units(model, z):
    """A regression network's output z in the target's own units: the network was trained on
    a scaled target (metadata "preprocessing" -> "target"; absent in bundles without it)."""
    target = (model["meta"].get("preprocessing") or {}).get("target") or {"method": "none"}
    z = np.asarray(z, dtype=np.float64)
    if target["method"] == "none":
        return z
    y = z * target["scale"] + target["center"]
    return np.exp(y) if target["method"] == "log" else y


def predict(model, columns):
    """(predictions, class probabilities or None) for {column: [text, ...]}; a model without a
    target: ({output column: values}, None)."""
    out = forward(model, inputs(model, columns))
    if model["meta"]["task"] == "unsupervised":
        family = model["meta"]["family"]
        if family not in COLUMNS:
            raise SystemExit(f"this script cannot write the outputs of the family {family!r}")
        return COLUMNS[family](model, out), None
    classes = model["meta"]["classes"]
    if classes is None:
        return target_units(model, out), None
    proba = np.column_stack([1 - out, out]) if out.ndim == 1 else out
    labels = np.array(classes)[(out >= 0.5).astype(int) if out.ndim == 1 else proba.argmax(axis=1)]
    return labels, proba


def text_cell(value):
    """A text starting with = + - @ tab or CR gets a leading ' (spreadsheet formula guard)."""
    try:
        float(value)
        return value          # a plain number such as -1.5 stays a number
    except (TypeError, ValueError):
        return "'" + value if str(value).startswith(("=", "+", "-", "@", "\t", "\r")) else value


def _cell(value):
    """A whole number as such (unit, group), any other number in full precision."""
    if isinstance(value, (int, np.integer)):
        return str(int(value))
    return repr(float(value))


def main(argv):
    if not argv or argv[0] in ("-h", "--help"):
        print(__doc__.strip().splitlines()[2])
        return 0
    model = load(Path(__file__).with_name(BUNDLE))
    columns = read_csv(argv[0])
    labels, proba = predict(model, columns)
    meta = model["meta"]
    has_id = meta["id_column"] in columns
    header = [meta["id_column"]] if has_id else []
    if isinstance(labels, dict):            # a model without a target: its own columns
        header += list(labels)
        table = [[_cell(v) for v in values] for values in labels.values()]
        cells = [list(row) for row in zip(*table)] if table else []
    else:
        header += [f"predicted_{meta['target']}"]
        header += [f"proba_{c}" for c in meta["classes"]] if proba is not None else []
        cells = [[repr(float(label)) if proba is None else label]
                 + ([repr(float(p)) for p in proba[i]] if proba is not None else [])
                 for i, label in enumerate(labels)]
    handle = open(argv[1], "w", newline="", encoding="utf-8") if len(argv) > 1 else sys.stdout
    writer = csv.writer(handle)
    writer.writerow(header)
    for i, rest in enumerate(cells):
        row = ([columns[meta["id_column"]][i]] if has_id else []) + rest
        writer.writerow([text_cell(c) for c in row])
    if handle is not sys.stdout:
        handle.close()
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
