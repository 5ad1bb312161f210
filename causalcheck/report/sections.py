"""What a report says, in the order a reader asks, independent of how it is rendered.

:func:`build_report` turns a result document into a :class:`Report`: the verdict, then
sections of paragraphs, tables, figure references and lists — claim and graph, estimates,
decomposition, sensitivity, graph-vs-data tests, notes, cautions, methods and references. The
Markdown and HTML renderers (:mod:`.markdown`, :mod:`.html`) only lay this out, so both carry
the same content. Every string is plain text; escaping is the renderer's job.

Examples
--------
>>> report = build_report({"schema": "causalcheck/vet/1", "estimate": 2.0, "std_error": 0.5,
...                        "t": 4.0, "dof": 100, "robustness_value": 0.32,
...                        "robustness_value_ci": 0.17, "partial_r2": 0.14})
>>> [section.key for section in report.sections]
['claim', 'estimates', 'sensitivity', 'cautions', 'methods']

A vet or audit document with a ``wording`` block (the study names ``[study].report_text``)
gets a section ``wording``, "Wording of the report", right after the sensitivity analysis.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

from .cautions import cautions_for
from .context import ResultView, upper_first
from .figures import FIGURES, figures_for
from .numbers import (
    count,
    fixed,
    interval,
    is_number,
    p_value,
    percent,
    shared_decimals,
    shown_decimals,
    significant,
)
from .references import methods_for
from .verdict import (
    Verdict,
    benchmark_fields,
    build_verdict,
    decomposition_parts,
    decomposition_shares,
    decomposition_target,
    evidence_phrase,
    supported_phrase,
)

__all__ = ["KIND_SUBTITLES", "KIND_TITLES", "Bullets", "FigureRef", "Paragraph", "Report",
           "Section", "Table", "build_report"]


@dataclass(frozen=True)
class Paragraph:
    """A paragraph; ``style`` is ``""``, ``"quote"`` or ``"note"`` (small print)."""

    text: str
    style: str = ""


@dataclass(frozen=True)
class Table:
    """A table of strings; ``numeric`` marks right-aligned columns."""

    header: tuple[str, ...]
    rows: tuple[tuple[str, ...], ...]
    numeric: tuple[bool, ...]
    caption: str = ""
    emphasis: tuple[int, ...] = ()     # row indices to set in bold (the headline)


@dataclass(frozen=True)
class FigureRef:
    """A figure of :data:`~causalcheck.report.figures.FIGURES`, with caption and alt text."""

    name: str
    file: str
    caption: str
    alt: str


@dataclass(frozen=True)
class Bullets:
    items: tuple[str, ...]
    numbered: bool = False


Block = Paragraph | Table | FigureRef | Bullets


@dataclass(frozen=True)
class Section:
    key: str
    title: str
    blocks: tuple[Block, ...]


@dataclass(frozen=True)
class Report:
    """A whole report: title, subtitle, the verdict and the sections in reading order."""

    kind: str
    title: str
    subtitle: str
    verdict: Verdict
    sections: tuple[Section, ...]
    figures: tuple[str, ...] = field(default=())

    def section(self, key: str) -> Section | None:
        return next((s for s in self.sections if s.key == key), None)


KIND_TITLES = {
    "audit": "Audit",
    "controls": "Controls check",
    "vet": "Vetting a reported estimate",
    "plan": "Study plan",
    "wording": "Wording review",
}
KIND_SUBTITLES = {
    "audit": "May this correlation be read as a cause? An audit of the data against the graph",
    "controls": "Which controls are valid, and which adjustment set to use",
    "vet": "How strong would a hidden confounder have to be to overturn a published estimate?",
    "plan": "What to measure before the data are collected, and what it buys",
    "wording": "Does the text claim more than the design supports?",
}

_FIGURE_TEXT = {
    # name: (caption, alt text)
    "graph": (
        ("The causal graph as declared: roles by shape, biasing paths left open drawn heavy "
         "and dashed, declared controls in a heavy frame."),
        ("Diagram of the causal graph, laid out from causes on the left to effects on the "
         "right.")),
    "estimates": (
        ("The estimate under every adjustment set, with confidence intervals; hatched bands "
         "are sets that are not valid for the graph."),
        "Chart of the estimate and its confidence interval for each adjustment set."),
    "decomposition": (
        "From the naive to the adjusted slope: each covariate's part of the gap.",
        "Step chart from the naive slope to the adjusted slope, one step per covariate."),
    "sensitivity": (
        ("The estimate after adjusting for a hidden confounder of a given strength with the "
         "treatment (across) and with the outcome (up); the heavy curve is where it reaches "
         "the threshold, squares mark confounders as strong as multiples of measured "
         "covariates."),
        ("Contour chart of the adjusted estimate over the two partial R² values of a hidden "
         "confounder.")),
    "plan": (
        ("Cost against expected error (root-mean-square error) for every measurement plan; "
         "the steps join the plans no other plan beats on both."),
        "Scatter chart of cost against root-mean-square error for each measurement plan."),
}


def _mapping(value: Any) -> Mapping[str, Any]:
    return value if isinstance(value, Mapping) else {}


def _num(value: Any, digits: int = 3) -> str:
    return significant(value, digits)


def _pct(value: Any) -> str:
    return percent(value) if is_number(value) else "n/a"


def _at(value: Any, decimals: int | None, *, sign: bool = False) -> str:
    """A number of an estimates table at the table's decimals (three figures without them)."""
    if decimals is None:
        return significant(value, 3, sign=sign)
    return fixed(value, decimals, sign=sign)


def _audit_decimals(view: ResultView) -> int | None:
    """The decimals of every audit table of estimates: the smallest standard error of the
    estimates table to two significant figures (common practice)."""
    estimates = _mapping(view.get("estimates"))
    entries = [_mapping(estimates.get("naive")), _mapping(estimates.get("adjusted"))]
    entries += [_mapping(e) for e in estimates.get("by_set") or []]
    return shared_decimals([e.get(key) for e in entries
                            for key in ("std_error", "robust_std_error")])


def _path_text(view: ResultView, entry: Mapping[str, Any]) -> str:
    """A path with its arrows and the variables' labels: "Took the rebate ← Has a garden → …"."""
    tokens = str(entry.get("text") or "").split(" ")
    nodes = [str(n) for n in entry.get("path") or []]
    if len(tokens) == 2 * len(nodes) - 1 and tokens[::2] == nodes:
        arrows = {"->": "→", "<-": "←"}
        return " ".join(view.label(t) if i % 2 == 0 else arrows.get(t, t)
                        for i, t in enumerate(tokens))
    return " – ".join(view.label(n) for n in nodes)


def _yes_no(value: Any) -> str:
    return "n/a" if value is None else ("yes" if value else "no")


def _set_text(view: ResultView, names: Any) -> str:
    labels = view.labels(names)
    return ", ".join(labels) if labels else "(none)"


def _figure(name: str, caption: str | None = None) -> FigureRef:
    default, alt = _FIGURE_TEXT[name]
    return FigureRef(name, FIGURES[name][0], caption or default, alt)


_PROBLEM_WORDS = {
    "mediator": "mediator: carries part of the effect",
    "descendant_of_treatment": "affected by the treatment",
    "collider_opened": "collider: adjusting opens a spurious path",
    "path_left_open": "a biasing path stays open",
    "descendant_of_outcome": "affected by the outcome",
    "unmeasured": "not measured",
}


# --------------------------------------------------------------------------------------------
# Claim and graph


def _variable_sentence(view: ResultView) -> str | None:
    parts = []
    for role, name in (("Treatment", view.treatment), ("Outcome", view.outcome)):
        if not name:
            continue
        unit = view.unit(name)
        kind = view.variable_kind(name)
        extra = ", ".join(x for x in (f"column {name}" if view.label(name) != name else "",
                                      unit or "", kind if kind != "numeric" else "") if x)
        parts.append(f"{role}: {view.label(name)}" + (f" ({extra})" if extra else "") + ".")
    design = view.design
    parts.append(f"Design: {design}.")
    rows = _mapping(view.get("rows"))
    if is_number(rows.get("used")):
        text = f"Rows used: {count(rows['used'])}"
        if is_number(rows.get("read")):
            text += f" of {count(rows['read'])}"
        if is_number(rows.get("dropped_missing")) and rows["dropped_missing"]:
            text += f" ({count(rows['dropped_missing'])} dropped for missing values)"
        parts.append(text + ".")
    source = view.study.get("source") or view.get("source")
    if isinstance(source, str) and source:
        parts.append(f"Study file: {source}.")
    return " ".join(parts) if parts else None


def _controls_blocks(view: ResultView) -> list[Block]:
    controls = _mapping(view.get("controls"))
    if not controls:
        return []
    used = controls.get("used") or []
    blocks: list[Block] = []
    verdict = "valid" if controls.get("valid") else "not valid"
    blocks.append(Paragraph(f"Declared controls: {_set_text(view, used)} — {verdict} for this "
                            "graph."))
    problems = [p for p in controls.get("problems") or [] if isinstance(p, Mapping)]
    if problems:
        rows = tuple((view.label(str(p.get("variable"))),
                      _PROBLEM_WORDS.get(str(p.get("kind")), str(p.get("kind"))),
                      str(p.get("detail") or "")) for p in problems)
        blocks.append(Table(("variable", "problem", "why"), rows, (False, False, False),
                            "Problems with the declared controls"))
    return blocks


def _sets_table(view: ResultView) -> Table | None:
    sets = _mapping(view.get("adjustment_sets"))
    if not sets:
        return None
    rows: list[tuple[str, ...]] = []
    optimal = sets.get("optimal")
    if isinstance(optimal, (list, tuple)):
        rows.append(("optimal (most precise)", _set_text(view, optimal), ""))
    cheapest = _mapping(sets.get("cheapest"))
    if cheapest:
        rows.append(("cheapest", _set_text(view, cheapest.get("set")),
                     _num(cheapest.get("cost"))))
    for index, minimal in enumerate(sets.get("minimal") or []):
        cost = sum(view.cost(str(n)) or 0.0 for n in minimal)
        rows.append((f"minimal {index + 1}", _set_text(view, minimal), _num(cost)))
        if index >= 29:
            rows.append(("…", f"{count(len(sets['minimal']) - 30)} more in result.json", ""))
            break
    if not rows:
        rows.append(("none", "no set of measured variables is valid", ""))
    return Table(("set", "variables", "cost"), tuple(rows), (False, False, True),
                 "Valid adjustment sets of measured variables")


def _variables_table(view: ResultView) -> Table | None:
    names = [n for n in view.variable_names if view.roles(n) or n in (view.treatment,
                                                                         view.outcome)]
    if not names:
        return None
    controls = _mapping(view.get("controls")).get("used") or []
    rows = []
    for name in names:
        roles = ", ".join(r.replace("_", " ") for r in view.roles(name)) or "—"
        cost = view.cost(name)
        label = view.label(name)
        rows.append((name, _yes_no(view.measured(name)), "yes" if name in controls else "",
                     roles, label if label != name else "", _num(cost) if cost else ""))
    return Table(("variable", "measured", "control", "role", "label", "cost"), tuple(rows),
                 (False, False, False, False, False, True), "Variables")


def _claim_section(view: ResultView, figures: Sequence[str]) -> Section:
    blocks: list[Block] = []
    if view.claim:
        blocks.append(Paragraph(view.claim, "quote"))
    sentence = _variable_sentence(view)
    if sentence:
        blocks.append(Paragraph(sentence))
    if "graph" in figures:
        # the heavy frame marks declared controls: say so only when there are some
        caption = None if _mapping(view.get("controls")).get("used") else \
            _FIGURE_TEXT["graph"][0].split(", declared controls")[0] + "."
        blocks.append(_figure("graph", caption))
    blocks += _controls_blocks(view)
    identifiable = view.get("identifiable")
    if identifiable is not None and view.kind in ("audit", "controls"):
        text = ("The effect is identifiable by adjustment: some set of measured variables "
                "closes every biasing path." if identifiable else
                "The effect is not identifiable by adjustment with what is measured.")
        groups = [g for g in view.get("measure_to_identify") or [] if g]
        if not identifiable and groups:
            text += " Measuring any one of these groups would make it identifiable: " + \
                "; ".join(_set_text(view, g) for g in groups[:5]) + "."
        blocks.append(Paragraph(text))
    table = _sets_table(view)
    if table is not None:
        blocks.append(table)
    paths = [p for p in view.get("biasing_paths") or [] if isinstance(p, Mapping)]
    if paths:
        rows = []
        for entry in paths[:40]:
            state = entry.get("open_given_controls")
            if state is None:
                state_text = "open" if entry.get("open_unadjusted", True) else \
                    "blocked by a collider"
            else:
                state_text = "open" if state else "closed"
            rows.append((_path_text(view, entry), state_text))
        caption = ("Non-causal paths between treatment and outcome, and their state given the "
                   "declared controls" if isinstance(view.get("controls"), Mapping) else
                   "Non-causal paths between treatment and outcome, and their state with no "
                   "adjustment")
        blocks.append(Table(("path", "state"), tuple(rows), (False, False), caption))
    table = _variables_table(view)
    if table is not None:
        blocks.append(table)
    title = "The claim and the graph" if view.edges else "The claim"
    return Section("claim", title, tuple(blocks))


# --------------------------------------------------------------------------------------------
# Estimates


def _audit_estimates(view: ResultView, figures: Sequence[str]) -> Section:
    estimates = _mapping(view.get("estimates"))
    naive = _mapping(estimates.get("naive"))
    adjusted = _mapping(estimates.get("adjusted"))
    level = view.confidence
    rows: list[tuple[str, ...]] = []
    emphasis: list[int] = []
    places = _audit_decimals(view)

    def row(label: str, entry: Mapping[str, Any], valid: str) -> tuple[str, ...]:
        return (label, _at(entry.get("estimate"), places), _at(entry.get("std_error"), places),
                _at(entry.get("robust_std_error"), places),
                interval(entry.get("ci_low"), entry.get("ci_high"), like=entry.get("estimate"),
                         decimals=places),
                valid)

    if naive:
        rows.append(row("no controls (naive)", naive, "n/a"))
    headline = sorted(str(n) for n in adjusted.get("set") or []) if adjusted else None
    declared = _mapping(view.get("controls")).get("used")
    declared = sorted(str(n) for n in declared) if isinstance(declared, list) else None
    for entry in estimates.get("by_set") or []:
        if not isinstance(entry, Mapping):
            continue
        names = sorted(str(n) for n in entry.get("set") or [])
        label = _set_text(view, names)
        if names == declared:
            label += " — declared"
        if names == headline:
            label += " — headline"
            emphasis.append(len(rows))
        rows.append(row(label, entry, _yes_no(entry.get("valid"))))
    if headline is not None and not emphasis and adjusted:
        emphasis.append(len(rows))
        rows.append(row(_set_text(view, headline) + " — headline", adjusted,
                        _yes_no(adjusted.get("valid"))))
    unit = view.unit(view.outcome)
    blocks: list[Block] = []
    reason = adjusted.get("reason_text") if adjusted else None
    if reason:
        blocks.append(Paragraph(f"Headline estimate: {reason}."))
    caption = (f"Slope of {view.label(view.outcome or 'the outcome')} on "
               f"{view.label(view.treatment or 'the treatment')}"
               + (f" ({unit})" if unit else "") + ", by adjustment set")
    blocks.append(Table(("adjusted for", "estimate", "SE", "robust SE (HC1)", f"{level} CI",
                         "valid set"), tuple(rows),
                        (False, True, True, True, True, False), caption, tuple(emphasis)))
    if "estimates" in figures:
        blocks.append(_figure("estimates"))
    return Section("estimates", "Estimates", tuple(blocks))


def _vet_estimates(view: ResultView) -> Section:
    document = view.document
    measure = document.get("measure")
    is_ratio = measure in ("risk_ratio", "odds_ratio", "hazard_ratio")
    se = document.get("std_error")
    estimate = document.get("estimate")
    # the standard error to two figures and the estimate to the same decimals (more if the
    # estimate as reported shows more); a ratio and the standard error of its log each get
    # their own
    se_places = shared_decimals([se])
    places = None if is_ratio else max(
        [d for d in (se_places, shown_decimals(estimate)) if d is not None], default=None)
    if not is_ratio:
        se_places = places
    rows = [("estimate", _at(estimate, places))]
    if measure:
        rows.append(("measure", str(measure).replace("_", " ")))
    se_label = "standard error" + (" (of the log ratio)" if is_ratio else "")
    rows.append((se_label, _at(se, se_places)))
    rows.append(("t", _num(document.get("t"), 3)))
    rows.append(("residual degrees of freedom",
                 count(document.get("dof")) if is_number(document.get("dof")) else "unknown"))
    if is_number(document.get("ci_low")):
        level = document.get("ci_level")
        rows.append((f"{percent(level) if is_number(level) else view.confidence} CI",
                     interval(document.get("ci_low"), document.get("ci_high"),
                              like=document.get("estimate"), decimals=places)))
    if is_number(document.get("p_value")):
        rows.append(("p-value (two-sided)", p_value(document["p_value"])
                     .removeprefix("p = ").removeprefix("p ")))
    overrides = [str(o) for o in document.get("overrides") or []]
    blocks: list[Block] = [Table(("quantity", "value"), tuple(rows), (False, True),
                                 "The published numbers")]
    if overrides:
        blocks.append(Bullets(tuple(overrides)))
    return Section("estimates", "The published estimate", tuple(blocks))


def _plan_estimates(view: ResultView, figures: Sequence[str]) -> Section:
    document = view.document
    options = [o for o in document.get("options") or [] if isinstance(o, Mapping)]
    recommended = _mapping(document.get("recommended"))

    def key(option: Mapping[str, Any]) -> tuple[tuple[str, ...], tuple[str, ...]]:
        return (tuple(option.get("measure") or ()), tuple(option.get("adjust_for") or ()))

    keep = [o for o in options if o.get("pareto") or o.get("baseline")
            or key(o) == key(recommended)]
    rest = sorted((o for o in options if o not in keep), key=lambda o: o.get("rmse") or 0)
    shown = sorted(keep + rest[:max(0, 25 - len(keep))],
                   key=lambda o: (o.get("cost") or 0, o.get("rmse") or 0))
    rows = []
    emphasis = []
    # as the terminal table: the smallest standard error to two figures, at least 3 decimals
    places = max(3, shared_decimals([o.get("std_error") for o in options]) or 3)
    for option in shown:
        if key(option) == key(recommended):
            emphasis.append(len(rows))
        flags = []
        if key(option) == key(recommended):
            flags.append("recommended")
        if option.get("baseline"):
            flags.append("nothing more")
        if option.get("pareto"):
            flags.append("front")
        if option.get("within_budget") is False:
            flags.append("over budget")
        rows.append((_set_text(view, option.get("measure")) if option.get("measure")
                     else "(nothing more)", _set_text(view, option.get("adjust_for")),
                     _num(option.get("cost")), _at(option.get("bias"), places, sign=True),
                     _at(option.get("std_error"), places), _at(option.get("rmse"), places),
                     _pct(option.get("power")) if "power" in option else "n/a",
                     _yes_no(option.get("valid")), ", ".join(flags)))
    hidden = len(options) - len(shown)
    units = document.get("units") or "standardised units"
    blocks: list[Block] = []
    true_effect = document.get("true_effect")
    text = []
    if is_number(document.get("n")):
        text.append(f"Planned sample size: {count(document['n'])}.")
    if is_number(document.get("budget")):
        text.append(f"Budget: {significant(document['budget'])}.")
    if is_number(true_effect):
        text.append(f"True effect under the assumed strengths: {significant(true_effect)} "
                    f"({units}).")
    if text:
        blocks.append(Paragraph(" ".join(text)))
    blocks.append(Table(("measure", "adjust for", "cost", "bias", "SE", "RMSE", "power",
                         "unbiased", "notes"), tuple(rows),
                        (False, False, True, True, True, True, True, False, False),
                        f"Measurement plans (bias and SE are population values at the planned "
                        f"n, RMSE = √(bias² + SE²); {units})", tuple(emphasis)))
    if hidden > 0:
        blocks.append(Paragraph(f"{count(hidden)} more plans are listed in result.json.",
                                "note"))
    if "plan" in figures:
        blocks.append(_figure("plan"))
    simulation = _mapping(document.get("simulation"))
    if simulation.get("options"):
        sim_rows = []
        for option in simulation["options"]:
            if not isinstance(option, Mapping):
                continue
            sim_rows.append((_set_text(view, option.get("measure")) if option.get("measure")
                             else "(nothing more)", _set_text(view, option.get("adjust_for")),
                             _at(option.get("mean_estimate"), places),
                             _at(option.get("sd_estimate"), places),
                             _at(option.get("mean_std_error"), places),
                             _pct(option.get("coverage")),
                             _pct(option.get("power"))))
        seed = simulation.get("seed")
        blocks.append(Table(("measure", "adjust for", "mean estimate", "SD", "mean SE",
                             "coverage", "power"), tuple(sim_rows),
                            (False, False, True, True, True, True, True),
                            f"{count(simulation.get('replications'))} simulated studies of n = "
                            f"{count(simulation.get('n'))} (Wishart draws, seed {seed})"))
    strengths = _mapping(document.get("strengths"))
    # the plan document lists them under "edges" ("a -> b" strings); "strengths" kept for
    # documents that list them under that name with edges as pairs
    listed = next((strengths[k] for k in ("edges", "strengths")
                   if isinstance(strengths.get(k), list)), [])
    if listed:
        rows_s = []
        for entry in listed:
            if not isinstance(entry, Mapping):
                continue
            edge = entry.get("edge")
            if isinstance(edge, str) and "->" in edge:
                edge = [part.strip() for part in edge.split("->")]
            edge_text = " → ".join(view.label(str(e)) for e in edge) \
                if isinstance(edge, (list, tuple)) else str(edge)
            source = str(entry.get("source") or "")
            low, high = entry.get("low"), entry.get("high")
            range_text = f"{_num(low)} to {_num(high)}" if source == "range" else ""
            value = _num(entry.get("value")) + (" (midpoint)" if source == "range" else "")
            rows_s.append((edge_text, value, _STRENGTH_SOURCES.get(source, source),
                           range_text))
        blocks.append(Table(("arrow", "strength", "from", "range swept"), tuple(rows_s),
                            (False, True, False, True),
                            "Assumed standardised path strengths"))
    sweep = _mapping(document.get("range_sweep"))
    if is_number(sweep.get("requested")):
        effect = _mapping(sweep.get("true_effect"))
        text = (f"The strength ranges were swept with {count(sweep['requested'])} "
                f"Latin-hypercube draws (seed {sweep.get('seed')}); "
                f"{count(sweep.get('used'))} gave a possible model.")
        low, high = effect.get("low"), effect.get("high")
        if is_number(low) and is_number(high):
            text += (f" The true effect is {_num(low)} in every draw." if _num(low) == _num(high)
                     else f" The true effect ranges from {_num(low)} to {_num(high)} over "
                     "them.")
        blocks.append(Paragraph(text))
    return Section("estimates", "Measurement plans", tuple(blocks))


_STRENGTH_SOURCES = {"study": "study file", "range": "study file, a range",
                     "default": "default (not in [strengths])"}


def _wording_estimates(view: ResultView) -> Section:
    claims = [c for c in view.get("claims") or [] if isinstance(c, Mapping)]
    rows = []
    for claim in claims:
        rows.append((count(claim.get("line")) if is_number(claim.get("line")) else "",
                     str(claim.get("sentence") or ""),
                     f"{claim.get('level', '')} {claim.get('grade') or ''}".strip(),
                     "yes" if claim.get("prescriptive") else "",
                     str(claim.get("verdict") or ""), str(claim.get("suggestion") or "")))
    blocks: list[Block] = [Paragraph(_STRENGTH_SCALE, "note")]
    blocks.append(Table(("line", "sentence", "strength", "prescriptive", "verdict",
                         "suggested wording"), tuple(rows),
                        (True, False, False, False, False, False), "Sentences reviewed"))
    return Section("estimates", "The sentences", tuple(blocks))


# --------------------------------------------------------------------------------------------
# Decomposition


def _decomposition_section(view: ResultView, figures: Sequence[str]) -> Section | None:
    rows_in = decomposition_shares(view.document)
    shifts = [s for s in view.get("bad_controls") or [] if isinstance(s, Mapping)]
    if not rows_in and not shifts:
        return None
    blocks: list[Block] = []
    places = _audit_decimals(view)
    if rows_in:
        naive, target, _ = decomposition_parts(view.document)
        # γ and δ are in each covariate's own units: three figures each; the contributions
        # are in the outcome's units, at the decimals of the estimates table
        rows = [(view.label(str(r.get("variable"))), _num(r.get("gamma")),
                 _num(r.get("delta")), _at(r.get("contribution"), places, sign=True),
                 _pct(r.get("share")))
                for r in rows_in]
        gap = naive - target if is_number(naive) and is_number(target) else None
        rows.append(("total (naive − adjusted)", "", "", _at(gap, places, sign=True),
                     "100%" if gap else "n/a"))
        towards = "adjusted" if decomposition_target(view.document) == "adjusted" \
            else "declared controls'"
        text = (f"The naive slope ({_at(naive, places)}) minus the {towards} estimate "
                f"({_at(target, places)}) splits exactly into one term per covariate: γ, the "
                "covariate's coefficient in the adjusted regression, times δ, the slope of the "
                "covariate on the treatment given the other covariates. A positive term means "
                "leaving the covariate out made the naive slope larger; adjusting for it moves "
                "the slope down by that much (a step to the left in the chart).")
        categorical = [view.label(str(r.get("variable"))) for r in rows_in
                       if not is_number(r.get("gamma"))]
        if categorical:
            text += (f" A categorical covariate ({', '.join(categorical)}) has one γ and one δ "
                     "per category, so only its total is shown.")
        blocks.append(Paragraph(text))
        blocks.append(Table(("covariate", "γ", "δ", "contribution γ·δ", "share of the gap"),
                            tuple(rows), (False, True, True, True, True),
                            "Where the gap between the naive and adjusted slopes comes from",
                            (len(rows) - 1,)))
        if "decomposition" in figures:
            blocks.append(_figure("decomposition"))
    if shifts:
        rows = []
        for shift in shifts:
            problems = ", ".join(_PROBLEM_WORDS.get(str(p), str(p)).split(":")[0]
                                 for p in shift.get("problems") or []) or "n/a"
            rows.append((view.label(str(shift.get("variable"))), problems,
                         _at(shift.get("estimate_without"), places),
                         _at(shift.get("estimate_with"), places),
                         _at(shift.get("shift"), places, sign=True)))
        blocks.append(Table(("control", "problem", "without it", "with it", "change"),
                            tuple(rows), (False, False, True, True, True),
                            "What each invalid declared control does when added to the "
                            "headline set"))
    return Section("decomposition", "What explains the gap", tuple(blocks))


# --------------------------------------------------------------------------------------------
# Sensitivity


def _sensitivity_section(view: ResultView, figures: Sequence[str]) -> Section | None:
    document = view.document
    block = _mapping(document.get("sensitivity")) if view.kind == "audit" else document
    rv = block.get("robustness_value")
    e_value = _mapping(document.get("e_value"))
    if not is_number(rv) and not e_value:
        return None
    blocks: list[Block] = []
    theta = significant(view.threshold)
    places = _audit_decimals(view) if view.kind == "audit" else None
    if is_number(rv):
        rows = []
        of = block.get("of")
        if view.kind == "audit" and of:
            rows.append(("estimate analysed", f"{of}: {_at(block.get('estimate'), places)}"))
        rows += [("threshold (the claim fails here)", theta),
                 ("partial R² of the treatment with the outcome", _pct(block.get("partial_r2"))),
                 (f"robustness value: estimate reaches {theta}", _pct(rv)),
                 (f"robustness value: {view.confidence} CI reaches {theta}",
                  _pct(block.get("robustness_value_ci")))]
        extreme = block.get("extreme_r2dz")
        if not is_number(extreme):
            extreme = _mapping(block.get("extreme_case")).get("r2dz_to_threshold")
        if is_number(extreme):
            rows.append(("treatment R² needed when the outcome R² is 100%", _pct(extreme)))
        compare = ("Compare it with how much the measured covariates explain (the benchmarks "
                   "below)." if block.get("benchmarks") else
                   "Compare it with how much the strongest covariate in the model explains of "
                   "the treatment and of the outcome; a published table rarely says, so ask.")
        blocks.append(Paragraph(
            "The robustness value is the share of the remaining variance of both the treatment "
            "and the outcome that a hidden confounder would have to explain to move the "
            "estimate to the threshold. " + compare))
        blocks.append(Table(("quantity", "value"), tuple(rows), (False, True),
                            "Robustness to an unmeasured confounder (Cinelli & Hazlett 2020)"))
    marks = [benchmark_fields(b) for b in block.get("benchmarks") or [] if isinstance(b, Mapping)]
    if marks:
        rows = []
        for m in marks:
            estimate = m["adjusted_estimate"]
            own = f"{_pct(m['covariate_r2_treatment'])} / {_pct(m['covariate_r2_outcome'])}"
            rows.append((view.label(str(m["variable"])), f"{significant(m['multiplier'])}×",
                         own,
                         f"{_pct(m['r2_treatment'])} / {_pct(m['r2_outcome'])}",
                         _at(estimate, places),
                         interval(m["adjusted_ci_low"], m["adjusted_ci_high"], like=estimate,
                                  decimals=places)))
        blocks.append(Paragraph(
            "Each row is a hidden confounder k times as strong as a measured covariate. Its "
            "partial R² are computed from the covariate's own on the scale the bound uses "
            "(R²/(1 − R²), Cinelli & Hazlett 2020, Sec. 6), so even at k = 1 they are a little "
            "larger than the covariate's."))
        blocks.append(Table(("covariate", "k", "covariate's R²", "confounder's R²",
                             "adjusted estimate", f"{view.confidence} CI"), tuple(rows),
                            (False, True, True, True, True, True),
                            "A hidden confounder k times as strong as a measured covariate "
                            "(partial R² with the treatment / with the outcome)"))
    if "sensitivity" in figures:
        # the squares are drawn only when there are benchmarks to draw
        blocks.append(_figure("sensitivity", None if marks else _FIGURE_TEXT["sensitivity"][0]
                              .split(", squares mark")[0] + "."))
    stability = _mapping(block.get("coefficient_stability"))
    if stability:
        rows = [("maximum R² assumed", _num(stability.get("r2_max"))),
                ("δ (selection on unobservables relative to observables)",
                 _num(stability.get("delta"))),
                ("bias-adjusted estimate at that δ", _at(stability.get("adjusted_estimate"),
                                                         places)),
                (f"δ that brings the estimate to {theta}",
                 _num(stability.get("delta_for_threshold")))]
        blocks.append(Paragraph(_stability_text(stability, theta)))
        blocks.append(Table(("quantity", "value"), tuple(rows), (False, True),
                            "Coefficient stability (Oster 2019)"))
    if e_value:
        rows = [("risk ratio used", _num(e_value.get("risk_ratio"))),
                ("conversion", str(e_value.get("conversion") or "")),
                ("E-value of the estimate", significant(e_value.get("point"), 3)),
                ("E-value of the CI limit nearest the null", significant(e_value.get("ci"), 3))]
        blocks.append(Table(("quantity", "value"), tuple(rows), (False, True),
                            "E-value (VanderWeele & Ding 2017)"))
    return Section("sensitivity", "How strong would a hidden confounder have to be?",
                   tuple(blocks))


def _stability_text(stability: Mapping[str, Any], theta: str) -> str:
    """What the coefficient-stability numbers mean, in words (Oster 2019, Sec. 3)."""
    text = ("δ compares selection on unobserved confounders with selection on the observed "
            "covariates: δ = 1 means the unobserved ones matter as much as the observed ones, "
            "given an R² the full model would reach (the maximum R²).")
    r2_max, r2 = stability.get("r2_max"), stability.get("adjusted_r2")
    if is_number(r2_max) and is_number(r2) and r2 > 0:
        text += (f" Here the maximum R² is {significant(r2_max / r2, 2)} times the adjusted "
                 f"regression's R² of {_num(r2)}.")
    delta = stability.get("delta_for_threshold")
    if is_number(delta) and delta < 0:
        text += (f" A negative δ to reach {theta} means the unobserved confounding would have "
                 "to work against the observed one")
        naive = stability.get("naive_estimate")
        adjusted = stability.get("adjusted_estimate_observed")
        threshold = stability.get("threshold")
        if is_number(naive) and is_number(adjusted) and is_number(threshold) and \
                (naive - threshold) * (adjusted - threshold) > 0 and \
                abs(adjusted - threshold) > abs(naive - threshold):
            text += (f": adjusting for the covariates moved the estimate away from {theta}, "
                     "and only confounding in the opposite direction could bring it back")
        text += "."
    return text


# the grade names are those of the JSON and the terminal ("5 causal"); the words say what each
# level means
_STRENGTH_SCALE = ("Strength scale: 0 no-link (no relation stated), 1 association, 2 hedged "
                   "(a hedged association), 3 possible-cause (may, might, could), 4 capacity "
                   "(can cause), 5 causal (a causal claim).")


def _claim_rows(claims: Sequence[Mapping[str, Any]]) -> tuple[tuple[str, ...], ...]:
    rows = []
    for claim in claims:
        strength = f"{claim.get('level', '')} {claim.get('grade') or ''}".strip()
        rows.append((count(claim.get("line")) if is_number(claim.get("line")) else "",
                     str(claim.get("sentence") or ""),
                     strength + (", advice" if claim.get("prescriptive") else ""),
                     str(claim.get("verdict") or ""), str(claim.get("suggestion") or "")))
    return tuple(rows)


def _wording_section(view: ResultView) -> Section | None:
    """The review of the report's own wording (vet and audit, with ``[study].report_text``)."""
    block = _mapping(view.get("wording"))
    if not block:
        return None
    title = "Wording of the report"
    source = str(block.get("source") or "the report text")
    if not block.get("reviewed"):
        reason = str(block.get("error") or "it could not be read").rstrip(".")
        return Section("wording", title, (Paragraph(
            f"The report text was not reviewed: {reason}. The rest of this report does not "
            "depend on it.", "note"),))
    evidence = _mapping(block.get("evidence"))
    what = ", ".join(x for x in (
        str(block.get("format") or ""),
        f"{count(block['lines'])} lines" if is_number(block.get("lines")) else "",
        f"{count(block['sentences'])} sentences" if is_number(block.get("sentences")) else "")
        if x)
    text = f"Text reviewed: {source}" + (f" ({what})" if what else "") + "."
    supported = supported_phrase(block)
    if supported:
        text += f" Evidence: {evidence_phrase(evidence)} supports wording {supported}."
    cutoff = _mapping(evidence.get("cutoffs")).get("observational_rv_at_least")
    blocks: list[Block] = [Paragraph(text), Paragraph(
        _STRENGTH_SCALE + " The cut-offs are common practice: a randomised design supports "
        "causal wording (5); an observational one with a robustness value of at least "
        f"{cutoff if is_number(cutoff) else 0.1:.2f} supports \"may\" wording (3), "
        "otherwise association wording (2).", "note")]
    study_claim = _mapping(block.get("study_claim"))
    if study_claim.get("verdict") and study_claim.get("verdict") != "supported":
        text = (f"The claim under test is graded {study_claim.get('level')} "
                f"({study_claim.get('grade')}): {study_claim['verdict']}.")
        if study_claim.get("suggestion"):
            text += f" At the supported strength: \"{study_claim['suggestion']}\""
        blocks.append(Paragraph(text))
    claims = [c for c in block.get("claims") or [] if isinstance(c, Mapping)]
    if claims:
        blocks.append(Table(("line", "sentence", "strength", "verdict", "suggested wording"),
                            _claim_rows(claims), (True, False, False, False, False),
                            "Sentences that link the treatment and the outcome"))
    else:
        blocks.append(Paragraph("No sentence of the text links the treatment and the outcome."))
    notes = [upper_first(str(n), identifiers=view.identifiers)
             for n in block.get("notes") or [] if n]
    if notes:
        blocks.append(Bullets(tuple(dict.fromkeys(notes))))
    return Section("wording", title, tuple(blocks))


def _independence_text(view: ResultView, test: Mapping[str, Any]) -> str:
    given = test.get("given") or []
    text = f"{view.label(str(test.get('left')))} ⊥ {view.label(str(test.get('right')))}"
    if given:
        text += " | " + ", ".join(view.labels(given))
    return text


def _tests_section(view: ResultView) -> Section | None:
    tests = [t for t in view.get("implications") or [] if isinstance(t, Mapping)]
    if not tests:
        return None
    if not any(is_number(t.get("p_value")) for t in tests):
        # the controls check lists what could be tested; only the audit has the data to test
        rows = tuple((_independence_text(view, t),) for t in tests[:60])
        blocks: list[Block] = [
            Paragraph("Each line is an independence the graph implies among measured variables "
                      "(⊥ reads \"independent of\", | \"given\"). With data, causalcheck audit "
                      "tests each one: a contradiction means the graph is missing an arrow or a "
                      "common cause."),
            Table(("implied independence",), rows, (False,),
                  "What the data should show if the graph is right")]
        if len(tests) > 60:
            blocks.append(Paragraph(f"{count(len(tests) - 60)} more are in result.json.",
                                    "note"))
        return Section("tests", "What the graph implies you can test", tuple(blocks))
    rows = []
    for test in tests:
        text = _independence_text(view, test)
        kind = "z" if test.get("test") == "fisher_z" else ("F" if test.get("test") else "")
        statistic = f"{kind} = {_num(test.get('statistic'))}" if kind else \
            _num(test.get("statistic"))
        rejected = test.get("rejected")
        if rejected is None and is_number(test.get("p_value")):
            rejected = test["p_value"] < view.alpha
        rows.append((text, statistic, p_value(test.get("p_value")).removeprefix("p = ")
                     .removeprefix("p "),
                     p_value(test.get("holm_p_value")).removeprefix("p = ").removeprefix("p ")
                     if test.get("holm_p_value") is not None else "n/a",
                     "contradicted" if rejected else "consistent"))
    return Section("tests", "Do the data contradict the graph?", (
        Paragraph("Each line is an independence the graph implies among measured variables "
                  "(⊥ reads \"independent of\", | \"given\"). A contradiction means the graph "
                  "is missing an arrow or a common cause; consistency cannot confirm the "
                  "graph."),
        Table(("implied independence", "statistic", "p", "Holm p", "data"), tuple(rows),
              (False, True, True, True, False), "Tests of the graph's implications")))


def _notes_section(view: ResultView) -> Section | None:
    notes = [upper_first(str(n), identifiers=view.identifiers)
             for n in view.get("notes") or [] if n]
    if not notes:
        return None
    return Section("notes", "Notes", (Bullets(tuple(dict.fromkeys(notes))),))


def build_report(document: Mapping[str, Any], *, figures: Sequence[str] | None = None
                 ) -> Report:
    """The report of a result document.

    Parameters
    ----------
    document : mapping
        A result document (any command's ``to_dict()``, with or without the study context).
    figures : sequence of str, keyword-only
        The figures that will be shown (default: every figure the document supports).
    """
    view = ResultView(document)
    kind = view.kind
    figures = list(figures_for(document) if figures is None else figures)
    sections: list[Section] = [_claim_section(view, figures)]
    if kind == "audit":
        sections.append(_audit_estimates(view, figures))
    elif kind == "vet":
        sections.append(_vet_estimates(view))
    elif kind == "plan":
        sections.append(_plan_estimates(view, figures))
    elif kind == "wording":
        sections.append(_wording_estimates(view))
    for builder in (_decomposition_section, _sensitivity_section):
        section = builder(view, figures)
        if section is not None:
            sections.append(section)
    if kind in ("audit", "vet"):
        wording = _wording_section(view)
        if wording is not None:
            sections.append(wording)
    for section in (_tests_section(view), _notes_section(view)):
        if section is not None:
            sections.append(section)
    sections.append(Section("cautions", "Cautions",
                            (Bullets(tuple(c.full for c in cautions_for(document))),)))
    methods = methods_for(document)
    method_blocks: list[Block] = []
    for method in methods:
        method_blocks.append(Paragraph(f"{method.name}. {method.summary}"))
        method_blocks.append(Bullets(tuple(method.citations())))
    method_blocks.append(Paragraph(
        "Formulas and worked checks for every method: docs/methods.md in the causalcheck "
        "repository.", "note"))
    sections.append(Section("methods", "Methods and references", tuple(method_blocks)))
    kind_title = KIND_TITLES.get(kind, "causalcheck report")
    title = f"{kind_title}: {view.title}" if view.title else kind_title
    subtitle = KIND_SUBTITLES.get(kind, "")
    if view.treatment and view.outcome:
        subtitle = (f"Treatment: {view.label(view.treatment)}. Outcome: "
                    f"{view.label(view.outcome)}. " + subtitle)
    if subtitle and not subtitle.endswith(("?", ".")):
        subtitle += "."
    return Report(kind, title, subtitle, build_verdict(document), tuple(sections),
                  tuple(figures))
