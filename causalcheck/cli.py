"""The ``causalcheck`` command line: a thin front that parses, calls, renders and exits.

Exit codes: 0 success; 1 a pipeline gate failed (see ``--fail-below`` / ``--fail-if-invalid``);
2 bad input (a clear message on stderr, no traceback); 130 interrupted.
No statistics live here: each subcommand is a module in :mod:`causalcheck.commands` exposing
``register(subparsers)``, whose handler returns the exit code.
"""

from __future__ import annotations

import argparse
import sys
import warnings
from collections.abc import Sequence

from . import __version__
from .commands import COMMAND_MODULES
from .errors import CausalCheckError, CausalCheckWarning

__all__ = ["build_parser", "main"]

EXIT_CODES = """exit codes:
  0  the check ran (and every gate passed)
  1  a gate failed: a robustness value below --fail-below, or invalid controls with
     --fail-if-invalid
  2  bad input: the message names the file, field or column and how to fix it
"""


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="causalcheck",
        description=(
            "Decide whether a correlation in observational data may be read as a cause: "
            "valid and bad controls, naive vs adjusted slopes, omitted-variable bias, "
            "sensitivity to unmeasured confounders, what to measure next."
        ),
        epilog=EXIT_CODES,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    parser.add_argument("--version", action="version", version=f"causalcheck {__version__}")
    subparsers = parser.add_subparsers(dest="command", metavar="COMMAND")
    for module in COMMAND_MODULES:
        module.register(subparsers)
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    if not getattr(args, "handler", None):
        parser.print_help(sys.stderr)
        return 2
    try:
        return _run(args)
    except CausalCheckError as error:
        print(f"causalcheck {args.command}: error: {error}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        if getattr(args, "out", None) is not None:
            print(f"causalcheck {args.command}: interrupted; no file was left half-written, "
                  f"but {str(args.out)!r} may hold only part of the report: run again to "
                  "complete it", file=sys.stderr)
        else:
            print(f"causalcheck {args.command}: interrupted; no report was written",
                  file=sys.stderr)
        return 130
    except BrokenPipeError:
        return 0


def _run(args: argparse.Namespace) -> int:
    """Call the handler, printing each of the tool's own warnings once as one line."""
    shown: set[str] = set()
    with warnings.catch_warnings():
        warnings.simplefilter("always", CausalCheckWarning)
        original = warnings.showwarning

        def show(message, category, filename, lineno, file=None, line=None):
            if not issubclass(category, CausalCheckWarning):
                return original(message, category, filename, lineno, file, line)
            if str(message) not in shown:
                shown.add(str(message))
                print(f"causalcheck {args.command}: warning: {message}", file=sys.stderr)
            return None

        warnings.showwarning = show
        return int(args.handler(args))


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
