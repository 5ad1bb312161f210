"""The cautions every report carries: what the analysis can and cannot show.

Three hold for every command: sensitivity analysis quantifies what would overturn a claim but
proves nothing; the causal graph is an assumption; decisions that affect people need experts,
ethics review and local rules. Others depend on what the command did (a published table, a
planning model, a wording review, standard errors that assume independent rows).

Each caution has a short form for the terminal and a full form for the Markdown and HTML
reports; the JSON document carries the full forms in an extra ``cautions`` list.

Examples
--------
>>> [c.key for c in cautions_for({"schema": "causalcheck/vet/1"})][:3]
['sensitivity', 'graph', 'people']
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

from .context import kind_of

__all__ = ["GENERAL", "Caution", "caution_texts", "cautions_for"]


@dataclass(frozen=True)
class Caution:
    """One caution: a key, a short sentence for the terminal and the full paragraph."""

    key: str
    short: str
    full: str

    def to_dict(self) -> dict[str, str]:
        return {"key": self.key, "short": self.short, "text": self.full}


GENERAL: tuple[Caution, ...] = (
    Caution(
        "sensitivity",
        "Sensitivity analysis shows what would overturn the claim; it does not prove causation.",
        "Sensitivity analysis quantifies what assumptions would overturn the claim: how strongly "
        "a confounder nobody measured would have to be tied to the treatment and to the outcome "
        "to move the estimate to the threshold. It does not prove causation. A large robustness "
        "value says such a confounder would have to be strong, not that none exists; whether a "
        "confounder that strong is plausible is a judgement about the subject, not about the "
        "data.",
    ),
    Caution(
        "graph",
        "The causal graph is an assumption; every answer here is conditional on it.",
        "The causal graph is an assumption you make, not something the data showed. Which "
        "controls are valid, the adjusted estimates and the bounds are all conditional on it: "
        "a missing arrow or a missing variable can change every answer. Tests of the graph's "
        "implied independences can reject a graph; they can never confirm one.",
    ),
    Caution(
        "people",
        "Decisions that affect people need domain experts, ethics review and local rules.",
        "Decisions that affect people (who gets a benefit, a treatment, a programme or a "
        "sanction) need domain experts, an ethics review where one applies, and the rules and "
        "laws of the place where they are made. This report is one input to such a decision; "
        "it is not the decision, and it says nothing about fairness or about who bears the "
        "cost of being wrong.",
    ),
)

_LINEAR = Caution(
    "linear",
    "Estimates are linear-regression slopes with errors that assume independent rows.",
    "The estimates are slopes of linear regressions. If the effect differs between people or "
    "is not linear, a slope is a weighted average of effects, not the effect for everyone. "
    "Standard errors (classical and HC1 robust) assume the rows are independent; data grouped "
    "in clusters (pupils in schools, households in streets) need clustered standard errors, "
    "which this report does not compute, and are then less precise than shown.",
)
_PUBLISHED = Caution(
    "published",
    "The published numbers are taken as printed; check them against the source.",
    "The numbers come from a published table and are taken as printed: a rounding or a typo "
    "in the estimate, its standard error or the sample size changes every result here. The "
    "bounds say nothing about problems the table does not show (selective reporting, "
    "measurement error, a model chosen after looking at the data).",
)
_PLANNING = Caution(
    "planning",
    "Planning numbers follow from the path strengths you assumed, not from data.",
    "Planning numbers (bias, standard error, error of each measurement plan) follow from the "
    "path strengths you assumed in a linear model with standardised variables; they are not "
    "estimates from data. Ranges are swept, values outside them are not. Re-run the plan when "
    "a pilot gives better strengths.",
)
_WORDING = Caution(
    "wording",
    "The wording review matches phrases; read every flagged sentence yourself.",
    "The wording review recognises causal phrases in sentences; it can miss a claim made in "
    "unusual words and can flag a sentence whose context makes it acceptable. Read each "
    "flagged sentence, and the ones around it, before asking an author to change it.",
)
_RANDOMIZED = Caution(
    "randomized",
    "Randomisation protects the comparison only if assignment and follow-up held.",
    "The study is declared randomised. Randomisation rules out confounding of the assignment "
    "only if it was carried out as planned, people stayed in their arms and follow-up did not "
    "depend on the outcome; otherwise the cautions for observational data apply.",
)
_E_VALUE = Caution(
    "e_value",
    "E-values for odds or hazard ratios rely on approximate conversions to risk ratios.",
    "E-values are defined on the risk-ratio scale. Odds ratios and hazard ratios are converted "
    "with the approximations of VanderWeele (2017), which are good for rare outcomes (or, for "
    "common outcomes, with the square-root conversion) and rough otherwise.",
)


def cautions_for(document: Mapping[str, Any]) -> tuple[Caution, ...]:
    """The cautions that apply to a result document, general ones first."""
    kind = kind_of(document)
    extra: list[Caution] = []
    if kind in ("audit", "vet"):
        extra.append(_LINEAR)
    if kind == "vet":
        extra.append(_PUBLISHED)
        e_value = document.get("e_value")
        measure = document.get("measure")
        if isinstance(e_value, Mapping) and measure in ("odds_ratio", "hazard_ratio"):
            extra.append(_E_VALUE)
    if kind == "plan":
        extra.append(_PLANNING)
    wording = document.get("wording")
    if kind == "wording" or (kind in ("audit", "vet") and isinstance(wording, Mapping)
                             and wording.get("reviewed")):
        extra.append(_WORDING)
    study = document.get("study")
    if isinstance(study, Mapping) and study.get("design") == "randomized":
        extra.append(_RANDOMIZED)
    return GENERAL + tuple(extra)


def caution_texts(document: Mapping[str, Any], *, short: bool = False) -> list[str]:
    """The cautions as plain strings (the JSON ``cautions`` list uses the full forms)."""
    return [c.short if short else c.full for c in cautions_for(document)]
