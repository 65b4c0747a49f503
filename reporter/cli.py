"""The ``anova-report`` command: ``init``, ``check``, ``run`` and ``verify`` (one :class:`Command` each in :data:`COMMANDS`).

Results go to stdout; messages (progress, notes, warnings, errors) go to stderr, filtered by
``--quiet`` and ``--verbose`` (:class:`Messages`).

Exit codes (:data:`EXIT_CODES`; the same list is in ``--help``, README.md and DEVELOPERS.md):

* 0: done.
* 1: a check failed: ``check`` read the plan and the data but the data fail a data check
  (:mod:`reporter.checks` lists the checks and what each one means); every failed check is
  named on stderr. Or ``verify`` found a difference: an input whose hash changed, a results
  file edited after it was written, or a recomputed number that does not agree (listed on stdout).
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
import textwrap
import threading
import traceback
from dataclasses import dataclass
from typing import Callable

from reporter.errors import OptionError, ReporterError
from reporter.render.visible import show_controls

FORMATS = ("json", "html", "pdf", "md")

EXIT_OK, EXIT_CHECK_FAILED, EXIT_BAD_INPUT, EXIT_INTERNAL = 0, 1, 2, 3
EXIT_BROKEN_PIPE = 128 + 13

#: Every exit code with its meaning, as --help prints it.
EXIT_CODES = (
    (0, "done"),
    (1, "a check failed: 'check' found data that fail a data check (each failure is named on stderr), "
        "or 'verify' found a difference (an input, the results file itself, or a recomputed number)"),
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


class _Help(argparse.HelpFormatter):
    """Wraps prose paragraphs; keeps lines that start with two spaces (the examples) as written."""

    def _fill_text(self, text, width, indent):
        out = []
        for line in text.splitlines():
            if line.startswith("  ") or not line.strip():
                out.append(indent + line)
            else:
                out.append(textwrap.fill(line, width, initial_indent=indent, subsequent_indent=indent))
        return "\n".join(out)


class Messages:
    """What a command says on stderr, by level: ``quiet`` (errors and failed checks only),
    normal (adds notes, warnings and progress) or ``verbose`` (adds each step). Results go to
    stdout and never pass through here."""

    def __init__(self, quiet: bool = False, verbose: bool = False):
        self.level = 0 if quiet else (2 if verbose else 1)

    @property
    def quiet(self) -> bool:
        return self.level == 0

    def note(self, text: str) -> None:
        if self.level >= 1:
            _say(text)

    def warn(self, text: str) -> None:
        if self.level >= 1:
            _say(f"warning: {text}")

    def detail(self, text: str) -> None:
        if self.level >= 2:
            _say(text)

    def failed(self, text: str) -> None:
        _say(text)


@dataclass(frozen=True)
class Command:
    """One subcommand: how it is listed and documented, its own arguments, and what it runs.

    Every command also gets ``--quiet``, ``--verbose`` and ``--debug``; ``run(args)`` returns
    the exit code and finds the stderr channel in ``args.messages`` (a :class:`Messages`).
    To add a command, write its two functions and add one ``Command(...)`` to :data:`COMMANDS`.
    """

    name: str
    summary: str
    description: str
    examples: tuple[str, ...]
    arguments: Callable[[argparse.ArgumentParser], None]
    run: Callable[[argparse.Namespace], int]
    notes: str = ""


def _parser() -> argparse.ArgumentParser:
    p = _Parser(
        prog="anova-report",
        description=(
            "Turn a plan file (TOML) and a data file into a checkable ANOVA report: design matrix, "
            "contrasts, tests, effect sizes, prose and provenance. Results go to standard output, "
            "messages (progress, notes, warnings, errors) to standard error."
        ),
        epilog="examples:\n  anova-report check demo_project/oneway.toml\n"
        "  anova-report run demo_project/oneway.toml --out report --format html,pdf\n\n"
        "Exit codes:\n" + "\n".join(f"  {code:>3}  {what}" for code, what in EXIT_CODES)
        + "\nA run that is stopped leaves the files in --out as they were.",
        formatter_class=_Help,
    )
    p.add_argument("--debug", action="store_true", help="show the full traceback of any error")
    p.add_argument("--version", action="version", version=f"anova-report {_version()}")
    sub = p.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    for cmd in COMMANDS:
        examples = "\n".join(f"  {e}" for e in cmd.examples)
        c = sub.add_parser(
            cmd.name,
            help=cmd.summary,
            description=cmd.description,
            epilog=f"example{'s' if len(cmd.examples) > 1 else ''}:\n{examples}"
            + (f"\n\n{cmd.notes}" if cmd.notes else ""),
            formatter_class=_Help,
        )
        cmd.arguments(c)
        talk = c.add_mutually_exclusive_group()
        talk.add_argument("-q", "--quiet", action="store_true", help="print nothing on stderr but errors and failed checks")
        talk.add_argument("-v", "--verbose", action="store_true", help="also print each step on stderr")
        c.add_argument("--debug", action="store_true", help=argparse.SUPPRESS)
        c.set_defaults(handler=cmd.run)
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


#: True when :func:`main` runs as the program itself (console script, ``python -m reporter``),
#: False when it is called from Python: only the program's own process may be prepared for it.
_PROGRAM = False


def _load_numerics() -> None:
    """In the program's own process, import scipy.special before the fitting layer does,
    without the NumPy submodules it never uses (:mod:`reporter.numerics.scipy_import`)."""
    if _PROGRAM:
        from reporter.numerics.scipy_import import import_special_lean

        import_special_lean()


def _one_blas_thread() -> None:
    """Before NumPy loads, one OpenBLAS thread unless OPENBLAS_NUM_THREADS says otherwise.

    NumPy and SciPy each load their own OpenBLAS, which starts a worker thread per core that
    busy-waits for a while after start-up and after every threaded call. The program's linear
    algebra is on cell-level matrices and vectors, far below the sizes where OpenBLAS would share
    work between threads, so those threads only burn CPU time the DuckDB queries could use:
    importing numpy and scipy.special took 0.33 s of CPU in 0.18 s with them, 0.14 s in 0.14 s
    without (2 cores)."""
    if "numpy" not in sys.modules:
        os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")


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
    # A path that is not UTF-8 holds surrogates: written as \udcXX, so the message is never lost.
    text = show_controls(text, keep).encode("utf-8", "backslashreplace").decode("utf-8")
    with contextlib.suppress(OSError, ValueError):
        print(f"anova-report: {text}", file=sys.stderr)
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


def _plan_argument(p: argparse.ArgumentParser) -> None:
    p.add_argument("plan", metavar="PLAN", help="the plan file (.toml)")


def _cmd_check(args) -> int:
    from reporter.api import prepare
    from reporter.checks import data_checks, failed
    from reporter.render.console import render_check

    say = args.messages
    prep = prepare(args.plan, require_estimable=False)
    _describe_inputs(prep, say)
    findings = data_checks(prep)
    print(render_check(prep, findings))
    for f in findings:
        if f.status == "note":
            say.warn(f"{f.check}: {f.message}")
        elif f.status == "passed":
            say.detail(f"check passed: {f.check}: {f.message}")
    bad = failed(findings)
    for f in bad:
        say.failed(f"check failed: {f.check}: {f.message}")
    if bad:
        say.failed(f"{len(bad)} data check(s) failed; 'anova-report run' would refuse these data.")
        return EXIT_CHECK_FAILED
    return EXIT_OK


def _describe_inputs(prep, say: Messages) -> None:
    say.detail(f"plan: {prep.plan.source or '(built in Python)'}")
    d = prep.data
    say.detail(f"data: {d.source} ({d.format}, read {d.reader}): {d.n_read} rows read, {d.n} analysed, "
               f"{prep.design.k} cells")


def _run_arguments(r: argparse.ArgumentParser) -> None:
    _plan_argument(r)
    r.add_argument("--out", metavar="DIR", default="anova-report-out", help="output folder (default: %(default)s)")
    r.add_argument(
        "--format",
        metavar="LIST",
        default="html,json",
        help="comma-separated formats among json, html, pdf, md (default: %(default)s)",
    )
    r.add_argument("--lock", metavar="FILE", default=None,
                   help="compare the run with this locked plan (default: PLAN's .lock.json beside it, if any)")


@contextlib.contextmanager
def _quiet_readers(quiet: bool):
    """Tell the out-of-core reader (reporter.intake.duck) to show no progress bar,
    for this command only."""
    key = "ANOVA_REPORT_QUIET"
    before = os.environ.get(key)
    if quiet:
        os.environ[key] = "1"
    try:
        yield
    finally:
        if quiet:
            if before is None:
                os.environ.pop(key, None)
            else:
                os.environ[key] = before


def _cmd_run(args) -> int:
    formats = _formats(args.format)
    say = args.messages
    _load_numerics()
    try:
        from reporter.api import prepare
        from reporter.run import analyse, check_out_dir, write_files

        with _quiet_readers(say.quiet):
            prep = prepare(args.plan)  # checked against the lock beside the plan, if any
            if args.lock is not None:
                from reporter.trail.deviations import apply_lock

                prep = apply_lock(prep, args.lock)
            _describe_inputs(prep, say)
            check_out_dir(args.out, prep, formats)  # before fitting: fail fast
            say.detail("fitting the model and every test")
            analysis = analyse(prep, quiet=say.quiet)
            say.detail(f"writing {', '.join(formats)} into {show_controls(str(args.out))}")
            written = write_files(prep, analysis, args.out, formats, argv=("anova-report", *args.argv))
    except KeyboardInterrupt as exc:
        if not getattr(exc, "__notes__", None):
            exc.add_note("no file was written")
        raise
    for path in written:
        print(show_controls(f"wrote {path}"))
    return 0


def _init_arguments(p: argparse.ArgumentParser) -> None:
    p.add_argument("data", metavar="DATA", help="the data file (.csv, .tsv or .parquet)")
    p.add_argument("--outcome", metavar="COL", help="the outcome column (default: guessed)")
    p.add_argument("--factor", metavar="COL", action="append", default=[],
                   help="a factor column; repeat for each factor (default: guessed)")
    p.add_argument("--force", action="store_true", help="replace a plan of the same name")


def _cmd_init(args) -> int:
    from reporter.starter import plan_path, refuse_existing, starter_plan, write_starter

    say = args.messages
    refuse_existing(plan_path(args.data), args.force)  # before reading the data
    with _quiet_readers(say.quiet):
        starter = starter_plan(args.data, outcome=args.outcome, factors=args.factor)
    say.detail(starter.read)
    for line in starter.guesses:
        say.note(line)
    path = write_starter(starter, force=args.force)
    say.note("read the plan, keep only the planned hypotheses, then run 'anova-report check' on it")
    print(show_controls(str(path)))
    return 0


def _lock_arguments(p: argparse.ArgumentParser) -> None:
    _plan_argument(p)
    p.add_argument("--force", action="store_true", help="replace an existing lock and analysis-plan document")


def _cmd_lock(args) -> int:
    from reporter.trail.lock import lock_plan

    for path in lock_plan(args.plan, force=args.force):
        print(show_controls(f"wrote {path}"))
    return 0


def _verify_arguments(v: argparse.ArgumentParser) -> None:
    v.add_argument("results", metavar="RESULTS", help="results.json or report.pdf written by 'anova-report run'")
    v.add_argument("--data", metavar="FILE", help="the data file, when it is not where RESULTS records it")
    v.add_argument("--plan", metavar="PLAN", help="the plan file, when it is not where RESULTS records it")
    v.add_argument("--lock", metavar="FILE", help="the plan lock the run was compared with (default: the one beside the plan)")


def _cmd_verify(args) -> int:
    _load_numerics()
    from reporter.trail.verify import render_verification, verify

    with _quiet_readers(args.messages.quiet):
        result = verify(args.results, plan=args.plan, data=args.data, lock=args.lock, quiet=args.messages.quiet)
    print(show_controls(render_verification(result), keep="\n"))
    if not result.agrees:
        args.messages.failed(f"verify found {len(result.differences)} difference(s); they are listed on stdout.")
        return EXIT_CHECK_FAILED
    return EXIT_OK


#: The subcommands, in the order --help lists them.
COMMANDS: tuple[Command, ...] = (
    Command(
        name="init",
        summary="write a commented starter plan next to a data file",
        description="Read DATA and write a starter plan beside it (the data file's name with .toml; its "
        "path is printed on stdout). The outcome and the factors are guessed unless named with --outcome "
        "and --factor; stderr says what was guessed and why. The plan lists the levels in order of first "
        "appearance, an omnibus effect test for each main effect and interaction, and commented "
        "directional statements written with the real level names. An existing plan is never replaced "
        "without --force.",
        examples=("anova-report init demo_project/recall_factorial.csv",
                  "anova-report init study.parquet --outcome score --factor dose --factor site --force"),
        arguments=_init_arguments,
        run=lambda args: _cmd_init(args),
    ),
    Command(
        name="check",
        summary="validate a plan and its data; show cells, design matrix, β meanings, contrasts and data checks (writes nothing)",
        description="Validate PLAN and its data file and print what the analysis will do: the cells and "
        "their n, the design matrix, what each coefficient means, every hypothesis compiled to "
        "contrasts over the cell means and over the coefficients, and the data checks. Writes nothing. "
        "Exit code 1 when the plan and data are readable but the data fail a check (the model cannot be "
        "fitted, or a planned hypothesis needs an empty cell); each failed check is named on stderr.",
        examples=("anova-report check demo_project/factorial.toml",
                  "anova-report check demo_project/oneway.toml --quiet > checked.txt"),
        arguments=_plan_argument,
        run=lambda args: _cmd_check(args),  # looked up when called (tests replace it)
    ),
    Command(
        name="run",
        summary="fit the plan's model and write the report",
        description="Fit PLAN to its data and write the requested report files into --out: "
        "report.html, report.pdf (PDF/A-3b with the plan and results attached), report.md, results.json. "
        "The folder is checked before the fit; the files are replaced all together or not at all, "
        "also when the run is stopped by Ctrl-C (exit 130) or SIGTERM (exit 143). The paths written "
        "are printed on stdout.",
        examples=("anova-report run demo_project/oneway.toml --out report --format html,pdf",
                  "SOURCE_DATE_EPOCH=0 anova-report run demo_project/factorial.toml --out report --quiet"),
        notes="Set SOURCE_DATE_EPOCH for byte-identical reruns.",
        arguments=_run_arguments,
        run=lambda args: _cmd_run(args),
    ),
    Command(
        name="lock",
        summary="freeze a plan before the data: write PLAN.lock.json and the analysis-plan document",
        description="Validate PLAN without data (the levels come from the plan; the data file need not exist) and "
        "write beside it the lock (for oneway.toml: oneway.lock.json, the canonical plan with its SHA-256 and "
        "every hypothesis compiled to contrasts) and the analysis-plan document (oneway.analysis-plan.html and "
        ".pdf, with the a-priori power of the plan's [planning] table). A later run of PLAN reports every "
        "deviation from the lock. An existing lock is replaced only with --force. The paths written are "
        "printed on stdout.",
        examples=("anova-report lock study/plan.toml",
                  "SOURCE_DATE_EPOCH=1764590400 anova-report lock demo_project/oneway.toml --force"),
        arguments=_lock_arguments,
        run=lambda args: _cmd_lock(args),
    ),
    Command(
        name="verify",
        summary="recompute a report from its recorded inputs and compare every number",
        description="Read RESULTS (a results.json, or a report.pdf with results.json embedded), find the plan and "
        "data it records (paths relative to the folder of RESULTS, or as given when the report was made in Python; "
        "a PDF falls back on its embedded plan), check their SHA-256, check the digest that results.json keeps of "
        "its own content, recompute everything and compare every number: numbers agree within 1e-10 relative, "
        "whole numbers and text exactly. The verdict, the largest difference and the software versions on both "
        "sides go to stdout. Exit 0 when everything agrees, 1 with a list of what differs (what, recorded, "
        "recomputed), 2 when the check cannot be made.",
        examples=("anova-report verify report/results.json",
                  "anova-report verify report/report.pdf --data moved/recall.csv --plan moved/oneway.toml"),
        notes="Reported when they differ, never failed (they describe the run, not its results): the creation "
        "time, the software versions, the command line (argv), the platform, and the input file names and paths.",
        arguments=_verify_arguments,
        run=lambda args: _cmd_verify(args),
    ),
)


def main(argv: list[str] | None = None) -> int:
    if argv is None:  # the program itself (console script, python -m reporter)
        global _PROGRAM
        _PROGRAM = True
        _one_blas_thread()
        try:
            return main(sys.argv[1:])
        finally:
            _skip_exit_collection()
    argv = list(argv)
    debug = "--debug" in argv
    with _stop_on_signals():
        try:
            args = _parser().parse_args(argv)
            args.argv = tuple(argv)  # recorded in the provenance, as typed
            if args.command is None:
                _parser().print_help()
                code = EXIT_BAD_INPUT
            else:
                args.messages = Messages(args.quiet, args.verbose)
                code = args.handler(args)
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
