"""``robustff studio``: the interactive text UI (Textual), imported only when the command runs."""

from __future__ import annotations

import argparse
from pathlib import Path

__all__ = ["register", "execute"]


def register(subparsers: argparse._SubParsersAction) -> None:
    parser = subparsers.add_parser(
        "studio", help="edit a case and watch the study rerun live (text UI)",
        description="Open CASE in the interactive studio; without CASE, the bundled demo "
                    "case 'wash-water-heater' (save it under a new name to keep edits).",
    )
    parser.add_argument("case", metavar="CASE.toml", nargs="?", help="case file (default: demo)")
    parser.set_defaults(func=execute)


def execute(args: argparse.Namespace) -> int:
    from robustff.case import load_case
    from robustff.demo import demo_case_path

    path = Path(args.case) if args.case else demo_case_path("wash-water-heater")
    case = load_case(path)  # errors go to the CLI's one-line messages before the screen opens
    from robustff.tui.app import StudioApp  # Textual is imported only here

    StudioApp(path, case=case).run()
    return 0
