"""How the network family's record (``labbench.nets.NetWeights``) is exported.

Bundle entries: ``layer{i}_W`` (fan_in, fan_out) and ``layer{i}_b`` (fan_out,), i = 0..n-1, and
the metadata entry ``network`` = ``{"layers", "activation", "output", "dtype"}``. The numpy
script's network forward is built into ``labbench.export.standalone``; ONNX: one ``Gemm`` per
layer, the hidden activation's operator between them, ``Sigmoid`` / ``Softmax`` for classes.
"""

from __future__ import annotations

from typing import Any, Mapping

import numpy as np

from labbench.errors import BundleError
from labbench.nets.activations import ACTIVATIONS
from labbench.nets.losses import OUTPUT_FOR_TASK

#: The output non-linearity of each task (the engine's table).
OUTPUTS = OUTPUT_FOR_TASK
#: The ONNX operator of each hidden activation (a test checks the keys against ACTIVATIONS).
ACTIVATION_OPS = {"relu": "Relu", "tanh": "Tanh", "sigmoid": "Sigmoid"}


def _fail(name: str, problem: str, fix: str = "save the model again from labbench") -> BundleError:
    return BundleError(f"{name}: {problem}; {fix}")


def bundle_entries(weights: Any) -> tuple[dict[str, np.ndarray], dict[str, Any]]:
    arrays: dict[str, np.ndarray] = {}
    for i, (W, b) in enumerate(weights.layers):
        arrays[f"layer{i}_W"] = np.ascontiguousarray(W)
        arrays[f"layer{i}_b"] = np.ascontiguousarray(b)
    first_W = weights.layers[0][0]
    meta = {"network": {"layers": len(weights.layers), "activation": weights.activation,
                        "output": weights.output, "dtype": str(np.asarray(first_W).dtype)}}
    return arrays, meta


def _entry(arrays: Mapping[str, np.ndarray], key: str, name: str, ndim: int) -> np.ndarray:
    if key not in arrays:
        raise _fail(name, f"lacks the entry {key!r}")
    arr = arrays[key]
    if arr.dtype.kind != "f" or arr.ndim != ndim:
        raise _fail(name, f"entry {key!r} is {arr.dtype} with shape {arr.shape}, expected {ndim}-D float")
    if not np.all(np.isfinite(arr)):
        raise _fail(name, f"entry {key!r} holds NaN or infinite values")
    return arr


def from_bundle(arrays: Mapping[str, np.ndarray], meta: Mapping[str, Any], name: str,
                n_inputs: int, n_outputs: int):
    """The checked ``NetWeights`` of a bundle."""
    from labbench.nets.weights import NetWeights

    net = meta.get("network")
    if not isinstance(net, dict) or not isinstance(net.get("layers"), int) or net["layers"] < 1:
        raise _fail(name, "metadata 'network' must give the number of layers (1 or more)")
    expected_output = OUTPUTS[meta["task"]]
    if net.get("output") != expected_output:
        raise _fail(name, f"network output {net.get('output')!r} does not fit task {meta['task']!r} "
                    f"(expected {expected_output!r})")
    if net.get("activation") not in ACTIVATIONS:
        raise _fail(name, f"hidden activation {net.get('activation')!r} is not one of {', '.join(ACTIVATIONS)}",
                    "use a bundle saved by this labbench or a newer one")
    layers = []
    fan_in, dtype = n_inputs, None
    for i in range(net["layers"]):
        W = _entry(arrays, f"layer{i}_W", name, 2)
        b = _entry(arrays, f"layer{i}_b", name, 1)
        if W.shape[0] != fan_in:
            raise _fail(name, f"layer{i}_W has shape {W.shape} but {fan_in} inputs reach layer {i}")
        if b.shape != (W.shape[1],):
            raise _fail(name, f"layer{i}_b has shape {b.shape}, expected ({W.shape[1]},) to match layer{i}_W")
        dtype = dtype or W.dtype
        if W.dtype != dtype or b.dtype != dtype:
            raise _fail(name, f"layer {i} mixes dtypes ({W.dtype}, {b.dtype}); expected {dtype}")
        layers.append((W, b))
        fan_in = W.shape[1]
    if fan_in != n_outputs:
        raise _fail(name, f"the last layer gives {fan_in} outputs, a {meta['task']} model with "
                    f"{len(meta['classes'] or [])} classes needs {n_outputs}")
    extra = sorted(k for k in arrays if k.startswith("layer") and k[5:].split("_")[0].isdigit()
                   and int(k[5:].split("_")[0]) >= net["layers"])
    if extra:
        raise _fail(name, f"holds layer entries beyond the {net['layers']} the metadata names ({', '.join(extra)})")
    return NetWeights(layers=tuple(layers), activation=net["activation"], output=net["output"])


def onnx_body(weights: Any, h: str, node, const, task: str) -> str:
    layers = weights.layers
    for i, (W, b) in enumerate(layers):
        h = node("Gemm", [h, const(f"W{i}", np.asarray(W)), const(f"b{i}", np.asarray(b))], f"_lb.layer{i}")
        if i < len(layers) - 1:
            h = node(ACTIVATION_OPS[weights.activation], [h], f"_lb.hidden{i}")
    if task == "binary":
        return node("Sigmoid", [h], "_lb.p1")
    if task == "multiclass":
        return node("Softmax", [h], "probabilities", axis=1)
    return h
