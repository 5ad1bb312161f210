"""The causal-language review: does a report's wording claim more than its evidence supports?

A report says "the grant *cut* winter bills"; its evidence is an observational comparison whose
estimate a modest unmeasured confounder could explain away. This module finds the sentences of
a report that link the exposure (the study's treatment) and the outcome, grades how strongly
each one claims a cause, and compares that strength with what the design and the sensitivity
analysis support, proposing a rewording at the supported strength.

The strength scale
------------------
Six ordered levels, fixed by the JSON contract (``level``); ``grade`` is our own short name:

===== ================== ==========================================================
level grade              the sentence ...
===== ================== ==========================================================
0     ``no-link``        states that there is no relation or no effect
1     ``association``    states an association ("associated with", "linked to",
                         "those who X had lower Y")
2     ``hedged``         states a hedged association ("may be associated with",
                         "appears to be linked to", "tended to have lower")
3     ``possible-cause`` states a conditional causal claim ("may reduce", "could lead
                         to", "suggests that X lowered Y")
4     ``capacity``       states that X *can* cause Y ("can reduce")
5     ``causal``         states a cause ("reduces", "led to", "the effect of X on Y",
                         "due to", "as a result of")
===== ================== ==========================================================

Advice ("should", "must", "we recommend") is flagged separately (``prescriptive``), as the
published schemes do. The scale follows the coding schemes for causal claims in research
abstracts, press releases and news of Sumner et al. (2014), who coded statements from "no
relationship" through correlational, conditional causal ("might cause"), "can cause" and
causal, with advice coded on its own; and Haber et al. (2022), who rated the causal strength
of the linking words ("associated", "linked", "effect", "cause") and of their modifiers
("may", "suggest") in observational health research. Both are recalled from memory; the word
lists, rules and names here are our own.

How a sentence is graded
------------------------
All English knowledge lives in a data file, ``causalcheck/data/causal_lexicon.toml``, which
users extend with ``--lexicon EXTRA.toml``. The rules are general:

1. *Relation expressions* are causal (verbs such as "reduce", nouns such as "effect of",
   connectives such as "due to"; level 5), associational ("associated with", "predicts",
   comparatives between groups; level 1) or no-link ("unrelated to"; level 0).
2. *Modifiers* before an expression, within a window of a few tokens of the same clause,
   weaken it: conditional words ("may", "could", "probably") and hedges ("appears to",
   "suggests that") make a causal expression level 3 and an association level 2; "can"
   makes a causal expression level 4.
3. *Negation* in scope ("did not reduce", "no association", "no evidence that", "... was not
   statistically significant") makes it level 0.
4. Questions, aims and methods ("we examined whether", "to estimate the effect of") are not
   claims; nor are fixed phrases such as "random effects" or "side effects".
5. A sentence is a claim when an expression links a mention of the exposure with a mention of
   the outcome (the study's treatment and outcome names, labels and ``synonyms``); without a
   study, any expression with words on both sides counts. Its level is the strongest of its
   expressions.

Evidence
--------
The design and the robustness value (Cinelli & Hazlett 2020, the share of residual variance
an unmeasured confounder would need to explain in both treatment and outcome to remove the
estimate) set the strongest wording supported (:func:`assess_evidence`):
a randomised design supports level 5; an observational one with RV >= 0.10 supports level 3
("may reduce"); an observational one with a smaller or no robustness value supports
association wording (level 2 at most). These cut-offs are common practice, not a published
rule.

Examples
--------
>>> review = review_text("Smaller classes raised reading scores.",
...                      exposure_terms=["smaller classes"], outcome_terms=["reading scores"],
...                      design="observational", robustness_value=0.03)
>>> claim = review.claims[0]
>>> claim.level, claim.grade, claim.verdict
(5, 'causal', 'stronger than the evidence')
>>> claim.suggestion
'Smaller classes were associated with higher reading scores.'

References
----------
Sumner, P., Vivian-Griffiths, S., Boivin, J., et al. (2014). The association between
exaggeration in health related science news and academic press releases: retrospective
observational study. BMJ, 349, g7015.

Haber, N. A., Wieten, S. E., Rohrer, J. M., et al. (2022). Causal and associational language
in observational health research: a systematic evaluation. American Journal of Epidemiology,
191(12), 2084-2097.

Cinelli, C., & Hazlett, C. (2020). Making sense of sensitivity: extending omitted variable
bias. Journal of the Royal Statistical Society, Series B, 82(1), 39-67.
"""

from __future__ import annotations

import bisect
import functools
import html
import math
import re
import textwrap
import tomllib
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass, field
from importlib import resources
from pathlib import Path
from typing import Any

from .errors import LexiconError, TextFileError, WordingError, near_matches
from .study import Study

__all__ = [
    "CONDITIONAL_CAUSAL_MIN_RV",
    "GRADES",
    "GRADE_DESCRIPTIONS",
    "LEVELS",
    "STRONGER",
    "SUPPORTED",
    "WEAKER",
    "Claim",
    "Evidence",
    "Expression",
    "Grading",
    "Lexicon",
    "LexiconError",
    "Sentence",
    "TextFileError",
    "WordingError",
    "WordingReview",
    "assess_evidence",
    "default_lexicon",
    "extract_text",
    "format_rv",
    "grade_name",
    "grade_sentence",
    "judge_claim",
    "load_lexicon",
    "read_text_file",
    "review_file",
    "review_for_study",
    "review_text",
    "split_sentences",
    "study_terms",
    "wording_block",
]

# --------------------------------------------------------------------------------------------
# The scale

LEVELS = (0, 1, 2, 3, 4, 5)
GRADES = ("no-link", "association", "hedged", "possible-cause", "capacity", "causal")
GRADE_DESCRIPTIONS = (
    "states no relation or no effect",
    "states an association",
    "states a hedged association",
    "states a conditional causal claim (may/might/could)",
    "states that the exposure can cause the outcome",
    "states a causal claim",
)

SUPPORTED = "supported"
STRONGER = "stronger than the evidence"
WEAKER = "weaker than it could be"

#: Observational studies with a robustness value at least this large support conditional
#: causal wording (level 3); below it, association wording (level 2 at most). Common practice.
CONDITIONAL_CAUSAL_MIN_RV = 0.10

_SCHEMA = "causalcheck/wording/1"
_LEXICON_SCHEMA = "causalcheck/lexicon/1"
#: Runs of text longer than this without a sentence end are cut, so that grading stays linear.
MAX_SENTENCE_CHARS = 2000


def grade_name(level: int) -> str:
    """The grade name of ``level`` on the 0-5 scale.

    >>> grade_name(3)
    'possible-cause'
    """
    return GRADES[level]


# --------------------------------------------------------------------------------------------
# Errors


# WordingError, TextFileError and LexiconError live in causalcheck.errors with the other
# errors; they are re-exported here (see the import above) so `from causalcheck.wording import
# WordingError` keeps working.


# --------------------------------------------------------------------------------------------
# Tokens

# A word (letters, digits, inner hyphens and apostrophes) or one other non-space character.
_TOKEN = re.compile(r"\w+(?:[-'\u2019]\w+)*|\.\.\.|[^\w\s]")
_GAP = "\x00gap"  # a phrase item matching up to three tokens
_GAP_MAX = 3


class _Token:
    """One token: its text, lower-cased form and character span (a slotted class: fast)."""

    __slots__ = ("end", "is_word", "low", "start", "text")

    def __init__(self, text: str, low: str, start: int, end: int):
        self.text = text
        self.low = low
        self.start = start
        self.end = end
        self.is_word = low[:1].isalnum() or low == "'s"

    def __repr__(self) -> str:
        return f"_Token({self.text!r}, {self.start}, {self.end})"


def _tokenize(text: str) -> list[_Token]:
    """Split ``text`` into tokens; "didn't" becomes "did" + "not", "X's" becomes "X" + "'s"."""
    out: list[_Token] = []
    append = out.append
    for match in _TOKEN.finditer(text):
        word = match.group()
        if "'" not in word and "\u2019" not in word:
            append(_Token(word, word.lower(), match.start(), match.end()))
            continue
        low = word.lower().replace("\u2019", "'")
        start = match.start()
        if low.endswith("n't") and len(low) > 3:
            stem = low[:-3]
            stem = {"ca": "can", "wo": "will", "sha": "shall"}.get(stem, stem)
            cut = len(word) - 3
            out.append(_Token(word[:cut], stem, start, start + cut))
            out.append(_Token(word[cut:], "not", start + cut, match.end()))
        elif low.endswith("'s") and len(low) > 2:
            cut = len(word) - 2
            out.append(_Token(word[:cut], low[:-2], start, start + cut))
            out.append(_Token(word[cut:], "'s", start + cut, match.end()))
        else:
            out.append(_Token(word, low, start, match.end()))
    return out


def _phrase_items(phrase: str) -> tuple[str, ...]:
    return tuple(_GAP if t.low == "..." else t.low for t in _tokenize(phrase))


def _expand(phrase: str, *, limit: int = 2000) -> list[str]:
    """Expand ``{a|b}`` alternatives; an empty alternative makes a part optional.

    >>> _expand("associat{ed|ion} {|strongly }with")
    ['associated with', 'associated strongly with', 'association with', 'association strongly with']
    """
    match = re.search(r"\{([^{}]*)\}", phrase)
    if match is None:
        return [" ".join(phrase.split())]
    out: list[str] = []
    for alternative in match.group(1).split("|"):
        out.extend(_expand(phrase[:match.start()] + alternative + phrase[match.end():],
                           limit=limit))
        if len(out) > limit:
            raise ValueError(f"expands to more than {limit} phrases")
    return out


class _Node:
    __slots__ = ("children", "gap", "payload")

    def __init__(self) -> None:
        self.children: dict[str, _Node] = {}
        self.gap: _Node | None = None
        self.payload: Any = None


class _PhraseIndex:
    """Longest-match lookup of token sequences (with gaps), as a trie of tokens.

    ``by_first`` keeps every entry by its first token too, in preference order, for the rules
    that must try several readings of the same words (a verb form or a comparative).
    """

    def __init__(self) -> None:
        self.by_first: dict[str, list[tuple[tuple[str, ...], Any]]] = {}
        self.root = _Node()

    def add(self, items: tuple[str, ...], payload: Any) -> None:
        if not items or items[0] == _GAP:
            return
        self.by_first.setdefault(items[0], []).append((items, payload))

    def freeze(self) -> None:
        # Longest first; at equal length a fixed phrase before a verb form ("correlated" after
        # "were" is a participle, not the verb "correlate"), and a verb form before a
        # comparative (the verb rules reject "lower" unless it follows "may", "to", ...).
        rank = {"verb": 1, "comparative": 2}
        for entries in self.by_first.values():
            entries.sort(key=lambda e: (-len(e[0]), rank.get(getattr(e[1], "kind", ""), 0)))
        self.root = _Node()
        for entries in self.by_first.values():
            for items, payload in entries:
                node = self.root
                for item in items:
                    if item == _GAP:
                        node.gap = node.gap or _Node()
                        node = node.gap
                    else:
                        node = node.children.setdefault(item, _Node())
                if node.payload is None:  # the preferred entry of equal words wins
                    node.payload = payload

    def match_at(self, tokens: Sequence[_Token], i: int) -> tuple[int, Any] | None:
        """The longest entry starting at token ``i``: ``(end, payload)``, else ``None``."""
        first = self.root.children.get(tokens[i].low)
        if first is None:
            return None
        best: list[Any] = [None, None]

        def walk(node: _Node, k: int) -> None:
            if node.payload is not None and (best[0] is None or k > best[0]):
                best[0], best[1] = k, node.payload
            if k < len(tokens):
                child = node.children.get(tokens[k].low)
                if child is not None:
                    walk(child, k + 1)
            if node.gap is not None:
                for skip in range(_GAP_MAX + 1):
                    if k + skip > len(tokens):
                        break
                    if skip and tokens[k + skip - 1].low in _GAP_STOPS:
                        break
                    walk(node.gap, k + skip)

        walk(first, i + 1)
        return None if best[0] is None else (best[0], best[1])

    def find_all(self, tokens: Sequence[_Token]) -> list[tuple[int, int, Any]]:
        """Non-overlapping longest matches, left to right: ``(start, end, payload)``."""
        found = []
        children = self.root.children
        i = 0
        n = len(tokens)
        while i < n:
            if tokens[i].low not in children:
                i += 1
                continue
            hit = self.match_at(tokens, i)
            if hit is None:
                i += 1
                continue
            found.append((i, hit[0], hit[1]))
            i = hit[0]
        return found


_HARD_BREAKS = frozenset({";", ":", "(", ")", "[", "]", "\u2014", "\u2013", "?", "!"})
_GAP_STOPS = _HARD_BREAKS | {",", "."}  # a gap stays inside one clause


def _match_items(items: tuple[str, ...], tokens: Sequence[_Token], i: int) -> int | None:
    """End index when ``items`` match ``tokens`` from ``i`` (gaps stay within a clause)."""
    k = i
    for position, item in enumerate(items):
        if item == _GAP:
            rest = items[position + 1:]
            for skip in range(_GAP_MAX + 1):
                if k + skip > len(tokens):
                    break
                if skip and (tokens[k + skip - 1].low in _HARD_BREAKS
                             or tokens[k + skip - 1].low in (",", ".")):
                    break
                end = _match_items(rest, tokens, k + skip) if rest else k + skip
                if end is not None:
                    return end
            return None
        if k >= len(tokens) or tokens[k].low != item:
            return None
        k += 1
    return k


# --------------------------------------------------------------------------------------------
# The lexicon


@dataclass(frozen=True)
class _Entry:
    """One relation expression: its family (causal, association, no_link) and kind."""

    phrase: str
    family: str
    kind: str  # verb | nominal | connective | participle | phrase | comparative
    form: str | None = None  # for verbs: base | third | past | participle | gerund
    forms: Mapping[str, str] | None = None
    particle: str = ""
    adjective: str | None = None
    ambiguous_base: bool = False
    complement: str | None = None
    rewrite: str | None = None

    @property
    def level(self) -> int:
        return {"causal": 5, "association": 1, "no_link": 0}[self.family]


@dataclass(frozen=True)
class _ModifierClass:
    name: str
    association: int
    causal: int
    window: int
    max_content: int
    crosses_commas: bool = False


_TOP_KEYS = ("schema", "causal", "association", "no_link", "modifiers", "negation",
             "not_a_claim", "prescriptive", "excluded", "grammar")
_FAMILY_KEYS = {"causal": ("verbs", "phrases", "rewrites"), "association": ("verbs", "phrases"),
                "no_link": ("verbs", "phrases")}
_PHRASE_KINDS = ("nominal", "connective", "participle", "phrase", "comparative")
_VERB_KEYS = ("third", "past", "participle", "gerund", "adjective", "ambiguous_base",
              "complement")
_MODIFIER_KEYS = ("phrases", "association", "causal", "window", "max_content",
                  "crosses_commas")
_NEGATION_KEYS = ("words", "window", "max_content", "determiners", "determiner_window",
                  "clauses", "clause_window", "after", "after_window", "exceptions")
_NOT_CLAIM_KEYS = ("phrases", "window", "stop", "subjects")
_PRESCRIPTIVE_KEYS = ("phrases", "imperatives")
_GRAMMAR_KEYS = ("auxiliaries", "modals", "determiners", "possessives", "function_words",
                 "relative_words", "clause_breaks", "raising", "comparative_verbs",
                 "group_markers", "prepositions", "degree_adverbs", "singular_s")


def _verb_forms(base: str, spec: Mapping[str, Any]) -> dict[str, str]:
    """Regular English forms of ``base`` unless ``spec`` gives irregular ones.

    >>> f = _verb_forms("reduce", {}); f["third"], f["past"], f["gerund"]
    ('reduces', 'reduced', 'reducing')
    >>> _verb_forms("worry", {})["third"], _verb_forms("boost", {})["past"]
    ('worries', 'boosted')
    """
    vowels = "aeiou"
    if base.endswith(("s", "x", "z", "ch", "sh")):
        third = base + "es"
    elif base.endswith("y") and len(base) > 1 and base[-2] not in vowels:
        third = base[:-1] + "ies"
    else:
        third = base + "s"
    if base.endswith("e"):
        past = base + "d"
    elif base.endswith("y") and len(base) > 1 and base[-2] not in vowels:
        past = base[:-1] + "ied"
    else:
        past = base + "ed"
    if base.endswith("e") and not base.endswith("ee"):
        gerund = base[:-1] + "ing"
    else:
        gerund = base + "ing"
    forms = {"base": base, "third": spec.get("third", third), "past": spec.get("past", past),
             "gerund": spec.get("gerund", gerund)}
    forms["participle"] = spec.get("participle", forms["past"])
    return forms


class _Problems:
    def __init__(self, path: str):
        self.path = path
        self.items: list[str] = []

    def add(self, where: str, message: str) -> None:
        self.items.append(f"{where}: {message}")


def _check_string_list(out: _Problems, where: str, value: Any) -> list[str]:
    if not isinstance(value, list) or not all(isinstance(v, str) and v.strip() for v in value):
        out.add(where, f"must be a list of non-empty strings in double quotes, such as "
                f"[\"linked to\", \"tied to\"]; got {value!r}")
        return []
    good = []
    for i, phrase in enumerate(value):
        if phrase.count("{") != phrase.count("}") or re.search(r"\{[^}]*\{", phrase):
            out.add(f"{where}[{i}]", f"{phrase!r} has unbalanced or nested braces; write "
                    "alternatives as {a|b} with one level of braces")
            continue
        try:
            expanded = _expand(phrase)
        except ValueError as e:
            out.add(f"{where}[{i}]", f"{phrase!r} {e}; split it into several entries")
            continue
        if any(not _phrase_items(p) or _phrase_items(p)[0] == _GAP for p in expanded):
            out.add(f"{where}[{i}]", f"{phrase!r} has an alternative that is empty or starts "
                    "with a gap (...); every phrase must start with a word")
            continue
        good.append(phrase)
    return good


def _check_table(out: _Problems, where: str, value: Any, allowed: Sequence[str]) -> dict:
    if not isinstance(value, dict):
        out.add(where, f"must be a table; got {value!r}")
        return {}
    for key in value:
        if key not in allowed:
            out.add(f"{where}.{key}", f"is not a known key{near_matches(key, allowed)}; the "
                    f"keys allowed here are {', '.join(allowed)}")
    return value


def _check_int(out: _Problems, where: str, value: Any, low: int, high: int) -> int | None:
    if isinstance(value, bool) or not isinstance(value, int) or not low <= value <= high:
        out.add(where, f"must be a whole number from {low} to {high}; got {value!r}")
        return None
    return value


def _validate_document(doc: dict[str, Any], out: _Problems) -> dict[str, Any]:
    """Check a lexicon document's shape; return the parts that are usable."""
    clean: dict[str, Any] = {}
    for key in doc:
        if key not in _TOP_KEYS:
            out.add(f"[{key}]", f"is not a known table{near_matches(key, _TOP_KEYS)}; the "
                    f"tables are {', '.join(k for k in _TOP_KEYS if k != 'schema')}")
    if "schema" in doc and doc["schema"] != _LEXICON_SCHEMA:
        out.add("schema", f"must be {_LEXICON_SCHEMA!r}; got {doc['schema']!r}")
    for family, keys in _FAMILY_KEYS.items():
        if family not in doc:
            continue
        table = _check_table(out, f"[{family}]", doc[family], keys)
        part: dict[str, Any] = {"verbs": {}, "phrases": {}, "rewrites": {}}
        if "verbs" in table:
            verbs = _check_table(out, f"[{family}.verbs]", table["verbs"],
                                 list(table["verbs"]) if isinstance(table["verbs"], dict) else [])
            for name, spec in verbs.items():
                where = f"[{family}.verbs].{name!r}" if " " in name else f"[{family}.verbs].{name}"
                words = name.split()
                if not words or not all(re.fullmatch(r"[a-z][a-z'-]*", w) for w in words):
                    out.add(where, f"the key {name!r} must be a verb in lower case, optionally "
                            "followed by its particle, such as reduce or \"lead to\"")
                    continue
                spec = _check_table(out, where, spec, _VERB_KEYS)
                ok = True
                for key in ("third", "past", "participle", "gerund", "adjective"):
                    if key in spec and (not isinstance(spec[key], str) or not spec[key].strip()):
                        out.add(f"{where}.{key}", f"must be a non-empty string; got "
                                f"{spec[key]!r}")
                        ok = False
                if "ambiguous_base" in spec and not isinstance(spec["ambiguous_base"], bool):
                    out.add(f"{where}.ambiguous_base", f"must be true or false (no quotes); "
                            f"got {spec['ambiguous_base']!r}")
                    ok = False
                if "complement" in spec and spec["complement"] not in ("to", "bare"):
                    out.add(f"{where}.complement", f"must be \"to\" or \"bare\"; got "
                            f"{spec['complement']!r}")
                    ok = False
                if ok:
                    part["verbs"][name] = dict(spec)
        if "phrases" in table:
            phrases = _check_table(out, f"[{family}.phrases]", table["phrases"], _PHRASE_KINDS)
            for kind, value in phrases.items():
                if kind in _PHRASE_KINDS:
                    part["phrases"][kind] = _check_string_list(
                        out, f"[{family}.phrases].{kind}", value)
        if "rewrites" in table:
            rewrites = table["rewrites"]
            if not isinstance(rewrites, dict) or not all(
                    isinstance(v, str) for v in rewrites.values()):
                out.add(f"[{family}.rewrites]", "must map a phrase to its replacement text, "
                        "both strings in double quotes")
            else:
                part["rewrites"] = dict(rewrites)
        clean[family] = part
    if "modifiers" in doc:
        modifiers = _check_table(out, "[modifiers]", doc["modifiers"],
                                 list(doc["modifiers"]) if isinstance(doc["modifiers"], dict)
                                 else [])
        clean["modifiers"] = {}
        for name, spec in modifiers.items():
            where = f"[modifiers.{name}]"
            spec = _check_table(out, where, spec, _MODIFIER_KEYS)
            item: dict[str, Any] = {}
            if "phrases" in spec:
                item["phrases"] = _check_string_list(out, f"{where}.phrases", spec["phrases"])
            for key in ("association", "causal"):
                if key in spec:
                    got = _check_int(out, f"{where}.{key}", spec[key], 0, 5)
                    if got is not None:
                        item[key] = got
            for key, high in (("window", 40), ("max_content", 40)):
                if key in spec:
                    got = _check_int(out, f"{where}.{key}", spec[key], 0, high)
                    if got is not None:
                        item[key] = got
            if "crosses_commas" in spec:
                if isinstance(spec["crosses_commas"], bool):
                    item["crosses_commas"] = spec["crosses_commas"]
                else:
                    out.add(f"{where}.crosses_commas", "must be true or false (no quotes); got "
                            f"{spec['crosses_commas']!r}")
            clean["modifiers"][name] = item
    for table_name, keys in (("negation", _NEGATION_KEYS), ("not_a_claim", _NOT_CLAIM_KEYS),
                             ("prescriptive", _PRESCRIPTIVE_KEYS), ("excluded", ("phrases",)),
                             ("grammar", _GRAMMAR_KEYS)):
        if table_name not in doc:
            continue
        table = _check_table(out, f"[{table_name}]", doc[table_name], keys)
        part = {}
        for key, value in table.items():
            if key not in keys:
                continue
            if key.endswith("window") or key == "max_content":
                got = _check_int(out, f"[{table_name}].{key}", value, 0, 40)
                if got is not None:
                    part[key] = got
            else:
                part[key] = _check_string_list(out, f"[{table_name}].{key}", value)
        clean[table_name] = part
    return clean


def _merge(base: dict[str, Any], extra: dict[str, Any]) -> dict[str, Any]:
    """Lists are extended (without repeats), tables merged, numbers replaced."""
    merged = dict(base)
    for key, value in extra.items():
        if key in merged and isinstance(merged[key], dict) and isinstance(value, dict):
            merged[key] = _merge(merged[key], value)
        elif key in merged and isinstance(merged[key], list) and isinstance(value, list):
            merged[key] = list(dict.fromkeys(merged[key] + value))
        else:
            merged[key] = value
    return merged


def _read_lexicon_document(path: Path) -> dict[str, Any]:
    source = str(path)
    try:
        raw = path.read_bytes()
    except FileNotFoundError:
        raise LexiconError(source, [("file: does not exist; check the path given to "
                                    "--lexicon")]) from None
    except IsADirectoryError:
        raise LexiconError(source, [("file: is a folder; pass the .toml lexicon file inside "
                                    "it")]) from None
    except OSError as e:
        raise LexiconError(source, [(f"file: cannot be read ({e.strerror}); check its "
                                    "permissions")]) from None
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError as e:
        raise LexiconError(source, [(f"file: is not UTF-8 text (bad byte at offset {e.start});"
                                    " save it as UTF-8")]) from None
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as e:
        raise LexiconError(source, [(f"TOML syntax: {e}; fix the TOML there (strings need "
                                    "double quotes, lists are written [\"a\", \"b\"])")]) from None


@dataclass(frozen=True)
class Lexicon:
    """The merged lexicon: the shipped word lists plus any user files (``sources``).

    Build it with :func:`load_lexicon`; the compiled look-up tables are private.
    """

    sources: tuple[str, ...]
    document: Mapping[str, Any] = field(repr=False, compare=False)

    def __post_init__(self) -> None:
        object.__setattr__(self, "_compiled", _compile(self.document))

    @property
    def compiled(self) -> _Compiled:
        return self.__dict__["_compiled"]

    def to_dict(self) -> dict[str, Any]:
        return {"sources": list(self.sources)}


def load_lexicon(*extra: str | Path) -> Lexicon:
    """The shipped lexicon merged with the user lexicon files ``extra``, in order.

    A verb given again replaces the shipped one; phrase lists are extended; numbers replaced.

    Raises
    ------
    LexiconError
        When a file cannot be read, is not TOML, or has unknown keys or bad values; every
        problem in the file is listed with its key.
    """
    base_text = resources.files("causalcheck").joinpath("data/causal_lexicon.toml").read_text(
        encoding="utf-8")
    out = _Problems("causal_lexicon.toml")
    document = _validate_document(tomllib.loads(base_text), out)
    if out.items:  # pragma: no cover - the shipped file is checked by the tests
        raise LexiconError("causal_lexicon.toml (shipped)", out.items)
    sources = ["causal_lexicon.toml (shipped)"]
    for path in extra:
        path = Path(path)
        out = _Problems(str(path))
        user = _validate_document(_read_lexicon_document(path), out)
        if out.items:
            raise LexiconError(str(path), out.items)
        document = _merge(document, user)
        sources.append(str(path))
    return Lexicon(sources=tuple(sources), document=document)


@functools.lru_cache(maxsize=1)
def default_lexicon() -> Lexicon:
    """The shipped lexicon (cached)."""
    return load_lexicon()


@dataclass
class _Compiled:
    relations: _PhraseIndex
    modifiers: _PhraseIndex  # payload: _ModifierClass
    negations: _PhraseIndex  # payload: "word" | "determiner" | "clause"
    negation_after: _PhraseIndex
    exceptions: _PhraseIndex
    not_claim: _PhraseIndex
    prescriptive: _PhraseIndex
    imperatives: _PhraseIndex
    excluded: _PhraseIndex
    negation_window: int
    negation_max_content: int
    determiner_window: int
    clause_window: int
    after_window: int
    not_claim_window: int
    not_claim_stop: frozenset[str]
    subjects: frozenset[str]
    auxiliaries: frozenset[str]
    modals: frozenset[str]
    determiners: frozenset[str]
    possessives: frozenset[str]
    function_words: frozenset[str]
    relative_words: frozenset[str]
    clause_breaks: frozenset[str]
    raising: frozenset[str]
    comparative_verbs: frozenset[str]
    group_markers: frozenset[str]
    prepositions: frozenset[str]
    degree_adverbs: frozenset[str]
    singular_s: frozenset[str]
    verb_words: frozenset[str]  # every verb form, for "next word is a verb" checks
    rewrites: Mapping[str, str]


def _compile(doc: Mapping[str, Any]) -> _Compiled:
    relations = _PhraseIndex()
    verb_words: set[str] = set()
    rewrites: dict[str, str] = {}
    for family in ("causal", "association", "no_link"):
        part = doc.get(family, {})
        for name, spec in part.get("verbs", {}).items():
            words = name.split()
            forms = _verb_forms(words[0], spec)
            particle = " ".join(words[1:])
            for form_name, form in forms.items():
                verb_words.add(form)
                phrase = f"{form} {particle}".strip()
                entry = _Entry(phrase=phrase, family=family, kind="verb", form=form_name,
                               forms=forms, particle=particle,
                               adjective=spec.get("adjective"),
                               ambiguous_base=bool(spec.get("ambiguous_base", False)),
                               complement=spec.get("complement"))
                relations.add(_phrase_items(phrase), entry)
        rewrites.update(part.get("rewrites", {}))
        for kind, phrases in part.get("phrases", {}).items():
            for written in phrases:
                for phrase in _expand(written):
                    entry = _Entry(phrase=phrase, family=family, kind=kind,
                                   rewrite=part.get("rewrites", {}).get(written))
                    relations.add(_phrase_items(phrase), entry)
    relations.freeze()

    modifiers = _PhraseIndex()
    for name, spec in doc.get("modifiers", {}).items():
        cls = _ModifierClass(name=name, association=spec.get("association", 2),
                             causal=spec.get("causal", 3), window=spec.get("window", 4),
                             max_content=spec.get("max_content", 0),
                             crosses_commas=spec.get("crosses_commas", False))
        for written in spec.get("phrases", []):
            for phrase in _expand(written):
                modifiers.add(_phrase_items(phrase), cls)
    modifiers.freeze()

    def index(phrases: Iterable[str], payload: Any = True) -> _PhraseIndex:
        built = _PhraseIndex()
        for written in phrases:
            for phrase in _expand(written):
                built.add(_phrase_items(phrase), payload)
        built.freeze()
        return built

    negation = doc.get("negation", {})
    negations = _PhraseIndex()
    for key, kind in (("words", "word"), ("determiners", "determiner"), ("clauses", "clause")):
        for written in negation.get(key, []):
            for phrase in _expand(written):
                negations.add(_phrase_items(phrase), kind)
    negations.freeze()
    not_claim = doc.get("not_a_claim", {})
    prescriptive = doc.get("prescriptive", {})
    grammar = doc.get("grammar", {})

    def words(key: str) -> frozenset[str]:
        return frozenset(w.lower() for w in grammar.get(key, []))

    return _Compiled(
        relations=relations, modifiers=modifiers, negations=negations,
        negation_after=index(negation.get("after", [])),
        exceptions=index(negation.get("exceptions", [])),
        not_claim=index(not_claim.get("phrases", [])),
        prescriptive=index(prescriptive.get("phrases", [])),
        imperatives=index(prescriptive.get("imperatives", [])),
        excluded=index(doc.get("excluded", {}).get("phrases", [])),
        negation_window=negation.get("window", 4),
        negation_max_content=negation.get("max_content", 1),
        determiner_window=negation.get("determiner_window", 3),
        clause_window=negation.get("clause_window", 20),
        after_window=negation.get("after_window", 14),
        not_claim_window=not_claim.get("window", 20),
        not_claim_stop=frozenset(not_claim.get("stop", [])),
        subjects=frozenset(not_claim.get("subjects", [])),
        auxiliaries=words("auxiliaries"), modals=words("modals"),
        determiners=words("determiners"), possessives=words("possessives"),
        function_words=words("function_words"), relative_words=words("relative_words"),
        clause_breaks=words("clause_breaks"), raising=words("raising"),
        comparative_verbs=words("comparative_verbs"), group_markers=words("group_markers"),
        prepositions=words("prepositions"), degree_adverbs=words("degree_adverbs"),
        singular_s=words("singular_s"),
        verb_words=frozenset(verb_words), rewrites=rewrites,
    )


# --------------------------------------------------------------------------------------------
# Reading a report: bytes -> text -> prose lines -> sentences

_BREAK = "\x1e"  # a hard sentence break inserted for headings, list items, table cells
_BLOCK_TAGS = frozenset({
    "p", "div", "br", "li", "ul", "ol", "h1", "h2", "h3", "h4", "h5", "h6", "tr", "td", "th",
    "table", "section", "article", "header", "footer", "blockquote", "title", "dt", "dd",
    "figcaption", "caption", "pre", "hr", "aside", "nav", "main", "summary", "details",
})
_TAG = re.compile(r"<(/?)([A-Za-z][A-Za-z0-9]*)?[^<>]*>")
_FORMATS = ("auto", "text", "markdown", "html")


def read_text_file(path: str | Path) -> tuple[str, str, tuple[str, ...]]:
    """Read a report's text: ``(text, encoding, notes)``.

    UTF-8 (with or without a byte-order mark) and UTF-16 with a byte-order mark are read as
    such; other bytes are read as Windows-1252, and failing that as Latin-1, with a note.

    Raises
    ------
    TextFileError
        When the file does not exist, is a folder, cannot be read, is empty or is binary.
    """
    path = Path(path)
    shown = str(path)
    try:
        raw = path.read_bytes()
    except FileNotFoundError:
        raise TextFileError(
            f"text file {shown!r} does not exist; check the path (it is relative to where "
            "you run the command) and pass the report's text file") from None
    except IsADirectoryError:
        raise TextFileError(
            f"text file {shown!r} is a folder; pass the report's text file inside it (plain "
            "text, Markdown or HTML)") from None
    except OSError as e:
        raise TextFileError(f"text file {shown!r} cannot be read ({e.strerror}); check its "
                            "permissions") from None
    notes: list[str] = []
    if raw.startswith((b"\xff\xfe", b"\xfe\xff")):
        text = raw.decode("utf-16")
        encoding = "utf-16"
    else:
        _refuse_binary(shown, raw)
        try:
            text = raw.decode("utf-8-sig")
            encoding = "utf-8"
        except UnicodeDecodeError as e:
            try:
                text = raw.decode("cp1252")
                encoding = "cp1252"
            except UnicodeDecodeError:
                text = raw.decode("latin-1")
                encoding = "latin-1"
            notes.append(
                f"{shown} is not UTF-8 (first bad byte at offset {e.start}); it was read as "
                f"{'Windows-1252' if encoding == 'cp1252' else 'Latin-1'}. If accented letters "
                "or quotes look wrong in the sentences shown, save the file as UTF-8")
    if not text.strip():
        raise TextFileError(
            f"text file {shown!r} is empty; pass the report's text (plain text, Markdown or "
            "HTML) with the sentences to review")
    return text, encoding, tuple(notes)


_MAGIC = ((b"%PDF", ("a PDF document; extract its text first (for example with pdftotext) "
                    "and pass the .txt file")),
          (b"PK\x03\x04", ("a ZIP archive (a .docx or .odt document is one); save the report "
                          "as plain text, Markdown or HTML and pass that file")),
          (b"\xd0\xcf\x11\xe0", ("an old Word or Excel document; save the report as plain "
                                "text, Markdown or HTML and pass that file")),
          (b"\x89PNG", "a PNG image; pass the report's text instead"),
          (b"\xff\xd8\xff", "a JPEG image; pass the report's text instead"),
          (b"{\\rtf", "an RTF document; save it as plain text or Markdown and pass that"))


def _refuse_binary(shown: str, raw: bytes) -> None:
    for magic, advice in _MAGIC:
        if raw.startswith(magic):
            raise TextFileError(f"text file {shown!r} is {advice}")
    head = raw[:65536]
    if not head:
        return
    controls = sum(1 for b in head if b < 32 and b not in (9, 10, 12, 13))
    if b"\x00" in head or controls / len(head) > 0.05:
        raise TextFileError(
            f"text file {shown!r} is a binary file ({controls} control bytes in the first "
            f"{len(head)}), not text; pass the report as plain text, Markdown or HTML")


def _detect_format(text: str, path: Path | None) -> str:
    suffix = path.suffix.lower() if path is not None else ""
    if suffix in (".html", ".htm", ".xhtml"):
        return "html"
    if suffix in (".md", ".markdown", ".mdown", ".rmd", ".qmd"):
        return "markdown"
    head = text[:8192]
    if re.search(r"<(?:!doctype html|html|body|p|div|h[1-6]|article|section)\b", head, re.IGNORECASE):
        return "html"
    if re.search(r"^(?:#{1,6}\s|```|\s*[-*+]\s+\S|\s*\d+[.)]\s+\S)|\[[^\]]+\]\([^)]+\)|\*\*\S",
                 head, re.MULTILINE):
        return "markdown"
    return "text"


def extract_text(text: str, *, text_format: str = "auto", path: str | Path | None = None
                 ) -> tuple[str, str]:
    """The prose of ``text`` with markup removed and every line kept: ``(prose, format)``.

    HTML tags, scripts, styles and comments are removed and entities decoded; Markdown
    headings, emphasis, links, code, list markers and table rules are stripped. Line ``k`` of
    the result is line ``k`` of the input, so line numbers stay true. Headings, list items and
    table cells end a sentence.

    >>> extract_text("# Results\\nThe **grant** [cut](http://x.org) bills.", text_format="markdown")[0]
    '\\x1eResults\\x1e\\nThe grant cut bills.'
    >>> extract_text("<p>Bills&nbsp;fell.</p>\\n<p>Then rose.</p>", text_format="html")[0]
    '\\x1eBills\\xa0fell.\\x1e\\n\\x1eThen rose.\\x1e'
    """
    if text_format not in _FORMATS:
        raise WordingError(f"the text format must be one of {', '.join(_FORMATS)}; got "
                           f"{text_format!r}")
    text = text.replace("\r\n", "\n").replace("\r", "\n")
    chosen = text_format if text_format != "auto" else _detect_format(
        text, Path(path) if path is not None else None)
    if chosen == "html":
        return _strip_html(text), chosen
    if chosen == "markdown":
        return _strip_markdown(text), chosen
    return text.replace(_BREAK, " "), chosen


def _blank_keep_lines(segment: str) -> str:
    return "\n" * segment.count("\n")


def _strip_html(text: str) -> str:
    """Remove HTML markup in one pass (linear): comments, script/style bodies, then tags."""
    pieces: list[str] = []
    i = 0
    lower = text.lower()
    n = len(text)
    while i < n:
        lt = text.find("<", i)
        if lt < 0:
            pieces.append(text[i:])
            break
        pieces.append(text[i:lt])
        if text.startswith("<!--", lt):
            end = text.find("-->", lt + 4)
            end = n if end < 0 else end + 3
            pieces.append(_blank_keep_lines(text[lt:end]))
            i = end
            continue
        match = _TAG.match(text, lt)
        if match is None:
            pieces.append("<")
            i = lt + 1
            continue
        name = (match.group(2) or "").lower()
        end = match.end()
        if name in ("script", "style") and not match.group(1):
            close = lower.find(f"</{name}", end)
            close_end = n if close < 0 else (lower.find(">", close) + 1 or n)
            pieces.append(_blank_keep_lines(text[lt:close_end]) + _BREAK)
            i = close_end
            continue
        newlines = _blank_keep_lines(match.group())
        pieces.append((_BREAK if name in _BLOCK_TAGS else " ") + newlines)
        i = end
    return html.unescape("".join(pieces).replace(_BREAK + " ", _BREAK))


_MD_RULES = (
    (re.compile(r"!\[([^\]]*)\]\([^)]*\)"), r"\1"),  # images -> alt text
    (re.compile(r"\[([^\]]+)\]\([^)]*\)"), r"\1"),  # links -> their text
    (re.compile(r"\[([^\]]+)\]\[[^\]]*\]"), r"\1"),  # reference links
    (re.compile(r"\[\^[^\]]+\]"), ""),  # footnote marks
    (re.compile(r"<https?://[^>\s]+>"), ""),  # autolinks
    (re.compile(r"`([^`]*)`"), r"\1"),  # inline code
    (re.compile(r"(\*\*|__)(?=\S)(.+?)(?<=\S)\1"), r"\2"),  # strong
    (re.compile(r"(?<![\w*])\*(?=\S)([^*]+?)(?<=\S)\*(?![\w*])"), r"\1"),  # emphasis *x*
    (re.compile(r"(?<![\w])_(?=\S)([^_]+?)(?<=\S)_(?![\w])"), r"\1"),  # emphasis _x_
    (re.compile(r"~~(.+?)~~"), r"\1"),
    (re.compile(r"<[^<>\n]*>"), " "),  # inline HTML
)
_MD_HEADING = re.compile(r"^\s{0,3}#{1,6}\s+(.*?)\s*#*\s*$")
_MD_LIST = re.compile(r"^\s*(?:[-*+]|\d+[.)])\s+")
_MD_RULE = re.compile(r"^\s*(?:(?:[-*_]\s*){3,}|[=-]{3,})\s*$")
_MD_TABLE_RULE = re.compile(r"^\s*\|?\s*:?-{2,}:?\s*(?:\|\s*:?-{2,}:?\s*)*\|?\s*$")
_MD_FENCE = re.compile(r"^\s*(```|~~~)")


def _strip_markdown(text: str) -> str:
    out: list[str] = []
    fence: str | None = None
    for line in text.split("\n"):
        line = line.replace(_BREAK, " ")
        opened = _MD_FENCE.match(line)
        if fence is not None:
            if opened and opened.group(1) == fence:
                fence = None
            out.append(_BREAK if opened else "")
            continue
        if opened:
            fence = opened.group(1)
            out.append(_BREAK)
            continue
        if _MD_RULE.match(line) or _MD_TABLE_RULE.match(line):
            out.append(_BREAK)
            continue
        heading = _MD_HEADING.match(line)
        prefix = suffix = ""
        if heading:
            line, prefix, suffix = heading.group(1), _BREAK, _BREAK
        else:
            stripped = re.sub(r"^\s*(?:>\s?)+", "", line)
            listed = _MD_LIST.match(stripped)
            if listed:
                stripped, prefix = stripped[listed.end():], _BREAK
            line = stripped
        if "|" in line and line.strip().startswith("|"):
            line = line.strip().strip("|").replace("|", _BREAK)
            prefix, suffix = _BREAK, _BREAK
        for pattern, replacement in _MD_RULES:
            line = pattern.sub(replacement, line)
        out.append(prefix + line + suffix)
    return "\n".join(out)


@dataclass(frozen=True)
class Sentence:
    """One sentence of a report: its text (whitespace collapsed) and its first line (1-based)."""

    line: int
    text: str
    cut: bool = False  # ends where an over-long run of text was cut, not at a sentence end

    def to_dict(self) -> dict[str, Any]:
        return {"line": self.line, "text": self.text, "cut": self.cut}


_ALWAYS_ABBREVIATIONS = frozenset({
    "e.g", "i.e", "al", "cf", "vs", "approx", "ca", "dr", "mr", "mrs", "ms", "prof", "st", "jr",
    "sr", "inc", "ltd", "co", "corp", "dept", "univ", "jan", "feb", "apr", "jun", "jul", "aug",
    "sep", "sept", "oct", "nov", "dec", "resp", "incl", "viz", "esp", "eg", "ie", "etc", "u.s",
    "u.k", "e.u", "n.b", "a.m", "p.m", "ph.d", "b.a", "m.a", "m.sc", "b.sc",
})
_BEFORE_NUMBER = frozenset({"no", "nos", "fig", "figs", "eq", "eqs", "p", "pp", "vol", "ch",
                            "sec", "tab", "ref", "refs", "art", "para", "chap", "table"})
_BOUNDARY = re.compile(r"[.!?]+[\"'\u201d\u2019)\]]*(?=\s|\x1e|$)|\n[ \t]*\n|\x1e")
_WORD_BEFORE = re.compile(r"([\w.]+)$")


def _is_sentence_end(text: str, match: re.Match[str]) -> bool:
    """Whether the full stop (or ! ?) in ``match`` ends a sentence."""
    mark = match.group()
    if not mark or mark[0] not in ".!?":
        return True
    after = text[match.end():match.end() + 40].lstrip(" \t\n")
    nxt = after[:1]
    if mark[0] != "." or len(mark.rstrip("\"'\u201d\u2019)]")) > 1:
        return not nxt.islower()
    before = _WORD_BEFORE.search(text[max(0, match.start() - 24):match.start()])
    word = before.group(1).lower().lstrip(".") if before else ""
    if word == "etc":
        return nxt.isupper() or not nxt
    if word in _ALWAYS_ABBREVIATIONS:
        return False
    if word in _BEFORE_NUMBER and nxt.isdigit():
        return False
    if len(word) == 1 and word.isalpha() and before and before.group(1).isupper():
        return False  # an initial: "J. Smith"
    # "... approx. three ...": a lower-case word after a full stop continues the sentence
    return not (nxt and nxt.islower())


def split_sentences(prose: str) -> list[Sentence]:
    """Split prose (as returned by :func:`extract_text`) into sentences, in one linear pass.

    A sentence ends at ``.``, ``!`` or ``?`` followed by a space (not after an abbreviation
    such as "e.g.", "et al.", "Fig. 2", an initial, or before a lower-case word), at a blank
    line, and at a heading, list item or table cell. Decimals ("3.5") never split. Runs longer
    than ``MAX_SENTENCE_CHARS`` without an end are cut at a space.

    >>> [s.text for s in split_sentences("Smith et al. found e.g. a 3.5% fall. It held.")]
    ['Smith et al. found e.g. a 3.5% fall.', 'It held.']
    >>> [(s.line, s.text) for s in split_sentences("One\\nline.\\n\\nTwo")]
    [(1, 'One line.'), (4, 'Two')]
    """
    line_starts = [0] + [m.end() for m in re.finditer("\n", prose)]
    sentences: list[Sentence] = []
    start = 0

    def flush(begin: int, end: int) -> None:
        while begin < end and prose[begin] in " \t\n\x1e":
            begin += 1
        if begin >= end:
            return
        while end - begin > MAX_SENTENCE_CHARS:
            cut = prose.rfind(" ", begin + MAX_SENTENCE_CHARS // 2, begin + MAX_SENTENCE_CHARS)
            cut = cut if cut > begin else begin + MAX_SENTENCE_CHARS
            emit(begin, cut, True)
            begin = cut
        emit(begin, end)

    def emit(begin: int, end: int, cut: bool = False) -> None:
        while begin < end and prose[begin] in " \t\n\x1e":
            begin += 1
        body = " ".join(prose[begin:end].replace(_BREAK, " ").split())
        if body and any(ch.isalpha() for ch in body):
            line = bisect.bisect_right(line_starts, begin)
            sentences.append(Sentence(line=line, text=body, cut=cut))

    for match in _BOUNDARY.finditer(prose):
        if _is_sentence_end(prose, match):
            end = match.end() if match.group()[:1] in ".!?" else match.start()
            flush(start, end)
            start = match.end()
    flush(start, len(prose))
    return sentences


# --------------------------------------------------------------------------------------------
# Exposure and outcome terms


def _word_pattern(word: str) -> str:
    """A regex for ``word`` that also accepts its plural or singular and a possessive."""
    w = word.lower()
    if len(w) > 4 and w.endswith("ies"):
        core, tail = w[:-3], "(?:y|ies)"
    elif len(w) > 2 and w.endswith("y") and w[-2] not in "aeiou":
        core, tail = w[:-1], "(?:y|ies)"
    elif len(w) > 4 and w.endswith("es") and w[:-2].endswith(("s", "x", "z", "ch", "sh")):
        core, tail = w[:-2], "(?:es)?"
    elif len(w) > 3 and w.endswith("s") and not w.endswith(("ss", "us", "is")):
        core, tail = w[:-1], "(?:s|es)?"
    elif w.endswith(("s", "x", "z", "ch", "sh")):
        core, tail = w, "(?:es)?"
    else:
        core, tail = w, "(?:s|es)?"
    return re.escape(core) + tail + "(?:['\u2019]s?)?"


def _terms_regex(terms: Sequence[str]) -> re.Pattern[str] | None:
    patterns = []
    for term in sorted(set(terms), key=len, reverse=True):
        words = [w for w in re.split(r"[\s_\-./]+", term.strip()) if w]
        if not words:
            continue
        patterns.append(r"[\s\-_]+".join(_word_pattern(w) for w in words))
    if not patterns:
        return None
    return re.compile(r"(?<!\w)(?:" + "|".join(patterns) + r")(?!\w)", re.IGNORECASE)


def _clean_term(term: str) -> str:
    term = re.sub(r"\s*\([^)]*\)", "", term)  # "Bill change (%)" -> "Bill change"
    return " ".join(term.replace("_", " ").split())


def study_terms(study: Study) -> tuple[tuple[str, ...], tuple[str, ...]]:
    """The words a report may use for the study's treatment and outcome.

    Each role's variable name (underscores read as spaces), its ``label`` and its ``synonyms``
    from ``[variables]``; plurals and possessives match too.
    """
    def terms_of(name: str | None) -> tuple[str, ...]:
        if name is None:
            return ()
        variable = study.variable(name)
        found = [_clean_term(name), _clean_term(variable.label),
                 *(_clean_term(s) for s in variable.synonyms)]
        return tuple(dict.fromkeys(t for t in found if len(t) >= 2))

    return terms_of(study.treatment), terms_of(study.outcome)


@dataclass(frozen=True)
class _Terms:
    exposure: tuple[str, ...]
    outcome: tuple[str, ...]
    exposure_re: re.Pattern[str] | None
    outcome_re: re.Pattern[str] | None

    @classmethod
    def build(cls, exposure: Sequence[str], outcome: Sequence[str]) -> _Terms:
        exposure = tuple(t for t in (_clean_term(x) for x in exposure) if t)
        outcome = tuple(t for t in (_clean_term(x) for x in outcome) if t)
        return cls(exposure, outcome, _terms_regex(exposure), _terms_regex(outcome))


def _mentions(pattern: re.Pattern[str] | None, sentence: str,
              tokens: Sequence[_Token]) -> list[tuple[int, int]]:
    if pattern is None:
        return []
    starts = [t.start for t in tokens]
    spans = []
    for match in pattern.finditer(sentence):
        first = bisect.bisect_right(starts, match.start()) - 1
        last = bisect.bisect_left(starts, match.end())
        first = max(first, 0)
        if tokens and tokens[first].end <= match.start():
            first += 1
        if first < last:
            spans.append((first, last))
    return spans


# --------------------------------------------------------------------------------------------
# Grading one sentence


@dataclass(frozen=True)
class Expression:
    """A relation expression found in a sentence and the level it has there."""

    text: str
    level: int
    kind: str
    family: str
    negated: bool
    modifiers: tuple[str, ...] = ()

    def to_dict(self) -> dict[str, Any]:
        return {"text": self.text, "level": self.level, "grade": GRADES[self.level],
                "kind": self.kind, "family": self.family, "negated": self.negated,
                "modifiers": list(self.modifiers)}


@dataclass(frozen=True)
class Grading:
    """How strongly one sentence claims a relation between the exposure and the outcome.

    ``level`` is ``None`` when the sentence is not such a claim (no relation expression links
    the two, or it asks, aims or describes a method).
    """

    sentence: str
    level: int | None
    prescriptive: bool
    expressions: tuple[Expression, ...] = ()

    @property
    def is_claim(self) -> bool:
        return self.level is not None

    @property
    def grade(self) -> str | None:
        return None if self.level is None else GRADES[self.level]

    def to_dict(self) -> dict[str, Any]:
        return {"sentence": self.sentence, "level": self.level, "grade": self.grade,
                "prescriptive": self.prescriptive,
                "expressions": [e.to_dict() for e in self.expressions]}


@dataclass
class _Cue:
    start: int
    end: int
    entry: _Entry
    level: int = 0
    negated: bool = False
    modifiers: list[tuple[int, int, _ModifierClass]] = field(default_factory=list)
    clause_modifiers: list[tuple[int, int, _ModifierClass]] = field(default_factory=list)


@dataclass
class _Analysis:
    sentence: str
    tokens: list[_Token]
    cues: list[_Cue]
    level: int | None
    prescriptive: bool
    comp: _Compiled
    exposure: list[tuple[int, int]] | None = None
    outcome: list[tuple[int, int]] | None = None


def _is_content(token: _Token, comp: _Compiled) -> bool:
    low = token.low
    if not token.is_word or low == "'s":
        return False
    if (low in comp.function_words or low in comp.auxiliaries or low in comp.modals
            or low in comp.determiners):
        return False
    if low.endswith("ly") and len(low) > 4:
        return False  # adverbs: "significantly", "partly"
    return not low.isdigit()


class _Sentence:
    """One sentence's tokens and the matches of every word list, for the rules below."""

    def __init__(self, text: str, comp: _Compiled):
        self.text = text
        self.comp = comp
        self.tokens = _tokenize(text)
        self.n = len(self.tokens)
        self.covered = [False] * self.n  # tokens inside a cue or modifier: not content words

    def cover(self, start: int, end: int) -> None:
        for k in range(start, end):
            self.covered[k] = True

    def content(self, k: int) -> bool:
        return not self.covered[k] and _is_content(self.tokens[k], self.comp)

    def reaches(self, mod_start: int, mod_end: int, cue_start: int, *, window: int,
                max_content: int, crosses_commas: bool = False,
                stop: frozenset[str] = frozenset()) -> bool:
        """Whether a modifier at [mod_start, mod_end) scopes over a cue starting at cue_start."""
        if mod_end > cue_start or cue_start - mod_end > window:
            return False
        content = 0
        for k in range(mod_end, cue_start):
            low = self.tokens[k].low
            if low in _HARD_BREAKS or low == ".":
                return False
            if not crosses_commas and (low == "," or low in self.comp.clause_breaks):
                return False
            if low in stop:
                return False
            if self.content(k):
                content += 1
        return content <= max_content

    def previous_word(self, i: int, *, skip_adverbs: bool = True) -> str | None:
        k = i - 1
        while k >= 0:
            low = self.tokens[k].low
            if skip_adverbs and low.endswith("ly") and len(low) > 4:
                k -= 1
                continue
            return low
        return None


def _verb_is_valid(s: _Sentence, i: int, end: int, entry: _Entry, after_cue: bool) -> bool:
    """Whether a verb form at tokens [i, end) is used as a verb here (not a noun/adjective).

    ``after_cue``: the token before ``i`` ends another relation expression ("linked to").
    """
    comp = s.comp
    tokens = s.tokens
    prev = tokens[i - 1].low if i > 0 else None
    if prev is not None and (prev in comp.determiners or any(ch.isdigit() for ch in prev)):
        return False  # "a reduced risk", "with increased odds", "a 5 percent increase"
    if (entry.form == "base" and entry.ambiguous_base
            and entry.forms is not None and entry.forms["base"] != entry.forms["past"]):
        before = s.previous_word(i)
        if before == "to" and after_cue:
            return False  # "linked to lower bills": "to" is a preposition there
        nxt = tokens[end].low if end < s.n else ""
        object_follows = nxt in ("the", "a", "an") or nxt in comp.possessives
        plural_subject = (before is not None and before.endswith("s") and i > 0
                          and not before.endswith(("ss", "us", "is"))
                          and _is_content(tokens[i - 1], comp) and tokens[end:end + 1]
                          and tokens[end].is_word and nxt not in ("than", "and", "or"))
        object_follows = object_follows or bool(plural_subject)  # "microplastics harm fish"
        if before not in comp.modals and before not in ("to", "do", "does", "did", "not",
                                                        "never", "cannot") and not object_follows:
            return False  # "lower" is a comparative unless "may lower", "to lower", "lower the"
    if end < s.n:
        nxt = tokens[end].low
        if nxt in comp.auxiliaries or nxt in comp.modals:
            return False  # "the tax cut did not ...", "the increase was ..."
        if entry.form in ("base", "third") and end < s.n:
            following = comp.relations.by_first.get(nxt, ())
            if any(p.kind == "verb" and p.form in ("third", "past") for _, p in following):
                return False  # "the wage increase reduced ...": the first word is a noun
    if entry.form == "gerund" and (i == 0 or tokens[i - 1].low in ("\"", "\u201c", "(")):
        return False  # a gerund subject: "Raising the pension age could ..."
    if entry.family == "causal" and not entry.particle:
        k = end
        while k < s.n and tokens[k].low.endswith("ly") and len(tokens[k].low) > 4:
            k += 1
        no_object = k >= s.n or not tokens[k].is_word or tokens[k].low in comp.prepositions
        if no_object and not any(tokens[j].low in ("is", "are", "was", "were", "be", "been",
                                                   "being") for j in range(max(0, i - 3), i)):
            return False  # "pupil progress improved after ...": a change, not a cause
    k = i - 1
    while k >= 0 and (tokens[k].low in comp.auxiliaries or tokens[k].low in comp.modals
                      or tokens[k].low in ("not", "also", "then", "further")
                      or (tokens[k].low.endswith("ly") and len(tokens[k].low) > 4)):
        k -= 1
    # "we reduced the sample": the authors' action, not a claim
    return not (k >= 0 and tokens[k].low in comp.subjects)


def _find_cues(s: _Sentence, excluded: set[int]) -> list[_Cue]:
    comp = s.comp
    cues: list[_Cue] = []
    i = 0
    while i < s.n:
        entries = comp.relations.by_first.get(s.tokens[i].low)
        chosen = None
        if entries:
            for items, entry in entries:  # longest first
                end = _match_items(items, s.tokens, i)
                if end is None or any(k in excluded for k in range(i, end)):
                    continue
                after_cue = bool(cues) and cues[-1].end == i
                if entry.kind == "verb" and not _verb_is_valid(s, i, end, entry, after_cue):
                    continue
                if entry.kind == "participle" and i > 0 and (
                        s.tokens[i - 1].low in comp.determiners):
                    continue  # "the associated costs"
                chosen = _Cue(i, end, entry)
                break
        if chosen is None:
            i += 1
            continue
        cues.append(chosen)
        i = chosen.end
    # A comparative right after another expression belongs to its object ("associated with
    # lower bills", "led to fewer cavities"); it is not a claim of its own.
    kept: list[_Cue] = []
    for cue in cues:
        if cue.entry.kind == "comparative" and kept and kept[-1].entry.kind != "comparative":
            last = kept[-1]
            gap = range(last.end, cue.start)
            if len(gap) <= 3 and not any(s.tokens[k].low in (",", ";", ":") for k in gap):
                continue
        kept.append(cue)
    return kept


def _apply_scope(s: _Sentence, cues: list[_Cue]) -> list[_Cue]:
    """Apply negation, modifiers and the not-a-claim rules; return the cues still claims."""
    comp = s.comp
    tokens = s.tokens
    for cue in cues:
        s.cover(cue.start, cue.end)
    exceptions: set[int] = set()
    for start, end, _ in comp.exceptions.find_all(tokens):
        exceptions.update(range(start, end))
    negations = [(a, b, kind) for a, b, kind in comp.negations.find_all(tokens)
                 if not any(k in exceptions for k in range(a, b))]
    cue_tokens = {k for cue in cues for k in range(cue.start, cue.end)}
    modifiers = [(a, b, cls) for a, b, cls in comp.modifiers.find_all(tokens)
                 if not any(k in cue_tokens for k in range(a, b))]
    not_claims = comp.not_claim.find_all(tokens)
    for a, b, _ in negations:
        s.cover(a, b)
    for a, b, _ in modifiers:
        s.cover(a, b)

    kept: list[_Cue] = []
    for cue in cues:
        if any(s.reaches(a, b, cue.start, window=comp.not_claim_window, max_content=99,
                         crosses_commas=True, stop=comp.not_claim_stop)
               for a, b, _ in not_claims):
            continue  # "we examined whether ...", "to estimate the effect of ..."
        for a, b, kind in negations:
            if cue.start <= a and b <= cue.end:
                cue.negated = True  # inside the expression: "made no difference to"
            elif kind == "word":
                if not s.reaches(a, b, cue.start, window=comp.negation_window,
                                 max_content=comp.negation_max_content):
                    continue
                relative = any(tokens[k].low in comp.relative_words
                               for k in range(max(0, a - 3), a))
                if relative and any(s.content(k) for k in range(b, cue.start)):
                    continue  # "those who did not exercise had higher ...": inside the clause
                cue.negated = True
            elif kind == "determiner":
                if s.reaches(a, b, cue.start, window=comp.determiner_window, max_content=0):
                    cue.negated = True
            elif s.reaches(a, b, cue.start, window=comp.clause_window, max_content=99,
                           crosses_commas=True):
                cue.negated = True
        for a, b, cls in modifiers:
            if s.reaches(a, b, cue.start, window=cls.window, max_content=cls.max_content,
                         crosses_commas=cls.crosses_commas):
                target = cue.clause_modifiers if cls.crosses_commas else cue.modifiers
                target.append((a, b, cls))
        kept.append(cue)
    # Negation after a nominal expression: "the association ... was not significant".
    for a, b, _ in comp.negation_after.find_all(tokens):
        before = [c for c in kept if c.end <= a and a - c.end <= comp.after_window
                  and not any(tokens[k].low in (";", ":") for k in range(c.end, a))]
        if before:
            before[-1].negated = True
    for cue in kept:
        cue.level = _cue_level(cue)
    return kept


def _cue_level(cue: _Cue) -> int:
    family = cue.entry.family
    if family == "no_link" or cue.negated:
        return 0
    classes = [cls for _, _, cls in cue.modifiers + cue.clause_modifiers]
    if family == "causal":
        # Each weakening word sets the level a causal claim falls to; the weakest reading wins.
        return min([5] + [cls.causal for cls in classes])
    values = [cls.association for cls in classes]
    if not values:
        return 1
    # An association is hedged (level 2) by any hedge; a class may also set it to 0.
    return min(values) if min(values) < 1 else max(values)


def _links_terms(s: _Sentence, cue: _Cue, exposure: list[tuple[int, int]],
                 outcome: list[tuple[int, int]]) -> bool:
    """Whether ``cue`` links a mention of the exposure and one of the outcome."""
    mentions = exposure + outcome
    tokens = s.tokens
    literal = [k for k in (cue.start, cue.end - 1)]
    if any(a <= k < b for a, b in mentions for k in literal):
        return False  # the expression is part of a term ("tax cut", "heating fuel")
    if cue.end - cue.start > 2:
        # A term inside a gapped phrase ("make eczema worse") links with the other role
        # mentioned outside the phrase.
        inside_e = any(cue.start < a and b < cue.end for a, b in exposure)
        inside_o = any(cue.start < a and b < cue.end for a, b in outcome)
        outside = lambda spans: any(b <= cue.start or cue.end <= a for a, b in spans)
        if (inside_o and outside(exposure)) or (inside_e and outside(outcome)):
            return True

    def clear(lo: int, hi: int, soft: bool) -> bool:
        for k in range(lo, hi):
            low = tokens[k].low
            if low in (";", ":") or (soft and (low == "," or low in s.comp.clause_breaks)):
                return False
        return True

    for e_start, e_end in exposure:
        for o_start, o_end in outcome:
            left_end, right_start = (e_end, o_start) if e_end <= o_start else (o_end, e_start)
            if left_end <= cue.start and cue.end <= right_start and clear(left_end,
                                                                          right_start, False):
                return True
    if cue.entry.kind in ("verb", "comparative"):
        return False
    # Outside both mentions, next to one: "because of the curriculum, pass rates rose",
    # "X and Y were unrelated", "the effect of X on Y".
    for a, b in mentions:
        if b <= cue.start and cue.start - b <= 4 and clear(b, cue.start, True):
            return True
        if cue.end <= a and a - cue.end <= 4 and clear(cue.end, a, True):
            return True
    return False


def _links_anything(s: _Sentence, cue: _Cue) -> bool:
    """Without terms: whether ``cue`` has words on both sides to link (or a nominal object)."""
    comp = s.comp
    before = [k for k in range(cue.start) if s.content(k)]
    after = []
    for k in range(cue.end, s.n):
        if s.tokens[k].low in (";", ":"):
            break
        if s.content(k):
            after.append(k)
    kind = cue.entry.kind
    if kind in ("nominal", "connective"):
        return len(after) >= 2 or (bool(before) and bool(after))
    if kind == "comparative":
        near = any(s.tokens[k].low in comp.comparative_verbs
                   for k in range(max(0, cue.start - 3), cue.start))
        grouped = any(t.low in comp.group_markers for t in s.tokens)
        return (near or grouped) and bool(before) and bool(after)
    if kind == "participle" and cue.entry.family in ("association", "no_link") and not after:
        return len(before) >= 2 and any(s.tokens[k].low == "and" for k in range(cue.start))
    return bool(before) and bool(after)


def _is_prescriptive(s: _Sentence) -> bool:
    comp = s.comp
    if comp.prescriptive.find_all(s.tokens):
        return True
    first = 0
    while first < s.n and not s.tokens[first].is_word:
        first += 1
    if first >= s.n:
        return False
    hit = comp.imperatives.match_at(s.tokens, first)
    if hit is None:
        return False
    end = hit[0]
    if end >= s.n:
        return True
    nxt = s.tokens[end].low
    return not (nxt in comp.verb_words or nxt in comp.auxiliaries or nxt in comp.modals
                or nxt in ("of", "in", "'s", "and", ",", "."))


def _analyse(sentence: str, comp: _Compiled, terms: _Terms | None, *,
             always_advice: bool = True) -> _Analysis:
    """Grade one sentence. With ``always_advice`` False the advice flag is computed only for
    claims, and a sentence that cannot be a claim (it does not name both the exposure and the
    outcome) is skipped before it is tokenized: most sentences of a long report."""
    if terms is not None and not always_advice and not (
            terms.exposure_re is not None and terms.outcome_re is not None
            and terms.exposure_re.search(sentence) and terms.outcome_re.search(sentence)):
        return _Analysis(sentence, [], [], None, False, comp)
    s = _Sentence(sentence, comp)
    prescriptive = _is_prescriptive(s) if always_advice else False
    if sentence.rstrip().endswith("?") or not comp.relations.by_first.keys() & {
            t.low for t in s.tokens}:
        return _Analysis(sentence, s.tokens, [], None, prescriptive, comp)
    excluded: set[int] = set()
    for start, end, _ in comp.excluded.find_all(s.tokens):
        excluded.update(range(start, end))
    cues = _apply_scope(s, _find_cues(s, excluded))
    if terms is not None:
        exposure = _mentions(terms.exposure_re, sentence, s.tokens)
        outcome = _mentions(terms.outcome_re, sentence, s.tokens)
        # A term inside the other role's term ("measles" in "measles vaccine") is not a mention.
        outcome = [o for o in outcome if not any(e[0] <= o[0] and o[1] <= e[1] for e in exposure)]
        exposure = [e for e in exposure if not any(o[0] <= e[0] and e[1] <= o[1] for o in outcome)]
        linked = [c for c in cues if exposure and outcome and _links_terms(s, c, exposure,
                                                                            outcome)]
        level = max((c.level for c in linked), default=None)
        if level is not None and not always_advice:
            prescriptive = _is_prescriptive(s)
        return _Analysis(sentence, s.tokens, linked, level, prescriptive, comp, exposure,
                         outcome)
    linked = [c for c in cues if _links_anything(s, c)]
    level = max((c.level for c in linked), default=None)
    if level is not None and not always_advice:
        prescriptive = _is_prescriptive(s)
    return _Analysis(sentence, s.tokens, linked, level, prescriptive, comp)


def _expression(analysis: _Analysis, cue: _Cue) -> Expression:
    tokens = analysis.tokens
    text = analysis.sentence[tokens[cue.start].start:tokens[cue.end - 1].end]
    mods = tuple(analysis.sentence[tokens[a].start:tokens[b - 1].end]
                 for a, b, _ in cue.clause_modifiers + cue.modifiers)
    return Expression(text=text, level=cue.level, kind=cue.entry.kind, family=cue.entry.family,
                      negated=cue.negated, modifiers=mods)


def grade_sentence(sentence: str, *, exposure_terms: Sequence[str] | None = None,
                   outcome_terms: Sequence[str] | None = None,
                   lexicon: Lexicon | None = None) -> Grading:
    """Grade how strongly ``sentence`` claims a relation, on the 0-5 scale.

    With ``exposure_terms`` and ``outcome_terms`` a relation expression counts only when it
    links a mention of each; without them, any expression with words on both sides counts.

    Parameters
    ----------
    sentence : str
        One sentence.
    exposure_terms, outcome_terms : sequence of str, optional
        Words for the exposure (treatment) and the outcome; plurals match too.
    lexicon : Lexicon, optional
        The word lists (default: the shipped lexicon).

    Returns
    -------
    Grading
        ``level`` None when the sentence makes no such claim.

    Examples
    --------
    >>> grade_sentence("Coffee may lower the risk of diabetes.").level
    3
    >>> g = grade_sentence("Vitamin D did not reduce fractures.")
    >>> g.level, g.grade
    (0, 'no-link')
    >>> grade_sentence("We examined whether tutoring raises scores.").level is None
    True
    """
    comp = (lexicon or default_lexicon()).compiled
    terms = None
    if exposure_terms is not None or outcome_terms is not None:
        terms = _Terms.build(exposure_terms or (), outcome_terms or ())
    analysis = _analyse(sentence, comp, terms)
    return Grading(sentence=sentence, level=analysis.level,
                   prescriptive=analysis.prescriptive,
                   expressions=tuple(_expression(analysis, c) for c in analysis.cues))


# --------------------------------------------------------------------------------------------
# Evidence and verdicts


@dataclass(frozen=True)
class Evidence:
    """What the study's evidence supports: the strongest wording level it warrants.

    ``supported_level`` is ``None`` when neither a design nor a robustness value is known.
    """

    design: str | None
    robustness_value: float | None
    supported_level: int | None
    description: str
    missing: tuple[str, ...] = ()
    notes: tuple[str, ...] = ()

    @property
    def supported_grade(self) -> str | None:
        return None if self.supported_level is None else GRADES[self.supported_level]

    def to_dict(self) -> dict[str, Any]:
        return {"design": self.design, "robustness_value": self.robustness_value,
                "supported_level": self.supported_level, "supported_grade": self.supported_grade,
                "description": self.description, "missing": list(self.missing),
                "cutoffs": {"randomized": 5,
                            "observational_rv_at_least": CONDITIONAL_CAUSAL_MIN_RV,
                            "observational_at_or_above_cutoff": 3,
                            "observational_below_cutoff_or_no_rv": 2,
                            "source": "common practice"},
                "notes": list(self.notes)}


def format_rv(value: float) -> str:
    """A robustness value with the fewest digits (at least three, as every report shows an
    estimate) that keep it on its own side of the cut-off, so that 0.09996 is not shown as 0.1.

    >>> format_rv(0.09996), format_rv(0.04), format_rv(0.1234), format_rv(0.10629)
    ('0.09996', '0.04', '0.123', '0.106')
    """
    for digits in range(3, 12):
        shown = f"{value:.{digits}g}"
        if (float(shown) >= CONDITIONAL_CAUSAL_MIN_RV) == (value >= CONDITIONAL_CAUSAL_MIN_RV):
            return shown
    return repr(value)


def assess_evidence(design: str | None, robustness_value: float | None) -> Evidence:
    """The strongest causal wording the design and robustness value support.

    Parameters
    ----------
    design : {"observational", "randomized"} or None
        The study design (``[study].design``).
    robustness_value : float or None
        The robustness value of the estimate, in [0, 1]: the partial R² an unmeasured
        confounder would need with both the treatment and the outcome to bring the estimate
        to zero (Cinelli & Hazlett 2020, Sec. 4).

    Returns
    -------
    Evidence
        ``supported_level`` 5 for a randomised design; for an observational one 3 when
        ``robustness_value >= CONDITIONAL_CAUSAL_MIN_RV`` (0.10), else 2; None when neither
        input is given.

    Raises
    ------
    WordingError
        When ``robustness_value`` is not a number in [0, 1] or ``design`` is unknown.

    Notes
    -----
    The cut-offs are common practice, not a published rule: randomisation removes confounding
    by design, so causal wording is warranted; an observational estimate that only a confounder
    explaining at least 10% of the residual variance of both treatment and outcome could
    remove is robust enough for conditional causal wording ("may reduce"); weaker evidence
    warrants association wording. Sumner et al. (2014) counted causal wording about
    correlational results as exaggeration (from memory).

    References
    ----------
    Cinelli, C., & Hazlett, C. (2020). Making sense of sensitivity: extending omitted variable
    bias. JRSS-B, 82(1), 39-67.

    Examples
    --------
    >>> assess_evidence("observational", 0.12).supported_level
    3
    >>> assess_evidence("observational", 0.03).supported_level
    2
    >>> assess_evidence(None, None).supported_level is None
    True
    """
    if design is not None and design not in ("observational", "randomized"):
        raise WordingError(f"the design must be 'observational' or 'randomized'; got "
                           f"{design!r}")
    if robustness_value is not None:
        if (isinstance(robustness_value, bool) or not isinstance(robustness_value, (int, float))
                or not math.isfinite(robustness_value) or not 0 <= robustness_value <= 1):
            raise WordingError(
                f"the robustness value must be a number from 0 to 1 (a partial R², such as "
                f"0.08); got {robustness_value!r}. Take it from `causalcheck vet` or `audit`")
        robustness_value = float(robustness_value)
    rv_how = ("the robustness value (--robustness-value RV, as reported by `causalcheck vet` "
              "or `causalcheck audit`)")
    if design is None and robustness_value is None:
        return Evidence(None, None, None,
                        "no evidence given, so the wording is graded but not judged",
                        missing=(("the study design (--study STUDY, whose [study].design "
                                 "gives it)"), rv_how))
    notes: list[str] = []
    if design == "randomized":
        if robustness_value is not None:
            notes.append("the robustness value is not needed for a randomised design: "
                         "randomisation, not robustness to confounding, supports causal wording")
        return Evidence("randomized", robustness_value, 5,
                        "a randomised design supports causal wording (level 5, causal)",
                        notes=tuple(notes))
    if design is None:
        notes.append("no study design given: the design is taken to be observational, the "
                     "only kind a robustness value is computed for")
    if robustness_value is None:
        return Evidence("observational", None, 2,
                        "an observational design without a robustness value supports "
                        "association wording (level 2, hedged, at most)",
                        missing=((f"{rv_how}; with RV >= {CONDITIONAL_CAUSAL_MIN_RV:.2f} "
                                 "conditional causal wording (\"may reduce\") would be "
                                 "supported"),),
                        notes=tuple(notes))
    if robustness_value >= CONDITIONAL_CAUSAL_MIN_RV:
        return Evidence("observational", robustness_value, 3,
                        f"an observational design with robustness value "
                        f"{format_rv(robustness_value)} (at least {CONDITIONAL_CAUSAL_MIN_RV:.2f}) "
                        "supports conditional causal wording (level 3, possible-cause, at most)",
                        notes=tuple(notes))
    return Evidence("observational", robustness_value, 2,
                    f"an observational design with robustness value {format_rv(robustness_value)} "
                    f"(below {CONDITIONAL_CAUSAL_MIN_RV:.2f}) supports association wording "
                    "(level 2, hedged, at most)", notes=tuple(notes))


def judge_claim(level: int, prescriptive: bool, supported_level: int | None
                ) -> tuple[str | None, int | None, str]:
    """The verdict on one claim: ``(verdict, target_level, reason)``.

    ``target_level`` is the level a rewording should have (None when none is needed). A claim
    above the supported level is "stronger than the evidence"; below a supported level of 3 or
    5 it is "weaker than it could be" (association wording, levels 1 and 2, is never called
    too weak for evidence that supports only association). Advice presumes an effect, so
    advice on evidence that supports association only is "stronger than the evidence".
    Rewording to association uses level 1 (stating an association plainly).

    >>> judge_claim(5, False, 2)[:2]
    ('stronger than the evidence', 1)
    >>> judge_claim(3, False, 5)[:2]
    ('weaker than it could be', 5)
    >>> judge_claim(1, False, 2)[:2]
    ('supported', None)
    """
    if supported_level is None:
        return None, None, "no evidence given"
    supported_grade = f"level {supported_level} ({GRADES[supported_level]})"
    if level == 0:
        return SUPPORTED, None, ("states no relation, which claims nothing the design must "
                                 "support; check it against the estimate's confidence interval")
    if level > supported_level:
        target = supported_level if supported_level >= 3 else 1
        return STRONGER, target, (f"claims level {level} ({GRADES[level]}); the evidence "
                                  f"supports {supported_grade} at most")
    if prescriptive and supported_level <= 2:
        return STRONGER, None, ("gives advice, which presumes an effect; the evidence supports "
                                "association wording only. State the association and say what "
                                "evidence the advice rests on, or drop the advice")
    if supported_level >= 3 and level < supported_level:
        return WEAKER, supported_level, (f"claims level {level} ({GRADES[level]}); the evidence "
                                         f"would support {supported_grade}")
    return SUPPORTED, None, f"within what the evidence supports ({supported_grade})"


# --------------------------------------------------------------------------------------------
# Rewording a claim at the supported strength

_FINITE = {
    "is": ("present", "sg"), "am": ("present", "sg"), "are": ("present", "pl"),
    "was": ("past", "sg"), "were": ("past", "pl"), "has": ("perfect", "sg"),
    "have": ("perfect", "pl"), "had": ("past", None), "does": ("present", "sg"),
    "do": ("present", "pl"), "did": ("past", None), "appears": ("present", "sg"),
    "appear": ("present", "pl"), "appeared": ("past", None), "seems": ("present", "sg"),
    "seem": ("present", "pl"), "seemed": ("past", None), "tends": ("present", "sg"),
    "tend": ("present", "pl"), "tended": ("past", None),
}
_BE = {("past", "sg"): "was", ("past", "pl"): "were", ("present", "sg"): "is",
       ("present", "pl"): "are", ("perfect", "sg"): "has been", ("perfect", "pl"): "have been",
       ("future", "sg"): "will be", ("future", "pl"): "will be"}
_MAY_BE = {"past": "may have been", "perfect": "may have been", "present": "may be",
           "future": "may be"}
_NUMBER_WORDS = frozenset({
    "a", "an", "one", "two", "three", "four", "five", "six", "seven", "eight", "nine", "ten",
    "half", "quarter", "quarters", "third", "thirds", "fifth", "fifths", "tenth", "tenths",
    "about", "around", "nearly", "almost", "over", "up", "to", "roughly", "some", "more",
    "than", "%", "percent", "per", "cent", "percentage", "points", "point", "pp", "times",
    "fold", "weeks", "week", "days", "day", "months", "month", "years", "year", "hours",
    "hour", "minutes", "twenty", "thirty", "forty", "fifty", "hundred", "thousand",
})
_DIRECTIONS = frozenset({
    "higher", "lower", "greater", "smaller", "larger", "bigger", "more", "less", "fewer",
    "better", "worse", "poorer", "richer", "longer", "shorter", "faster", "slower", "stronger",
    "weaker", "increased", "reduced", "decreased", "improved", "narrower", "wider"})
_FIRM = {"suggest": "show", "suggests": "shows", "suggested": "showed",
         "suggesting": "showing"}
_ADVERB_KEEP = ("also", "still", "even", "further")


@dataclass(frozen=True)
class _Edit:
    start: int
    end: int
    text: str


def _apply_edits(sentence: str, edits: list[_Edit]) -> str:
    out = sentence
    for edit in sorted(edits, key=lambda e: (e.start, e.end), reverse=True):
        out = out[:edit.start] + edit.text + out[edit.end:]
    out = re.sub(r"\s+([,.;:])", r"\1", out)
    out = re.sub(r",\s*,", ",", out)
    out = " ".join(out.split())
    return out[:1].upper() + out[1:] if out else out


class _Rewriter:
    """Builds the edits that reword one relation expression at a target level."""

    def __init__(self, analysis: _Analysis, cue: _Cue):
        self.a = analysis
        self.cue = cue
        self.tokens = analysis.tokens
        self.comp = analysis.comp
        self.entry = cue.entry
        self.group_start = self._group_start(cue.start)
        self.tense, self.number = self._tense()

    # -- the verb group ----------------------------------------------------------------------
    def _group_start(self, start: int) -> int:
        comp = self.comp
        mod_ends = {b: a for a, b, _ in self.cue.modifiers}
        k = start
        while k > 0:
            if k in mod_ends and mod_ends[k] < k:
                k = mod_ends[k]
                continue
            low = self.tokens[k - 1].low
            if (low in comp.auxiliaries or low in comp.modals or low in comp.raising
                    or low == "to" or low in _ADVERB_KEEP
                    or (low.endswith("ly") and len(low) > 4)):
                k -= 1
                continue
            break
        while k < start and self.tokens[k].low == "to":
            k += 1
        return k

    def _group_words(self, start: int | None = None, end: int | None = None) -> list[str]:
        start = self.group_start if start is None else start
        end = self.cue.start if end is None else end
        return [t.low for t in self.tokens[start:end]]

    def _tense(self, start: int | None = None, end: int | None = None
               ) -> tuple[str | None, str | None]:
        words = self._group_words(start, end)
        number = None
        if any(w in ("will", "'ll", "shall") for w in words):
            return "future", self._subject_number()
        if any(w in self.comp.modals for w in words):
            return ("past" if "have" in words else "present"), self._subject_number()
        for i, w in enumerate(words):
            if w in _FINITE:
                tense, number = _FINITE[w]
                if w not in ("has", "have", "had") and "have" in words[i + 1:]:
                    tense = "past"  # "appears to have reduced"
                if w in ("has", "have") and "been" not in words[i + 1:] and (
                        self.entry.kind != "verb"):
                    tense = "present"  # "has an effect on"
                return tense, number or self._subject_number()
        if self.entry.kind == "verb":
            form = self.entry.form
            forms = self.entry.forms or {}
            if form == "base" and forms.get("base") == forms.get("past"):
                form = "past"  # "the zone cut emissions"
            if form in ("past", "participle"):
                return "past", self._subject_number()
            if form == "third":
                return "present", "sg"
            if form == "base":
                return "present", "pl"
        return None, self._subject_number()

    def _subject_number(self) -> str:
        """Singular or plural subject, from the head noun before the verb group.

        The head is the word before the first preposition of the noun phrase ("amounts of
        lead in water", "feedback from peers"), else the last word before the verb group.
        """
        tokens, comp = self.tokens, self.comp
        end = self.group_start
        begin = end
        while begin > 0 and tokens[begin - 1].is_word and not (
                tokens[begin - 1].low in comp.clause_breaks
                or tokens[begin - 1].low in comp.relative_words):
            begin -= 1
        head = None
        for k in range(begin + 1, end):
            if tokens[k].low in ("of", "in", "from", "for", "with", "during", "among", "near",
                                 "at", "on", "across", "between", "before", "after", "to"):
                head = k - 1
                break
        if head is None:
            head = end - 1
        while head >= 0 and not tokens[head].is_word:
            head -= 1
        if head < 0:
            return "sg"
        low = tokens[head].low
        if tokens[head].low == "'s" or (head + 1 < end and tokens[head + 1].low == "and"):
            return "pl"
        if low in ("they", "we", "these", "those", "both", "many", "most", "people", "data",
                   "children", "women", "men", "police", "cattle"):
            return "pl"
        if low in comp.singular_s:
            return "sg"
        if low.endswith("s") and not low.endswith(("ss", "us", "is", "ness")):
            return "pl"
        if any(tokens[k].low == "and" for k in range(begin, end)):
            return "pl"
        return "sg"

    def _span(self, start: int, end: int) -> tuple[int, int]:
        return self.tokens[start].start, self.tokens[end - 1].end

    def _adverbs(self) -> str:
        mod_tokens = {k for a, b, _ in self.cue.modifiers for k in range(a, b)}
        words = [self.tokens[k].text for k in range(self.group_start, self.cue.start)
                 if k not in mod_tokens and self.tokens[k].low.endswith("ly")
                 and len(self.tokens[k].low) > 4]
        return " ".join(words) + " " if words else ""

    def _trailing_adverb(self) -> int | None:
        """A degree adverb after the object in the same clause ("raised earnings modestly")."""
        for k in range(self.cue.end, min(len(self.tokens), self.cue.end + 6)):
            low = self.tokens[k].low
            if low in (",", ";", ":", ".") or low in self.comp.clause_breaks:
                return None
            if low in self.comp.degree_adverbs:
                return k
        return None

    def _be(self, tense: str | None = None, number: str | None = None) -> str:
        tense = tense or self.tense or "present"
        number = number or self.number or "sg"
        return _BE[(tense, number)]

    def _replace_group(self, text: str, start: int | None = None) -> _Edit:
        a, b = self._span(self.group_start if start is None else start, self.cue.end)
        return _Edit(a, b, text)

    def _passive(self) -> bool:
        words = self._group_words()
        return (self.entry.kind == "verb" and self.entry.form in ("past", "participle")
                and any(w in ("is", "are", "was", "were", "be", "been", "being") for w in words))

    def _frame(self) -> tuple[str, int] | None:
        """A "have"/"be" verb before a nominal expression: "had a large effect on"."""
        k = self.cue.start - 1
        for _ in range(4):
            if k < 0:
                return None
            low = self.tokens[k].low
            if low in ("has", "have", "had", "having"):
                return "have", k
            if low in ("is", "are", "was", "were", "be", "been", "being"):
                return "be", k
            if (low in (",", ";", ":") or low in self.comp.clause_breaks
                    or low in ("of", "on", "in", "for", "with", "to", "from", "by")):
                return None
            k -= 1
        return None

    # -- targets -----------------------------------------------------------------------------
    def rewrite(self, target: int) -> list[_Edit] | None:
        family, kind = self.entry.family, self.entry.kind
        if kind == "comparative" or family == "no_link":
            return None
        if target <= 2:
            return self._to_association() if family == "causal" else None
        if target == 3:
            return self._to_possible() if family == "causal" else self._association_up(True)
        return self._to_causal() if family == "causal" else self._association_up(False)

    def _to_association(self) -> list[_Edit] | None:
        kind = self.entry.kind
        if kind == "verb":
            return self._verb_to_association()
        if kind == "participle":
            if self._has_copula():
                return [self._replace_group(f"{self._be()} {self._adverbs()}associated with")]
            a, b = self._span(self.cue.start, self.cue.end)
            return [_Edit(a, b, "associated with")]
        if kind == "connective":
            if self._has_copula():
                return [self._replace_group(f"{self._be()} {self._adverbs()}associated with")]
            a, b = self._span(self.cue.start, self.cue.end)
            return [_Edit(a, b, "in association with")]  # capitalised at a sentence start
        if kind == "nominal":
            return self._nominal_to_association()
        if kind == "phrase" and self.entry.rewrite:
            self.tense, self.number = self._phrase_tense()
            text = self.entry.rewrite.replace("{be}", self._be())
            return [self._replace_group(text)]
        return None

    def _has_copula(self) -> bool:
        return any(w in ("is", "are", "was", "were", "be", "been", "being", "am")
                   for w in self._group_words())

    def _phrase_tense(self) -> tuple[str | None, str | None]:
        first = self.tokens[self.cue.start].low
        if self._group_words():
            return self._tense()
        if first.endswith("ed") or first in ("made", "played"):
            return "past", self._subject_number()
        if first.endswith("s"):
            return "present", "sg"
        return "present", "pl"

    def _verb_to_association(self) -> list[_Edit] | None:
        entry, tokens, cue = self.entry, self.tokens, self.cue
        if self.tense is None:
            return None  # a gerund: "by reducing bills"
        if entry.complement == "bare":
            return None  # "helped pupils complete more work"
        if entry.complement == "to" and any(
                tokens[k].low == "to" for k in range(cue.end, min(len(tokens), cue.end + 6))):
            return None  # "caused retail sales to collapse"
        if cue.end >= len(tokens) or not tokens[cue.end].is_word:
            return None  # no object to keep
        adjective = entry.adjective
        if self._passive():
            if tokens[cue.end].low == "by":
                by = tokens[cue.end]
                if adjective and adjective.split()[-1] not in ("of", "to", "in"):
                    return [self._replace_group(f"{self._be()} {self._adverbs()}{adjective}"),
                            _Edit(by.start, by.end, "in association with")]
                return [self._replace_group(f"{self._be()} {self._adverbs()}associated"),
                        _Edit(by.start, by.end, "with")]
            if adjective and adjective.split()[-1] not in ("of", "to", "in"):
                return [self._replace_group(f"{self._be()} {self._adverbs()}{adjective}")]
            return None
        adverbs = self._adverbs()
        edits: list[_Edit] = []
        trailing = self._trailing_adverb()
        if trailing is not None:
            word = tokens[trailing]
            adverbs += word.text + " "
            edits.append(_Edit(tokens[trailing - 1].end, word.end, ""))
        edits.insert(0, self._replace_group(f"{self._be()} {adverbs}associated with"))
        edits += self._object_edits(adjective)
        return edits

    def _object_edits(self, adjective: str | None) -> list[_Edit]:
        tokens, cue = self.tokens, self.cue
        n = len(tokens)
        k = cue.end
        edits: list[_Edit] = []
        if adjective:
            first = tokens[k]
            if adjective.split()[-1] in ("of", "to", "in", "with", "for"):
                edits.append(_Edit(first.start, first.start, adjective + " "))
            elif first.low in ("the", "a", "an"):
                nxt = tokens[k + 1].low if k + 1 < n else ""
                plural = nxt.endswith("s") and not nxt.endswith("ss")
                if adjective in ("more", "less", "fewer") or plural:
                    edits.append(_Edit(first.start, first.end, adjective))
                else:
                    article = "an" if adjective[0] in "aeiou" else "a"
                    edits.append(_Edit(first.start, first.end, f"{article} {adjective}"))
            elif first.low in self.comp.possessives:
                edits.append(_Edit(first.start, first.end, adjective))
            elif k + 1 < n and tokens[k + 1].low in ("'s", "'", "\u2019"):
                edits.append(_Edit(tokens[k + 1].end, tokens[k + 1].end, " " + adjective))
            else:
                edits.append(_Edit(first.start, first.start, adjective + " "))
        # "cut bills by 14 percent" -> "associated with lower bills, a difference of 14 percent"
        for j in range(k, min(n, k + 12)):
            low = tokens[j].low
            if low in (";", ":", ",", ".") or low in self.comp.clause_breaks:
                break
            if low == "by" and j + 1 < n and (tokens[j + 1].low[:1].isdigit()
                                              or tokens[j + 1].low in _NUMBER_WORDS):
                end = j + 1
                while end < n and (tokens[end].low[:1].isdigit() or tokens[end].low in
                                   _NUMBER_WORDS or tokens[end].low in (".", ",")
                                   and end + 1 < n and tokens[end + 1].low[:1].isdigit()):
                    end += 1
                edits.append(_Edit(tokens[j - 1].end, tokens[j].end, ", a difference of"))
                if end < n and tokens[end].is_word:
                    edits.append(_Edit(tokens[end - 1].end, tokens[end - 1].end, ","))
                break
        return edits

    def _nominal_to_association(self) -> list[_Edit] | None:
        tokens, cue = self.tokens, self.cue
        frame = self._frame()
        last = tokens[cue.end - 1].low
        if frame is not None and last in ("on", "upon", "of"):
            verb, index = frame
            self.group_start = self._group_start(index)
            self.tense, self.number = self._tense(self.group_start, index + 1)
            if verb == "have" and self.tense == "perfect" and tokens[index].low != "had":
                self.tense = "present"  # "has an effect on" -> "is associated with"
            if tokens[index].low == "had" and any(
                    w in ("has", "have") for w in self._group_words(self.group_start, index)):
                self.tense = "perfect"  # "has had an impact on"
            # "had a large effect on bills" -> "was associated with differences in bills"
            tail = " differences in" if verb == "have" and last in ("on", "upon") else ""
            return [self._replace_group(f"{self._be()} associated with{tail}")]
        head = cue.start
        edits: list[_Edit] = []
        if tokens[head].low == "causal" and cue.end - cue.start > 1:
            edits.append(_Edit(tokens[head].start, tokens[head + 1].start, ""))
            head += 1
        word = tokens[head].low
        plural = word.endswith("s") and not word.endswith("ss")
        edits.append(_Edit(tokens[head].start, tokens[head].end,
                           "associations" if plural else "association"))
        if last in ("on", "upon"):
            edits.append(_Edit(tokens[cue.end - 1].start, tokens[cue.end - 1].end, "with"))
        elif last == "of":
            for j in range(cue.end, min(len(tokens), cue.end + 10)):
                low = tokens[j].low
                if low in (",", ";", ":", ".") or low in self.comp.auxiliaries:
                    break
                if low in ("on", "upon"):
                    edits.append(_Edit(tokens[j].start, tokens[j].end, "with"))
                    break
        if head > 0 and tokens[head - 1].low == "a":
            edits.append(_Edit(tokens[head - 1].start, tokens[head - 1].end, "an"))
        return edits

    def _to_possible(self) -> list[_Edit] | None:
        kind, tokens, cue = self.entry.kind, self.tokens, self.cue
        capacity = [(a, b) for a, b, cls in cue.modifiers if cls.name == "capacity"]
        if capacity and not any(cls.name != "capacity" for _, _, cls in cue.modifiers):
            a, b = capacity[0]
            return [_Edit(tokens[a].start, tokens[b - 1].end, "may")]
        if kind == "verb":
            if self.tense is None:
                return None
            forms = self.entry.forms or {}
            particle = f" {self.entry.particle}" if self.entry.particle else ""
            if self._passive():
                head = _MAY_BE[self.tense]
                return [self._replace_group(f"{head} {self._adverbs()}{forms['participle']}"
                                            f"{particle}")]
            if self.tense in ("past", "perfect"):
                text = f"may have {self._adverbs()}{forms['participle']}{particle}"
            else:
                text = f"may {self._adverbs()}{forms['base']}{particle}"
            return [self._replace_group(text)]
        if kind in ("participle", "connective"):
            if self._has_copula():
                a, _ = self._span(self.group_start, self.cue.start)
                b = tokens[cue.start - 1].end
                return [_Edit(a, b, _MAY_BE[self.tense or "present"])]
            start = tokens[cue.start]
            if cue.start == 0:  # "As a result of X, ..." -> "Possibly as a result of X, ..."
                return [_Edit(start.start, start.start + 1, "possibly " + start.text[0].lower())]
            prefix = ", possibly " if tokens[cue.start - 1].is_word else "possibly "
            return [_Edit(start.start, start.start, prefix)]
        if kind == "nominal":
            frame = self._frame()
            if frame is not None:
                verb, index = frame
                self.group_start = self._group_start(index)
                words = self._group_words(self.group_start, index + 1)
                a, b = self._span(self.group_start, index + 1)
                if verb == "have":
                    text = "may have had" if ("had" in words) else "may have"
                else:
                    tense, _ = _FINITE.get(tokens[index].low, ("present", None))
                    text = _MAY_BE.get(tense, "may be")
                return [_Edit(a, b, text)]
            head = cue.start + (1 if tokens[cue.start].low == "causal" else 0)
            edits = [_Edit(tokens[head].start, tokens[head].start, "possible ")]
            if head > 0 and tokens[head - 1].low == "an":
                edits.append(_Edit(tokens[head - 1].start, tokens[head - 1].end, "a"))
            return edits
        return None

    def _to_causal(self) -> list[_Edit] | None:
        kind, tokens, cue = self.entry.kind, self.tokens, self.cue
        edits = self._firm_clause_hedges()
        if kind == "verb":
            if self.tense is None:
                return None
            forms = self.entry.forms or {}
            particle = f" {self.entry.particle}" if self.entry.particle else ""
            number = self.number or "sg"
            if self._passive():
                text = f"{self._be()} {self._adverbs()}{forms['participle']}{particle}"
            elif self.tense == "past":
                text = f"{self._adverbs()}{forms['past']}{particle}"
            elif self.tense == "perfect":
                text = f"{'has' if number == 'sg' else 'have'} {forms['participle']}{particle}"
            elif self.tense == "future":
                text = f"will {forms['base']}{particle}"
            else:
                text = f"{forms['third'] if number == 'sg' else forms['base']}{particle}"
            if self.group_start == cue.start and not edits:
                return None  # nothing weakens it in the verb group
            return edits + [self._replace_group(text)]
        if kind in ("participle", "connective") and self._has_copula():
            a, _ = self._span(self.group_start, cue.start)
            return edits + [_Edit(a, tokens[cue.start - 1].end, self._be())]
        if kind in ("participle", "connective"):
            drop = [k for k in range(max(0, cue.start - 2), cue.start)
                    if tokens[k].low in ("possibly", "probably", "perhaps", "potentially")]
            return edits + [_Edit(tokens[k].start, tokens[k].end, "") for k in drop] or None
        if kind == "nominal":
            drop = [k for k in range(max(0, cue.start - 2), cue.start)
                    if tokens[k].low in ("possible", "potential", "apparent", "likely")]
            return edits + [_Edit(tokens[k].start, tokens[k].end, "") for k in drop] or None
        return edits or None

    def _firm_clause_hedges(self) -> list[_Edit]:
        edits = []
        for a, b, _ in self.cue.clause_modifiers:
            first = self.tokens[a]
            if first.low in _FIRM:
                edits.append(_Edit(first.start, first.end, _FIRM[first.low]))
        return edits

    def _exposure_first(self) -> bool:
        """Whether the exposure is named before the expression and the outcome after it, so
        that a causal rewording keeps the direction (unknown without terms: no rewording)."""
        exposure, outcome = self.a.exposure, self.a.outcome
        if not exposure or not outcome:
            return False
        cue = self.cue
        if self.entry.kind == "nominal":  # "the association between X and Y"
            after_e = [a for a, _ in exposure if a >= cue.end]
            after_o = [a for a, _ in outcome if a >= cue.end]
            return bool(after_e and after_o and min(after_e) < min(after_o))
        return (any(b <= self.group_start for _, b in exposure)
                and any(a >= cue.end for a, _ in outcome))

    def _association_up(self, possible: bool) -> list[_Edit] | None:
        kind, tokens, cue = self.entry.kind, self.tokens, self.cue
        if not self._exposure_first():
            return None
        if kind in ("participle", "verb"):
            last = tokens[cue.end - 1].low
            if kind == "participle" and last not in ("with", "to"):
                return None  # "X and Y are correlated", "linked not only to ..."
            if cue.end >= len(tokens) or not tokens[cue.end].is_word:
                return None
            tense = self.tense or "present"
            number = self.number or "sg"
            # With a direction ("associated with lower bills") the cause "led to" it;
            # without one ("related to achievement") it "affected" it.
            first = tokens[cue.end].low
            nxt = tokens[cue.end + 1].low if cue.end + 1 < len(tokens) else ""
            directed = first in _DIRECTIONS or (first in ("a", "an") and nxt in _DIRECTIONS)
            verb = ("lead", "leads", "led", "led", " to") if directed else (
                "affect", "affects", "affected", "affected", "")
            base, third, past, participle, particle = verb
            if possible:
                text = (f"may have {participle}{particle}" if tense in ("past", "perfect")
                        else f"may {base}{particle}")
            elif tense == "past":
                text = f"{past}{particle}"
            elif tense == "perfect":
                text = f"{'has' if number == 'sg' else 'have'} {participle}{particle}"
            elif tense == "future":
                text = f"will {base}{particle}"
            else:
                text = f"{third if number == 'sg' else base}{particle}"
            firmed = [] if possible else self._firm_clause_hedges()
            return firmed + [self._replace_group(text)]
        if kind == "nominal":
            head = tokens[cue.start]
            plural = head.low.endswith("s") and not head.low.endswith("ss")
            noun = "effects" if plural else "effect"
            edits = [_Edit(head.start, head.end, f"possible {noun}" if possible else noun)]
            last = tokens[cue.end - 1]
            if last.low in ("between", "with", "of"):
                edits.append(_Edit(last.start, last.end, "of"))
                joiner = "and" if last.low == "between" else "with"
                for j in range(cue.end, min(len(tokens), cue.end + 10)):
                    if tokens[j].low in (",", ";", ":", "."):
                        break
                    if tokens[j].low == joiner:
                        edits.append(_Edit(tokens[j].start, tokens[j].end, "on"))
                        break
            if cue.start > 0 and tokens[cue.start - 1].low == "an" and possible:
                edits.append(_Edit(tokens[cue.start - 1].start, tokens[cue.start - 1].end, "a"))
            return edits
        return None


def _suggest(analysis: _Analysis, target: int) -> str | None:
    """The sentence reworded so that every expression stronger (or, for upgrades, weaker)
    than ``target`` is at ``target``; None when no general rule applies."""
    edits: list[_Edit] = []
    taken: list[tuple[int, int]] = []
    for cue in analysis.cues:
        if cue.level == 0:
            continue
        if target < 3 and cue.level <= 2:
            continue
        if target >= 3 and cue.level == target:
            continue
        if target >= 3 and cue.level > target and cue.entry.family != "causal":
            continue
        got = _Rewriter(analysis, cue).rewrite(target)
        if got is None:
            continue
        if any(e.start < b and a < e.end or (e.start == e.end and a <= e.start < b)
               for e in got for a, b in taken):
            continue
        edits.extend(got)
        taken.extend((e.start, e.end) for e in got)
    if not edits:
        return None
    suggestion = _apply_edits(analysis.sentence, edits)
    return None if suggestion == analysis.sentence else suggestion


# --------------------------------------------------------------------------------------------
# Reviewing a whole text


@dataclass(frozen=True)
class Claim:
    """One sentence that links the exposure and the outcome, graded and judged.

    ``verdict`` and ``suggestion`` are None when no evidence was given (or, for the
    suggestion, when no general rewording rule applies to the sentence's construction).
    """

    line: int | None
    sentence: str
    level: int
    prescriptive: bool
    verdict: str | None
    suggestion: str | None
    reason: str
    suggested_level: int | None = None
    expressions: tuple[Expression, ...] = ()

    @property
    def grade(self) -> str:
        return GRADES[self.level]

    def to_dict(self) -> dict[str, Any]:
        return {"line": self.line, "sentence": self.sentence, "level": self.level,
                "grade": self.grade, "prescriptive": self.prescriptive,
                "verdict": self.verdict, "suggestion": self.suggestion,
                "suggested_level": self.suggested_level, "reason": self.reason,
                "expressions": [e.to_dict() for e in self.expressions]}


@dataclass(frozen=True)
class WordingReview:
    """The causal-language review of one text. ``to_dict()`` gives the JSON contract."""

    claims: tuple[Claim, ...]
    evidence: Evidence
    exposure_terms: tuple[str, ...] | None
    outcome_terms: tuple[str, ...] | None
    sentences: int
    lines: int
    source: str | None = None
    text_format: str = "text"
    encoding: str | None = None
    lexicon: tuple[str, ...] = ()
    notes: tuple[str, ...] = ()
    study_claim: Claim | None = None
    subject: str | None = None

    def by_grade(self) -> dict[str, int]:
        """How many claims have each grade (every grade listed, zero included)."""
        counts = {grade: 0 for grade in GRADES}
        for claim in self.claims:
            counts[claim.grade] += 1
        return counts

    def by_verdict(self) -> dict[str, int]:
        counts = {SUPPORTED: 0, STRONGER: 0, WEAKER: 0}
        for claim in self.claims:
            if claim.verdict is not None:
                counts[claim.verdict] += 1
        return counts

    def overreaching(self) -> tuple[Claim, ...]:
        """The claims stronger than the evidence."""
        return tuple(c for c in self.claims if c.verdict == STRONGER)

    def _about(self) -> str:
        if self.subject:
            return f"linking {self.subject}"
        if self.exposure_terms and self.outcome_terms:
            return f"linking {self.exposure_terms[0]!r} and {self.outcome_terms[0]!r}"
        return "linking an exposure and an outcome"

    def _evidence_phrase(self) -> str:
        ev = self.evidence
        if ev.design == "randomized":
            return "a randomised design"
        if ev.robustness_value is None:
            return "an observational design without a robustness value"
        return f"an observational design with robustness value {format_rv(ev.robustness_value)}"

    def verdict_paragraph(self) -> str:
        """The headline: how many sentences claim, and how many claim too much."""
        n = len(self.claims)
        causal = sum(1 for c in self.claims if c.level >= 3)
        head = (f"{n} of {self.sentences} sentence{'s' if self.sentences != 1 else ''} "
                f"{'make' if n != 1 else 'makes'} a claim {self._about()}; {causal} "
                f"{'use' if causal != 1 else 'uses'} causal wording (level 3 or above).")
        if self.evidence.supported_level is None:
            missing = " and ".join(self.evidence.missing)
            return f"{head} No verdicts or rewordings: they need {missing}."
        counts = self.by_verdict()
        stronger, weaker = counts[STRONGER], counts[WEAKER]
        parts = [(f"{stronger or 'none'} {'claim' if stronger > 1 else 'claims'} more than "
                 f"{self._evidence_phrase()} supports (up to level "
                 f"{self.evidence.supported_level}, {self.evidence.supported_grade})")]
        if weaker:
            parts.append(f"{weaker} {'is' if weaker == 1 else 'are'} weaker than "
                         f"{'it' if weaker == 1 else 'they'} could be")
        parts.append(f"{counts[SUPPORTED]} {'is' if counts[SUPPORTED] == 1 else 'are'} "
                     "supported")
        body = ", ".join(parts[:-1]) + " and " + parts[-1]
        return f"{head} {body[:1].upper()}{body[1:]}."

    def to_text(self, *, quiet: bool = False, width: int = 92) -> str:
        """A report for people: the verdict paragraph first, then each claim."""
        def wrap(text: str, indent: str = "", first: str | None = None) -> list[str]:
            return textwrap.wrap(text, width=width, initial_indent=indent if first is None
                                 else first, subsequent_indent=indent,
                                 break_on_hyphens=False) or [first or indent]

        paragraph = wrap(self.verdict_paragraph())
        if quiet:
            return "\n".join(paragraph) + "\n"
        lines = paragraph + [""]
        what = self.source or "the text"
        lines += wrap(f"Read {what} ({self.text_format}, {self.lines} lines, {self.sentences} "
                      "sentences).")
        if self.exposure_terms and self.outcome_terms:
            cause = "Treatment" if self.subject else "Exposure"
            lines += wrap(f"{cause} words: {', '.join(self.exposure_terms)}.", "  ", "")
            lines += wrap(f"Outcome words: {', '.join(self.outcome_terms)}.", "  ", "")
        lines += wrap(f"Evidence: {self.evidence.description}.", "  ", "")
        if self.evidence.supported_level is not None:
            lines += wrap(f"Cut-offs (common practice): a randomised design supports causal "
                          f"wording (5); an observational one with robustness value >= "
                          f"{CONDITIONAL_CAUSAL_MIN_RV:.2f} supports \"may\" wording (3), "
                          "otherwise association wording (2).", "  ", "")
        counts = ", ".join(f"{g} {k}" for g, k in self.by_grade().items() if k)
        lines += wrap("Scale: 0 no-link, 1 association (\"is linked to\"), 2 hedged (\"may be "
                      "linked to\"), 3 possible-cause (\"may reduce\"), 4 capacity (\"can "
                      f"reduce\"), 5 causal (\"reduces\"). Found: {counts or 'no claims'}.",
                      "  ", "")
        if self.study_claim is not None:
            lines += ["", "The study file's claim"]
            lines += self._claim_lines(self.study_claim, wrap)
        if self.claims:
            lines += ["", "Claims"]
            for claim in self.claims:
                lines += self._claim_lines(claim, wrap)
        if self.notes:
            lines += ["", "Notes"]
            for note in self.notes:
                lines += wrap(note, "  ", "- ")
        return "\n".join(lines) + "\n"

    @staticmethod
    def _claim_lines(claim: Claim, wrap: Any) -> list[str]:
        where = f"line {claim.line}" if claim.line is not None else "[study].claim"
        tags = f"{claim.grade} ({claim.level})" + (", advice" if claim.prescriptive else "")
        verdict = f" -- {claim.verdict}" if claim.verdict else ""
        out = [f"  {where}: {tags}{verdict}"]
        out += wrap(f"\"{claim.sentence}\"", "      ", "    ")
        if claim.suggestion:
            out += wrap(f"reword: \"{claim.suggestion}\"", "      ", "    ")
        if claim.verdict is not None and claim.verdict != SUPPORTED:
            out += wrap(f"why: {claim.reason}", "      ", "    ")
        return out

    def to_dict(self) -> dict[str, Any]:
        return {
            "schema": _SCHEMA,
            "source": {"path": self.source, "format": self.text_format,
                       "encoding": self.encoding, "lines": self.lines,
                       "sentences": self.sentences},
            "terms": (None if self.exposure_terms is None else
                      {"exposure": list(self.exposure_terms),
                       "outcome": list(self.outcome_terms or ())}),
            "evidence": self.evidence.to_dict(),
            "supported_level": self.evidence.supported_level,
            "claims": [c.to_dict() for c in self.claims],
            "study_claim": None if self.study_claim is None else self.study_claim.to_dict(),
            "counts": {"claims": len(self.claims), "by_grade": self.by_grade(),
                       "by_verdict": self.by_verdict(),
                       "prescriptive": sum(1 for c in self.claims if c.prescriptive)},
            "grades": [{"level": level, "grade": GRADES[level],
                        "description": GRADE_DESCRIPTIONS[level]} for level in LEVELS],
            "lexicon": list(self.lexicon),
            "verdict": self.verdict_paragraph(),
            "notes": list(self.notes),
        }


def _claim_from(analysis: _Analysis, line: int | None, evidence: Evidence) -> Claim:
    assert analysis.level is not None
    verdict, target, reason = judge_claim(analysis.level, analysis.prescriptive,
                                          evidence.supported_level)
    suggestion = _suggest(analysis, target) if target is not None else None
    if verdict is not None and verdict != SUPPORTED and target is not None and not suggestion:
        reason += "; no automatic rewording for this construction"
    return Claim(line=line, sentence=analysis.sentence, level=analysis.level,
                 prescriptive=analysis.prescriptive, verdict=verdict, suggestion=suggestion,
                 reason=reason, suggested_level=target if suggestion else None,
                 expressions=tuple(_expression(analysis, c) for c in analysis.cues))


def review_text(text: str, *, study: Study | None = None,
                robustness_value: float | None = None, lexicon: Lexicon | None = None,
                exposure_terms: Sequence[str] | None = None,
                outcome_terms: Sequence[str] | None = None, design: str | None = None,
                text_format: str = "auto", source: str | None = None) -> WordingReview:
    """Find, grade and judge the causal claims in a report's text.

    Parameters
    ----------
    text : str
        The report: plain text, Markdown or HTML (``text_format``, detected when "auto").
    study : Study, optional
        Gives the exposure and outcome words (treatment and outcome names, labels and
        ``synonyms``), the design (``[study].design``) and the ``[study].claim`` sentence.
    robustness_value : float, optional
        The robustness value of the estimate in [0, 1] (from ``vet`` or ``audit``).
    lexicon : Lexicon, optional
        The word lists (default: the shipped lexicon; see :func:`load_lexicon`).
    exposure_terms, outcome_terms : sequence of str, optional
        Words for the exposure and the outcome; override the study's.
    design : {"observational", "randomized"}, optional
        The design when no study is given (a study's design wins).
    text_format : {"auto", "text", "markdown", "html"}
    source : str, optional
        A name for the text in the report (a file path).

    Returns
    -------
    WordingReview
        One :class:`Claim` a sentence that links the exposure and the outcome (any two things
        when no words are known), in text order, each with its level, verdict and suggestion.

    Notes
    -----
    The whole text is processed in one linear pass: markup stripping, sentence splitting and
    grading each visit every character a bounded number of times.

    References
    ----------
    Sumner et al. (2014), BMJ 349:g7015; Haber et al. (2022), Am. J. Epidemiol. 191:2084
    (the strength scale, from memory); Cinelli & Hazlett (2020), JRSS-B 82:39 (the robustness
    value).

    Examples
    --------
    >>> r = review_text("Tutoring may improve reading. Classes were small.",
    ...                 exposure_terms=["tutoring"], outcome_terms=["reading"])
    >>> [(c.line, c.grade, c.verdict) for c in r.claims]
    [(1, 'possible-cause', None)]
    """
    return _review(text, study=study, robustness_value=robustness_value, lexicon=lexicon,
                   exposure_terms=exposure_terms, outcome_terms=outcome_terms, design=design,
                   text_format=text_format, source=source)


def _review(text: str, *, study: Study | None, robustness_value: float | None,
            lexicon: Lexicon | None, exposure_terms: Sequence[str] | None,
            outcome_terms: Sequence[str] | None, design: str | None, text_format: str,
            source: str | None, read_notes: Sequence[str] = (),
            encoding: str | None = None) -> WordingReview:
    lex = lexicon or default_lexicon()
    comp = lex.compiled
    notes = list(read_notes)
    if study is not None:
        design = study.design
    evidence = assess_evidence(design, robustness_value)
    if exposure_terms is None and outcome_terms is None and study is not None:
        exposure_terms, outcome_terms = study_terms(study)
        if not exposure_terms or not outcome_terms:
            notes.append("the study names no treatment or no outcome, so every sentence with "
                         "a relation expression between two things is listed")
            exposure_terms = outcome_terms = None
    terms = None
    if exposure_terms is not None or outcome_terms is not None:
        terms = _Terms.build(exposure_terms or (), outcome_terms or ())
    prose, chosen = extract_text(text, text_format=text_format,
                                 path=source if source and text_format == "auto" else None)
    sentences = split_sentences(prose)
    if not sentences:
        raise TextFileError(
            f"text {source or '(given)'!r} contains no readable sentences after removing "
            f"markup ({chosen}); pass the report's prose")
    over_long = sum(1 for s in sentences if s.cut)
    claims: list[Claim] = []
    mentioned_both: list[int] = []
    for sentence in sentences:
        analysis = _analyse(sentence.text, comp, terms, always_advice=False)
        if analysis.level is not None:
            claims.append(_claim_from(analysis, sentence.line, evidence))
        elif terms is not None and terms.exposure_re and terms.outcome_re and (
                terms.exposure_re.search(sentence.text)
                and terms.outcome_re.search(sentence.text)):
            mentioned_both.append(sentence.line)
    study_claim = None
    if study is not None and study.claim:
        analysis = _analyse(study.claim, comp, terms)
        if analysis.level is None:
            analysis = _analyse(study.claim, comp, None)
        if analysis.level is not None:
            study_claim = _claim_from(analysis, None, evidence)
        else:
            notes.append(f"the study file's claim {study.claim!r} states no relation the "
                         "lexicon recognises")
    if terms is None:
        notes.append("no exposure and outcome words were given (no --study), so every sentence "
                     "with a relation expression between two things is listed; give --study "
                     "to keep only sentences about the treatment and the outcome")
    elif not claims:
        notes.append(
            f"no sentence links the exposure ({', '.join(terms.exposure) or 'no words'}) and "
            f"the outcome ({', '.join(terms.outcome) or 'no words'}) with a relation "
            "expression. If the report uses other words, add them as synonyms in the study "
            "file, e.g. [variables] name = { synonyms = [\"...\"] }")
    if terms is not None and mentioned_both:
        k = len(mentioned_both)
        shown = ", ".join(str(x) for x in mentioned_both[:10]) + (", ..." if k > 10 else "")
        notes.append(f"{k} other sentence{'s' if k != 1 else ''} (line{'s' if k != 1 else ''} "
                     f"{shown}) {'mention' if k != 1 else 'mentions'} both the "
                     f"{'treatment' if study is not None else 'exposure'} and the outcome "
                     "without a claim the lexicon recognises (a question, an aim, or "
                     "wording it lacks); read them, and extend the lexicon with --lexicon if "
                     "they make claims")
    if over_long:
        notes.append(f"text without a sentence end for more than {MAX_SENTENCE_CHARS} "
                     f"characters was cut into pieces ({over_long} cut"
                     f"{'s' if over_long != 1 else ''}); a claim spanning a cut may be missed")
    notes.extend(evidence.notes)
    if evidence.supported_level is None:
        notes.append("verdicts and rewordings need " + " and ".join(evidence.missing))
    elif evidence.missing:
        notes.extend(f"missing: {m}" for m in evidence.missing)
    subject = None
    if study is not None and study.treatment and study.outcome and terms is not None:
        # labels, as every other report names the two variables
        subject = (f"the treatment ({study.label(study.treatment)}) and the outcome "
                   f"({study.label(study.outcome)})")
    return WordingReview(
        claims=tuple(claims), evidence=evidence, subject=subject,
        exposure_terms=terms.exposure if terms is not None else None,
        outcome_terms=terms.outcome if terms is not None else None,
        sentences=len(sentences), lines=prose.count("\n") + 1, source=source,
        text_format=chosen, encoding=encoding, lexicon=lex.sources, notes=tuple(notes),
        study_claim=study_claim)


def review_file(path: str | Path, *, study: Study | None = None,
                robustness_value: float | None = None, lexicon: Lexicon | None = None,
                exposure_terms: Sequence[str] | None = None,
                outcome_terms: Sequence[str] | None = None, design: str | None = None,
                text_format: str = "auto") -> WordingReview:
    """:func:`review_text` on the file at ``path`` (read with :func:`read_text_file`).

    Raises
    ------
    TextFileError
        When the file is missing, a folder, empty, binary or has no readable sentences.
    """
    text, encoding, notes = read_text_file(path)
    return _review(text, study=study, robustness_value=robustness_value, lexicon=lexicon,
                   exposure_terms=exposure_terms, outcome_terms=outcome_terms, design=design,
                   text_format=text_format, source=str(path), read_notes=notes,
                   encoding=encoding)


def review_for_study(study: Study, robustness_value: float | None = None, *,
                     lexicon: Lexicon | None = None) -> WordingReview | None:
    """The wording section for an audit or vet report: None when the study has no
    ``[study].report_text``.

    Raises
    ------
    TextFileError
        When ``[study].report_text`` points to a file that cannot be reviewed; the message
        names the study file and the key.
    """
    if study.report_text is None:
        return None
    if not study.report_text.exists():
        # read_text_file's own message says paths are relative to the working folder; this
        # one is relative to the study file
        raise TextFileError(
            f"[study].report_text in study file {study.source!r} names "
            f"{str(study.report_text)!r}, which does not exist; the path is relative to the "
            "study file's folder. Fix report_text, or remove it")
    try:
        return review_file(study.report_text, study=study, robustness_value=robustness_value,
                           lexicon=lexicon)
    except TextFileError as error:
        raise TextFileError(f"[study].report_text in study file {study.source!r}: {error}"
                            ) from None


def wording_block(study: Study, robustness_value: float | None = None, *,
                  lexicon: Lexicon | None = None) -> dict[str, Any] | None:
    """The ``wording`` entry of an audit or vet document; None without ``[study].report_text``.

    Reviews the study's report text (:func:`review_for_study`) against the study's design and
    ``robustness_value`` (the one the audit or vet report computed) and keeps what a report
    shows: the wording contract's ``claims`` list and ``supported_level``, with the evidence,
    the counts, the review's verdict paragraph and its notes. A report text that cannot be
    read is not an error here (only ``causalcheck wording`` itself refuses it): the entry then
    has ``reviewed`` false, ``claims`` null and the reason in ``error``, for the report's notes.

    Examples
    --------
    >>> from causalcheck.study import parse_study
    >>> study = parse_study('[study]\\ntreatment = "x"\\noutcome = "y"\\n'
    ...                     'report_text = "no-such-file.md"\\n[graph]\\nedges = ["x -> y"]\\n')
    >>> block = wording_block(study, 0.2)
    >>> block["reviewed"], block["claims"], "does not exist" in block["error"]
    (False, None, True)
    """
    if study.report_text is None:
        return None
    source = str(study.report_text)
    try:   # shown as the user would type it from here, like the study file's own path
        source = str(study.report_text.relative_to(Path.cwd()))
    except ValueError:
        pass
    try:
        review = review_for_study(study, robustness_value, lexicon=lexicon)
    except TextFileError as error:
        return {"source": source, "reviewed": False, "error": str(error), "claims": None,
                "supported_level": None, "supported_grade": None, "notes": []}
    assert review is not None
    full = review.to_dict()
    return {"source": source, "reviewed": True, "error": None, "claims": full["claims"],
            "supported_level": full["supported_level"],
            "supported_grade": review.evidence.supported_grade,
            "evidence": full["evidence"], "format": review.text_format,
            "lines": review.lines, "sentences": review.sentences, "counts": full["counts"],
            "study_claim": full["study_claim"], "verdict": full["verdict"],
            "notes": full["notes"]}
