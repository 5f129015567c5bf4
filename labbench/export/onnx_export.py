"""ONNX export of a trained model: preprocessing and the model in one graph of standard operators.

The model part comes from the model's family (``Family.onnx_body``; the network's is in
``labbench.families.network_export``); the inputs, the preprocessing and the outputs are shared.

Inputs, one per input column of the model, named after the column (letters, digits and ``_``;
other characters become ``_``, a leading digit gets ``c_`` in front, a name taken by an output or
an earlier column gets ``_2``, ``_3``, ...), each of shape [N, 1]:
  * numeric column:     tensor(double); NaN means missing (replaced by the training median);
  * categorical column: tensor(string), the category as text without surrounding spaces (whole
    numbers without ".0", booleans as "True"/"False"); "" means missing (replaced by the most
    frequent training value); a category not seen in training encodes as all zeros.
Outputs:
  * regression:      ``value`` tensor(float) [N], in the target's own units: the network's
                     output z goes through the target scaling's inverse in double
                     (``center + scale * z``, then ``Exp`` for "log"), then back to float
  * classification:  ``label`` tensor(string) [N] and ``probabilities`` tensor(float) [N, C]
                     (columns in the order of the class list in the metadata).
  * a map or group model (task "unsupervised", ``labbench.families.maps_export``), in double:
    self-organising map, competitive learning, neural gas: ``distances`` [N, k] (to every unit's
    prototype, in the scaled input space), ``unit`` int64 [N] (the best-matching unit, ties to
    the lowest number), ``group`` int64 [N] (that unit's group), ``distance`` [N] (to that
    unit); Hebbian features: ``components`` [N, c]. Units and groups are numbered from 0.

Operators: default domain opset 17 (Concat, IsNaN, Where, Sub, Div, Cast, Equal, Gemm, Relu, Tanh,
Sigmoid, Softmax, ArgMax, GreaterOrEqual, Gather, Reshape, Mul, Add, Exp; maps: ReduceSumSquare,
MatMul, Max, Sqrt, ArgMin, ReduceMin) and, for the categories,
``LabelEncoder`` of the ONNX-ML domain ``ai.onnx.ml`` (opset 2): ``Equal`` takes strings only from
opset 19 on, so strings are first mapped to their one-hot position by the label encoder, then
compared as int64.
Numeric preprocessing runs in double (as labbench does), the network in its own dtype (float32 by
default). The model's metadata_props carry the bundle metadata as JSON (``labbench``) and the
column → input name map (``inputs``).
"""

from __future__ import annotations

import json
import os
import re
from pathlib import Path

import numpy as np

from labbench.errors import LabbenchError
from labbench.families import maps_export
from labbench.model import UNSUPERVISED, TrainedModel

OPSET = 17
ML_OPSET = 2
IR_VERSION = 8   # the IR version that goes with opset 17


#: The graph's output names; an input column of the same name gets a suffix ("value" -> "value_2").
OUTPUT_NAMES = ("value", "label", "probabilities")
#: ... and those of a model without a target (a map or group model)
MAP_OUTPUT_NAMES = maps_export.OUTPUT_NAMES


def input_names(features, reserved=OUTPUT_NAMES) -> dict[str, str]:
    """Column name -> ONNX input name (sanitised, unique, never one of ``reserved``: the output
    names of the model's graph)."""
    out: dict[str, str] = {}
    used: set[str] = set(reserved)
    for col in features:
        base = re.sub(r"[^A-Za-z0-9_]", "_", str(col)) or "column"
        if base[0].isdigit():
            base = "c_" + base
        name, k = base, 2
        while name in used:
            name, k = f"{base}_{k}", k + 1
        used.add(name)
        out[col] = name
    return out


def build_onnx(model: TrainedModel):
    """The ``onnx.ModelProto`` of ``model`` (not yet checked or saved)."""
    try:
        import onnx
        from onnx import TensorProto, helper, numpy_helper
    except ImportError:
        raise LabbenchError("ONNX export needs the onnx package; install it with "
                            "pip install 'labbench[onnx]'") from None
    from labbench.export.bundle import bundle_arrays
    from labbench.families import get_family

    family = get_family(model.family)
    state = model.preprocessor.to_state()
    net_dtype = np.dtype(family.onnx_dtype(model.weights))
    net_type = TensorProto.DOUBLE if net_dtype == np.float64 else TensorProto.FLOAT
    unsupervised = model.task == UNSUPERVISED
    names = input_names(model.features, MAP_OUTPUT_NAMES if unsupervised else OUTPUT_NAMES)
    nodes, inits = [], []

    def const(name: str, value) -> str:
        inits.append(numpy_helper.from_array(np.asarray(value), name=f"_lb.{name}"))
        return f"_lb.{name}"

    def node(op: str, inputs, output: str, domain: str = "", **attrs) -> str:
        nodes.append(helper.make_node(op, list(inputs), [output], name=f"_lb.{output}.op",
                                      domain=domain, **attrs))
        return output

    graph_inputs = []
    for col in model.features:
        kind = TensorProto.DOUBLE if model.kinds[col] == "numeric" else TensorProto.STRING
        graph_inputs.append(helper.make_tensor_value_info(names[col], kind, ["N", 1]))

    blocks = []
    numeric = state["numeric"]
    if numeric:
        raw = node("Concat", [names[c] for c in numeric], "_lb.numeric", axis=1) if len(numeric) > 1 else names[numeric[0]]
        missing = node("IsNaN", [raw], "_lb.numeric_missing")
        filled = node("Where", [missing, const("impute", np.array(state["impute"], np.float64)), raw], "_lb.numeric_filled")
        centred = node("Sub", [filled, const("center", np.array(state["center"], np.float64))], "_lb.numeric_centred")
        scaled = node("Div", [centred, const("scale", np.array(state["scale"], np.float64))], "_lb.numeric_scaled")
        blocks.append(node("Cast", [scaled], "_lb.numeric_block", to=net_type))
    for j, (col, cats, fill) in enumerate(zip(state["categorical"], state["categories"], state["cat_impute"])):
        if not cats:
            continue  # no category in training: the column contributes no inputs
        keys = list(cats) + ([""] if "" not in cats else [])
        values = list(range(len(cats))) + ([cats.index(fill) if fill in cats else -1] if "" not in cats else [])
        codes = node("LabelEncoder", [names[col]], f"_lb.cat{j}_code", domain="ai.onnx.ml",
                     keys_strings=keys, values_int64s=values, default_int64=-1)
        hot = node("Equal", [codes, const(f"cat{j}_positions", np.arange(len(cats), dtype=np.int64)[None, :])],
                   f"_lb.cat{j}_equal")
        blocks.append(node("Cast", [hot], f"_lb.cat{j}_block", to=net_type))
    h = node("Concat", blocks, "_lb.inputs", axis=1) if len(blocks) > 1 else blocks[0]

    # the family's part: scaled inputs -> value (training units) / P(second class) / probabilities
    n_inputs = len(numeric) + sum(len(c) for c in state["categories"])
    h = family.onnx_body(model.weights, h, n_inputs, node, const, net_type, model.task)

    outputs = []
    if unsupervised:          # the family's body wrote the outputs under their final names
        elem = {"double": TensorProto.DOUBLE, "int64": TensorProto.INT64}
        for name, kind, shape in maps_export.onnx_outputs(model.weights):
            outputs.append(helper.make_tensor_value_info(name, elem[kind], shape))
    elif model.task == "regression":
        target = model.target_scaler
        if target is not None and not target.is_identity:     # back to the target's own units
            double = TensorProto.DOUBLE
            z = h if net_type == double else node("Cast", [h], "_lb.output_double", to=double)
            scale = const("target_scale", np.array(target.scale, np.float64))
            center = const("target_center", np.array(target.center, np.float64))
            z = node("Add", [node("Mul", [z, scale], "_lb.target_scaled"), center], "_lb.target_shifted")
            if target.method == "log":
                z = node("Exp", [z], "_lb.target_exp")
            h = z if net_type == double else node("Cast", [z], "_lb.target_units", to=net_type)
        node("Reshape", [h, const("flat", np.array([-1], np.int64))], "value")
        outputs.append(helper.make_tensor_value_info("value", net_type, ["N"]))
    else:
        classes = const("classes", np.array(list(model.classes), dtype=object))
        if model.task == "binary":
            p = h
            q = node("Sub", [const("one", np.ones((1, 1), dtype=net_dtype)), p], "_lb.p0")
            node("Concat", [q, p], "probabilities", axis=1)
            flat = node("Reshape", [p, const("flat", np.array([-1], np.int64))], "_lb.p1_flat")
            hit = node("GreaterOrEqual", [flat, const("half", np.array(0.5, dtype=net_dtype))], "_lb.is_second")
            index = node("Cast", [hit], "_lb.label_index", to=TensorProto.INT64)
        else:
            if h != "probabilities":
                node("Identity", [h], "probabilities")
            index = node("ArgMax", ["probabilities"], "_lb.label_index", axis=1, keepdims=0)
        node("Gather", [classes, index], "label", axis=0)
        outputs.append(helper.make_tensor_value_info("label", TensorProto.STRING, ["N"]))
        outputs.append(helper.make_tensor_value_info("probabilities", net_type, ["N", len(model.classes)]))

    graph = helper.make_graph(nodes, "labbench_model", graph_inputs, outputs, initializer=inits)
    proto = helper.make_model(
        graph, producer_name="labbench", producer_version=_version(), ir_version=IR_VERSION,
        opset_imports=[helper.make_opsetid("", OPSET), helper.make_opsetid("ai.onnx.ml", ML_OPSET)],
        doc_string=_doc(model, names),
    )
    meta = bytes(bundle_arrays(model)["meta"]).decode("utf-8")
    helper.set_model_props(proto, {"labbench": meta, "inputs": json.dumps(names)})
    return proto


def _version() -> str:
    from labbench import __version__
    return __version__


def _doc(model: TrainedModel, names: dict[str, str]) -> str:
    from labbench.export.bundle import CAUTION

    if model.task == UNSUPERVISED:
        lines = [f"labbench model: {_map_words(model)} from {len(model.features)} column(s), "
                 "trained without a target.", "Inputs, one per column, shape [N, 1]:"]
    else:
        lines = [f"labbench model: predicts {model.target!r} ({model.task}) from {len(model.features)} column(s).",
                 "Inputs, one per column, shape [N, 1]:"]
    for col in model.features:
        kind = model.kinds[col]
        what = "double, NaN = missing" if kind == "numeric" else "string, '' = missing, unseen = all zeros"
        lines.append(f"  {names[col]}  <- column {col!r} ({kind}: {what})")
    if model.task == UNSUPERVISED:
        lines.extend(_map_outputs(model))
    elif model.task == "regression":
        lines.append("Output: value [N] (float).")
    else:
        lines.append(f"Outputs: label [N] (string), probabilities [N, {len(model.classes)}] "
                     f"in class order {list(model.classes)}.")
    lines.append(CAUTION)
    return "\n".join(lines)


MAP_WORDS = {"som": "a self-organising map", "competitive": "competitive learning (winner takes all)",
             "neural_gas": "neural gas (winner takes most)", "hebbian": "Hebbian features (Oja / Sanger)"}


def _map_words(model: TrainedModel) -> str:
    record = model.weights
    what = MAP_WORDS.get(model.family, f"the {model.family} family")
    if maps_export.is_prototype(record):
        grid = (f" on a {record.shape[0]} x {record.shape[1]} {record.topology} grid"
                if record.shape is not None else "")
        return f"{what} of {record.n_units} units{grid} in {record.n_groups} group(s)"
    return f"{what}, {record.n_components} component(s)"


def _map_outputs(model: TrainedModel) -> list[str]:
    record = model.weights
    if not maps_export.is_prototype(record):
        return [f"Output: components [N, {record.n_components}] (double): each row's projection on "
                "the learned components, from the scaled inputs (numeric columns standardised as "
                "in training, categories one-hot)."]
    return ["Outputs (double and int64):",
            f"  distances [N, {record.n_units}] (double): Euclidean distance of the scaled row to "
            "each unit's prototype;",
            "  unit [N] (int64): the best-matching unit, numbered from 0 (ties: the lowest number)"
            + (f"; on the grid, row = unit // {record.shape[1]}, column = unit % {record.shape[1]};"
               if record.shape is not None else ";"),
            f"  group [N] (int64): that unit's group, numbered from 0 ({record.n_groups} groups);",
            "  distance [N] (double): the distance to that unit's prototype (how well the row fits)."]


def export_onnx(model: TrainedModel, path: str | os.PathLike) -> Path:
    """Write ``model`` as an ONNX file after ``onnx.checker.check_model(full_check=True)``."""
    proto = build_onnx(model)      # a clear LabbenchError when the onnx package is missing
    import onnx

    onnx.checker.check_model(proto, full_check=True)
    target = Path(path)
    if not target.suffix:
        target = target.with_suffix(".onnx")
    from labbench.fileio import atomic_path

    with atomic_path(target) as tmp:      # temporary file beside it, then os.replace
        onnx.save_model(proto, str(tmp))
    return target
