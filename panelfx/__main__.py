"""Command line: ``python -m panelfx <command>`` (also the ``panelfx`` console script).

Commands: ``demo`` (invented demo cohort -> check -> derived variables), and, from
:mod:`panelfx.cli`, ``check``, ``apply`` and ``dictionary``.
"""

from __future__ import annotations

import sys
from typing import Sequence


def main(argv: Sequence[str] | None = None) -> int:
    args = list(sys.argv[1:] if argv is None else argv)
    if not args or args[0] in ("-h", "--help"):
        print(__doc__)
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
