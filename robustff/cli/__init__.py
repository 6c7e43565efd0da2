"""The ``robustff`` command line: a thin shell over the engine API.

Each sub-command lives in its own module in this package and exposes ``register(subparsers)``,
which adds its parser and sets ``func`` to a callable taking the parsed arguments and returning
the exit status. User errors (:class:`robustff.errors.RobustffError`) are printed as one line per
problem on stderr with exit status 2; no traceback is shown.
"""

from __future__ import annotations

import argparse
import importlib
import os
import sys
from collections.abc import Sequence

# One BLAS thread: the matrices here are tiny, and an idle BLAS thread pool spins on a core the
# simulation threads need (about 6 % of a run's CPU on two cores). Set before numpy loads its
# BLAS; a value the user set is kept.
os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

from robustff.cli.exit_codes import EXIT_INTERRUPTED, EXIT_OK, EXIT_USAGE
from robustff.errors import RobustffError

__all__ = ["main", "COMMAND_MODULES", "EXIT_OK", "EXIT_USAGE", "EXIT_INTERRUPTED"]

#: Sub-command modules, in the order they appear in ``robustff --help``.
COMMAND_MODULES: tuple[str, ...] = (
    "robustff.cli.check_command",
    "robustff.cli.run_command",
    "robustff.cli.tune_command",
    "robustff.cli.fit_command",
    "robustff.cli.excursion_command",
    "robustff.cli.studio_command",
)


class _Parser(argparse.ArgumentParser):
    """An argument parser whose usage errors exit with status 2 and one clear line.

    Prefix matching is off: ``--sample 100`` is an error, not a silent ``--samples 100``.
    """

    def __init__(self, *args: object, **kwargs: object) -> None:
        kwargs.setdefault("allow_abbrev", False)
        super().__init__(*args, **kwargs)  # type: ignore[arg-type]

    def error(self, message: str) -> None:  # type: ignore[override]
        words = self.prog.split()
        command = "robustff" if len(words) == 1 else f"robustff {words[-1]}"
        self.exit(EXIT_USAGE, f"robustff: error: {message} (see '{command} --help')\n")


def build_parser() -> argparse.ArgumentParser:
    """The top-level parser with every available sub-command."""
    parser = _Parser(prog="robustff", description="Robustness studies of feedforward control.")
    from robustff import __version__

    parser.add_argument("--version", action="version", version=f"robustff {__version__}")
    subparsers = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    for module_name in COMMAND_MODULES:
        try:
            module = importlib.import_module(module_name)
        except ModuleNotFoundError as exc:
            if exc.name == module_name:
                continue  # command not part of this build
            raise
        module.register(subparsers)
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    """Run the command line; returns the exit status."""
    parser = build_parser()
    try:
        args = parser.parse_args(argv)
    except SystemExit as exc:  # --help, --version, or a usage error already reported
        return int(exc.code or 0)
    if not getattr(args, "func", None):
        parser.print_help(sys.stderr)
        return EXIT_USAGE
    # The command as typed, kept in summary.json and the report (the core never reads argv).
    args.command_line = ["robustff", *(sys.argv[1:] if argv is None else argv)]
    try:
        return int(args.func(args))
    except RobustffError as exc:
        for line in str(exc).splitlines() or [type(exc).__name__]:
            print(f"robustff: error: {line}", file=sys.stderr)
        return EXIT_USAGE
    except OSError as exc:
        target = f" {exc.filename}" if exc.filename else ""
        print(
            f"robustff: error: cannot read or write{target}: {exc.strerror or exc}", file=sys.stderr
        )
        return EXIT_USAGE
    except KeyboardInterrupt:
        print("robustff: interrupted", file=sys.stderr)
        return EXIT_INTERRUPTED
    except MemoryError:
        print("robustff: error: out of memory; run fewer samples (--samples) or on a machine "
              "with more memory", file=sys.stderr)
        return EXIT_USAGE
