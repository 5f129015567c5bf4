"""The known network settings and the kinds a setting can take (fixed, range, choices).

``SETTINGS`` is the table the window builds its editors and tooltips from; ``parse_setting`` turns
one TOML value into a setting, checking it against that table (one-line ``SpecError`` on a problem).
"""

from __future__ import annotations

import json
import math
from dataclasses import dataclass
from typing import Any, Mapping

from labbench.errors import SpecError

MAX_LAYERS = 3

# --------------------------------------------------------------------------------------------
# setting kinds


@dataclass(frozen=True)
class Fixed:
    value: Any


@dataclass(frozen=True)
class FloatRange:
    low: float
    high: float
    log: bool = False
    off: bool = False          # l2 only: sample "off" (0.0) or a value from the range


@dataclass(frozen=True)
class IntRange:
    low: int
    high: int
    log: bool = False
    step: int = 1


@dataclass(frozen=True)
class Choices:
    values: tuple


Setting = Fixed | FloatRange | IntRange | Choices


@dataclass(frozen=True)
class SettingInfo:
    name: str
    label: str
    kind: str                  # "float" | "int" | "choice"
    default: Any
    help: str
    low: float | None = None   # allowed range (inclusive) for numbers
    high: float | None = None
    options: tuple[str, ...] = ()   # allowed names for "choice" settings
    can_be_off: bool = False


SETTINGS: dict[str, SettingInfo] = {
    s.name: s
    for s in (
        SettingInfo("learning_rate", "Learning rate", "float", 1e-3,
                    "Step size of the optimizer; too large diverges, too small learns slowly.",
                    low=1e-8, high=10.0),
        SettingInfo("hidden_layers", "Hidden layers", "int", 1,
                    "Number of hidden layers (0 gives a linear or logistic model).",
                    low=0, high=MAX_LAYERS),
        SettingInfo("hidden_units", "Units per layer", "int", 64,
                    "Neurons in each hidden layer; a range is sampled separately for every layer.",
                    low=1, high=4096),
        SettingInfo("epochs", "Epochs", "int", 200,
                    "The most full passes over the training rows of each fold; patience may stop sooner.",
                    low=1, high=100_000),
        SettingInfo("patience", "Patience", "int", 10,
                    "Epochs without a better mean validation loss of the folds before training stops; "
                    "the weights of the best epoch are kept and the refit trains that many epochs. "
                    "0 turns early stopping off.",
                    low=0, high=100_000),
        SettingInfo("batch_size", "Batch size", "int", 64,
                    "Rows per gradient step; smaller batches give noisier, more frequent steps.",
                    low=1, high=1_000_000),
        SettingInfo("activation", "Activation", "choice", "relu",
                    "Non-linearity applied after every hidden layer.",
                    options=("relu", "tanh", "sigmoid")),
        SettingInfo("optimizer", "Optimizer", "choice", "adam",
                    "How the weights are updated from the gradients.",
                    options=("sgd", "momentum", "adam")),
        SettingInfo("momentum", "Momentum", "float", 0.9,
                    "Share of the previous step kept in the next one (used by the momentum optimizer only).",
                    low=0.0, high=0.999),
        SettingInfo("l2", "L2 penalty", "float", 0.0,
                    "Weight-decay strength that pulls weights towards zero; 0 turns it off.",
                    low=0.0, high=1000.0, can_be_off=True),
        SettingInfo("init", "Initial weights", "choice", "auto",
                    "How the starting weights are drawn: auto (chosen by measurement: Glorot for relu "
                    "and tanh, He for sigmoid), glorot (uniform) or he (normal).",
                    options=("auto", "glorot", "he")),
    )
}

SETTINGS_KEYS = ("hidden", "activation", "optimizer", "learning_rate", "momentum", "l2",
                 "batch_size", "epochs", "patience", "init")


def spec_error(source: str | None, key: str, message: str) -> SpecError:
    """A one-line SpecError: ``file: key: message``."""
    where = f"{source}: " if source else ""
    return SpecError(f"{where}{key}: {message}")


def show(value: Any) -> str:
    """A value as it would be written in TOML (for messages)."""
    try:
        return json.dumps(value)
    except (TypeError, ValueError):
        return repr(value)


def _number(value: Any, kind: str) -> float | int | None:
    """The value as a number of the setting's kind, or None when it is not one."""
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        return None
    if kind == "int":
        if isinstance(value, float) and not value.is_integer():
            return None
        return int(value)
    return float(value) if math.isfinite(value) else None


def parse_setting(info: SettingInfo, raw: Any, source: str | None) -> Setting:
    key = f"space.{info.name}"

    def fail(message: str) -> SpecError:
        return spec_error(source, key, message)

    def scalar(v: Any, subkey: str = "") -> Any:
        where = f"{key}{subkey}"
        if info.kind == "choice":
            if not isinstance(v, str) or v not in info.options:
                return _raise(spec_error(source, where, f"{show(v)} is not allowed; use one of "
                                         + ", ".join(f'"{o}"' for o in info.options)))
            return v
        n = _number(v, info.kind)
        if n is None:
            what = "a whole number" if info.kind == "int" else "a number"
            return _raise(spec_error(source, where, f"{show(v)} is not {what}"))
        if n < info.low or n > info.high:
            return _raise(spec_error(source, where, f"{show(v)} is outside the allowed range "
                                     f"{show(info.low)} to {show(info.high)}"))
        return n

    if isinstance(raw, Mapping):
        keys = set(raw)
        if "choices" in keys:
            if keys != {"choices"}:
                raise fail("choices cannot be mixed with " + ", ".join(sorted(keys - {"choices"})))
            values = raw["choices"]
            if not isinstance(values, list) or not values:
                raise fail(f"choices = {show(values)}; write a non-empty list, e.g. choices = "
                           + (f'["{info.options[0]}", "{info.options[1]}"]' if info.options else "[32, 64]"))
            parsed = tuple(scalar(v, ".choices") for v in values)
            if len(set(parsed)) != len(parsed):
                raise fail(f"choices = {show(values)} lists a value twice")
            return Choices(parsed)
        if info.kind == "choice":
            raise fail(f"{show(dict(raw))} is not allowed; write a name or {{ choices = [...] }}")
        allowed = {"low", "high", "log"} | ({"step"} if info.kind == "int" else set()) \
            | ({"off"} if info.can_be_off else set())
        unknown = sorted(keys - allowed)
        if unknown:
            raise fail(f"unknown key {unknown[0]}; a range takes " + ", ".join(sorted(allowed))
                       + " or is { choices = [...] }")
        for k in ("low", "high"):
            if k not in raw:
                raise fail(f"a range needs both low and high (missing {k})")
        low, high = scalar(raw["low"], ".low"), scalar(raw["high"], ".high")
        log = raw.get("log", False)
        if not isinstance(log, bool):
            raise spec_error(source, f"{key}.log", f"{show(log)} is not allowed; write true or false")
        if not low < high:
            raise fail(f"low = {show(low)} must be smaller than high = {show(high)} "
                       "(for a single value write the value itself)")
        if log and low <= 0:
            raise fail(f"log = true needs low > 0 (got low = {show(low)})")
        if info.kind == "int":
            step = raw.get("step", 1)
            if _number(step, "int") is None or step < 1:
                raise spec_error(source, f"{key}.step", f"{show(step)} is not allowed; write a whole number >= 1")
            if log and step != 1:
                raise fail("log = true works with step = 1 only")
            return IntRange(int(low), int(high), log, int(step))
        off = raw.get("off", False)
        if not isinstance(off, bool):
            raise spec_error(source, f"{key}.off", f"{show(off)} is not allowed; write true or false")
        return FloatRange(float(low), float(high), log, off)
    if isinstance(raw, list):
        if info.name == "hidden_units":
            return Fixed(tuple(scalar(v, f"[{i}]") for i, v in enumerate(raw)))
        raise fail(f"{show(raw)} is a bare list; write {{ choices = {show(raw)} }} to search these values")
    return Fixed(scalar(raw))


def _raise(err: Exception):
    raise err
