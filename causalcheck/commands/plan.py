"""``causalcheck plan STUDY``: what to measure before collecting data, and what it buys.

The statistics live in :mod:`causalcheck.plan` (population truth, measurement plans, strength
ranges) and :mod:`causalcheck.simulate` (Monte Carlo at the planned n); this module parses the
options, renders the verdict and the table, and writes ``--out``.
"""

from __future__ import annotations

import argparse
import math
import sys
import textwrap
from pathlib import Path
from typing import Any

from ..plan import PlanOption, PlanResult, plan
from ..report.bundle import write_bundle
from ..report.context import ResultView, attach_context
from ..report.numbers import fixed, percent, significant
from ..report.verdict import plan_verdict
from ..simulate import SimulationResult
from ..study import load_study
from .common import add_output_options, emit

__all__ = ["register", "render_text", "run", "verdict"]

_TABLE_ROWS = 20
_WIDTH = 96


def _wrapped(text: str) -> list[str]:
    """Lines of at most 96 characters, never splitting a hyphenated word."""
    return textwrap.wrap(text, width=_WIDTH, break_on_hyphens=False)


def _at_least(minimum: int, what: str):
    def parse(text: str) -> int:
        try:
            value = int(text)
        except ValueError:
            raise argparse.ArgumentTypeError(
                f"{what} must be a whole number; got {text!r}") from None
        if value < minimum:
            raise argparse.ArgumentTypeError(f"{what} must be at least {minimum}; got {value}")
        return value
    return parse


def register(subparsers: Any) -> None:
    parser = subparsers.add_parser(
        "plan", help="plan a study before data exist: what to measure, bias left, SE at n",
        description=(
            "Plan a study from its causal graph and assumed path strengths ([strengths], "
            "standardised coefficients) at the planned sample size ([plan] n): for each set "
            "of unmeasured variables you could measure, the best adjustment set, its cost, "
            "bias, standard error and RMSE; the Pareto front of cost against RMSE and the "
            "recommended plan within [plan] budget. With --simulate N, N simulated studies "
            "check the spread, interval coverage and power."))
    parser.add_argument("study", metavar="STUDY", type=Path, help="the study file (TOML)")
    add_output_options(parser)
    parser.add_argument("--simulate", metavar="N", type=_at_least(2, "--simulate"),
                        help="also simulate N studies of the planned size (sample covariances "
                             "drawn from their Wishart distribution) and report the spread of "
                             "estimates, interval coverage and power")
    parser.add_argument("--seed", metavar="S", type=_at_least(0, "--seed"),
                        help="seed for the strength-range sweep and the simulation "
                             "(default [plan] seed, else 0)")
    parser.set_defaults(handler=run)


def run(args: argparse.Namespace) -> int:
    study = load_study(args.study)
    progress = not args.quiet and sys.stderr.isatty()
    result = plan(study, seed=args.seed, simulate=args.simulate, progress=progress)
    document = attach_context(result.to_dict(), study)

    def text() -> str:
        return render_text(result, quiet=args.quiet, document=document)

    def bundle(folder: Path) -> None:
        # report.html, report.md, result.json and the figures (causalcheck.report.bundle)
        write_bundle(folder, document, kind="plan", force=args.force)

    return emit(args, document, text, write_bundle=bundle)


# --------------------------------------------------------------------------------------------
# Words


def _n(value: float, decimals: int, *, sign: bool = False) -> str:
    return fixed(value, decimals, sign=sign)


def _decimals(result: PlanResult) -> int:
    """Decimals that show the smallest standard error to two significant figures (3 to 6)."""
    smallest = min((o.std_error for o in result.options if o.std_error > 0), default=0.01)
    return max(3, min(6, 1 - math.floor(math.log10(smallest))))


def verdict(result: PlanResult, *, document: dict[str, Any] | None = None) -> str:
    """The verdict paragraph, from :func:`causalcheck.report.verdict.plan_verdict`.

    ``document`` is the result document with the study context; without it the verdict is
    built from ``result.to_dict()``.
    """
    return plan_verdict(document if document is not None else result.to_dict()).text


def _header(result: PlanResult, document: dict[str, Any] | None = None) -> list[str]:
    units = "effects in standard deviations of the outcome per standard deviation of the treatment"
    # the same first line as every other command: causalcheck COMMAND: title
    title = "causalcheck plan" + (f": {result.title}" if result.title else "")
    view = ResultView(document if document is not None else {})
    return [title, *_wrapped(
        f"Effect of {view.label(result.treatment)} on {view.label(result.outcome)} at n = "
        f"{result.n:,}: true effect {significant(result.true_effect)} under the assumed "
        f"strengths ({units}).")]


def _option_rows(result: PlanResult) -> tuple[list[str], list[list[str]], int]:
    d = _decimals(result)
    ranged = result.sweep is not None
    head = ["", "measure", "adjust for", "cost", "bias", "SE", "RMSE", "power", "valid"]
    if ranged:
        head += ["worst |bias|", "worst RMSE"]
    shown = _shown_options(result)
    rows = []
    for option in shown:
        flag = ("*" if option.key == result.recommended.key else " ") + \
               ("P" if option.pareto else " ") + ("B" if option.baseline else " ")
        row = [flag.rstrip() or "", ", ".join(option.measure) or "(nothing)",
               ", ".join(option.adjust_for) or "(none)", significant(option.cost),
               _n(option.bias, d, sign=True), _n(option.std_error, d), _n(option.rmse, d),
               percent(option.power), "yes" if option.valid else "no"]
        if ranged:
            over = option.over_range
            row += [_n(over.bias_abs_worst, d) if over else "n/a",
                    _n(over.rmse_worst, d) if over else "n/a"]
        if not option.within_budget:
            row[3] += " (over budget)"
        rows.append(row)
    return head, rows, len(result.options) - len(shown)


def _shown_options(result: PlanResult) -> list[PlanOption]:
    """Pareto front, baseline and recommendation first; then the rest by RMSE, capped."""
    keep = [o for o in result.options if o.pareto or o.baseline
            or o.key == result.recommended.key]
    rest = sorted((o for o in result.options if o not in keep), key=lambda o: o.rmse)
    shown = keep + rest[:max(0, _TABLE_ROWS - len(keep))]
    return sorted(shown, key=lambda o: (o.cost, o.rmse))


def _align(head: list[str], rows: list[list[str]], numeric: set[int]) -> list[str]:
    """Columns padded to a common width; ``numeric`` columns right-aligned."""
    widths = [max(len(r[i]) for r in [head, *rows]) for i in range(len(head))]
    lines = []
    for row in [head, *rows]:
        cells = [cell.rjust(widths[i]) if i in numeric else cell.ljust(widths[i])
                 for i, cell in enumerate(row)]
        lines.append("  ".join(cells).rstrip())
    return lines


def _strength_lines(result: PlanResult) -> list[str]:
    lines = []
    for s in result.model.strengths.strengths:
        value = significant(s.value)
        if s.source == "range":
            value = f"{value} (range {significant(s.low)} to {significant(s.high)}, midpoint)"
        elif s.source == "default":
            value = f"{value} (default: not in [strengths])"
        lines.append(f"  {s.edge[0]} -> {s.edge[1]}: {value}")
    return lines


def _simulation_lines(simulation: SimulationResult, result: PlanResult) -> tuple[
        list[str], list[list[str]]]:
    d = _decimals(result)
    head = ["measure", "adjust for", "mean estimate", "SD", "mean SE",
            f"coverage {percent(1 - simulation.alpha)}", "power"]
    rows = []
    for o in simulation.options:
        rows.append([", ".join(o.measure) or "(nothing)", ", ".join(o.adjust_for) or "(none)",
                     _n(o.mean_estimate, d), _n(o.sd_estimate, d), _n(o.mean_std_error, d),
                     percent(o.coverage), percent(o.power)])
    return head, rows


def render_text(result: PlanResult, *, quiet: bool = False,
                document: dict[str, Any] | None = None) -> str:
    """The plain-text report: verdict paragraph first, then the aligned table of options."""
    if quiet:
        return verdict(result, document=document)
    lines = [*_header(result, document), "",
             *_wrapped(verdict(result, document=document)), ""]
    head, rows, hidden = _option_rows(result)
    lines += _wrapped("Options (* recommended; P on the efficient front: no other plan is both "
                      "cheaper and more accurate; B measure nothing more):")
    lines += ["  " + line for line in _align(head, rows, {3, 4, 5, 6, 7, 9, 10})]
    if hidden:
        lines.append(f"  ... {hidden} more option{'s' if hidden != 1 else ''} in the JSON "
                     "output (--format json)")
    lines += ["", *_wrapped(
        "Bias and SE are population values at the planned n; RMSE = sqrt(bias^2 + SE^2), the "
        "typical error of the estimate; power is the chance a "
        f"{percent(1 - result.alpha)} interval excludes zero; valid: the adjustment set "
        "removes all confounding (no bias).")]
    lines += ["", "Assumed strengths (standardised path coefficients):",
              *_strength_lines(result)]
    if result.sweep is not None:
        sweep = result.sweep
        lines += ["", (f"Strength ranges: {sweep.requested} Latin-hypercube draws (seed "
                      f"{sweep.seed}), {sweep.used} possible, {sweep.skipped_impossible} "
                      "skipped as impossible.")]
        if sweep.true_effect_low is not None:
            low, high = significant(sweep.true_effect_low), significant(sweep.true_effect_high)
            lines.append(f"  true effect: {low} in every draw" if low == high else
                         f"  true effect over the ranges: {low} to {high} (median "
                         f"{significant(sweep.true_effect_median)})")
    if result.simulation is not None:
        sim = result.simulation
        lines += ["", *_wrapped(
            f"Simulation: {sim.replications:,} studies of n = {sim.n:,} (sample covariances "
            f"drawn from the Wishart distribution, seed {sim.seed}, {sim.seconds:.2g} s):")]
        head_s, rows_s = _simulation_lines(sim, result)
        lines += ["  " + line for line in _align(head_s, rows_s, {2, 3, 4, 5, 6})]
    if result.notes:
        lines += ["", "Notes:"] + [f"  - {note}" for note in result.notes]
    return "\n".join(lines)
