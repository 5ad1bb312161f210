"""Planning a study before data exist: what to measure, what bias remains, how sure at n.

Given a causal graph with path strengths (:mod:`causalcheck.design`), the population is a
standardised linear-Gaussian structural model with implied covariance :math:`\\Sigma`. For a
planned sample size :math:`n` the population *Moments* are those of :math:`\\Sigma` at
:math:`n` rows (:func:`~causalcheck.moments.moments_from_covariance`), and every regression is
solved from them by the same code as in data mode (:func:`causalcheck.regress.fit`).

Definitions
-----------
True effect
    The total causal effect of the treatment :math:`T` on the outcome :math:`Y`,
    :math:`\\tau = [(I-B)^{-1}]_{YT}`, the sum over directed paths of the products of path
    coefficients (Wright 1934). All effects are in standard deviations of :math:`Y` per
    standard deviation of :math:`T`.
Population slope of an adjustment set :math:`Z`
    The coefficient of :math:`T` in the population regression of :math:`Y` on :math:`(T, Z)`,
    :math:`\\beta_Z = [\\Sigma_{XX}^{-1}\\Sigma_{XY}]_T` with :math:`X = (T, Z)`; its *bias* is
    :math:`\\beta_Z - \\tau`, zero for every valid adjustment set (back-door criterion, Pearl
    1995; adjustment criterion, Shpitser, VanderWeele & Robins 2010). For an omitted
    confounder the bias is the textbook :math:`\\gamma\\delta` (Angrist & Pischke 2009,
    Sec. 3.2).
Standard error at n
    The OLS standard error :func:`~causalcheck.regress.fit` reports when the sample moments
    equal the population ones,

    .. math:: \\mathrm{SE}_Z = \\sqrt{\\frac{\\sigma^2(Y\\mid T,Z)}
              {(n - |Z| - 2)\\,\\mathrm{Var}(T\\mid Z)}},

    i.e. the asymptotic :math:`\\sqrt{\\sigma^2/(n\\,\\mathrm{Var}(T|Z))}` with the residual
    degrees of freedom :math:`n-|Z|-2` in place of :math:`n`. (Under Gaussian rows the exact
    sampling variance of the slope is :math:`\\sigma^2/((n-|Z|-3)\\mathrm{Var}(T|Z))`, the
    mean of an inverse Wishart, Anderson 2003, Sec. 7.2; the two differ by a factor
    :math:`1 + O(1/n)`.)
RMSE
    :math:`\\sqrt{\\mathrm{bias}^2 + \\mathrm{SE}^2}`, the quantity plans are compared on.

Measurement plans
-----------------
A *plan* is a set of currently unmeasured variables (``measured = false``) to measure, at the
sum of their ``cost``. With the variables available after measuring, the plan's estimator is

- when a valid adjustment set is available: the valid set with the lowest standard error among
  the minimal valid sets (van der Zander, Liśkiewicz & Textor 2019), the optimal set
  :math:`O` (Henckel, Perković & Maathuis 2022) and, checked for validity, each minimal set
  joined with the available part of :math:`O` and the set of all available non-descendants;
- otherwise the least-biased of the available candidate sets (the empty set, every available
  non-descendant of the treatment and the outcome, the available parts of the minimal sets
  and of :math:`O`, and every subset of the available non-descendants when there are at most
  :data:`EXHAUSTIVE_BIASED` of them), flagged ``valid = false``.

Plans are enumerated exhaustively when at most :data:`EXHAUSTIVE_PLANS` variables are
unmeasured. Beyond that the search is *pruned*: the plans that measure the unmeasured members
of each minimal valid set, of :math:`O` and of the cheapest valid set, plus a forward greedy
path that adds, one variable at a time, the one that lowers the RMSE most per unit of cost.
Each plan is reported by what it *uses*: measuring a variable the chosen set leaves out only
adds cost, so options list ``measure`` = the unmeasured members of ``adjust_for``.

The options on the *Pareto front* are those no other option beats on both cost and RMSE. The
recommendation is the lowest-RMSE option within ``[plan].budget`` (every option when there is
no budget); ties go to the cheaper, then the smaller plan. When strengths are ranges, the
option with the lowest *worst-case* RMSE over the sweep is reported as well.

Uncertain strengths. Strengths given as ranges are planned at their midpoints and swept over
``[plan].range_draws`` points of a Latin hypercube (McKay, Beckman & Conover 1979; scipy's
``qmc.LatinHypercube`` seeded with ``[plan].seed``). Draws in which some variable's parents
would explain all of its variance are skipped and counted. The regressions of all draws are
solved at once by :func:`causalcheck.simulate.fit_batch`, the batched form of
:func:`causalcheck.regress.fit` (the tests check the two agree). Each option (its adjustment set
fixed) reports the median and worst |bias| and RMSE over the remaining draws.

References
----------
Wright, S. (1934). The method of path coefficients. Ann. Math. Statist. 5(3), 161-215.
Pearl, J. (1995). Causal diagrams for empirical research. Biometrika 82(4), 669-688.
Shpitser, I., VanderWeele, T. & Robins, J. (2010). On the validity of covariate adjustment for
estimating causal effects. UAI 2010.
van der Zander, B., Liśkiewicz, M. & Textor, J. (2019). Separators and adjustment sets in
causal graphs: complete criteria and an algorithmic framework. Artificial Intelligence 270.
Henckel, L., Perković, E. & Maathuis, M. H. (2022). Graphical criteria for efficient total
effect estimation via adjustment in causal linear models. JRSS-B 84(2), 579-599.
Angrist, J. D. & Pischke, J.-S. (2009). Mostly Harmless Econometrics, Sec. 3.2. Princeton.
McKay, M. D., Beckman, R. J. & Conover, W. J. (1979). A comparison of three methods for
selecting values of input variables in the analysis of output from a computer code.
Technometrics 21(2), 239-245.
Anderson, T. W. (2003). An Introduction to Multivariate Statistical Analysis, 3rd ed., Wiley.
"""

from __future__ import annotations

import itertools
import math
from collections.abc import Callable, Iterable, Mapping, Sequence
from dataclasses import dataclass, replace

import networkx as nx
import numpy as np
from scipy import stats
from scipy.stats import qmc

from . import graph as graphs
from .design import (
    Strength,
    StructuralModel,
    build_structural_model,
    error_variances_batch,
    implied_covariance,
    resolve_strengths,
)
from .errors import Problem, StudyFileError
from .moments import Moments, moments_from_covariance
from .regress import fit
from .simulate import SimulationResult, fit_batch, simulate_plans
from .study import Study, load_study

__all__ = [
    "EXHAUSTIVE_BIASED",
    "EXHAUSTIVE_PLANS",
    "MAX_MINIMAL_SETS",
    "PlanOption",
    "PlanResult",
    "PopulationFit",
    "RangeSummary",
    "RangeSweep",
    "SearchSummary",
    "coverage_of_t_interval",
    "pareto_front",
    "plan",
    "plan_study",
    "population_fit",
    "power_of_t_test",
    "random_streams",
    "simulate_plan",
]

EXHAUSTIVE_PLANS = 12     # enumerate every subset of at most this many unmeasured variables
EXHAUSTIVE_BIASED = 8     # try every subset of at most this many candidates when none is valid
MAX_MINIMAL_SETS = 500    # minimal valid sets taken from the graph (listing may be exponential)
_TOLERANCE = 1e-12


# --------------------------------------------------------------------------------------------
# Results


@dataclass(frozen=True)
class PopulationFit:
    """One adjustment set under one structural model at the planned ``n``.

    ``estimate`` is the population slope of the treatment, ``bias = estimate - true_effect``,
    ``std_error`` the OLS standard error at the population moments (see the module notes).
    """

    adjust_for: tuple[str, ...]
    estimate: float
    bias: float
    std_error: float
    dof: int

    @property
    def rmse(self) -> float:
        # RMSE = sqrt(bias^2 + SE^2)
        return math.hypot(self.bias, self.std_error)


@dataclass(frozen=True)
class RangeSummary:
    """An option over the swept strength ranges (``draws`` possible draws)."""

    draws: int
    bias_abs_median: float
    bias_abs_worst: float
    rmse_median: float
    rmse_worst: float

    def to_dict(self) -> dict:
        return {"draws": self.draws, "bias_abs_median": self.bias_abs_median,
                "bias_abs_worst": self.bias_abs_worst, "rmse_median": self.rmse_median,
                "rmse_worst": self.rmse_worst}


@dataclass(frozen=True)
class PlanOption:
    """A measurement plan and the estimator it makes possible.

    Attributes
    ----------
    measure : tuple of str
        Currently unmeasured variables the plan measures (sorted).
    adjust_for : tuple of str
        The adjustment set used (sorted).
    cost : float
        Sum of the measured variables' costs (plus the treatment's and outcome's, when they
        are not measured yet).
    estimate, bias, std_error, rmse : float
        Population slope, its bias, its standard error at ``n`` and
        :math:`\\sqrt{bias^2+SE^2}`.
    valid : bool
        ``adjust_for`` is a valid adjustment set (bias zero whatever the strengths).
    power : float
        Chance that the :math:`1-\\alpha` interval excludes zero: with
        :math:`\\delta = \\beta_Z/\\mathrm{SE}_Z` and :math:`c = t_{1-\\alpha/2,\\,dof}`,
        :math:`P(|T'| > c)` for :math:`T'` noncentral t with ``dof`` degrees of freedom and
        noncentrality :math:`\\delta` (the fixed-design power of the t test; Cohen 1988,
        Ch. 2, uses its normal limit).
    coverage : float
        Chance that the interval covers the true effect, :math:`P(|T''| \\le c)` with
        noncentrality :math:`\\mathrm{bias}/\\mathrm{SE}` (:math:`1-\\alpha` for a valid set).
    """

    measure: tuple[str, ...]
    adjust_for: tuple[str, ...]
    cost: float
    estimate: float
    bias: float
    std_error: float
    rmse: float
    dof: int
    valid: bool
    reason: str
    power: float
    coverage: float
    baseline: bool = False
    pareto: bool = False
    within_budget: bool = True
    over_range: RangeSummary | None = None

    @property
    def key(self) -> tuple[tuple[str, ...], tuple[str, ...]]:
        return self.measure, self.adjust_for

    def to_dict(self) -> dict:
        return {
            "measure": list(self.measure), "adjust_for": list(self.adjust_for),
            "cost": self.cost, "bias": self.bias, "std_error": self.std_error,
            "rmse": self.rmse, "estimate": self.estimate, "dof": self.dof,
            "power": self.power, "coverage": self.coverage, "valid": self.valid, "reason": self.reason, "baseline": self.baseline,
            "pareto": self.pareto, "within_budget": self.within_budget,
            "over_range": self.over_range.to_dict() if self.over_range else None,
        }


@dataclass(frozen=True)
class RangeSweep:
    """How the strength ranges were swept."""

    requested: int
    used: int
    skipped_impossible: int
    seed: int
    ranged: tuple[Strength, ...]
    true_effect_low: float | None
    true_effect_median: float | None
    true_effect_high: float | None

    def to_dict(self) -> dict:
        return {"method": "latin_hypercube", "requested": self.requested, "used": self.used,
                "skipped_impossible": self.skipped_impossible, "seed": self.seed,
                "ranged_edges": [s.to_dict() for s in self.ranged],
                "true_effect": {"low": self.true_effect_low,
                                "median": self.true_effect_median,
                                "high": self.true_effect_high}}


@dataclass(frozen=True)
class SearchSummary:
    """How the measurement plans were searched."""

    method: str                      # "exhaustive" or "pruned"
    unmeasured: tuple[str, ...]
    plans_examined: int
    minimal_sets_listed: int
    minimal_sets_truncated: bool

    def to_dict(self) -> dict:
        return {"method": self.method, "unmeasured": list(self.unmeasured),
                "plans_examined": self.plans_examined,
                "minimal_sets_listed": self.minimal_sets_listed,
                "minimal_sets_truncated": self.minimal_sets_truncated}


@dataclass(frozen=True, eq=False)
class PlanResult:
    """Everything ``causalcheck plan`` reports (the ``simulation`` key is added separately)."""

    source: str
    title: str
    treatment: str
    outcome: str
    n: int
    alpha: float
    budget: float | None
    seed: int
    true_effect: float
    model: StructuralModel
    options: tuple[PlanOption, ...]
    recommended: PlanOption
    baseline: PlanOption
    search: SearchSummary
    sweep: RangeSweep | None
    forced: tuple[str, ...]
    biased_beats_unbiased: bool
    best_valid: PlanOption | None
    recommended_worst_case: PlanOption | None
    notes: tuple[str, ...]
    roles: Mapping[str, tuple[str, ...]]
    measured: Mapping[str, bool]
    costs: Mapping[str, float]
    edges: tuple[tuple[str, str], ...]
    simulation: SimulationResult | None = None

    @property
    def pareto(self) -> tuple[PlanOption, ...]:
        return tuple(o for o in self.options if o.pareto)

    def to_dict(self) -> dict:
        """The ``causalcheck/plan/1`` JSON document (without ``simulation``)."""
        return {
            "schema": "causalcheck/plan/1",
            "title": self.title, "treatment": self.treatment, "outcome": self.outcome,
            "n": self.n, "true_effect": self.true_effect,
            "units": "standard deviations of the outcome per standard deviation of the "
                     "treatment",
            "options": [o.to_dict() for o in self.options],
            "recommended": self.recommended.to_dict(),
            "baseline": self.baseline.to_dict(),
            "best_valid": self.best_valid.to_dict() if self.best_valid else None,
            "recommended_worst_case": (self.recommended_worst_case.to_dict()
                                       if self.recommended_worst_case else None),
            "biased_beats_unbiased": self.biased_beats_unbiased,
            "budget": self.budget, "alpha": self.alpha, "seed": self.seed,
            "always_measured": list(self.forced),
            "variables": {name: {"role": "+".join(self.roles.get(name, ())),
                                 "roles": list(self.roles.get(name, ())),
                                 "measured": self.measured[name], "cost": self.costs[name]}
                          for name in self.model.variables},
            "edges": [list(e) for e in self.edges],
            "strengths": self.model.strengths.to_dict(),
            "error_variances": self.model.to_dict()["error_variances"],
            "search": self.search.to_dict(),
            "range_sweep": self.sweep.to_dict() if self.sweep else None,
            "notes": list(self.notes),
            "simulation": self.simulation.to_dict() if self.simulation else None,
        }


# --------------------------------------------------------------------------------------------
# Population regressions


def population_fit(moments: Moments, treatment: str, outcome: str,
                   adjust_for: Iterable[str], *, true_effect: float) -> PopulationFit:
    """The population slope, bias and standard error of one adjustment set.

    Parameters
    ----------
    moments : Moments
        Population moments at the planned ``n`` (``cross = Σ (n-1)``).
    treatment, outcome : str
    adjust_for : iterable of str
    true_effect : float
        :math:`\\tau`, the total effect of the treatment on the outcome.

    Returns
    -------
    PopulationFit

    Notes
    -----
    Solved by :func:`causalcheck.regress.fit` on ``outcome ~ treatment + adjust_for``:
    :math:`\\beta_Z = [\\Sigma_{XX}^{-1}\\Sigma_{XY}]_T`, bias :math:`\\beta_Z - \\tau`,
    :math:`\\mathrm{SE}^2 = \\sigma^2(Y|T,Z) / ((n-|Z|-2)\\mathrm{Var}(T|Z))`.

    Examples
    --------
    >>> sigma = np.array([[1.0, 0.5, 0.6], [0.5, 1.0, 0.6], [0.6, 0.6, 1.0]])   # z, t, y
    >>> m = moments_from_covariance(sigma, columns=["z", "t", "y"], n=1002)
    >>> naive = population_fit(m, "t", "y", [], true_effect=0.4)
    >>> round(naive.estimate, 4), round(naive.bias, 4)     # 0.4 + 0.5*0.4: gamma*delta
    (0.6, 0.2)
    >>> round(population_fit(m, "t", "y", ["z"], true_effect=0.4).bias, 10)
    0.0
    """
    regressors = [treatment, *sorted(adjust_for)]
    result = fit(moments, outcome, regressors)
    estimate = result.coefficient(treatment)
    return PopulationFit(adjust_for=tuple(sorted(adjust_for)), estimate=estimate,
                         bias=estimate - true_effect, std_error=result.se(treatment),
                         dof=result.dof)


def power_of_t_test(estimate: float, std_error: float, dof: int, *, alpha: float) -> float:
    """Chance that a two-sided t test at level ``alpha`` rejects a zero effect.

    .. math:: P(|T'| > c),\\quad T' \\sim t'_{dof}(\\delta = \\beta/\\mathrm{SE}),
              \\quad c = t_{1-\\alpha/2,\\,dof}

    References
    ----------
    Cohen, J. (1988). Statistical Power Analysis for the Behavioral Sciences, 2nd ed.,
    Ch. 2. Erlbaum.

    Examples
    --------
    >>> round(power_of_t_test(0.0, 1.0, 1000, alpha=0.05), 4)    # the size of the test
    0.05
    >>> round(power_of_t_test(2.8, 1.0, 10**6, alpha=0.05), 2)   # the classic 80% at 2.8 SE
    0.8
    """
    if not std_error > 0:
        return math.nan
    critical = float(stats.t.ppf(1.0 - alpha / 2.0, dof))
    delta = estimate / std_error
    # P(T' > c) + P(T' < -c)
    return float(stats.nct.sf(critical, dof, delta) + stats.nct.cdf(-critical, dof, delta))


def coverage_of_t_interval(bias: float, std_error: float, dof: int, *, alpha: float) -> float:
    """Chance that the :math:`1-\\alpha` t interval covers the true effect despite ``bias``.

    .. math:: P(|T'| \\le c),\\quad T' \\sim t'_{dof}(\\mathrm{bias}/\\mathrm{SE}),
              \\quad c = t_{1-\\alpha/2,\\,dof}

    Examples
    --------
    >>> round(coverage_of_t_interval(0.0, 1.0, 500, alpha=0.05), 6)
    0.95
    >>> round(coverage_of_t_interval(1.96, 1.0, 10**6, alpha=0.05), 3)   # bias of 1.96 SE
    0.5
    """
    if not std_error > 0:
        return math.nan
    critical = float(stats.t.ppf(1.0 - alpha / 2.0, dof))
    delta = bias / std_error
    # P(-c <= T' <= c)
    return float(stats.nct.cdf(critical, dof, delta) - stats.nct.cdf(-critical, dof, delta))


def pareto_front(points: Sequence[tuple[float, float]]) -> list[bool]:
    """Flags of the points no other point beats on both coordinates (lower is better).

    >>> pareto_front([(0, 3.0), (1, 2.0), (2, 2.0), (3, 1.0), (1, 5.0)])
    [True, True, False, True, False]
    """
    flags = []
    for i, (ci, ri) in enumerate(points):
        dominated = any(
            cj <= ci + _TOLERANCE and rj <= ri + _TOLERANCE
            and (cj < ci - _TOLERANCE or rj < ri - _TOLERANCE)
            for j, (cj, rj) in enumerate(points) if j != i)
        flags.append(not dominated)
    return flags


# --------------------------------------------------------------------------------------------
# The planner


class _Planner:
    """Shared state of one planning run: graph, moments, caches."""

    def __init__(self, study: Study, model: StructuralModel, n: int):
        self.study = study
        self.model = model
        self.treatment = str(study.treatment)
        self.outcome = str(study.outcome)
        self.graph = graphs.build_graph(study)
        self.true_effect = model.total_effect(self.treatment, self.outcome)
        self.moments = moments_from_covariance(model.covariance(), columns=model.variables,
                                               n=n)
        ends = {self.treatment, self.outcome}
        self.candidates = frozenset(v for v in model.variables if v not in ends)
        # never adjusted for: descendants of the treatment or of the outcome
        forbidden = nx.descendants(self.graph, self.treatment) | nx.descendants(
            self.graph, self.outcome)
        self.forbidden = frozenset(forbidden) - ends
        self.measured = frozenset(v for v in self.candidates
                                  if study.variable(v).measured)
        self.unmeasured = tuple(sorted(self.candidates - self.measured))
        self.cost = {v: study.variable(v).cost for v in model.variables}
        minimal = graphs.iter_minimal_adjustment_sets(
            self.graph, self.treatment, self.outcome, allowed=set(self.candidates))
        self.minimal = [frozenset(s) for s in itertools.islice(minimal, MAX_MINIMAL_SETS + 1)]
        self.minimal_truncated = len(self.minimal) > MAX_MINIMAL_SETS
        self.minimal = self.minimal[:MAX_MINIMAL_SETS]
        optimal = graphs.optimal_adjustment_set(self.graph, self.treatment, self.outcome)
        self.optimal = frozenset(optimal) if optimal is not None else None
        self._fits: dict[frozenset[str], PopulationFit] = {}
        self._valid: dict[frozenset[str], bool] = {}
        self._best: dict[frozenset[str], tuple[frozenset[str], bool, str]] = {}

    def fit(self, adjust_for: frozenset[str]) -> PopulationFit:
        found = self._fits.get(adjust_for)
        if found is None:
            found = population_fit(self.moments, self.treatment, self.outcome, adjust_for,
                                   true_effect=self.true_effect)
            self._fits[adjust_for] = found
        return found

    def valid(self, adjust_for: frozenset[str]) -> bool:
        found = self._valid.get(adjust_for)
        if found is None:
            found = bool(graphs.is_valid_adjustment_set(
                self.graph, self.treatment, self.outcome, set(adjust_for)))
            self._valid[adjust_for] = found
        return found

    def best_for(self, available: frozenset[str]) -> tuple[frozenset[str], bool, str]:
        """The adjustment set a plan with ``available`` variables uses."""
        found = self._best.get(available)
        if found is not None:
            return found
        usable = available - self.forbidden
        optimal_part = (self.optimal & available) if self.optimal is not None else frozenset()
        valid_sets = [m for m in self.minimal if m <= available]
        if self.optimal is not None and self.optimal <= available:
            valid_sets.append(self.optimal)
        # every valid set contains a minimal one, so with none available (and the list of
        # minimal sets complete) no superset needs checking
        if valid_sets or self.minimal_truncated:
            extra = [m | optimal_part for m in valid_sets] + [usable]
            valid_sets.extend(s for s in extra if s not in valid_sets and self.valid(s))
        if valid_sets:
            # lowest standard error; ties: fewer variables, then alphabetical
            chosen = min(set(valid_sets), key=lambda s: (
                round(self.fit(s).std_error, 14), len(s), sorted(s)))
            found = (chosen, True, ("valid: lowest standard error among the valid adjustment "
                     "sets available"))
        else:
            biased = {frozenset(), usable, optimal_part}
            biased.update(m & available for m in self.minimal)
            if len(usable) <= EXHAUSTIVE_BIASED:
                ordered = sorted(usable)
                for size in range(len(ordered) + 1):
                    biased.update(frozenset(c) for c in itertools.combinations(ordered, size))
            chosen = min(biased, key=lambda s: (
                round(abs(self.fit(s).bias), 14), round(self.fit(s).std_error, 14), len(s),
                sorted(s)))
            found = (chosen, False, ("biased: no valid adjustment set is available; the "
                     "least-biased set"))
        self._best[available] = found
        return found

    def option(self, plan: frozenset[str], forced: tuple[str, ...]) -> PlanOption:
        chosen, valid, reason = self.best_for(self.measured | plan)
        # a plan is reported by what it uses: the unmeasured members of its set (plus the
        # treatment and outcome when they are not measured yet)
        uses = tuple(sorted(set(chosen - self.measured) | set(forced)))
        cost = sum(self.cost[v] for v in uses)
        result = self.fit(chosen)
        return PlanOption(measure=uses, adjust_for=tuple(sorted(chosen)), cost=float(cost),
                          estimate=result.estimate, bias=result.bias,
                          std_error=result.std_error, rmse=result.rmse, dof=result.dof,
                          valid=valid, reason=reason,
                          power=power_of_t_test(result.estimate, result.std_error, result.dof,
                                                alpha=self.study.alpha),
                          coverage=coverage_of_t_interval(result.bias, result.std_error,
                                                          result.dof, alpha=self.study.alpha),
                          baseline=not plan)

    def plans(self) -> tuple[list[frozenset[str]], str]:
        """The plans to examine and the search method."""
        unmeasured = self.unmeasured
        if len(unmeasured) <= EXHAUSTIVE_PLANS:
            every = [frozenset(c) for size in range(len(unmeasured) + 1)
                     for c in itertools.combinations(unmeasured, size)]
            return every, "exhaustive"
        pool = set(unmeasured)
        seeds: list[frozenset[str]] = [frozenset()]
        seeds.extend(m & pool for m in self.minimal)
        if self.optimal is not None:
            seeds.append(self.optimal & pool)
        costs = {v: (self.cost[v] if v in pool else 0.0) for v in self.candidates}
        cheapest = graphs.cheapest_adjustment_set(
            self.graph, self.treatment, self.outcome, allowed=set(self.candidates),
            cost=costs)
        if cheapest is not None:
            seeds.append(frozenset(cheapest[0]) & pool)
        seeds.extend(self._greedy_path(pool))
        return list(dict.fromkeys(seeds)), "pruned"

    def _greedy_path(self, pool: set[str]) -> list[frozenset[str]]:
        """Forward greedy: add the variable that lowers the RMSE most per unit of cost."""
        current: frozenset[str] = frozenset()
        path = [current]
        rmse = self.fit(self.best_for(self.measured)[0]).rmse
        while True:
            best: tuple[float, float, str] | None = None
            for v in sorted(pool - current):
                chosen = self.best_for(self.measured | current | {v})[0]
                gain = rmse - self.fit(chosen).rmse
                if gain <= _TOLERANCE:
                    continue
                # RMSE gained per unit of cost; free variables rank first
                rate = gain / self.cost[v] if self.cost[v] > 0 else math.inf
                if best is None or (rate, gain) > (best[0], best[1]):
                    best = (rate, gain, v)
            if best is None:
                return path
            current = current | {best[2]}
            rmse -= best[1]
            path.append(current)


def _validate(study: Study, n_override: int | None) -> int:
    problems: list[Problem] = []
    if not study.has_graph or study.treatment is None or study.outcome is None:
        problems.append(Problem("[graph]", "planning needs a causal graph with a treatment "
                                "and an outcome: add [study] treatment and outcome and "
                                "[graph] edges"))
        raise StudyFileError(study.source, problems)
    n = n_override if n_override is not None else (study.plan.n if study.plan else None)
    if n is None:
        problems.append(Problem("[plan].n", "is missing; planning needs the planned sample "
                                "size: add a [plan] table with a line such as n = 2000"))
        raise StudyFileError(study.source, problems)
    p = len(study.nodes)
    if n <= p:
        problems.append(Problem(
            "[plan].n", f"n = {n} is too small for this graph: the largest regression a plan "
            f"may fit has {p} parameters (intercept, treatment and the {p - 2} other "
            f"variables), so n must be at least {p + 1} to leave residual degrees of freedom. "
            "Plan more rows"))
        raise StudyFileError(study.source, problems)
    return n


def plan_study(study: Study, *, n: int | None = None, seed: int | None = None) -> PlanResult:
    """Plan what to measure: every option's cost, bias, standard error and RMSE at ``n``.

    Parameters
    ----------
    study : Study
        A study with a ``[graph]``, ``[plan]`` (with ``n``) and, ideally, ``[strengths]``.
    n : int, optional
        Planned sample size; overrides ``[plan].n``.
    seed : int, optional
        Seed of the Latin-hypercube sweep; overrides ``[plan].seed``.

    Returns
    -------
    PlanResult

    Raises
    ------
    StudyFileError
        No graph, no ``[plan].n``, ``n`` not above the number of variables, or missing
        strengths with ``require_strengths = true``.
    PlanError
        Strengths under which some variable's parents explain all of its variance.
    GraphError
        A cycle in the graph.

    Notes
    -----
    See the module docstring for the estimator of each plan, the search and the sweep.
    """
    n = _validate(study, n)
    spec = study.plan
    seed = seed if seed is not None else (spec.seed if spec is not None else 0)
    budget = spec.budget if spec is not None else None
    strengths = resolve_strengths(study)
    model = build_structural_model(study, strengths=strengths)
    planner = _Planner(study, model, n)
    forced = tuple(v for v in (planner.treatment, planner.outcome)
                   if not study.variable(v).measured)

    plans, method = planner.plans()
    options: dict[tuple, PlanOption] = {}
    for plan in plans:
        found = planner.option(plan, forced)
        options.setdefault(found.key, found)
    baseline = planner.option(frozenset(), forced)
    ordered = sorted(options.values(), key=lambda o: (o.cost, o.rmse, len(o.measure),
                                                      o.measure, o.adjust_for))
    flags = pareto_front([(o.cost, o.rmse) for o in ordered])
    ordered = [replace(o, pareto=flag,
                       within_budget=budget is None or o.cost <= budget + 1e-9)
               for o, flag in zip(ordered, flags)]

    sweep = None
    if strengths.ranged:
        sweep, summaries = _sweep(planner, ordered, spec.range_draws if spec else 64, seed,
                                  random_streams(seed)[0])
        ordered = [replace(o, over_range=summaries.get(o.key)) for o in ordered]

    notes: list[str] = []
    pick: Callable[[PlanOption], tuple] = lambda o: (round(o.rmse, 12), o.cost,
                                                      len(o.measure), o.measure)
    affordable = [o for o in ordered if o.within_budget]
    if affordable:
        recommended = min(affordable, key=pick)
    else:
        recommended = min(ordered, key=lambda o: (o.cost, o.rmse))
        notes.append(f"no plan fits the budget of {budget:g}; the cheapest plan is shown "
                     f"(cost {recommended.cost:g})")
    baseline = next(o for o in ordered if o.key == baseline.key)
    robust = None
    swept = [o for o in (affordable or ordered) if o.over_range is not None]
    if swept:
        # judged by the worst case over the strength ranges instead of the midpoints
        robust = min(swept, key=lambda o: (round(o.over_range.rmse_worst, 12), o.cost,
                                           len(o.measure), o.measure))
    valid_options = [o for o in ordered if o.valid]
    best_valid = min(valid_options, key=pick) if valid_options else None
    best_overall = min(ordered, key=pick)
    biased_beats = bool(best_valid is not None and not best_overall.valid
                        and best_overall.rmse < best_valid.rmse - _TOLERANCE)
    if biased_beats:
        assert best_valid is not None
        notes.append(
            f"at n = {n} the biased plan adjusting for {_names(best_overall.adjust_for)} has a "
            f"lower RMSE ({best_overall.rmse:.4g}) than the best unbiased plan "
            f"({best_valid.rmse:.4g}, adjusting for {_names(best_valid.adjust_for)}): its "
            "bias costs less than the extra sampling error. This depends on the assumed "
            "strengths and on n; the bias does not shrink with more rows")
    if forced:
        notes.append(f"{_names(forced)} {'is' if len(forced) == 1 else 'are'} marked "
                     "measured = false but every plan must measure the treatment and the "
                     "outcome; their cost is included in every plan")
    if strengths.defaulted:
        notes.append(f"{len(strengths.defaulted)} edge"
                     f"{'s' if len(strengths.defaulted) != 1 else ''} without a strength "
                     f"use [plan].default_strength = {strengths.default_strength:g}: "
                     + ", ".join(f"{a} -> {b}" for a, b in strengths.defaulted))
    kinds = sorted(v for v in model.variables if study.variable(v).kind != "numeric")
    if kinds:
        notes.append("planning treats every variable as continuous and standardised; "
                     f"{_names(kinds)} {'is' if len(kinds) == 1 else 'are'} declared binary "
                     "or categorical, so read their strengths as correlations of "
                     "standardised scores")
    if planner.minimal_truncated:
        notes.append(f"the graph has more than {MAX_MINIMAL_SETS} minimal adjustment sets; "
                     f"the first {MAX_MINIMAL_SETS} were considered")
    if method == "pruned":
        notes.append(f"{len(planner.unmeasured)} variables are unmeasured (more than "
                     f"{EXHAUSTIVE_PLANS}), so plans were searched by a pruned search "
                     "(minimal, optimal and cheapest sets plus a greedy path), not all "
                     f"{2 ** len(planner.unmeasured)} subsets")
    if study.design == "randomized":
        notes.append("the study is declared randomized; the plan still follows the graph, "
                     "so make sure the treatment has no parents in it")
    search = SearchSummary(method=method, unmeasured=planner.unmeasured,
                           plans_examined=len(plans), minimal_sets_listed=len(planner.minimal),
                           minimal_sets_truncated=planner.minimal_truncated)
    return PlanResult(
        source=study.source, title=study.title, treatment=planner.treatment, outcome=planner.outcome, n=n,
        alpha=study.alpha, budget=budget, seed=seed, true_effect=planner.true_effect,
        model=model, options=tuple(ordered),
        recommended=next(o for o in ordered if o.key == recommended.key),
        baseline=baseline, search=search, sweep=sweep, forced=forced,
        biased_beats_unbiased=biased_beats, best_valid=best_valid,
        recommended_worst_case=robust, notes=tuple(notes),
        roles=graphs.variable_roles(planner.graph, planner.treatment, planner.outcome),
        measured={v: study.variable(v).measured for v in model.variables},
        costs={v: float(study.variable(v).cost) for v in model.variables},
        edges=tuple(study.edges))


def _names(names: Iterable[str]) -> str:
    listed = list(names)
    return ", ".join(listed) if listed else "nothing"


def _sweep(planner: _Planner, options: Sequence[PlanOption], draws: int, seed: int,
           rng: np.random.Generator) -> tuple[RangeSweep, Mapping[tuple, RangeSummary]]:
    """Latin-hypercube sweep of the ranged strengths (McKay et al. 1979)."""
    model = planner.model
    ranged = model.strengths.ranged
    sampler = qmc.LatinHypercube(d=len(ranged), rng=rng)
    unit = sampler.random(draws)                                   # (draws, d) in [0, 1)
    coefficients = np.broadcast_to(model.coefficients, (draws, *model.coefficients.shape))
    coefficients = coefficients.copy()
    for column, strength in enumerate(ranged):
        parent, child = strength.edge
        # strength = low + u * (high - low)
        coefficients[:, model.index(child), model.index(parent)] = (
            strength.low + unit[:, column] * (strength.high - strength.low))
    omega, possible = error_variances_batch(coefficients)
    used = np.flatnonzero(possible)
    p = len(model.variables)
    n = planner.moments.n
    bias = np.full((len(options), used.size), np.nan)
    rmse = np.full_like(bias, np.nan)
    effects = np.empty(used.size)
    if used.size:
        sigma = implied_covariance(coefficients[used], omega[used])        # (r, p, p)
        total = np.linalg.inv(np.eye(p) - coefficients[used])              # (I - B)^{-1}
        effects = total[:, model.index(planner.outcome), model.index(planner.treatment)]
        # population slopes and standard errors for every draw at once: the batched twin of
        # regress.fit on moments_from_covariance(sigma, n) (checked equal in the tests)
        cache: dict[tuple[str, ...], tuple[np.ndarray, np.ndarray]] = {}
        outcome = model.index(planner.outcome)
        for row, option in enumerate(options):
            found = cache.get(option.adjust_for)
            if found is None:
                regressors = [model.index(planner.treatment),
                              *(model.index(v) for v in option.adjust_for)]
                estimate, error, _ = fit_batch(sigma, outcome, regressors, n)
                found = (estimate - effects, error)
                cache[option.adjust_for] = found
            bias[row] = found[0]
            rmse[row] = np.hypot(found[0], found[1])      # sqrt(bias^2 + SE^2)
    summaries: dict[tuple, RangeSummary] = {}
    if used.size:
        for row, option in enumerate(options):
            summaries[option.key] = RangeSummary(
                draws=int(used.size),
                bias_abs_median=float(np.median(np.abs(bias[row]))),
                bias_abs_worst=float(np.max(np.abs(bias[row]))),
                rmse_median=float(np.median(rmse[row])),
                rmse_worst=float(np.max(rmse[row])))
    sweep = RangeSweep(
        requested=draws, used=int(used.size), skipped_impossible=int(draws - used.size),
        seed=seed, ranged=ranged,
        true_effect_low=float(effects.min()) if used.size else None,
        true_effect_median=float(np.median(effects)) if used.size else None,
        true_effect_high=float(effects.max()) if used.size else None)
    return sweep, summaries


def random_streams(seed: int) -> tuple[np.random.Generator, np.random.Generator]:
    """Independent generators for the strength sweep and the simulation, from one seed.

    >>> a, b = random_streams(0)
    >>> float(a.random()) != float(b.random())
    True
    """
    sweep, simulation = np.random.SeedSequence(seed).spawn(2)
    return np.random.default_rng(sweep), np.random.default_rng(simulation)


def simulate_plan(result: PlanResult, *, replications: int, seed: int | None = None,
                  progress: bool = False, method: str = "wishart") -> SimulationResult:
    """Monte Carlo of every option of ``result`` at its planned n (see :mod:`.simulate`).

    The draws come from the planned (midpoint) strengths; ``seed`` defaults to the plan's.
    """
    seed = result.seed if seed is None else seed
    plans = [(o.measure, o.adjust_for) for o in result.options]
    return simulate_plans(result.model.covariance(), result.model.variables, result.treatment,
                          result.outcome, plans, n=result.n, replications=replications,
                          true_effect=result.true_effect, alpha=result.alpha,
                          rng=random_streams(seed)[1], seed=seed, method=method,
                          progress=progress)


def plan(study: Study | str, *, n: int | None = None, seed: int | None = None,
         simulate: int | None = None, progress: bool = False) -> PlanResult:
    """Plan a study (the ``causalcheck plan`` command as a function).

    Parameters
    ----------
    study : Study or path
        A parsed study, or the path of a study file.
    n : int, optional
        Planned sample size (default ``[plan].n``).
    seed : int, optional
        Seed of the strength sweep and the simulation (default ``[plan].seed``).
    simulate : int, optional
        Number of simulated studies; ``None`` for none.
    progress : bool
        Progress bar on stderr during the simulation.

    Returns
    -------
    PlanResult
        With ``simulation`` set when ``simulate`` is given.

    Examples
    --------
    >>> from causalcheck.study import parse_study
    >>> study = parse_study('''
    ... [study]
    ... treatment = "t"
    ... outcome = "y"
    ... [graph]
    ... edges = ["z -> t", "z -> y", "t -> y"]
    ... [variables]
    ... z = { measured = false, cost = 10 }
    ... [strengths]
    ... "z -> t" = 0.5
    ... "z -> y" = 0.4
    ... "t -> y" = 0.3
    ... [plan]
    ... n = 1000
    ... ''')
    >>> result = plan(study)
    >>> result.recommended.measure, round(result.baseline.bias, 3)    # gamma*delta = 0.4*0.5
    (('z',), 0.2)
    """
    if not isinstance(study, Study):
        study = load_study(study)
    result = plan_study(study, n=n, seed=seed)
    if simulate is not None:
        result = replace(result, simulation=simulate_plan(result, replications=simulate,
                                                          progress=progress))
    return result
