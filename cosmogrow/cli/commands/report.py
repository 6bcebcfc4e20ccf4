"""`cosmogrow report`: one self-contained web page from results folders."""

from pathlib import Path


def register(subparsers):
    parser = subparsers.add_parser(
        "report", help="collect results folders into one self-contained HTML page",
        description="Collect the results folders of fit, inject, nulltest, challenge, budget and "
                    "remnants into one HTML page (figures embedded, no network access needed). A "
                    "folder without results of its own stands for its result subfolders.")
    parser.add_argument("folders", nargs="+", metavar="DIR", help="results folders")
    parser.add_argument("--out", default="report.html", help="HTML file to write (default: report.html)")
    parser.add_argument("--title", help="page title (default: cosmogrow report)")
    parser.set_defaults(run=run)


def run(args):
    from ...report.html import build_report

    path = build_report([Path(folder) for folder in args.folders], args.out, title=args.title)
    print(f"report written to {path}")
    return 0
