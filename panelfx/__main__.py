"""Command line: ``python -m panelfx <command>`` (also the ``panelfx`` console script).

Commands: ``demo`` (invented demo cohort -> check -> derived variables), and, from
:mod:`panelfx.cli`, ``check``, ``apply`` and ``dictionary``.
"""

from __future__ import annotations

import sys
from collections.abc import Sequence

HELP = """usage: python -m panelfx <command> [options]     (or: panelfx <command> [options])

commands:
  demo        run panelfx on the invented demo cohort: check it, derive history variables
  check       print the structure report of a CSV or Parquet panel file (exit 1 on fatal problems)
  apply       apply a saved derivation (JSON) to a CSV or Parquet file, write Parquet or CSV
  dictionary  print the data dictionary of a saved derivation

'python -m panelfx <command> --help' lists a command's options."""


def main(argv: Sequence[str] | None = None) -> int:
    args = list(sys.argv[1:] if argv is None else argv)
    if not args or args[0] in ("-h", "--help"):
        print(HELP)
        return 0
    if args[0] == "--version":
        from . import __version__

        print(f"panelfx {__version__}")
        return 0
    command, rest = args[0], args[1:]
    if command == "demo":
        from .demo import main as demo_main

        return demo_main(rest)
    try:
        from .cli import COMMANDS
    except ImportError:  # the file commands are not built yet
        COMMANDS = {}
    if command in COMMANDS:
        return COMMANDS[command](rest)
    print(f"panelfx: unknown command {command!r}; try 'python -m panelfx --help'", file=sys.stderr)
    return 2


if __name__ == "__main__":
    sys.exit(main())
