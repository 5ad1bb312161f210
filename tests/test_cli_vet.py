"""The ``causalcheck vet`` command as a user runs it: files, flags, exit codes, outputs."""

from __future__ import annotations

import json
import subprocess
import sys

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
    assert out.startswith("Heat-pump grants and winter energy bills\n")
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
    assert code == 1 and "gate failed: the robustness value is 10.0%, below --fail-below" in err
    code, _, _ = run(capsys, study_file, "--fail-below", "0.05")
    assert code == 0
    code, _, err = run(capsys, study_file, "--fail-below", "0.06", "--gate-on", "ci")
    assert code == 1 and "robustness value of the 95% CI is 5.8%" in err


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
