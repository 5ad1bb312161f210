"""Fuzzing the study-file parser, and identification on what it accepts.

``parse_study`` and ``load_study`` may return a :class:`~causalcheck.study.Study` or raise the
project's own :class:`~causalcheck.errors.CausalCheckError`; anything else escaping is a bug.
The same holds for :func:`causalcheck.graph.identify` on every study the parser accepts.

The default run feeds the parser more than 10,000 files in under a minute:

- a fast loop of seeded mutations of the bundled scenario files (byte flips, deleted,
  duplicated and swapped lines, swapped and retyped values, renamed keys, truncation, junk
  tokens; one to four mutations a file), the byte-level ones through ``load_study``;
- Hypothesis strategies writing TOML-ish files from the format's own tables and keys with
  values of every type, and random text.

Every refusal is also checked for form: it names the file, every problem has a key path and
a message, and a line number, when given, is a line of the file.

``-m benchmark`` runs the same loops about fifty times longer
(``tests/benchmarks/test_bench_fuzz.py``).
"""

from __future__ import annotations

import random
import re
import traceback
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from causalcheck.errors import CausalCheckError, StudyFileError
from causalcheck.study import _ALLOWED, _VARIABLE_KEYS, Study, load_study, parse_study

ROOT = Path(__file__).resolve().parents[1]
SEEDS = sorted((ROOT / "scenarios").glob("*/study.toml"))

# values of every TOML type, some fine for a key and most not
VALUES = ['"x"', '"y"', '"z -> x"', '"a -> b -> c"', '""', "0", "1", "-1", "3", "0.05", "1e400",
          "nan", "inf", "-inf", "true", "false", "[]", '["x"]', '["x", "x"]', "[1, 2]",
          "[0.5, 0.1]", '[1, "a"]', "{}", '{ label = "L" }', '{ measured = "no" }',
          "1979-05-27", "07:32:00", "1979-05-27T07:32:00Z", '"\\u00e9"', "'literal'",
          '"""multi\nline"""', "0x1F", "1_000", '["x -> y", "y -> x"]', '["X -> y"]',
          '"x -> x"', "[[1], [2]]", "9999999999999999999999"]
JUNK = ["[", "]", "=", '"', "'", "{", "}", ",", "#", "\\", "[[study]]", "[study]", "[]",
        "->", "\x00", "\ufeff", "\t", "\r", "key", "= =", "[graph", "edges = [", "\u2028"]


# --------------------------------------------------------------------------------------------
# Checking one input


def check_refusal(error: CausalCheckError, text: str | None, source: str) -> None:
    message = str(error)
    assert message and "Traceback" not in message
    if isinstance(error, StudyFileError):
        assert error.path == source and source in message
        assert error.problems
        lines = text.splitlines() if text is not None else None
        for problem in error.problems:
            assert problem.where and problem.message
            if problem.line is not None and lines is not None:
                # a line a user can go to (the parser may point at the line after the last
                # one, where TOML found an unclosed value)
                assert 1 <= problem.line <= len(lines) + 1, (problem, len(lines))


def parse_or_refuse(text: str, source: str = "fuzz.toml") -> Study | None:
    """``parse_study(text)``: a Study, or None after checking the refusal's form."""
    try:
        study = parse_study(text, path=source)
    except CausalCheckError as error:
        check_refusal(error, text, source)
        return None
    check_study(study)
    return study


def load_or_refuse(path: Path, data: bytes) -> Study | None:
    path.write_bytes(data)
    try:
        study = load_study(path)
    except CausalCheckError as error:
        try:
            text = data.decode("utf-8")
        except UnicodeDecodeError:
            text = None
        check_refusal(error, text, str(path))
        return None
    check_study(study)
    return study


def check_study(study: Study) -> None:
    """What an accepted file promises: named nodes, known choices, strengths on edges."""
    nodes = set(study.nodes)
    assert all(re.match(r"^[A-Za-z_][A-Za-z0-9_.]*$", n) for n in nodes)
    assert all(a != b for a, b in study.edges)
    assert len(set(study.edges)) == len(study.edges)
    if study.edges:
        assert study.treatment in nodes and study.outcome in nodes
        assert study.treatment != study.outcome
        assert set(study.controls or ()) <= nodes
        assert set(study.sensitivity.benchmarks) <= nodes
    assert set(study.strengths) <= set(study.edges)
    assert 0 < study.alpha < 1
    assert study.design in ("observational", "randomized")


# --------------------------------------------------------------------------------------------
# Mutations of the scenario files


def _assignments(lines: list[str]) -> list[int]:
    return [i for i, line in enumerate(lines) if re.match(r"^\s*[\w\".\- >]+\s*=", line)]


def mutate(text: str, rng: random.Random) -> str | bytes:
    """One to four random mutations of ``text``; bytes when a byte was flipped."""
    for _ in range(rng.randint(1, 4)):
        lines = text.split("\n")
        kind = rng.randrange(12)
        if kind == 0 and len(lines) > 1:                          # delete lines
            start = rng.randrange(len(lines))
            del lines[start:start + rng.randint(1, 3)]
        elif kind == 1:                                           # duplicate a line
            i = rng.randrange(len(lines))
            lines.insert(i, lines[i])
        elif kind == 2 and len(lines) > 1:                        # swap two lines
            i, j = rng.randrange(len(lines)), rng.randrange(len(lines))
            lines[i], lines[j] = lines[j], lines[i]
        elif kind == 3:                                           # swap two values
            spots = _assignments(lines)
            if len(spots) >= 2:
                i, j = rng.sample(spots, 2)
                left_i, _, right_i = lines[i].partition("=")
                left_j, _, right_j = lines[j].partition("=")
                lines[i], lines[j] = f"{left_i}={right_j}", f"{left_j}={right_i}"
        elif kind == 4:                                           # a value of another type
            spots = _assignments(lines)
            if spots:
                i = rng.choice(spots)
                left = lines[i].partition("=")[0]
                lines[i] = f"{left}= {rng.choice(VALUES)}"
        elif kind == 5:                                           # rename a key
            spots = _assignments(lines)
            if spots:
                i = rng.choice(spots)
                left, _, right = lines[i].partition("=")
                key = list(left)
                if key:
                    key[rng.randrange(len(key))] = rng.choice("abcXYZ_.- \"'")
                lines[i] = "".join(key) + "=" + right
        elif kind == 6:                                           # insert junk
            i = rng.randrange(len(lines))
            at = rng.randrange(len(lines[i]) + 1)
            lines[i] = lines[i][:at] + rng.choice(JUNK) + lines[i][at:]
        elif kind == 7:                                           # truncate
            text = text[:rng.randrange(len(text) + 1)]
            continue
        elif kind == 8:                                           # a new key in a table
            table = rng.choice(list(_ALLOWED))
            key = rng.choice(list(_ALLOWED[table]) + ["extra", "treatment", "n"])
            lines.insert(rng.randrange(len(lines) + 1), f"[{table}]\n{key} = "
                         f"{rng.choice(VALUES)}")
        elif kind == 9:                                           # change a name's case
            i = rng.randrange(len(lines))
            lines[i] = re.sub(r'"(\w)', lambda m: '"' + m.group(1).swapcase(), lines[i],
                              count=1)
        elif kind == 10:                                          # edit an edge string
            i = rng.randrange(len(lines))
            lines[i] = lines[i].replace("->", rng.choice(["<-", "=>", "-", "->->", "", " -> "]),
                                        1)
        else:                                                     # a number made extreme
            i = rng.randrange(len(lines))
            lines[i] = re.sub(r"\b\d+(\.\d+)?\b", rng.choice(["0", "-5", "1e308", "2",
                                                             "0.9999", "100000000"]),
                              lines[i], count=1)
        text = "\n".join(lines)
    if rng.random() < 0.15:                                       # flip bytes
        data = bytearray(text.encode("utf-8"))
        for _ in range(rng.randint(1, 3)):
            if data:
                data[rng.randrange(len(data))] ^= 1 << rng.randrange(8)
        return bytes(data)
    return text


def run_mutations(count: int, seed: int, tmp_path: Path) -> dict[str, int]:
    """Feed ``count`` mutated files to the parser; return how many parsed or were refused."""
    rng = random.Random(seed)
    seeds = [path.read_text(encoding="utf-8") for path in SEEDS]
    tally = {"parsed": 0, "refused": 0}
    target = tmp_path / "mutated.toml"
    for number in range(count):
        mutated = mutate(rng.choice(seeds), rng)
        try:
            if isinstance(mutated, bytes):
                study = load_or_refuse(target, mutated)
            else:
                study = parse_or_refuse(mutated)
        except Exception:                      # noqa: BLE001 - report the input that broke it
            pytest.fail(f"mutation {number} (seed {seed}) raised a non-CausalCheckError:\n"
                        f"{traceback.format_exc()}\n--- input ---\n{mutated!r}")
        tally["parsed" if study is not None else "refused"] += 1
    return tally


def test_scenario_files_parse():
    assert len(SEEDS) >= 3
    for path in SEEDS:
        check_study(load_study(path))


def test_fuzz_mutated_scenario_files(tmp_path):
    tally = run_mutations(9000, seed=20240, tmp_path=tmp_path)
    # the mutations must exercise both outcomes, or the fuzzing tests nothing
    assert tally["refused"] > 3000 and tally["parsed"] > 300, tally


# --------------------------------------------------------------------------------------------
# Hypothesis: TOML-ish files from the format's own vocabulary


names = st.sampled_from(["x", "y", "z", "w", "X", "income", "a.b", "_u", "9bad", "x y", ""])
scalars = st.one_of(
    st.integers(-10**20, 10**20).map(str),
    st.floats(allow_nan=True, allow_infinity=True).map(
        lambda f: {"nan": "nan", "inf": "inf", "-inf": "-inf"}.get(repr(f), repr(f))),
    st.booleans().map(lambda b: "true" if b else "false"),
    st.text(max_size=12).map(lambda s: '"' + s.replace("\\", "\\\\").replace('"', '\\"')
                             + '"'),
    st.tuples(names, names).map(lambda e: f'"{e[0]} -> {e[1]}"'),
    st.sampled_from(VALUES),
)
values = st.recursive(scalars, lambda inner: st.one_of(
    st.lists(inner, max_size=5).map(lambda v: "[" + ", ".join(v) + "]"),
    st.dictionaries(st.sampled_from(list(_VARIABLE_KEYS) + ["bogus"]), inner, max_size=3)
    .map(lambda d: "{ " + ", ".join(f"{k} = {v}" for k, v in d.items()) + " }")),
    max_leaves=8)
keys = st.one_of(st.sampled_from(sorted({k for ks in _ALLOWED.values() for k in ks})),
                 names, st.tuples(names, names).map(lambda e: f'"{e[0]} -> {e[1]}"'))
tables = st.one_of(st.sampled_from(list(_ALLOWED)), st.sampled_from(["studdy", "graph.x",
                                                                     "[study]", "Study"]))
documents = st.lists(st.tuples(tables, st.lists(st.tuples(keys, values), max_size=6)),
                     max_size=6).map(
    lambda doc: "\n".join(f"[{t}]\n" + "\n".join(f"{k} = {v}" for k, v in pairs)
                          for t, pairs in doc))


@settings(max_examples=700, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(text=documents)
def test_fuzz_toml_like_documents(text):
    parse_or_refuse(text)


@settings(max_examples=300, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(text=st.text(max_size=300))
def test_fuzz_random_text(text):
    parse_or_refuse(text)


BASE = ('[study]\ntreatment = "x"\noutcome = "y"\n[graph]\nedges = ["z -> x", "z -> y", '
        '"x -> y"]\n')


@settings(max_examples=500, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(table=st.sampled_from(["study", "data", "controls", "reported", "sensitivity",
                              "strengths", "plan", "variables"]),
       key=keys, value=values)
def test_fuzz_one_key_of_a_good_file(table, key, value):
    """A good file plus one key of any type: the closest a user's typo usually gets."""
    if table == "study" or table == "graph":
        text = BASE.replace("[graph]", f"{key} = {value}\n[graph]", 1)
    else:
        text = BASE + f"[{table}]\n{key} = {value}\n"
    parse_or_refuse(text)


def test_fuzz_counts_reach_ten_thousand():
    """The default run feeds at least 10,000 files (the counts of the tests above)."""
    total = 9000 + 700 + 300 + 500
    assert total >= 10_000


# --------------------------------------------------------------------------------------------
# identify() on parsed random graphs


def random_graph_text(rng: random.Random, *, nodes: int, density: float,
                      cycles: bool) -> str:
    names = [f"n{i}" for i in range(nodes)]
    rng.shuffle(names)
    edges = {(names[i], names[j]) for i in range(nodes) for j in range(i + 1, nodes)
             if rng.random() < density}
    if cycles and len(edges) > 1 and rng.random() < 0.5:
        a, b = rng.choice(sorted(edges))
        edges.add((b, a))                                   # a two-cycle, or more via others
    if not edges:
        edges = {(names[0], names[1])}
    present = sorted({v for e in edges for v in e})
    treatment, outcome = rng.sample(present, 2)
    lines = ["[study]", f'treatment = "{treatment}"', f'outcome = "{outcome}"', "",
             "[variables]"]
    for name in present:
        if rng.random() < 0.6:
            lines.append(f"{name} = {{ measured = {'false' if rng.random() < 0.3 else 'true'}"
                         f", cost = {rng.randint(0, 9)} }}")
    lines += ["", "[graph]", "edges = [" + ", ".join(f'"{a} -> {b}"' for a, b in
                                                     sorted(edges)) + "]"]
    if rng.random() < 0.7:
        others = [v for v in present if v not in (treatment, outcome)]
        used = rng.sample(others, rng.randint(0, len(others))) if others else []
        lines += ["", "[controls]", "used = [" + ", ".join(f'"{v}"' for v in used) + "]"]
    return "\n".join(lines) + "\n"


def identify_or_refuse(text: str) -> None:
    from causalcheck.graph import identify

    study = parse_or_refuse(text)
    if study is None:
        return
    try:
        result = identify(study)
    except CausalCheckError as error:
        check_refusal(error, text, "fuzz.toml")
        return
    document = result.to_dict()
    assert document["treatment"] == study.treatment
    assert all(set(s) <= set(study.measured) for s in result.minimal_sets)


def test_fuzz_identify_on_random_graphs():
    pytest.importorskip("causalcheck.graph")
    rng = random.Random(77)
    for number in range(400):
        text = random_graph_text(rng, nodes=rng.randint(2, 12),
                                 density=rng.choice([0.15, 0.3, 0.5, 0.8]), cycles=True)
        try:
            identify_or_refuse(text)
        except Exception:                      # noqa: BLE001
            pytest.fail(f"graph {number} raised a non-CausalCheckError:\n"
                        f"{traceback.format_exc()}\n--- input ---\n{text}")


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(seed=st.integers(0, 2**32 - 1), nodes=st.integers(2, 9),
       density=st.floats(0.05, 0.9), cycles=st.booleans())
def test_fuzz_identify_hypothesis(seed, nodes, density, cycles):
    pytest.importorskip("causalcheck.graph")
    identify_or_refuse(random_graph_text(random.Random(seed), nodes=nodes, density=density,
                                         cycles=cycles))


def test_identify_refuses_a_cycle_by_naming_it():
    from causalcheck.graph import identify

    study = parse_study('[study]\ntreatment = "a"\noutcome = "c"\n[graph]\n'
                        'edges = ["a -> b", "b -> c", "c -> a"]\n', path="loop.toml")
    with pytest.raises(CausalCheckError, match=r"cycle.*a -> b -> c -> a|cycle.*b -> c -> a"):
        identify(study)


# --------------------------------------------------------------------------------------------
# The data reader: mutated CSV files through the whole audit (pandas and stream engines)

CELLS = ["", "NA", "nan", "inf", "-inf", "1e308", "-1e308", "1e200", "1e-320", "0", "1", "2",
         "a", "yes", "TRUE", '"1"', "1,5", " 3 ", "\u00e9", "1_000", "--", "1e400", "9" * 400,
         '"a,b"', "0.5"]
KINDS = ["", "", '[variables]\nz = { kind = "categorical" }\n',
         '[variables]\nx = { kind = "binary" }\n',
         '[variables]\nw = { kind = "categorical", levels = ["a", "b"] }\n']


def mutated_data(rng: random.Random, kind: str) -> str:
    """Rows fitting ``kind`` (a categorical z of 3 levels, a 0/1 x, a w of a/b), mutated."""
    n = rng.choice([4, 12, 40, 60, 60])
    rows = [["x", "y", "z", "w"]]
    for _ in range(n):
        z, w = rng.gauss(0, 1), rng.gauss(0, 1)
        x = 0.6 * z + rng.gauss(0, 1)
        y = 0.5 * x + z + 0.4 * w + rng.gauss(0, 1)
        cells = [f"{v:.6f}" for v in (x, y, z, w)]
        if "z = " in kind:
            cells[2] = str(rng.randrange(3))
        if "x = " in kind:
            cells[0] = str(int(x > 0))
        if "w = " in kind:
            cells[3] = "a" if w > 0 else "b"
        rows.append(cells)
    for _ in range(rng.choice([0, 0, 1, 1, 2, 3])):
        rows[rng.randrange(1, len(rows))][rng.randrange(4)] = rng.choice(CELLS)
    if rng.random() < 0.1:                                # a whole column of one cell
        j, cell = rng.randrange(4), rng.choice(CELLS)
        for row in rows[1:]:
            row[j] = cell
    if rng.random() < 0.05:
        rows[0][rng.randrange(4)] = rng.choice(["X", "", "x ", "z"])
    newline = "\r\n" if rng.random() < 0.2 else "\n"
    return ("\ufeff" if rng.random() < 0.05 else "") + newline.join(
        ",".join(r) for r in rows) + newline


def test_fuzz_data_files_through_the_audit(tmp_path):
    import json
    import warnings

    from causalcheck.audit import audit
    from causalcheck.commands.audit import document_of, render_text
    from causalcheck.errors import CausalCheckWarning
    from causalcheck.report.jsonout import dumps

    rng = random.Random(31)
    tally = {"audited": 0, "refused": 0}
    for number in range(120):
        kind = rng.choice(KINDS)
        data = mutated_data(rng, kind)
        engine = rng.choice(["pandas", "stream"])
        study = (f'[study]\ntreatment = "x"\noutcome = "y"\n[data]\npath = "data.csv"\n'
                 f'engine = "{engine}"\n{kind}[graph]\nedges = ["z -> x", '
                 '"z -> y", "x -> y", "w -> y"]\n[controls]\nused = ["z"]\n')
        (tmp_path / "data.csv").write_text(data, encoding="utf-8")
        (tmp_path / "study.toml").write_text(study, encoding="utf-8")
        with warnings.catch_warnings():
            warnings.simplefilter("error")                  # a raw numpy warning is a bug
            warnings.simplefilter("ignore", CausalCheckWarning)
            try:
                result = audit(tmp_path / "study.toml")
                document = document_of(result)
                json.loads(dumps(document), parse_constant=lambda c: 1 / 0)
                render_text(result, document=document)
                tally["audited"] += 1
            except CausalCheckError as error:
                assert str(error) and "Traceback" not in str(error)
                tally["refused"] += 1
            except Exception:                  # noqa: BLE001
                pytest.fail(f"data file {number} ({engine}) raised a non-CausalCheckError:\n"
                            f"{traceback.format_exc()}\n--- data ---\n{data[:600]}\n"
                            f"--- study ---\n{study}")
    assert tally["audited"] > 20 and tally["refused"] > 20, tally
