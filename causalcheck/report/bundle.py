"""The ``--out`` folder: report.html, report.md, result.json and the figures, written safely.

:func:`write_bundle` first checks the folder (a new or empty folder, or one causalcheck wrote;
anything else is refused unless ``force``, see :func:`~causalcheck.report.files.
prepare_output_folder`), then renders everything in memory, and only then writes the files
as one step (:func:`~causalcheck.report.files.write_all_atomic`): every file is written in full
under a temporary name first, and only then are all of them renamed into place, the HTML report
last. An interruption while rendering or writing leaves the folder as it was (a re-run into an
old report folder never mixes new figures with the old report.html). Figures that a previous
run wrote into the same folder and this run does not are removed, and only those: the folder's
manifest lists what causalcheck wrote.

Examples
--------
>>> import tempfile, pathlib
>>> folder = pathlib.Path(tempfile.mkdtemp()) / "report"
>>> written = write_bundle(folder, {"schema": "causalcheck/wording/1", "claims": []},
...                        kind="wording", force=False)
>>> sorted(p.name for p in written.files)
['report.html', 'report.md', 'result.json']
"""

from __future__ import annotations

import json
from collections.abc import Callable, Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from .cautions import caution_texts
from .context import kind_of
from .files import prepare_output_folder, write_all_atomic, write_atomic
from .jsonout import dumps
from .verdict import build_verdict

__all__ = ["MANIFEST", "Bundle", "with_report_keys", "write_bundle"]

MANIFEST = ".causalcheck-files.json"


@dataclass(frozen=True)
class Bundle:
    """What :func:`write_bundle` wrote: the folder and every file in it, in writing order."""

    folder: Path
    files: tuple[Path, ...]
    figures: tuple[str, ...]

    def to_dict(self) -> dict[str, Any]:
        return {"folder": str(self.folder), "files": [p.name for p in self.files],
                "figures": list(self.figures)}


def with_report_keys(document: Mapping[str, Any]) -> dict[str, Any]:
    """A copy of ``document`` with the extra keys every output carries.

    ``verdict`` (the paragraph as text) and ``cautions`` (the full cautions) are added when
    missing; the contract's keys are untouched.
    """
    result = dict(document)
    if "verdict" not in result:
        try:
            result["verdict"] = build_verdict(result).text
        except KeyError:
            pass
    if "cautions" not in result:
        result["cautions"] = caution_texts(result)
    return result


def _previous_files(folder: Path) -> list[str]:
    try:
        listed = json.loads((folder / MANIFEST).read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return []
    files = listed.get("files") if isinstance(listed, dict) else None
    return [str(f) for f in files or [] if isinstance(f, str) and "/" not in f
            and "\\" not in f and not f.startswith(".")]


def write_bundle(folder: str | Path, document: Mapping[str, Any], *, kind: str | None = None,
                 force: bool = False,
                 progress: Callable[[str], None] | None = None) -> Bundle:
    """Write the full report of ``document`` into ``folder``.

    Parameters
    ----------
    folder : path
        The ``--out`` folder: created when missing; an existing one must be empty or written by
        causalcheck before, unless ``force``.
    document : mapping
        The result document (a command's ``to_dict()``, ideally with the study context).
    kind : str, keyword-only
        The command (``"audit"``, ``"vet"``, ...); read from the document's schema if omitted.
    force : bool, keyword-only
        Write into a non-empty folder causalcheck did not create.
    progress : callable, keyword-only
        Called with a short description before each slow step (for a progress display).

    Returns
    -------
    Bundle

    Raises
    ------
    OutputError
        When the folder is refused or a file cannot be written; nothing the user owns is
        overwritten.
    """
    from .figures import FIGURES, figures_for, render_png
    from .html import render_report_html
    from .markdown import render_report_markdown
    from .sections import build_report

    if kind is not None and kind_of(document) == "unknown":
        document = dict(document, schema=f"causalcheck/{kind}/1")
    target = prepare_output_folder(folder, force=force)
    full = with_report_keys(document)
    # render everything in memory first: an interruption here leaves no report behind
    images: dict[str, bytes] = {}
    for name in figures_for(full):
        if progress is not None:
            progress(f"drawing {name}")
        try:
            images[name] = render_png(name, full)
        except ValueError:
            continue                    # the document lacks the numbers for this figure
    report = build_report(full, figures=list(images))
    markdown = render_report_markdown(report)
    page = render_report_html(report, images)
    payload = dumps(full)

    previous = _previous_files(target)
    files: dict[str, str | bytes] = {FIGURES[name][0]: data for name, data in images.items()}
    files["result.json"] = payload
    files["report.md"] = markdown
    files["report.html"] = page
    names = list(files)
    figure_files = {f for f, _ in FIGURES.values()}
    stale = [f for f in previous if f not in names and f in figure_files]
    # the manifest renamed in with the report still lists the stale figures, so that a run
    # interrupted before they are removed removes them next time
    files[MANIFEST] = json.dumps({"files": names + stale}) + "\n"
    written = write_all_atomic(target, files)[:-1]
    for name in stale:
        try:
            (target / name).unlink()
        except OSError:
            pass
    if stale:
        write_atomic(target / MANIFEST, json.dumps({"files": names}) + "\n")
    return Bundle(target, tuple(written), tuple(images))
