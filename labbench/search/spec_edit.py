"""Saving a spec over a hand-written file without rewriting it: only what changed is touched.

``save_spec`` writes a whole new file (fine for a file labbench made); a user's own spec keeps its
comments, its order and its compact style when the window saves it again. ``tomlkit`` keeps the
document as written and changes single keys; reading stays on the standard library's tomllib.

What counts as changed: a key whose value differs between the spec the file gave and the spec
being saved (both as ``Spec.to_dict``). A default the file leaves out stays left out while it is
unchanged; a key whose value returns to the default the file left out is removed again.
"""

from __future__ import annotations

from typing import Any, Mapping

import tomlkit


def _item(value: Any) -> Any:
    if isinstance(value, Mapping):
        table = tomlkit.inline_table()
        for k, v in value.items():
            table[k] = _item(v)
        return table
    if isinstance(value, (list, tuple)):
        arr = tomlkit.array()
        for v in value:
            arr.append(_item(v))
        return arr
    return value


def updated_text(text: str, before: Mapping[str, Any], after: Mapping[str, Any]) -> str:
    """``text`` (a spec file that reads as ``before``) changed to read as ``after``.

    ``before`` / ``after``: ``Spec.to_dict`` of the file's spec and of the one to save (with the
    same base folder, so paths compare)."""
    doc = tomlkit.parse(text)
    file_view = doc.unwrap()
    for section in after:
        new, old = dict(after[section]), dict(before.get(section, {}))
        if new == old:
            continue
        if section not in doc:
            doc[section] = tomlkit.table()
        table = doc[section]
        written = file_view.get(section, {})
        for key, value in new.items():
            if old.get(key) != value or (key in written and written[key] != value):
                table[key] = _item(value)
        for key in [k for k in old if k not in new]:
            if key in table:
                del table[key]
    return tomlkit.dumps(doc)
