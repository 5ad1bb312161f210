"""Plain-text pieces that several terminal reports share.

The terminal reports of ``vet`` and ``audit`` lay out their own tables; what both show the same
way lives here, read from the result document like every other part of the report layer.

Examples
--------
>>> block = {"reviewed": True, "source": "report.md", "format": "markdown", "lines": 3,
...          "sentences": 2, "evidence": {"design": "randomized"}, "supported_level": 5,
...          "supported_grade": "causal", "notes": [],
...          "claims": [{"line": 2, "sentence": "Tutoring raised scores.", "level": 5,
...                      "grade": "causal", "prescriptive": False, "verdict": "supported",
...                      "suggestion": None}]}
>>> print("\\n".join(wording_lines({"wording": block})))
Wording of the report
Read report.md (markdown, 3 lines, 2 sentences).
  Evidence: a randomised design supports wording up to level 5, causal.
  line 2: causal (5) -- supported
    "Tutoring raised scores."
"""

from __future__ import annotations

import textwrap
from collections.abc import Mapping
from typing import Any

from .context import ResultView, upper_first
from .numbers import count, is_number
from .verdict import evidence_phrase, supported_phrase

__all__ = ["wording_lines"]


def _wrap(text: str, width: int, first: str = "", rest: str | None = None) -> list[str]:
    return textwrap.wrap(text, width=width, initial_indent=first,
                         subsequent_indent=first if rest is None else rest,
                         break_on_hyphens=False) or [first.rstrip()]


def wording_lines(document: Mapping[str, Any], *, width: int = 92) -> list[str]:
    """The "Wording of the report" section of a vet or audit terminal report.

    Empty when the document has no ``wording`` block (the study names no
    ``[study].report_text``). Each sentence that links the treatment and the outcome is listed
    with its line, grade and level, verdict, and the suggested rewording when there is one; a
    report text that could not be read is one note saying why.
    """
    block = document.get("wording")
    if not isinstance(block, Mapping):
        return []
    lines = ["Wording of the report"]
    if not block.get("reviewed"):
        reason = str(block.get("error") or "it could not be read").rstrip(".")
        lines += _wrap(f"Not reviewed: {reason}. The rest of this report does not depend on "
                       "it.", width, "- ", "  ")
        return lines
    facts = ", ".join(x for x in (
        str(block.get("format") or ""),
        f"{count(block['lines'])} lines" if is_number(block.get("lines")) else "",
        f"{count(block['sentences'])} sentences" if is_number(block.get("sentences")) else "")
        if x)
    lines += _wrap(f"Read {block.get('source') or 'the report text'}"
                   + (f" ({facts})" if facts else "") + ".", width)
    evidence = block.get("evidence")
    supported = supported_phrase(block)
    if supported:
        evidence = evidence if isinstance(evidence, Mapping) else {}
        lines += _wrap(f"Evidence: {evidence_phrase(evidence)} supports wording {supported}.",
                       width, "  ")
    study_claim = block.get("study_claim")
    if isinstance(study_claim, Mapping) and study_claim.get("verdict") not in (None,
                                                                                 "supported"):
        lines += _wrap(f"The claim under test: {study_claim.get('grade')} "
                       f"({study_claim.get('level')}) -- {study_claim['verdict']}.", width,
                       "  ")
        if study_claim.get("suggestion"):
            lines += _wrap(f"reword: \"{study_claim['suggestion']}\"", width, "    ", "      ")
    claims = [c for c in block.get("claims") or [] if isinstance(c, Mapping)]
    if not claims:
        lines += _wrap("No sentence links the treatment and the outcome.", width, "  ")
    for claim in claims:
        where = f"line {claim['line']}" if is_number(claim.get("line")) else "line ?"
        tags = f"{claim.get('grade')} ({claim.get('level')})" + (
            ", advice" if claim.get("prescriptive") else "")
        verdict = f" -- {claim['verdict']}" if claim.get("verdict") else ""
        lines.append(f"  {where}: {tags}{verdict}")
        lines += _wrap(f"\"{claim.get('sentence')}\"", width, "    ", "      ")
        if claim.get("suggestion"):
            lines += _wrap(f"reword: \"{claim['suggestion']}\"", width, "    ", "      ")
    view = ResultView(document)
    notes = [str(note) for note in block.get("notes") or [] if note]
    if notes:
        lines.append("")
    for note in notes:
        lines += _wrap(upper_first(note, identifiers=view.identifiers), width, "- ", "  ")
    return lines
