"""``anova-report run``: fit a prepared analysis and write the requested files, all or nothing.

The output folder is checked before anything is fitted (see :func:`check_out_dir`). Every
output is then rendered in memory; only then are the files written, all of them first to
temporary names in the output folder, and then renamed into place one by one. Until the last
rename is done, each file it replaces is kept aside (a hard link under a temporary name, or a
copy where the file system has no hard links). Any exception or signal before the end (a
full disk, Ctrl-C, SIGTERM; the command turns both signals into exceptions) rolls back: the
files already renamed are put back as they were (or removed if they are new), every
temporary file is removed, and a folder the run created is removed again. SIGINT and SIGTERM
are held while the rollback and the final clean-up run, so a second signal cannot leave a
mix of old and new files. The input files are never opened for writing.
"""

from __future__ import annotations

import contextlib
import os
import secrets
import shutil
import signal
import stat
import sys
import tempfile
from dataclasses import replace
from pathlib import Path
from typing import Callable

from reporter.errors import OptionError, RenderError
from reporter.inference.analysis import Analysis, fit_analysis, with_rounding_bounds
from reporter.provenance import collect_provenance

FILE_NAMES = {"json": "results.json", "html": "report.html", "pdf": "report.pdf", "md": "report.md"}

#: Prefix of every temporary file the writer makes in the output folder.
TEMP_PREFIX = ".anova-report-"

#: Called with each target path right after it is renamed into place; for tests that
#: interrupt the writer between two renames. None in normal use.
after_rename: Callable[[Path], None] | None = None


def analyse(prep, *, quiet: bool = False) -> Analysis:
    """Fit everything for a prepared plan; unless ``quiet``, long steps say so on stderr (and
    show progress when stderr is a terminal)."""
    a = prep.plan.analysis
    analysis = fit_analysis(
        prep.design,
        prep.cells,
        prep.rows,
        prep.contrasts,
        alpha=a.alpha,
        ss_type=a.ss_type,
        correction=a.correction,
        unequal_variances=a.unequal_variances,
        posthoc=a.posthoc,
        posthoc_on=a.posthoc_on,
        control=a.control,
        permutations=a.permutations,
        seed=a.seed,
        permutation_max_rows=a.permutation_max_rows,
        progress=not quiet,
        notify=None if quiet else _notify,
        covariates=prep.plan.covariates or None,
    )
    return with_rounding_bounds(analysis, prep.data.summary)


def _notify(message: str) -> None:
    print(f"anova-report: {message}", file=sys.stderr, flush=True)


def render_outputs(prep, analysis: Analysis, formats, *, argv=None, results_folder=None) -> dict[str, bytes]:
    """The bytes of each requested format (imports only what those formats need).

    ``argv`` is the command line as typed (None from Python); ``results_folder`` the folder the
    files go to, which recorded input paths are relative to (None: paths as given)."""
    provenance, results = sealed_results(prep, analysis, argv=argv, results_folder=results_folder)
    document = None
    if {"html", "pdf", "md"} & set(formats):
        from reporter.narrative.build import build_document

        document = build_document(prep, analysis, provenance)
    out: dict[str, bytes] = {}
    for fmt in formats:
        if fmt == "json":
            out[fmt] = results
        elif fmt == "html":
            from reporter.render.html import render_html

            out[fmt] = render_html(document)
        elif fmt == "md":
            from reporter.render.markdown import render_markdown

            out[fmt] = render_markdown(document)
        elif fmt == "pdf":
            from reporter.render.pdf import render_pdf

            out[fmt] = render_pdf(document, _attachments(prep, results))
        else:
            raise RenderError(f"--format {fmt}: unknown format.")
    return out


def results_document(prep, analysis: Analysis, *, argv=None, results_folder=None):
    """The provenance and the results.json document of a run, as (provenance, dict).

    The one place both are made: ``anova-report verify`` recomputes a run through it too."""
    from reporter.render.results_json import results_dict

    provenance = collect_provenance(prep, analysis=analysis, argv=argv, results_folder=results_folder)
    return provenance, results_dict(prep, analysis, provenance)


def sealed_results(prep, analysis: Analysis, *, argv=None, results_folder=None):
    """(provenance with the results digest, results.json bytes): what every format of a run shares."""
    from reporter.render.results_json import DIGEST_FIELD, render_json, with_digest

    provenance, doc = results_document(prep, analysis, argv=argv, results_folder=results_folder)
    doc = with_digest(doc)
    return replace(provenance, results_sha256=doc[DIGEST_FIELD]), render_json(doc)


def _attachments(prep, results: bytes) -> dict[str, bytes]:
    """The plan file as read and the results JSON, embedded in the archival PDF."""
    plan_bytes = prep.plan.source_bytes or b""  # the bytes that were hashed, not a re-read
    return {"plan.toml": plan_bytes, "results.json": results}


def check_out_dir(out: str | os.PathLike, prep, formats) -> Path:
    """Refuse, before anything is fitted, an output folder the report files cannot go to.

    Refused: an empty ``--out``; an existing path that is not a folder; a target file name
    (``results.json``, ...) that is a folder, is read-only, or is one of the input files; a
    folder (or, when it does not exist yet, the nearest existing parent) that is read-only or
    in which a temporary file (a temporary folder) cannot be created and removed.
    """
    text = os.fspath(out)
    if not str(text).strip():
        raise OptionError(
            "--out is empty; give the folder for the report files, e.g. --out report "
            "(--out . for the current folder)."
        )
    if "\0" in str(text):
        raise OptionError(f"--out {_shown(repr(text))}: a path cannot hold a NUL character; give a plain folder name.")
    path = Path(text)
    try:
        _check_folder(path, prep, formats)
    except OSError as exc:
        raise OptionError(f"--out {_shown(path)}: cannot be used ({_reason(exc)}); choose another folder.") from None
    return path


def _check_folder(out: Path, prep, formats) -> None:
    if os.path.lexists(out) and not out.exists():
        raise OptionError(f"--out {_shown(out)}: is a symbolic link to nothing; remove it or choose another folder.")
    if out.exists():
        if not out.is_dir():
            raise OptionError(f"--out {_shown(out)}: exists and is not a folder; give a folder for the report files.")
        inputs = _input_files(prep)
        for fmt in formats:
            _check_target(out, out / FILE_NAMES[fmt], inputs)
        _check_writable(out, out, make_folder=False)
        return
    parent = out.absolute().parent
    while not os.path.lexists(parent) and parent != parent.parent:
        parent = parent.parent
    if not parent.is_dir():
        raise OptionError(f"--out {_shown(out)}: cannot create the folder, because {_shown(parent)} is not a folder.")
    _check_writable(out, parent, make_folder=True)


def _input_files(prep) -> list[os.stat_result]:
    plan = prep.plan
    stats = []
    for p in (plan.source, plan.data.path):
        if p is not None and Path(p).exists():
            stats.append(os.stat(p))
    return stats


def _check_target(out: Path, target: Path, inputs) -> None:
    if not os.path.lexists(target):
        return
    st = os.lstat(target)
    if stat.S_ISDIR(st.st_mode):
        raise OptionError(
            f"--out {_shown(out)}: {_shown(target)} is a folder, so the report file cannot be written there; "
            "remove or rename it, or choose another folder."
        )
    if target.exists() and any(os.path.samestat(os.stat(target), i) for i in inputs):
        raise OptionError(
            f"--out {_shown(out)}: writing {target.name} there would overwrite an input file; choose another folder."
        )
    if stat.S_ISREG(st.st_mode) and (not st.st_mode & 0o222 or not os.access(target, os.W_OK)):
        raise OptionError(
            f"--out {_shown(out)}: {_shown(target)} is read-only, so it would not be replaced; make it writable "
            "(chmod u+w) or choose another folder."
        )


def _check_writable(out: Path, folder: Path, *, make_folder: bool) -> None:
    """A folder is writable if its mode allows it and a temporary entry can be made and removed.

    The mode is checked as well as the trial, because a process with administrator rights may
    write into a folder its owner has made read-only.
    """
    what = "create the folder" if make_folder else "write into the folder"
    if not os.stat(folder).st_mode & 0o222:
        where = "" if folder == out else f", because {_shown(folder)} is read-only"
        raise OptionError(
            f"--out {_shown(out)}: cannot {what}{where or ': it is read-only'}; make it writable "
            "(chmod u+w) or choose another folder."
        )
    try:
        if make_folder:
            os.rmdir(tempfile.mkdtemp(prefix=TEMP_PREFIX, dir=folder))
        else:
            fd, probe = tempfile.mkstemp(prefix=TEMP_PREFIX, dir=folder)
            os.close(fd)
            os.unlink(probe)
    except OSError as exc:
        where = "" if folder == out else f" in {_shown(folder)}"
        raise OptionError(
            f"--out {_shown(out)}: cannot {what} ({_reason(exc)}{where}); choose another folder."
        ) from None


def _shown(path) -> str:
    """A path for a message: a very long one keeps its start and end, so the line stays readable."""
    text = str(path)
    return text if len(text) <= 120 else f"{text[:60]}…{text[-50:]}"


def _reason(exc: OSError) -> str:
    return exc.strerror or type(exc).__name__


def write_outputs(prep, out: str | os.PathLike, formats, *, quiet: bool = False, argv=None) -> list[Path]:
    """Check the output folder, fit, render every format in memory, then write the files
    all or nothing. ``argv``: the command line, recorded in the provenance (None from Python)."""
    path = check_out_dir(out, prep, formats)  # before fitting: fail fast
    return _write(prep, analyse(prep, quiet=quiet), path, formats, argv)


def write_files(prep, analysis: Analysis, out: str | os.PathLike, formats, *, argv=None) -> list[Path]:
    """Render every format of a fitted analysis in memory, then write the files all or nothing.
    ``argv``: the command line, recorded in the provenance (None from Python)."""
    path = check_out_dir(out, prep, formats)
    return _write(prep, analysis, path, formats, argv)


def _write(prep, analysis: Analysis, out: Path, formats, argv=None) -> list[Path]:
    blobs = render_outputs(prep, analysis, formats, argv=argv, results_folder=out)
    check_out_dir(out, prep, formats)  # the folder may have changed during the fit
    return commit(out, {out / FILE_NAMES[fmt]: blob for fmt, blob in blobs.items()})


def commit(out: Path, files: dict[Path, bytes]) -> list[Path]:
    """Write ``files`` (path in ``out`` -> bytes) all or nothing; return the paths written.

    On any exception (including KeyboardInterrupt and the command's SIGTERM exception) the
    folder is restored as it was and the exception is raised again, with a note saying so; an
    OSError becomes an :class:`OptionError` (exit 2) naming the folder and the reason.
    Signals are held while temporary files are made (so none is left without a name to remove
    it by), and while the folder is restored or cleaned up; a signal during the renames rolls
    back. Which files were renamed is read from the folder itself: a temporary file that is
    gone has been renamed into place.
    """
    created: list[Path] = []
    temps: dict[Path, str] = {}
    kept: dict[Path, str] = {}
    try:
        with _signals_held():
            _make_folders(out, created)
            mode = _file_mode()
            for target, blob in files.items():
                temps[target] = _temp_file(out, blob, mode)
            for target in temps:
                if os.path.lexists(target):
                    kept[target] = _keep_aside(out, target)
        for target, tmp in temps.items():
            os.replace(tmp, target)
            if after_rename is not None:
                after_rename(target)
        with _signals_held():
            _remove(kept.values())
    except BaseException as exc:
        with _signals_held():
            placed = [t for t, tmp in temps.items() if not os.path.lexists(tmp)]
            lost = _roll_back(placed, kept)
            _remove([*temps.values(), *(b for t, b in kept.items() if t not in lost)])
            _remove_folders(created)
        state = "the output folder was left as it was"
        if lost:
            state = "could not restore " + "; ".join(
                f"{t} (its previous content is in {b})" if b else f"{t} (a new file is left there)"
                for t, b in lost.items()
            )
        if isinstance(exc, OSError):
            raise OptionError(f"--out {_shown(out)}: cannot write the report files ({_reason(exc)}); {state}.") from None
        exc.add_note(state)
        raise
    return list(temps)


@contextlib.contextmanager
def _signals_held():
    """Hold SIGINT and SIGTERM (they are delivered at the end) while files are put back."""
    if not hasattr(signal, "pthread_sigmask"):
        yield
        return
    old = signal.pthread_sigmask(signal.SIG_BLOCK, {signal.SIGINT, signal.SIGTERM})
    try:
        yield
    finally:
        signal.pthread_sigmask(signal.SIG_SETMASK, old)


def _make_folders(out: Path, created: list[Path]) -> None:
    """Create ``out`` and its missing parents, adding each to ``created`` as it is made."""
    missing = []
    p = out
    while not os.path.lexists(p) and p.parent != p:
        missing.append(p)
        p = p.parent
    for folder in reversed(missing):
        folder.mkdir()
        created.append(folder)


def _remove_folders(created: list[Path]) -> None:
    for folder in reversed(created):
        with contextlib.suppress(OSError):
            folder.rmdir()


def _file_mode() -> int:
    umask = os.umask(0)
    os.umask(umask)
    return 0o666 & ~umask


def _temp_file(out: Path, blob: bytes, mode: int) -> str:
    fd, tmp = tempfile.mkstemp(prefix=TEMP_PREFIX, suffix=".new", dir=out)
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(blob)
            fh.flush()
            os.fsync(fh.fileno())
        os.chmod(tmp, mode)
    except BaseException:
        with contextlib.suppress(OSError):
            os.unlink(tmp)
        raise
    return tmp


def _keep_aside(out: Path, target: Path) -> str:
    """A second name for the file at ``target`` (a hard link, else a copy), to restore it from."""
    while True:
        backup = str(out / f"{TEMP_PREFIX}{secrets.token_hex(6)}.previous")
        try:
            os.link(target, backup, follow_symlinks=False)
            return backup
        except FileExistsError:
            continue
        except OSError:  # no hard links on this file system
            if os.path.lexists(backup):
                continue
            try:
                shutil.copy2(target, backup, follow_symlinks=False)
            except BaseException:
                with contextlib.suppress(OSError):
                    os.unlink(backup)
                raise
            return backup


def _roll_back(placed: list[Path], kept: dict[Path, str]) -> dict[Path, str]:
    """Undo the renames, last first; return the files that could not be put back, each with
    the name its previous content is kept under ("" for a file that did not exist before)."""
    lost = {}
    for target in reversed(placed):
        try:
            if target in kept:
                os.replace(kept[target], target)
            else:
                os.unlink(target)
        except OSError:
            lost[target] = kept.get(target, "")
    return lost


def _remove(paths) -> None:
    """Remove each file, best effort (a file already gone, or one that cannot go, is passed)."""
    for p in paths:
        with contextlib.suppress(OSError):
            os.unlink(p)
