"""Reading input files safely: one bounded read shared by every reader.

A log, manifest or result document is a regular file of modest size. Reading a device
(``/dev/zero``), a FIFO or a runaway file would hang or exhaust memory, so the file type is
checked with ``os.stat`` before reading and the read itself is capped.
"""
from __future__ import annotations

import os
import stat
from pathlib import Path

from .errors import InputError

__all__ = ["read_bounded_bytes"]


def read_bounded_bytes(path, limit, what="file"):
    """The bytes of a regular file of at most ``limit`` bytes.

    Raises
    ------
    InputError
        When the file is missing or unreadable, is not a regular file, or is larger than
        ``limit`` (checked on the size reported and again on the bytes read).
    """
    path = Path(path)
    try:
        info = os.stat(path)
    except OSError as exc:
        raise InputError(f"{path}: cannot read the file ({exc.strerror})") from None
    if not stat.S_ISREG(info.st_mode):
        kind = "a folder" if stat.S_ISDIR(info.st_mode) else "not a regular file"
        raise InputError(f"{path}: the {what} is {kind} (a device, pipe or folder cannot "
                         "be read); give the path of a file")
    too_big = (f"{path}: the {what} is larger than {limit // 2 ** 20} MiB, the limit for "
               "this input; split it or check that it is the right file")
    if info.st_size > limit:
        raise InputError(too_big)
    try:
        with open(path, "rb") as fh:
            data = fh.read(limit + 1)
    except OSError as exc:
        raise InputError(f"{path}: cannot read the file ({exc.strerror})") from None
    if len(data) > limit:
        raise InputError(too_big)
    return data
