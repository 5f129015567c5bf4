"""``labbench predict`` and ``labbench report``.

``labbench predict BUNDLE DATA.csv [-o OUT.csv]``   predictions from a saved model bundle
``labbench report SPEC|URL [--search NAME] [-o OUT.html]``   the HTML report of a search

Bad input raises a ``LabbenchError``; ``labbench.cli`` prints its one line and exits 2.
"""

from __future__ import annotations

import sys

from labbench.export.predict import predict_file
from labbench.export.report import write_report


def add_parser(subparsers) -> None:
    predict = subparsers.add_parser(
        "predict", help="predictions for a CSV file from a saved model bundle",
        description="Predict every row of DATA.csv with a model bundle (.npz) saved by labbench. "
        "Columns are matched by name (any order; extra columns are ignored); the model's id "
        "column, when present, is copied in front. Classifiers add one proba_<class> column per "
        "class; a map or group model writes each row's unit, group and distance (numbered from "
        "0), Hebbian features component_1 ... A category the model never saw is encoded as no category (a warning names it).")
    predict.add_argument("bundle", metavar="BUNDLE", help="the model bundle (.npz)")
    predict.add_argument("data", metavar="DATA.csv", help="the rows to predict")
    predict.add_argument("-o", "--out", metavar="OUT.csv",
                         help="where to write (default: <data name>_predictions.csv beside the data)")
    predict.set_defaults(func=predict_command)

    report = subparsers.add_parser(
        "report", help="write the HTML report of a search",
        description="Write one self-contained HTML file about a search: the data, the search "
        "space, the trials, the winner and how sure we are, the environment, the cautions. "
        "Images are embedded; it opens without a network.")
    report.add_argument("source", metavar="SPEC.toml|URL", help="a spec file or a database URL")
    report.add_argument("--search", "--study", dest="study", metavar="NAME",
                        help="the search's name in the database (default: the spec's, or the only one)")
    report.add_argument("-o", "--out", metavar="OUT.html",
                        help="where to write (default: <spec name>_report.html in the output folder)")
    report.set_defaults(func=report_command)


def predict_command(args) -> int:

    path, rows = predict_file(args.bundle, args.data, args.out)
    print(f"wrote {rows} prediction(s) to {path}", file=sys.stdout)
    return 0


def report_command(args) -> int:

    path = write_report(args.source, args.out, study=args.study)
    print(f"wrote the report to {path}", file=sys.stdout)
    return 0
