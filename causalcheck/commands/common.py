"""Options and output shared by every subcommand."""

from __future__ import annotations

import argparse
import sys
from pathlib import Path
from typing import Any, Callable

from ..report.jsonout import dumps

__all__ = ["add_output_options", "add_gate_options", "emit", "GateResult"]


def add_output_options(parser: argparse.ArgumentParser, *, out: bool = True) -> None:
    parser.add_argument("--format", choices=("text", "json"), default="text",
                        help="text for people (default), json for pipelines (the JSON contract)")
    parser.add_argument("--quiet", action="store_true",
                        help="print only the verdict paragraph (text format); no progress bars")
    if out:
        parser.add_argument("--out", metavar="DIR", type=Path,
                            help="also write report.html, report.md, result.json and figures "
                                 "into DIR (a new or empty folder, or one causalcheck wrote)")
        parser.add_argument("--force", action="store_true",
                            help="with --out: write into a non-empty folder causalcheck did "
                                 "not create")


def add_gate_options(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--fail-below", metavar="RV", type=float,
                        help="exit 1 when the robustness value (or, with --gate-on ci, the "
                             "robustness value of the CI) is below RV, e.g. 0.05")
    parser.add_argument("--gate-on", choices=("estimate", "ci"), default="estimate",
                        help="which robustness value --fail-below checks (default estimate)")
    parser.add_argument("--fail-if-invalid", action="store_true",
                        help="exit 1 when the declared controls are not a valid adjustment set")


class GateResult:
    """Which pipeline gates failed, with a sentence each."""

    def __init__(self) -> None:
        self.failures: list[str] = []

    def fail(self, sentence: str) -> None:
        self.failures.append(sentence)

    @property
    def exit_code(self) -> int:
        return 1 if self.failures else 0


def emit(args: argparse.Namespace, document: dict[str, Any], text: Callable[[], str],
         *, write_bundle: Callable[[Path], None] | None = None,
         gates: GateResult | None = None) -> int:
    """Print the result in the chosen format, write ``--out`` when asked; return the exit code."""
    if getattr(args, "out", None) is not None and write_bundle is not None:
        write_bundle(args.out)
    if args.format == "json":
        sys.stdout.write(dumps(document))
    else:
        sys.stdout.write(text().rstrip("\n") + "\n")
    if gates is not None and gates.failures:
        for sentence in gates.failures:
            print(f"causalcheck {args.command}: gate failed: {sentence}", file=sys.stderr)
    return gates.exit_code if gates is not None else 0
