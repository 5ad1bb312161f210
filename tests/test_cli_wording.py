"""The ``causalcheck wording`` command as a user runs it: formats, gates, errors."""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from causalcheck.cli import main

STUDY = """
[study]
title = "Heat-pump grants and winter energy bills"
treatment = "grant"
outcome = "bill_change"
claim = "The grant cut winter bills by 14 percent."
design = "{design}"
report_text = "report.md"

[variables]
grant = {{ label = "Heat-pump grant", synonyms = ["the scheme"] }}
bill_change = {{ label = "Change in winter bill", synonyms = ["winter bills", "bills"] }}

[graph]
edges = ["income -> grant", "income -> bill_change", "grant -> bill_change"]
"""

REPORT = """# Heat-pump grants: evaluation summary

The council introduced the grant in 2021 (see Fig. 2 and Smith et al. for details).
Households that received a grant had lower winter bills than those that did not.

- The grant cut winter bills by 14 percent on average.
- The scheme may reduce bills for low-income households, e.g. those on benefits.
- We found no evidence that the grant raised bills in flats.

Because the scheme lowers bills, the council should extend it to all tenants.
"""


@pytest.fixture
def folder(tmp_path: Path) -> Path:
    (tmp_path / "study.toml").write_text(STUDY.format(design="observational"),
                                         encoding="utf-8")
    (tmp_path / "report.md").write_text(REPORT, encoding="utf-8")
    return tmp_path


def run(capsys, *argv: str) -> tuple[int, str, str]:
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


def test_text_report_starts_with_the_verdict(folder, capsys):
    code, out, err = run(capsys, "wording", str(folder / "report.md"), "--study",
                         str(folder / "study.toml"), "--robustness-value", "0.04")
    assert code == 0 and err == ""
    first = out.split("\n\n")[0].replace("\n", " ")
    assert first == (
        "5 of 7 sentences make a claim linking the treatment (Heat-pump grant) and the outcome "
        "(Change in winter bill); 3 use causal wording (level 3 or above). 3 claim more than an "
        "observational design with robustness value 0.04 supports (up to level 2, hedged) and "
        "2 are supported.")
    assert "  line 6: causal (5) -- stronger than the evidence" in out
    flat = " ".join(out.split())  # lines are wrapped at 92 characters
    assert ('reword: "The grant was associated with lower winter bills, a difference of 14 '
            'percent, on average."') in flat
    assert "line 10: causal (5), advice -- stronger than the evidence" in out
    assert "line 8: no-link (0) -- supported" in out
    assert "[study].claim: causal (5) -- stronger than the evidence" in out


def test_json_follows_the_contract(folder, capsys):
    code, out, _ = run(capsys, "wording", str(folder / "report.md"), "--study",
                       str(folder / "study.toml"), "--robustness-value", "0.25",
                       "--format", "json")
    document = json.loads(out)
    assert code == 0 and document["schema"] == "causalcheck/wording/1"
    claims = document["claims"]
    assert [(c["line"], c["level"], c["grade"], c["prescriptive"], c["verdict"]) for c in
            claims] == [
        (4, 1, "association", False, "weaker than it could be"),
        (6, 5, "causal", False, "stronger than the evidence"),
        (7, 3, "possible-cause", False, "supported"),
        (8, 0, "no-link", False, "supported"),
        (10, 5, "causal", True, "stronger than the evidence")]
    assert claims[1]["suggestion"] == ("The grant may have cut winter bills by 14 percent on "
                                       "average.")
    assert claims[4]["suggestion"] == ("Because the scheme may lower bills, the council should "
                                       "extend it to all tenants.")
    assert document["supported_level"] == 3
    assert document["evidence"]["cutoffs"]["source"] == "common practice"


def test_reads_the_study_report_text_when_no_file_is_given(folder, capsys):
    code, out, _ = run(capsys, "wording", "--study", str(folder / "study.toml"), "--quiet")
    assert code == 0
    assert out.startswith("5 of 7 sentences make a claim linking the treatment (Heat-pump "
                          "grant)")
    assert "observational design without a robustness value" in " ".join(out.split())
    assert "\n\n" not in out.strip()  # --quiet: the paragraph alone


def test_without_a_study_grades_but_gives_no_verdicts(folder, capsys):
    code, out, _ = run(capsys, "wording", str(folder / "report.md"), "--format", "json")
    document = json.loads(out)
    assert code == 0
    assert all(c["verdict"] is None and c["suggestion"] is None for c in document["claims"])
    assert document["terms"] is None
    assert any("no exposure and outcome words" in n for n in document["notes"])
    code, out, _ = run(capsys, "wording", str(folder / "report.md"), "--quiet")
    assert "No verdicts or rewordings: they need the study design" in out


def test_randomised_design_supports_causal_wording(folder, capsys):
    (folder / "study.toml").write_text(STUDY.format(design="randomized"), encoding="utf-8")
    _code, out, _ = run(capsys, "wording", "--study", str(folder / "study.toml"), "--format",
                       "json")
    document = json.loads(out)
    assert document["supported_level"] == 5
    verdicts = {c["line"]: c["verdict"] for c in document["claims"]}
    assert verdicts[6] == "supported" and verdicts[7] == "weaker than it could be"


def test_fail_if_stronger_gate(folder, capsys):
    code, _, err = run(capsys, "wording", "--study", str(folder / "study.toml"),
                       "--fail-if-stronger", "--quiet")
    assert code == 1
    assert "gate failed: 3 claims stronger than the evidence" in err
    (folder / "study.toml").write_text(STUDY.format(design="randomized"), encoding="utf-8")
    code, _, err = run(capsys, "wording", "--study", str(folder / "study.toml"),
                       "--fail-if-stronger", "--quiet")
    assert code == 0 and err == ""


def test_user_lexicon_option(folder, capsys):
    (folder / "report.md").write_text("The grant will dampen the growth of bills.\n",
                                      encoding="utf-8")
    (folder / "words.toml").write_text('[causal.verbs]\ndampen = { adjective = "slower" }\n',
                                       encoding="utf-8")
    _, out, _ = run(capsys, "wording", "--study", str(folder / "study.toml"), "--format", "json")
    assert json.loads(out)["claims"] == []
    _, out, _ = run(capsys, "wording", "--study", str(folder / "study.toml"), "--lexicon",
                    str(folder / "words.toml"), "--format", "json")
    assert [c["level"] for c in json.loads(out)["claims"]] == [5]


@pytest.mark.parametrize("argv, expected", [
    (["{dir}/nope.md"], "text file '{dir}/nope.md' does not exist; check the path"),
    (["{dir}"], "text file '{dir}' is a folder; pass the report's text file inside it"),
    (["{dir}/empty.md"], "text file '{dir}/empty.md' is empty; pass the report's text"),
    (["{dir}/blob.md"], "text file '{dir}/blob.md' is a binary file"),
    (["{dir}/report.md", "--robustness-value", "high"],
     "--robustness-value must be a number from 0 to 1 (a partial R², such as 0.04); got 'high'"),
    (["{dir}/report.md", "--robustness-value", "-0.2"],
     "--robustness-value must be a number from 0 to 1"),
    ([], "no text to review: give the report's text file"),
    (["{dir}/report.md", "--study", "{dir}/study.toml", "--design", "randomized"],
     ("--design 'randomized' was given with --study; the study file's [study].design "
     "('observational') sets the design")),
    (["{dir}/report.md", "--lexicon", "{dir}/bad.toml"],
     ("lexicon file '{dir}/bad.toml' has 1 problem:\n  - [causal.verbs].slow.adjectiv: is not "
     "a known key (did you mean 'adjective'?)")),
])
def test_error_bad_input(folder, capsys, argv, expected):
    (folder / "empty.md").write_bytes(b"")
    (folder / "blob.md").write_bytes(b"\x00\x01\x02\x03" * 100)
    (folder / "bad.toml").write_text('[causal.verbs]\nslow = { adjectiv = "slower" }\n',
                                     encoding="utf-8")
    argv = [a.replace("{dir}", str(folder)) for a in argv]
    code, out, err = run(capsys, "wording", *argv)
    assert code == 2 and out == ""
    assert err.startswith("causalcheck wording: error: ")
    assert expected.replace("{dir}", str(folder)) in err
    assert "Traceback" not in err


def test_error_report_text_of_the_study_is_missing(folder, capsys):
    (folder / "report.md").unlink()
    code, out, err = run(capsys, "wording", "--study", str(folder / "study.toml"))
    assert code == 2 and out == ""
    assert "does not exist" in err and "report.md" in err


def test_robustness_value_from_the_reported_table(folder, capsys):
    # Without --robustness-value, a study with a [reported] table gets it as `vet` computes it.
    # Check against the formula of Cinelli & Hazlett (2020, Sec. 4.1): f = t / sqrt(dof),
    # RV = (sqrt(f**4 + 4 f**2) - f**2) / 2, here with t = -14.2 / 3.1 and dof = 1890.
    (folder / "study.toml").write_text(
        STUDY.format(design="observational")
        + "\n[reported]\nestimate = -14.2\nstd_error = 3.1\ndof = 1890\n", encoding="utf-8")
    code, out, _ = run(capsys, "wording", "--study", str(folder / "study.toml"), "--format",
                       "json")
    document = json.loads(out)
    assert code == 0
    f = (14.2 / 3.1) / 1890 ** 0.5
    expected = ((f ** 4 + 4 * f ** 2) ** 0.5 - f ** 2) / 2  # 0.09996..., just below 0.10
    assert document["evidence"]["robustness_value"] == pytest.approx(expected, rel=1e-12)
    assert document["supported_level"] == 2
    assert any("computed from the study's [reported] table" in n and "0.09996" in n
               for n in document["notes"])
    code, out, _ = run(capsys, "wording", "--study", str(folder / "study.toml"),
                       "--robustness-value", "0.3", "--format", "json")
    assert code == 0 and json.loads(out)["supported_level"] == 3  # the option wins
