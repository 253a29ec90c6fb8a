"""Every file orbweigh writes goes through here: whole or not at all.

A file is written to a temporary file in its target folder, flushed, synced and renamed
over the target, so a full disk or an interrupted run leaves the previous file intact;
a file too large to hold at once is written piece by piece the same way (``AtomicFile``;
a long table chunk by chunk: ``TableChunks``).
The file gets the mode the user's umask gives a new file (``mkstemp`` alone gives 0600).
A failure is reported naming the target, never the temporary file. A folder of several
files (a report) is built in a temporary sibling and swapped in as a whole
(``replace_folder``).
"""
from __future__ import annotations

import contextlib
import io
import os
import shutil
import tempfile
from pathlib import Path

import numpy as np

from .errors import OutputError

__all__ = ["write_atomic", "AtomicFile", "write_table", "table_text", "TableChunks",
           "replace_folder", "check_target", "check_folder", "LineLog", "discard_temporaries"]


def _umask():
    mask = os.umask(0)
    os.umask(mask)
    return mask


def check_target(path, inputs=()):
    """Refuse an output onto one of ``inputs`` or through a symbolic link out of its folder.

    Returns the path to write: a link inside its own folder is written through.
    """
    path = Path(path)
    for source in inputs:
        if source is not None and _same_file(path, Path(source)):
            raise OutputError(path, "is an input of this run; writing there would destroy "
                                    "it: choose another output name")
    if path.is_symlink():
        real, folder = path.resolve(), path.parent.resolve()
        if real.parent != folder and folder not in real.parents:
            raise OutputError(path, f"is a symbolic link leading out of its folder (to "
                                    f"{real}); refusing to write through it: remove the "
                                    "link or write elsewhere")
        return real
    return path


def _same_file(a, b):
    try:
        return a.exists() and b.exists() and os.path.samefile(a, b)
    except OSError:
        return False


def write_atomic(path, content, inputs=()):
    """Write text or bytes to ``path`` as a whole (temporary file, fsync, rename).

    Parameters
    ----------
    path : str or Path
        Target file; its folder is created when missing.
    content : str or bytes
        Text is written as UTF-8.
    inputs : iterable of path, optional
        Files this run reads: writing onto one of them is refused.

    Raises
    ------
    OutputError
        The target is refused, or the write failed (full disk, no permission...); the
        previous file, if any, is left as it was.
    """
    with AtomicFile(path, inputs) as fh:
        fh.write(content)


class AtomicFile:
    """A file written piece by piece and put in place whole: ``write_atomic`` for content
    too large to hold at once.

    Use as a context manager; ``write`` text (UTF-8) or bytes as often as needed. When the
    block ends without an error the file is synced and renamed over the target; on any
    error the temporary file is removed and the previous file, if any, stays as it was.
    A failure of the file itself raises ``OutputError`` naming the target.
    """

    def __init__(self, path, inputs=()):
        self.path = Path(path)
        self._target = check_target(path, inputs)
        self._fh = self._tmp = None

    def _error(self, exc):
        return OutputError(self.path, f"cannot be written: {exc.strerror or exc}")

    def __enter__(self):
        try:
            self._target.parent.mkdir(parents=True, exist_ok=True)
            fd, self._tmp = tempfile.mkstemp(dir=self._target.parent,
                                             prefix=f".{self._target.name}.", suffix=".tmp")
            self._fh = os.fdopen(fd, "wb")
        except OSError as exc:
            self._discard()
            raise self._error(exc) from None
        return self

    def write(self, content):
        """Append text or bytes."""
        try:
            self._fh.write(content.encode("utf-8") if isinstance(content, str) else content)
        except OSError as exc:
            raise self._error(exc) from None

    def __exit__(self, exc_type, *exc):
        try:
            if exc_type is None:
                self._fh.flush()
                os.fsync(self._fh.fileno())
                self._fh.close()
                os.chmod(self._tmp, 0o666 & ~_umask())
                os.replace(self._tmp, self._target)
        except OSError as exc:
            raise self._error(exc) from None
        finally:
            self._discard()

    def _discard(self):
        if self._fh is not None:
            with contextlib.suppress(OSError):    # a failed write is reported already
                self._fh.close()
        if self._tmp is not None and os.path.exists(self._tmp):
            os.unlink(self._tmp)


def discard_temporaries(folder):
    """Remove the temporary files ``write_atomic`` left in ``folder`` when its process was
    ended between writing and renaming (a stopped batch worker); their targets are intact."""
    for leftover in Path(folder).glob(".*.tmp"):
        leftover.unlink(missing_ok=True)


class LineLog:
    """A file written line by line while the work goes on, read back when it is done.

    Unlike ``write_atomic`` the file grows in place: each line is flushed as it is added
    (a reader, or the writer after a crash, sees every line added so far) and the file is
    synced when closed. A last line without its newline was cut by a crash: readers skip
    it (``read_lines``). Use as a context manager; one writer per file. ``append`` adds to
    an existing file instead of starting it anew.
    """

    def __init__(self, path, inputs=(), append=False):
        self.path = Path(path)
        self._target = check_target(path, inputs)
        self._fh = None
        self._mode = "a" if append else "w"

    def __enter__(self):
        try:
            self._target.parent.mkdir(parents=True, exist_ok=True)
            self._fh = open(self._target, self._mode, encoding="utf-8")
        except OSError as exc:
            raise OutputError(self.path, f"cannot be written: {exc.strerror or exc}") from None
        return self

    def add(self, line):
        """Append one line (without its newline) and flush it."""
        try:
            self._fh.write(line + "\n")
            self._fh.flush()
        except OSError as exc:
            raise OutputError(self.path, f"cannot be written: {exc.strerror or exc}") from None

    def __exit__(self, *exc):
        error = None
        try:
            self._fh.flush()
            os.fsync(self._fh.fileno())
        except OSError as err:
            error = err
        finally:
            with contextlib.suppress(OSError):    # a failed flush is reported once, below
                self._fh.close()
        if error is not None and exc[0] is None:
            raise OutputError(self.path, f"cannot be written: {error.strerror or error}")

    @staticmethod
    def read_lines(path):
        """The complete lines of such a file (a cut last line left out)."""
        with open(path, encoding="utf-8") as fh:
            for line in fh:
                if line.endswith("\n"):
                    yield line[:-1]

    @staticmethod
    def read_offsets(path):
        """(byte offset, line) of the complete lines of such a file, the line as bytes
        without its newline: an offset reads its line again (``line_at``)."""
        offset = 0
        with open(path, "rb") as fh:
            for line in fh:
                if line.endswith(b"\n"):
                    yield offset, line[:-1]
                offset += len(line)

    @staticmethod
    def line_at(fh, offset):
        """The line (bytes, without its newline) at ``offset`` of such a file open in binary
        mode (``read_offsets``)."""
        fh.seek(offset)
        return fh.readline()[:-1]


def write_table(path, table, fmt="ascii.ecsv", inputs=()):
    """Write an astropy Table through ``write_atomic`` (formats that accept a text stream)."""
    write_atomic(path, table_text(table, fmt), inputs)


def table_text(table, fmt="ascii.ecsv", **kwargs):
    """An astropy Table as the text ``write_table`` writes (``kwargs`` to its writer)."""
    buffer = io.StringIO()
    # Numbers are written through numpy's printing, whose options any imported library may
    # change (a legacy mode writes 12 digits only): the file's digits must not depend on it.
    with np.printoptions(legacy=False):
        table.write(buffer, format=fmt, **kwargs)
    return buffer.getvalue()


class TableChunks:
    """A table too long to hold, written into an ``AtomicFile`` as consecutive chunks: the
    same text as the chunks stacked into one table and rendered at once.

    ``render(chunk)`` gives a chunk's text in full; ``empty`` is the text of the table
    without rows. A render is the empty one with the chunk's lines inserted at one place
    (after the header, before any footer): that holds for writers that put one row a line
    and align nothing across rows (astropy's csv, ecsv and latex); a writer that pads
    columns to their widest value is refused (ValueError), never written wrongly.
    """

    def __init__(self, file, render, empty):
        self._file, self._render = file, render
        self._empty = empty.splitlines(keepends=True)
        self._head = self._foot = None

    def add(self, chunk):
        """Write the rows of one chunk (the header before the first one)."""
        if not len(chunk):
            return
        lines = self._render(chunk).splitlines(keepends=True)
        if self._head is None:
            self._split(lines)
            self._file.write("".join(self._head))
        body = lines[len(self._head):len(lines) - len(self._foot)]
        if lines[:len(self._head)] != self._head or lines[len(lines) - len(self._foot):] \
                != self._foot or len(lines) < len(self._empty):
            raise ValueError("this table format aligns its rows: it cannot be written in "
                             "chunks")
        self._file.write("".join(body))

    def _split(self, lines):
        """Header and footer: the longest run of leading lines the render shares with the
        empty one, the rest of the empty one the footer."""
        n = 0
        while n < len(self._empty) and n < len(lines) and lines[n] == self._empty[n]:
            n += 1
        self._head, self._foot = self._empty[:n], self._empty[n:]

    def close(self):
        """The footer, or the empty table when no chunk had rows."""
        self._file.write("".join(self._empty if self._head is None else self._foot))


@contextlib.contextmanager
def replace_folder(path, inputs=(), owned=None):
    """Build a folder in a temporary sibling, then swap it in for ``path`` as a whole.

    ``inputs`` are files this run reads or has written elsewhere: a folder holding one of
    them is refused, since the swap would remove it. ``owned(name)`` tells whether a file
    name in an existing folder is one this writer makes: a folder holding anything else
    (a user's own files) is refused rather than removed.

    Yields the temporary folder to write into. On success the old folder (if any) is
    replaced by the new one; on any failure the temporary folder is removed and the old
    folder is left as it was. Two renames swap them (the old one moved aside first), so a
    reader sees either the old folder or the new one, never a mix of their files.
    """
    target = check_folder(path, inputs, owned)
    try:
        target.parent.mkdir(parents=True, exist_ok=True)
        build = Path(tempfile.mkdtemp(dir=target.parent, prefix=f".{target.name}.",
                                      suffix=".tmp"))
        os.chmod(build, 0o777 & ~_umask())
    except OSError as exc:
        raise OutputError(path, f"cannot be created: {exc.strerror or exc}") from None
    try:
        try:
            yield build
        except OutputError as exc:    # name the file of the folder asked for, not the build
            inner = Path(exc.path)
            if build in inner.parents:
                raise OutputError(Path(path) / inner.relative_to(build), exc.reason) from None
            raise
        _swap(build, target, path)
    finally:
        shutil.rmtree(build, ignore_errors=True)


def check_folder(path, inputs=(), owned=None):
    """The checks of ``replace_folder`` alone (to refuse a folder before long work)."""
    target = check_target(path)
    if target.exists() and not target.is_dir():
        raise OutputError(path, "exists and is not a folder: choose another name")
    for kept in inputs:
        if kept is not None and target.resolve() in Path(kept).resolve().parents:
            raise OutputError(path, f"holds {kept}, which this run needs; the folder is "
                                    "replaced as a whole: choose a folder of its own")
    if owned is not None and target.is_dir():
        foreign = sorted(p.name for p in target.iterdir() if not owned(p.name))
        if foreign:
            raise OutputError(path, f"holds files this command does not write "
                                    f"({', '.join(foreign[:5])}); the folder is replaced as "
                                    "a whole: choose an empty or new folder")
    return target


def _swap(build, target, shown):
    old = None
    try:
        if target.exists():
            old = Path(tempfile.mkdtemp(dir=target.parent, prefix=f".{target.name}.",
                                        suffix=".old"))
            os.replace(target, old / "previous")
        os.replace(build, target)
    except OSError as exc:
        if old is not None and (old / "previous").exists() and not target.exists():
            os.replace(old / "previous", target)
        raise OutputError(shown, f"cannot be replaced: {exc.strerror or exc}") from None
    finally:
        if old is not None:
            shutil.rmtree(old, ignore_errors=True)
