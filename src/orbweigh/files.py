"""Writing output files atomically: an interrupted run leaves no half-written file."""
from __future__ import annotations

import os
import tempfile
from pathlib import Path

__all__ = ["write_atomic"]


def write_atomic(path, content):
    """Write text or bytes to ``path`` through a temporary file in the same folder, renamed."""
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(dir=path.parent, prefix=f".{path.name}.", suffix=".tmp")
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(content.encode("utf-8") if isinstance(content, str) else content)
        os.replace(tmp, path)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise
