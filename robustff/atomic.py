"""Atomic file writes: a temporary file in the same folder, flushed to disk, then renamed.

:func:`write_text_atomic` writes one string; :func:`open_atomic` gives a stream for files
written piece by piece (large tables in row blocks), with the same guarantees.
"""

from __future__ import annotations

import os
import tempfile
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import IO, Any

__all__ = ["write_text_atomic", "open_atomic"]


def write_text_atomic(path: Path, text: str) -> None:
    """Replace ``path`` with ``text`` (UTF-8, ``\\n`` newlines) in one rename.

    A crash or a full disk leaves either the old file or the new one, never half of one; the
    temporary file is removed when the write fails. An existing file keeps its permission bits;
    a new one gets the umask's.

    Raises
    ------
    OSError
        When the folder cannot be written; the caller words the message for the user.
    """
    with open_atomic(path) as stream:
        stream.write(text)


@contextmanager
def open_atomic(path: Path, binary: bool = False) -> Iterator[IO[Any]]:
    """A stream whose content replaces ``path`` in one rename when the ``with`` block ends.

    Parameters
    ----------
    path : Path
        The file to replace (or create).
    binary : bool
        A binary stream; otherwise text, UTF-8 with ``\\n`` newlines.

    Yields
    ------
    stream
        Written to a temporary file in the same folder. When the block ends normally the
        stream is flushed, given the permission bits of :func:`write_text_atomic` (an existing
        file's, or the umask's), synced to disk and renamed over ``path``; when it raises, the
        temporary file is removed and ``path`` is untouched.

    Raises
    ------
    OSError
        When the folder cannot be written; the caller words the message for the user.
    """
    folder = path.parent if str(path.parent) else Path(".")
    handle, temporary = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=folder)
    try:
        if binary:
            stream: IO[Any] = os.fdopen(handle, "wb")
        else:
            stream = os.fdopen(handle, "w", encoding="utf-8", newline="\n")
        with stream:
            yield stream
            stream.flush()
            os.chmod(temporary, _target_mode(path))
            os.fsync(stream.fileno())
        os.replace(temporary, path)
    except BaseException:
        Path(temporary).unlink(missing_ok=True)
        raise


def _target_mode(path: Path) -> int:
    """The permission bits the written file should have.

    mkstemp creates 0600; colleagues on a shared plant server would lose read access. An
    existing file keeps its mode; a new one gets what the umask gives an ordinary new file.
    """
    try:
        return path.stat().st_mode & 0o7777
    except FileNotFoundError:
        umask = os.umask(0)
        os.umask(umask)
        return 0o666 & ~umask
