"""The one ending of a search, for ``labbench run`` and the window alike.

``finish_search(spec, study, prepared, out_dir, emit)`` checks the winner
(``labbench.search.winner.finalize``: refit, hold-out, seed spread, importance, ``winner.json``,
``winner.toml``) and then writes every hand-off file of the trained winner
(``labbench.export.export_all``: the model bundle, the numpy-only prediction script, the ONNX
file) into the same folder. The product rule: **a finished search always leaves the same files
in the same folder**, ``<spec name>_out`` beside the spec (``OUTPUT_NAMES``), whether it ran in
the window or with ``labbench run``; the window says where when they are written.

One ``WinnerReady`` event is emitted at the very end, naming every file written (the one
``finalize`` sends about its two files is held back and folded into it), so a listener learns of
the winner once, when all its files exist.

This module orchestrates the search and export packages; it sits above both (nothing in
``labbench.export`` imports it).
"""

from __future__ import annotations

import logging
import os
from pathlib import Path
from typing import Any

from labbench.search import events

log = logging.getLogger("labbench.search.ending")

# every file a finished search writes into its output folder (the ONNX file only when the onnx
# package is installed)
OUTPUT_NAMES = ("winner.json", "winner.toml", "model.npz", "predict_with_numpy.py", "model.onnx")


def out_dir(spec: Any, given: str | os.PathLike | None = None) -> Path:
    """The output folder: ``given``, else ``<spec name>_out`` beside the spec file, else
    ``<search name>_out`` in the working folder (a spec never saved to a file)."""
    if given:
        return Path(given)
    if getattr(spec, "source_path", None):
        src = Path(spec.source_path).resolve()
        return src.parent / f"{src.stem}_out"
    from labbench.fileio import safe_file_name

    return Path.cwd() / f"{safe_file_name(spec.study_name())}_out"


def picked_dir(spec: Any, number: int, given: str | os.PathLike | None = None) -> Path:
    """Where the files of a trial the user picked instead of the best go (``labbench run
    --pick N``, the window's pick from the trade-off front): ``given``, else
    ``<output folder>/trial_N``, so the best's own files stay beside it."""
    return Path(given) if given else out_dir(spec) / f"trial_{int(number)}"


def check_out(spec: Any, target: Path, *, spec_path: str | os.PathLike | None = None,
              option: str = "--out") -> Path:
    """Refuse an output folder (or a file in it) that is a file, the spec or the data file: one
    clear line (``OutputError``) before anything runs or is written."""
    from labbench.fileio import check_out_dir, check_output

    inputs = (("spec file", spec_path or getattr(spec, "source_path", None)),
              ("data file", spec.data.path))
    check_out_dir(target, inputs=inputs, option=option)
    for name in OUTPUT_NAMES:        # e.g. `labbench run winner.toml --out .`
        check_output(target / name, inputs=inputs, what="output folder", option=option)
    return target


def finish_search(spec: Any, study: Any, prepared: Any = None, target: str | os.PathLike | None = None,
                  emit: events.Emit = events.ignore, **finalize_options: Any
                  ) -> tuple[dict, Any, list[str]]:
    """Check the winner and write all its files; returns ``(summary, model, files written)``.

    ``target``: the output folder (default :func:`out_dir`; for a picked trial use
    :func:`picked_dir`). ``finalize_options`` go to ``finalize`` (``importance``, ``seed_spread``,
    ``dtype``, ``trial_number``: a trial the user picked instead of the best). Raises what
    ``finalize`` raises (no complete trial, every refit diverged); nothing is written then.
    """
    from labbench.export import export_all
    from labbench.search.winner import finalize

    folder = Path(target) if target is not None else out_dir(spec)
    check_out(spec, folder)
    files: list[str] = []

    def relay(event: events.Event) -> None:
        if isinstance(event, events.WinnerReady):      # re-announced below with every file
            files.extend(event.files)
            return
        emit(event)

    summary, model = finalize(spec, study, prepared, emit=relay, out_dir=folder, **finalize_options)
    emit(events.FinalStage("files", f"Saving the trained winner (model bundle, numpy script, "
                                    f"ONNX) to {folder}"))
    files.extend(str(p) for p in export_all(model, summary, folder))
    if not any(Path(f).name == "model.onnx" for f in files):
        emit(events.Notice("model.onnx was not written (the onnx package is needed for it); the "
                           "model bundle and the numpy script are there", "warning"))
    emit(events.WinnerReady(summary=summary, files=tuple(files)))
    log.info("winner files in %s: %s", folder, ", ".join(Path(f).name for f in files))
    return summary, model, files
