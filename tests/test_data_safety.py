"""Data never lost: inputs are only read, outputs are written atomically, interruptions are clean.

- the package writes files only through :mod:`causalcheck.report.files` (checked on the
  source: every write-mode ``open``, ``to_csv``, ``write_text``, rename or delete outside it is
  listed, and the few allowed ones are named with the reason);
- a run of every command on the scenarios, with ``--out`` (and ``--grid-csv``), leaves every
  input file byte for byte as it was;
- an interruption (``KeyboardInterrupt``) at each rename, or in the middle of writing a file's
  bytes, leaves no temporary file and no half-written file: each file of the ``--out`` folder
  is either absent (a new folder) or its old version (a re-run) or complete;
- a full disk is a clear error (exit 2), not a traceback, and the old file stays.
"""

from __future__ import annotations

import ast
import errno
import hashlib
import os
import shutil
from pathlib import Path

import pytest

from causalcheck.cli import main
from causalcheck.errors import OutputError
from causalcheck.report import files as output_files
from causalcheck.report.files import write_all_atomic, write_atomic

ROOT = Path(__file__).resolve().parents[1]
PACKAGE = ROOT / "causalcheck"
SCENARIOS = ROOT / "scenarios"

# --------------------------------------------------------------------------------------------
# The source: where the package can write


WRITING_METHODS = {"to_csv", "to_parquet", "to_json", "to_excel", "to_pickle", "write_text",
                   "write_bytes", "tofile", "write_table", "write_csv", "unlink", "rmdir",
                   "rename", "replace", "remove", "rmtree", "move", "copy", "copyfile",
                   "savefig", "mkstemp", "NamedTemporaryFile", "fdopen"}

# (file, call, why it is safe)
ALLOWED = {
    ("report/files.py", "*"): "the one module that writes output, atomically",
    ("engines.py", "mkstemp"): "the stream engine's spill file of encoded rows, in the temp "
                               "folder, removed by a finalizer",
    ("engines.py", "fdopen"): "the same spill file",
    ("engines.py", "tofile"): "the same spill file",
    ("engines.py", "unlink"): "removes only that spill file",
    ("report/bundle.py", "unlink"): "removes a figure that causalcheck's own manifest lists "
                                    "in a folder it wrote",
    ("report/figures.py", "savefig"): "into an in-memory buffer",
    ("commands/vet.py", "savefig"): "into an in-memory buffer",
    ("commands/plan.py", "savefig"): "into an in-memory buffer",
}


def _mode_of(call: ast.Call) -> str | None:
    """The mode string of an ``open``-like call, if written as a literal."""
    candidates = list(call.args[1:2]) + [k.value for k in call.keywords if k.arg == "mode"]
    for node in candidates:
        if isinstance(node, ast.Constant) and isinstance(node.value, str):
            return node.value
    return None


def writing_calls() -> list[tuple[str, int, str]]:
    found = []
    for path in sorted(PACKAGE.rglob("*.py")):
        rel = path.relative_to(PACKAGE).as_posix()
        tree = ast.parse(path.read_text(encoding="utf-8"))
        for node in ast.walk(tree):
            if not isinstance(node, ast.Call):
                continue
            func = node.func
            name = func.attr if isinstance(func, ast.Attribute) else \
                func.id if isinstance(func, ast.Name) else ""
            if name == "open":
                mode = _mode_of(node) if isinstance(func, ast.Name) else (
                    node.args[0].value if node.args and isinstance(node.args[0], ast.Constant)
                    else _mode_of(node))
                if mode is not None and any(c in mode for c in "wax+"):
                    found.append((rel, node.lineno, "open"))
            elif name in WRITING_METHODS:
                if name in ("replace", "copy") and not (
                        isinstance(func, ast.Attribute) and isinstance(func.value, ast.Name)
                        and func.value.id in ("os", "shutil")):
                    continue                   # str.replace, dict.copy, dataclasses.replace
                if name == "remove" and not (isinstance(func, ast.Attribute)
                                             and isinstance(func.value, ast.Name)
                                             and func.value.id == "os"):
                    continue                   # list.remove, set.remove
                if name == "savefig" and node.args and isinstance(node.args[0], ast.Name) \
                        and node.args[0].id == "buffer":
                    continue                   # into io.BytesIO
                found.append((rel, node.lineno, name))
    return found


def test_the_package_writes_files_only_through_report_files():
    unexpected = [(rel, line, name) for rel, line, name in writing_calls()
                  if (rel, "*") not in ALLOWED and (rel, name) not in ALLOWED]
    assert not unexpected, ("writes outside causalcheck/report/files.py (route them through "
                            f"write_atomic, or add a reason to ALLOWED): {unexpected}")


def test_the_source_scan_sees_writes():
    """The scan is not blind: it finds the writes of report/files.py itself."""
    names = {name for rel, _, name in writing_calls() if rel == "report/files.py"}
    assert {"mkstemp", "fdopen", "replace", "unlink"} <= names


# --------------------------------------------------------------------------------------------
# Inputs stay as they were


def hashes(folder: Path) -> dict[str, str]:
    return {p.relative_to(folder).as_posix(): hashlib.sha256(p.read_bytes()).hexdigest()
            for p in sorted(folder.rglob("*")) if p.is_file()}


RUNS = [("controls", "water_rebate", ()), ("audit", "water_rebate", ()),
        ("vet", "reading_app_review", ("--grid-csv", "{out}/grid.csv")),
        ("plan", "cycling_plan", ()), ("wording", "reading_app_review", ())]


@pytest.mark.parametrize("command,scenario,extra", RUNS, ids=[r[0] for r in RUNS])
def test_a_run_changes_no_input_file(command, scenario, extra, tmp_path, capsys):
    from causalcheck.cli import build_parser

    known = build_parser()._subparsers._group_actions[0].choices  # type: ignore[union-attr]
    if command not in known:
        pytest.skip(f"the {command!r} command is not registered yet")
    folder = tmp_path / scenario
    shutil.copytree(SCENARIOS / scenario, folder)
    before = hashes(folder)
    out = tmp_path / "out"
    target = folder / ("report.md" if command == "wording" else "study.toml")
    argv = [command, str(target)]
    if command == "wording":
        argv += ["--study", str(folder / "study.toml")]
    writes_out = "--out" in known[command].format_help()      # wording prints only
    if writes_out:
        argv += ["--out", str(out)]
    code = main([*argv, "--format", "json", *[a.replace("{out}", str(tmp_path))
                                               for a in extra]])
    captured = capsys.readouterr()
    assert code in (0, 1), captured.err
    assert hashes(folder) == before
    assert (out / "result.json").is_file() == writes_out
    assert not list(tmp_path.rglob("*.tmp"))


# --------------------------------------------------------------------------------------------
# Interruptions and full disks


STUDY = SCENARIOS / "reading_app_review" / "study.toml"


def vet_into(folder: Path, *extra: str) -> int:
    return main(["vet", str(STUDY), "--quiet", "--out", str(folder), *extra])


class Interrupt:
    """Stands in for ``os.replace``: raises KeyboardInterrupt at call number ``at``."""

    def __init__(self, at: int):
        self.at, self.calls, self.real = at, 0, os.replace

    def __call__(self, source, target):
        self.calls += 1
        if self.calls == self.at:
            raise KeyboardInterrupt
        return self.real(source, target)


@pytest.fixture(scope="module")
def reference(tmp_path_factory) -> dict[str, bytes]:
    """The files of an uninterrupted run (the runs are deterministic: same bytes each time)."""
    folder = tmp_path_factory.mktemp("reference") / "out"
    assert vet_into(folder) == 0
    return {p.name: p.read_bytes() for p in folder.iterdir()}


def leftovers(folder: Path) -> list[str]:
    return sorted(p.name for p in folder.rglob("*") if p.name.endswith(".tmp"))


def test_an_interruption_at_any_rename_leaves_only_complete_files(reference, tmp_path,
                                                                  monkeypatch, capsys):
    renames = len(reference)                   # one rename a file (marker and manifest too)
    for at in range(1, renames + 1):
        folder = tmp_path / f"run{at}"
        interrupt = Interrupt(at)
        monkeypatch.setattr(os, "replace", interrupt)
        try:
            code = vet_into(folder)
        finally:
            monkeypatch.setattr(os, "replace", interrupt.real)
        err = capsys.readouterr().err
        assert code == 130 and "interrupted; no file was left half-written" in err
        assert str(folder) in err and "Traceback" not in err
        assert leftovers(tmp_path) == []
        present = {p.name: p.read_bytes() for p in folder.iterdir()} if folder.exists() else {}
        assert len(present) == at - 1          # the files renamed before the interruption
        for name, data in present.items():
            assert data == reference[name], f"{name} is not complete after stop {at}"
    # and a run that is not interrupted completes the folder
    assert vet_into(tmp_path / "whole") == 0
    assert {p.name for p in (tmp_path / "whole").iterdir()} == set(reference)


def test_an_interruption_inside_a_write_leaves_no_partial_file(reference, tmp_path,
                                                               monkeypatch, capsys):
    real_fdopen = os.fdopen
    writes = {"count": 0}

    class HalfWriter:
        def __init__(self, stream):
            self.stream = stream

        def write(self, data):
            writes["count"] += 1
            if writes["count"] == 3:              # the third file: half its bytes, then stop
                self.stream.write(data[: len(data) // 2])
                raise KeyboardInterrupt
            return self.stream.write(data)

        def __getattr__(self, name):
            return getattr(self.stream, name)

    monkeypatch.setattr(os, "fdopen", lambda *a, **k: HalfWriter(real_fdopen(*a, **k)))
    folder = tmp_path / "out"
    code = vet_into(folder)
    monkeypatch.setattr(os, "fdopen", real_fdopen)
    assert code == 130 and "interrupted" in capsys.readouterr().err
    assert leftovers(tmp_path) == []
    for path in folder.iterdir():
        assert path.read_bytes() == reference[path.name]
    # the report's files are all written under temporary names before any is renamed into
    # place (report.files.write_all_atomic), so a stop while writing them leaves none of them:
    # only the folder's marker, written before the report
    assert [p.name for p in folder.iterdir()] == [".causalcheck-output"]


def test_an_interrupted_rerun_keeps_each_file_old_or_new(reference, tmp_path, monkeypatch,
                                                         capsys):
    """Into a folder causalcheck wrote before: every file is the old version or the new one."""
    folder = tmp_path / "out"
    assert main(["vet", "--estimate", "0.5", "--se", "0.2", "--dof", "300", "--quiet",
                 "--out", str(folder)]) == 0
    old = {p.name: p.read_bytes() for p in folder.iterdir()}
    capsys.readouterr()
    interrupt = Interrupt(4)
    monkeypatch.setattr(os, "replace", interrupt)
    code = vet_into(folder)
    monkeypatch.setattr(os, "replace", interrupt.real)
    assert code == 130
    assert leftovers(tmp_path) == []
    for path in folder.iterdir():
        data = path.read_bytes()
        assert data == reference.get(path.name) or data == old.get(path.name), path.name


def test_error_a_full_disk_is_a_clear_message_and_the_old_file_stays(tmp_path, monkeypatch,
                                                                     capsys):
    folder = tmp_path / "out"
    assert vet_into(folder) == 0
    capsys.readouterr()
    before = hashes(folder)
    real_fdopen = os.fdopen

    class FullDisk:
        def __init__(self, stream):
            self.stream = stream

        def write(self, data):
            raise OSError(errno.ENOSPC, "No space left on device")

        def __getattr__(self, name):
            return getattr(self.stream, name)

    monkeypatch.setattr(os, "fdopen", lambda *a, **k: FullDisk(real_fdopen(*a, **k)))
    code = vet_into(folder)
    monkeypatch.setattr(os, "fdopen", real_fdopen)
    err = capsys.readouterr().err
    assert code == 2 and "Traceback" not in err
    assert "cannot write" in err and "No space left on device" in err
    assert "it was left as it was" in err and "Free some space" in err
    assert hashes(folder) == before and leftovers(tmp_path) == []


def test_an_interrupted_grid_csv_leaves_no_file(tmp_path, monkeypatch, capsys):
    target = tmp_path / "grid.csv"
    interrupt = Interrupt(1)
    monkeypatch.setattr(os, "replace", interrupt)
    code = main(["vet", str(STUDY), "--quiet", "--grid-csv", str(target)])
    monkeypatch.setattr(os, "replace", interrupt.real)
    assert code == 130 and not target.exists() and leftovers(tmp_path) == []
    capsys.readouterr()
    assert main(["vet", str(STUDY), "--quiet", "--grid-csv", str(target)]) == 0
    assert target.read_text(encoding="utf-8").startswith("r2dz,r2yz,adjusted_estimate")


# --------------------------------------------------------------------------------------------
# The writing functions themselves


def test_write_atomic_keeps_normal_permissions_and_replaces_whole(tmp_path):
    path = tmp_path / "a.txt"
    path.write_text("old\n")
    write_atomic(path, "new\n")
    assert path.read_text() == "new\n" and leftovers(tmp_path) == []
    umask = os.umask(0)
    os.umask(umask)
    assert path.stat().st_mode & 0o777 == 0o666 & ~umask


def test_write_all_atomic_is_all_or_nothing_before_the_renames(tmp_path, monkeypatch):
    (tmp_path / "a.txt").write_text("old a")
    (tmp_path / "b.txt").write_text("old b")
    real_stage = output_files._stage
    calls = {"n": 0}

    def stage(path, content):
        calls["n"] += 1
        if calls["n"] == 2:
            raise KeyboardInterrupt
        return real_stage(path, content)

    monkeypatch.setattr(output_files, "_stage", stage)
    with pytest.raises(KeyboardInterrupt):
        write_all_atomic(tmp_path, {"a.txt": "new a", "b.txt": "new b"})
    assert (tmp_path / "a.txt").read_text() == "old a"      # staged, never renamed
    assert (tmp_path / "b.txt").read_text() == "old b"
    assert leftovers(tmp_path) == []
    monkeypatch.setattr(output_files, "_stage", real_stage)
    written = write_all_atomic(tmp_path, {"a.txt": "new a", "b.txt": b"new b"})
    assert [p.name for p in written] == ["a.txt", "b.txt"]
    assert (tmp_path / "a.txt").read_text() == "new a"
    assert (tmp_path / "b.txt").read_text() == "new b"


def test_error_write_all_atomic_turns_a_disk_error_into_an_output_error(tmp_path,
                                                                        monkeypatch):
    (tmp_path / "a.txt").write_text("old a")

    def no_space(source, target):
        raise OSError(errno.ENOSPC, "No space left on device", str(target))

    monkeypatch.setattr(os, "replace", no_space)
    with pytest.raises(OutputError, match="No space left on device.*left as it was"):
        write_all_atomic(tmp_path, {"a.txt": "new a"})
    monkeypatch.undo()
    assert (tmp_path / "a.txt").read_text() == "old a" and leftovers(tmp_path) == []
