"""Options and output shared by every subcommand.

- :func:`add_output_options` and :func:`add_gate_options` declare ``--format``, ``--quiet``,
  ``--out``/``--force`` and the pipeline gates, and put the exit codes in ``--help``;
- :func:`emit` prints the result (the verdict alone with ``--quiet``; the JSON contract with
  ``--format json``), writes the ``--out`` report folder, applies the gates and returns the exit
  code;
- :func:`style` adds colour only on a terminal that wants it (never when ``NO_COLOR`` is set,
  and nothing depends on it); :func:`progress` shows a tqdm bar on stderr for work that takes
  over two seconds, only on a terminal.
"""

from __future__ import annotations

import argparse
import os
import sys
import textwrap
from collections.abc import Callable, Iterable, Mapping
from pathlib import Path
from typing import Any, TextIO

from ..report.jsonout import dumps

__all__ = [
    "EXIT_CODES",
    "GateResult",
    "add_gate_options",
    "add_output_options",
    "check_gates",
    "emit",
    "progress",
    "style",
    "use_colour",
]

EXIT_CODES = """exit codes:
  0  the check ran (and every gate passed)
  1  a gate failed: --fail-below RV (the robustness value, or with --gate-on ci that of the
     confidence interval, is below RV), --fail-if-invalid (the declared controls are not a
     valid adjustment set) or, for wording, --fail-if-stronger (a claim is stronger than the
     evidence); the reason is on stderr
  2  bad input: the message names the file, field or column and how to fix it
"""


def _add_exit_codes(parser: argparse.ArgumentParser) -> None:
    """Append the exit codes to a subcommand's ``--help`` (once), keeping its line breaks."""
    epilog = parser.epilog or ""
    if "exit codes:" not in epilog:
        parser.epilog = (epilog.rstrip() + "\n\n" + EXIT_CODES) if epilog else EXIT_CODES
    parser.formatter_class = argparse.RawDescriptionHelpFormatter


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
    _add_exit_codes(parser)


def add_gate_options(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--fail-below", metavar="RV", type=float,
                        help="exit 1 when the robustness value (or, with --gate-on ci, the "
                             "robustness value of the CI) is below RV, e.g. 0.05")
    parser.add_argument("--gate-on", choices=("estimate", "ci"), default="estimate",
                        help="which robustness value --fail-below checks (default estimate)")
    parser.add_argument("--fail-if-invalid", action="store_true",
                        help="exit 1 when the declared controls are not a valid adjustment set")
    _add_exit_codes(parser)


class GateResult:
    """Which pipeline gates failed, with a sentence each."""

    def __init__(self) -> None:
        self.failures: list[str] = []

    def fail(self, sentence: str) -> None:
        self.failures.append(sentence)

    @property
    def exit_code(self) -> int:
        return 1 if self.failures else 0


def check_gates(args: argparse.Namespace, document: Mapping[str, Any]) -> GateResult:
    """The gates ``args`` asks for, checked against a result document.

    ``--fail-below`` reads ``robustness_value`` (or ``robustness_value_ci`` with
    ``--gate-on ci``) at the top level (vet) or under ``sensitivity`` (audit);
    ``--fail-if-invalid`` reads ``controls.valid``. A gate whose number is missing fails, and
    says why: a pipeline should not pass a check that could not be made.
    """
    gates = GateResult()
    limit = getattr(args, "fail_below", None)
    if limit is not None:
        on_ci = getattr(args, "gate_on", "estimate") == "ci"
        key = "robustness_value_ci" if on_ci else "robustness_value"
        which = "robustness value of the confidence interval" if on_ci else "robustness value"
        block = document.get("sensitivity")
        source = block if isinstance(block, Mapping) and key in block else document
        value = source.get(key)
        if not isinstance(value, (int, float)) or isinstance(value, bool):
            gates.fail(f"--fail-below {limit:g}: no {which} could be computed, so the gate "
                       "cannot pass")
        elif value < limit:
            gates.fail(f"the {which} is {value:.3g}, below --fail-below {limit:g}")
    if getattr(args, "fail_if_invalid", False):
        controls = document.get("controls")
        if not isinstance(controls, Mapping):
            gates.fail("the study declares no [controls], so --fail-if-invalid cannot confirm "
                       "them; add [controls] used = [...]")
        elif controls.get("valid") is False:
            gates.fail("the declared controls are not a valid adjustment set "
                       "(--fail-if-invalid)")
    return gates


# --------------------------------------------------------------------------------------------
# Terminal niceties


_CODES = {"bold": "1", "dim": "2", "red": "31", "yellow": "33"}


def use_colour(stream: TextIO | None = None) -> bool:
    """Colour only for a terminal: not when piped, not with ``NO_COLOR`` set, not on ``dumb``.

    ``NO_COLOR`` follows the convention of no-color.org: present and not empty disables colour.
    """
    stream = sys.stdout if stream is None else stream
    if os.environ.get("NO_COLOR"):
        return False
    if os.environ.get("TERM") == "dumb":
        return False
    isatty = getattr(stream, "isatty", None)
    try:
        return bool(isatty and isatty())
    except (ValueError, OSError):
        return False


def style(text: str, *names: str, stream: TextIO | None = None) -> str:
    """``text`` in bold, dim or a colour when :func:`use_colour` allows, else unchanged.

    >>> import io
    >>> style("Verdict", "bold", stream=io.StringIO())      # not a terminal: no colour
    'Verdict'
    """
    if not names or not use_colour(stream):
        return text
    codes = ";".join(_CODES[n] for n in names if n in _CODES)
    return f"\x1b[{codes}m{text}\x1b[0m" if codes else text


def progress(iterable: Iterable[Any] | None = None, *, total: int | None = None,
             description: str = "", quiet: bool = False, stream: TextIO | None = None):
    """A tqdm progress bar on stderr that appears only after two seconds, only on a terminal.

    Use it around any loop that can take more than two seconds; it is silent with ``--quiet``,
    when stderr is not a terminal, and for work that finishes quickly.
    """
    from tqdm import tqdm

    stream = sys.stderr if stream is None else stream
    isatty = getattr(stream, "isatty", None)
    try:
        on_terminal = bool(isatty and isatty())
    except (ValueError, OSError):
        on_terminal = False
    return tqdm(iterable, total=total, desc=description or None, file=stream, leave=False,
                delay=2.0, disable=quiet or not on_terminal, dynamic_ncols=True)


def _highlight(text: str, *, paragraph: str = "") -> str:
    """Bold the headings of a text report (a short line standing alone above its content).

    Lines of ``paragraph`` (the verdict, however the command wrapped it) are never headings.
    """
    lines = text.split("\n")
    flowing = " ".join(paragraph.split())
    out = []
    for index, line in enumerate(lines):
        if flowing and line.strip() and " ".join(line.split()) in flowing:
            out.append(line)
            continue
        before = lines[index - 1] if index > 0 else ""
        after = lines[index + 1] if index + 1 < len(lines) else ""
        heading = (line and not line.startswith(" ") and before.strip() == ""
                   and after.strip() != "" and len(line) < 90
                   and not line.rstrip().endswith((".", ",", ";", ":")) and "  " not in line)
        if index == 0 and line:
            heading = True
        out.append(style(line, "bold") if heading else line)
    return "\n".join(out)


# --------------------------------------------------------------------------------------------
# Output


def emit(args: argparse.Namespace, document: dict[str, Any], text: Callable[[], str],
         *, write_bundle: Callable[[Path], None] | None = None,
         gates: GateResult | None = None, study: Any = None) -> int:
    """Print the result in the chosen format, write ``--out`` when asked; return the exit code.

    Parameters
    ----------
    args : argparse.Namespace
        The parsed options (``format``, ``quiet``, ``out``, ``force`` and the gates).
    document : dict
        The command's result document (its ``to_dict()``); the study context is attached when
        ``study`` is given, and the ``verdict`` and ``cautions`` keys are added.
    text : callable
        Renders the terminal report (called only for ``--format text`` without ``--quiet``).
    write_bundle : callable, keyword-only
        Writes the ``--out`` folder; by default :func:`causalcheck.report.bundle.write_bundle`
        (report.html, report.md, result.json and the figures).
    gates : GateResult, keyword-only
        The command's own gate checks; by default :func:`check_gates` on the document.
    study : Study, keyword-only
        The study, for the labels, units and claim the reports quote.
    """
    from ..report.bundle import with_report_keys
    from ..report.cautions import caution_texts
    from ..report.context import attach_context
    from ..report.verdict import build_verdict

    if study is not None:
        document = attach_context(document, study)
    document = with_report_keys(document)
    if gates is None:
        gates = check_gates(args, document)
    quiet = bool(getattr(args, "quiet", False))
    if getattr(args, "out", None) is not None:
        if write_bundle is not None:
            write_bundle(args.out)
        else:
            from ..report.bundle import write_bundle as write_report

            bar = progress(total=None, description="writing the report", quiet=quiet)
            try:
                write_report(args.out, document, force=bool(getattr(args, "force", False)),
                             progress=lambda step: bar.set_description(step))
            finally:
                bar.close()
    if args.format == "json":
        sys.stdout.write(dumps(document))
    elif quiet:
        try:
            sys.stdout.write(build_verdict(document).text + "\n")
        except KeyError:
            sys.stdout.write(text().rstrip("\n") + "\n")
    else:
        body = text().rstrip("\n")
        if "\nCautions" not in body:
            cautions = [textwrap.fill(c, width=96, initial_indent="- ",
                                      subsequent_indent="  ")
                        for c in caution_texts(document, short=True)]
            body += "\n\nCautions\n" + "\n".join(cautions)
        if use_colour(sys.stdout):
            body = _highlight(body, paragraph=str(document.get("verdict") or ""))
        sys.stdout.write(body + "\n")
    if gates.failures:
        for sentence in gates.failures:
            message = f"causalcheck {args.command}: gate failed: {sentence}"
            print(style(message, "bold", stream=sys.stderr), file=sys.stderr)
    return gates.exit_code
