"""What a setting of a model family can be: its kinds (fixed, range, choices), its table entry
(``SettingInfo``: kind, allowed range or names, default, help, condition) and the reader of one
TOML value against that entry (``parse_setting``, a one-line ``SpecError`` on a problem).

Every family declares its settings once as a table of ``SettingInfo`` (see
``labbench.families.base.Family.settings``); the spec reader, the window's editor, the error
messages and the docs table all read that table.
"""

from __future__ import annotations

import json
import math
from dataclasses import dataclass
from typing import Any, Mapping

from labbench.errors import SpecError

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
    off: bool = False          # can_be_off settings: sample "off" (0.0) or a value from the range


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
    can_be_off: bool = False   # a range may write ``off = true``: sample "<name>_on" first
    per_layer: bool = False    # a plain list fixes one value per layer (the network's units)
    # sampled only when another setting has one of these values (else the default), e.g.
    # momentum only when optimizer = "momentum": ("optimizer", ("momentum",))
    when: tuple[str, tuple] | None = None


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
        if info.per_layer:
            return Fixed(tuple(scalar(v, f"[{i}]") for i, v in enumerate(raw)))
        raise fail(f"{show(raw)} is a bare list; write {{ choices = {show(raw)} }} to search these values")
    return Fixed(scalar(raw))


def _raise(err: Exception):
    raise err
