"""The project's exception types.

Every refusal the tool makes is a :class:`CausalCheckError`; the command line turns it into one
clear paragraph on stderr and exit code 2. Anything else escaping is a bug.

A message names the file, field or column, states the rule, shows the bad value and says how to
fix it. Study-file problems are collected and raised together as one :class:`StudyFileError`.
"""

from __future__ import annotations

import difflib
from collections.abc import Iterable
from dataclasses import dataclass

__all__ = [
    "CausalCheckError",
    "CausalCheckWarning",
    "DataError",
    "DegenerateWarning",
    "GraphError",
    "LexiconError",
    "NumericsError",
    "OutputError",
    "PlanError",
    "Problem",
    "ReportedError",
    "StudyFileError",
    "TextFileError",
    "WordingError",
    "near_matches",
]


class CausalCheckError(ValueError):
    """Base class of every error the tool reports to a user."""


@dataclass(frozen=True)
class Problem:
    """One problem found in a study file.

    ``where`` is the key path such as ``[graph].edges[3]``; ``line`` is the 1-based line in the
    file when it can be found, else ``None``.
    """

    where: str
    message: str
    line: int | None = None

    def format(self) -> str:
        at = f"{self.where} (line {self.line})" if self.line else self.where
        return f"{at}: {self.message}"


class StudyFileError(CausalCheckError):
    """A study file that cannot be used; carries every problem found in it."""

    def __init__(self, path: str, problems: Iterable[Problem]):
        self.path = path
        self.problems = tuple(problems)
        count = len(self.problems)
        head = f"study file {path!r} has {count} problem{'s' if count != 1 else ''}"
        body = "\n".join(f"  - {p.format()}" for p in self.problems)
        super().__init__(f"{head}:\n{body}")


class DataError(CausalCheckError):
    """The data file or frame cannot support the requested analysis."""


class GraphError(CausalCheckError):
    """The causal graph is not a valid DAG for the question asked."""


class NumericsError(CausalCheckError):
    """The numbers cannot be solved reliably (for example, perfectly collinear columns)."""


class ReportedError(CausalCheckError):
    """Numbers taken from a published table are impossible or incomplete."""


class OutputError(CausalCheckError):
    """An output folder or file cannot be written safely."""


class PlanError(CausalCheckError):
    """Planning inputs that describe no possible study (for example, path strengths that
    explain more than all of a variable's variance)."""


class WordingError(CausalCheckError):
    """A bad input to the wording review (an option value, a text file, a lexicon file)."""


class TextFileError(WordingError):
    """The report text cannot be read as text."""


class LexiconError(WordingError):
    """A lexicon file breaks the lexicon format; carries every problem found."""

    def __init__(self, path: str, problems: Iterable[str]):
        self.path = path
        self.problems = tuple(problems)
        count = len(self.problems)
        head = f"lexicon file {path!r} has {count} problem{'s' if count != 1 else ''}"
        body = "\n".join(f"  - {p}" for p in self.problems)
        super().__init__(f"{head}:\n{body}")


class CausalCheckWarning(UserWarning):
    """Base class of the warnings the tool gives a user; the command line prints each once as
    ``causalcheck CMD: warning: ...`` on stderr, and the report carries the same words as a
    note."""


class DegenerateWarning(CausalCheckWarning):
    """Legal input with a degenerate result: a number that is undefined (``nan``, written as
    null) or infinite, such as the interval at a tiny dof or the direction of bias of an
    estimate that sits exactly on its threshold."""


def near_matches(name: str, candidates: Iterable[str]) -> str:
    """Return ``" (did you mean 'a' or 'b'?)"`` for close matches of ``name``, else ``""``.

    Case-insensitive matches are always offered first.

    >>> near_matches("incme", ["income", "region"])
    " (did you mean 'income'?)"
    >>> near_matches("zzz", ["income"])
    ''
    """
    candidates = list(candidates)
    same_case = [c for c in candidates if c.lower() == name.lower() and c != name]
    close = difflib.get_close_matches(name, candidates, n=3, cutoff=0.6)
    found = list(dict.fromkeys(same_case + close))
    if not found:
        return ""
    return " (did you mean " + " or ".join(repr(c) for c in found[:3]) + "?)"
