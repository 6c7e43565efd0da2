"""Keystrokes reach the widget that had focus when they were typed, however fast they arrive.

Textual hands each key to the widget focused at the moment the key is read from the terminal,
but a key that moves focus (Tab, Enter on a button, a key opening a dialog) only takes effect
once the focused widget and its parents have processed it. Keys read in the same burst (a paste,
a laggy SSH link, ``tmux send-keys``) would then land in the field the burst started in.

:class:`KeyOrder` (a mixin of the studio app) lets one key through at a time: while a key and
everything it set off (focus moves, edits, dialogs being mounted) is still being processed, the
keys behind it wait in a backlog, and each is released only once the screen has settled (the
editor panes being rebuilt after an edit count as not settled: the keys are for the new rows).
"""

from __future__ import annotations

import asyncio
from collections import deque

from textual import events
from textual.dom import NoScreen
from textual.message_pump import MessagePump

from robustff.tui.host import StudioHost

__all__ = ["KeyOrder", "SETTLE_SECONDS", "REBUILD_SECONDS"]

#: Longest wait (seconds) for the screen to settle before the next key is released anyway
#: (a widget that never falls idle must not hold the keyboard).
SETTLE_SECONDS = 1.0
#: Longest extra wait (seconds) while the editor panes are being rebuilt (they always finish;
#: a loaded machine may take a few seconds to mount a large case's rows).
REBUILD_SECONDS = 10.0

_ORDERED = (events.Key, events.Paste)
#: Most time one turn of the event loop counts towards the settling limit (seconds).
_TURN_SECONDS = 0.05


class KeyOrder(StudioHost):
    """Serialises keyboard input; mixed into :class:`robustff.tui.app.StudioApp`."""

    _key_backlog: deque[events.Event]
    _key_released: events.Event | None
    _key_task: asyncio.Task[None] | None

    def init_key_order(self) -> None:
        """Set up the backlog (called from the app's ``__init__``)."""
        self._key_backlog = deque()
        self._key_released = None
        self._key_task = None

    @property
    def keys_pending(self) -> int:
        """Keys read but not yet handed to a widget (0 when the keyboard is idle)."""
        return len(self._key_backlog) + (self._key_task is not None)

    async def on_event(self, event: events.Event) -> None:
        if not isinstance(event, _ORDERED) or event.is_forwarded:
            await super().on_event(event)
            return
        if event is self._key_released:  # a backlog key, its turn now
            self._key_released = None
            await super().on_event(event)
            return
        if self._key_task is not None:
            self._key_backlog.append(event)
            return
        await super().on_event(event)
        self._key_task = asyncio.create_task(self._release_backlog())

    async def _release_backlog(self) -> None:
        try:
            await self._settle()
            while self._key_backlog and self.is_running:
                event = self._key_backlog.popleft()
                self._key_released = event
                self.post_message(event)
                await self._settle()
        finally:
            self._key_task = None
            self._key_released = None

    async def _settle(self) -> None:
        """Wait until the app and every widget of the screen have empty message queues.

        Checked twice in a row, with a turn of the event loop between, so a widget that is
        still handling a message (and may post more) is waited for too. The time limit counts
        the turns of the event loop, each at most :data:`_TURN_SECONDS`: a handler that holds
        the loop for long (a design recomputed while a study thread runs) is progress, and must
        not use up the limit before the messages it posts are seen.
        """
        loop = asyncio.get_running_loop()
        waited, quiet = 0.0, 0
        while quiet < 2 and waited < SETTLE_SECONDS + (
                REBUILD_SECONDS if self._rebuilding() else 0.0):
            before = loop.time()
            await asyncio.sleep(0)
            waited += min(loop.time() - before, _TURN_SECONDS)
            idle = self._key_released is None and not self._rebuilding() and all(
                node._message_queue.empty() for node in self._live_nodes())
            quiet = quiet + 1 if idle else 0

    def _rebuilding(self) -> bool:
        """True while the editor panes are being recomposed (the app's ``rebuild`` workers)."""
        return any(worker.group == "rebuild" and not worker.is_finished
                   for worker in self.workers)

    def _live_nodes(self) -> list[MessagePump]:
        try:
            return [self, *self.screen.walk_children(with_self=True)]
        except NoScreen:  # closing
            return [self]
