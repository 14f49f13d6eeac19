"""`bondscope report`: one self-contained HTML page for a batch results directory."""

from ._common import UsageError

HELP = "write a self-contained HTML report (table, failures, figures) of a batch results dir"
ORDER = 41


def add_arguments(p):
    p.add_argument("results", metavar="RESULTS_DIR", help="directory written by `bondscope batch`")
    p.add_argument("-o", "--output", metavar="FILE", default="report.html",
                   help="the HTML file to write (default: %(default)s)")
    p.add_argument("--boundary", choices=("open", "periodic"),
                   help="boundary condition for the central-charge fits (default: each "
                        "checkpoint's 'boundary' attribute, else open)")
    p.add_argument("--title", help="page heading (default: the directory's name)")


def run(args):
    from pathlib import Path

    if Path(args.output).suffix.lower() not in (".html", ".htm"):
        raise UsageError(f"-o {args.output}: the report is an HTML page; give it an .html name")
    if not Path(args.results).is_dir():
        raise OSError(f"{args.results}: no such results directory")
    from .._report import write_report
    from ._warnings import quiet_warnings

    with quiet_warnings():
        path = write_report(args.results, args.output, boundary=args.boundary, title=args.title)
    print(f"report written to {path}")
    return 0
