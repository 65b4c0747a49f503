"""Opening input files safely: regular files only, read with a size limit.

A plan or data path may name anything the operating system can open: a folder, a FIFO that
never delivers an end of file, ``/dev/zero`` that never stops, a socket, a terminal, or a path
longer than the system allows. :func:`open_regular` opens without blocking (``O_NONBLOCK``, so a
FIFO with no writer cannot hang the open), refuses everything that is not a regular file, and
:func:`read_limited` never reads more than its limit. Input files are opened for reading only.
"""

from __future__ import annotations

import codecs
import errno
import os
import stat
from pathlib import Path
from typing import BinaryIO

from reporter.errors import ReporterError

_KINDS = (
    (stat.S_ISDIR, "is a folder"),
    (stat.S_ISFIFO, "is a named pipe (FIFO)"),
    (stat.S_ISSOCK, "is a socket"),
    (stat.S_ISCHR, "is a character device"),
    (stat.S_ISBLK, "is a block device"),
)


def _short(path: Path | str, limit: int = 200) -> str:
    """The path as shown in a message: a very long path is cut in the middle."""
    text = str(path)
    if len(text) <= limit:
        return text
    return f"{text[: limit // 2]}…{text[-limit // 2 :]} ({len(text)} characters)"


def describe_path(path: Path | str) -> str:
    """The path as a message shows it (long paths shortened)."""
    return _short(path)


def open_regular(path: Path, what: str, error: type[ReporterError], fix: str) -> BinaryIO:
    """Open ``path`` for reading if it is a regular file; otherwise raise ``error``.

    ``what`` names the file in messages ("the plan file", "the data file"); ``fix`` says what to
    give instead.
    """
    shown = _short(path)
    flags = os.O_RDONLY | getattr(os, "O_NONBLOCK", 0) | getattr(os, "O_NOCTTY", 0)
    try:
        fd = os.open(path, flags)
    except FileNotFoundError:
        if os.path.islink(path):
            raise error(f"{shown}: is a symbolic link to a file that does not exist. {fix}") from None
        raise error(f"{shown}: {what} does not exist. {fix}") from None
    except IsADirectoryError:
        raise error(f"{shown}: is a folder, not {what}. {fix}") from None
    except OSError as exc:
        if exc.errno == errno.ENAMETOOLONG:
            raise error(
                f"{shown}: the path is longer than the system allows for {what}. Move the file to a "
                "folder with a shorter path."
            ) from None
        if exc.errno == errno.ENXIO:  # a socket, or a FIFO opened for writing only
            raise error(f"{shown}: is not a regular file ({what} must be one). {fix}") from None
        raise error(f"{shown}: {what} cannot be read ({exc.strerror or exc}).") from None
    try:
        st = os.fstat(fd)
        if not stat.S_ISREG(st.st_mode):
            kind = next((text for test, text in _KINDS if test(st.st_mode)), "is not a regular file")
            raise error(f"{shown}: {kind}, not a regular file; {what} must be a regular file. {fix}")
        if hasattr(os, "set_blocking"):
            os.set_blocking(fd, True)
        return os.fdopen(fd, "rb")
    except BaseException:
        os.close(fd)
        raise


def read_limited(path: Path, what: str, error: type[ReporterError], fix: str, limit: int, limit_name: str) -> bytes:
    """Read a regular file whole, refusing one larger than ``limit`` bytes."""
    shown = _short(path)
    with open_regular(path, what, error, fix) as fh:
        try:
            raw = fh.read(limit + 1)
        except OSError as exc:
            raise error(f"{shown}: {what} cannot be read ({exc.strerror or exc}).") from None
    if len(raw) > limit:
        raise error(
            f"{shown}: {what} is larger than {_size(limit)}, the limit for {limit_name}. "
            "Check that the path names the intended file."
        )
    return raw


def _size(n: int) -> str:
    for unit, factor in (("GiB", 1 << 30), ("MiB", 1 << 20), ("KiB", 1 << 10)):
        if n >= factor and n % factor == 0:
            return f"{n // factor} {unit}"
    return f"{n} bytes"


def decode_utf8(raw: bytes, source: str, error: type[ReporterError], *, final: bool = True) -> str:
    """``raw`` as UTF-8 text (a byte-order mark dropped), or one message naming the line and byte
    that are not UTF-8. ``final=False`` for the head of a longer file: a character cut at its end
    is left out rather than refused."""
    try:
        return codecs.getincrementaldecoder("utf-8-sig")().decode(raw, final=final)
    except UnicodeDecodeError as exc:
        line = raw[: exc.start].count(b"\n") + 1
        raise error(
            f"{source}: is not UTF-8 text: line {line} holds the byte 0x{raw[exc.start]:02x} "
            f"(file offset {exc.start}). Save the file as UTF-8 (for example 'CSV UTF-8' in a "
            "spreadsheet program) and run again."
        ) from None
