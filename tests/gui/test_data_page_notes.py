"""The data page shows the core's column notices (the same lines `labbench run` prints)."""

from __future__ import annotations

import numpy as np
import pandas as pd

from labbench.data import load_table


def test_id_like_and_constant_columns_are_named_on_the_data_page(make_window, tmp_path):
    n = 40
    rng = np.random.default_rng(0)
    path = tmp_path / "parts.csv"
    pd.DataFrame({"serial": [f"P{i:04d}x{(i * 37) % 101}" for i in range(n)], "site": ["A"] * n,
                  "size": rng.normal(size=n).round(3), "ok": rng.integers(0, 2, n)}).to_csv(path, index=False)
    w = make_window()
    assert w.open_path(str(path))
    text = w.data.column_notes.text()
    # the same lines as the table's warnings (one rule in labbench.data.screen), file name only
    expected = [s.replace(str(path), path.name) for s in load_table(path, "ok").warnings]
    assert text.splitlines() == expected
    assert "'serial' looks like a row id" in text and "'site' has the same value" in text
    # unticking the column (leaving it out by hand) removes its notice
    for name, _kind, use in w.data._row_widgets():
        if name == "serial":
            use.setChecked(False)
    assert "'serial'" not in w.data.column_notes.text()
