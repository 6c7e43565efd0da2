"""Ctrl-C during ``robustff run``: the first stops the study, later ones cannot lose its results.

The first interrupt raises :class:`KeyboardInterrupt` as usual; the study runner catches it
between chunks and returns the finished ones. From then on (and as soon as the last chunk has
finished) the samples already simulated are what the user would lose, so a further Ctrl-C is
refused with a one-line note while the summary and the result files are written. SIGQUIT
(Ctrl-\\) still ends the program for a user who really wants to abandon them.
"""

from __future__ import annotations

import signal
import sys
import threading
from types import FrameType
from typing import Any, TextIO

__all__ = ["InterruptGuard"]


class InterruptGuard:
    """Context manager installing the run's SIGINT handler (main thread only; else a no-op).

    Parameters
    ----------
    stream : text stream, optional
        Where the note on an ignored interrupt goes (default: the current ``sys.stderr``).
    """

    def __init__(self, stream: TextIO | None = None) -> None:
        self.stream = stream
        self.keeping = False
        self.ignored = 0
        self._previous: Any = None
        self._installed = False

    def keep(self) -> None:
        """From now on an interrupt is ignored: finished samples are being kept."""
        self.keeping = True

    def _handle(self, signum: int, frame: FrameType | None) -> None:
        if not self.keeping:
            self.keeping = True
            raise KeyboardInterrupt
        self.ignored += 1
        stream = self.stream or sys.stderr
        stream.write(
            "robustff: still writing the results of the samples already simulated; "
            "Ctrl-C cannot stop this step (Ctrl-\\ abandons them)\n"
        )
        stream.flush()

    def __enter__(self) -> InterruptGuard:
        if threading.current_thread() is threading.main_thread():
            self._previous = signal.signal(signal.SIGINT, self._handle)
            self._installed = True
        return self

    def __exit__(self, *exc_info: object) -> None:
        if self._installed:
            signal.signal(signal.SIGINT, self._previous)
            self._installed = False
