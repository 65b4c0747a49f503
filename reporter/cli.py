"""The ``anova-report`` command: ``check`` and ``run``.

Exit codes (:data:`EXIT_CODES`; the same list is in ``--help``, README.md and DEVELOPERS.md):

* 0: done.
* 1: reserved for a check that finds a difference (a planned ``verify`` command, not yet
  available); no command returns it yet.
* 2: bad input (plan, data, options or output folder), with one clear message and no
  traceback unless ``--debug``.
* 3: internal error: a one-line message naming the file that holds the traceback (a new file
  made by :func:`tempfile.mkstemp` in the temporary folder, readable only by the user).
* 130 and 143: stopped by SIGINT (Ctrl-C) or SIGTERM (128 plus the signal number, as shells
  report a process killed by a signal). Files in ``--out`` are left as they were before the run.
* 141: standard output was closed before everything was printed (a broken pipe, as in
  ``anova-report check PLAN | head -1``); the command stops quietly, as a program killed by
  SIGPIPE would (128 + 13). Files already written by ``run`` stay written.

Everything the command prints passes through :func:`reporter.render.visible.show_controls`,
so control and bidirectional characters from a plan or a path are shown, never obeyed.
"""

from __future__ import annotations

import argparse
import contextlib
import gc
import os
import signal
import sys
import tempfile
import threading
import traceback

from reporter.errors import OptionError, ReporterError
from reporter.render.visible import show_controls

FORMATS = ("json", "html", "pdf", "md")

EXIT_OK, EXIT_CHECK_FAILED, EXIT_BAD_INPUT, EXIT_INTERNAL = 0, 1, 2, 3
EXIT_BROKEN_PIPE = 128 + 13

#: Every exit code with its meaning, as --help prints it.
EXIT_CODES = (
    (0, "done"),
    (1, "reserved for a check that finds a difference (a 'verify' command, not yet available)"),
    (2, "bad input: plan, data, options or output folder"),
    (3, "internal error (the message names the file holding the traceback)"),
    (130, "stopped by SIGINT (Ctrl-C)"),
    (143, "stopped by SIGTERM"),
    (141, "output closed early (a broken pipe, as in 'check PLAN | head -1')"),
)

_STOP_SIGNALS = (signal.SIGINT, signal.SIGTERM)


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
        epilog="Exit codes: " + "; ".join(f"{code} {what}" for code, what in EXIT_CODES)
        + ". A run that is stopped leaves the files in --out as they were.",
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
        "report.html, report.pdf (PDF/A-3b with the plan and results attached), report.md, results.json. "
        "The folder is checked before the fit; the files are replaced all together or not at all, "
        "also when the run is stopped by Ctrl-C (exit 130) or SIGTERM (exit 143).",
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
    r.add_argument("--quiet", action="store_true", help="print no progress or notices on stderr, only errors")
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


class Stopped(KeyboardInterrupt):
    """Raised in the main thread by SIGINT or SIGTERM while the command runs."""

    def __init__(self, signum: int):
        super().__init__(signal.Signals(signum).name)
        self.signum = signum


@contextlib.contextmanager
def _stop_on_signals():
    """Turn SIGINT and SIGTERM into :class:`Stopped` (once: a second signal while the first is
    being handled is ignored, so the clean-up it triggers runs to the end)."""
    if threading.current_thread() is not threading.main_thread():
        yield
        return
    fired: list[int] = []

    def stop(signum, frame):
        if fired:
            return
        fired.append(signum)
        raise Stopped(signum)

    previous = {s: signal.getsignal(s) for s in _STOP_SIGNALS}
    for s in _STOP_SIGNALS:
        signal.signal(s, stop)
    try:
        yield
    finally:
        for s, handler in previous.items():
            signal.signal(s, handler if handler is not None else signal.SIG_DFL)


def _skip_exit_collection() -> None:
    """The process is about to exit: move every object to the collector's permanent generation,
    so that the interpreter's shutdown does not search them all for reference cycles again
    (about a sixth of the CPU time of a demo report). Memory is returned to the system at exit
    either way; files are closed and flushed by then."""
    gc.freeze()


def _say(text: str, keep: str = "") -> None:
    """One message on stderr, hidden characters shown; a closed stderr is not an error."""
    if sys.stderr is None:  # started with stderr closed
        return
    with contextlib.suppress(OSError, ValueError):
        print(f"anova-report: {show_controls(text, keep)}", file=sys.stderr)
        sys.stderr.flush()


def _one_line(text: str, limit: int = 300) -> str:
    text = " ".join(show_controls(text, keep="\n").split())
    return text if len(text) <= limit else text[: limit - 1] + "…"


def _save_traceback(text: str) -> str | None:
    """The traceback in a new file (unique name, created exclusively, never through a link)."""
    try:
        fd, path = tempfile.mkstemp(prefix="anova-report-crash-", suffix=".txt")
    except OSError:
        return None
    try:
        with os.fdopen(fd, "w", encoding="utf-8") as fh:
            fh.write(text)
    except OSError:
        return None
    return path


def _quiet_stdout() -> None:
    """After a broken pipe, point stdout at the null device so that the flush at exit is quiet."""
    with contextlib.suppress(OSError, ValueError, AttributeError):
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
        os.close(devnull)


def _cmd_check(args) -> int:
    from reporter.api import prepare
    from reporter.render.console import render_check

    prep = prepare(args.plan)
    print(render_check(prep))
    return 0


def _cmd_run(args) -> int:
    formats = _formats(args.format)
    try:
        from reporter.api import prepare
        from reporter.run import write_outputs

        if args.quiet:  # also silences the out-of-core reader's progress bar (duckdb_source)
            os.environ["ANOVA_REPORT_QUIET"] = "1"
        prep = prepare(args.plan)
        written = write_outputs(prep, args.out, formats, quiet=args.quiet)
    except KeyboardInterrupt as exc:
        if not getattr(exc, "__notes__", None):
            exc.add_note("no file was written")
        raise
    for path in written:
        print(show_controls(f"wrote {path}"))
    return 0


def main(argv: list[str] | None = None) -> int:
    if argv is None:  # the program itself (console script, python -m reporter)
        try:
            return main(sys.argv[1:])
        finally:
            _skip_exit_collection()
    argv = list(argv)
    debug = "--debug" in argv
    with _stop_on_signals():
        try:
            args = _parser().parse_args(argv)
            if args.command is None:
                _parser().print_help()
                code = EXIT_BAD_INPUT
            else:
                code = {"check": _cmd_check, "run": _cmd_run}[args.command](args)
            sys.stdout.flush()  # a closed pipe shows here, not at exit
            return code
        except ReporterError as exc:
            if debug:
                traceback.print_exc()
            _say(f"error: {exc}", keep="\n")
            return exc.exit_code
        except BrokenPipeError:
            _quiet_stdout()
            return EXIT_BROKEN_PIPE
        except KeyboardInterrupt as exc:
            signum = getattr(exc, "signum", signal.SIGINT)
            notes = getattr(exc, "__notes__", None)
            _say(f"stopped by {signal.Signals(signum).name}" + (f"; {notes[-1]}." if notes else "."))
            return 128 + signum
        except Exception as exc:  # an internal error: short message, traceback to a file
            if debug:
                traceback.print_exc()
            path = _save_traceback(traceback.format_exc())
            where = f" The traceback is in {path}; please report it with that file." if path else " Please report it."
            _say(f"internal error ({type(exc).__name__}: {_one_line(str(exc))}).{where}")
            return EXIT_INTERNAL


if __name__ == "__main__":
    sys.exit(main())
