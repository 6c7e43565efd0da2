"""Autosave of unsaved studio edits to a recovery file, and finding it again at the next start.

The recovery file sits next to the case as ``.<name>.recovery.toml`` when that folder is
writable (and is not the installed package's demo folder); otherwise in
``~/.cache/robustff/`` (or ``$XDG_CACHE_HOME/robustff``) under a name that includes a hash of
the case path. It is an ordinary case file whose first comment line records the case it belongs
to, so it can also be opened by hand. Writes are atomic (temporary file, fsync, rename), so a
dropped SSH session never leaves half a file.
"""

from __future__ import annotations

import hashlib
import os
import time
from dataclasses import dataclass, replace
from pathlib import Path

from robustff.atomic import write_text_atomic
from robustff.case import Case, case_to_toml, parse_case
from robustff.errors import CaseError

__all__ = ["Recovery", "recovery_path", "write_recovery", "read_recovery", "discard_recovery"]

_MARK = "# robustff studio recovery file for: "


@dataclass(frozen=True)
class Recovery:
    """A recovery file found for a case.

    Attributes
    ----------
    path : Path
        The recovery file.
    case : Case
        The edited case it holds (``source_path`` set to the original case file).
    text : str
        Its TOML text (without the marker line).
    saved_at : float
        Modification time, seconds since the epoch.
    """

    path: Path
    case: Case
    text: str
    saved_at: float

    def age_text(self) -> str:
        """When it was written, e.g. ``"2026-05-10 14:03"``."""
        return time.strftime("%Y-%m-%d %H:%M", time.localtime(self.saved_at))


def _cache_folder() -> Path:
    base = os.environ.get("XDG_CACHE_HOME") or str(Path.home() / ".cache")
    return Path(base) / "robustff"


def _writable(folder: Path) -> bool:
    package_demo = Path(__file__).resolve().parent.parent / "demo"
    return folder.resolve() != package_demo and os.access(folder, os.W_OK | os.X_OK)


def recovery_path(case_path: str | Path, cache: Path | None = None) -> Path:
    """Where the recovery file of ``case_path`` lives (see the module notes).

    Parameters
    ----------
    case_path : path
        The case file being edited.
    cache : Path, optional
        Fallback folder (default ``~/.cache/robustff``).
    """
    case_path = Path(case_path).resolve()
    if _writable(case_path.parent):
        return case_path.with_name(f".{case_path.stem}.recovery.toml")
    digest = hashlib.sha1(str(case_path).encode()).hexdigest()[:10]
    return (cache or _cache_folder()) / f"{case_path.stem}-{digest}.recovery.toml"


def write_recovery(path: Path, case: Case, original_text: str | None) -> None:
    """Write the edited case atomically to the recovery file ``path``.

    Raises
    ------
    CaseError
        If the file cannot be written (the studio shows it as a warning).
    """
    text = _MARK + str(case.source_path) + "\n" + case_to_toml(case, original_text)
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        write_text_atomic(path, text)
    except OSError as exc:
        raise CaseError(f"{path}: cannot write the recovery file ({exc.strerror or exc})") from None


def read_recovery(path: Path, case_path: Path) -> Recovery | None:
    """The recovery file at ``path``, or ``None`` if there is none or it is unreadable.

    A recovery file that no longer loads (e.g. the program changed) is ignored, not fatal.
    """
    try:
        raw = path.read_text(encoding="utf-8")
        saved_at = path.stat().st_mtime
    except OSError:
        return None
    first, _, body = raw.partition("\n")
    text = body if first.startswith(_MARK) else raw
    try:
        # record files are named relative to the case file, not to the recovery file
        case = parse_case(text, source=str(path), base_dir=Path(case_path).parent)
    except CaseError:
        return None
    return Recovery(path, replace(case, source_path=Path(case_path)), text, saved_at)


def discard_recovery(path: Path) -> None:
    """Remove the recovery file (after a save, or when the user declines to restore)."""
    path.unlink(missing_ok=True)
