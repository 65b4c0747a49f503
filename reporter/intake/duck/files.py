"""The files a data path names, their hashes and headers, and the row numbers a person finds.

**Row numbers.** As a person finds them: for one text file the line on which the record ends
(the header is line 1, blank lines and quoted line breaks counted), for one Parquet file the
1-based row. For a glob, rows are numbered 1, 2, ... through the matched files in sorted order
(headers not counted).

**Globs.** A ``[data] path`` whose file-name part holds ``*`` or ``?`` names every file it matches
(Python's :func:`glob.glob`, sorted); all must share the header (text) or the needed columns
(Parquet). The data hash is then SHA-256 over, for each matched file in sorted order, its name,
a NUL byte, its own SHA-256 in hex and a newline.
"""

from __future__ import annotations

import csv
import glob as _glob
import hashlib
import io
from bisect import bisect_right
from pathlib import Path
from typing import Sequence

from reporter.errors import DataError
from reporter.intake.files import decode_utf8


def is_glob(path: Path | str) -> bool:
    """A data path names several files when its file-name part holds ``*`` or ``?``."""
    name = Path(path).name
    return "*" in name or "?" in name


def matched_files(path: Path) -> list[Path]:
    """The files a data path names (one, or every match of a glob in sorted order)."""
    if not is_glob(path):
        return [path]
    found = sorted(Path(p) for p in _glob.glob(str(path)) if Path(p).is_file())
    if not found:
        raise DataError(
            f"{path}: no file matches this pattern. Check [data] path in the plan (it is relative "
            "to the plan file; * matches any part of a file name)."
        )
    for p in found:
        if any(ch in p.name for ch in "*?[]"):
            raise DataError(
                f"{p}: a file matched by the pattern has *, ?, [ or ] in its name, which the "
                "reader would take as a pattern. Rename the file."
            )
    suffixes = {p.suffix.lower() for p in found}
    if len(suffixes) > 1:
        raise DataError(f"{path}: the pattern matches files of several kinds ({', '.join(sorted(suffixes))}); name one kind.")
    return found


def use_out_of_core(plan) -> bool:
    """Whether the plan's data go through this reader: ``[data] reader`` says so, or (when it is
    "automatic") the path is a glob or the file holds at least ``OUT_OF_CORE_BYTES``."""
    from reporter.intake.defaults import OUT_OF_CORE_BYTES

    reader = getattr(plan.data, "reader", "automatic")
    path = plan.data.path
    if reader == "in-memory":
        if is_glob(path):
            raise DataError(
                f"{path}: names several files (a pattern), which only the out-of-core reader reads. "
                'Set [data] reader = "out-of-core" or "automatic", or name one file.'
            )
        return False
    if reader == "out-of-core" or is_glob(path):
        return True
    try:
        return path.is_file() and path.stat().st_size >= OUT_OF_CORE_BYTES
    except OSError:
        return False


def _file_digest(path: Path, count_lines: bool) -> tuple[str, int, bool]:
    """SHA-256 of a file, its number of line feeds, and whether it ends with one."""
    h = hashlib.sha256()
    lines, last = 0, b""
    try:
        with open(path, "rb") as fh:
            for block in iter(lambda: fh.read(1 << 22), b""):
                h.update(block)
                if count_lines:
                    lines += block.count(b"\n")
                last = block[-1:]
    except OSError as exc:
        raise DataError(f"{path}: cannot be read ({exc.strerror}).") from None
    return h.hexdigest(), lines, last == b"\n"


def _read_header(path: Path, delimiter: str) -> tuple[list[str], int]:
    """The header fields of a text file (trimmed) and the line on which the header ends."""
    try:
        with open(path, "rb") as fh:
            head = fh.read(1 << 20)
    except OSError as exc:
        raise DataError(f"{path}: cannot be read ({exc.strerror}).") from None
    if not head.strip():
        raise DataError(f"{path}: the file is empty. It needs a header row and data rows.")
    text = decode_utf8(head, str(path), DataError, final=False)
    reader = csv.reader(io.StringIO(text, newline=""), delimiter=delimiter)
    try:
        header = next(reader)
    except (StopIteration, csv.Error) as exc:
        raise DataError(f"{path}, line 1: cannot be read as delimited text ({exc}).") from None
    return [h.strip() for h in header], reader.line_num


class _RowNumbers:
    """Maps the 1-based record index of the reader to the row number a person finds.

    One text file: the line on which the record ends (header = line 1). When the file has no
    blank line and no quoted line break, that is the index + header lines; otherwise the file is
    scanned once (lazily, only when a row number is shown) for the places where the two drift.
    Parquet: the index itself. Globs: the index through the files in sorted order.
    """

    def __init__(self, kind: str, files: Sequence[Path], delimiter: str, regular: bool, header_lines: int):
        self.kind, self.files, self.delimiter = kind, list(files), delimiter
        self.regular, self.header_lines = regular, header_lines
        self._breaks: tuple[list[int], list[int]] | None = None

    @property
    def word(self) -> str:
        return "line" if self.kind == "text" and len(self.files) == 1 else "row"

    def number(self, idx: int) -> int:
        if self.kind != "text" or len(self.files) > 1:
            return int(idx)
        if self.regular:
            return int(idx) + self.header_lines
        starts, offsets = self._scan()
        return int(idx) + offsets[bisect_right(starts, int(idx)) - 1]

    def _scan(self):
        if self._breaks is None:
            starts, offsets = [1], [self.header_lines]
            with open(self.files[0], encoding="utf-8-sig", newline="") as fh:
                reader = csv.reader(fh, delimiter=self.delimiter)
                next(reader, None)
                idx = 0
                for rec in reader:
                    if not rec or (len(rec) == 1 and not rec[0].strip()):
                        continue
                    idx += 1
                    off = reader.line_num - idx
                    if off != offsets[-1]:
                        starts.append(idx)
                        offsets.append(off)
            self._breaks = (starts, offsets)
        return self._breaks


def _glob_digest(files: Sequence[Path], digests) -> str:
    h = hashlib.sha256()
    for f, d in zip(files, digests):
        h.update(f.name.encode("utf-8") + b"\0" + d[0].encode("ascii") + b"\n")
    return h.hexdigest()
