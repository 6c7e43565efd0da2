"""Helpers of the studio's pilot tests: the app on a small sample count, polling, and
keystrokes sent in one burst, as a terminal delivers a paste, a laggy SSH link or
``tmux send-keys``: every key is posted at once, with no pause in between."""

from __future__ import annotations

import re
import time
import unicodedata
from collections.abc import Callable
from dataclasses import replace
from pathlib import Path
from typing import TYPE_CHECKING

from textual import events
from textual.app import App
from textual.keys import KEY_NAME_REPLACEMENTS, key_to_character
from textual.pilot import Pilot
from textual.widgets import Input

if TYPE_CHECKING:
    from robustff.tui.app import StudioApp

__all__ = ["burst_keys", "burst", "wait_until", "studio", "keys_handled", "field_input"]

_SPECIAL = re.compile(r"<([a-z0-9_+]+)>")
_CHARACTERS = {"enter": "\r", "tab": "\t", "escape": "\x1b"}


def _key_name(character: str) -> str:
    if character.isalnum():
        return character
    name = unicodedata.name(character).lower().replace("-", "_").replace(" ", "_")
    return KEY_NAME_REPLACEMENTS.get(name, name)  # as Textual's terminal parser names it


def burst_keys(text: str) -> list[events.Key]:
    """Key events of ``text``: characters as typed, ``<tab>``, ``<enter>``, ``<f7>``... as keys."""
    keys: list[events.Key] = []
    position = 0
    for match in _SPECIAL.finditer(text):
        keys += [events.Key(_key_name(c), c) for c in text[position:match.start()]]
        name = match.group(1)
        keys.append(events.Key(name, _CHARACTERS.get(name) or key_to_character(name)))
        position = match.end()
    keys += [events.Key(_key_name(c), c) for c in text[position:]]
    return keys


def burst(app: App[object], text: str) -> None:
    """Post all keys of ``text`` to ``app`` at once (no await between them)."""
    for key in burst_keys(text):
        app.post_message(key)


async def wait_until(pilot: Pilot[object], condition: Callable[[], object], what: str,
                     timeout: float = 90.0) -> None:
    """Poll (50 ms) until ``condition()`` is true; fail naming ``what`` after ``timeout`` s."""
    started = time.monotonic()
    while not condition():
        if time.monotonic() - started > timeout:
            raise AssertionError(f"{what}: not in time")
        await pilot.pause(0.05)


def studio(case_file: Path, recovery: Path, samples: int = 300, live: bool = True) -> StudioApp:
    """The studio on ``case_file`` with a small sample count (keeps pilot tests quick)."""
    from robustff.case import load_case
    from robustff.tui.app import StudioApp

    case = load_case(case_file)
    return StudioApp(case_file, case=replace(case, study=replace(case.study, samples=samples)),
                     recovery_folder=recovery, live=live)


async def keys_handled(pilot: Pilot[object], app: StudioApp) -> None:
    """Wait until the app has read every posted key and handed each to a widget."""
    await pilot.pause()
    await wait_until(pilot, lambda: app.keys_pending == 0, "keys handled")
    await pilot.pause()


def field_input(app: App[object], name: str) -> Input:
    """The text field of the case value ``name`` (``"process.gain"``...)."""
    from robustff.tui.messages import field_id

    return app.query_one(f"#in-{field_id(name)}", Input)
