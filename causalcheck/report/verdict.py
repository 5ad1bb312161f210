"""The verdict paragraph: the first thing every output says, built from a result document.

One builder per command, each reading only the command's result document (its ``to_dict()``,
the JSON contract of DESIGN.md, optionally with the study context of
:func:`~causalcheck.report.context.attach_context`), so the terminal, Markdown, HTML and JSON
outputs say the same thing in the same words.

A verdict answers, in plain sentences and in this order: the claim under test; whether the
declared controls are a valid adjustment set; the naive and the adjusted estimate; how much of
the gap between them each leading confounder explains; how strong a hidden confounder would
have to be to bring the estimate to the threshold, against the strongest measured covariate;
and what to measure next. Numbers are rounded to three significant figures, a standard error
to two (``0.60``), shares to at most one decimal of a percent (``34.8%``), and carry the units
declared in ``[variables]``.

Examples
--------
>>> document = {"schema": "causalcheck/vet/1", "estimate": 1.95, "std_error": 0.6,
...             "t": 3.25, "dof": 836, "partial_r2": 0.0125, "robustness_value": 0.106,
...             "robustness_value_ci": 0.041, "e_value": None}
>>> print(build_verdict(document).text)   # doctest: +NORMALIZE_WHITESPACE
The reported estimate is 1.95 (standard error 0.60; t = 3.25 on 836 residual degrees of
freedom). A hidden confounder explaining 10.6% of the remaining variance of both the treatment
and the outcome (the part the covariates in the model leave unexplained) would bring the
estimate to the threshold, 0; one explaining 4.1% of both would make the 95% confidence
interval include 0. Even a confounder that explained all the remaining variance of the outcome
would have to explain at least 1.2% of the treatment's remaining variance to bring the
estimate to 0. Whether confounders this strong are plausible is a judgement about the study:
compare them with the strongest measured covariates (causalcheck audit benchmarks them when the
data are at hand).

References
----------
Cinelli, C., & Hazlett, C. (2020). Making sense of sensitivity: extending omitted variable
bias. Journal of the Royal Statistical Society: Series B, 82(1), 39-67 (Sec. 4: robustness
value and the partial R² of the treatment with the outcome as an extreme-scenario bound).
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass
from typing import Any

from .context import ResultView, lower_first, upper_first
from .numbers import count, fixed, interval, is_number, percent, shared_decimals, significant

__all__ = [
    "VERDICT_BUILDERS",
    "Verdict",
    "audit_verdict",
    "benchmark_fields",
    "build_verdict",
    "controls_verdict",
    "decomposition_parts",
    "decomposition_shares",
    "decomposition_target",
    "evidence_phrase",
    "extreme_share",
    "plan_verdict",
    "strongest_benchmark",
    "supported_phrase",
    "vet_verdict",
    "wording_sentence",
    "wording_verdict",
]


@dataclass(frozen=True)
class Verdict:
    """The verdict paragraph of one result: its sentences, in reading order.

    ``next_step`` repeats the last sentence when it says what to measure or do next.
    """

    kind: str
    sentences: tuple[str, ...]
    next_step: str | None = None

    @property
    def text(self) -> str:
        """The paragraph as one string."""
        return " ".join(self.sentences)

    @property
    def lead(self) -> str | None:
        """The opening sentence that states the claim or the question, if there is one."""
        if self.sentences and self.sentences[0].startswith(_LEADS):
            return self.sentences[0]
        return None

    @property
    def findings(self) -> tuple[str, ...]:
        """The sentences between the claim and the next step."""
        start = 1 if self.lead else 0
        end = len(self.sentences) - (1 if self.next_step and self.sentences
                                     and self.sentences[-1] == self.next_step else 0)
        return self.sentences[start:end]

    def to_dict(self) -> dict[str, Any]:
        return {"text": self.text, "sentences": list(self.sentences),
                "next_step": self.next_step}


_LEADS = ("The claim under test:", "The question:")


# --------------------------------------------------------------------------------------------
# Small phrase helpers


def _listing(items: Sequence[str], *, conjunction: str = "and") -> str:
    """``a``, ``a and b``, ``a, b and c``.

    >>> _listing(["x"]), _listing(["x", "y"]), _listing(["x", "y", "z"], conjunction="or")
    ('x', 'x and y', 'x, y or z')
    """
    items = [str(i) for i in items]
    if not items:
        return ""
    if len(items) == 1:
        return items[0]
    return f"{', '.join(items[:-1])} {conjunction} {items[-1]}"


def _sentence(text: str, view: ResultView | None = None) -> str:
    """``text`` as a sentence: a capital first letter (unless it starts with a variable name or
    another identifier, whose case is kept) and a full stop."""
    text = text.strip()
    if not text:
        return text
    text = upper_first(text, identifiers=view.identifiers if view is not None else ())
    return text if text.endswith((".", "!", "?", '"')) else text + "."


def _mapping(value: Any) -> Mapping[str, Any]:
    return value if isinstance(value, Mapping) else {}


def _names(value: Any) -> list[str]:
    if isinstance(value, (list, tuple)):
        return [str(v) for v in value]
    return []


def _claim(view: ResultView, *, question: bool = False) -> str | None:
    """The claim under test; without one, the question (when ``question``) or nothing."""
    if view.claim:
        claim = view.claim.strip()
        return f'The claim under test: "{claim}"'
    if question and view.treatment and view.outcome:
        return (f"The question: does {lower_first(view.label(view.treatment))} change "
                f"{lower_first(view.label(view.outcome))}?")
    return None


def _set_phrase(view: ResultView, names: Sequence[str]) -> str:
    return _listing(view.labels(names)) if names else "nothing"


_PROBLEM_PHRASES: dict[str, Callable[[str], str]] = {
    "mediator": lambda v: (f"{v} is a mediator (the treatment acts through it), so controlling "
                           "for it removes part of the effect"),
    "descendant_of_treatment": lambda v: (f"{v} is itself affected by the treatment, so "
                                          "controlling for it distorts the estimate"),
    "collider_opened": lambda v: (f"{v} is a common effect of two variables (a collider); "
                                  "controlling for it opens a spurious path"),
    "path_left_open": lambda v: f"a biasing path through {v} is left open",
    "descendant_of_outcome": lambda v: (f"{v} is affected by the outcome, so controlling for it "
                                        "biases the estimate"),
    "unmeasured": lambda v: f"{v} is not measured, so it cannot be controlled for",
}


def _problem_phrase(view: ResultView, problem: Mapping[str, Any]) -> str:
    variable = str(problem.get("variable", ""))
    kind = str(problem.get("kind", ""))
    label = view.label(variable) if variable else "a variable"
    phrase = _PROBLEM_PHRASES.get(kind)
    if phrase is not None:
        return phrase(label)
    detail = problem.get("detail")
    return str(detail) if detail else f"{label} is a problem ({kind})"


def _controls_sentence(view: ResultView) -> str | None:
    controls = view.get("controls")
    if not isinstance(controls, Mapping):
        return None
    used = _names(controls.get("used"))
    valid = controls.get("valid")
    problems = [p for p in controls.get("problems") or [] if isinstance(p, Mapping)]
    if not used:
        if valid:
            return ("Comparing without any controls, as declared, is valid for this graph: no "
                    "biasing path is open.")
        subject = "Comparing without any controls, as declared,"
    else:
        subject = f"The declared controls ({_set_phrase(view, used)})"
        if valid:
            return f"{subject} are a valid adjustment set for this graph."
    if valid:  # pragma: no cover - handled above
        return None
    verb = "is" if not used else "are"
    phrases = _grouped_problems(view, problems)
    if not phrases:
        return f"{subject} {verb} not a valid adjustment set for this graph."
    return f"{subject} {verb} not a valid adjustment set: {'; '.join(phrases)}."


_PLURAL_PHRASES: dict[str, Callable[[str], str]] = {
    "mediator": lambda v: (f"{v} are mediators (the treatment acts through them), so "
                           "controlling for them removes part of the effect"),
    "descendant_of_treatment": lambda v: (f"{v} are themselves affected by the treatment, so "
                                          "controlling for them distorts the estimate"),
    "collider_opened": lambda v: (f"{v} are common effects (colliders); controlling for them "
                                  "opens spurious paths"),
    "path_left_open": lambda v: f"biasing paths through {v} are left open",
    "descendant_of_outcome": lambda v: (f"{v} are affected by the outcome, so controlling for "
                                        "them biases the estimate"),
    "unmeasured": lambda v: f"{v} are not measured, so they cannot be controlled for",
}


def _grouped_problems(view: ResultView, problems: Sequence[Mapping[str, Any]]) -> list[str]:
    """One clause a kind of problem, naming every variable with it, in order of first mention."""
    by_kind: dict[str, list[str]] = {}
    others: list[str] = []
    for problem in problems:
        kind = str(problem.get("kind", ""))
        variable = str(problem.get("variable", ""))
        if kind in _PROBLEM_PHRASES and variable:
            names = by_kind.setdefault(kind, [])
            if variable not in names:
                names.append(variable)
        else:
            others.append(_problem_phrase(view, problem))
    phrases = []
    for kind, names in by_kind.items():
        labels = view.labels(names)
        if len(labels) == 1:
            phrases.append(_PROBLEM_PHRASES[kind](labels[0]))
        else:
            phrases.append(_PLURAL_PHRASES[kind](_listing(labels)))
    return phrases + list(dict.fromkeys(others))


# --------------------------------------------------------------------------------------------
# Sensitivity pieces shared by audit and vet


_BENCHMARK_KEYS = {
    # the first names are those of sensitivity.BenchmarkBounds.rows()
    "variable": ("benchmark", "variable", "covariate", "name"),
    "multiplier": ("kd", "multiplier", "k"),
    "r2_treatment": ("r2dz", "r2_treatment", "partial_r2_treatment"),
    "r2_outcome": ("r2yz", "r2_outcome", "partial_r2_outcome"),
    "covariate_r2_treatment": ("r2dxj", "covariate_r2_treatment"),
    "covariate_r2_outcome": ("r2yxj", "covariate_r2_outcome"),
    "adjusted_estimate": ("adjusted_estimate", "bound_estimate", "estimate"),
    "adjusted_ci_low": ("adjusted_ci_low", "ci_low"),
    "adjusted_ci_high": ("adjusted_ci_high", "ci_high"),
}


def benchmark_fields(entry: Mapping[str, Any]) -> dict[str, Any]:
    """Read one benchmark entry of ``sensitivity.benchmarks`` into fixed field names.

    Fields: ``variable``, ``multiplier`` (default 1), ``r2_treatment`` and ``r2_outcome`` (the
    bound on a hidden confounder's partial R² with the treatment and with the outcome when it is
    ``multiplier`` times as strong as the covariate), ``covariate_r2_treatment`` and
    ``covariate_r2_outcome`` (the covariate's own partial R²s, when given) and
    ``adjusted_estimate`` (the estimate under that confounder, when given).

    >>> benchmark_fields({"benchmark": "income", "kd": 1, "r2dz": 0.02, "r2yz": 0.05})
    ... # doctest: +NORMALIZE_WHITESPACE
    {'variable': 'income', 'multiplier': 1.0, 'r2_treatment': 0.02, 'r2_outcome': 0.05,
     'covariate_r2_treatment': None, 'covariate_r2_outcome': None, 'adjusted_estimate': None,
     'adjusted_ci_low': None, 'adjusted_ci_high': None}
    """
    fields: dict[str, Any] = {}
    for field_name, keys in _BENCHMARK_KEYS.items():
        value = None
        for key in keys:
            if key in entry and entry[key] is not None:
                value = entry[key]
                break
        fields[field_name] = value
    multiplier = fields["multiplier"]
    fields["multiplier"] = float(multiplier) if is_number(multiplier) else 1.0
    for key in ("r2_treatment", "r2_outcome", "covariate_r2_treatment", "covariate_r2_outcome",
                "adjusted_estimate", "adjusted_ci_low", "adjusted_ci_high"):
        if not is_number(fields[key]):
            fields[key] = None
        else:
            fields[key] = float(fields[key])
    fields["variable"] = str(fields["variable"]) if fields["variable"] is not None else None
    return fields


def strongest_benchmark(benchmarks: Any) -> dict[str, Any] | None:
    """The measured covariate with the largest partial R² (the larger of its two), as 1×.

    Uses the covariate's own partial R²s when the entry gives them, else the 1× bounds.
    """
    best: dict[str, Any] | None = None
    best_strength = -1.0
    for raw in benchmarks or []:
        if not isinstance(raw, Mapping):
            continue
        fields = benchmark_fields(raw)
        if fields["variable"] is None or abs(fields["multiplier"] - 1.0) > 1e-9:
            continue
        treatment = fields["covariate_r2_treatment"] if fields["covariate_r2_treatment"] \
            is not None else fields["r2_treatment"]
        outcome = fields["covariate_r2_outcome"] if fields["covariate_r2_outcome"] \
            is not None else fields["r2_outcome"]
        if treatment is None or outcome is None:
            continue
        strength = max(treatment, outcome)
        if strength > best_strength:
            best_strength = strength
            best = dict(fields, shown_r2_treatment=treatment, shown_r2_outcome=outcome)
    return best


def _robustness_sentences(view: ResultView, sensitivity: Mapping[str, Any],
                          *, estimate: Any) -> list[str]:
    rv = sensitivity.get("robustness_value")
    rv_ci = sensitivity.get("robustness_value_ci")
    threshold = significant(view.threshold)
    sentences: list[str] = []
    if not is_number(rv):
        return sentences
    if rv <= 0:
        sentences.append(
            f"The estimate is already at or beyond the threshold ({threshold}), so no hidden "
            "confounder is needed to overturn the claim.")
        return sentences
    text = (f"a hidden confounder explaining {percent(rv)} of the remaining variance of "
            f"both the treatment and the outcome would bring the estimate to the threshold, "
            f"{threshold}")
    if is_number(rv_ci):
        if rv_ci <= 0:
            text += f"; the {view.confidence} confidence interval already includes {threshold}"
        else:
            text += (f"; one explaining {percent(rv_ci)} would make the {view.confidence} "
                     f"confidence interval include {threshold}")
    strongest = strongest_benchmark(sensitivity.get("benchmarks"))
    if strongest is not None:
        text += (f"; the strongest measured covariate, {view.label(strongest['variable'])}, "
                 f"explains {percent(strongest['shown_r2_treatment'])} of the treatment's and "
                 f"{percent(strongest['shown_r2_outcome'])} of the outcome's remaining variance")
    sentences.append(_sentence(text, view))
    comparison = _benchmark_comparison(view, sensitivity, estimate=estimate)
    if comparison:
        sentences.append(comparison)
    return sentences


def _crosses(value: float, estimate: float, threshold: float) -> bool:
    """True when ``value`` has reached the threshold from the estimate's side."""
    if estimate >= threshold:
        return value <= threshold
    return value >= threshold


def _benchmark_comparison(view: ResultView, sensitivity: Mapping[str, Any],
                          *, estimate: Any) -> str | None:
    """One sentence on the strongest benchmark multiple that still leaves the claim standing."""
    if not is_number(estimate):
        return None
    threshold = view.threshold
    by_variable: dict[str, list[dict[str, Any]]] = {}
    for raw in sensitivity.get("benchmarks") or []:
        if isinstance(raw, Mapping):
            fields = benchmark_fields(raw)
            if fields["variable"] is not None and fields["adjusted_estimate"] is not None:
                by_variable.setdefault(fields["variable"], []).append(fields)
    strongest = strongest_benchmark(sensitivity.get("benchmarks"))
    if strongest is None or strongest["variable"] not in by_variable:
        return None
    rows = sorted(by_variable[strongest["variable"]], key=lambda f: f["multiplier"])
    label = view.label(strongest["variable"])
    overturned = [f for f in rows if _crosses(f["adjusted_estimate"], estimate, threshold)]
    if not overturned:
        top = rows[-1]
        times = significant(top["multiplier"])
        return (f"Even a hidden confounder {times} times as strong as {label} would leave the "
                f"estimate at {view.effect(top['adjusted_estimate'])}, short of the threshold.")
    first = overturned[0]
    times = significant(first["multiplier"])
    strength = "as strong as" if abs(first["multiplier"] - 1) < 1e-9 \
        else f"{times} times as strong as"
    return (f"A hidden confounder {strength} {label} would already move the estimate to "
            f"{view.effect(first['adjusted_estimate'])}, past the threshold.")


# --------------------------------------------------------------------------------------------
# What to measure next


def _unmeasured_confounders(view: ResultView) -> list[str]:
    names = []
    for name in view.variable_names:
        if "confounder" in view.roles(name) and not view.measured(name):
            names.append(name)
    return sorted(names, key=lambda n: (view.cost(n) if view.cost(n) is not None else 0.0, n))


def _cost_phrase(view: ResultView, names: Sequence[str]) -> str:
    costs = [view.cost(n) for n in names]
    if any(c is None for c in costs) or not names:
        return ""
    total = sum(c for c in costs if c is not None)
    return f" (cost {significant(total)})" if total > 0 else " (no extra cost)"


def _next_step(view: ResultView, *, identifiable: Any) -> str:
    groups = [g for g in view.get("measure_to_identify") or [] if isinstance(g, (list, tuple))]
    if identifiable is False and groups:
        best = list(groups[0])
        return (f"Measure {_set_phrase(view, best)} next{_cost_phrase(view, best)}: with "
                f"{'them' if len(best) > 1 else 'it'}, a valid adjustment set would exist and "
                "the effect could be estimated by adjustment.")
    hidden = _unmeasured_confounders(view)
    if hidden:
        first = hidden[0]
        more = ""
        if len(hidden) > 1:
            more = f" Then {_set_phrase(view, hidden[1:])}."
        return (f"Measure {view.label(first)} next{_cost_phrase(view, [first])}: the graph "
                "says it affects both the treatment and the outcome, and it is not in the "
                f"data, so this analysis can only bound its effect.{more}")
    if identifiable is False:
        return ("No set of variables in the graph would make the effect identifiable by "
                "adjustment; consider a design that does not rely on it (an instrument, a "
                "natural experiment or a randomised comparison).")
    controls = view.get("controls")
    if isinstance(controls, Mapping) and controls.get("valid") is False and view.kind == "vet":
        sets = _mapping(view.get("adjustment_sets"))
        valid_set = sets.get("optimal") if isinstance(sets.get("optimal"), (list, tuple)) \
            else next(iter(sets.get("minimal") or []), None)
        which = (f"adjusted for {_set_phrase(view, valid_set)}, a valid set in this graph"
                 if isinstance(valid_set, (list, tuple)) and valid_set
                 else "with a valid adjustment set (see the controls check)")
        return (f"Next, ask the authors for the estimate {which}, and which common causes of "
                "the treatment and the outcome they considered.")
    if isinstance(controls, Mapping) and controls.get("valid") is False:
        return ("Next, re-estimate with a valid adjustment set instead of the declared "
                "controls, and ask domain experts which common causes of the treatment and "
                "the outcome the graph may be missing.")
    return ("The graph names no unmeasured confounder; ask domain experts which common causes "
            "of the treatment and the outcome it may be missing, and compare their plausible "
            "strength with the robustness value.")


# --------------------------------------------------------------------------------------------
# The builders, one per command


def decomposition_parts(document: Mapping[str, Any]) -> tuple[Any, Any, list[Any]]:
    """(naive, target estimate, terms): of the adjusted estimate, else of the declared one."""
    estimates = _mapping(document.get("estimates"))
    naive = _mapping(estimates.get("naive")).get("estimate")
    adjusted = _mapping(estimates.get("adjusted")).get("estimate")
    terms = list(document.get("decomposition") or [])
    declared = _mapping(document.get("decomposition_declared"))
    if not terms and declared.get("terms"):
        terms = list(declared["terms"])
        naive = declared.get("naive_estimate", naive)
        adjusted = declared.get("adjusted_estimate")
    return naive, adjusted, terms


def decomposition_target(document: Mapping[str, Any]) -> str:
    """``"adjusted"`` or ``"declared"``: which estimate the decomposition splits the gap to."""
    if not document.get("decomposition") and _mapping(
            document.get("decomposition_declared")).get("terms"):
        return "declared"
    return "adjusted"


def decomposition_shares(document: Mapping[str, Any]) -> list[dict[str, Any]]:
    """The decomposition entries with each one's ``share`` of the naive − adjusted gap.

    share = contribution / (naive − adjusted); ``None`` when the gap is zero or missing. Sorted
    by the size of the contribution, largest first.
    """
    naive, adjusted, entries = decomposition_parts(document)
    gap = naive - adjusted if is_number(naive) and is_number(adjusted) else None
    rows = []
    for entry in entries:
        if not isinstance(entry, Mapping) or not is_number(entry.get("contribution")):
            continue
        share = entry["contribution"] / gap if gap else None
        rows.append(dict(entry, share=share))
    rows.sort(key=lambda r: -abs(r["contribution"]))
    return rows


def _decomposition_sentence(view: ResultView) -> str | None:
    naive, adjusted, _ = decomposition_parts(view.document)
    rows = decomposition_shares(view.document)
    if not rows or not (is_number(naive) and is_number(adjusted)):
        return None
    gap = naive - adjusted
    if gap == 0:
        return "The naive and adjusted slopes are equal, so the controls change nothing."
    leading = [r for r in rows if r["share"] is not None and abs(r["share"]) >= 0.05][:3]
    if not leading:
        leading = rows[:1]
    parts = []
    for row in leading:
        label = view.label(str(row.get("variable")))
        if row["share"] is not None and row["share"] < 0:
            parts.append(f"{label} works the other way ({percent(row['share'])})")
        elif any(not p.endswith(")") for p in parts):
            parts.append(f"{label} {percent(row['share'])}")
        else:
            parts.append(f"{label} explains {percent(row['share'])}")
    if decomposition_target(view.document) == "declared":
        return (f"Of the gap of {view.effect(gap)} between the naive slope and the declared "
                f"controls' estimate, {view.effect(adjusted)}, {_listing(parts)}.")
    return f"Of the gap of {view.effect(gap)} between them, {_listing(parts)}."


def _estimates_sentence(view: ResultView) -> str | None:
    estimates = _mapping(view.get("estimates"))
    naive = _mapping(estimates.get("naive"))
    adjusted = _mapping(estimates.get("adjusted"))
    per = view.per_treatment()
    pieces = []
    if is_number(naive.get("estimate")):
        pieces.append(f"The naive slope, with no controls, is {view.effect(naive['estimate'])}"
                      f"{per}")
    if not adjusted or not is_number(adjusted.get("estimate")):
        if pieces:
            return pieces[0] + ("; no valid adjustment set of measured variables exists, so "
                                "there is no adjusted estimate.")
        return None
    names = _names(adjusted.get("set"))
    ci = ""
    if is_number(adjusted.get("ci_low")) and is_number(adjusted.get("ci_high")):
        ci = (f" ({view.confidence} CI "
              f"{interval(adjusted['ci_low'], adjusted['ci_high'], like=adjusted['estimate'])})")
    reason = str(adjusted.get("reason") or "").lower()
    why = ""
    if "declared" in reason:
        why = " (the declared controls)"
    elif "optimal" in reason:
        why = " (the valid set with the most precise estimate)"
    elif "minimal" in reason:
        why = " (a minimal valid set)"
    if not names:
        adjusted_text = (f"no controls are needed in this graph, so the adjusted estimate is "
                         f"{view.effect(adjusted['estimate'])}{ci}")
    else:
        adjusted_text = (f"adjusting for {_set_phrase(view, names)}{why} gives "
                         f"{view.effect(adjusted['estimate'])}{ci}")
    if pieces:
        return f"{pieces[0]}; {adjusted_text}."
    return _sentence(adjusted_text, view)


def _bad_control_sentence(view: ResultView) -> str | None:
    """The largest move an invalid declared control makes when added to the headline set."""
    shifts = [s for s in view.get("bad_controls") or [] if isinstance(s, Mapping)
              and is_number(s.get("shift")) and is_number(s.get("estimate_with"))]
    if not shifts:
        return None
    worst = max(shifts, key=lambda s: abs(s["shift"]))
    label = view.label(str(worst.get("variable")))
    return (f"Adding {label} to the adjusted set, as the declared controls do, moves the "
            f"estimate by {significant(worst['shift'], sign=True)} to "
            f"{view.effect(worst['estimate_with'])}.")


def _implications_sentence(view: ResultView) -> str | None:
    tests = [t for t in view.get("implications") or [] if isinstance(t, Mapping)
             and is_number(t.get("p_value"))]
    if not tests:
        return None
    alpha = view.alpha

    def is_rejected(test: Mapping[str, Any]) -> bool:
        # the audit's own decision (Holm-adjusted across all the tests), so the verdict and the
        # table agree; a document without it falls back to the Holm p-value, then the raw one
        if isinstance(test.get("rejected"), bool):
            return bool(test["rejected"])
        p = test.get("holm_p_value") if is_number(test.get("holm_p_value")) else test["p_value"]
        return float(p) < alpha

    rejected = [t for t in tests if is_rejected(t)]
    total = len(tests)
    noun = "independence" if total == 1 else "independences"
    if not rejected:
        return (f"The data do not contradict the {count(total)} {noun} the graph implies "
                f"(at the {percent(alpha)} level, Holm-adjusted); such tests can reject a "
                "graph, not confirm it.")
    worst = min(rejected, key=lambda t: t["p_value"])
    pair = f"{view.label(str(worst.get('left')))} and {view.label(str(worst.get('right')))}"
    return (f"The data contradict {count(len(rejected))} of the {count(total)} {noun} the graph "
            f"implies (at the {percent(alpha)} level, Holm-adjusted), most clearly between {pair}: the graph "
            "may be missing an arrow or a common cause there.")


def audit_verdict(document: Mapping[str, Any]) -> Verdict:
    """The verdict of ``causalcheck audit`` (schema ``causalcheck/audit/1``)."""
    view = ResultView(document)
    sentences = [s for s in (_claim(view, question=True), _controls_sentence(view)) if s]
    identifiable = document.get("identifiable")
    if identifiable is False:
        hidden = _unmeasured_confounders(view)
        if hidden:
            sentences.append(
                f"The graph has an unmeasured confounder ({_set_phrase(view, hidden)}), so no "
                "set of measured variables closes every biasing path: the adjusted estimate "
                "below still carries its bias, and the sensitivity analysis says how strong "
                "it would have to be to matter.")
        else:
            sentences.append("No set of measured variables closes every biasing path, so no "
                             "estimate here can be read as the effect.")
    estimate_sentence = _estimates_sentence(view)
    if estimate_sentence:
        sentences.append(estimate_sentence)
    decomposition = _decomposition_sentence(view)
    if decomposition:
        sentences.append(decomposition)
    shift = _bad_control_sentence(view)
    if shift:
        sentences.append(shift)
    sensitivity = _mapping(document.get("sensitivity"))
    adjusted = _mapping(_mapping(document.get("estimates")).get("adjusted")).get("estimate")
    of = sensitivity.get("of")
    if is_number(sensitivity.get("estimate")):
        adjusted = sensitivity["estimate"]
    if of in ("declared", "naive") and is_number(sensitivity.get("robustness_value")):
        which = "the declared controls'" if of == "declared" else "the naive"
        sentences.append(f"With no valid adjusted estimate, the robustness values below are "
                         f"those of {which} estimate, {view.effect(adjusted)}.")
    sentences += _robustness_sentences(view, sensitivity, estimate=adjusted)
    implications = _implications_sentence(view)
    if implications:
        sentences.append(implications)
    wording = wording_sentence(document)
    if wording:
        sentences.append(wording)
    step = _next_step(view, identifiable=identifiable)
    sentences.append(step)
    return Verdict("audit", tuple(sentences), step)


def _braced(names: Sequence[str]) -> str:
    return "{" + ", ".join(names) + "}"


def _set_words(names: Sequence[str]) -> str:
    return _braced(names) if names else "the empty set (no adjustment)"


def controls_verdict(document: Mapping[str, Any]) -> Verdict:
    """The verdict of ``causalcheck controls`` (schema ``causalcheck/controls/1``).

    Whether the declared controls are valid (each problem in the graph module's own words),
    whether the effect is identifiable by adjustment, which set to use (optimal, cheapest, how
    many minimal ones) and, when nothing measured will do, what to measure next. Adjustment
    sets are written as braced column names, ready to type into a model.
    """
    view = ResultView(document)
    sentences = [s for s in (_claim(view),) if s]
    t = view.label(view.treatment) if view.treatment else "the treatment"
    y = view.label(view.outcome) if view.outcome else "the outcome"
    controls = document.get("controls")
    sets = _mapping(document.get("adjustment_sets"))
    optimal = sets.get("optimal")
    optimal = list(optimal) if isinstance(optimal, (list, tuple)) else None
    if not isinstance(controls, Mapping):
        sentences.append("The study declares no controls to check (add [controls] used = [...] "
                         "to check the set a report adjusted for).")
    elif controls.get("valid"):
        used = _names(controls.get("used"))
        if used:
            text = (f"The declared controls ({_listing(view.labels(used))}) are a valid "
                    f"adjustment set: they block every non-causal path between {t} and {y} and "
                    "include no consequence of the treatment's effect.")
        else:
            text = (f"The unadjusted comparison (no controls) is valid: no non-causal path "
                    f"between {t} and {y} is open.")
        if optimal is not None and set(used) == set(optimal):
            text += " They are the optimal set."
        sentences.append(text)
    else:
        used = _names(controls.get("used"))
        head = (f"The declared controls ({_listing(view.labels(used))}) are not a valid "
                "adjustment set." if used else
                "The unadjusted comparison (no controls) is not valid.")
        details = []
        for problem in controls.get("problems") or []:
            if isinstance(problem, Mapping):
                detail = str(problem.get("detail") or _problem_phrase(view, problem)).strip()
                details.append(_sentence(detail, view))
        # one finding a problem: the HTML and Markdown reports list them one a bullet
        sentences += [head, *details]
    if document.get("has_causal_path") is False:
        sentences.append(f"The graph has no directed path from {t} to {y}, so it says {t} has "
                         f"no effect on {y}; an analysis can only test that null effect.")
    identifiable = document.get("identifiable")
    minimal = [list(m) for m in sets.get("minimal") or [] if isinstance(m, (list, tuple))]
    step: str | None = None
    if identifiable and minimal == [[]]:
        text = (f"The effect of {t} on {y} is identifiable without adjustment: no non-causal "
                "path is open when nothing is adjusted for.")
        if optimal:
            text += (f" For precision, use the optimal set {_set_words(optimal)}: of all valid "
                     "sets it gives the most precise estimate in linear models (Henckel, "
                     "Perković & Maathuis 2022).")
        sentences.append(text)
    elif identifiable:
        parts = [(f"The effect of {t} on {y} is identifiable by adjusting for measured "
                  "variables.")]
        if optimal is not None:
            parts.append(f"Use the optimal set {_set_words(optimal)}: of all valid sets it "
                         "gives the most precise estimate in linear models (Henckel, Perković "
                         "& Maathuis 2022).")
        elif sets.get("optimal_unmeasured"):
            parts.append(f"The optimal set would need "
                         f"{_listing(view.labels(sets['optimal_unmeasured']))}, which is not "
                         "measured.")
        cheapest = _mapping(sets.get("cheapest"))
        cheapest_set = cheapest.get("set")
        if isinstance(cheapest_set, (list, tuple)) and list(cheapest_set) != optimal:
            parts.append(f"The cheapest valid set is {_set_words(list(cheapest_set))} (cost "
                         f"{significant(cheapest.get('cost'))}).")
        more = "" if sets.get("minimal_complete", True) else " (listing capped)"
        many = len(minimal) != 1
        parts.append(f"{count(len(minimal))} minimal valid set{'s' if many else ''} "
                     f"{'are' if many else 'is'} listed in the report{more}.")
        sentences.append(" ".join(parts))
    elif document.get("identifiable_if_all_measured", True):
        sentences.append(f"The effect of {t} on {y} is not identifiable by adjusting for the "
                         "measured variables: every valid adjustment set needs a variable that "
                         "is not measured.")
        step = (_next_step(view, identifiable=False) + " Until then, an estimate needs a "
                "sensitivity analysis for unmeasured confounding.")
    else:
        sentences.append(f"The effect of {t} on {y} cannot be identified by adjustment at all, "
                         "even if every variable were measured (see the notes).")
    if step:
        sentences.append(step)
    return Verdict("controls", tuple(sentences), step)


_RATIOS = ("risk_ratio", "odds_ratio", "hazard_ratio")


def _vet_estimate_sentence(view: ResultView) -> str | None:
    document = view.document
    estimate = document.get("estimate")
    if not is_number(estimate):
        return None
    measure = str(document.get("measure") or "difference")
    is_ratio = measure in _RATIOS
    what = measure.replace("_", " ") if is_ratio else "estimate"
    value = significant(estimate) if is_ratio else f"{view.effect(estimate)}{view.per_treatment()}"
    details = []
    low, high = document.get("ci_low"), document.get("ci_high")
    if is_number(low) and is_number(high):
        level = document.get("ci_level")
        level_text = percent(level) if is_number(level) else view.confidence
        computed = "" if document.get("ci_given", True) else (
            ", computed from the standard error of the log ratio" if is_ratio
            else ", computed from its standard error")
        details.append(f"{level_text} CI {interval(low, high, like=estimate)}{computed}")
    elif is_number(document.get("std_error")):
        # for a ratio the standard error is that of the log ratio, never of the ratio itself
        scale = "log-scale " if is_ratio or document.get("scale") == "log" else ""
        se = document["std_error"]        # two significant figures, trailing zero kept: 0.60
        details.append(f"{scale}standard error {fixed(se, shared_decimals([se]) or 0)}")
    t_value = document.get("t")
    if is_number(t_value):
        scale = " of the log ratio" if is_ratio else ""
        t_text = f"t{scale} = {significant(t_value)}"
        if is_number(document.get("dof")):
            t_text += f" on {count(document['dof'])} residual degrees of freedom"
        details.append(t_text)
    detail = f" ({'; '.join(details)})" if details else ""
    return f"The reported {what} is {value}{detail}."


_REMAINING = ("of the remaining variance of both the treatment and the outcome (the part the "
              "covariates in the model leave unexplained)")


def _vet_robustness_sentences(view: ResultView) -> list[str]:
    document = view.document
    rv, rv_ci = document.get("robustness_value"), document.get("robustness_value_ci")
    if not is_number(rv):
        return []
    theta = significant(view.threshold)
    level = view.confidence
    sentences = []
    if rv <= 0:
        sentences.append(f"The estimate already equals {theta}, so no hidden confounding is "
                         "needed to bring it there.")
        return sentences
    if is_number(rv_ci) and rv_ci <= 0:
        sentences.append(
            f"The {level} confidence interval already includes {theta}, so no hidden "
            f"confounding is needed for that; a hidden confounder explaining {percent(rv)} "
            f"{_REMAINING} would bring the estimate itself to {theta}.")
    else:
        text = f"A hidden confounder explaining {percent(rv)} {_REMAINING} would bring " \
               f"the estimate to the threshold, {theta}"
        if is_number(rv_ci):
            outcome_share = document.get("robustness_value_ci_outcome_r2")
            if is_number(outcome_share) and abs(outcome_share - rv_ci) > 1e-9 * max(rv_ci, 1):
                text += (f"; one explaining {percent(rv_ci)} of the treatment's and "
                         f"{percent(outcome_share)} of the outcome's remaining variance "
                         f"would make the {level} confidence interval include {theta}")
            else:
                text += (f"; one explaining {percent(rv_ci)} of both would make the {level} "
                         f"confidence interval include {theta}")
        sentences.append(text + ".")
    extreme = extreme_share(document, threshold=view.threshold)
    if is_number(extreme):
        sentences.append(
            "Even a confounder that explained all the remaining variance of the outcome would "
            f"have to explain at least {percent(extreme)} of the treatment's remaining "
            f"variance to bring the estimate to {theta}.")
    return sentences


def extreme_share(block: Mapping[str, Any], *, threshold: float) -> float | None:
    """The treatment's share of remaining variance that even a confounder explaining all the
    outcome's remaining variance needs to bring the estimate to ``threshold``.

    Read from ``extreme_r2dz`` (audit's ``sensitivity`` block) or
    ``extreme_case.r2dz_to_threshold`` (vet): f_θ²/(1 + f_θ²), with f_θ the partial Cohen's f of
    the estimate measured from the threshold (Cinelli & Hazlett 2020, Sec. 4). It equals the
    treatment's partial R² with the outcome only when the threshold is 0, so ``partial_r2``
    stands in for it only then.

    >>> extreme_share({"partial_r2": 0.0125}, threshold=0.0)
    0.0125
    >>> extreme_share({"partial_r2": 0.0125}, threshold=0.5) is None
    True
    >>> extreme_share({"partial_r2": 0.0125, "extreme_case": {"r2dz_to_threshold": 0.0069}},
    ...               threshold=0.5)
    0.0069
    """
    value = block.get("extreme_r2dz")
    if not is_number(value):
        value = _mapping(block.get("extreme_case")).get("r2dz_to_threshold")
    if not is_number(value) and threshold == 0:
        value = block.get("partial_r2")
    return float(value) if is_number(value) else None


def _e_value_sentence(view: ResultView) -> str | None:
    e_value = _mapping(view.get("e_value"))
    point = e_value.get("point")
    if not is_number(point):
        return None
    null = e_value.get("null")
    null_text = "1" if not is_number(null) or abs(null - 1) < 1e-12 else significant(null)
    if point <= 1 + 1e-12:
        return "On the risk-ratio scale the estimate is at the null already (E-value 1)."
    text = ("On the risk-ratio scale, a hidden confounder associated with both the treatment "
            f"and the outcome by a risk ratio of {point:.2f} each, beyond the measured "
            f"covariates, could explain the estimate away (E-value {point:.2f})")
    ci = e_value.get("ci")
    if is_number(ci) and ci > 1 + 1e-12:
        text += (f", and one of {ci:.2f} each could move the confidence interval to include "
                 f"{null_text}; weaker confounding could do neither.")
    elif is_number(ci):
        text += (f"; weaker confounding could not. The confidence interval already includes a "
                 f"risk ratio of {null_text}.")
    else:
        text += "; weaker confounding could not."
    return text


def vet_verdict(document: Mapping[str, Any]) -> Verdict:
    """The verdict of ``causalcheck vet`` (schema ``causalcheck/vet/1``).

    Reads ``estimate``, ``ci_low``/``ci_high``/``ci_level``/``ci_given``, ``measure``, ``t``,
    ``dof``, the robustness values (and ``robustness_value_ci_outcome_r2`` when the interval's
    confounder is not equally strong with both), ``extreme_case`` and ``e_value``; with a graph,
    ``controls`` and ``variables`` too.
    """
    view = ResultView(document)
    sentences = [s for s in (_claim(view), _vet_estimate_sentence(view)) if s]
    # numbers typed on the command line instead of the study file's: say so where it matters
    sentences += [f"({str(note).rstrip('.')}.)" for note in document.get("overrides") or []]
    controls = _controls_sentence(view)
    if controls:
        sentences.append(controls)
    sentences += _vet_robustness_sentences(view)
    e_value = _e_value_sentence(view)
    if e_value:
        sentences.append(e_value)
    wording = wording_sentence(document)
    if wording:
        sentences.append(wording)
    has_graph = any(view.roles(n) for n in view.variable_names)
    if has_graph or isinstance(document.get("controls"), Mapping):
        step = _next_step(view, identifiable=document.get("identifiable"))
    else:
        step = ("Whether confounders this strong are plausible is a judgement about the study: "
                "compare them with the strongest measured covariates"
                + (" (causalcheck audit benchmarks them when the data are at hand)."
                   if is_number(document.get("robustness_value")) else "."))
    sentences.append(step)
    return Verdict("vet", tuple(sentences), step)


def _plan_decimals(options: Sequence[Mapping[str, Any]]) -> int:
    """Decimals that show the smallest standard error to two significant figures (3 to 6)."""
    errors = [o["std_error"] for o in options if is_number(o.get("std_error"))
              and o["std_error"] > 0]
    smallest = min(errors, default=0.01)
    return max(3, min(6, 1 - math.floor(math.log10(smallest))))


def _share_of_studies(power: Any) -> str:
    """A probability for a sentence: "about 62% of studies", "nearly all studies"."""
    if not is_number(power):
        return "an unknown share of studies"
    if power > 0.995:
        return "nearly all studies"
    if power < 0.005:
        return "almost no studies"
    return f"about {percent(power, 2)} of studies"      # "about": whole percents


def _plan_key(option: Mapping[str, Any]) -> tuple[tuple[str, ...], tuple[str, ...]]:
    return tuple(_names(option.get("measure"))), tuple(_names(option.get("adjust_for")))


def plan_verdict(document: Mapping[str, Any]) -> Verdict:
    """The verdict of ``causalcheck plan`` (schema ``causalcheck/plan/1``).

    What to measure, what it costs, the bias left otherwise, and how sure the planned study
    would be; over the strength ranges when they were swept, and from the simulation when one
    was run.
    """
    view = ResultView(document)
    sentences = [s for s in (_claim(view),) if s]
    options = [o for o in document.get("options") or [] if isinstance(o, Mapping)]
    rec = _mapping(document.get("recommended"))
    base = _mapping(document.get("baseline")) or next(
        (o for o in options if not _names(o.get("measure"))), {})
    if not rec:
        step = "No measurement plan fits the budget; raise the budget or the sample size."
        return Verdict("plan", tuple(sentences + [step]), step)
    d = _plan_decimals(options or [rec])

    def num(value: Any, *, sign: bool = False) -> str:
        return fixed(value, d, sign=sign)

    def names(option: Mapping[str, Any], key: str) -> list[str]:
        return _names(option.get(key))

    def set_text(option: Mapping[str, Any]) -> str:
        adjust = names(option, "adjust_for")
        return _listing(view.labels(adjust)) if adjust else "no covariates"

    treatment = view.label(view.treatment) if view.treatment else "the treatment"
    outcome = view.label(view.outcome) if view.outcome else "the outcome"
    alpha = document.get("alpha")
    level = percent(1 - alpha) if is_number(alpha) else view.confidence
    budget_value = document.get("budget")
    budget = ""
    if is_number(budget_value) and rec.get("within_budget", True):
        budget = f", within the budget of {significant(budget_value)}"
    n = document.get("n")
    at_n = f"at n = {count(n)} " if is_number(n) else ""
    true_effect = document.get("true_effect")
    null_effect = is_number(true_effect) and abs(true_effect) < 1e-12
    alpha_value = alpha if is_number(alpha) else view.alpha

    def how_sure_of(option: Mapping[str, Any]) -> str:
        """"at n = 2,000 its standard error is ... and a 95% interval excludes zero in ..."."""
        text = (f"{at_n}its standard error is {num(option.get('std_error'))} (RMSE "
                f"{num(option.get('rmse'))})")
        power = _share_of_studies(option.get("power"))
        if option.get("valid"):
            if null_effect:
                return text + (f" and, the true effect being zero under these strengths, a "
                               f"{level} interval wrongly excludes zero in {power}")
            return text + f" and a {level} interval excludes zero in {power}"
        coverage = option.get("coverage")
        if is_number(coverage):
            if coverage >= 1 - alpha_value - 0.01:
                text += (f"; the bias is small against that error, so a {level} interval "
                         f"still covers the true effect in {_share_of_studies(coverage)}")
            else:
                text += (f"; because of the bias a {level} interval covers the true effect in "
                         f"only {_share_of_studies(coverage)}")
            if null_effect:
                return text + (f", and excludes zero, although the true effect is zero, in "
                               f"{power}")
            return text + f" and excludes zero in {power}"
        return text + f" and a {level} interval excludes zero in {power}"

    how_sure = how_sure_of(rec)
    measure_text = _listing(view.labels(names(rec, "measure")))
    best_valid = _mapping(document.get("best_valid"))
    if rec.get("valid") and _plan_key(rec) == _plan_key(base):
        sentences.append(
            f"Measure nothing more: adjusting for {set_text(rec)}, already measured, estimates "
            f"the effect of {treatment} on {outcome} without bias; {how_sure}.")
    elif rec.get("valid"):
        sentences.append(
            f"Measure {measure_text} (cost {significant(rec.get('cost'))}{budget}) and adjust "
            f"for {set_text(rec)}: this estimates the effect of {treatment} on {outcome} "
            f"without bias; {how_sure}.")
    else:
        what = (f"measure {measure_text} (cost {significant(rec.get('cost'))}{budget}) and "
                if names(rec, "measure") else "measure nothing more and ")
        if not best_valid:
            why = "no valid adjustment set exists even if everything is measured"
        elif best_valid.get("within_budget") is False:
            why = "no unbiased plan fits the budget"
        else:
            why = "a biased plan has the lowest RMSE at this n"
        sentences.append(
            f"The best plan is to {what}adjust for {set_text(rec)}, but it stays biased by "
            f"{num(rec.get('bias'), sign=True)} because {why}; {how_sure}.")
        if best_valid:
            valid_measure = _listing(view.labels(names(best_valid, "measure"))) \
                or "nothing more"
            sentences.append(
                f"The best unbiased plan measures {valid_measure} (cost "
                f"{significant(best_valid.get('cost'))}) and adjusts for "
                f"{set_text(best_valid)} (RMSE {num(best_valid.get('rmse'))}).")
    if base and _plan_key(rec) != _plan_key(base):
        if base.get("valid"):
            sentences.append(
                f"Measuring nothing more is also unbiased (adjust for {set_text(base)}) but "
                f"less precise: standard error {num(base.get('std_error'))}.")
        else:
            bias, se = base.get("bias"), base.get("std_error")
            ratio = abs(bias) / se if is_number(bias) and is_number(se) and se > 0 else None
            ratio_text = f"{significant(ratio, 2)} standard errors; " if ratio is not None else ""
            sentences.append(
                f"If you measure nothing more, the best you can do is adjust for "
                f"{set_text(base)}, which leaves a bias of {num(bias, sign=True)} "
                f"({ratio_text}RMSE {num(base.get('rmse'))}) that more rows "
                "will not remove.")
    if document.get("biased_beats_unbiased"):
        sentences.append(
            "A biased plan beats every unbiased one in RMSE at this n; that rests on the "
            "assumed strengths, and its bias does not shrink with more rows.")
    sweep = _mapping(document.get("range_sweep"))
    worst = _mapping(rec.get("over_range"))
    if sweep and worst:
        text = (f"Over the strength ranges ({count(sweep.get('used'))} of "
                f"{count(sweep.get('requested'))} draws possible), the recommended plan's "
                f"RMSE is at most {num(worst.get('rmse_worst'))}")
        if not rec.get("valid"):
            text += f" and its |bias| at most {num(worst.get('bias_abs_worst'))}"
        base_worst = _mapping(base.get("over_range")) if base else {}
        if base and _plan_key(rec) != _plan_key(base) and base_worst and not base.get("valid"):
            text += (f"; measuring nothing more leaves a |bias| of up to "
                     f"{num(base_worst.get('bias_abs_worst'))}")
        sentences.append(text + ".")
        robust = _mapping(document.get("recommended_worst_case"))
        robust_worst = _mapping(robust.get("over_range"))
        if robust and _plan_key(robust) != _plan_key(rec) and robust_worst:
            within = "within the budget " if is_number(budget_value) else ""
            sentences.append(
                f"Judged by the worst case over the ranges instead, the best plan {within}is "
                f"to measure {_listing(view.labels(names(robust, 'measure'))) or 'nothing more'}"
                f" (cost {significant(robust.get('cost'))}) and adjust for {set_text(robust)}: "
                f"worst RMSE {num(robust_worst.get('rmse_worst'))} against "
                f"{num(worst.get('rmse_worst'))}.")
    elif sweep:
        sentences.append(f"Every one of the {count(sweep.get('requested'))} draws over the "
                         "strength ranges was impossible (some variable's parents would explain "
                         "all of its variance); narrow the ranges.")
    strengths = _mapping(document.get("strengths"))
    defaulted = strengths.get("defaulted") or []
    if defaulted:
        many = len(defaulted) != 1
        sentences.append(
            f"{count(len(defaulted))} edge{'s' if many else ''} had no strength and "
            f"{'were' if many else 'was'} given the default "
            f"{significant(strengths.get('default_strength'))}.")
    simulation = _mapping(document.get("simulation"))
    if simulation:
        match = next((o for o in simulation.get("options") or [] if isinstance(o, Mapping)
                      and _plan_key(o) == _plan_key(rec)), None)
        if match is not None:
            sentences.append(
                f"In {count(simulation.get('replications'))} simulated studies its {level} "
                f"intervals covered the true effect {percent(match.get('coverage'))} of the "
                f"time and excluded zero in {percent(match.get('power'))}.")
    # the first finding already says what to measure next
    return Verdict("plan", tuple(sentences), None)


_SUPPORTED, _STRONGER, _WEAKER = ("supported", "stronger than the evidence",
                                  "weaker than it could be")


def evidence_phrase(evidence: Mapping[str, Any]) -> str:
    """The evidence a wording review judged against, as a phrase.

    >>> evidence_phrase({"design": "observational", "robustness_value": 0.10629})
    'an observational design with robustness value 0.106'
    """
    if evidence.get("design") == "randomized":
        return "a randomised design"
    if not is_number(evidence.get("robustness_value")):
        return "an observational design without a robustness value"
    return (f"an observational design with robustness value "
            f"{significant(evidence['robustness_value'])}")


def wording_sentence(document: Mapping[str, Any]) -> str | None:
    """The vet or audit verdict's one sentence on the report's own wording.

    Reads the ``wording`` block (:func:`causalcheck.wording.wording_block`): how many of the
    report text's sentences that link the treatment and the outcome claim more than the
    design and the robustness value support. None when the study names no report text.

    >>> wording_sentence({"wording": {"reviewed": True, "supported_level": 2,
    ...     "supported_grade": "hedged", "evidence": {"design": "observational",
    ...     "robustness_value": 0.04}, "claims": [{"verdict": "stronger than the evidence"},
    ...     {"verdict": "supported"}]}})   # doctest: +NORMALIZE_WHITESPACE
    'In the report text, 1 of the 2 sentences that link the treatment and the outcome claims
    more than an observational design with robustness value 0.04 supports (up to level 2,
    hedged); the wording section suggests a rewording.'
    """
    block = _mapping(document.get("wording"))
    if not block:
        return None
    if not block.get("reviewed"):
        return ("The report text named by [study].report_text could not be reviewed; the "
                "wording section says why.")
    claims = [c for c in block.get("claims") or [] if isinstance(c, Mapping)]
    if not claims:
        return ("No sentence of the report text links the treatment and the outcome, so its "
                "wording claims nothing about the effect.")
    supported = supported_phrase(block)
    if supported is None:
        return None
    phrase = evidence_phrase(_mapping(block.get("evidence")))
    stronger = sum(1 for c in claims if c.get("verdict") == _STRONGER)
    n = len(claims)
    if not stronger:
        if n == 1:
            return (f"In the report text, 1 sentence links the treatment and the outcome, and "
                    f"it claims no more than {phrase} supports ({supported}).")
        return (f"In the report text, {count(n)} sentences link the treatment and the outcome, "
                f"and none claims more than {phrase} supports ({supported}).")
    if n == 1:
        subject = "the one sentence that links the treatment and the outcome claims"
    else:
        subject = (f"{count(stronger)} of the {count(n)} sentences that link the treatment and "
                   f"the outcome {'claims' if stronger == 1 else 'claim'}")
    rewordings = "a rewording" if stronger == 1 else "rewordings"
    return (f"In the report text, {subject} more than {phrase} supports ({supported}); the "
            f"wording section suggests {rewordings}.")


def supported_phrase(block: Mapping[str, Any]) -> str | None:
    """"up to level 3, possible-cause" from a wording block; None without a supported level.

    >>> supported_phrase({"supported_level": 2, "supported_grade": "hedged"})
    'up to level 2, hedged'
    """
    level = block.get("supported_level")
    if not is_number(level):
        return None
    grade = block.get("supported_grade")
    return f"up to level {level}" + (f", {grade}" if grade else "")


def wording_verdict(document: Mapping[str, Any]) -> Verdict:
    """The verdict of ``causalcheck wording`` (schema ``causalcheck/wording/1``).

    How many sentences claim a link between the treatment and the outcome, how many use causal
    wording (level 3 or above), and how many claim more than the evidence supports (the design
    and, for observational data, the robustness value).
    """
    view = ResultView(document)
    claims = [c for c in document.get("claims") or [] if isinstance(c, Mapping)]
    source = _mapping(document.get("source"))
    sentences_total = source.get("sentences")
    if not is_number(sentences_total):
        sentences_total = len(claims)
    terms = _mapping(document.get("terms"))
    if view.treatment and view.outcome and terms:
        # labels, as the other verdicts name the two variables
        about = (f"linking the treatment ({view.label(view.treatment)}) and the outcome "
                 f"({view.label(view.outcome)})")
    elif terms.get("exposure") and terms.get("outcome"):
        about = f"linking {terms['exposure'][0]!r} and {terms['outcome'][0]!r}"
    else:
        about = "linking an exposure and an outcome"
    n = len(claims)
    causal = sum(1 for c in claims if is_number(c.get("level")) and c["level"] >= 3)
    head = (f"{count(n)} of {count(sentences_total)} sentence"
            f"{'s' if sentences_total != 1 else ''} {'make' if n != 1 else 'makes'} a claim "
            f"{about}; {count(causal)} {'use' if causal != 1 else 'uses'} causal wording "
            "(level 3 or above).")
    evidence = _mapping(document.get("evidence"))
    supported = evidence.get("supported_level", document.get("supported_level"))
    if supported is None:
        missing = " and ".join(str(m) for m in evidence.get("missing") or []) or "more evidence"
        return Verdict("wording", (head, f"No verdicts or rewordings: they need {missing}."))
    by_verdict = _mapping(_mapping(document.get("counts")).get("by_verdict"))
    counts = {key: int(by_verdict.get(key, sum(1 for c in claims if c.get("verdict") == key)))
              for key in (_SUPPORTED, _STRONGER, _WEAKER)}
    phrase = evidence_phrase(evidence)
    stronger, weaker = counts[_STRONGER], counts[_WEAKER]
    parts = [f"{stronger or 'none'} {'claim' if stronger > 1 else 'claims'} more than "
             f"{phrase} supports (up to level {supported}, "
             f"{evidence.get('supported_grade') or ''})".replace(", )", ")")]
    if weaker:
        parts.append(f"{weaker} {'is' if weaker == 1 else 'are'} weaker than "
                     f"{'it' if weaker == 1 else 'they'} could be")
    parts.append(f"{counts[_SUPPORTED]} {'is' if counts[_SUPPORTED] == 1 else 'are'} "
                 "supported")
    body = ", ".join(parts[:-1]) + " and " + parts[-1]
    return Verdict("wording", (head, f"{body[:1].upper()}{body[1:]}."))


VERDICT_BUILDERS: dict[str, Callable[[Mapping[str, Any]], Verdict]] = {
    "audit": audit_verdict,
    "controls": controls_verdict,
    "vet": vet_verdict,
    "plan": plan_verdict,
    "wording": wording_verdict,
}


def build_verdict(document: Mapping[str, Any]) -> Verdict:
    """The verdict for any result document, chosen by its ``schema``.

    Raises
    ------
    KeyError
        When the schema names no known command (a programming error, not a user one).
    """
    view = ResultView(document)
    builder = VERDICT_BUILDERS.get(view.kind)
    if builder is None:
        raise KeyError(f"no verdict builder for schema {document.get('schema')!r}")
    return builder(document)
