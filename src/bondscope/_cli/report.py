"""`bondscope report`: one self-contained HTML page for a batch results directory."""

from ._common import FIT_FLAGS, add_flags

HELP = "write a self-contained HTML report (table, failures, figures) of a batch results dir"
ORDER = 41


def add_arguments(p):
    p.add_argument("results", metavar="RESULTS_DIR", help="directory written by `bondscope batch`")
    p.add_argument("-o", "--output", metavar="FILE", default="report.html",
                   help="the HTML file to write (default: %(default)s)")
    p.add_argument("--title", help="page heading (default: the directory's name)")
    p.add_argument("--no-fit", action="store_true",
                   help="no central-charge fit (in the table or the entropy figures)")
    add_flags(p, *FIT_FLAGS, "quiet")


def run(args):
    from .._figures._names import visible
    from .._report import write_report
    from .plot import fit_choice

    path = write_report(args.results, args.output, title=args.title, fit=fit_choice(args))
    print(f"report written to {visible(path)}")
    return 0
