"""The causal-language review (causalcheck/wording.py): grading, evidence, rewording, input.

The grading is checked against two hand-labelled files of invented sentences:
``tests/data/wording_corpus.tsv`` (277 sentences, written before the rules and labelled as a
careful coder would; the rules were developed while reading it) and
``tests/data/wording_heldout.tsv`` (77 sentences written after the rules were drafted; 0.805
agreement before the lexicon was extended, see ``test_heldout_agreement``). Per-level precision and recall are printed (``pytest -s``) and
put in the assertion messages.
"""

from __future__ import annotations

import time
from collections import Counter
from pathlib import Path

import pytest

from causalcheck.study import parse_study
from causalcheck.wording import (
    CONDITIONAL_CAUSAL_MIN_RV,
    GRADES,
    STRONGER,
    SUPPORTED,
    WEAKER,
    LexiconError,
    TextFileError,
    WordingError,
    assess_evidence,
    default_lexicon,
    extract_text,
    grade_sentence,
    judge_claim,
    load_lexicon,
    read_text_file,
    review_file,
    review_for_study,
    review_text,
    split_sentences,
    study_terms,
    wording_block,
)

DATA = Path(__file__).parent / "data"
CLASSES = ("-", "0", "1", "2", "3", "4", "5")


def read_corpus(name: str) -> list[dict[str, str]]:
    rows = []
    for line in (DATA / name).read_text(encoding="utf-8").splitlines():
        if not line or line.startswith(("#", "id\t")):
            continue
        fields = line.split("\t")
        assert len(fields) == 8, f"{name}: bad row {line!r}"
        keys = ("id", "domain", "level", "prescriptive", "exposure", "outcome", "tags",
                "sentence")
        rows.append(dict(zip(keys, fields)))
    return rows


def grade_row(row: dict[str, str], *, with_terms: bool = True):
    if with_terms:
        return grade_sentence(row["sentence"], exposure_terms=row["exposure"].split("|"),
                              outcome_terms=row["outcome"].split("|"))
    return grade_sentence(row["sentence"])


def agreement_table(rows, *, with_terms: bool = True) -> tuple[float, str, list[str]]:
    """Overall agreement, a per-level precision/recall table, and the disagreements."""
    confusion: Counter[tuple[str, str]] = Counter()
    wrong = []
    for row in rows:
        graded = grade_row(row, with_terms=with_terms)
        got = "-" if graded.level is None else str(graded.level)
        confusion[(row["level"], got)] += 1
        if got != row["level"]:
            wrong.append(f"  #{row['id']} expected {row['level']} got {got}: {row['sentence']}")
    lines = ["level  grade            n   precision  recall"]
    for c in CLASSES:
        truth = sum(v for (t, _), v in confusion.items() if t == c)
        predicted = sum(v for (_, g), v in confusion.items() if g == c)
        hit = confusion[(c, c)]
        precision = f"{hit / predicted:.2f}" if predicted else "  - "
        recall = f"{hit / truth:.2f}" if truth else "  - "
        name = "(no claim)" if c == "-" else GRADES[int(c)]
        lines.append(f"{c:>5}  {name:<15} {truth:>3}   {precision:>9}  {recall:>6}")
    agree = sum(confusion[(c, c)] for c in CLASSES) / len(rows)
    lines.append(f"overall agreement {agree:.3f} on {len(rows)} sentences")
    return agree, "\n".join(lines), wrong


def prescriptive_table(rows) -> tuple[float, float, str]:
    tp = fp = fn = 0
    for row in rows:
        got = grade_row(row).prescriptive
        want = row["prescriptive"] == "1"
        tp += got and want
        fp += got and not want
        fn += want and not got
    precision = tp / (tp + fp) if tp + fp else 1.0
    recall = tp / (tp + fn) if tp + fn else 1.0
    return precision, recall, f"prescriptive: precision {precision:.2f}, recall {recall:.2f}"


# --------------------------------------------------------------------------------------------
# The labelled corpus


def test_corpus_covers_every_level_phenomenon_and_domain():
    rows = read_corpus("wording_corpus.tsv")
    assert len(rows) >= 200
    levels = Counter(r["level"] for r in rows)
    assert set(levels) == set(CLASSES), levels
    assert min(levels.values()) >= 15, levels
    tags = Counter(t for r in rows for t in r["tags"].split(","))
    for tag in ("negation", "hedge", "modal", "nominal", "comparative", "prescriptive",
                "nonclaim", "can", "causal", "association"):
        assert tags[tag] >= 5, (tag, tags)
    assert {r["domain"] for r in rows} == {"health", "education", "economics",
                                             "environment"}
    assert sum(r["prescriptive"] == "1" for r in rows) >= 20
    assert len({r["sentence"] for r in rows}) == len(rows), "a sentence is repeated"


def test_corpus_agreement_with_study_terms():
    rows = read_corpus("wording_corpus.tsv")
    agree, table, wrong = agreement_table(rows)
    precision, recall, presc = prescriptive_table(rows)
    report = f"{table}\n{presc}\n" + "\n".join(wrong)
    print("\nwording_corpus.tsv, with each row's exposure and outcome words\n" + report)
    assert agree >= 0.90, report
    assert precision >= 0.90 and recall >= 0.90, report


def test_corpus_agreement_without_terms():
    # Without a study every relation expression with words on both sides counts.
    rows = read_corpus("wording_corpus.tsv")
    agree, table, wrong = agreement_table(rows, with_terms=False)
    report = table + "\n" + "\n".join(wrong)
    print("\nwording_corpus.tsv, no exposure or outcome words\n" + report)
    assert agree >= 0.90, report


def test_heldout_agreement():
    # Held-out sentences. Measured before anything was changed because of them: 0.805 with
    # terms (15 of 77 wrong, mostly verbs absent from the lexicon such as "slow", "limit",
    # "encourage", and temporal wording such as "rose after") - the honest estimate for new
    # text. The lexicon then gained a general list of common causal verbs and the temporal
    # phrases, after which this file gives 0.948; it is no longer held out, and this bar only
    # guards against regressions.
    rows = read_corpus("wording_heldout.tsv")
    agree, table, wrong = agreement_table(rows)
    report = table + "\n" + "\n".join(wrong)
    print("\nwording_heldout.tsv (held out), with terms\n" + report)
    assert len(rows) >= 70
    assert agree >= 0.85, report


# --------------------------------------------------------------------------------------------
# The published schemes' own kinds of example (recalled from memory)


@pytest.mark.parametrize("sentence, level", [
    # Sumner et al. (2014, BMJ), categories of causal claims, from memory:
    ("Coffee was not associated with heart disease.", 0),  # explicit statement of no relation
    ("Coffee is associated with heart disease.", 1),  # correlational
    ("Coffee might increase the risk of heart disease.", 3),  # conditional causal
    ("Coffee could cause heart disease.", 3),  # conditional causal
    ("Coffee can cause heart disease.", 4),  # can cause
    ("Coffee causes heart disease.", 5),  # causal
    ("Coffee increases the risk of heart disease.", 5),  # causal
])
def test_sumner_2014_categories(sentence, level):
    assert grade_sentence(sentence, exposure_terms=["coffee"],
                          outcome_terms=["heart disease"]).level == level


def test_sumner_2014_advice_is_coded_separately():
    # Sumner et al. (2014) coded advice to readers apart from causal strength (from memory).
    advice = grade_sentence("People should drink less coffee, which increases blood pressure.",
                            exposure_terms=["coffee"], outcome_terms=["blood pressure"])
    assert advice.prescriptive and advice.level == 5
    plain = grade_sentence("Coffee increases blood pressure.")
    assert not plain.prescriptive and plain.level == 5


def test_haber_2022_root_words_and_modifiers():
    # Haber et al. (2022, Am. J. Epidemiol.) rated "associated"/"correlated"/"linked" weak
    # and "effect"/"cause"/"impact" strong, and found "may" and "suggest" to weaken a claim
    # (from memory). The scale orders them the same way.
    terms = {"exposure_terms": ["sugar"], "outcome_terms": ["obesity"]}
    weak = [grade_sentence(s, **terms).level for s in (
        "Sugar was associated with obesity.", "Sugar was correlated with obesity.",
        "Sugar was linked to obesity.")]
    strong = [grade_sentence(s, **terms).level for s in (
        "The effect of sugar on obesity was large.", "Sugar causes obesity.",
        "The impact of sugar on obesity was large.")]
    modified = [grade_sentence(s, **terms).level for s in (
        "Sugar may affect obesity.", "These results suggest that sugar affects obesity.")]
    assert weak == [1, 1, 1] and strong == [5, 5, 5] and modified == [3, 3]


# --------------------------------------------------------------------------------------------
# The rules, one phenomenon at a time


@pytest.mark.parametrize("sentence, level", [
    ("The grant did not reduce bills.", 0),
    ("The grant didn't reduce bills.", 0),
    ("The grant never reduced bills.", 0),
    ("There is no evidence that the grant reduced bills.", 0),
    ("We found no association between the grant and bills.", 0),
    ("The grant had no measurable effect on bills.", 0),
    ("The grant was not significantly associated with bills.", 0),
    ("The association between the grant and bills was not statistically significant.", 0),
    ("The grant is unlikely to reduce bills.", 0),
    ("The grant failed to reduce bills.", 0),
    ("The grant and bills were unrelated.", 0),
    ("Not only did the grant reduce bills, it raised comfort.", 5),  # not a negation
    ("Not surprisingly, the grant reduced bills.", 5),
    ("Homes that did not get the grant had higher bills.", 1),  # negation inside the clause
    ("The grant was associated with lower bills, but did not cause them.", 1),
])
def test_negation(sentence, level):
    assert grade_sentence(sentence, exposure_terms=["grant"],
                          outcome_terms=["bills"]).level == level


@pytest.mark.parametrize("sentence, level", [
    ("The grant appears to be associated with lower bills.", 2),
    ("The grant may be linked to lower bills.", 2),
    ("Homes with the grant tended to have lower bills.", 2),
    ("The grant may reduce bills.", 3),
    ("The grant could have reduced bills.", 3),
    ("The grant probably reduced bills.", 3),
    ("The grant is likely to reduce bills.", 3),
    ("The grant appears to have reduced bills.", 3),
    ("Our results suggest that the grant reduced bills.", 3),
    ("The grant has the potential to reduce bills.", 3),
    ("The grant can reduce bills.", 4),
    ("The grant is able to reduce bills.", 4),
    ("The grant will reduce bills.", 5),
    ("The grant has been shown to reduce bills.", 5),
])
def test_hedges_and_modal_verbs(sentence, level):
    assert grade_sentence(sentence, exposure_terms=["grant"],
                          outcome_terms=["bills"]).level == level


@pytest.mark.parametrize("sentence", [
    "The effect of the grant on bills was large.",
    "The grant's impact on bills was large.",
    "The grant had a large influence on bills.",
    "The fall in bills was due to the grant.",
    "Bills fell as a result of the grant.",
    "Because of the grant, bills fell.",
    "The fall in bills is attributable to the grant.",
    "The grant was responsible for lower bills.",
    "Lower bills were caused by the grant.",
    "The grant is a major cause of lower bills.",
])
def test_nominalisations_and_connectives_are_causal(sentence):
    graded = grade_sentence(sentence, exposure_terms=["grant"], outcome_terms=["bills"])
    assert graded.level == 5, graded


@pytest.mark.parametrize("sentence, level", [
    ("Households that received the grant had lower bills than other households.", 1),
    ("Those with the grant paid lower bills.", 1),
    ("Bills were lower among grant recipients.", 1),
    ("Grant recipients did not have lower bills.", 0),
    ("Grant recipients seemed to have lower bills.", 2),
])
def test_comparatives(sentence, level):
    assert grade_sentence(sentence, exposure_terms=["grant"],
                          outcome_terms=["bills"]).level == level


@pytest.mark.parametrize("sentence", [
    "We examined whether the grant reduced bills.",
    "Did the grant reduce bills?",
    "We estimate the effect of the grant on bills.",
    "To assess the impact of the grant on bills, we used meter data.",
    "The grant was introduced in 2021 and bills were measured monthly.",
    "We fitted random effects models of bills by grant status.",
])
def test_not_a_claim(sentence):
    graded = grade_sentence(sentence, exposure_terms=["grant"], outcome_terms=["bills"])
    assert graded.level is None, graded


@pytest.mark.parametrize("sentence, prescriptive", [
    ("Councils should extend the grant.", True),
    ("We recommend extending the grant.", True),
    ("Landlords must insulate their homes.", True),
    ("Households are advised to apply early.", True),
    ("Avoid sugary drinks.", True),
    ("Exercise improves mood.", False),  # a noun, not an instruction
    ("The grant reduced bills.", False),
])
def test_prescriptive_flag(sentence, prescriptive):
    assert grade_sentence(sentence).prescriptive is prescriptive


def test_terms_link_only_the_exposure_and_the_outcome():
    # A relation between other things is not a claim about the study's question.
    terms = {"exposure_terms": ["grant"], "outcome_terms": ["bills"]}
    assert grade_sentence("Rising prices caused anger, while bills stayed flat.",
                          **terms).level is None
    assert grade_sentence("Grants reduced energy bills.", **terms).level == 5  # plurals match
    assert grade_sentence("The tax cut did not raise investment.", exposure_terms=["tax cut"],
                          outcome_terms=["investment"]).level == 0  # "cut" is part of a term


def test_expressions_report_the_words_and_modifiers():
    graded = grade_sentence("The grant may reduce bills.", exposure_terms=["grant"],
                            outcome_terms=["bills"])
    (expression,) = graded.expressions
    assert (expression.text, expression.level, expression.kind, expression.modifiers) == (
        "reduce", 3, "verb", ("may",))
    assert graded.to_dict()["grade"] == "possible-cause"


# --------------------------------------------------------------------------------------------
# Evidence and verdicts


def test_assess_evidence_cutoffs():
    # Common practice (see assess_evidence): the boundary value belongs to the upper band.
    assert CONDITIONAL_CAUSAL_MIN_RV == 0.10
    assert assess_evidence("observational", 0.10).supported_level == 3
    assert assess_evidence("observational", 0.0999).supported_level == 2
    assert assess_evidence("observational", 0.0).supported_level == 2
    assert assess_evidence("observational", None).supported_level == 2
    assert assess_evidence("randomized", None).supported_level == 5
    assert assess_evidence("randomized", 0.01).supported_level == 5
    none = assess_evidence(None, None)
    assert none.supported_level is None and len(none.missing) == 2
    assumed = assess_evidence(None, 0.2)
    assert assumed.supported_level == 3 and "taken to be observational" in assumed.notes[0]


@pytest.mark.parametrize("value", [-0.1, 1.5, float("nan"), float("inf"), True, "0.1"])
def test_error_robustness_value_out_of_range(value):
    with pytest.raises(WordingError, match=r"robustness value must be a number from 0 to 1"):
        assess_evidence("observational", value)


def test_error_unknown_design():
    with pytest.raises(WordingError, match=r"design must be 'observational' or 'randomized'; "
                                           r"got 'rct'"):
        assess_evidence("rct", None)


@pytest.mark.parametrize("level, prescriptive, supported, verdict, target", [
    (5, False, 2, STRONGER, 1), (3, False, 2, STRONGER, 1), (2, False, 2, SUPPORTED, None),
    (1, False, 2, SUPPORTED, None), (0, False, 2, SUPPORTED, None),
    (5, False, 3, STRONGER, 3), (4, False, 3, STRONGER, 3), (3, False, 3, SUPPORTED, None),
    (1, False, 3, WEAKER, 3), (3, False, 5, WEAKER, 5), (5, False, 5, SUPPORTED, None),
    (1, True, 2, STRONGER, None), (3, True, 3, SUPPORTED, None), (5, True, 5, SUPPORTED, None),
    (5, False, None, None, None),
])
def test_judge_claim(level, prescriptive, supported, verdict, target):
    got = judge_claim(level, prescriptive, supported)
    assert got[:2] == (verdict, target)


# --------------------------------------------------------------------------------------------
# Rewording


def reword(sentence: str, design: str = "observational", rv: float | None = 0.03,
           exposure: str = "grant", outcome: str = "bills") -> str | None:
    review = review_text(sentence, exposure_terms=[exposure], outcome_terms=[outcome],
                         design=design, robustness_value=rv, text_format="text")
    (claim,) = review.claims
    return claim.suggestion


@pytest.mark.parametrize("sentence, expected", [
    ("The grant reduced bills.", "The grant was associated with lower bills."),
    ("The grant reduces bills.", "The grant is associated with lower bills."),
    ("Grants reduce bills.", "Grants are associated with lower bills."),
    ("The grant has reduced bills.", "The grant has been associated with lower bills."),
    ("The grant will reduce bills.", "The grant will be associated with lower bills."),
    ("The grant may reduce bills.", "The grant is associated with lower bills."),
    ("The grant appears to have reduced bills.", "The grant was associated with lower bills."),
    ("The grant cut the bills of tenants by 14 percent.",
     "The grant was associated with lower bills of tenants, a difference of 14 percent."),
    ("The grant increased the risk of unpaid bills.",
     "The grant was associated with a higher risk of unpaid bills."),
    ("The fall in bills was due to the grant.",
     "The fall in bills was associated with the grant."),
    ("Bills fell because of the grant.", "Bills fell in association with the grant."),
    ("The effect of the grant on bills was large.",
     "The association of the grant with bills was large."),
    ("The grant had a large impact on bills.",
     "The grant was associated with differences in bills."),
    ("Bills were reduced by the grant.", "Bills were lower in association with the grant."),
    ("Smoking causes lung cancer.", "Smoking is associated with lung cancer."),
])
def test_reword_as_association(sentence, expected):
    exposure, outcome = ("smoking", "lung cancer") if "Smoking" in sentence else ("grant",
                                                                                  "bills")
    assert reword(sentence, exposure=exposure, outcome=outcome) == expected


@pytest.mark.parametrize("sentence, expected", [
    ("The grant reduced bills.", "The grant may have reduced bills."),
    ("The grant reduces bills.", "The grant may reduce bills."),
    ("The grant can reduce bills.", "The grant may reduce bills."),
    ("The outbreak was caused by the grant.", "The outbreak may have been caused by the grant."),
    ("The effect of the grant on bills was large.",
     "The possible effect of the grant on bills was large."),
    ("As a result of the grant, bills fell.", "Possibly as a result of the grant, bills fell."),
    ("The grant was associated with lower bills.", "The grant may have led to lower bills."),
    ("The grant is related to bills.", "The grant may affect bills."),
])
def test_reword_as_possible_cause(sentence, expected):
    outcome = "outbreak" if "outbreak" in sentence else "bills"
    assert reword(sentence, rv=0.25, outcome=outcome) == expected


@pytest.mark.parametrize("sentence, expected", [
    ("The grant may reduce bills.", "The grant reduces bills."),
    ("Grants may reduce bills.", "Grants reduce bills."),
    ("The grant may have reduced bills.", "The grant reduced bills."),
    ("Our results suggest that the grant reduced bills.",
     "Our results show that the grant reduced bills."),
    ("The grant was associated with lower bills.", "The grant led to lower bills."),
])
def test_reword_for_a_randomised_design(sentence, expected):
    assert reword(sentence, design="randomized", rv=None) == expected


def test_no_causal_rewording_that_would_reverse_the_direction():
    # The outcome is named first: "bills ... related to the grant" must not become
    # "bills affect the grant".
    assert reword("Bills were related to the grant.", design="randomized", rv=None) is None


def test_every_corpus_rewording_grades_at_its_target_and_keeps_both_terms():
    # A property over the whole corpus: each suggestion, graded again, has the level it was
    # written for (association wording for supported level 2, "may" for 3, causal for 5)
    # and still names the exposure and the outcome.
    rows = read_corpus("wording_corpus.tsv")
    checked = 0
    for design, rv in (("observational", 0.03), ("observational", 0.25), ("randomized", None)):
        for row in rows:
            exposure, outcome = row["exposure"].split("|"), row["outcome"].split("|")
            review = review_text(row["sentence"], exposure_terms=exposure,
                                 outcome_terms=outcome, design=design, robustness_value=rv,
                                 text_format="text")
            for claim in review.claims:
                if not claim.suggestion:
                    continue
                again = grade_sentence(claim.suggestion, exposure_terms=exposure,
                                       outcome_terms=outcome)
                target = claim.suggested_level
                ok = again.level == target or (target == 1 and again.level in (1, 2))
                assert ok, (row["id"], claim.sentence, claim.suggestion, target, again.level)
                checked += 1
    assert checked >= 250


# --------------------------------------------------------------------------------------------
# Reading text: markup, sentences, lines


def test_split_sentences_abbreviations_decimals_initials():
    text = ("Smith et al. (2014) found a 3.5% fall, i.e. a small one. Dr. J. Smith agreed, "
            "see Fig. 2. The U.S. data agree. Costs rose, etc. Then they fell! Did they? Yes.")
    got = [s.text for s in split_sentences(text)]
    assert got == ["Smith et al. (2014) found a 3.5% fall, i.e. a small one.",
                   "Dr. J. Smith agreed, see Fig. 2.", "The U.S. data agree.",
                   "Costs rose, etc.", "Then they fell!", "Did they?", "Yes."]


def test_line_numbers_survive_markdown_and_html():
    markdown = ("# Title\n\nIntro text here.\n\n- The grant cut bills.\n- Bills fell\n  "
                "due to the grant.\n\n```\nthe grant caused bills # code, ignored\n```\n"
                "| a | b |\n|---|---|\n| The grant raised bills. | x |\n")
    review = review_text(markdown, exposure_terms=["grant"], outcome_terms=["bills"],
                         text_format="markdown")
    assert [(c.line, c.sentence) for c in review.claims] == [
        (5, "The grant cut bills."), (6, "Bills fell due to the grant."),
        (14, "The grant raised bills.")]
    page = ("<html><head><title>T</title><style>p {x}</style></head>\n<body>\n"
            "<!-- the grant caused\nbills -->\n<p>Intro.</p><p>The <b>grant</b>\n"
            "cut bills&nbsp;a lot.</p><script>\nvar s = 'the grant caused bills';\n</script>\n"
            "<p>Bills fell due to the grant.</p></body></html>")
    review = review_text(page, exposure_terms=["grant"], outcome_terms=["bills"],
                         text_format="auto")
    assert review.text_format == "html"
    assert [(c.line, c.sentence) for c in review.claims] == [
        (5, "The grant cut bills a lot."), (9, "Bills fell due to the grant.")]


def test_markdown_markup_is_stripped_but_identifiers_kept():
    prose, chosen = extract_text("**The** _grant_ [cut](https://x.org) `bill_change` ~~a~~",
                                 text_format="markdown")
    assert (prose, chosen) == ("The grant cut bill_change a", "markdown")


def test_read_text_file_encodings(tmp_path):
    utf8 = tmp_path / "a.txt"
    utf8.write_bytes("\ufeffThe grant cut bills — by 5%.".encode("utf-8"))
    text, encoding, notes = read_text_file(utf8)
    assert (text[:9], encoding, notes) == ("The grant", "utf-8", ())
    legacy = tmp_path / "b.txt"
    legacy.write_bytes("Caf\u00e9 owners said the grant cut bills \u2014 a lot.".encode("cp1252"))
    text, encoding, notes = read_text_file(legacy)
    assert encoding == "cp1252" and "Caf\u00e9" in text and "\u2014" in text
    assert "not UTF-8" in notes[0] and "Windows-1252" in notes[0]
    utf16 = tmp_path / "c.txt"
    utf16.write_bytes("The grant cut bills.".encode("utf-16"))
    assert read_text_file(utf16)[:2] == ("The grant cut bills.", "utf-16")
    review = review_file(legacy, exposure_terms=["grant"], outcome_terms=["bills"])
    assert any("Windows-1252" in note for note in review.notes)


def test_error_empty_file(tmp_path):
    for name, content in (("empty.txt", b""), ("blank.md", b"  \n\n\t\n")):
        path = tmp_path / name
        path.write_bytes(content)
        with pytest.raises(TextFileError, match=rf"text file '.*{name}' is empty; pass the "
                                                r"report's text"):
            read_text_file(path)


def test_error_binary_file(tmp_path):
    path = tmp_path / "report.md"
    path.write_bytes(bytes(range(256)) * 20)
    with pytest.raises(TextFileError, match=r"'.*report.md' is a binary file \(.* control "
                                            r"bytes in the first 5120\), not text"):
        read_text_file(path)


def test_error_pdf_and_docx(tmp_path):
    pdf = tmp_path / "report.pdf"
    pdf.write_bytes(b"%PDF-1.7\n%\xe2\xe3\xcf\xd3 binary")
    with pytest.raises(TextFileError, match=r"is a PDF document; extract its text first"):
        read_text_file(pdf)
    docx = tmp_path / "report.docx"
    docx.write_bytes(b"PK\x03\x04" + b"\x00" * 40)
    with pytest.raises(TextFileError, match=r"ZIP archive \(a .docx or .odt document is one\)"):
        read_text_file(docx)


def test_error_file_not_found(tmp_path):
    with pytest.raises(TextFileError, match=r"'.*nope.md' does not exist; check the path"):
        review_file(tmp_path / "nope.md")


def test_error_folder(tmp_path):
    with pytest.raises(TextFileError, match=r"is a folder; pass the report's text file inside"):
        review_file(tmp_path)


def test_error_markup_without_prose():
    with pytest.raises(TextFileError, match=r"contains no readable sentences after removing "
                                            r"markup \(html\)"):
        review_text("<html><body><div> </div><img src='x.png'></body></html>",
                    text_format="auto")


def test_error_unknown_text_format():
    with pytest.raises(WordingError, match=r"text format must be one of auto, text, markdown, "
                                           r"html; got 'pdf'"):
        review_text("The grant cut bills.", text_format="pdf")


def test_pathological_inputs_stay_linear():
    # Inputs that make naive regex or splitting code quadratic: unclosed tags and scripts,
    # a long run without sentence ends, many abbreviations. Each must finish quickly.
    cases = {
        "html": "a<" * 60_000 + "<script" * 8_000 + "<!--" * 8_000,
        "text": ("the grant cut bills and " * 12_000),
        "markdown": "e.g. " * 40_000 + "**" * 20_000,
    }
    for text_format, text in cases.items():
        start = time.perf_counter()
        review = review_text(text + " The grant cut bills.", exposure_terms=["grant"],
                             outcome_terms=["bills"], text_format=text_format)
        elapsed = time.perf_counter() - start
        assert elapsed < 8.0, (text_format, elapsed)
        assert review.sentences >= 1
    long_run = review_text("the grant cut bills and " * 12_000, exposure_terms=["grant"],
                           outcome_terms=["bills"], text_format="text")
    assert any("more than 2000 characters was cut" in note for note in long_run.notes)


# --------------------------------------------------------------------------------------------
# The review document and the study hook

STUDY = """
[study]
treatment = "grant"
outcome = "bill_change"
claim = "The grant cut winter bills by 14 percent."
design = "observational"
{report}

[variables]
grant = {{ label = "Heat-pump grant", synonyms = ["the scheme"] }}
bill_change = {{ label = "Change in winter bill (%)", synonyms = ["winter bills", "bills"] }}

[graph]
edges = ["income -> grant", "income -> bill_change", "grant -> bill_change"]
"""

REPORT = """# Summary

The scheme may reduce winter bills.
Households with the grant had lower bills than others.
We examined whether the grant changed bills in flats.
"""


def make_study(tmp_path: Path, report: str | None = "report.md"):
    line = f'report_text = "{report}"' if report else ""
    path = tmp_path / "study.toml"
    path.write_text(STUDY.format(report=line), encoding="utf-8")
    if report:
        (tmp_path / report).write_text(REPORT, encoding="utf-8")
    return parse_study(path.read_text(encoding="utf-8"), path=path)


def test_study_terms(tmp_path):
    exposure, outcome = study_terms(make_study(tmp_path))
    assert exposure == ("grant", "Heat-pump grant", "the scheme")
    assert outcome == ("bill change", "Change in winter bill", "winter bills", "bills")


def test_review_document_follows_the_contract(tmp_path):
    study = make_study(tmp_path)
    review = review_for_study(study, 0.04)
    document = review.to_dict()
    assert document["schema"] == "causalcheck/wording/1"
    contract = {"line", "sentence", "level", "grade", "prescriptive", "verdict", "suggestion"}
    assert all(contract <= set(c) for c in document["claims"])
    assert [(c["line"], c["level"], c["grade"], c["verdict"]) for c in document["claims"]] == [
        (3, 3, "possible-cause", STRONGER), (4, 1, "association", SUPPORTED)]
    assert document["claims"][0]["suggestion"] == "The scheme is associated with lower winter bills."
    assert document["supported_level"] == 2
    assert document["counts"]["by_grade"]["possible-cause"] == 1
    assert document["counts"]["by_verdict"] == {SUPPORTED: 1, STRONGER: 1, WEAKER: 0}
    assert document["study_claim"]["line"] is None
    assert document["study_claim"]["suggestion"] == (
        "The grant was associated with lower winter bills, a difference of 14 percent.")
    assert document["source"]["lines"] == 6 and document["source"]["format"] == "markdown"
    assert any("line 5" in n for n in document["notes"])  # the "whether" sentence
    assert review.verdict_paragraph().startswith(
        "2 of 4 sentences make a claim linking the treatment (Heat-pump grant) and the "
        "outcome (Change in winter bill (%)); 1 uses causal wording (level 3 or above). 1 claims more than an "
        "observational design with robustness value 0.04 supports")


def test_without_evidence_verdicts_are_null_and_the_notes_say_why():
    review = review_text("The grant cut bills.", text_format="text")
    (claim,) = review.claims
    assert (claim.level, claim.verdict, claim.suggestion) == (5, None, None)
    assert review.to_dict()["supported_level"] is None
    assert any("study design" in n and "robustness value" in n for n in review.notes)
    assert "No verdicts or rewordings: they need the study design" in review.verdict_paragraph()


def test_review_for_study_without_report_text_is_none(tmp_path):
    assert review_for_study(make_study(tmp_path, report=None), 0.2) is None


def test_error_report_text_missing(tmp_path):
    study = make_study(tmp_path)
    (tmp_path / "report.md").unlink()
    # the path of report_text is relative to the study file, and the message says so
    with pytest.raises(TextFileError, match=r"\[study\].report_text in study file '.*study.toml'"
                                            r" names '.*report.md', which does not exist; the "
                                            r"path is relative to the study file's folder"):
        review_for_study(study, 0.1)


# --------------------------------------------------------------------------------------------
# The lexicon


def test_shipped_lexicon_loads_and_is_cached():
    assert default_lexicon() is default_lexicon()
    assert default_lexicon().sources == ("causal_lexicon.toml (shipped)",)


def test_user_lexicon_extends_the_shipped_one(tmp_path):
    sentence = "Interest rate rises will dampen house price growth."
    terms = {"exposure_terms": ["interest rate rises"], "outcome_terms": ["house price growth"]}
    assert grade_sentence(sentence, **terms).level is None
    extra = tmp_path / "extra.toml"
    extra.write_text('[causal.verbs]\ndampen = { adjective = "slower" }\n'
                     '[association.phrases]\nparticiple = ["in step with"]\n', encoding="utf-8")
    lexicon = load_lexicon(extra)
    assert grade_sentence(sentence, lexicon=lexicon, **terms).level == 5
    assert grade_sentence("Bills moved in step with the grant.", lexicon=lexicon,
                          exposure_terms=["grant"], outcome_terms=["bills"]).level == 1
    assert lexicon.sources[-1] == str(extra)


@pytest.mark.parametrize("content, expected", [
    ('[causl.verbs]\nslow = {}\n', r"\[causl\]: is not a known table \(did you mean 'causal'\?\)"),
    ('[causal.verbs]\nslow = { adjectiv = "slower" }\n',
     r"\[causal.verbs\].slow.adjectiv: is not a known key \(did you mean 'adjective'\?\)"),
    ('[causal.verbs]\nslow = { complement = "yes" }\n',
     r"\[causal.verbs\].slow.complement: must be \"to\" or \"bare\"; got 'yes'"),
    ('[causal.verbs]\n"Slow Down" = {}\n', r"the key 'Slow Down' must be a verb in lower case"),
    ('[causal.phrases]\nnominal = "effect of"\n',
     r"\[causal.phrases\].nominal: must be a list of non-empty strings"),
    ('[causal.phrases]\nnominal = ["effect {of|on"]\n',
     r"\[causal.phrases\].nominal\[0\]: 'effect \{of\|on' has unbalanced or nested braces"),
    ('[modifiers.doubt]\nphrases = ["doubtfully"]\ncausal = 9\n',
     r"\[modifiers.doubt\].causal: must be a whole number from 0 to 5; got 9"),
    ('schema = "other/2"\n', r"schema: must be 'causalcheck/lexicon/1'; got 'other/2'"),
    ('[causal\nverbs = 1\n', r"TOML syntax: .*; fix the TOML there"),
])
def test_error_bad_lexicon(tmp_path, content, expected):
    path = tmp_path / "extra.toml"
    path.write_text(content, encoding="utf-8")
    with pytest.raises(LexiconError, match=rf"lexicon file '.*extra.toml' has \d+ problems?:"
                                           rf"(.|\n)*{expected}"):
        load_lexicon(path)


def test_error_lexicon_collects_every_problem(tmp_path):
    path = tmp_path / "extra.toml"
    path.write_text('[causal.verbs]\nslow = { past = 3 }\n[grammar]\nmodals = "may"\n',
                    encoding="utf-8")
    with pytest.raises(LexiconError, match=r"has 2 problems:\n  - \[causal.verbs\].slow.past: "
                                           r"must be a non-empty string; got 3\n  - "
                                           r"\[grammar\].modals: must be a list"):
        load_lexicon(path)


def test_error_lexicon_file_missing(tmp_path):
    with pytest.raises(LexiconError, match=r"'.*nope.toml' has 1 problem:\n  - file: does not "
                                           r"exist; check the path given to --lexicon"):
        load_lexicon(tmp_path / "nope.toml")


def test_wording_errors_live_in_errors_and_are_re_exported():
    from causalcheck import errors, wording

    for name in ("WordingError", "TextFileError", "LexiconError"):
        assert getattr(wording, name) is getattr(errors, name)
        assert name in errors.__all__ and name in wording.__all__
    assert issubclass(errors.TextFileError, errors.CausalCheckError)
    assert issubclass(errors.LexiconError, errors.WordingError)


def test_wording_block_for_audit_and_vet_reports(tmp_path):
    study = make_study(tmp_path)
    block = wording_block(study, 0.04)
    review = review_for_study(study, 0.04)
    assert block["reviewed"] is True and block["error"] is None
    assert block["claims"] == [c.to_dict() for c in review.claims]
    assert block["supported_level"] == review.evidence.supported_level == 2
    assert block["evidence"]["robustness_value"] == 0.04
    assert block["study_claim"]["verdict"] == STRONGER
    (tmp_path / "none").mkdir()
    assert wording_block(make_study(tmp_path / "none", report=None), 0.04) is None


def test_wording_block_turns_an_unreadable_text_into_a_note(tmp_path):
    study = make_study(tmp_path)
    (tmp_path / "report.md").unlink()
    block = wording_block(study, 0.2)
    assert block["reviewed"] is False and block["claims"] is None
    assert block["supported_level"] is None
    assert "[study].report_text in study file" in block["error"]
    assert "report.md', which does not exist; the path is relative to the study file's " \
           "folder" in block["error"]
    (tmp_path / "report.md").write_bytes(b"%PDF-1.4 binary")
    assert "is a PDF document" in wording_block(study, 0.2)["error"]
