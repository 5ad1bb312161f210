"""``causalcheck plan STUDY``: what to measure before collecting data, and what it buys.

The statistics live in :mod:`causalcheck.plan` (population truth, measurement plans, strength
ranges) and :mod:`causalcheck.simulate` (Monte Carlo at the planned n); this module parses the
options, renders the verdict and the table, and writes ``--out``.
"""

from __future__ import annotations

import argparse
import html
import io
import math
import sys
from collections.abc import Sequence
from pathlib import Path
from typing import Any

from ..plan import PlanOption, PlanResult, plan
from ..report.context import attach_context
from ..report.bundle import write_bundle
from ..report.numbers import fixed, percent, significant
from ..report.verdict import plan_verdict
from ..simulate import SimulationResult
from ..study import load_study
from .common import add_output_options, emit

__all__ = ["register", "render_markdown", "render_text", "run", "verdict"]

_TABLE_ROWS = 20


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


def _list(names: Sequence[str]) -> str:
    names = list(names)
    if not names:
        return ""
    if len(names) == 1:
        return names[0]
    return ", ".join(names[:-1]) + " and " + names[-1]


def _set(names: Sequence[str]) -> str:
    return _list(names) if names else "nothing"


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


def _how_sure(result: PlanResult, option: PlanOption, d: int, level: str) -> str:
    """"at n = 2,000 its standard error is ... and a 95% interval excludes zero in ..."."""
    text = (f"at n = {result.n:,} its standard error is {_n(option.std_error, d)} (RMSE "
            f"{_n(option.rmse, d)})")
    null_effect = abs(result.true_effect) < 1e-12
    if option.valid:
        if null_effect:
            return text + (f" and, the true effect being zero under these strengths, a {level} "
                           f"interval wrongly excludes zero in {_share(option.power)}")
        return text + f" and a {level} interval excludes zero in {_share(option.power)}"
    if option.coverage >= 1 - result.alpha - 0.01:
        text += (f"; the bias is small against that error, so a {level} interval still covers "
                 f"the true effect in {_share(option.coverage)}")
    else:
        text += (f"; because of the bias a {level} interval covers the true effect in only "
                 f"{_share(option.coverage)}")
    if null_effect:
        return text + (f", and excludes zero, although the true effect is zero, in "
                       f"{_share(option.power)}")
    return text + f" and excludes zero in {_share(option.power)}"


def _share(power: float) -> str:
    """A probability for a sentence: "about 62% of studies", "nearly all studies"."""
    if math.isnan(power):
        return "an unknown share of studies"
    if power > 0.995:
        return "nearly all studies"
    if power < 0.005:
        return "almost no studies"
    return f"about {percent(power)} of studies"


def _header(result: PlanResult) -> list[str]:
    units = "effects in SD of the outcome per SD of the treatment"
    title = f"{result.title} — study plan" if result.title else "Study plan"
    return [
        f"{title} ({result.source})",
        (f"Effect of {result.treatment} on {result.outcome} at n = {result.n:,}: true effect "
        f"{significant(result.true_effect)} under the assumed strengths ({units})."),
    ]


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
                     percent(o.coverage, 3), percent(o.power, 3)])
    return head, rows


def render_text(result: PlanResult, *, quiet: bool = False,
                document: dict[str, Any] | None = None) -> str:
    """The plain-text report: verdict paragraph first, then the aligned table of options."""
    if quiet:
        return verdict(result, document=document)
    lines = [*_header(result), "", verdict(result, document=document), ""]
    head, rows, hidden = _option_rows(result)
    lines.append("Options (* recommended, P on the Pareto front of cost against RMSE, "
                 "B measure nothing more):")
    lines += ["  " + line for line in _align(head, rows, {3, 4, 5, 6, 7, 9, 10})]
    if hidden:
        lines.append(f"  ... {hidden} more option{'s' if hidden != 1 else ''} in the JSON "
                     "output (--format json)")
    lines += ["", ("Bias and SE are population values at the planned n; RMSE = "
              "sqrt(bias^2 + SE^2); power is the chance a "
              f"{percent(1 - result.alpha)} interval excludes zero.")]
    lines += ["", "Assumed strengths (standardised path coefficients):",
              *_strength_lines(result)]
    if result.sweep is not None:
        sweep = result.sweep
        lines += ["", (f"Strength ranges: {sweep.requested} Latin-hypercube draws (seed "
                      f"{sweep.seed}), {sweep.used} possible, {sweep.skipped_impossible} "
                      "skipped as impossible.")]
        if sweep.true_effect_low is not None:
            lines.append(f"  true effect over the ranges: {significant(sweep.true_effect_low)}"
                         f" to {significant(sweep.true_effect_high)} (median "
                         f"{significant(sweep.true_effect_median)})")
    if result.simulation is not None:
        sim = result.simulation
        lines += ["", (f"Simulation: {sim.replications:,} studies of n = {sim.n:,} (sample "
                      f"covariances drawn from the Wishart distribution, seed {sim.seed}, "
                      f"{sim.seconds:.2g} s):")]
        head_s, rows_s = _simulation_lines(sim, result)
        lines += ["  " + line for line in _align(head_s, rows_s, {2, 3, 4, 5, 6})]
    if result.notes:
        lines += ["", "Notes:"] + [f"  - {note}" for note in result.notes]
    return "\n".join(lines)


def render_markdown(result: PlanResult) -> str:
    """The report as Markdown (``--out``)."""
    head, rows, hidden = _option_rows(result)
    lines = [f"# Study plan: {result.treatment} → {result.outcome}", "",
             _header(result)[1], "", verdict(result), "", "## Options", "",
             "| " + " | ".join(h or "flags" for h in head) + " |",
             "|" + "|".join("---" for _ in head) + "|"]
    lines += ["| " + " | ".join(cell.replace("|", "\\|") for cell in row) + " |"
              for row in rows]
    if hidden:
        lines += ["", f"{hidden} more options are in result.json."]
    lines += ["", "Flags: * recommended, P on the Pareto front, B measure nothing more.", "",
              "## Assumed strengths", ""] + [f"- {line.strip()}"
                                             for line in _strength_lines(result)]
    if result.simulation is not None:
        head_s, rows_s = _simulation_lines(result.simulation, result)
        lines += ["", "## Simulation", "", "| " + " | ".join(head_s) + " |",
                  "|" + "|".join("---" for _ in head_s) + "|"]
        lines += ["| " + " | ".join(row) + " |" for row in rows_s]
    if result.notes:
        lines += ["", "## Notes", ""] + [f"- {note}" for note in result.notes]
    return "\n".join(lines) + "\n"


def render_html(result: PlanResult) -> str:
    """A self-contained HTML page of the same content (``--out``)."""
    head, rows, hidden = _option_rows(result)
    esc = html.escape

    def table(header: list[str], body: list[list[str]]) -> str:
        top = "".join(f"<th>{esc(h)}</th>" for h in header)
        cells = "".join("<tr>" + "".join(f"<td>{esc(c)}</td>" for c in row) + "</tr>"
                        for row in body)
        return f"<table><thead><tr>{top}</tr></thead><tbody>{cells}</tbody></table>"

    parts = [f"<h1>Study plan: {esc(result.treatment)} → {esc(result.outcome)}</h1>",
             f"<p>{esc(_header(result)[1])}</p>", (f"<p><strong>{esc(verdict(result))}"
             "</strong></p>"), "<h2>Options</h2>", table(head, rows),
             "<p>Flags: * recommended, P on the Pareto front, B measure nothing more."
             + (f" {hidden} more options are in result.json." if hidden else "") + "</p>",
             '<img src="pareto.png" alt="Cost against RMSE of each plan">',
             "<h2>Assumed strengths</h2><ul>"
             + "".join(f"<li>{esc(line.strip())}</li>" for line in _strength_lines(result))
             + "</ul>"]
    if result.simulation is not None:
        parts += ["<h2>Simulation</h2>", table(*_simulation_lines(result.simulation, result))]
    if result.notes:
        parts += ["<h2>Notes</h2><ul>"
                  + "".join(f"<li>{esc(n)}</li>" for n in result.notes) + "</ul>"]
    style = ("body{font-family:sans-serif;max-width:60em;margin:2em auto;line-height:1.4}"
             "table{border-collapse:collapse}td,th{border:1px solid #ccc;padding:.2em .5em}")
    return ("<!DOCTYPE html><html lang=\"en\"><head><meta charset=\"utf-8\">"
            f"<title>Study plan</title><style>{style}</style></head><body>"
            + "\n".join(parts) + "</body></html>\n")


def _pareto_figure(result: PlanResult) -> bytes | None:
    """Cost against RMSE, valid plans filled, the Pareto front joined (PNG bytes)."""
    from matplotlib.figure import Figure

    figure = Figure(figsize=(6, 4))
    axes = figure.add_subplot()
    for valid, marker, label in ((True, "o", "unbiased (valid set)"),
                                 (False, "x", "biased")):
        chosen = [o for o in result.options if o.valid == valid]
        if chosen:
            axes.scatter([o.cost for o in chosen], [o.rmse for o in chosen], marker=marker,
                         label=label)
    front = sorted((o for o in result.options if o.pareto), key=lambda o: o.cost)
    axes.step([o.cost for o in front], [o.rmse for o in front], where="post", color="grey",
              linewidth=1, label="Pareto front")
    rec = result.recommended
    axes.annotate("recommended", (rec.cost, rec.rmse), textcoords="offset points",
                  xytext=(8, 8))
    if result.budget is not None:
        axes.axvline(result.budget, linestyle=":", color="grey", label="budget")
    axes.set_xlabel("cost of the measurement plan")
    axes.set_ylabel(f"RMSE at n = {result.n:,} (SD units)")
    axes.legend(frameon=False)
    buffer = io.BytesIO()
    figure.savefig(buffer, format="png", dpi=100, bbox_inches="tight")
    return buffer.getvalue()
