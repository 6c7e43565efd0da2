"""Focus is unmistakable without colour, checked in a 16-colour terminal (TERM=xterm): the
focused control is in reverse video, its row's label carries a marker readable in plain text,
and a focused scroll pane shows a bar on its left."""

from __future__ import annotations

import asyncio
from pathlib import Path

import pytest

textual = pytest.importorskip("textual")

from studio_pilot import studio  # noqa: E402
from textual.widgets import Input, Select  # noqa: E402

from robustff.tui.messages import field_id  # noqa: E402
from robustff.tui.models_pane import FOCUS_MARK  # noqa: E402


def _reverse(app, widget) -> bool:
    region = widget.region
    return bool(app.screen.get_style_at(region.x, region.y).reverse)


def _line_of(text: str, label: str) -> str:
    return next(line for line in text.splitlines() if label in line)


def test_focus_shows_in_a_16_colour_terminal_without_colour(
        case_file: Path, tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setenv("TERM", "xterm")
    monkeypatch.delenv("COLORTERM", raising=False)

    async def scenario() -> None:
        app = studio(case_file, tmp_path / "cache", live=False)
        async with app.run_test(size=(80, 24)) as pilot:
            assert app.console.color_system == "standard"  # 16 colours
            gain = app.query_one(f"#in-{field_id('process.gain')}", Input)
            lag = app.query_one(f"#in-{field_id('process.time_constant')}", Input)
            await pilot.press("tab")
            await pilot.pause()
            assert app.focused is gain
            assert _reverse(app, gain) and not _reverse(app, lag)
            text = app.screen_text()
            assert f"{FOCUS_MARK}gain K" in _line_of(text, "gain K")
            assert FOCUS_MARK not in _line_of(text, "lag tau")
            await pilot.press("tab")
            await pilot.pause()
            text = app.screen_text()
            assert f"{FOCUS_MARK}lag tau" in text and f"{FOCUS_MARK}gain K" not in text
            assert _reverse(app, lag) and not _reverse(app, gain)
            form = app.query_one(f"#in-{field_id('feedback.form')}", Select)
            form.focus()
            await pilot.pause()
            assert _reverse(app, form.query_one("SelectCurrent"))
            assert f"{FOCUS_MARK}form" in app.screen_text()
            results = app.query_one("#results-scroll")
            column = results.region.x
            assert all(line[column] == " " for line in app.screen_text().splitlines()[
                results.region.y:results.region.bottom])
            results.focus()
            await pilot.pause()
            lines = app.screen_text().splitlines()[results.region.y:results.region.bottom]
            assert all(line[column] == "┃" for line in lines)

    asyncio.run(scenario())


def test_a_pane_gaining_or_losing_focus_restyles_only_itself(
        case_file: Path, tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    # Textual restyles a widget's whole subtree on a focus change; the editor holds some 300
    # widgets, and restyling them cost a quarter of a second at start and at each Tab into or
    # out of the pane. Its focus bar must still come and go.
    from textual.css.stylesheet import Stylesheet

    applied: list[object] = []
    original = Stylesheet.apply

    def counting(self, node, *args, **kwargs):
        applied.append(node)
        return original(self, node, *args, **kwargs)

    async def scenario() -> None:
        app = studio(case_file, tmp_path / "cache", live=False)
        async with app.run_test(size=(80, 24)) as pilot:
            editor = app.query_one("#editor")
            fields = set(editor.query("Input"))
            assert len(fields) > 20

            def inside(node) -> bool:  # a field of the pane (its own scroll bars aside)
                return node in fields
            column = editor.region.x
            app.set_focus(None)
            await pilot.pause()
            assert app.screen_text().splitlines()[editor.region.y + 1][column] == " "
            monkeypatch.setattr(Stylesheet, "apply", counting)
            editor.focus()
            await pilot.pause()
            assert app.screen_text().splitlines()[editor.region.y + 1][column] == "┃"
            assert not [node for node in applied if inside(node)]
            applied.clear()
            app.set_focus(None)
            await pilot.pause()
            assert app.screen_text().splitlines()[editor.region.y + 1][column] == " "
            assert not [node for node in applied if inside(node)]

    asyncio.run(scenario())
