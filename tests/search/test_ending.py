"""labbench.search.ending: the command line and the window end a search the same way, leaving the
same files in the same folder."""

from __future__ import annotations

import json
import shutil
import threading
from pathlib import Path

import pytest

from labbench.cli import main
from labbench.search import events as ev
from labbench.search.ending import OUTPUT_NAMES, finish_search, out_dir
from labbench.search.spec import load_spec

from runner_support import iris_csv, load, write_spec


@pytest.fixture
def two_folders(tmp_path):
    """The same spec and data in two folders (one for the CLI, one for the window)."""
    cli, window = tmp_path / "cli", tmp_path / "window"
    cli.mkdir()
    iris_csv(cli)
    write_spec(cli, trials=2, seed_spread=2)
    shutil.copytree(cli, window)
    return cli / "exp.toml", window / "exp.toml"


def test_the_cli_and_the_window_leave_the_same_files(two_folders, capsys):
    cli_spec, window_spec = two_folders
    assert main(["run", str(cli_spec), "--quiet"]) == 0
    printed = capsys.readouterr().out

    from labbench.gui.session import run_search        # the window's search-process entry point

    seen: list[ev.Event] = []
    result = run_search(load_spec(window_spec), seen.append, threading.Event())

    cli_out, window_out = cli_spec.parent / "exp_out", window_spec.parent / "exp_out"
    cli_files = sorted(p.name for p in cli_out.iterdir())
    window_files = sorted(p.name for p in window_out.iterdir())
    assert cli_files == window_files == sorted(OUTPUT_NAMES)      # onnx is a test extra
    assert sorted(Path(f).name for f in result["files"]) == sorted(OUTPUT_NAMES)
    assert all(str(cli_out / name) in printed for name in OUTPUT_NAMES)

    # one WinnerReady, the last event, naming every file: the window learns where they are once
    ready = [e for e in seen if isinstance(e, ev.WinnerReady)]
    assert len(ready) == 1 and seen[-1] is ready[0]
    assert sorted(ready[0].files) == sorted(str(window_out / n) for n in OUTPUT_NAMES)

    # the same seeded search: the same winner, settings and scores either way
    a = json.loads((cli_out / "winner.json").read_text())
    b = json.loads((window_out / "winner.json").read_text())
    for key in ("trial_number", "settings", "cv_mean", "fold_scores", "holdout_score"):
        assert a[key] == b[key], key
    assert a["study_name"] == b["study_name"] == "exp"


def test_finish_search_on_a_stored_search_refuses_a_file_as_the_folder(tmp_path):
    from labbench.errors import LabbenchError

    iris_csv(tmp_path)
    spec_path = write_spec(tmp_path, trials=1)
    assert main(["run", str(spec_path), "--quiet"]) == 0
    spec = load_spec(spec_path)
    study = load(tmp_path / "exp.db")
    data = (tmp_path / "iris.csv").read_bytes()
    with pytest.raises(LabbenchError, match="iris.csv: is a file, not a folder"):
        finish_search(spec, study, None, tmp_path / "iris.csv")
    assert (tmp_path / "iris.csv").read_bytes() == data                 # nothing overwritten
    # the default folder is <spec name>_out beside the spec
    assert out_dir(spec) == tmp_path / "exp_out"
    stages = []
    summary, model, files = finish_search(spec, study, None, tmp_path / "elsewhere",
                                          stages.append, seed_spread=0)
    assert sorted(Path(f).name for f in files) == sorted(OUTPUT_NAMES)
    assert summary["trial_number"] == model.scores["trial_number"]
    names = [e.stage for e in stages if isinstance(e, ev.FinalStage)]
    assert names[0] == "refit" and names[-1] == "files"
