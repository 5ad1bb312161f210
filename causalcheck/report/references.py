"""The methods a report used, each with what it does and its full citations.

:func:`methods_for` reads a result document and lists the methods behind its numbers, in the
order a reader meets them; the Markdown and HTML reports print them under "Methods and
references", and ``docs/methods.md`` gives the formulas.

Examples
--------
>>> [m.name for m in methods_for({"schema": "causalcheck/wording/1"})]
['Causal-language review']
>>> CITATIONS["cinelli_hazlett_2020"].split(" (")[0]
'Cinelli, C., & Hazlett, C.'
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

from .context import kind_of

__all__ = ["CITATIONS", "Method", "methods_for"]

CITATIONS: dict[str, str] = {
    "pearl_1995": "Pearl, J. (1995). Causal diagrams for empirical research. Biometrika, 82(4), "
                  "669-688.",
    "shpitser_2010": "Shpitser, I., VanderWeele, T. J., & Robins, J. M. (2010). On the validity "
                     "of covariate adjustment for estimating causal effects. Proceedings of the "
                     "26th Conference on Uncertainty in Artificial Intelligence (UAI), 527-536.",
    "perkovic_2018": "Perković, E., Textor, J., Kalisch, M., & Maathuis, M. H. (2018). Complete "
                     "graphical characterization and construction of adjustment sets in Markov "
                     "equivalence classes of ancestral graphs. Journal of Machine Learning "
                     "Research, 18(220), 1-62.",
    "van_der_zander_2019": "van der Zander, B., Liśkiewicz, M., & Textor, J. (2019). "
                           "Separators and adjustment sets in causal graphs: complete criteria "
                           "and an algorithmic framework. Artificial Intelligence, 270, 1-40.",
    "henckel_2022": "Henckel, L., Perković, E., & Maathuis, M. H. (2022). Graphical criteria "
                    "for efficient total effect estimation via adjustment in causal linear "
                    "models. Journal of the Royal Statistical Society: Series B, 84(2), "
                    "579-599.",
    "cinelli_forney_pearl_2022": "Cinelli, C., Forney, A., & Pearl, J. (2022). A crash course "
                                 "in good and bad controls. Sociological Methods & Research "
                                 "(published online 2022).",
    "angrist_pischke_2009": "Angrist, J. D., & Pischke, J.-S. (2009). Mostly Harmless "
                            "Econometrics: An Empiricist's Companion. Princeton University "
                            "Press (Sec. 3.2: omitted-variables bias).",
    "gelbach_2016": "Gelbach, J. B. (2016). When do covariates matter? And which ones, and how "
                    "much? Journal of Labor Economics, 34(2), 509-543.",
    "mackinnon_white_1985": "MacKinnon, J. G., & White, H. (1985). Some heteroskedasticity-"
                            "consistent covariance matrix estimators with improved finite "
                            "sample properties. Journal of Econometrics, 29(3), 305-325.",
    "chan_1979": "Chan, T. F., Golub, G. H., & LeVeque, R. J. (1979). Updating formulae and a "
                 "pairwise algorithm for computing sample variances. Technical report "
                 "STAN-CS-79-773, Department of Computer Science, Stanford University.",
    "cinelli_hazlett_2020": "Cinelli, C., & Hazlett, C. (2020). Making sense of sensitivity: "
                            "extending omitted variable bias. Journal of the Royal Statistical "
                            "Society: Series B, 82(1), 39-67.",
    "oster_2019": "Oster, E. (2019). Unobservable selection and coefficient stability: theory "
                  "and evidence. Journal of Business & Economic Statistics, 37(2), 187-204.",
    "altonji_2005": "Altonji, J. G., Elder, T. E., & Taber, C. R. (2005). Selection on "
                    "observed and unobserved variables: assessing the effectiveness of Catholic "
                    "schools. Journal of Political Economy, 113(1), 151-184.",
    "vanderweele_ding_2017": "VanderWeele, T. J., & Ding, P. (2017). Sensitivity analysis in "
                             "observational research: introducing the E-value. Annals of "
                             "Internal Medicine, 167(4), 268-274.",
    "ding_vanderweele_2016": "Ding, P., & VanderWeele, T. J. (2016). Sensitivity analysis "
                             "without assumptions. Epidemiology, 27(3), 368-377.",
    "vanderweele_2017": "VanderWeele, T. J. (2017). On a square-root transformation of the odds "
                        "ratio for a common outcome. Epidemiology, 28(6), e58-e60.",
    "chinn_2000": "Chinn, S. (2000). A simple method for converting an odds ratio to effect "
                  "size for use in meta-analysis. Statistics in Medicine, 19(22), 3127-3131.",
    "fisher_1924": "Fisher, R. A. (1924). The distribution of the partial correlation "
                   "coefficient. Metron, 3, 329-332.",
    "holm_1979": "Holm, S. (1979). A simple sequentially rejective multiple test procedure. "
                 "Scandinavian Journal of Statistics, 6(2), 65-70.",
    "wright_1934": "Wright, S. (1934). The method of path coefficients. Annals of Mathematical "
                   "Statistics, 5(3), 161-215.",
    "wishart_1928": "Wishart, J. (1928). The generalised product moment distribution in "
                    "samples from a normal multivariate population. Biometrika, 20A(1/2), "
                    "32-52.",
    "mckay_1979": "McKay, M. D., Beckman, R. J., & Conover, W. J. (1979). A comparison of "
                  "three methods for selecting values of input variables in the analysis of "
                  "output from a computer code. Technometrics, 21(2), 239-245.",
    "cohen_1988": "Cohen, J. (1988). Statistical Power Analysis for the Behavioral Sciences "
                  "(2nd ed.). Lawrence Erlbaum Associates.",
    "sumner_2014": "Sumner, P., Vivian-Griffiths, S., Boivin, J., Williams, A., Venetis, C. A., "
                   "Davies, A., ... Chambers, C. D. (2014). The association between "
                   "exaggeration in health related science news and academic press releases: "
                   "retrospective observational study. BMJ, 349, g7015.",
    "haber_2022": "Haber, N. A., Wieten, S. E., Rohrer, J. M., Arah, O. A., Tennant, P. W. G., "
                  "Stuart, E. A., ... Fox, M. P. (2022). Causal and associational language in "
                  "observational health research: a systematic evaluation. American Journal "
                  "of Epidemiology, 191(12), 2084-2097.",
}


@dataclass(frozen=True)
class Method:
    """A method a report used: its name, one sentence on what it does, its citations."""

    name: str
    summary: str
    references: tuple[str, ...]

    def citations(self) -> list[str]:
        return [CITATIONS[key] for key in self.references]

    def to_dict(self) -> dict[str, Any]:
        return {"name": self.name, "summary": self.summary, "references": self.citations()}


_ADJUSTMENT = Method(
    "Valid adjustment sets from the causal graph",
    "A set of measured variables is valid when it blocks every non-causal path between the "
    "treatment and the outcome and contains nothing the treatment affects on the way to the "
    "outcome (the adjustment criterion, which extends the back-door criterion); every minimal "
    "valid set and the cheapest one are listed, and the optimal set is the valid set with the "
    "smallest asymptotic variance in linear models.",
    ("pearl_1995", "shpitser_2010", "perkovic_2018", "van_der_zander_2019", "henckel_2022"))
_BAD_CONTROLS = Method(
    "Good and bad controls",
    "Controls are classed by their place in the graph: confounders to adjust for; mediators, "
    "other descendants of the treatment and colliders that adjusting for would bias.",
    ("cinelli_forney_pearl_2022",))
_REGRESSION = Method(
    "Regressions from sufficient statistics",
    "Every slope is solved from one pass over the data (counts, means and centred "
    "cross-products, merged exactly across batches); robust standard errors are HC1.",
    ("chan_1979", "mackinnon_white_1985"))
_DECOMPOSITION = Method(
    "Omitted-variable bias and its decomposition",
    "The naive slope minus the adjusted slope equals the sum over covariates of γ·δ, γ the "
    "covariate's coefficient in the adjusted regression and δ the slope of the covariate on "
    "the treatment given the rest, so each covariate's share of the gap is exact.",
    ("angrist_pischke_2009", "gelbach_2016"))
_PARTIAL_R2 = Method(
    "Sensitivity to an unmeasured confounder (partial R²)",
    "The bias from a confounder Z is se·√dof·√(R²(Y~Z|D,X)·R²(D~Z|X)/(1−R²(D~Z|X))); the "
    "robustness value is the strength, equal with treatment and outcome, that moves the "
    "estimate (or its confidence interval) to the threshold, and benchmarks bound a confounder "
    "k times as strong as a measured covariate.",
    ("cinelli_hazlett_2020",))
_STABILITY = Method(
    "Coefficient stability",
    "How far the estimate would move if selection on unobservables were as strong as "
    "selection on the observed covariates, given a maximum R².",
    ("oster_2019", "altonji_2005"))
_IMPLICATIONS = Method(
    "Tests of the graph against the data",
    "Each conditional independence the graph implies among measured variables is tested "
    "(partial correlation with Fisher's z, or an F test for categories), with Holm's "
    "adjustment for testing several.",
    ("fisher_1924", "holm_1979"))
_E_VALUE = Method(
    "E-values",
    "The minimum strength of association, on the risk-ratio scale, that a confounder would "
    "need with both treatment and outcome to explain the estimate away; odds and hazard "
    "ratios and standardised differences are first converted to risk ratios.",
    ("vanderweele_ding_2017", "ding_vanderweele_2016", "vanderweele_2017", "chinn_2000"))
_SEM = Method(
    "Planning with a linear structural model",
    "Assumed standardised path strengths define a linear model whose implied covariance "
    "Σ = (I−B)⁻¹Ω(I−B)⁻ᵀ (Wright's path-tracing rules) gives each plan's population bias and "
    "its standard error at the planned n.",
    ("wright_1934", "henckel_2022", "cohen_1988"))
_RANGES = Method(
    "Strength ranges",
    "Strengths given as ranges are swept with a Latin hypercube, and each plan is judged on "
    "its typical and its worst case.",
    ("mckay_1979",))
_SIMULATION = Method(
    "Monte Carlo at the planned size",
    "Sample covariance matrices of n Gaussian rows are drawn from their Wishart distribution, "
    "so that thousands of simulated studies cost one small matrix each.",
    ("wishart_1928",))
_WORDING = Method(
    "Causal-language review",
    "Each sentence that relates the treatment to the outcome is placed on an ordered scale "
    "from no relation to a causal claim, and compared with what the design supports.",
    ("sumner_2014", "haber_2022"))


def methods_for(document: Mapping[str, Any]) -> list[Method]:
    """The methods behind a result document's numbers, in reading order."""
    kind = kind_of(document)
    methods: list[Method] = []
    if kind in ("controls", "audit") or (kind == "vet" and isinstance(document.get("controls"),
                                                                      Mapping)):
        methods += [_ADJUSTMENT, _BAD_CONTROLS]
    if kind == "audit":
        methods += [_REGRESSION, _DECOMPOSITION]
    if kind in ("audit", "vet"):
        sensitivity = document.get("sensitivity") if kind == "audit" else document
        if isinstance(sensitivity, Mapping) and sensitivity.get("robustness_value") is not None:
            methods.append(_PARTIAL_R2)
        if kind == "audit" and isinstance(sensitivity, Mapping) \
                and sensitivity.get("coefficient_stability"):
            methods.append(_STABILITY)
    if kind == "audit" and document.get("implications"):
        methods.append(_IMPLICATIONS)
    if kind == "vet" and document.get("e_value"):
        methods.append(_E_VALUE)
    wording = document.get("wording")
    if kind in ("audit", "vet") and isinstance(wording, Mapping) and wording.get("reviewed"):
        methods.append(_WORDING)
    if kind == "plan":
        methods += [_ADJUSTMENT, _SEM]
        if document.get("range_sweep"):
            methods.append(_RANGES)
        if document.get("simulation"):
            methods.append(_SIMULATION)
    if kind == "wording":
        methods.append(_WORDING)
    return methods
