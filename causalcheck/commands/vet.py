"""``causalcheck vet [STUDY]``: how strong a hidden confounder would overturn a published result.

Works from the reported table alone (a study's ``[reported]`` table, or flags standing in for
it); the statistics live in :mod:`causalcheck.vet`, :mod:`causalcheck.reported` and
:mod:`causalcheck.sensitivity`. This module parses the options, renders the verdict and the
tables, writes ``--out`` and ``--grid-csv``, and applies the ``--fail-below`` gate.
"""

from __future__ import annotations

import argparse
import io
import math
import textwrap
from collections.abc import Callable, Sequence
from dataclasses import replace
from pathlib import Path
from typing import Any

import numpy as np

from ..errors import ReportedError
from ..report.bundle import write_bundle
from ..report.context import attach_context
from ..report.files import write_atomic
from ..report.numbers import (
    count,
    fixed,
    interval,
    percent,
    shared_decimals,
    shown_decimals,
    significant,
)
from ..report.text import wording_lines
from ..report.verdict import vet_verdict
from ..reported import apply_overrides
from ..study import MEASURES, load_study
from ..vet import VetResult, sweep_to_csv, vet
from ..wording import wording_block
from .common import GateResult, add_output_options, emit

__all__ = [
    "FLAG_NAMES",
    "register",
    "render_markdown",
    "render_text",
    "run",
    "verdict",
    "write_figure",
]

#: Field of ``[reported]`` -> the flag that stands in for it.
FLAG_NAMES = {
    "estimate": "--estimate", "std_error": "--se", "ci": "--ci", "ci_level": "--ci-level",
    "t": "--t", "p_value": "--p", "dof": "--dof", "n": "--n", "covariates": "--covariates",
    "measure": "--measure", "outcome_common": "--common-outcome", "outcome_sd": "--outcome-sd",
}

_EPILOG = """examples:
  causalcheck vet study.toml
  causalcheck vet --estimate 0.097 --se 0.023 --dof 783
  causalcheck vet --estimate 1.8 --ci 1.2 2.7 --measure odds_ratio --common-outcome
  causalcheck vet study.toml --se 0.03 --format json      (a flag overrides the file)
  causalcheck vet study.toml --fail-below 0.05 --gate-on ci   (exit 1 if RV of the CI < 5%)
"""


def register(subparsers: Any) -> None:
    parser = subparsers.add_parser(
        "vet", help="vet a published estimate: how strong would a hidden confounder have to be",
        description=(
            "Vet a published estimate from its table alone (no data, no graph needed): the "
            "robustness values (the share of the residual variance of both the treatment and "
            "the outcome that a hidden confounder must explain to bring the estimate, or its "
            "confidence interval, to the threshold) and the E-value for ratio measures. Give a "
            "study file with a [reported] table, or the numbers as flags; flags override the "
            "file, and the output says so."),
        epilog=_EPILOG, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("study", metavar="STUDY", type=Path, nargs="?",
                        help="a study file with a [reported] table (optional when the flags "
                             "give the numbers)")
    add_output_options(parser)
    table = parser.add_argument_group(
        "the published numbers (stand in for, or override, the study's [reported] table)")
    table.add_argument("--estimate", metavar="X", help="the estimate (a ratio itself, not its "
                       "log, for ratio measures)")
    table.add_argument("--se", metavar="SE", help="its standard error (of the log for ratios)")
    table.add_argument("--ci", metavar=("LOW", "HIGH"), nargs=2,
                       help="its confidence interval")
    table.add_argument("--ci-level", metavar="L", help="level of --ci (default 0.95)")
    table.add_argument("--t", metavar="T", help="its t statistic")
    table.add_argument("--p", metavar="P", help="its two-sided p-value")
    table.add_argument("--dof", metavar="DOF", help="residual degrees of freedom")
    table.add_argument("--n", metavar="N", help="sample size (with --covariates: "
                       "dof = N - covariates - 2)")
    table.add_argument("--covariates", metavar="K",
                       help="number of control variables in the model (not counting the "
                            "treatment or the intercept)")
    table.add_argument("--measure", metavar="M",
                       help=f"what the estimate is: {', '.join(MEASURES)} (default difference)")
    table.add_argument("--common-outcome", action=argparse.BooleanOptionalAction, default=None,
                       help="for odds and hazard ratios: the outcome is common (over about "
                            "15%%), so the ratio is converted before the E-value")
    table.add_argument("--outcome-sd", metavar="SD",
                       help="the outcome's standard deviation, for the E-value of a difference")
    table.add_argument("--threshold", metavar="X",
                       help="the value that would overturn the claim (default the study's "
                            "[sensitivity] threshold, else 0; for ratios 1)")
    table.add_argument("--alpha", metavar="A",
                       help="1 - confidence level for the robustness value of the CI "
                            "(default the study's alpha, else 0.05)")
    gate = parser.add_argument_group("pipeline gate and grid")
    gate.add_argument("--fail-below", metavar="RV", type=float,
                      help="exit 1 when the robustness value (or, with --gate-on ci, the "
                           "robustness value of the CI) is below RV, e.g. 0.05")
    gate.add_argument("--gate-on", choices=("estimate", "ci"), default="estimate",
                      help="which robustness value --fail-below checks (default estimate)")
    gate.add_argument("--grid-csv", metavar="PATH", type=Path,
                      help="also write the grid of adjusted estimates over both partial R² "
                           "values as a CSV file (refuses to overwrite without --force)")
    gate.add_argument("--grid-points", metavar="N", type=int,
                      help="points per axis of --grid-csv (default the study's [sensitivity] "
                           "grid_points, else 101)")
    parser.set_defaults(handler=run)


def _number(flag: str, text: str | None, *, rule: str,
            check: Callable[[float], bool]) -> float | None:
    if text is None:
        return None
    try:
        value = float(text)
    except ValueError:
        raise ReportedError(f"{flag} must be a number; got {text!r}") from None
    if not math.isfinite(value) or not check(value):
        raise ReportedError(f"{flag} must be {rule}; got {text!r}")
    return value


def run(args: argparse.Namespace) -> int:
    study = load_study(args.study) if args.study is not None else None
    overrides = {key: getattr(args, flag.lstrip("-").replace("-", "_"))
                 for key, flag in FLAG_NAMES.items()}
    if args.ci is not None:
        overrides["ci"] = tuple(args.ci)
    given = [k for k, v in overrides.items() if v is not None]
    if study is None and not given:
        raise ReportedError("give a study file with a [reported] table, or the numbers as "
                            "flags, e.g. causalcheck vet --estimate 0.097 --se 0.023 --dof 783")
    if study is not None and study.reported is None and "estimate" not in given:
        raise ReportedError(f"study file {study.source!r} has no [reported] table; add one "
                            "(estimate = ..., std_error = ..., dof = ...) or pass the numbers "
                            "as flags, e.g. --estimate 0.097 --se 0.023 --dof 783")
    base = study.reported if study is not None else None
    if base is None and "estimate" not in given:
        raise ReportedError("--estimate is missing; give the published estimate")
    reported, notes = apply_overrides(base, overrides, names=FLAG_NAMES)
    threshold = _number("--threshold", args.threshold, rule="a finite number",
                        check=lambda v: True)
    alpha = _number("--alpha", args.alpha, rule="a number strictly between 0 and 1, such as "
                    "0.05", check=lambda v: 0 < v < 1)
    if threshold is not None and study is not None \
            and study.sensitivity.threshold != threshold:
        notes += ((f"--threshold {threshold:g} overrides [sensitivity].threshold = "
                   f"{study.sensitivity.threshold:g} from the study file"),)
    if alpha is not None and study is not None and study.alpha != alpha:
        notes += ((f"--alpha {alpha:g} overrides [study].alpha = {study.alpha:g} from the "
                   "study file"),)
    if args.fail_below is not None and not (math.isfinite(args.fail_below)
                                            and 0 <= args.fail_below <= 1):
        raise ReportedError(f"--fail-below must be a robustness value between 0 and 1, such "
                            f"as 0.05; got {args.fail_below!r}")
    if args.grid_points is not None and not 3 <= args.grid_points <= 5001:
        raise ReportedError(f"--grid-points must be a whole number from 3 to 5001; got "
                            f"{args.grid_points!r}")
    target = replace(study, reported=reported) if study is not None else reported
    result = vet(target, threshold=threshold, alpha=alpha, names=FLAG_NAMES,
                 overrides=notes, overridden=given)
    gates = _gate(args, result)
    document = attach_context(result.to_dict(), study)
    # the review of [study].report_text against this robustness value (an unreadable text is
    # a note in the report; only `causalcheck wording` itself refuses it)
    wording = wording_block(study, document.get("robustness_value")) if study else None
    if wording is not None:
        document["wording"] = wording

    if args.grid_csv is not None:
        points = args.grid_points or (study.sensitivity.grid_points if study else 101)
        written = sweep_to_csv(result.grid(points), args.grid_csv, force=args.force)
        document["grid_csv"] = str(written)

    def text() -> str:
        return render_text(result, quiet=args.quiet, document=document)

    def bundle(folder: Path) -> None:
        # report.html, report.md, result.json and the figures (causalcheck.report.bundle)
        write_bundle(folder, document, kind="vet", force=args.force)

    return emit(args, document, text, write_bundle=bundle, gates=gates)


def _gate(args: argparse.Namespace, result: VetResult) -> GateResult:
    gates = GateResult()
    if args.fail_below is None:
        return gates
    rv = result.robustness
    if rv is None:
        raise ReportedError("--fail-below checks a robustness value, which these numbers do "
                            "not give (" + next((n for n in result.notes if "robustness" in n),
                                                "no residual degrees of freedom") + ")")
    value = rv.point if args.gate_on == "estimate" else rv.ci
    what = "robustness value" if args.gate_on == "estimate" else \
        f"robustness value of the {1 - result.alpha:.0%} CI"
    if value < args.fail_below:
        gates.fail(f"the {what} is {_below(value, args.fail_below)}, below --fail-below "
                   f"{args.fail_below:g}")
    return gates


def _below(value: float, limit: float) -> str:
    """``value`` as a share, in as few digits (three at least) as keep it below ``limit``, with
    its percentage: a gate must never read "0.1, below --fail-below 0.1".

    >>> _below(0.0996, 0.2), _below(0.09996, 0.1)
    ('0.0996 (10%)', '0.09996 (10%)')
    """
    shown = f"{value:.3g}"
    for digits in range(3, 12):
        shown = f"{value:.{digits}g}"
        if float(shown) < limit:
            break
    return f"{shown} ({_pct(value)})"
# --------------------------------------------------------------------------------------------
# Text


def _pct(share: float) -> str:
    """A share as a percentage, the same way every report writes one (:func:`percent`).

    >>> _pct(0.13878), _pct(0.07626), _pct(0.1), _pct(0.00524), _pct(1.0)
    ('13.9%', '7.6%', '10%', '0.52%', '100%')
    """
    return percent(share)


def _decimals(estimate: float | None, std_error: float | None) -> int | None:
    """Decimals for the estimates of the vet tables: the standard error to two significant
    figures (common practice), more if the estimate as reported shows more.

    >>> _decimals(1.95, 0.6), _decimals(0.0973, 0.0233), _decimals(0.5, 0.1)
    (2, 4, 2)
    >>> _decimals(None, None) is None
    True
    """
    places = [d for d in (shared_decimals([std_error]), shown_decimals(estimate))
              if d is not None]
    return max(places) if places else None


def _at(value: float | None, decimals: int | None) -> str:
    return _num(value) if decimals is None else fixed(value, decimals)


def _num(value: float | None) -> str:
    return significant(value, 3)


def _table(headers: Sequence[str], rows: Sequence[Sequence[str]], *,
           numeric: Sequence[bool] | None = None) -> str:
    """A plain text table; ``numeric`` columns are right-aligned, the others left-aligned."""
    numeric = numeric or [False] * len(headers)
    widths = [max([len(h)] + [len(r[i]) for r in rows]) for i, h in enumerate(headers)]

    def line(cells: Sequence[str]) -> str:
        return "  ".join(c.rjust(w) if right else c.ljust(w)
                         for c, w, right in zip(cells, widths, numeric)).rstrip()

    return "\n".join([line(headers), "  ".join("-" * w for w in widths),
                      *(line(r) for r in rows)])


def _wrap(text: str, width: int = 92, *, indent: str = "") -> str:
    return "\n".join(textwrap.wrap(text, width=width, break_on_hyphens=False,
                                   subsequent_indent=indent))


def verdict(result: VetResult, *, document: dict[str, Any] | None = None) -> str:
    """The verdict paragraph, from :func:`causalcheck.report.verdict.vet_verdict`.

    ``document`` is the result document with the study context; without it the verdict is
    built from ``result.to_dict()``.
    """
    return vet_verdict(document if document is not None else result.to_dict()).text


_SE_HOW = {"std_error": "given", "ci": "from the CI width", "t": "from |estimate / t|",
           "p_value": "from the p-value"}


def render_text(result: VetResult, *, quiet: bool = False,
                document: dict[str, Any] | None = None) -> str:
    """The text report: the verdict paragraph first (it names any overridden numbers), then
    tables and notes."""
    parts: list[str] = []
    if not quiet:
        # the same first line as every other command: causalcheck COMMAND: title
        parts += ["causalcheck vet" + (f": {result.title}" if result.title else ""), ""]
    parts.append(_wrap(verdict(result, document=document)))
    if quiet:
        return "\n".join(parts) + "\n"
    s = result.summary
    log = " (log scale)" if s.is_ratio else ""
    estimate = s.reported_estimate
    # a ratio and the standard error of its log are on different scales: decimals of their own
    places = None if s.is_ratio else _decimals(estimate, s.std_error)
    se_places = shared_decimals([s.std_error]) if s.is_ratio else places
    rows = [
        ["estimate", _at(estimate, places), "given"],
        [f"standard error{log}", _at(s.std_error, se_places), _SE_HOW[s.se_source]],
        [f"t{log}", significant(s.t, 3),
         "log(estimate) / standard error" if s.is_ratio else "estimate / standard error"],
        ["residual degrees of freedom", count(s.dof) if s.dof is not None else "unknown",
         {"dof": "given", None: "not given"}.get(s.dof_source, s.dof_source)],
        [f"{s.ci_level:.0%} CI", interval(*s.reported_ci, like=estimate, decimals=places),
         "given" if s.ci_given else f"estimate ± {s.critical} quantile × SE"],
        ["p-value (two-sided)", significant(s.p_value, 2), f"{s.critical} distribution"],
    ]
    parts += ["", "Reported numbers",
              _table(["quantity", "value", "how"], rows, numeric=[False, True, False])]
    rv = result.robustness
    theta = _num(result.threshold)
    if rv is not None:
        rows = [
            ["treatment's partial R² with the outcome", _pct(rv.partial_r2)],
            [f"robustness value: estimate reaches {theta}", _pct(rv.point)],
            [f"robustness value: {1 - result.alpha:.0%} CI reaches {theta}", _pct(rv.ci)],
            [f"treatment R² for outcome R² = 100% to reach {theta}",
             _pct(rv.extreme_r2dz)],
        ]
        parts += ["", "Robustness (Cinelli & Hazlett 2020)",
                  _table(["quantity", "value"], rows, numeric=[False, True])]
    if result.sweep is not None:
        b = result.sweep
        reach = b.reaches_threshold().ravel()
        covers = b.ci_includes_threshold().ravel()
        rows = []
        for i, r in enumerate(b.rows()):
            flag = (f"estimate at or past {theta}" if reach[i]
                    else f"CI includes {theta}" if covers[i] else f"CI excludes {theta}")
            rows.append([_pct(r["r2dz"]), _pct(r["r2yz"]), _at(r["adjusted_estimate"], places),
                         _at(r["adjusted_std_error"], se_places),
                         interval(r["ci_low"], r["ci_high"], like=s.estimate,
                                  decimals=places), flag])
        parts += ["", "Hypothetical confounders equally strong with the treatment and the outcome",
                  _table(["R² treatment", "R² outcome", "adjusted estimate", "adjusted SE",
                          f"{1 - result.alpha:.0%} CI", "result"], rows,
                         numeric=[True, True, True, True, True, False])]
    if result.extreme is not None:
        e = result.extreme
        rows = [[_pct(float(r)), _at(float(a), places)]
                for r, a in zip(e.r2dz, e.adjusted_estimate)]
        parts += ["", ("Extreme case: a confounder explaining all the outcome's remaining "
                       "variance"),
                  _table(["R² treatment", "adjusted estimate"], rows, numeric=[True, True])]
    ev = result.e_value
    if ev is not None:
        rr_ci = ("n/a" if ev.risk_ratio_ci is None
                 else interval(*ev.risk_ratio_ci, like=ev.risk_ratio))
        rows = [["risk ratio used", f"{_num(ev.risk_ratio)} (CI {rr_ci})"],
                ["conversion", ev.conversion],
                ["E-value of the estimate", f"{ev.point:.2f}"],
                ["E-value of the CI limit nearest the null",
                 "n/a" if ev.ci is None else f"{ev.ci:.2f}"]]
        parts += ["", "E-value (VanderWeele & Ding 2017)", _table(["quantity", "value"], rows)]
    wording = wording_lines(document) if document is not None else []
    if wording:
        parts += ["", *wording]
    notes = [n for n in result.notes if n not in result.overrides]
    if notes:
        parts += ["", "Notes"]
        parts += [_wrap("- " + note, indent="  ") for note in notes]
    return "\n".join(parts) + "\n"


def render_markdown(result: VetResult) -> str:
    """The report as Markdown (for ``--out``): verdict paragraph, then the tables verbatim."""
    title = result.title or "Vetting a reported estimate"
    body = render_text(result)
    # drop the heading line and the verdict paragraph: the Markdown gives both its own way
    tables = body.split("\n\n", 2)[2] if body.count("\n\n") >= 2 else ""
    return f"# {title}\n\n{verdict(result)}\n\n```\n{tables.rstrip()}\n```\n"


def write_figure(result: VetResult, path: str | Path, *, points: int = 201) -> Path | None:
    """Contour figure of the adjusted estimate over the two partial R² values (PNG).

    Returns ``None`` when the partial-R² analysis does not apply.
    """
    if result.robustness is None:
        return None
    # a Figure of its own, not pyplot: no global backend switch, nothing left open
    from matplotlib.colors import TwoSlopeNorm
    from matplotlib.figure import Figure

    grid = result.grid(points)
    b = grid.bounds
    fig = Figure(figsize=(6, 5), dpi=110)
    ax = fig.add_subplot()
    x, y = np.meshgrid(100 * grid.r2dz, 100 * grid.r2yz, indexing="ij")
    values = b.adjusted_estimate
    low, high = float(np.min(values)), float(np.max(values))
    if low < b.threshold < high:
        # a diverging scale centred on the threshold: one hue each side of it
        norm = TwoSlopeNorm(vcenter=b.threshold, vmin=low, vmax=high)
        filled = ax.contourf(x, y, values, levels=15, cmap="PuOr_r", norm=norm)
    else:
        filled = ax.contourf(x, y, values, levels=15, cmap="PuBuGn")
    fig.colorbar(filled, ax=ax, label="adjusted estimate")
    limit = b.ci_low if result.summary.estimate >= b.threshold else b.ci_high
    for surface, style, width in ((values, "solid", 2.0), (limit, "dashed", 1.2)):
        # draw the threshold line only where the surface crosses it (no empty contour)
        if float(np.min(surface)) < b.threshold < float(np.max(surface)):
            ax.contour(x, y, surface, levels=[b.threshold], colors="black",
                       linestyles=style, linewidths=width)
    rv = result.robustness
    ax.plot([100 * rv.point], [100 * rv.point], marker="D", color="black")
    ax.annotate(f"RV {_pct(rv.point)}", (100 * rv.point, 100 * rv.point),
                textcoords="offset points", xytext=(6, 6))
    ax.set_xlabel("partial R² of the confounder with the treatment (%)")
    ax.set_ylabel("partial R² of the confounder with the outcome (%)")
    ax.set_title(f"Where the estimate (solid) and the CI (dashed) reach "
                 f"{_num(result.threshold)}", fontsize=10)
    buffer = io.BytesIO()
    fig.savefig(buffer, format="png", bbox_inches="tight")
    return write_atomic(Path(path), buffer.getvalue())
