"""``causalcheck controls STUDY``: are the declared controls valid, and which set should be used.

The computation is :func:`causalcheck.graph.identify`; this module only renders its result as
text for a terminal, Markdown for ``--out`` and the JSON contract for pipelines.
"""

from __future__ import annotations

import argparse
import textwrap
from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import Any

from ..errors import CausalCheckError
from ..graph import Identification, identify
from ..report.bundle import write_bundle
from ..report.context import attach_context
from ..report.verdict import controls_verdict
from ..study import Study, load_study
from .common import GateResult, add_output_options, emit

__all__ = ["register", "render_text", "run", "verdict_lines"]

WIDTH = 96

ROLE_WORDS = {
    "treatment": "treatment",
    "outcome": "outcome",
    "confounder": "confounder",
    "mediator": "mediator",
    "collider": "collider",
    "descendant_of_treatment": "descendant of treatment",
    "descendant_of_outcome": "descendant of outcome",
    "instrument": "instrument",
    "outcome_predictor": "outcome predictor",
    "unrelated": "unrelated",
}


def register(subparsers: argparse._SubParsersAction) -> None:
    parser = subparsers.add_parser(
        "controls",
        help="check the declared controls against the causal graph; list valid adjustment sets",
        description=(
            "Check the controls a study declares ([controls] used = [...]) against its causal "
            "graph: which are mediators, colliders or other bad controls, which non-causal "
            "paths stay open, whether the effect is identifiable by adjustment, and which "
            "adjustment set to use (optimal, cheapest, every minimal one)."),
    )
    parser.add_argument("study", metavar="STUDY", type=Path, help="the study file (TOML)")
    add_output_options(parser)
    parser.add_argument("--fail-if-invalid", action="store_true",
                        help="exit 1 when the declared controls are not a valid adjustment set")
    parser.set_defaults(handler=run)


def run(args: argparse.Namespace) -> int:
    study = load_study(args.study)
    if args.fail_if_invalid and study.controls is None:
        raise CausalCheckError(
            f"--fail-if-invalid checks the declared controls, but study file "
            f"{study.source!r} has no [controls] table; add [controls] used = [\"...\"] (or "
            "used = [] for an unadjusted comparison), or drop --fail-if-invalid")
    result = identify(study)
    document = attach_context(result.to_dict(), study)
    document["title"] = study.title
    document["source"] = study.source
    gates = GateResult()
    if args.fail_if_invalid and result.controls is not None and not result.controls.valid:
        kinds = sorted({p.kind for p in result.controls.problems})
        gates.fail(f"the declared controls {_braced(result.controls.used)} are not a valid "
                   f"adjustment set ({', '.join(kinds)})")

    def bundle(folder: Path) -> None:
        # report.html, report.md, result.json and the figures (causalcheck.report.bundle)
        write_bundle(folder, document, kind="controls", force=args.force)

    return emit(args, document,
                lambda: render_text(result, study, quiet=args.quiet, document=document),
                write_bundle=bundle, gates=gates)


# --------------------------------------------------------------------------------------------
# Words


def _braced(names: Sequence[str]) -> str:
    return "{" + ", ".join(names) + "}"


def _named(result: Identification, name: str) -> str:
    label = result.label(name)
    return f"{label} ({name})" if label != name else name


def verdict_lines(result: Identification, *, document: Mapping[str, Any] | None = None
                  ) -> list[str]:
    """The verdict paragraph (one line), from :func:`causalcheck.report.verdict.controls_verdict`.

    ``document`` is the result document with the study context; without it the verdict is
    built from ``result.to_dict()``.
    """
    return [controls_verdict(document if document is not None else result.to_dict()).text]


def _wrap(line: str, indent: str = "  ") -> list[str]:
    # never split a hyphenated word ("Conservation-mindedness") across lines
    if line.startswith("- "):
        return textwrap.wrap(line, WIDTH, initial_indent=indent,
                             subsequent_indent=indent + "  ", break_on_hyphens=False)
    return textwrap.wrap(line, WIDTH, initial_indent=indent, subsequent_indent=indent,
                         break_on_hyphens=False)


def _table(header: Sequence[str], rows: Sequence[Sequence[str]], indent: str = "  ") -> list[str]:
    widths = [max(len(str(r[i])) for r in [header, *rows]) for i in range(len(header))]

    def line(cells: Sequence[str]) -> str:
        return (indent + "  ".join(str(c).ljust(w) for c, w in zip(cells, widths))).rstrip()

    return [line(header), line(["-" * w for w in widths]), *[line(r) for r in rows]]


def _state(flag: bool | None) -> str:
    return "-" if flag is None else ("open" if flag else "blocked")


def _variable_rows(result: Identification) -> list[list[str]]:
    order = [result.treatment, result.outcome] + sorted(
        v for v in result.roles if v not in (result.treatment, result.outcome))
    used = set(result.controls.used) if result.controls is not None else set()
    rows = []
    for v in order:
        roles = ", ".join(ROLE_WORDS.get(r, r) for r in result.roles[v])
        label = result.label(v)
        rows.append([v, "yes" if result.measured.get(v, True) else "no",
                     "yes" if v in used else "", roles, label if label != v else ""])
    return rows


def render_text(result: Identification, study: Study | None = None, *,
                quiet: bool = False, document: Mapping[str, Any] | None = None) -> str:
    """The terminal report: verdict first, then compact tables."""
    out: list[str] = []
    title = study.title if study is not None and study.title else ""
    out.append("causalcheck controls" + (f": {title}" if title else ""))
    out.append(f"Effect of {_named(result, result.treatment)} on "
               f"{_named(result, result.outcome)}")
    out.append("")
    out.append("Verdict")
    for line in verdict_lines(result, document=document):
        out.extend(_wrap(line))
    if quiet:
        return "\n".join(out) + "\n"

    out.append("")
    out.append("Variables")
    out.extend(_table(["variable", "measured", "control", "role", "label"],
                      _variable_rows(result)))

    out.append("")
    out.append(f"Non-causal paths between {result.treatment} and {result.outcome}")
    if result.biasing_paths:
        header = ["path", "unadjusted"]
        if result.controls is not None:
            header.append("with declared controls")
        rows = []
        for p in result.biasing_paths:
            row = [p.text, _state(p.open_unadjusted)]
            if result.controls is not None:
                row.append(_state(p.open_given_controls))
            rows.append(row)
        out.extend(_table(header, rows))
        if not result.biasing_paths_complete:
            out.append(f"  (the {len(result.biasing_paths)} shortest; more exist)")
    else:
        out.append("  none: every path between them is causal")

    out.append("")
    out.append("Minimal valid adjustment sets (measured variables)")
    if result.minimal_sets:
        rows = []
        for s in result.minimal_sets:
            cost = sum(result.costs.get(v, 0.0) for v in s)
            marks = []
            if result.optimal_set is not None and s == result.optimal_set:
                marks.append("optimal")
            if result.cheapest_set is not None and s == result.cheapest_set:
                marks.append("cheapest")
            rows.append([_braced(s) if s else "{} (adjust for nothing)", f"{cost:g}",
                         ", ".join(marks)])
        out.extend(_table(["set", "cost", "note"], rows))
        if result.optimal_set is not None and result.optimal_set not in result.minimal_sets:
            out.append(f"  optimal set (not minimal: it adds precision variables): "
                       f"{_braced(result.optimal_set)}")
        if not result.minimal_sets_complete:
            out.append("  (listing capped; more minimal sets exist)")
    else:
        out.append("  none")
        if result.measure_to_identify:
            out.append("  measuring one of these groups would make the effect identifiable:")
            for group in result.measure_to_identify:
                cost = sum(result.costs.get(v, 0.0) for v in group)
                out.append(f"    {_braced(group)}  (cost {cost:g})")

    if result.implications:
        out.append("")
        shown = result.implications[:12]
        out.append(f"Testable implications: {len(result.implications)} independence"
                   f"{'s' if len(result.implications) != 1 else ''} the graph implies among "
                   "measured variables")
        out.extend(_wrap("(_||_ reads \"independent of\", | \"given\"; `causalcheck audit` "
                         "tests each against the data: a contradiction means the graph misses "
                         "an arrow or a common cause)"))
        for implication in shown:
            given = f" | {', '.join(implication.given)}" if implication.given else ""
            out.append(f"  {implication.left} _||_ {implication.right}{given}")
        if len(result.implications) > len(shown):
            out.append(f"  ... and {len(result.implications) - len(shown)} more (see --format "
                       "json)")

    if result.notes:
        out.append("")
        out.append("Notes")
        for note in result.notes:
            out.extend(_wrap(f"- {note}"))
    return "\n".join(out) + "\n"
