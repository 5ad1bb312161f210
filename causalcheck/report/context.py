"""What a report needs beyond the result: the claim, labels, units, and a reader over both.

Every command's result document (its ``to_dict()``) follows the JSON contract of DESIGN.md. A
report also needs what the *study file* says about the question — the claim being tested, each
variable's label, unit, kind and cost, the significance level, the threshold — so the commands
attach it under an extra ``"study"`` key (:func:`attach_context`). :class:`ResultView` reads a
document with or without that key, so the report layer works from the dict alone.

Examples
--------
>>> view = ResultView({"schema": "causalcheck/vet/1", "estimate": 1.5,
...                    "study": {"variables": {"y": {"label": "Score", "unit": "points"}}}})
>>> view.kind, view.label("y"), view.unit("y"), view.label("x")
('vet', 'Score', 'points', 'x')
"""

from __future__ import annotations

import re
from collections.abc import Collection, Mapping
from typing import Any

from ..study import Study

__all__ = ["GRAPH_KEYS", "ResultView", "attach_context", "graph_context", "kind_of",
           "lower_first", "study_context", "upper_first"]


def study_context(study: Study) -> dict[str, Any]:
    """The facts about the question that a report states, as a JSON-ready dict.

    Returns
    -------
    dict
        ``title``, ``claim``, ``design``, ``alpha``, ``treatment``, ``outcome``, ``threshold``,
        ``variables`` (per node: ``label``, ``unit``, ``kind``, ``measured``, ``cost``),
        ``edges`` (``[cause, effect]`` pairs) and ``controls`` (the declared ones, or null).
    """
    names = list(study.nodes)
    for name in (study.treatment, study.outcome):
        if name and name not in names:
            names.append(name)
    for name in study.variables:
        if name not in names:
            names.append(name)
    variables = {}
    for name in names:
        variable = study.variable(name)
        variables[name] = {"label": variable.label, "unit": variable.unit,
                           "kind": variable.kind, "measured": variable.measured,
                           "cost": variable.cost}
    return {
        "title": study.title,
        "claim": study.claim,
        "design": study.design,
        "alpha": study.alpha,
        "treatment": study.treatment,
        "outcome": study.outcome,
        "threshold": study.sensitivity.threshold,
        "source": study.source if study.path is not None else None,
        "variables": variables,
        "edges": [list(edge) for edge in study.edges],
        "controls": list(study.controls) if study.controls is not None else None,
    }


#: The keys of the ``controls`` document (graph identification) a report reads.
GRAPH_KEYS = ("identifiable", "adjustment_sets", "controls", "variables", "biasing_paths",
              "measure_to_identify", "has_causal_path", "identifiable_if_all_measured")


def graph_context(study: Study) -> dict[str, Any]:
    """What the causal graph says about the study (roles, biasing paths, the controls check).

    The identification keys of the ``causalcheck/controls/1`` document, for commands whose
    own result does not carry them (``vet`` and ``plan`` with a ``[graph]``); empty when the
    study has no graph or no treatment and outcome.
    """
    if not (study.has_graph and study.treatment and study.outcome):
        return {}
    from ..graph import identify

    found = identify(study).to_dict()
    return {key: found[key] for key in GRAPH_KEYS if key in found}


def attach_context(document: Mapping[str, Any], study: Study | None, *,
                   graph: bool = True) -> dict[str, Any]:
    """A copy of ``document`` with the study's context under ``"study"``.

    Keys the document already has under ``"study"`` win: a command may say more than the file.
    With ``graph`` (the default), the graph's identification keys (:data:`GRAPH_KEYS`) that the
    document lacks are added, so that every report can show the roles, the biasing paths and
    the controls check; keys the command wrote itself are kept.
    """
    result = dict(document)
    if study is None:
        return result
    if graph and any(key not in result for key in GRAPH_KEYS):
        for key, value in graph_context(study).items():
            result.setdefault(key, value)
    context = study_context(study)
    existing = result.get("study")
    if isinstance(existing, Mapping):
        merged = dict(context)
        merged.update(existing)
        if isinstance(existing.get("variables"), Mapping):
            variables = {k: dict(v) for k, v in context["variables"].items()}
            for name, facts in existing["variables"].items():
                variables.setdefault(name, {}).update(facts)
            merged["variables"] = variables
        result["study"] = merged
    else:
        result["study"] = context
    return result


def kind_of(document: Mapping[str, Any]) -> str:
    """The command a document comes from, read from its schema (``causalcheck/audit/1``).

    >>> kind_of({"schema": "causalcheck/plan/1"}), kind_of({})
    ('plan', 'unknown')
    """
    schema = document.get("schema")
    if isinstance(schema, str) and schema.count("/") >= 2:
        return schema.split("/")[1]
    return "unknown"


class ResultView:
    """Read-only helpers over a result document: labels, units, roles, the claim.

    Missing facts fall back to the variable's name (label), ``None`` (unit) or the contract's
    defaults (``alpha`` 0.05, ``threshold`` 0).
    """

    def __init__(self, document: Mapping[str, Any]):
        self.document = document
        study = document.get("study")
        self.study: Mapping[str, Any] = study if isinstance(study, Mapping) else {}
        facts = self.study.get("variables")
        self._facts: Mapping[str, Any] = facts if isinstance(facts, Mapping) else {}
        roles = document.get("variables")
        self._roles: Mapping[str, Any] = roles if isinstance(roles, Mapping) else {}

    # -- the question --------------------------------------------------------------------
    @property
    def kind(self) -> str:
        return kind_of(self.document)

    def get(self, key: str, default: Any = None) -> Any:
        return self.document.get(key, default)

    @property
    def treatment(self) -> str | None:
        return self.document.get("treatment") or self.study.get("treatment")

    @property
    def outcome(self) -> str | None:
        return self.document.get("outcome") or self.study.get("outcome")

    @property
    def claim(self) -> str | None:
        claim = self.study.get("claim") or self.document.get("claim")
        return claim if isinstance(claim, str) and claim.strip() else None

    @property
    def title(self) -> str:
        title = self.study.get("title") or self.document.get("title")
        return title if isinstance(title, str) else ""

    @property
    def design(self) -> str:
        design = self.study.get("design") or self.document.get("design")
        return design if isinstance(design, str) else "observational"

    @property
    def alpha(self) -> float:
        for value in (self.document.get("alpha"), self.study.get("alpha")):
            if isinstance(value, (int, float)) and not isinstance(value, bool) \
                    and 0 < value < 1:
                return float(value)
        return 0.05

    @property
    def confidence(self) -> str:
        """The confidence level as a reader writes it: ``"95%"``."""
        level = 100.0 * (1.0 - self.alpha)
        return f"{level:.0f}%" if abs(level - round(level)) < 1e-9 else f"{level:g}%"

    @property
    def threshold(self) -> float:
        sensitivity = self.document.get("sensitivity")
        candidates = [self.document.get("threshold"), self.study.get("threshold")]
        if isinstance(sensitivity, Mapping):
            candidates.insert(0, sensitivity.get("threshold"))
        for value in candidates:
            if isinstance(value, (int, float)) and not isinstance(value, bool):
                return float(value)
        return 0.0

    # -- variables -----------------------------------------------------------------------
    def _fact(self, name: str, key: str) -> Any:
        facts = self._facts.get(name)
        if isinstance(facts, Mapping) and facts.get(key) is not None:
            return facts.get(key)
        # the graph's own variables block carries labels and costs too
        entry = self._roles.get(name)
        if isinstance(entry, Mapping):
            return entry.get(key)
        return None

    def label(self, name: str) -> str:
        label = self._fact(name, "label")
        return label if isinstance(label, str) and label else name

    def unit(self, name: str | None) -> str | None:
        if name is None:
            return None
        unit = self._fact(name, "unit")
        return unit if isinstance(unit, str) and unit else None

    def variable_kind(self, name: str | None) -> str:
        if name is None:
            return "numeric"
        kind = self._fact(name, "kind")
        return kind if isinstance(kind, str) else "numeric"

    def cost(self, name: str) -> float | None:
        cost = self._fact(name, "cost")
        return float(cost) if isinstance(cost, (int, float)) and not isinstance(cost, bool) \
            else None

    def measured(self, name: str) -> bool:
        entry = self._roles.get(name)
        if isinstance(entry, Mapping) and isinstance(entry.get("measured"), bool):
            return entry["measured"]
        measured = self._fact(name, "measured")
        return measured if isinstance(measured, bool) else True

    def roles(self, name: str) -> tuple[str, ...]:
        """The graph roles of ``name`` (``("confounder",)``), empty when unknown."""
        entry = self._roles.get(name)
        if not isinstance(entry, Mapping):
            return ()
        roles = entry.get("roles")
        if isinstance(roles, (list, tuple)):
            return tuple(str(r) for r in roles)
        role = entry.get("role")
        if isinstance(role, str) and role:
            return tuple(role.split("+"))
        return ()

    @property
    def edges(self) -> list[tuple[str, str]]:
        """The graph's edges, from the document or the study context."""
        for source in (self.document.get("edges"), self.study.get("edges")):
            if isinstance(source, (list, tuple)) and source:
                edges = []
                for edge in source:
                    if isinstance(edge, (list, tuple)) and len(edge) == 2:
                        edges.append((str(edge[0]), str(edge[1])))
                    elif isinstance(edge, str) and "->" in edge:
                        left, _, right = edge.partition("->")
                        edges.append((left.strip(), right.strip()))
                if edges:
                    return edges
        return []

    @property
    def variable_names(self) -> tuple[str, ...]:
        names = list(self._roles)
        for name in self._facts:
            if name not in names:
                names.append(name)
        return tuple(names)

    def labels(self, names: Any) -> list[str]:
        return [self.label(str(n)) for n in (names or [])]

    @property
    def identifiers(self) -> frozenset[str]:
        """Every variable name the document or its study context knows (for
        :func:`upper_first`, which must not change a name's case)."""
        names = set(self.variable_names)
        names.update(n for n in (self.treatment, self.outcome) if n)
        return frozenset(names)

    # -- the effect's units ----------------------------------------------------------------
    def effect(self, value: Any, digits: int = 3) -> str:
        """An estimate with the outcome's unit: ``"-1.21 m3/month"``."""
        from .numbers import quantity

        return quantity(value, self.unit(self.outcome), digits)

    def per_treatment(self) -> str:
        """How an effect reads against the treatment: ``" per 10 min/day"`` or a contrast.

        A binary treatment reads as the contrast ``" (took the rebate vs not)"``.
        """
        if self.treatment is None:
            return ""
        if self.variable_kind(self.treatment) == "binary":
            return f" ({lower_first(self.label(self.treatment))} vs not)"
        unit = self.unit(self.treatment)
        if unit:
            return f" per {unit}"
        return f" per unit of {lower_first(self.label(self.treatment))}"


def lower_first(text: str) -> str:
    """Lower-case the first letter of a label used mid-sentence, unless it is an acronym.

    >>> lower_first("Took the rebate"), lower_first("BMI at entry"), lower_first("x")
    ('took the rebate', 'BMI at entry', 'x')
    """
    if len(text) >= 2 and text[0].isupper() and text[1].islower():
        return text[0].lower() + text[1:]
    return text


_FIRST_WORD = re.compile(r"[^\s,;:()\[\]'\"]+")


def upper_first(text: str, *, identifiers: Collection[str] = ()) -> str:
    """Upper-case the first letter of a sentence, unless it starts with a name.

    A sentence that starts with one of ``identifiers`` (the study's variable names) or with a
    word that looks like code (an underscore, a digit, a capital after the first letter) keeps
    its first word as written: "raise_later is a mediator" must not become "Raise_later".

    >>> upper_first("a biasing path is open"), upper_first("raise_later is a mediator")
    ('A biasing path is open', 'raise_later is a mediator')
    >>> upper_first("income is a mediator", identifiers={"income"}), upper_first("iPhone use")
    ('income is a mediator', 'iPhone use')
    """
    if not text or not text[0].islower():
        return text
    match = _FIRST_WORD.match(text)
    word = match.group(0).rstrip(".") if match else ""
    if word in identifiers or _looks_like_code(word):
        return text
    return text[0].upper() + text[1:]


def _looks_like_code(word: str) -> bool:
    return "_" in word or any(c.isdigit() for c in word) or any(c.isupper() for c in word[1:])
