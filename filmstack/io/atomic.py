"""Write output files atomically: all of the new content, or the old file untouched.

The content goes to a temporary file in the destination's own folder (so the final move never
crosses file systems), is flushed to disk, and is then moved over the destination with
:func:`os.replace`, which is atomic on POSIX and Windows. If anything fails before the move, the
temporary file is removed and the destination is left as it was: a failed run never leaves a
half-written or empty output behind.

Problems the user can fix (a missing folder, no permission, a path that is a folder) raise
:class:`~filmstack.errors.InputError` naming the file.
"""

from __future__ import annotations

import contextlib
import os
import tempfile
from pathlib import Path
from typing import IO, Iterator

from ..errors import InputError

__all__ = ["atomic_write", "write_text_atomic", "write_bytes_atomic", "check_writable"]


def check_writable(path: str | os.PathLike) -> Path:
    """Check, before any work, that ``path`` can be written; return it as a :class:`Path`.

    Raises :class:`InputError` if its folder does not exist, is not writable, or if ``path`` is
    an existing folder. Nothing is created.
    """
    p = Path(path)
    folder = p.parent if str(p.parent) else Path(".")
    if p.is_dir():
        raise InputError("is a folder; expected a file name to write", file=str(path))
    if not folder.is_dir():
        raise InputError(f"cannot write: folder '{folder}' does not exist", file=str(path))
    if not os.access(folder, os.W_OK | os.X_OK):
        raise InputError(f"cannot write: no permission to write in folder '{folder}'",
                         file=str(path))
    return p


def _default_mode(path: Path) -> int:
    """Permission bits for a new file: those of the file it replaces, else 0o666 less umask."""
    try:
        return path.stat().st_mode & 0o7777
    except OSError:
        umask = os.umask(0)
        os.umask(umask)
        return 0o666 & ~umask


@contextlib.contextmanager
def atomic_write(path: str | os.PathLike, mode: str = "w", *, encoding: str | None = "utf-8",
                 newline: str | None = None) -> Iterator[IO]:
    """Open a temporary file for writing; move it to ``path`` when the block ends without error.

    Parameters
    ----------
    path
        The destination file.
    mode
        ``"w"`` (text) or ``"wb"`` (bytes).
    encoding, newline
        As for :func:`open`, text mode only.

    Examples
    --------
    >>> with atomic_write("out.csv") as f:            # doctest: +SKIP
    ...     f.write("wavelength_nm,R\\n")
    """
    if mode not in ("w", "wb"):
        raise ValueError(f"mode must be 'w' or 'wb', got {mode!r}")
    dest = check_writable(path)
    folder = dest.parent if str(dest.parent) else Path(".")
    try:
        fd, tmp = tempfile.mkstemp(prefix=f".{dest.name}.", suffix=".part", dir=folder)
    except OSError as exc:
        raise InputError(f"cannot write: {exc.strerror}", file=str(path)) from exc
    try:
        kwargs = {} if mode == "wb" else {"encoding": encoding, "newline": newline}
        with os.fdopen(fd, mode, **kwargs) as f:
            yield f
            f.flush()
            os.fsync(f.fileno())
        os.chmod(tmp, _default_mode(dest))
        os.replace(tmp, dest)
    except BaseException:
        with contextlib.suppress(OSError):
            os.unlink(tmp)
        raise


def write_text_atomic(path: str | os.PathLike, text: str, *, encoding: str = "utf-8") -> None:
    """Write ``text`` to ``path`` atomically (see :func:`atomic_write`)."""
    with atomic_write(path, "w", encoding=encoding, newline="") as f:
        f.write(text)


def write_bytes_atomic(path: str | os.PathLike, data: bytes) -> None:
    """Write ``data`` to ``path`` atomically (see :func:`atomic_write`)."""
    with atomic_write(path, "wb") as f:
        f.write(data)


def write_files_atomic(files) -> None:
    """Write each ``(path, content)`` pair atomically: bytes as they are, text as UTF-8.

    Outputs are prepared in full before this is called, so bad input never leaves a file.
    """
    for path, content in files:
        if isinstance(content, bytes):
            write_bytes_atomic(path, content)
        else:
            write_text_atomic(path, content)
