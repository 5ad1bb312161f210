"""``causalcheck wording TEXT_FILE``: does the report's wording claim more than its evidence?

Finds the sentences that link the treatment and the outcome, grades their causal strength
(0 no-link ... 5 causal) and, given the design and the robustness value, says which claim more
than the evidence supports, with a rewording. The work lives in :mod:`causalcheck.wording`;
this module parses the options, renders and applies the ``--fail-if-stronger`` gate.
"""

from __future__ import annotations

import argparse
import math
import textwrap
from dataclasses import replace
from pathlib import Path
from typing import Any

from ..errors import CausalCheckError
from ..report.context import attach_context
from ..report.verdict import wording_verdict
from ..study import DESIGNS, Study, load_study
from ..wording import WordingError, format_rv, load_lexicon, review_file
from .common import GateResult, add_output_options, emit

__all__ = ["register", "run"]

_EPILOG = """examples:
  causalcheck wording report.md --study study.toml --robustness-value 0.04
  causalcheck wording --study study.toml              (reads [study].report_text)
  causalcheck wording report.html                     (no study: grade every claim, no verdicts)
  causalcheck wording report.txt --design randomized --format json
  causalcheck wording report.md --study study.toml --lexicon our_words.toml

scale: 0 no-link, 1 association, 2 hedged, 3 possible-cause, 4 capacity, 5 causal.
evidence (common practice): randomised -> up to 5; observational with robustness value
>= 0.10 -> up to 3 ("may reduce"); otherwise -> association wording (up to 2).
"""


def register(subparsers: Any) -> None:
    parser = subparsers.add_parser(
        "wording", help="review a report's causal language against the evidence",
        description=textwrap.fill(
            "Review the wording of a report: find the sentences that link the treatment and "
            "the outcome, grade how strongly each claims a cause (0 no-link, 1 association, "
            "2 hedged, 3 possible-cause, 4 capacity, 5 causal; advice flagged separately), "
            "and, given the design and the robustness value, say which claim more than the "
            "evidence supports and how to reword them.", width=92),
        epilog=_EPILOG, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("text", metavar="TEXT_FILE", type=Path, nargs="?",
                        help="the report's text: plain text, Markdown or HTML (default: the "
                             "study's [study].report_text)")
    parser.add_argument("--study", metavar="STUDY", type=Path,
                        help="the study file: its treatment and outcome (names, labels, "
                             "synonyms) pick the sentences; its design sets the evidence")
    parser.add_argument("--robustness-value", metavar="RV",
                        help="the estimate's robustness value from `causalcheck vet` or "
                             "`audit`, a number from 0 to 1 (e.g. 0.04); default: computed "
                             "from the study's [reported] table when it has one")
    parser.add_argument("--design", choices=DESIGNS,
                        help="the design when no --study is given")
    parser.add_argument("--lexicon", metavar="EXTRA.toml", type=Path, action="append",
                        default=[], help="extra words (same format as the shipped "
                                         "causal_lexicon.toml); may be repeated")
    parser.add_argument("--text-format", choices=("auto", "text", "markdown", "html"),
                        default="auto", help="how to read TEXT_FILE (default: from its "
                                             "extension and content)")
    parser.add_argument("--fail-if-stronger", action="store_true",
                        help="exit 1 when any claim is stronger than the evidence")
    add_output_options(parser, out=False)
    parser.set_defaults(handler=run)


def _robustness_value(raw: str | None) -> float | None:
    if raw is None:
        return None
    try:
        value = float(raw)
    except ValueError:
        value = math.nan
    if not math.isfinite(value) or not 0 <= value <= 1:
        raise WordingError(
            f"--robustness-value must be a number from 0 to 1 (a partial R², such as 0.04); "
            f"got {raw!r}. Take it from the robustness_value that `causalcheck vet` or "
            "`causalcheck audit` reports")
    return value


def _from_reported(study: Study) -> tuple[float | None, str]:
    """The robustness value of the study's [reported] table, as `causalcheck vet` gives it."""
    from ..vet import vet

    try:
        value = vet(study).to_dict().get("robustness_value")
    except CausalCheckError as error:
        return None, (f"no robustness value could be computed from the study's [reported] "
                      f"table ({error}); pass --robustness-value RV")
    if not isinstance(value, (int, float)) or not math.isfinite(value):
        return None, ("the study's [reported] table gives no finite robustness value; pass "
                      "--robustness-value RV")
    return float(value), (f"the robustness value {format_rv(value)} was computed from the study's "
                          "[reported] table, as `causalcheck vet` computes it; pass "
                          "--robustness-value RV to use another")


def run(args: argparse.Namespace) -> int:
    robustness_value = _robustness_value(args.robustness_value)
    study = load_study(args.study) if args.study is not None else None
    note = None
    if (robustness_value is None and study is not None and study.reported is not None
            and study.design == "observational"):
        robustness_value, note = _from_reported(study)
    if study is not None and args.design is not None:
        raise WordingError(
            f"--design {args.design!r} was given with --study; the study file's "
            f"[study].design ({study.design!r}) sets the design. Drop --design, or change "
            "the study file")
    path = args.text
    if path is None:
        if study is None or study.report_text is None:
            raise WordingError(
                "no text to review: give the report's text file (causalcheck wording "
                "TEXT_FILE), or a --study whose [study].report_text names it")
        path = study.report_text
    lexicon = load_lexicon(*args.lexicon) if args.lexicon else None
    review = review_file(path, study=study, robustness_value=robustness_value,
                         lexicon=lexicon, design=args.design, text_format=args.text_format)
    if note is not None:
        review = replace(review, notes=(note, *review.notes))
    gates = GateResult()
    if args.fail_if_stronger and review.overreaching():
        count = len(review.overreaching())
        gates.fail(f"{count} claim{'s' if count != 1 else ''} stronger than the evidence")
    # one verdict builder for every output: causalcheck.report.verdict.wording_verdict
    document = attach_context(review.to_dict(), study)
    document["verdict"] = wording_verdict(document).text

    def text() -> str:
        _, _, rest = review.to_text().partition("\n\n")
        # never split a hyphenated word ("End-of-year") across lines
        return "\n".join(textwrap.wrap(document["verdict"], width=92,
                                       break_on_hyphens=False)) + "\n\n" + rest

    return emit(args, document, text, gates=gates)
