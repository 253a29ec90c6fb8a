"""Every file orbweigh writes goes through here: whole or not at all.

A file is written to a temporary file in its target folder, flushed, synced and renamed
over the target, so a full disk or an interrupted run leaves the previous file intact.
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

__all__ = ["write_atomic", "write_table", "replace_folder", "check_target", "check_folder",
           "LineLog", "discard_temporaries"]


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
    target = check_target(path, inputs)
    data = content.encode("utf-8") if isinstance(content, str) else content
    tmp = None
    try:
        target.parent.mkdir(parents=True, exist_ok=True)
        fd, tmp = tempfile.mkstemp(dir=target.parent, prefix=f".{target.name}.", suffix=".tmp")
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
            fh.flush()
            os.fsync(fh.fileno())
        os.chmod(tmp, 0o666 & ~_umask())
        os.replace(tmp, target)
    except OSError as exc:
        raise OutputError(path, f"cannot be written: {exc.strerror or exc}") from None
    finally:
        if tmp is not None and os.path.exists(tmp):
            os.unlink(tmp)


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
    it (``read_lines``). Use as a context manager; one writer per file.
    """

    def __init__(self, path, inputs=()):
        self.path = Path(path)
        self._target = check_target(path, inputs)
        self._fh = None

    def __enter__(self):
        try:
            self._target.parent.mkdir(parents=True, exist_ok=True)
            self._fh = open(self._target, "w", encoding="utf-8")
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


def write_table(path, table, fmt="ascii.ecsv", inputs=()):
    """Write an astropy Table through ``write_atomic`` (formats that accept a text stream)."""
    buffer = io.StringIO()
    # Numbers are written through numpy's printing, whose options any imported library may
    # change (a legacy mode writes 12 digits only): the file's digits must not depend on it.
    with np.printoptions(legacy=False):
        table.write(buffer, format=fmt)
    write_atomic(path, buffer.getvalue(), inputs)


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
