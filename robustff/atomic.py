"""Atomic file writes: a temporary file in the same folder, flushed to disk, then renamed."""

from __future__ import annotations

import os
import tempfile
from pathlib import Path

__all__ = ["write_text_atomic"]


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
    folder = path.parent if str(path.parent) else Path(".")
    handle, temporary = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=folder)
    try:
        with os.fdopen(handle, "w", encoding="utf-8", newline="\n") as stream:
            stream.write(text)
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
