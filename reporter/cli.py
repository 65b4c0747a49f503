"""The ``anova-report`` command.

Exit codes: 0 ok; 1 a check failed (``verify`` found a difference); 2 bad input (plan, data or
options), with one clear line and no traceback unless ``--debug``; 3 an internal error (a short
message; the traceback is saved to a file whose path is printed).
"""

from __future__ import annotations

import argparse
import sys
import tempfile
import time
import traceback
from pathlib import Path

from reporter.errors import OptionError, ReporterError

FORMATS = ("json", "html", "pdf", "md")


class _Parser(argparse.ArgumentParser):
    def error(self, message: str):  # argparse would exit 2 with usage; keep one clear line
        raise OptionError(f"{message}. See '{self.prog} --help'.")


def _parser() -> argparse.ArgumentParser:
    p = _Parser(
        prog="anova-report",
        description=(
            "Turn a plan file (TOML) and a data file into a checkable ANOVA report: design matrix, "
            "contrasts, tests, effect sizes, prose and provenance."
        ),
        epilog="Exit codes: 0 ok, 1 a check failed, 2 bad input, 3 internal error.",
    )
    p.add_argument("--debug", action="store_true", help="show the full traceback of any error")
    p.add_argument("--version", action="version", version=f"anova-report {_version()}")
    sub = p.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)

    c = sub.add_parser(
        "check",
        help="validate a plan and its data; show cells, design matrix, β meanings and contrasts (writes nothing)",
        description="Validate PLAN and its data file and print what the analysis will do: the cells and "
        "their n, the design matrix, what each coefficient means, and every hypothesis compiled to "
        "contrasts over the cell means and over the coefficients. Writes nothing.",
        epilog="Example: anova-report check demo_project/factorial.toml",
    )
    c.add_argument("plan", metavar="PLAN", help="the plan file (.toml)")
    c.add_argument("--debug", action="store_true", help=argparse.SUPPRESS)

    r = sub.add_parser(
        "run",
        help="fit the plan's model and write the report",
        description="Fit PLAN to its data and write the requested report files into --out: "
        "report.html, report.pdf (PDF/A-3b with the plan and results attached), report.md, results.json.",
        epilog="Example: anova-report run demo_project/oneway.toml --out report --format html,pdf. "
        "Set SOURCE_DATE_EPOCH for byte-identical reruns.",
    )
    r.add_argument("plan", metavar="PLAN", help="the plan file (.toml)")
    r.add_argument("--out", metavar="DIR", default="anova-report-out", help="output folder (default: %(default)s)")
    r.add_argument(
        "--format",
        metavar="LIST",
        default="html,json",
        help="comma-separated formats among json, html, pdf, md (default: %(default)s)",
    )
    r.add_argument("--debug", action="store_true", help=argparse.SUPPRESS)
    return p


def _version() -> str:
    from importlib import metadata

    try:
        return metadata.version("anova-report")
    except metadata.PackageNotFoundError:
        return "(not installed)"


def _formats(text: str) -> tuple[str, ...]:
    items = [t.strip().lower() for t in text.split(",") if t.strip()]
    bad = [t for t in items if t not in FORMATS]
    if bad or not items:
        raise OptionError(
            f"--format: unknown format {', '.join(repr(b) for b in bad) or '(none given)'}; "
            f"choose from {', '.join(FORMATS)}, e.g. --format html,pdf."
        )
    return tuple(dict.fromkeys(items))


def _cmd_check(args) -> int:
    from reporter.api import prepare
    from reporter.render.console import render_check

    prep = prepare(args.plan)
    print(render_check(prep))
    return 0


def _cmd_run(args) -> int:
    formats = _formats(args.format)
    from reporter.api import prepare
    from reporter.run import write_outputs

    prep = prepare(args.plan)
    written = write_outputs(prep, Path(args.out), formats)
    for path in written:
        print(f"wrote {path}")
    return 0


def main(argv: list[str] | None = None) -> int:
    argv = list(sys.argv[1:] if argv is None else argv)
    debug = "--debug" in argv
    try:
        args = _parser().parse_args(argv)
        if args.command is None:
            _parser().print_help()
            return 2
        return {"check": _cmd_check, "run": _cmd_run}[args.command](args)
    except ReporterError as exc:
        if debug:
            traceback.print_exc()
        print(f"anova-report: error: {exc}", file=sys.stderr)
        return exc.exit_code
    except KeyboardInterrupt:
        print("anova-report: interrupted", file=sys.stderr)
        return 3
    except Exception as exc:  # an internal error: short message, traceback to a file
        if debug:
            traceback.print_exc()
        path = Path(tempfile.gettempdir()) / f"anova-report-crash-{time.strftime('%Y%m%d-%H%M%S')}.txt"
        try:
            path.write_text(traceback.format_exc(), encoding="utf-8")
            where = f" The traceback is in {path}."
        except OSError:
            where = ""
        print(f"anova-report: internal error ({type(exc).__name__}: {exc}).{where} Please report it.", file=sys.stderr)
        return 3


if __name__ == "__main__":
    sys.exit(main())
