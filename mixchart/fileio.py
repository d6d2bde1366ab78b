"""File access for untrusted paths and atomic writes.

:func:`read_regular_file` reads a file named by untrusted input (a plan, a level table, a
Touchstone file): only a regular file, after following links, never blocking on a FIFO or a
device, and never more than a stated number of bytes.  :func:`atomic_write_text` writes so
that nothing is lost if a save is interrupted, and clears the temporary files that killed
writers left behind.
"""

from __future__ import annotations

import os
import re
import stat
import time
from pathlib import Path

from .errors import MixchartError, one_line

__all__ = ["atomic_write_text", "read_regular_file", "STALE_TEMP_SECONDS"]

#: A temporary file of ours older than this (seconds) whose writer is gone is removed by the
#: next write to the same target.  Common practice, no source: a save takes well under a second.
STALE_TEMP_SECONDS = 60.0
_READ_CHUNK = 1 << 20


def _cannot_read(error: type[MixchartError], field: str, path: Path, reason: str) -> MixchartError:
    # The full path is the useful part, so it is not shortened as field_error would.
    return error(one_line(f"{field}: {str(path)!r} is invalid; {reason}"))


def read_regular_file(
    path: str | os.PathLike[str], max_bytes: int, *, error: type[MixchartError], field: str
) -> bytes:
    """The bytes of a regular file, read safely from an untrusted path.

    Links are followed first; anything but a regular file (a FIFO, a device such as
    ``/dev/zero``, a directory, a socket) is refused before it is read.  The file is opened
    with ``O_NONBLOCK`` (so a FIFO swapped in after the check cannot block the open) and
    checked again with ``fstat`` on the open descriptor (so the check and the read see the
    same file).  At most ``max_bytes + 1`` bytes are read: a file that reports a small size
    but holds more (``/proc``-like files, a file growing under us) is refused too.

    Parameters
    ----------
    path : path-like
        The file.
    max_bytes : int
        Largest content accepted, bytes.
    error : type of MixchartError
        Error raised for any problem.
    field : str
        What the path is, for the message (e.g. ``"filters.rf.path"``).

    Returns
    -------
    bytes
        The whole content.

    Raises
    ------
    MixchartError
        (of type ``error``) one line naming ``field`` and the path, and why: missing,
        unreadable, not a regular file, or larger than ``max_bytes``.  Nothing of the file's
        content is ever quoted.
    """
    path = Path(path)
    too_large = f"larger than {max_bytes} bytes; at most {max_bytes}"
    try:
        real = path.resolve(strict=True)
        if not stat.S_ISREG(os.stat(real).st_mode):
            raise _cannot_read(error, field, path, "cannot be read (not a regular file)")
        fd = os.open(real, os.O_RDONLY | os.O_NONBLOCK | os.O_NOCTTY | getattr(os, "O_CLOEXEC", 0))
        try:
            info = os.fstat(fd)
            if not stat.S_ISREG(info.st_mode):  # replaced between the check and the open
                raise _cannot_read(error, field, path, "cannot be read (not a regular file)")
            if info.st_size > max_bytes:
                raise _cannot_read(error, field, path, too_large)
            chunks: list[bytes] = []
            total = 0
            while total <= max_bytes:
                chunk = os.read(fd, min(_READ_CHUNK, max_bytes + 1 - total))
                if not chunk:
                    break
                chunks.append(chunk)
                total += len(chunk)
            if total > max_bytes:
                raise _cannot_read(error, field, path, too_large)
        finally:
            os.close(fd)
    except OSError as exc:
        raise _cannot_read(error, field, path, f"cannot be read ({exc.strerror or type(exc).__name__})") from None
    except RuntimeError:  # a symlink loop in Path.resolve on older Pythons
        raise _cannot_read(error, field, path, "cannot be read (symbolic link loop)") from None
    return b"".join(chunks)


def _temp_pattern(name: str) -> re.Pattern[str]:
    """Our temporary names for target ``name``: ``.NAME.PID.RANDOM.tmp`` (group 1: the pid), or
    ``.NAME.XXXXXXXX.tmp`` as written by earlier releases through ``tempfile.mkstemp``."""
    return re.compile(re.escape(f".{name}.") + r"(?:(\d{1,10})\.[0-9a-f]{16}|[a-z0-9_]{8})\.tmp")


def _pid_alive(pid: int) -> bool:
    if pid <= 0:
        return False
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:  # someone else's live process
        return True
    except OSError:
        return False
    return True


def _remove_stale_temps(path: Path, now: float) -> None:
    """Remove temporary files a killed writer left for ``path``: ours, and stale or orphaned.

    Only names of exactly our pattern for this target are touched; one is removed when its
    writer's pid is no longer alive, or it is older than :data:`STALE_TEMP_SECONDS` (a pid
    can be reused).  Our own pid's files are left alone (another thread may be writing).
    """
    pattern = _temp_pattern(path.name)
    try:
        entries = list(os.scandir(path.parent))
    except OSError:
        return
    for entry in entries:
        found = pattern.fullmatch(entry.name)
        if not found:
            continue
        try:
            info = entry.stat(follow_symlinks=False)
            if not stat.S_ISREG(info.st_mode):
                continue
            old = now - info.st_mtime > STALE_TEMP_SECONDS
            if found.group(1) is None:  # an earlier release's name: no pid, so age alone decides
                if old:
                    os.unlink(entry.path)
                continue
            pid = int(found.group(1))
            if pid == os.getpid():
                continue
            if old or not _pid_alive(pid):
                os.unlink(entry.path)
        except (OSError, ValueError):
            continue  # gone already, or not ours to remove


def atomic_write_text(path: str | os.PathLike[str], text: str, *, error: type[MixchartError], field: str) -> Path:
    """Write ``text`` to ``path`` so that readers see the old file or the new one, never a part.

    The text goes to a temporary file ``.NAME.PID.RANDOM.tmp`` in the same folder, is
    flushed to disk, then renamed over ``path``.  The new file keeps the mode of the file it
    replaces (0644 for a new file).  Temporary files for the same target left by a writer
    that was killed (its pid is gone, or the file is older than :data:`STALE_TEMP_SECONDS`)
    are removed first; no other file is touched.

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
    _remove_stale_temps(path, time.time())
    try:
        mode = stat.S_IMODE(path.stat().st_mode) if path.exists() else 0o644
        fd, tmp = _create_temp(path)
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


def _create_temp(path: Path) -> tuple[int, str]:
    """A new temporary file beside ``path`` named with our pid, opened exclusively (mode 0600)."""
    for _ in range(100):
        tmp = os.path.join(path.parent, f".{path.name}.{os.getpid()}.{os.urandom(8).hex()}.tmp")
        try:
            return os.open(tmp, os.O_WRONLY | os.O_CREAT | os.O_EXCL | getattr(os, "O_CLOEXEC", 0), 0o600), tmp
        except FileExistsError:
            continue
    raise FileExistsError(f"no free temporary name beside {path}")  # pragma: no cover
