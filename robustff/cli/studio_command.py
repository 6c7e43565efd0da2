"""``robustff studio``: the interactive text UI (Textual), imported only when the command runs."""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

from robustff.errors import RobustffError

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
    if case.balance is not None:
        raise RobustffError(f"the studio does not yet edit plants built from balances "
                            f"({case.balance.kind}); use 'robustff check' and 'robustff run' "
                            "on this case")
    _require_terminal()
    from robustff.tui.app import StudioApp  # Textual is imported only here

    StudioApp(path, case=case).run()
    return 0


def _require_terminal() -> None:
    """Refuse to start without a terminal: the screen would go nowhere and wait for keys forever."""
    streams = {"standard input": sys.stdin, "standard output": sys.stdout}
    missing = [name for name, stream in streams.items() if not (stream and stream.isatty())]
    if missing:
        raise RobustffError(
            f"the studio needs a terminal, but {' and '.join(missing)} "
            f"{'is' if len(missing) == 1 else 'are'} not connected to one "
            "(run it in a terminal or over SSH with a terminal; for batch work use 'robustff run')"
        )
