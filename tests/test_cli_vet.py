"""The ``causalcheck vet`` command as a user runs it: files, flags, exit codes, outputs."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import pytest

from causalcheck.cli import main

STUDY = """
[study]
title = "Heat-pump grants and winter energy bills"
treatment = "grant"
outcome = "bill_change"

[reported]
estimate = -14.2
std_error = 3.1
dof = 1890
"""


@pytest.fixture()
def study_file(tmp_path):
    path = tmp_path / "study.toml"
    path.write_text(STUDY)
    return path


def run(capsys, *argv):
    code = main(["vet", *map(str, argv)])
    captured = capsys.readouterr()
    return code, captured.out, captured.err


def test_json_from_flags_alone(capsys):
    # Darfur, Cinelli & Hazlett (2020), Sec. 5 (from memory): RV 13.88%, RV_{α=0.05} 7.63%.
    code, out, err = run(capsys, "--estimate", "0.09731582", "--se", "0.02325654", "--dof",
                         "783", "--format", "json")
    assert code == 0 and err == ""
    document = json.loads(out)
    for key in ("schema", "estimate", "std_error", "t", "dof", "partial_r2", "robustness_value",
                "robustness_value_ci", "e_value"):
        assert key in document
    assert document["schema"] == "causalcheck/vet/1"
    assert 100 * document["robustness_value"] == pytest.approx(13.88, abs=0.005)
    assert 100 * document["robustness_value_ci"] == pytest.approx(7.63, abs=0.005)


def test_study_file_text_report(capsys, study_file):
    code, out, _ = run(capsys, study_file)
    assert code == 0
    assert out.startswith("causalcheck vet: Heat-pump grants and winter energy bills\n")
    assert "would bring the estimate to the threshold, 0" in out


def test_flags_override_the_file_and_say_so(capsys, study_file):
    _code, out, _ = run(capsys, study_file, "--se", "4", "--format", "json")
    document = json.loads(out)
    assert document["std_error"] == 4.0
    assert "--se 4 overrides [reported].std_error = 3.1 from the study file" in \
        document["overrides"]
    _code, out, _ = run(capsys, study_file, "--se", "4", "--quiet")
    assert "(--se 4 overrides [reported].std_error = 3.1 from the study file.)" in out


def test_ratio_from_flags(capsys):
    _code, out, _ = run(capsys, "--estimate", "3.9", "--ci", "1.8", "8.7", "--measure",
                       "risk_ratio", "--format", "json")
    document = json.loads(out)
    assert document["e_value"]["point"] == pytest.approx(7.26, abs=0.005)
    assert document["robustness_value"] is None


def test_negative_interval_limits_parse(capsys):
    code, out, _ = run(capsys, "--estimate", "-14.2", "--ci", "-20.3", "-8.1", "--dof", "1890",
                       "--format", "json")
    assert code == 0 and json.loads(out)["se_source"] == "ci"


def test_gate_exit_codes(capsys, study_file):
    code, _, err = run(capsys, study_file, "--fail-below", "0.2")
    # the share as the flag takes it, with its percentage
    assert code == 1 and "gate failed: the robustness value is 0.1 (10%), below --fail-below " \
        "0.2" in err
    code, _, _ = run(capsys, study_file, "--fail-below", "0.05")
    assert code == 0
    code, _, err = run(capsys, study_file, "--fail-below", "0.06", "--gate-on", "ci")
    assert code == 1 and "robustness value of the 95% CI is 0.0585 (5.8%), below " \
        "--fail-below 0.06" in err


def test_out_folder_and_grid_csv(capsys, study_file, tmp_path):
    out_dir = tmp_path / "report"
    grid = tmp_path / "grid.csv"
    code, _, _ = run(capsys, study_file, "--out", out_dir, "--grid-csv", grid, "--grid-points",
                     "7", "--quiet")
    assert code == 0
    assert {p.name for p in out_dir.iterdir()} >= {"result.json", "report.md", "sensitivity.png"}
    assert json.loads((out_dir / "result.json").read_text())["grid_csv"] == str(grid)
    assert len(grid.read_text().splitlines()) == 1 + 49
    # a second run refuses to overwrite the CSV, then --force allows it
    code, _, err = run(capsys, study_file, "--grid-csv", grid)
    assert code == 2 and "already exists; nothing was written" in err
    code, _, _ = run(capsys, study_file, "--grid-csv", grid, "--force", "--quiet")
    assert code == 0


def test_help_lists_the_flags(capsys):
    with pytest.raises(SystemExit):
        main(["vet", "--help"])
    out = capsys.readouterr().out
    for flag in ("--estimate", "--se", "--ci LOW HIGH", "--t", "--p", "--dof", "--n",
                 "--covariates", "--measure", "--common-outcome", "--outcome-sd", "--threshold",
                 "--alpha", "--fail-below", "--gate-on", "--grid-csv"):
        assert flag in out


# --------------------------------------------------------------------------------------------
# Bad input: exit 2, one clear message, no traceback


def test_error_negative_se_flag(capsys):
    code, out, err = run(capsys, "--estimate", "0.1", "--se", "-1", "--dof", "10")
    assert code == 2 and out == ""
    assert err.startswith("causalcheck vet: error: the reported numbers cannot be used: --se "
                          "must be positive; got -1.0")
    assert "Traceback" not in err


def test_error_text_where_a_number_belongs(capsys):
    code, _, err = run(capsys, "--estimate", "0.1", "--se", "0.o3", "--dof", "10")
    assert code == 2 and "--se must be a number such as 0.05; got '0.o3'" in err


def test_error_infinite_flag(capsys):
    code, _, err = run(capsys, "--estimate", "inf", "--se", "0.1", "--dof", "10")
    assert code == 2 and "--estimate must be a finite number; got 'inf'" in err


def test_error_nothing_given(capsys):
    code, _, err = run(capsys)
    assert code == 2 and "give a study file with a [reported] table, or the numbers as flags" \
        in err


def test_error_unknown_measure(capsys):
    code, _, err = run(capsys, "--estimate", "2", "--ci", "1.2", "3", "--measure", "riskratio")
    assert code == 2 and "got 'riskratio' (did you mean 'risk_ratio'" in err


def test_error_bad_alpha_and_gate(capsys, study_file):
    code, _, err = run(capsys, study_file, "--alpha", "5")
    assert code == 2 and "--alpha must be a number strictly between 0 and 1" in err
    code, _, err = run(capsys, study_file, "--fail-below", "13")
    assert code == 2 and "--fail-below must be a robustness value between 0 and 1" in err


def test_error_gate_without_robustness_value(capsys):
    code, _, err = run(capsys, "--estimate", "2", "--ci", "1.2", "3", "--measure", "risk_ratio",
                       "--fail-below", "0.1")
    assert code == 2 and "--fail-below checks a robustness value" in err


def test_error_missing_study_file(capsys, tmp_path):
    code, _, err = run(capsys, tmp_path / "nope.toml")
    assert code == 2 and "does not exist" in err


def test_error_exit_code_from_a_real_process():
    # the installed entry point as a user runs it: exit 2 and no traceback
    process = subprocess.run(
        [sys.executable, "-m", "causalcheck", "vet", "--estimate", "0.5", "--ci", "0.9", "0.1"],
        check=False, capture_output=True, text=True, timeout=120)
    assert process.returncode == 2
    assert "--ci is reversed or empty" in process.stderr
    assert "Traceback" not in process.stderr


# --------------------------------------------------------------------------------------------
# The review of [study].report_text inside the vet report

READING = Path(__file__).resolve().parents[1] / "scenarios" / "reading_app_review" / "study.toml"


def test_report_text_is_reviewed_in_every_output(capsys, tmp_path):
    code, out, _ = run(capsys, READING, "--format", "json")
    document = json.loads(out)
    assert code == 0
    wording = document["wording"]
    assert wording["reviewed"] is True and wording["supported_level"] == 3
    # the same review `causalcheck wording` gives with vet's own robustness value
    rv = document["robustness_value"]
    assert wording["evidence"]["robustness_value"] == rv
    assert main(["wording", "--study", str(READING), "--robustness-value", repr(rv),
                 "--format", "json"]) == 0
    alone = json.loads(capsys.readouterr().out)
    assert wording["claims"] == alone["claims"]
    stronger = [c for c in wording["claims"] if c["verdict"] == "stronger than the evidence"]
    assert len(stronger) == 4 and len(wording["claims"]) == 7
    assert ("In the report text, 4 of the 7 sentences that link the treatment and the outcome "
            "claim more than") in document["verdict"]

    code, out, _ = run(capsys, READING)
    assert "\nWording of the report\n" in out
    assert out.index("Extreme case") < out.index("Wording of the report") < out.index("Notes")
    assert ('  line 8: causal (5) -- stronger than the evidence\n'
            '    "Daily app use improves reading scores substantially."\n'
            '    reword: "Daily app use may improve reading scores substantially."') in out

    folder = tmp_path / "report"
    assert run(capsys, READING, "--out", folder)[0] == 0
    markdown = (folder / "report.md").read_text(encoding="utf-8")
    assert markdown.index("## How strong") < markdown.index("## Wording of the report") \
        < markdown.index("## Cautions")
    assert ("| 8 | Daily app use improves reading scores substantially. | 5 causal | stronger "
            "than the evidence | Daily app use may improve reading scores substantially. |"
            ) in markdown
    page = (folder / "report.html").read_text(encoding="utf-8")
    assert page.index('id="sensitivity"') < page.index('id="wording"') \
        < page.index('id="cautions"')
    assert '<a href="#wording">Wording of the report</a>' in page
    assert "Sumner, P." in page           # the method is cited


def test_unreadable_report_text_is_a_note_not_a_crash(capsys, study_file, tmp_path):
    study_file.write_text(STUDY.replace('outcome = "bill_change"\n',
                                        'outcome = "bill_change"\nreport_text = "gone.md"\n'))
    code, out, err = run(capsys, study_file)
    assert code == 0 and "Traceback" not in err
    assert "Wording of the report\n- Not reviewed: [study].report_text in study file" in out
    flowing = " ".join(out.split())
    assert "gone.md', which does not exist; the path is relative to the study file's" in flowing
    code, out, _ = run(capsys, study_file, "--format", "json")
    document = json.loads(out)
    assert document["wording"]["reviewed"] is False and document["wording"]["claims"] is None
    assert "the path is relative to the study file's folder" in document["wording"]["error"]
    assert "could not be reviewed" in document["verdict"]
    folder = tmp_path / "report"
    assert run(capsys, study_file, "--out", folder)[0] == 0
    assert "The report text was not reviewed:" in (folder / "report.md").read_text()
    # `causalcheck wording` itself still refuses the file
    code, out, err = run_command(capsys, "wording", "--study", study_file)
    assert code == 2 and out == "" and "does not exist" in err


def run_command(capsys, *argv):
    code = main([*map(str, argv)])
    captured = capsys.readouterr()
    return code, captured.out, captured.err
