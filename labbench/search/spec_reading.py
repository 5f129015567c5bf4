"""Reading the spec file's sections: typed getters that name the dotted key on error, the
number-format keys of ``[data]``, and the rule that ties ``[data] target`` to the model family.

Used by ``labbench.search.spec`` only (it builds the dataclasses); every problem is a one-line
``SpecError`` naming the file, the dotted key, the value and what is allowed.
"""

from __future__ import annotations

from typing import Any, Mapping

from labbench.search.space import show, spec_error

THOUSANDS = (",", ".", " ", "'", "_")     # as labbench.data.reading.THOUSANDS
DECIMALS = (".", ",")


class Section:
    """Reads one table of the file with typed getters that name the dotted key on error."""

    def __init__(self, d: Any, name: str, known: tuple[str, ...], source: str | None):
        self.name, self.source = name, source
        if not isinstance(d, Mapping):
            raise spec_error(source, name, f"{show(d)} is not a table; write [{name}] with keys "
                             + ", ".join(known))
        unknown = [k for k in d if k not in known]
        if unknown:
            raise spec_error(source, f"{name}.{unknown[0]}", "unknown key; known keys are "
                             + ", ".join(known))
        self.d = d

    def fail(self, key: str, message: str):
        return spec_error(self.source, f"{self.name}.{key}", message)

    def has(self, key: str) -> bool:
        return key in self.d

    def text(self, key: str, default: Any = None, *, required: bool = False,
             choices: tuple[str, ...] | None = None) -> Any:
        if key not in self.d:
            if required:
                raise self.fail(key, "missing; this key is required")
            return default
        v = self.d[key]
        if choices is not None and v not in choices:
            raise self.fail(key, f"{show(v)} is not allowed; use one of "
                            + ", ".join(f'"{c}"' for c in choices))
        if not isinstance(v, str) or not v.strip():
            raise self.fail(key, f"{show(v)} is not allowed; write a non-empty text in quotes")
        return v

    def integer(self, key: str, default: Any, *, least: int, most: int | None = None,
                why: str = "") -> Any:
        if key not in self.d:
            return default
        v = self.d[key]
        if isinstance(v, bool) or not isinstance(v, int) or v < least:
            rule = f" (at most {most})" if most is not None else ""
            raise self.fail(key, f"{show(v)} is not allowed; write a whole number >= {least}{rule}")
        if most is not None and v > most:
            raise self.fail(key, f"{show(v)} is more than labbench allows ({most}"
                            + (f"; {why}" if why else "") + f"); write a whole number from "
                            f"{least} to {most}")
        return v

    def number(self, key: str, default: Any, *, above: float, below: float | None = None) -> Any:
        if key not in self.d:
            return default
        v = self.d[key]
        ok = not isinstance(v, bool) and isinstance(v, (int, float)) and v > above \
            and (below is None or v < below)
        if not ok:
            rule = f"a number above {show(above)}" + (f" and below {show(below)}" if below else "")
            raise self.fail(key, f"{show(v)} is not allowed; write {rule}")
        return float(v)

    def texts(self, key: str) -> tuple[str, ...]:
        v = self.d.get(key, [])
        if not isinstance(v, list) or not all(isinstance(x, str) and x for x in v):
            raise self.fail(key, f"{show(v)} is not allowed; write a list of column names, "
                            'e.g. ["id"]')
        if len(set(v)) != len(v):
            raise self.fail(key, f"{show(v)} names a column twice")
        return tuple(v)




def number_format(ds: Section) -> dict[str, Any]:
    """[data] missing_markers, thousands, decimal, keep (see labbench.data.reading)."""
    markers = ds.d.get("missing_markers", [])
    if not isinstance(markers, list) or not all(isinstance(m, str) for m in markers):
        raise ds.fail("missing_markers", f"{show(markers)} is not allowed; write a list of texts that "
                      'mean "missing", e.g. ["not measured", "unknown"]')
    thousands = ds.d.get("thousands")
    if thousands is not None and thousands not in THOUSANDS:
        raise ds.fail("thousands", f"{show(thousands)} is not allowed; use one of "
                      + ", ".join(f'"{t}"' for t in THOUSANDS) + " (or leave it out)")
    decimal = ds.text("decimal", None, choices=DECIMALS)
    if thousands is not None and thousands == (decimal or "."):
        raise ds.fail("thousands", f"{show(thousands)} is also the decimal mark; they must differ "
                      '(e.g. thousands = "." with decimal = ",")')
    return {"missing_markers": tuple(dict.fromkeys(markers)), "thousands": thousands,
            "decimal": decimal, "keep": ds.texts("keep")}


def target_text(ds: Section) -> str:
    """``[data] target``: a column name, or "" when left out (or written as "") - no target."""
    if "target" not in ds.d or ds.d["target"] == "":
        return ""
    return ds.text("target")


def check_target_for_family(ds: Section, target: str, label: str | None, family: Any) -> None:
    """A family that predicts a column needs ``target``; one that learns without a target (the
    map and group families) refuses one and offers ``label`` instead."""
    if family.needs_target and not target:
        raise ds.fail("target", f"missing; the {family.name} family learns to predict a column: "
                      'write target = "column name"' + (f" (label = {show(label)} is for the "
                      "families that learn without a target)" if label else ""))
    if family.needs_target and label:
        raise ds.fail("label", f"is for the families that learn without a target; the "
                      f"{family.name} family predicts {show(target)}: to keep {show(label)} out of "
                      "the inputs, list it in ignore instead")
    if not family.needs_target and target:
        raise ds.fail("target", f"the {family.name} family learns without a target; write "
                      f"label = {show_toml(target)} to show it beside the groups (or remove target)")


def show_toml(text: str) -> str:
    """A column name as a TOML string for a message."""
    return '"' + str(text).replace("\\", "\\\\").replace('"', '\\"') + '"'
