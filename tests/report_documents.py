"""Hand-made result documents for the report tests, following DESIGN.md's JSON contract.

The audit document is computed, not typed in: ordinary least squares with numpy on a seeded
invented data set, the exact omitted-variable decomposition (each term gamma * delta, summing
to naive - adjusted), and robustness values and benchmark bounds from the closed forms of
Cinelli & Hazlett (2020, Sec. 4 and 6.1), so that the report can be checked against its own
document. The other documents are small and typed in, internally consistent (rmse² = bias² +
se², t = estimate / se, partial R² = t² / (t² + dof)).
"""

from __future__ import annotations

import copy
import math

import numpy as np
from scipy import stats

__all__ = [
    "ALL_KINDS",
    "audit_document",
    "controls_document",
    "document_for",
    "plan_document",
    "vet_document",
    "wording_document",
]


def _ols(y: np.ndarray, columns: list[np.ndarray]) -> tuple[np.ndarray, np.ndarray, int]:
    design = np.column_stack([np.ones_like(y)] + columns)
    coef, *_ = np.linalg.lstsq(design, y, rcond=None)
    resid = y - design @ coef
    dof = len(y) - design.shape[1]
    sigma2 = resid @ resid / dof
    cov = sigma2 * np.linalg.inv(design.T @ design)
    return coef[1:], np.sqrt(np.diag(cov))[1:], dof


def _rv(f: float) -> float:
    # Cinelli & Hazlett (2020), eq. 18: RV = (sqrt(f^4 + 4 f^2) - f^2) / 2
    return 0.5 * (math.sqrt(f**4 + 4 * f**2) - f**2) if f > 0 else 0.0


def _study(variables: dict, **facts) -> dict:
    out = {"title": "", "claim": None, "design": "observational", "alpha": 0.05,
           "threshold": 0.0, "variables": variables}
    out.update(facts)
    return out


def _graph_block(roles: dict[str, str], unmeasured: tuple[str, ...] = ()) -> dict:
    return {name: {"role": role, "measured": name not in unmeasured}
            for name, role in roles.items()}


def audit_document(*, seed: int = 3) -> dict:
    """An audit of an invented rebate programme: binary treatment, one unmeasured confounder."""
    rng = np.random.default_rng(seed)
    n = 1500
    income = rng.normal(40, 10, n)
    garden = (rng.random(n) < 0.3 + 0.01 * (income - 40)).astype(float)
    conservation = rng.normal(size=n)
    rebate = (rng.random(n) < 1 / (1 + np.exp(-(-0.5 + 0.04 * (income - 40) + 0.8 * garden
                                                 + 0.5 * conservation)))).astype(float)
    fixtures = rng.poisson(0.3 + 2 * rebate).astype(float)
    water = (0.05 * (income - 40) + 1.5 * garden - 0.8 * conservation - 0.5 * fixtures
             - 0.4 * rebate + rng.normal(scale=2.0, size=n))

    naive_coef, naive_se, naive_dof = _ols(water, [rebate])
    adj_coef, adj_se, dof = _ols(water, [rebate, garden, income])
    decl_coef, decl_se, _ = _ols(water, [rebate, income, fixtures])
    inc_coef, inc_se, _ = _ols(water, [rebate, income])
    critical = stats.t.ppf(0.975, dof)
    estimate, se = float(adj_coef[0]), float(adj_se[0])

    # exact decomposition: gamma_k from the long regression, delta_k from z_k ~ T
    decomposition = []
    gap = float(naive_coef[0]) - estimate
    for name, column, gamma in (("garden", garden, adj_coef[1]), ("income", income,
                                                                   adj_coef[2])):
        delta = float(_ols(column, [rebate])[0][0])
        contribution = float(gamma) * delta
        decomposition.append({"variable": name, "gamma": float(gamma), "delta": delta,
                              "contribution": contribution, "share": contribution / gap})

    t_value = estimate / se
    f = abs(t_value) / math.sqrt(dof)
    critical_f = stats.t.ppf(0.975, dof - 1) / math.sqrt(dof - 1)
    rv = _rv(f)
    rv_ci = _rv(f - critical_f) if f > critical_f else 0.0

    benchmarks = []
    for name, index, others in (("garden", 1, [income]), ("income", 2, [garden])):
        column = [garden, income][index - 1]
        coef_d, se_d, dof_d = _ols(rebate, [column] + others)
        r2dxj = (coef_d[0] / se_d[0]) ** 2 / ((coef_d[0] / se_d[0]) ** 2 + dof_d)
        t_y = adj_coef[index] / adj_se[index]
        r2yxj = t_y**2 / (t_y**2 + dof)
        for k in (1.0, 2.0, 3.0):
            # Cinelli & Hazlett (2020), Sec. 6.1: bounds for a confounder k times as strong
            r2dz = k * r2dxj / (1 - r2dxj)
            r2zxj = k * r2dxj**2 / ((1 - k * r2dxj) * (1 - r2dxj))
            eta = (math.sqrt(k) + math.sqrt(r2zxj)) / math.sqrt(1 - r2zxj)
            r2yz = min(1.0, eta**2 * r2yxj / (1 - r2yxj))
            bias = se * math.sqrt(dof) * math.sqrt(r2yz * r2dz / (1 - r2dz))
            adjusted = estimate + bias if estimate < 0 else estimate - bias
            se_adj = se * math.sqrt((1 - r2yz) / (1 - r2dz)) * math.sqrt(dof / (dof - 1))
            benchmarks.append({
                "benchmark": name, "kd": k, "ky": k, "r2dxj": float(r2dxj),
                "r2yxj": float(r2yxj), "r2dz": float(r2dz), "r2yz": float(r2yz),
                "feasible": True, "capped": False, "adjusted_estimate": float(adjusted),
                "adjusted_std_error": float(se_adj),
                "ci_low": float(adjusted - critical * se_adj),
                "ci_high": float(adjusted + critical * se_adj)})

    def entry(coef, std, names, valid=True, reason=None):
        out = {"set": sorted(names), "estimate": float(coef[0]), "std_error": float(std[0]),
               "ci_low": float(coef[0] - critical * std[0]),
               "ci_high": float(coef[0] + critical * std[0]), "valid": valid}
        if reason:
            out["reason"] = reason
        return out

    roles = {"rebate": "treatment", "water_use_change": "outcome", "income": "confounder",
             "garden": "confounder", "conservation": "confounder",
             "efficient_fixtures": "mediator", "answered_survey": "collider"}
    document = {
        "schema": "causalcheck/audit/1", "treatment": "rebate", "outcome": "water_use_change",
        "identifiable": False, "measure_to_identify": [["conservation"]],
        "adjustment_sets": {"minimal": [], "optimal": None, "cheapest": None},
        "controls": {"used": ["efficient_fixtures", "income"], "valid": False, "problems": [
            {"variable": "efficient_fixtures", "kind": "mediator",
             "detail": "efficient_fixtures lies on rebate -> efficient_fixtures -> "
                       "water_use_change"},
            {"variable": "garden", "kind": "path_left_open",
             "detail": "rebate <- garden -> water_use_change stays open"}]},
        "variables": _graph_block(roles, unmeasured=("conservation",)),
        "biasing_paths": [
            {"path": ["rebate", "garden", "water_use_change"], "open_given_controls": True},
            {"path": ["rebate", "income", "water_use_change"], "open_given_controls": False},
            {"path": ["rebate", "conservation", "water_use_change"],
             "open_given_controls": True},
        ],
        "edges": [["income", "rebate"], ["income", "water_use_change"], ["income", "garden"],
                  ["garden", "rebate"], ["garden", "water_use_change"],
                  ["conservation", "rebate"], ["conservation", "water_use_change"],
                  ["rebate", "efficient_fixtures"], ["efficient_fixtures", "water_use_change"],
                  ["rebate", "water_use_change"], ["rebate", "answered_survey"],
                  ["water_use_change", "answered_survey"]],
        "rows": {"read": n + 12, "used": n, "dropped_missing": 12},
        "estimates": {
            "naive": {"estimate": float(naive_coef[0]), "std_error": float(naive_se[0]),
                      "robust_std_error": float(naive_se[0]) * 1.02,
                      "ci_low": float(naive_coef[0] - stats.t.ppf(0.975, naive_dof)
                                      * naive_se[0]),
                      "ci_high": float(naive_coef[0] + stats.t.ppf(0.975, naive_dof)
                                       * naive_se[0])},
            "adjusted": {"set": ["garden", "income"], "estimate": estimate, "std_error": se,
                         "robust_std_error": se * 1.03,
                         "ci_low": estimate - critical * se, "ci_high": estimate + critical * se,
                         "dof": dof, "reason": "every measured confounder"},
            "by_set": [entry(adj_coef, adj_se, ["garden", "income"], valid=False,
                             reason="headline"),
                       entry(inc_coef, inc_se, ["income"], valid=False),
                       entry(decl_coef, decl_se, ["income", "efficient_fixtures"],
                             valid=False, reason="declared")],
        },
        "decomposition": decomposition,
        "sensitivity": {"partial_r2": t_value**2 / (t_value**2 + dof),
                        "robustness_value": rv, "robustness_value_ci": rv_ci,
                        "threshold": 0.0, "benchmarks": benchmarks},
        "implications": [
            {"left": "income", "right": "conservation", "given": [], "statistic": 0.4,
             "p_value": 0.52},
            {"left": "garden", "right": "answered_survey", "given": ["rebate",
                                                                     "water_use_change"],
             "statistic": 9.1, "p_value": 0.0026},
        ],
        "study": _study({
            "rebate": {"label": "Took the rebate", "unit": None, "kind": "binary",
                       "measured": True, "cost": 0},
            "water_use_change": {"label": "Change in monthly water use", "unit": "m3/month",
                                 "kind": "numeric", "measured": True, "cost": 0},
            "income": {"label": "Household income", "unit": "k/yr", "kind": "numeric",
                       "measured": True, "cost": 0},
            "garden": {"label": "Has a garden", "unit": None, "kind": "binary",
                       "measured": True, "cost": 0},
            "conservation": {"label": "Conservation-mindedness", "unit": None,
                             "kind": "numeric", "measured": False, "cost": 25},
            "efficient_fixtures": {"label": "Efficient fixtures installed", "unit": None,
                                   "kind": "numeric", "measured": True, "cost": 0},
            "answered_survey": {"label": "Answered the follow-up survey", "unit": None,
                                "kind": "binary", "measured": True, "cost": 0},
        }, title="Rebate and water use (test)",
            claim="Taking the rebate cut household water use by 2 cubic metres a month.",
            treatment="rebate", outcome="water_use_change"),
    }
    return document


def vet_document() -> dict:
    """A published coefficient 1.95 (SE 0.60, dof 836) with a graph and declared controls."""
    estimate, se, dof = 1.95, 0.60, 836
    t_value = estimate / se
    f = t_value / math.sqrt(dof)
    critical_f = stats.t.ppf(0.975, dof - 1) / math.sqrt(dof - 1)
    roles = {"app_minutes": "treatment", "reading_score": "outcome",
             "parent_reading": "confounder", "school_quality": "confounder"}
    return {
        "schema": "causalcheck/vet/1", "treatment": "app_minutes", "outcome": "reading_score",
        "estimate": estimate, "std_error": se, "t": t_value, "dof": dof,
        "partial_r2": t_value**2 / (t_value**2 + dof), "robustness_value": _rv(f),
        "robustness_value_ci": _rv(f - critical_f), "e_value": None,
        "ci_low": estimate - stats.t.ppf(0.975, dof) * se,
        "ci_high": estimate + stats.t.ppf(0.975, dof) * se,
        "controls": {"used": ["school_quality"], "valid": False, "problems": [
            {"variable": "parent_reading", "kind": "path_left_open",
             "detail": "app_minutes <- parent_reading -> reading_score is open"}]},
        "variables": _graph_block(roles),
        "biasing_paths": [
            {"path": ["app_minutes", "parent_reading", "reading_score"],
             "open_given_controls": True},
            {"path": ["app_minutes", "school_quality", "reading_score"],
             "open_given_controls": False}],
        "edges": [["parent_reading", "app_minutes"], ["parent_reading", "reading_score"],
                  ["school_quality", "app_minutes"], ["school_quality", "reading_score"],
                  ["app_minutes", "reading_score"]],
        "study": _study({
            "app_minutes": {"label": "Daily app use", "unit": "10 min/day", "kind": "numeric",
                            "measured": True, "cost": 0},
            "reading_score": {"label": "End-of-year reading score", "unit": "points",
                              "kind": "numeric", "measured": True, "cost": 0},
            "parent_reading": {"label": "Parents read at home", "unit": None,
                               "kind": "numeric", "measured": True, "cost": 0},
            "school_quality": {"label": "School quality index", "unit": None,
                               "kind": "numeric", "measured": True, "cost": 0},
        }, claim="Each extra 10 minutes a day on the app raises reading scores by 2 points.",
            treatment="app_minutes", outcome="reading_score"),
    }


def _option(measure, adjust, cost, bias, se, **extra):
    option = {"measure": list(measure), "adjust_for": list(adjust), "cost": cost,
              "bias": bias, "std_error": se, "rmse": math.sqrt(bias**2 + se**2)}
    option.update(extra)
    return option


def plan_document() -> dict:
    """A cohort plan: four options, one over budget, the valid one too imprecise to win."""
    options = [
        _option([], ["age", "distance"], 0, 0.080, 0.026, valid=False, pareto=True,
                within_budget=True, baseline=True),
        _option(["shift_work"], ["age", "shift_work"], 5, 0.061, 0.026, valid=False,
                pareto=True, within_budget=True),
        _option(["fitness", "shift_work"], ["age", "fitness", "shift_work"], 35, 0.012, 0.027,
                valid=False, pareto=True, within_budget=True),
        _option(["health_habits"], ["age", "health_habits"], 12, 0.070, 0.026, valid=False,
                pareto=False, within_budget=True),
        _option(["fitness", "health_habits", "shift_work"],
                ["age", "fitness", "health_habits", "shift_work"], 47, 0.0, 0.028,
                valid=True, pareto=True, within_budget=False),
    ]
    recommended = options[2]
    return {
        "schema": "causalcheck/plan/1", "treatment": "cycling", "outcome": "sick_days",
        "n": 1500, "budget": 40, "true_effect": -0.1,
        "units": "standard deviations of the outcome per standard deviation of the treatment",
        "options": options, "recommended": recommended, "baseline": options[0],
        "best_valid": options[4], "biased_beats_unbiased": False,
        "variables": _graph_block({"cycling": "treatment", "sick_days": "outcome",
                                   "age": "confounder", "fitness": "confounder",
                                   "health_habits": "confounder", "shift_work": "confounder",
                                   "distance": "instrument"},
                                  unmeasured=("fitness", "health_habits", "shift_work")),
        "edges": [["distance", "cycling"], ["age", "cycling"], ["age", "sick_days"],
                  ["age", "fitness"], ["fitness", "cycling"], ["fitness", "sick_days"],
                  ["health_habits", "cycling"], ["health_habits", "sick_days"],
                  ["shift_work", "cycling"], ["shift_work", "sick_days"],
                  ["cycling", "sick_days"]],
        "study": _study({
            "cycling": {"label": "Cycles to work (days/week)", "unit": None,
                        "kind": "numeric", "measured": True, "cost": 0},
            "sick_days": {"label": "Sick days per year", "unit": None, "kind": "numeric",
                          "measured": True, "cost": 0},
            "fitness": {"label": "Baseline fitness test", "unit": None, "kind": "numeric",
                        "measured": False, "cost": 30},
            "shift_work": {"label": "Works shifts", "unit": None, "kind": "numeric",
                           "measured": False, "cost": 5},
            "health_habits": {"label": "Health-habits questionnaire", "unit": None,
                              "kind": "numeric", "measured": False, "cost": 12},
        }, claim="Cycling to work reduces sick days.", treatment="cycling",
            outcome="sick_days"),
    }


def controls_document() -> dict:
    """The controls check of the audit graph: declared controls include a mediator."""
    audit = audit_document()
    keys = ("treatment", "outcome", "identifiable", "adjustment_sets", "controls", "variables",
            "biasing_paths", "edges", "study")
    document = {k: copy.deepcopy(audit[k]) for k in keys}
    document["schema"] = "causalcheck/controls/1"
    document["identifiable"] = True
    document["measure_to_identify"] = []
    document["adjustment_sets"] = {"minimal": [["conservation", "garden", "income"]],
                                   "optimal": ["conservation", "garden", "income"],
                                   "cheapest": {"set": ["conservation", "garden", "income"],
                                                "cost": 25}}
    document["variables"]["conservation"]["measured"] = True
    document["study"]["variables"]["conservation"]["measured"] = True
    return document


def wording_document() -> dict:
    """A wording review: five sentences, two overstated, one prescriptive."""
    claims = [
        {"line": 7, "sentence": "Daily app use improves reading scores substantially.",
         "level": 5, "grade": "causal", "prescriptive": False, "verdict": "overstated",
         "suggestion": "Daily app use is associated with higher reading scores."},
        {"line": 12, "sentence": "Pupils who used the app more had higher reading scores.",
         "level": 1, "grade": "association", "prescriptive": False, "verdict": "supported",
         "suggestion": None},
        {"line": 14, "sentence": "Using the app may help pupils.", "level": 3,
         "grade": "conditional causal", "prescriptive": False, "verdict": "supported",
         "suggestion": None},
        {"line": 20, "sentence": "Schools should require every pupil to use the app.",
         "level": 5, "grade": "causal", "prescriptive": True, "verdict": "overstated",
         "suggestion": "Schools could trial the app and measure the effect."},
        {"line": 3, "sentence": "The district introduced the app in 38 schools.", "level": 0,
         "grade": "no relation", "prescriptive": False, "verdict": None, "suggestion": None},
    ]
    for claim in claims:
        claim["verdict"] = {"overstated": "stronger than the evidence"}.get(claim["verdict"],
                                                                           claim["verdict"])
    return {"schema": "causalcheck/wording/1", "claims": claims,
            "source": {"path": "report.md", "format": "markdown", "lines": 24, "sentences": 9},
            "terms": {"exposure": ["app use"], "outcome": ["reading scores"]},
            "evidence": {"design": "observational", "robustness_value": 0.04,
                         "supported_level": 2, "supported_grade": "hedged", "missing": []},
            "study": _study({}, claim="Each extra 10 minutes a day raises scores by 2 points.",
                            treatment="app_minutes", outcome="reading_score")}


ALL_KINDS = ("audit", "vet", "plan", "controls", "wording")


def document_for(kind: str) -> dict:
    return {"audit": audit_document, "vet": vet_document, "plan": plan_document,
            "controls": controls_document, "wording": wording_document}[kind]()
