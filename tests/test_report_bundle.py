"""The --out folder (causalcheck/report/bundle.py) and the shared terminal output (commands/common.py)."""

from __future__ import annotations

import argparse
import io
import json
from pathlib import Path

import pytest
from report_documents import audit_document, plan_document, vet_document

from causalcheck.cli import main
from causalcheck.commands import common
from causalcheck.errors import OutputError
from causalcheck.report import figures
from causalcheck.report import files as files_module
from causalcheck.report.bundle import MANIFEST, write_bundle
from causalcheck.report.files import MARKER

ROOT = Path(__file__).resolve().parents[1]
WATER = ROOT / "scenarios" / "water_rebate" / "study.toml"
READING = ROOT / "scenarios" / "reading_app_review" / "study.toml"
CYCLING = ROOT / "scenarios" / "cycling_plan" / "study.toml"


def test_bundle_writes_every_file(tmp_path):
    written = write_bundle(tmp_path / "out", audit_document(), kind="audit")
    names = sorted(p.name for p in written.files)
    assert names == ["decomposition.png", "estimates.png", "graph.png", "report.html",
                     "report.md", "result.json", "sensitivity.png"]
    assert written.files[-1].name == "report.html"          # written last
    document = json.loads((tmp_path / "out" / "result.json").read_text(encoding="utf-8"))
    assert document["schema"] == "causalcheck/audit/1"
    assert document["verdict"].startswith("The claim under test")
    assert len(document["cautions"]) >= 3
    markdown = (tmp_path / "out" / "report.md").read_text(encoding="utf-8")
    assert "![" in markdown and "(graph.png)" in markdown and "(sensitivity.png)" in markdown
    assert (tmp_path / "out" / MARKER).exists()


def test_error_foreign_folder_is_refused_and_left_untouched(tmp_path):
    folder = tmp_path / "mine"
    folder.mkdir()
    (folder / "graph.png").write_bytes(b"my own picture")
    with pytest.raises(OutputError, match="is not empty and was not written by causalcheck"):
        write_bundle(folder, audit_document(), kind="audit")
    assert sorted(p.name for p in folder.iterdir()) == ["graph.png"]
    assert (folder / "graph.png").read_bytes() == b"my own picture"


def test_error_cli_refuses_a_foreign_folder_with_exit_2(tmp_path, capsys):
    folder = tmp_path / "theirs"
    folder.mkdir()
    (folder / "notes.txt").write_text("keep me")
    for argv in (["vet", str(READING)], ["plan", str(CYCLING)], ["controls", str(WATER)]):
        assert main([*argv, "--out", str(folder)]) == 2
        captured = capsys.readouterr()
        assert captured.out == ""
        assert "is not empty and was not written by causalcheck" in captured.err
        assert "Traceback" not in captured.err
    assert sorted(p.name for p in folder.iterdir()) == ["notes.txt"]
    assert (folder / "notes.txt").read_text() == "keep me"


def test_a_second_run_replaces_its_own_figures_and_drops_stale_ones(tmp_path):
    folder = tmp_path / "out"
    write_bundle(folder, audit_document(), kind="audit")
    assert (folder / "decomposition.png").exists()
    write_bundle(folder, vet_document(), kind="vet")         # no decomposition for a vet
    assert not (folder / "decomposition.png").exists()
    assert json.loads((folder / MANIFEST).read_text())["files"][-1] == "report.html"
    assert json.loads((folder / "result.json").read_text())["schema"] == "causalcheck/vet/1"


def test_force_keeps_files_causalcheck_did_not_write(tmp_path):
    folder = tmp_path / "shared"
    folder.mkdir()
    (folder / "notes.txt").write_text("mine")
    write_bundle(folder, plan_document(), kind="plan", force=True)
    write_bundle(folder, vet_document(), kind="vet")         # now marked as ours
    assert (folder / "notes.txt").read_text() == "mine"


def test_interrupt_while_rendering_leaves_no_report(tmp_path, monkeypatch):
    def interrupted(name, document):
        raise KeyboardInterrupt

    monkeypatch.setattr(figures, "render_png", interrupted)
    folder = tmp_path / "out"
    with pytest.raises(KeyboardInterrupt):
        write_bundle(folder, audit_document(), kind="audit")
    assert sorted(p.name for p in folder.iterdir()) == [MARKER]


def _folder_bytes(folder: Path) -> dict[str, bytes]:
    return {p.name: p.read_bytes() for p in sorted(folder.iterdir())}


@pytest.mark.parametrize("stop_at", ["sensitivity.png", "report.md", MANIFEST])
def test_interrupt_while_writing_keeps_the_old_report_whole(tmp_path, monkeypatch, stop_at):
    # a re-run into an old report folder, interrupted while its files are being written: every
    # file is first written under a temporary name, so the folder keeps the old report in full
    # (never new figures beside the old report.html) and no temporary file is left
    folder = tmp_path / "out"
    write_bundle(folder, audit_document(), kind="audit")
    before = _folder_bytes(folder)
    staged = []
    real = files_module._stage

    def interrupted(path, content):
        if Path(path).name == stop_at:
            raise KeyboardInterrupt
        staged.append(Path(path).name)
        return real(path, content)

    monkeypatch.setattr(files_module, "_stage", interrupted)
    changed = dict(vet_document(), estimate=2.5)          # a different report, other figures
    with pytest.raises(KeyboardInterrupt):
        write_bundle(folder, changed, kind="vet")
    assert staged                                         # it was interrupted midway
    assert _folder_bytes(folder) == before
    assert not [p for p in folder.iterdir() if p.name.endswith(".tmp")]


def test_interrupt_while_writing_a_new_folder_leaves_no_report(tmp_path, monkeypatch):
    real = files_module._stage

    def interrupted(path, content):
        if Path(path).name == "report.html":
            raise KeyboardInterrupt
        return real(path, content)

    monkeypatch.setattr(files_module, "_stage", interrupted)
    folder = tmp_path / "out"
    with pytest.raises(KeyboardInterrupt):
        write_bundle(folder, vet_document(), kind="vet")
    assert sorted(p.name for p in folder.iterdir()) == [MARKER]


# --------------------------------------------------------------------------------------------
# commands/common.py


class FakeTerminal(io.StringIO):
    def isatty(self) -> bool:
        return True


def test_colour_only_on_a_terminal_and_never_with_no_color(monkeypatch):
    monkeypatch.delenv("NO_COLOR", raising=False)
    monkeypatch.setenv("TERM", "xterm")
    assert common.style("x", "bold", stream=FakeTerminal()) == "\x1b[1mx\x1b[0m"
    assert common.style("x", "bold", stream=io.StringIO()) == "x"
    monkeypatch.setenv("NO_COLOR", "1")
    assert common.style("x", "bold", stream=FakeTerminal()) == "x"
    monkeypatch.setenv("NO_COLOR", "")
    monkeypatch.setenv("TERM", "dumb")
    assert common.style("x", "bold", stream=FakeTerminal()) == "x"


def test_progress_is_silent_off_a_terminal():
    stream = io.StringIO()
    bar = common.progress(range(3), total=3, description="work", stream=stream)
    assert list(bar) == [0, 1, 2] and bar.disable
    assert stream.getvalue() == ""
    assert not common.progress(range(3), stream=FakeTerminal()).disable
    assert common.progress(range(3), stream=FakeTerminal(), quiet=True).disable


def test_quiet_prints_only_the_verdict(capsys):
    for argv in (["audit", str(WATER)], ["vet", str(READING)], ["plan", str(CYCLING)],
                 ["controls", str(WATER)]):
        assert main([*argv, "--quiet"]) in (0, 1)
        out = capsys.readouterr().out
        assert out.count("\n") == 1 and out.startswith("The claim under test:")
        assert "Cautions" not in out and "\x1b[" not in out


def test_text_output_ends_with_the_cautions(capsys):
    for argv in (["vet", str(READING)], ["plan", str(CYCLING)], ["controls", str(WATER)]):
        assert main(argv) == 0
        out = capsys.readouterr().out
        assert "\nCautions\n- Sensitivity analysis shows what would overturn the claim" in out
        assert "- Decisions that affect people need domain experts, ethics review" in out


def test_gates_exit_1_with_a_sentence(capsys):
    assert main(["audit", str(WATER), "--quiet", "--fail-below", "0.9"]) == 1
    assert "gate failed: the robustness value is" in capsys.readouterr().err
    assert main(["audit", str(WATER), "--quiet", "--fail-below", "0.01"]) == 0
    assert main(["vet", str(READING), "--quiet", "--fail-below", "0.2"]) == 1
    assert "below --fail-below" in capsys.readouterr().err
    assert main(["controls", str(WATER), "--quiet", "--fail-if-invalid"]) == 1
    assert "are not a valid adjustment set" in capsys.readouterr().err


def test_check_gates_on_documents():
    args = argparse.Namespace(fail_below=0.5, gate_on="ci", fail_if_invalid=True)
    gates = common.check_gates(args, audit_document())
    assert gates.exit_code == 1 and len(gates.failures) == 2
    assert "robustness value of the confidence interval" in gates.failures[0]
    args = argparse.Namespace(fail_below=0.01, gate_on="estimate", fail_if_invalid=False)
    assert common.check_gates(args, vet_document()).exit_code == 0
    missing = common.check_gates(args, {"schema": "causalcheck/vet/1"})
    assert missing.failures == [("--fail-below 0.01: no robustness value could be computed, "
                                 "so the gate cannot pass")]


@pytest.mark.parametrize("command", ["audit", "vet", "plan", "controls"])
def test_help_states_the_exit_codes(command, capsys):
    with pytest.raises(SystemExit):
        main([command, "--help"])
    out = capsys.readouterr().out
    assert "exit codes:" in out and "1  a gate failed" in out and "2  bad input" in out


def test_readme_states_the_exit_codes():
    readme = (ROOT / "README.md").read_text(encoding="utf-8")
    assert "Exit codes: 0" in readme and "1 a pipeline gate failed" in readme \
        and "2 bad input" in readme


def test_headings_bold_on_a_terminal_but_never_the_verdict(monkeypatch):
    monkeypatch.delenv("NO_COLOR", raising=False)
    monkeypatch.setenv("TERM", "xterm")
    monkeypatch.setattr("sys.stdout", FakeTerminal())
    verdict = "The claim under test: a long verdict paragraph that the command wrapped\n" \
              "over two lines."
    text = f"Title\n\n{verdict}\n\nReported numbers\nquantity  value\n--------  -----\nt  3"
    shown = common._highlight(text, paragraph=" ".join(verdict.split()))
    lines = shown.split("\n")
    assert lines[0] == "\x1b[1mTitle\x1b[0m"
    assert lines[2].startswith("The claim under test") and "\x1b[" not in lines[2]
    assert "\x1b[1mReported numbers\x1b[0m" in lines
