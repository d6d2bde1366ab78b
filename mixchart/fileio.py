"""Atomic text writes: nothing is lost if a save is interrupted."""

from __future__ import annotations

import os
import stat
import tempfile
from pathlib import Path

from .errors import MixchartError

__all__ = ["atomic_write_text"]


def atomic_write_text(path: str | os.PathLike[str], text: str, *, error: type[MixchartError], field: str) -> Path:
    """Write ``text`` to ``path`` so that readers see the old file or the new one, never a part.

    The text goes to a temporary file in the same folder, is flushed to disk,
    then renamed over ``path``.  The new file keeps the mode of the file it
    replaces (0644 for a new file).

    Parameters
    ----------
    path : path-like
        Destination file.
    text : str
        Content, written as UTF-8.
    error : type of MixchartError
        Error raised if the file cannot be written.
    field : str
        What the path is, for the message (e.g. ``"plan file"``).

    Returns
    -------
    pathlib.Path
        The path written.

    Raises
    ------
    MixchartError
        (of type ``error``) when the folder is missing or not writable.
    """
    path = Path(path)
    try:
        mode = stat.S_IMODE(path.stat().st_mode) if path.exists() else 0o644  # mkstemp alone leaves 0600
        fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=path.parent)
    except OSError as exc:
        raise error(f"{field}: {str(path)!r} cannot be written ({exc.strerror or exc})") from None
    try:
        with os.fdopen(fd, "w", encoding="utf-8") as handle:
            os.fchmod(handle.fileno(), mode)
            handle.write(text)
            handle.flush()
            os.fsync(handle.fileno())
        os.replace(tmp, path)
    except BaseException as exc:
        try:
            os.unlink(tmp)
        except OSError:
            pass
        if isinstance(exc, OSError):
            raise error(f"{field}: {str(path)!r} cannot be written ({exc.strerror or exc})") from None
        raise
    return path
