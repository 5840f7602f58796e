"""The ``fieldrate`` command.

Each subcommand lives in its own module under :mod:`service.commands` and provides
``register(subparsers)``, which adds its parser and sets ``func`` (called with the parsed
arguments, returning the exit status). Add a command by adding its module to
:data:`COMMAND_MODULES`.
"""

from __future__ import annotations

import argparse
import importlib
import sys
from collections.abc import Sequence
from typing import Optional

__all__ = ["COMMAND_MODULES", "build_parser", "main"]

#: modules that register a subcommand, in the order shown by --help
COMMAND_MODULES: list[str] = [
    "service.commands.serve",
    "service.commands.db",
    "service.commands.keys",
    "service.commands.backup",
    "service.commands.importcsv",
    "service.commands.report",
    "service.commands.calc",
]


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="fieldrate",
        description="Hydrolysis rate constants from the laboratory turned into field predictions.",
    )
    subparsers = parser.add_subparsers(dest="command", metavar="COMMAND")
    for name in COMMAND_MODULES:
        importlib.import_module(name).register(subparsers)
    return parser


def main(argv: Optional[Sequence[str]] = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    func = getattr(args, "func", None)
    if func is None:
        parser.print_help()
        return 2
    return int(func(args) or 0)


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
