"""Where the gap between the naive and the adjusted estimate comes from.

Adding covariates :math:`Z_1, \\dots, Z_K` to the regression of the outcome :math:`Y` on the
treatment :math:`T` (and on base covariates :math:`X`, none by default) moves the treatment's
slope from :math:`\\beta_{base}` to :math:`\\beta_{full}`. The move splits *exactly* into one
term per added covariate (Gelbach 2016):

.. math::

    \\beta_{base} - \\beta_{full} = \\sum_k \\gamma_k \\, \\delta_k ,

where :math:`\\gamma_k` is :math:`Z_k`'s coefficient in the full regression and
:math:`\\delta_k` is the coefficient on :math:`T` when :math:`Z_k` is regressed on :math:`T`
and :math:`X` (with no base covariates, :math:`\\delta_k = \\mathrm{Cov}(T, Z_k)/\\mathrm{Var}(T)`).
With one added covariate this is the textbook omitted-variable-bias formula
:math:`\\gamma\\,\\mathrm{Cov}(T,Z)/\\mathrm{Var}(T)` (Angrist & Pischke 2009, Sec. 3.2.2). The
identity is OLS algebra, so it holds in every sample, not only on average. A categorical's
dummies are added together into one term, so the split does not depend on the reference level.

The same identity tells what a *bad* control does: adding it to a valid set moves the estimate
by :math:`-\\gamma\\,\\delta` (:func:`added_control_shifts`).

References
----------
Gelbach, J. B. (2016). When do covariates matter? And which ones, and how much? Journal of Labor
Economics 34(2), 509–543.

Angrist, J. D. & Pischke, J.-S. (2009). Mostly Harmless Econometrics, Sec. 3.2.2. Princeton.

Examples
--------
>>> import numpy as np
>>> from causalcheck.moments import moments_from_array
>>> rng = np.random.default_rng(0)
>>> z = rng.normal(size=500); t = z + rng.normal(size=500); y = t + 2 * z + rng.normal(size=500)
>>> moments = moments_from_array(np.column_stack([t, y, z]), ["t", "y", "z"])
>>> parts = decompose(moments, "t", "y", ["z"])
>>> bool(abs(parts.gap - sum(term.contribution for term in parts.terms)) < 1e-12)
True
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Any

from .moments import Moments
from .regress import LinearFit, fit

__all__ = [
    "ControlShift",
    "Decomposition",
    "DecompositionTerm",
    "added_control_shifts",
    "decompose",
]


@dataclass(frozen=True)
class DecompositionTerm:
    """One covariate's part of the gap :math:`\\beta_{base} - \\beta_{full}`.

    ``gamma`` and ``delta`` are ``None`` for a categorical (several dummy columns); its
    per-dummy values are in ``columns``.
    """

    variable: str
    contribution: float
    share: float | None
    gamma: float | None
    delta: float | None
    columns: tuple[Mapping[str, Any], ...] = ()

    def to_dict(self) -> dict[str, Any]:
        out: dict[str, Any] = {"variable": self.variable, "gamma": self.gamma,
                               "delta": self.delta, "contribution": self.contribution,
                               "share": self.share}
        if self.columns:
            out["columns"] = [dict(c) for c in self.columns]
        return out


@dataclass(frozen=True)
class Decomposition:
    """The exact split of ``base_estimate - full_estimate`` into covariate terms."""

    treatment: str
    outcome: str
    base: tuple[str, ...]
    added: tuple[str, ...]
    base_estimate: float
    full_estimate: float
    terms: tuple[DecompositionTerm, ...]

    @property
    def gap(self) -> float:
        """:math:`\\beta_{base} - \\beta_{full}` (naive minus adjusted when ``base`` is empty)."""
        return self.base_estimate - self.full_estimate

    def term(self, variable: str) -> DecompositionTerm:
        for term in self.terms:
            if term.variable == variable:
                return term
        raise KeyError(f"{variable!r} is not one of the added covariates {self.added}")

    def leading(self) -> tuple[DecompositionTerm, ...]:
        """Terms ordered by absolute contribution, largest first."""
        return tuple(sorted(self.terms, key=lambda t: -abs(t.contribution)))

    def to_dict(self) -> dict[str, Any]:
        return {"treatment": self.treatment, "outcome": self.outcome, "base": list(self.base),
                "added": list(self.added), "base_estimate": self.base_estimate,
                "full_estimate": self.full_estimate, "gap": self.gap,
                "terms": [t.to_dict() for t in self.terms]}


def decompose(moments: Moments, treatment: str, outcome: str, covariates: Sequence[str], *,
              base: Sequence[str] = ()) -> Decomposition:
    """Split the move of the treatment's slope, when ``covariates`` are added, by covariate.

    Parameters
    ----------
    moments : Moments
    treatment, outcome : str
    covariates : sequence of str
        Study variables added to the base model (a categorical counts as one).
    base : sequence of str, optional
        Study variables in both models (none: the base model is the naive one).

    Returns
    -------
    Decomposition
        ``gap == sum(term.contribution)`` up to rounding; ``share = contribution / gap``.

    Notes
    -----
    .. math::

        \\beta_{base} - \\beta_{full} = \\sum_k \\gamma_k\\delta_k,\\qquad
        \\delta_k = [\\,(W^\\top W)^{-1} W^\\top Z_k\\,]_T,\\quad W = (1, T, X)

    References
    ----------
    Gelbach, J. B. (2016). J. Labor Econ. 34(2), 509–543, Sec. III.
    """
    base = tuple(v for v in base if v not in (treatment,))
    added = tuple(v for v in covariates if v not in base and v != treatment)
    base_regressors = (treatment, *base)
    base_fit = fit(moments, outcome, base_regressors)
    full_fit = fit(moments, outcome, (*base_regressors, *added))
    (t_column,) = moments.select([treatment])
    gap = base_fit.coefficient(t_column) - full_fit.coefficient(t_column)
    terms = []
    for variable in added:
        columns = []
        contribution = 0.0
        for column in moments.select([variable]):
            # gamma_k: Z_k's coefficient in the full model
            gamma = full_fit.coefficient(column)
            # delta_k: slope on T of Z_k regressed on (T, base)
            delta = fit(moments, column, base_regressors).coefficient(t_column)
            part = gamma * delta
            contribution += part
            columns.append({"column": column, "gamma": gamma, "delta": delta,
                            "contribution": part})
        single = len(columns) == 1
        terms.append(DecompositionTerm(
            variable=variable, contribution=contribution, share=_share(contribution, gap),
            gamma=columns[0]["gamma"] if single else None,
            delta=columns[0]["delta"] if single else None,
            columns=() if single else tuple(columns)))
    return Decomposition(treatment=treatment, outcome=outcome, base=base, added=added,
                         base_estimate=base_fit.coefficient(t_column),
                         full_estimate=full_fit.coefficient(t_column), terms=tuple(terms))


def _share(part: float, gap: float) -> float | None:
    # share of the gap; undefined when the gap is (numerically) zero
    if gap == 0 or not math.isfinite(gap):
        return None
    return part / gap


@dataclass(frozen=True)
class ControlShift:
    """What adding one control to a valid set does to the estimate."""

    variable: str
    valid_set: tuple[str, ...]
    estimate_without: float
    estimate_with: float
    std_error_with: float
    gamma: float | None
    delta: float | None
    problems: tuple[str, ...] = ()

    @property
    def shift(self) -> float:
        """:math:`\\beta_{with} - \\beta_{without} = -\\gamma\\delta`."""
        return self.estimate_with - self.estimate_without

    def to_dict(self) -> dict[str, Any]:
        return {"variable": self.variable, "valid_set": list(self.valid_set),
                "estimate_without": self.estimate_without, "estimate_with": self.estimate_with,
                "shift": self.shift, "std_error_with": self.std_error_with,
                "gamma": self.gamma, "delta": self.delta, "problems": list(self.problems)}


def added_control_shifts(moments: Moments, treatment: str, outcome: str,
                         valid_set: Sequence[str], controls: Sequence[str], *,
                         problems: Mapping[str, Sequence[str]] | None = None,
                         ) -> tuple[ControlShift, ...]:
    """For each control, the estimate with the valid set alone and with the control added.

    Parameters
    ----------
    moments : Moments
    treatment, outcome : str
    valid_set : sequence of str
        A valid adjustment set (the reference estimate).
    controls : sequence of str
        Controls to add one at a time (typically the invalid declared ones).
    problems : mapping, optional
        Control -> problem kinds, copied into the result for the report.

    Notes
    -----
    By the identity of :func:`decompose` with ``base = valid_set``:
    :math:`\\beta_{with} - \\beta_{without} = -\\gamma\\,\\delta`.
    """
    valid = tuple(valid_set)
    shifts = []
    without: LinearFit = fit(moments, outcome, (treatment, *valid))
    (t_column,) = moments.select([treatment])
    for control in controls:
        if control in valid:
            continue
        parts = decompose(moments, treatment, outcome, [control], base=valid)
        with_fit = fit(moments, outcome, (treatment, *valid, control))
        term = parts.terms[0]
        shifts.append(ControlShift(
            variable=control, valid_set=valid,
            estimate_without=without.coefficient(t_column),
            estimate_with=with_fit.coefficient(t_column),
            std_error_with=with_fit.se(t_column), gamma=term.gamma, delta=term.delta,
            problems=tuple((problems or {}).get(control, ()))))
    return tuple(shifts)
