"""The verdict paragraph (causalcheck/report/verdict.py): golden-free checks against its JSON.

Every number a verdict prints must be a number of the result document (or a share or ratio
of two of them), rounded as printed. The check parses the numbers out of the paragraph, so it
fails whenever a sentence quotes a number the document does not hold or rounds one wrongly.
"""

from __future__ import annotations

import json
import math
import re
from pathlib import Path

import pytest
from report_documents import ALL_KINDS, audit_document, document_for, vet_document

from causalcheck.cli import main
from causalcheck.report.context import attach_context, study_context
from causalcheck.report.numbers import percent, significant
from causalcheck.report.verdict import (
    benchmark_fields,
    build_verdict,
    decomposition_shares,
    strongest_benchmark,
)
from causalcheck.study import parse_study

ROOT = Path(__file__).resolve().parents[1]
SCENARIOS = ROOT / "scenarios"
NUMBER = re.compile(r"(?<![\w.\-+])[-+]?\d[\d,]*(?:\.\d+)?(?:e[-+]?\d+)?%?")


def _flatten(value, out):
    if isinstance(value, dict):
        for item in value.values():
            _flatten(item, out)
    elif isinstance(value, (list, tuple)):
        out.append(float(len(value)))
        for item in value:
            _flatten(item, out)
    elif isinstance(value, (int, float)) and not isinstance(value, bool) \
            and math.isfinite(value):
        out.append(float(value))


def allowed_numbers(document: dict) -> list[float]:
    """Every number of the document, their absolute values, and the derived ones a verdict
    may quote: the naive − adjusted gap, each covariate's share of it, 1 − alpha, and a plan's
    bias in standard errors."""
    values: list[float] = []
    _flatten(document, values)
    estimates = document.get("estimates") or {}
    naive = (estimates.get("naive") or {}).get("estimate")
    adjusted = (estimates.get("adjusted") or {}).get("estimate")
    if naive is not None and adjusted is not None:
        gap = naive - adjusted
        values.append(gap)
        for entry in document.get("decomposition") or []:
            if gap:
                values.append(entry["contribution"] / gap)
    alpha = document.get("alpha") or (document.get("study") or {}).get("alpha") or 0.05
    values += [1 - alpha, alpha]
    for option in document.get("options") or []:
        if option.get("std_error"):
            values.append(abs(option["bias"]) / option["std_error"])
    baseline = document.get("baseline") or {}
    if baseline.get("std_error"):
        values.append(abs(baseline["bias"]) / baseline["std_error"])
    claims = document.get("claims") or []
    if claims:
        # the wording verdict counts sentences by strength, rewording and prescription
        values += [float(sum(1 for c in claims if (c.get("level") or 0) >= 1)),
                   float(sum(1 for c in claims if (c.get("level") or 0) >= 4)),
                   float(sum(1 for c in claims if c.get("suggestion"))),
                   float(sum(1 for c in claims if c.get("prescriptive")))]
    recommended = document.get("recommended") or {}
    if recommended.get("bias") is not None and document.get("true_effect"):
        values.append(abs(recommended["bias"] / document["true_effect"]))
    return values + [abs(v) for v in values]


def _strip_quoted(text: str, document: dict) -> str:
    """Remove the quoted claim, labels and units: numbers in them are the user's words."""
    study = document.get("study") or {}
    pieces = [study.get("claim") or ""]
    for facts in (study.get("variables") or {}).values():
        pieces += [facts.get("label") or "", facts.get("unit") or ""]
    for name, facts in (document.get("variables") or {}).items():
        pieces += [name, facts.get("label") or ""]
    for piece in sorted((p for p in pieces if p), key=len, reverse=True):
        text = text.replace(piece, " ")
    # citations such as "(Henckel, Perković & Maathuis 2022)" carry years, not results
    return re.sub(r"\([A-Z][^()]*\b(19|20)\d\d\)", " ", text)


def unexplained_numbers(text: str, document: dict) -> list[str]:
    """Numbers printed in ``text`` that no number of ``document`` rounds to."""
    values = allowed_numbers(document)
    bad = []
    for token in NUMBER.findall(_strip_quoted(text, document)):
        is_percent = token.endswith("%")
        raw = token.rstrip("%").replace(",", "")
        shown = float(raw)
        mantissa = raw.split("e")[0]
        decimals = len(mantissa.split(".")[1]) if "." in mantissa else 0
        if "e" in raw:
            exponent = int(raw.split("e")[1])
            tolerance = 0.5 * 10 ** (exponent - decimals)
        elif decimals == 0:
            # an integer shown to significant figures: "12,300" stands for 12,250 to 12,350
            digits = raw.lstrip("-+")
            tolerance = 0.5 * 10 ** (len(digits) - len(digits.rstrip("0"))) if digits != "0" \
                else 0.5
        else:
            tolerance = 0.5 * 10 ** -decimals
        if is_percent:
            shown, tolerance = shown / 100, tolerance / 100
        if not any(abs(shown - v) <= tolerance * (1 + 1e-9) + 1e-12 for v in values):
            bad.append(token)
    return bad


@pytest.mark.parametrize("kind", ALL_KINDS)
def test_every_number_in_the_verdict_comes_from_the_document(kind):
    document = document_for(kind)
    text = build_verdict(document).text
    assert unexplained_numbers(text, document) == []


def test_the_check_catches_a_number_the_document_does_not_hold():
    document = vet_document()
    text = build_verdict(document).text.replace("1.95", "1.97")
    assert unexplained_numbers(text, document) == ["1.97"]


def test_audit_verdict_quotes_the_headline_numbers():
    document = audit_document()
    verdict = build_verdict(document)
    text = verdict.text
    estimates = document["estimates"]
    assert significant(estimates["naive"]["estimate"]) in text
    assert significant(estimates["adjusted"]["estimate"]) in text
    assert percent(document["sensitivity"]["robustness_value"]) in text
    assert percent(document["sensitivity"]["robustness_value_ci"]) in text
    # in the order the reader asks: claim, controls, estimates, gap, robustness, next step
    order = ["The claim under test", "declared controls", "naive slope", "Of the gap",
             "hidden confounder explaining", "Measure Conservation-mindedness next"]
    positions = [text.index(marker) for marker in order]
    assert positions == sorted(positions)
    assert verdict.lead.startswith("The claim under test")
    assert verdict.next_step.startswith("Measure Conservation-mindedness next (cost 25)")
    # units from [variables]: the outcome's unit, and the binary treatment as a contrast
    assert "m3/month (took the rebate vs not)" in text


def test_shares_of_the_gap_sum_to_one():
    rows = decomposition_shares(audit_document())
    assert sum(r["share"] for r in rows) == pytest.approx(1.0, abs=1e-12)
    assert [abs(r["contribution"]) for r in rows] == sorted(
        (abs(r["contribution"]) for r in rows), reverse=True)


def test_benchmark_fields_read_the_sensitivity_rows():
    row = {"benchmark": "income", "kd": 2.0, "ky": 2.0, "r2dxj": 0.01, "r2yxj": 0.1,
           "r2dz": 0.02, "r2yz": 0.2, "adjusted_estimate": 0.5}
    fields = benchmark_fields(row)
    assert (fields["variable"], fields["multiplier"], fields["r2_treatment"],
            fields["r2_outcome"]) == ("income", 2.0, 0.02, 0.2)
    strongest = strongest_benchmark(audit_document()["sensitivity"]["benchmarks"])
    assert strongest["variable"] in ("garden", "income") and strongest["multiplier"] == 1.0


def test_vet_verdict_states_robustness_in_words():
    text = build_verdict(vet_document()).text
    assert "of the remaining variance of both the treatment and the outcome" in text
    assert "would bring the estimate to the threshold, 0" in text
    assert "points per 10 min/day" in text
    # a reviewer cannot re-estimate: the next step asks the authors for a valid set
    assert text.endswith("and which common causes of the treatment and the outcome they "
                         "considered.")


def test_verdict_without_a_claim_or_graph_still_reads():
    document = {"schema": "causalcheck/vet/1", "estimate": -0.5, "std_error": 0.1, "t": -5.0,
                "dof": 50, "robustness_value": 0.5, "robustness_value_ci": 0.3,
                "partial_r2": 0.33, "e_value": None}
    verdict = build_verdict(document)
    assert verdict.lead is None
    assert verdict.text.startswith("The reported estimate is -0.5")


def test_unknown_schema_is_a_programming_error():
    with pytest.raises(KeyError, match="no verdict builder"):
        build_verdict({"schema": "causalcheck/nothing/1"})


def test_study_context_carries_claim_labels_units_and_edges():
    study = parse_study('[study]\ntreatment = "x"\noutcome = "y"\nclaim = "x raises y."\n'
                        '[variables]\ny = { label = "Score", unit = "points" }\n'
                        '[graph]\nedges = ["z -> x", "z -> y", "x -> y"]\n')
    context = study_context(study)
    assert context["claim"] == "x raises y."
    assert context["variables"]["y"] == {"label": "Score", "unit": "points",
                                         "kind": "numeric", "measured": True, "cost": 0.0}
    assert ["x", "y"] in context["edges"]
    document = attach_context({"schema": "causalcheck/vet/1", "estimate": 1.0}, study)
    # the graph's identification is added for a command whose result lacks it
    assert document["variables"]["z"]["role"] == "confounder"
    assert document["study"]["title"] == ""


# --------------------------------------------------------------------------------------------
# The scenarios, run as a user would


def _json(capsys, *argv: str) -> dict:
    assert main([*argv, "--format", "json"]) == 0
    return json.loads(capsys.readouterr().out)


@pytest.mark.parametrize("argv", [
    ("audit", str(SCENARIOS / "water_rebate" / "study.toml")),
    ("controls", str(SCENARIOS / "water_rebate" / "study.toml")),
    ("vet", str(SCENARIOS / "reading_app_review" / "study.toml")),
    ("plan", str(SCENARIOS / "cycling_plan" / "study.toml")),
])
def test_scenario_verdicts_quote_only_their_json(capsys, argv):
    document = _json(capsys, *argv)
    assert document["verdict"] == build_verdict(document).text
    assert unexplained_numbers(document["verdict"], document) == []
    assert document["cautions"] and all(isinstance(c, str) for c in document["cautions"])


def test_wording_verdict_is_the_reviews_own_paragraph():
    # the wording module's paragraph and the shared builder must say the same thing
    from causalcheck.study import load_study
    from causalcheck.wording import review_file

    study = load_study(SCENARIOS / "reading_app_review" / "study.toml")
    for robustness_value in (None, 0.04, 0.25):
        review = review_file(SCENARIOS / "reading_app_review" / "report.md", study=study,
                             robustness_value=robustness_value)
        document = attach_context(review.to_dict(), study)
        assert build_verdict(document).text == review.verdict_paragraph()
        assert unexplained_numbers(build_verdict(document).text, document) == []


# --------------------------------------------------------------------------------------------
# The extreme case, ratio measures, names kept as written, the report's own wording


def _vet_document(reported, **options) -> dict:
    from causalcheck.vet import vet

    return vet(reported, **options).to_dict()


def test_extreme_case_sentence_uses_the_value_to_a_nonzero_threshold():
    # Cinelli & Hazlett (2020), Sec. 4 (from memory): a confounder explaining all the outcome's
    # residual variance brings the estimate to θ when its partial R² with the treatment is
    # f_θ²/(1 + f_θ²), f_θ = |estimate − θ| / (se √dof); only for θ = 0 is that the
    # treatment's partial R² with the outcome, t²/(t² + dof).
    from causalcheck.study import Reported

    estimate, se, dof, theta = 1.95, 0.60, 835, 0.5
    document = _vet_document(Reported(estimate=estimate, std_error=se, dof=dof),
                             threshold=theta)
    f2 = ((estimate - theta) / (se * math.sqrt(dof))) ** 2
    expected = f2 / (1 + f2)                                   # 0.694...%
    partial_r2 = (estimate / se) ** 2 / ((estimate / se) ** 2 + dof)   # 1.25%
    text = build_verdict(document).text
    sentence = next(s for s in build_verdict(document).sentences
                    if s.startswith("Even a confounder that explained all"))
    assert f"at least {percent(expected)} of the treatment's" in sentence
    assert percent(expected) == "0.69%" and percent(partial_r2) == "1.2%"
    assert "1.2%" not in text and sentence.endswith("to bring the estimate to 0.5.")
    # without the extreme-case block, partial_r2 stands in only at a threshold of 0
    bare = {key: document[key] for key in ("schema", "estimate", "std_error", "t", "dof",
                                           "partial_r2", "robustness_value",
                                           "robustness_value_ci", "threshold")}
    assert "explained all" not in build_verdict(bare).text
    assert "at least 1.2% of" in build_verdict(dict(bare, threshold=0.0)).text


def test_extreme_share_reads_the_audit_block_too():
    from causalcheck.report.verdict import extreme_share

    block = {"partial_r2": 0.0125, "extreme_r2dz": 0.0069, "threshold": 0.5}
    assert extreme_share(block, threshold=0.5) == 0.0069
    assert extreme_share({"partial_r2": 0.0125}, threshold=0.5) is None


def test_ratio_measure_never_shows_the_log_scale_se_as_the_ratios():
    from causalcheck.study import Reported

    document = _vet_document(Reported(estimate=1.8, std_error=0.2, measure="risk_ratio"))
    assert document["scale"] == "log"
    sentence = build_verdict(document).sentences[0]
    # the interval of the ratio: exp(log 1.8 ± 1.96 × 0.2), normal quantile (common practice)
    assert "95% CI 1.22 to 2.66, computed from the standard error of the log ratio" in sentence
    assert "t of the log ratio = 2.94" in sentence and "0.2" not in sentence
    # a document without the interval names the scale of its standard error
    no_ci = dict(document, ci_low=None, ci_high=None)
    sentence = build_verdict(no_ci).sentences[0]
    assert "log-scale standard error 0.2" in sentence
    assert re.search(r"(?<!log-scale )standard error", sentence) is None


def test_sentences_starting_with_a_variable_name_keep_its_case(tmp_path, capsys):
    from causalcheck.report.context import upper_first

    study = tmp_path / "study.toml"
    study.write_text('[study]\ntreatment = "offer"\noutcome = "income"\n'
                     '[graph]\nedges = ["offer -> raise_later", "raise_later -> income",'
                     ' "offer -> income", "skills -> offer", "skills -> income"]\n'
                     '[controls]\nused = ["raise_later", "skills"]\n')
    document = _json(capsys, "controls", str(study))
    assert "raise_later is a mediator" in document["verdict"]
    assert "Raise_later" not in document["verdict"]
    assert upper_first("skills is a confounder", identifiers={"skills"}) == \
        "skills is a confounder"
    assert upper_first("the declared controls are valid") == "The declared controls are valid"


def test_report_notes_keep_identifiers_lowercase():
    from causalcheck.report.markdown import render_markdown
    from causalcheck.study import Reported

    document = _vet_document(Reported(estimate=1.8, std_error=0.2, measure="risk_ratio"))
    # a note that starts with a code word keeps it as written
    document["notes"] = [*document.get("notes", []), "log_estimate is the log of the ratio"]
    markdown = render_markdown(document)
    assert "- log_estimate is the log of the ratio" in markdown
    assert "(std_error, t and log_estimate in the JSON)" in markdown
    assert "Std_error" not in markdown and "Log_estimate" not in markdown


WORDING_BLOCK = {
    "reviewed": True, "source": "report.md", "supported_level": 2, "supported_grade": "hedged",
    "evidence": {"design": "observational", "robustness_value": 0.04}, "sentences": 9,
    "claims": [{"line": 1, "sentence": "X cut Y.", "level": 5, "grade": "causal",
                "prescriptive": False, "verdict": "stronger than the evidence",
                "suggestion": "X was associated with lower Y."},
               {"line": 4, "sentence": "X was linked to Y.", "level": 1,
                "grade": "association", "prescriptive": False, "verdict": "supported",
                "suggestion": None}],
    "notes": []}


def test_vet_and_audit_verdicts_count_the_overreaching_sentences():
    for document in (vet_document(), audit_document()):
        verdict = build_verdict(dict(document, wording=WORDING_BLOCK))
        sentence = next(s for s in verdict.sentences if s.startswith("In the report text"))
        assert sentence == ("In the report text, 1 of the 2 sentences that link the treatment "
                            "and the outcome claims more than an observational design with "
                            "robustness value 0.04 supports (up to level 2, hedged); the "
                            "wording section suggests a rewording.")
        # one sentence, just before the next step, which stays last
        assert verdict.sentences[-1] == verdict.next_step
        assert verdict.sentences[-2] == sentence
        assert sentence in verdict.findings
    supported = dict(WORDING_BLOCK, claims=[WORDING_BLOCK["claims"][1]])
    text = build_verdict(dict(vet_document(), wording=supported)).text
    assert "1 sentence links the treatment and the outcome, and it claims no more than" in text
    unread = {"reviewed": False, "error": "text file 'x.md' does not exist", "claims": None,
              "supported_level": None}
    text = build_verdict(dict(vet_document(), wording=unread)).text
    assert "could not be reviewed; the wording section says why" in text
    assert "In the report text" not in build_verdict(vet_document()).text


def test_implications_sentence_follows_the_holm_decision_not_raw_p_values():
    # raw p = 0.03 < alpha, but after Holm over two tests it is not rejected: the verdict must
    # say what the table says (the audit's `rejected`)
    document = audit_document()
    document["implications"] = [
        {"left": "income", "right": "conservation", "given": [], "statistic": 2.2,
         "p_value": 0.03, "holm_p_value": 0.06, "rejected": False},
        {"left": "garden", "right": "answered_survey", "given": [], "statistic": 0.4,
         "p_value": 0.52, "holm_p_value": 0.52, "rejected": False},
    ]
    text = build_verdict(document).text
    assert "do not contradict the 2 independences" in text
    document["implications"][0].update(p_value=0.001, holm_p_value=0.002, rejected=True)
    text = build_verdict(document).text
    assert "contradict 1 of the 2 independences" in text and "Household income" in text
