"""The `causalcheck audit` command as a user runs it: formats, --out, gates, bad input."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from causalcheck.cli import main

ROOT = Path(__file__).resolve().parents[1]
WATER = ROOT / "scenarios" / "water_rebate" / "study.toml"

STUDY = """
[study]
title = "Tutoring and test scores"
treatment = "tutoring"
outcome = "score"
[data]
path = "pupils.csv"
[variables]
tutoring = { label = "Hours of tutoring", unit = "h/week" }
score = { label = "Test score", unit = "points" }
school = { kind = "categorical" }
[graph]
edges = ["income -> tutoring", "income -> score", "school -> tutoring", "school -> score",
         "tutoring -> homework", "homework -> score", "tutoring -> score"]
[controls]
used = ["income", "school"]
[sensitivity]
benchmarks = ["income"]
"""


@pytest.fixture()
def study(tmp_path: Path) -> Path:
    rng = np.random.default_rng(21)
    n = 1500
    income = rng.normal(30, 8, n)
    school = rng.choice(["north", "east", "west"], n)
    tutoring = 0.05 * income + (school == "east") + rng.gamma(2.0, size=n)
    homework = 0.5 * tutoring + rng.normal(size=n)
    score = 2.0 * tutoring + homework + 0.3 * income + 2 * (school == "west") + \
        rng.normal(0, 3, n)
    pd.DataFrame({"tutoring": tutoring, "score": score, "income": income, "school": school,
                  "homework": homework}).to_csv(tmp_path / "pupils.csv", index=False)
    path = tmp_path / "study.toml"
    path.write_text(STUDY)
    return path


def test_text_report_starts_with_the_verdict_then_tables(study, capsys):
    assert main(["audit", str(study)]) == 0
    out = capsys.readouterr().out
    lines = out.splitlines()
    assert lines[0] == "causalcheck audit: Tutoring and test scores"
    verdict = lines[2]
    assert verdict.startswith("The question: does hours of tutoring change test score?")
    flowing = " ".join(out.split())                 # the verdict is wrapped at 96 columns
    assert "The declared controls (income and school) are a valid adjustment set" in flowing
    assert "Estimates of the slope of score on tutoring" in out
    assert "Where the gap comes from" in out and "Independences the graph implies" in out
    # the headline row is marked and is the declared set
    headline = next(line for line in lines if "adjusted*" in line)
    assert "declared" in headline and "{income, school}" in headline


def test_json_follows_the_contract(study, capsys):
    assert main(["audit", str(study), "--format", "json"]) == 0
    document = json.loads(capsys.readouterr().out)
    assert document["schema"] == "causalcheck/audit/1"
    assert document["estimates"]["adjusted"]["reason"] == "declared"
    assert document["estimates"]["adjusted"]["robust_type"] == "HC1"
    assert document["controls"]["valid"] is True
    naive = document["estimates"]["naive"]["estimate"]
    adjusted = document["estimates"]["adjusted"]["estimate"]
    total = sum(d["contribution"] for d in document["decomposition"])
    assert total == pytest.approx(naive - adjusted, rel=1e-9)
    assert document["sensitivity"]["benchmarks"][0]["benchmark"] == "income"
    assert document["study"]["variables"]["score"]["unit"] == "points"


def test_quiet_prints_only_the_verdict(study, capsys):
    assert main(["audit", str(study), "--quiet"]) == 0
    out = capsys.readouterr().out
    assert "Estimates of the slope" not in out and out.startswith("The question:")
    assert "\n\n" not in out.strip()


def test_out_folder_written_atomically_and_not_clobbered(study, tmp_path, capsys):
    folder = tmp_path / "report"
    assert main(["audit", str(study), "--out", str(folder)]) == 0
    assert json.loads((folder / "result.json").read_text())["schema"] == "causalcheck/audit/1"
    assert (folder / "report.md").read_text().startswith("# Audit: Tutoring and test scores")
    assert (folder / "report.html").exists()
    # a second run may overwrite its own folder
    assert main(["audit", str(study), "--out", str(folder)]) == 0
    # a folder the user owns is refused and left as it was
    theirs = tmp_path / "theirs"
    theirs.mkdir()
    (theirs / "notes.txt").write_text("mine")
    capsys.readouterr()
    assert main(["audit", str(study), "--out", str(theirs)]) == 2
    err = capsys.readouterr().err
    assert "is not empty and was not written by causalcheck" in err
    assert sorted(p.name for p in theirs.iterdir()) == ["notes.txt"]
    assert main(["audit", str(study), "--out", str(theirs), "--force"]) == 0
    assert (theirs / "notes.txt").read_text() == "mine"


def test_markdown_rendering_has_the_tables(study):
    from causalcheck.audit import audit
    from causalcheck.commands.audit import render_markdown

    markdown = render_markdown(audit(study))
    assert markdown.startswith("# Audit: Tutoring and test scores")
    assert "| source | adjusted for | estimate |" in markdown
    assert "## Declared controls {income, school}: a valid adjustment set" in markdown


def test_gate_fail_below_on_estimate_and_ci(study, capsys):
    document_rv = None
    assert main(["audit", str(study), "--format", "json"]) == 0
    document_rv = json.loads(capsys.readouterr().out)["sensitivity"]
    point, ci = document_rv["robustness_value"], document_rv["robustness_value_ci"]
    assert ci < point
    between = (ci + point) / 2
    assert main(["audit", str(study), "--quiet", "--fail-below", str(between)]) == 0
    assert main(["audit", str(study), "--quiet", "--fail-below", str(between),
                 "--gate-on", "ci"]) == 1
    err = capsys.readouterr().err
    assert "gate failed: the robustness value of the confidence interval is" in err


def test_gate_fail_if_invalid(capsys):
    # the water scenario's declared controls include a mediator
    assert main(["audit", str(WATER), "--quiet", "--fail-if-invalid"]) == 1
    assert "declared controls are not a valid adjustment set" in capsys.readouterr().err


def test_water_scenario_reads_well(capsys):
    assert main(["audit", str(WATER)]) == 0
    out = capsys.readouterr().out
    assert "Conservation-mindedness" in out
    assert "best available adjusted*" in out
    assert "efficient_fixtures (mediator)" in out


def test_error_bad_input_exits_2_without_traceback(tmp_path):
    path = tmp_path / "study.toml"
    path.write_text(STUDY.replace("pupils.csv", "nowhere.csv"))
    run = subprocess.run([sys.executable, "-m", "causalcheck", "audit", str(path)],
                         capture_output=True, text=True, timeout=120, check=False)
    assert run.returncode == 2
    assert "causalcheck audit: error: data file" in run.stderr
    assert "nowhere.csv' does not exist" in run.stderr
    assert "Traceback" not in run.stderr and run.stdout == ""


def test_error_missing_column_message(study, capsys):
    frame = pd.read_csv(study.parent / "pupils.csv").rename(columns={"income": "Income"})
    frame.to_csv(study.parent / "pupils.csv", index=False)
    assert main(["audit", str(study)]) == 2
    err = capsys.readouterr().err
    assert "has no column 'income' (did you mean 'Income'?)" in err


AUDIT_REPORT = """# Tutoring evaluation

Hours of tutoring raise test scores by two points an hour.
Pupils with more tutoring had higher test scores.
"""


def test_audit_reviews_the_report_text_with_its_robustness_value(study, capsys, tmp_path):
    text = study.read_text().replace('outcome = "score"\n',
                                     'outcome = "score"\nreport_text = "report.md"\n')
    study.write_text(text)
    (study.parent / "report.md").write_text(AUDIT_REPORT)
    assert main(["audit", str(study), "--format", "json"]) == 0
    document = json.loads(capsys.readouterr().out)
    wording = document["wording"]
    rv = document["sensitivity"]["robustness_value"]
    assert wording["reviewed"] and wording["evidence"]["robustness_value"] == rv
    # the rule of assess_evidence (common practice): observational, RV >= 0.10 -> level 3
    assert wording["supported_level"] == (3 if rv >= 0.10 else 2)
    assert [(c["line"], c["level"]) for c in wording["claims"]] == [(3, 5), (4, 1)]
    assert wording["claims"][0]["verdict"] == "stronger than the evidence"
    assert "In the report text, 1 of the 2 sentences that link the treatment and the " \
           "outcome claims more than" in document["verdict"]
    assert "The wording review recognises causal phrases" in " ".join(document["cautions"])
    assert main(["audit", str(study)]) == 0
    out = capsys.readouterr().out
    assert out.index("Independences the graph implies") < out.index("Wording of the report") \
        < out.index("Cautions")
    assert "  line 3: causal (5) -- stronger than the evidence" in out
    # an unreadable text: a note in the report, exit 0; `causalcheck wording` refuses it
    (study.parent / "report.md").write_bytes(b"\x00\x01\x02binary")
    assert main(["audit", str(study), "--format", "json"]) == 0
    document = json.loads(capsys.readouterr().out)
    assert document["wording"]["reviewed"] is False
    assert "is a binary file" in document["wording"]["error"]
    assert main(["wording", "--study", str(study)]) == 2
    assert "is a binary file" in capsys.readouterr().err
