"""Exit statuses of the ``robustff`` command line.

A module of their own so that the sub-command modules, which :mod:`robustff.cli` loads, can use
them without importing their own package back.
"""

from __future__ import annotations

__all__ = ["EXIT_OK", "EXIT_USAGE", "EXIT_INTERRUPTED"]

EXIT_OK = 0  # the command did what was asked
EXIT_USAGE = 2  # a usage or input error, reported in one line per problem
EXIT_INTERRUPTED = 130  # stopped early (Ctrl-C); 128 + SIGINT, as shells report it
