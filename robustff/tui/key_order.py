"""Keystrokes reach the widget that had focus when they were typed, however fast they arrive.

Textual hands each key to the widget focused at the moment the key is read from the terminal,
but a key that moves focus (Tab, Enter on a button, a key opening a dialog) only takes effect
once the focused widget and its parents have processed it. Keys read in the same burst (a paste,
a laggy SSH link, ``tmux send-keys``) would then land in the field the burst started in.

:class:`KeyOrder` (a mixin of the studio app) lets one key through at a time: while a key and
everything it set off (focus moves, edits, dialogs being mounted) is still being processed, the
keys behind it wait in a backlog, and each is released only once the screen has settled.
"""

from __future__ import annotations

import asyncio
from collections import deque

from textual import events
from textual.dom import NoScreen
from textual.message_pump import MessagePump

from robustff.tui.host import StudioHost

__all__ = ["KeyOrder", "SETTLE_SECONDS"]

#: Longest wait (seconds) for the screen to settle before the next key is released anyway
#: (a widget that never falls idle must not hold the keyboard).
SETTLE_SECONDS = 1.0

_ORDERED = (events.Key, events.Paste)


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
        still handling a message (and may post more) is waited for too.
        """
        loop = asyncio.get_running_loop()
        deadline = loop.time() + SETTLE_SECONDS
        quiet = 0
        while quiet < 2 and loop.time() < deadline:
            await asyncio.sleep(0)
            idle = self._key_released is None and all(
                node._message_queue.empty() for node in self._live_nodes())
            quiet = quiet + 1 if idle else 0

    def _live_nodes(self) -> list[MessagePump]:
        try:
            return [self, *self.screen.walk_children(with_self=True)]
        except NoScreen:  # closing
            return [self]
