"""Taking a trained winner out of labbench: the model bundle (.npz, no pickle), a numpy-only
prediction script, ONNX, predictions for a CSV file, and the HTML report of a search.

The optional packages (onnx for the ONNX file, optuna for the report) are imported only when the
function that needs them runs.
"""

from __future__ import annotations

import dataclasses
import logging
import os
from pathlib import Path
from typing import Any, Mapping

from labbench.export.bundle import bundle_metadata, load_bundle, save_bundle
from labbench.export.onnx_export import export_onnx
from labbench.export.predict import predict_file
from labbench.export.report import write_report
from labbench.export.snippet import write_snippet

log = logging.getLogger("labbench.export")

__all__ = ["save_bundle", "load_bundle", "bundle_metadata", "export_onnx", "write_snippet",
           "write_report", "predict_file", "export_all", "BUNDLE_NAME", "ONNX_NAME"]

BUNDLE_NAME = "model.npz"
ONNX_NAME = "model.onnx"


def export_all(model, summary: Mapping[str, Any] | None, out_dir: str | os.PathLike) -> list[Path]:
    """Bundle + numpy script + ONNX of ``model`` in ``out_dir``; returns the paths written.

    ``summary`` (winner.json's dict) fills scores the model does not carry yet. The ONNX file is
    skipped (with a warning) when the onnx package is not installed. The HTML report is written
    separately from the stored search (:func:`write_report`).
    """
    from labbench.errors import LabbenchError

    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    if summary:
        scores = dict(model.scores)
        for key in ("cv_mean", "cv_std", "fold_scores", "holdout_score", "trial_number"):
            if scores.get(key) is None and summary.get(key) is not None:
                scores[key] = summary[key]
        model = dataclasses.replace(model, scores=scores)
    bundle = save_bundle(model, out / BUNDLE_NAME)
    paths = [bundle, write_snippet(bundle)]
    try:
        paths.append(export_onnx(model, out / ONNX_NAME))
    except LabbenchError as exc:
        log.warning("ONNX file not written: %s", exc)
    return paths
