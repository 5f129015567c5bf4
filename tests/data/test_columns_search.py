"""Real-world column options through the spec and the ordinary search path (`labbench run`)."""

from __future__ import annotations

import subprocess
import sys

import numpy as np
import pandas as pd
import pytest

from labbench.errors import SpecError
from labbench.search.spec import loads_spec

BASE = '[data]\npath = "a.csv"\ntarget = "y"\n'


def test_data_keys_round_trip(tmp_path):
    text = BASE + ('missing_markers = ["not measured", "?"]\nthousands = "."\ndecimal = ","\n'
                   'keep = ["row"]\n')
    spec = loads_spec(text, tmp_path, "x.toml")
    d = spec.data
    assert d.missing_markers == ("not measured", "?") and d.thousands == "." and d.decimal == ","
    assert d.keep == ("row",)
    assert loads_spec(spec.to_toml(tmp_path), tmp_path, "x.toml") == spec
    plain = loads_spec(BASE, tmp_path)
    assert "missing_markers" not in plain.to_toml() and "keep" not in plain.to_toml()


@pytest.mark.parametrize("line, words", [
    ('missing_markers = "n/a"', ["data.missing_markers", "list"]),
    ('missing_markers = [1]', ["data.missing_markers"]),
    ('thousands = ";"', ["data.thousands", '","']),
    ('decimal = ";"', ["data.decimal", '"."']),
    ('thousands = "."', ["data.thousands", "must differ"]),
    ('keep = "row"', ["data.keep", "list"]),
    ('keep = ["y"]', ["data.keep", "target"]),
    ('keep = ["a"]\nignore = ["a"]', ["data.keep", "ignore"]),
])
def test_bad_data_keys_are_one_line_spec_errors(tmp_path, line, words):
    with pytest.raises(SpecError) as info:
        loads_spec(BASE + line + "\n", tmp_path, "x.toml")
    message = str(info.value)
    assert "\n" not in message
    for word in words:
        assert word in message, (word, message)


def _write_set(folder, n=90, seed=0):
    rng = np.random.default_rng(seed)
    x1, x2 = rng.normal(size=n).round(3), rng.normal(size=n).round(3)
    frame = pd.DataFrame({"row": np.arange(1, n + 1), "x1": x1.astype(object), "x2": x2,
                          "colour": np.array(["red", "green", "blue"])[np.arange(n) % 3],
                          "y": np.where(x1 + x2 > 0, "yes", "no")})
    frame.loc[7, "colour"] = "violet"              # a level in a single row
    frame.loc[[3, 40], "x1"] = "not measured"      # a declared missing marker
    frame.loc[11, "x1"] = "?"                      # a usual one
    frame.to_csv(folder / "a.csv", index=False)


def test_search_path_with_a_single_row_level_markers_and_an_id_column(tmp_path):
    _write_set(tmp_path)
    spec = tmp_path / "s.toml"
    spec.write_text(BASE + 'missing_markers = ["not measured"]\n'
                    "[evaluation]\nfolds = 3\nseed_spread = 0\n"
                    '[search]\ntrials = 2\npruner = "none"\n[space]\nepochs = { choices = [3, 4] }\n', encoding="utf-8")
    done = subprocess.run([sys.executable, "-m", "labbench", "run", str(spec)], capture_output=True,
                          text=True, timeout=300, cwd=tmp_path)
    out = done.stdout + done.stderr
    assert done.returncode == 0, out
    assert "2 finished" in out and "failed" not in out, out
    # the row counter is left out, and the command line says so
    assert "'row' looks like a row id" in out and "keep = [...]" in out, out

    spec.write_text(BASE + "[evaluation]\nfolds = 3\nseed_spread = 0\n[search]\ntrials = 1\n"
                    "[space]\nepochs = 2\n", encoding="utf-8")
    done = subprocess.run([sys.executable, "-m", "labbench", "run", str(spec), "--fresh"],
                          capture_output=True, text=True, timeout=300, cwd=tmp_path)
    # without the marker: exit 2 and one line naming the column, lines and values
    assert done.returncode == 2, done.stdout + done.stderr
    last = done.stderr.strip().splitlines()[-1]
    assert "'x1'" in last and "line 5" in last and "'not measured'" in last and "Traceback" not in done.stderr
