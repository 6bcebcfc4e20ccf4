"""`cosmogrow report`: one self-contained web page from results folders."""

import sys
from pathlib import Path

EXIT_INPUT_PROBLEMS = 3


def register(subparsers):
    parser = subparsers.add_parser(
        "report", help="collect results folders into one self-contained HTML page",
        description="Collect the results folders of fit, inject, nulltest, challenge, budget and "
                    "remnants into one HTML page (figures embedded, no network access needed). A "
                    "folder without results of its own stands for its result subfolders. Every file "
                    "read is checked; an unreadable or malformed one is named in the page's warnings "
                    "and the exit code is 3.")
    parser.add_argument("folders", nargs="+", metavar="DIR", help="results folders")
    parser.add_argument("--out", default="report.html", help="HTML file to write (default: report.html)")
    parser.add_argument("--title", help="page title (default: cosmogrow report)")
    parser.add_argument("--truth", metavar="FILE",
                        help="truth file of simulated data (JSON with the true k, e.g. demo_data/truth.json); "
                             "the page then shows the true k beside the fits")
    parser.set_defaults(run=run)


def run(args):
    from ...report.html import build_report

    written = build_report([Path(folder) for folder in args.folders], args.out, title=args.title,
                           truth=args.truth)
    print(f"report written to {written.path}")
    if written.problems:
        count = len(written.problems)
        print(f"{count} input file problem{'s' if count != 1 else ''} (listed among the page's warnings): "
              + "; ".join(written.problems), file=sys.stderr)
        return EXIT_INPUT_PROBLEMS
    return 0
