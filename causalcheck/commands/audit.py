"""``causalcheck audit STUDY``: naive against adjusted slopes, the gap explained, robustness.

The statistics live in :mod:`causalcheck.audit`; this module parses the options, renders the
verdict (:func:`causalcheck.report.verdict.audit_verdict`) and the tables, applies the pipeline
gates and writes ``--out``.
"""

from __future__ import annotations

import argparse
from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import Any

from ..audit import AuditResult, audit
from ..report.bundle import write_bundle
from ..report.cautions import caution_texts
from ..report.context import attach_context
from ..report.numbers import count, interval, is_number, p_value, percent, significant
from ..report.text import wording_lines
from ..report.verdict import audit_verdict
from ..wording import wording_block
from .common import GateResult, add_gate_options, add_output_options, emit

__all__ = ["document_of", "gates_for", "register", "render_markdown", "render_text", "run"]


def register(subparsers: Any) -> None:
    parser = subparsers.add_parser(
        "audit", help="audit data: naive vs adjusted slopes, the gap explained, robustness",
        description=(
            "Audit a study's data against its causal graph: the naive slope of the outcome on "
            "the treatment against the slope adjusted for a valid set (the declared controls "
            "when valid, else the optimal set, else a minimal set), every minimal set, the "
            "share of the gap each confounder explains, what invalid controls do, how strong "
            "an unmeasured confounder would need to be to overturn the estimate, and tests of "
            "the independences the graph implies."),
        formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("study", metavar="STUDY", type=Path,
                        help="the study file (TOML) with [graph] and [data]")
    add_output_options(parser)
    add_gate_options(parser)
    parser.set_defaults(handler=run)


def document_of(result: AuditResult) -> dict[str, Any]:
    """The JSON document: the audit contract plus the study context and the cautions.

    With ``[study].report_text``, ``wording`` holds the review of the report's own text
    against the robustness value of the audit (``sensitivity.robustness_value``).
    """
    document = attach_context(result.to_dict(), result.study)
    sensitivity = document.get("sensitivity")
    robustness_value = sensitivity.get("robustness_value") \
        if isinstance(sensitivity, Mapping) else None
    wording = wording_block(result.study, robustness_value)
    if wording is not None:
        document["wording"] = wording
    document["cautions"] = caution_texts(document)
    return document


def gates_for(result: AuditResult, args: argparse.Namespace) -> GateResult:
    """Which of ``--fail-below`` / ``--fail-if-invalid`` fail for this result."""
    gates = GateResult()
    if getattr(args, "fail_below", None) is not None:
        limit = float(args.fail_below)
        rv = result.robustness
        which = "robustness value of the confidence interval" if args.gate_on == "ci" \
            else "robustness value"
        if result.adjusted is None or rv is None:
            gates.fail(f"--fail-below {limit:g}: no valid adjusted estimate, so no {which} "
                       "can be checked")
        else:
            value = rv.ci if args.gate_on == "ci" else rv.point
            if value < limit:
                gates.fail(f"the {which} is {value:.3g}, below --fail-below {limit:g}")
    if getattr(args, "fail_if_invalid", False):
        valid = result.controls_valid
        if valid is False:
            gates.fail("the declared controls are not a valid adjustment set "
                       "(--fail-if-invalid)")
        elif valid is None:
            gates.fail("the study declares no [controls], so --fail-if-invalid cannot confirm "
                       "them; add [controls] used = [...]")
    return gates


def run(args: argparse.Namespace) -> int:
    result = audit(args.study, quiet=args.quiet)
    document = document_of(result)

    def text() -> str:
        return render_text(result, quiet=args.quiet, document=document)

    def bundle(folder: Path) -> None:
        # report.html, report.md, result.json and the figures (causalcheck.report.bundle)
        write_bundle(folder, document, kind="audit", force=args.force)

    return emit(args, document, text, write_bundle=bundle, gates=gates_for(result, args))


# --------------------------------------------------------------------------------------------
# Tables


def _table(headers: Sequence[str], rows: Sequence[Sequence[str]],
           numeric: Sequence[bool]) -> list[str]:
    """Aligned plain-text table: numbers right-aligned, text left-aligned."""
    widths = [max(len(h), *(len(r[i]) for r in rows)) if rows else len(h)
              for i, h in enumerate(headers)]

    def line(cells: Sequence[str]) -> str:
        parts = [c.rjust(w) if num else c.ljust(w) for c, w, num in zip(cells, widths, numeric)]
        return "  ".join(parts).rstrip()

    return [line(headers), "  ".join("-" * w for w in widths), *(line(r) for r in rows)]


def _markdown_table(headers: Sequence[str], rows: Sequence[Sequence[str]],
                    numeric: Sequence[bool]) -> list[str]:
    def escape(cell: str) -> str:
        return cell.replace("|", "\\|")

    align = ["---:" if num else ":---" for num in numeric]
    lines = ["| " + " | ".join(escape(h) for h in headers) + " |", "| " + " | ".join(align) + " |"]
    lines += ["| " + " | ".join(escape(c) for c in row) + " |" for row in rows]
    return lines


def _num(value: Any, digits: int = 4) -> str:
    return significant(value, digits) if is_number(value) else "n/a"


def _set_cell(names: Sequence[str]) -> str:
    return "{" + ", ".join(names) + "}" if names else "{} (none)"


def _sections(result: AuditResult) -> list[tuple[str, list[str], list[list[str]], list[bool]]]:
    """(title, headers, rows, numeric flags) of every table, in reading order."""
    level = f"{100 * (1 - result.study.alpha):g}%"
    sections = []
    rows = [["naive", "{} (none)", _num(result.naive.estimate), _num(result.naive.std_error),
             _num(result.naive.robust_std_error),
             interval(result.naive.ci_low, result.naive.ci_high, like=result.naive.estimate),
             "n/a"]]
    for entry in result.by_set:
        headline = "adjusted*" if result.adjusted is not None and entry.set == \
            result.adjusted.set else ""
        labels = ", ".join(_LABELS.get(x, x) for x in entry.labels) + \
            (" " + headline if headline else "")
        if entry.estimate is None:
            rows.append([labels, _set_cell(entry.set), "n/a", "n/a", "n/a",
                         entry.note or "n/a", _yes_no(entry.valid)])
            continue
        rows.append([labels, _set_cell(entry.set), _num(entry.estimate), _num(entry.std_error),
                     _num(entry.robust_std_error),
                     interval(entry.ci_low, entry.ci_high, like=entry.estimate),
                     _yes_no(entry.valid)])
    title = f"Estimates of the slope of {result.outcome} on {result.treatment} (* = headline)"
    sections.append((title,
                     ["source", "adjusted for", "estimate", "SE", "HC1 SE", f"{level} CI",
                      "valid"], rows, [False, False, True, True, True, True, False]))
    if result.decomposition is not None and result.decomposition.terms:
        parts = result.decomposition
        rows = []
        for term in parts.leading():
            rows.append([term.variable, _num(term.gamma), _num(term.delta),
                         _num(term.contribution),
                         percent(term.share) if is_number(term.share) else "n/a"])
        rows.append(["total (naive - adjusted)", "", "", _num(parts.gap),
                     "100%" if parts.gap else "n/a"])
        title = (f"Where the gap comes from (naive {_num(parts.base_estimate)} - "
                 f"{parts_target(result)} {_num(parts.full_estimate)}; contribution = "
                 "gamma x delta)")
        sections.append((title,
                         ["variable", "gamma", "delta", "contribution", "share"], rows,
                         [False, True, True, True, True]))
    if result.bad_controls:
        rows = []
        for shift in result.bad_controls:
            rows.append([shift.variable, ", ".join(shift.problems) or "n/a",
                         _num(shift.estimate_without), _num(shift.estimate_with),
                         _num(shift.shift)])
        sections.append((_BAD_TITLE, ["control", "problem", "without", "with", "change"], rows,
                         [False, False, True, True, True]))
    rv = result.robustness
    if rv is not None:
        rows = [["estimate", _num(rv.estimate)], ["threshold", _num(rv.threshold)],
                ["partial R2 of treatment with outcome", percent(rv.partial_r2)],
                ["robustness value (estimate reaches threshold)", percent(rv.point)],
                [f"robustness value ({level} CI reaches threshold)", percent(rv.ci)]]
        title = f"Sensitivity to an unmeasured confounder (of the {result.robustness_of} estimate)"
        sections.append((title, ["quantity", "value"], rows,
                         [False, True]))
    if result.benchmarks:
        rows = []
        for entry in result.benchmarks:
            rows.append([str(entry.get("benchmark")), f"{_num(entry.get('kd'), 3)}x",
                         _pct(entry.get("r2dz")), _pct(entry.get("r2yz")),
                         _num(entry.get("adjusted_estimate")),
                         interval(entry.get("ci_low"), entry.get("ci_high"),
                                  like=entry.get("adjusted_estimate"))])
        sections.append((_BENCHMARK_TITLE,
                         ["benchmark", "k", "R2 with treatment", "R2 with outcome",
                          "adjusted estimate", f"{level} CI"], rows,
                         [False, True, True, True, True, True]))
    stability = result.coefficient_stability
    if stability is not None:
        rows = [["R2 max", _num(stability.r2_max, 3)],
                ["bias-adjusted estimate (delta = 1)", _num(stability.adjusted_estimate)],
                ["delta that brings the estimate to the threshold",
                 _num(stability.delta_for_threshold, 3)]]
        sections.append(("Coefficient stability (Oster 2019)", ["quantity", "value"], rows,
                         [False, True]))
    if result.implications:
        rows = []
        for test in result.implications:
            given = f" | {', '.join(test.given)}" if test.given else ""
            statistic = f"{'z' if test.test == 'fisher_z' else 'F'} = {_num(test.statistic, 3)}"
            verdict = "not testable" if test.rejected is None else \
                ("contradicted" if test.rejected else "consistent")
            if test.rejected is None:
                statistic = "n/a"
            rows.append([f"{test.left} _||_ {test.right}{given}", statistic,
                         _p(test.p_value), _p(test.holm_p_value), verdict])
        sections.append(("Independences the graph implies (Holm-adjusted)",
                         ["independence", "statistic", "p", "Holm p", "data"], rows,
                         [False, True, True, True, False]))
    rows_info = result.rows
    rows = [["read", count(rows_info.read)], ["used", count(rows_info.used)],
            ["dropped (missing values)", count(rows_info.dropped_missing)]]
    for name, missing in rows_info.missing.items():
        if missing:
            rows.append([f"  missing {name}", count(missing)])
    sections.append(("Rows", ["", "rows"], rows, [False, True]))
    return sections


_LABELS = {"best_available": "best available"}
_BAD_TITLE = "What each invalid declared control does when added to the headline set"
_BENCHMARK_TITLE = "A confounder k times as strong as a measured covariate (Cinelli & Hazlett 2020)"


def _controls_lines(result: AuditResult) -> tuple[str, list[str]] | None:
    """Heading and bullet items on the declared controls (None without [controls])."""
    check = result.identification.controls
    if check is None:
        return None
    verdict = "a valid adjustment set" if check.valid else "not a valid adjustment set"
    heading = f"Declared controls {_set_cell(check.used)}: {verdict}"
    items = [f"{p.variable} ({p.kind.replace('_', ' ')}): {p.detail}" for p in check.problems]
    return heading, items


def parts_target(result: AuditResult) -> str:
    return "adjusted" if result.decomposition_target == "adjusted" else "declared"


def _pct(value: Any) -> str:
    return percent(value) if is_number(value) else "n/a"


def _yes_no(value: bool | None) -> str:
    return "n/a" if value is None else ("yes" if value else "no")


def _document(result: AuditResult, document: Mapping[str, Any] | None) -> Mapping[str, Any]:
    return document if document is not None else document_of(result)


def render_text(result: AuditResult, *, quiet: bool = False,
                document: Mapping[str, Any] | None = None) -> str:
    """The terminal report: the verdict paragraph, then aligned tables, notes, cautions."""
    import textwrap

    document = _document(result, document)
    verdict = audit_verdict(document).text
    lines = textwrap.wrap(verdict, width=96)
    if quiet:
        return "\n".join(lines) + "\n"
    title = result.study.title or f"{result.treatment} -> {result.outcome}"
    lines = [f"causalcheck audit: {title}", "", *lines]
    controls = _controls_lines(result)
    if controls is not None:
        lines += ["", controls[0]]
        for item in controls[1]:
            lines += textwrap.wrap(item, width=96, initial_indent="- ", subsequent_indent="  ")
    for heading, headers, rows, numeric in _sections(result):
        lines += ["", heading, *_table(headers, rows, numeric)]
    wording = wording_lines(document, width=96)
    if wording:
        lines += ["", *wording]
    if result.notes:
        lines += ["", "Notes"]
        for note in result.notes:
            lines += textwrap.wrap(note, width=96, initial_indent="- ", subsequent_indent="  ")
    lines += ["", "Cautions"]
    for caution in caution_texts(document, short=True):
        lines += textwrap.wrap(caution, width=96, initial_indent="- ", subsequent_indent="  ")
    return "\n".join(lines) + "\n"


def render_markdown(result: AuditResult, *, document: Mapping[str, Any] | None = None) -> str:
    """The Markdown report: the same content as the terminal report."""
    document = _document(result, document)
    title = result.study.title or f"{result.treatment} -> {result.outcome}"
    lines = [f"# Audit: {title}", "", audit_verdict(document).text]
    controls = _controls_lines(result)
    if controls is not None:
        lines += ["", f"## {controls[0]}", ""] + [f"- {item}" for item in controls[1]]
    for heading, headers, rows, numeric in _sections(result):
        lines += ["", f"## {heading}", "", *_markdown_table(headers, rows, numeric)]
    if result.notes:
        lines += ["", "## Notes", ""] + [f"- {note}" for note in result.notes]
    lines += ["", "## Cautions", ""] + [f"- {c}" for c in caution_texts(document)]
    return "\n".join(lines) + "\n"


def _p(value: Any) -> str:
    """A p-value for a table cell: ``0.032``, ``< 0.001``."""
    return p_value(value).removeprefix("p = ").removeprefix("p ")
