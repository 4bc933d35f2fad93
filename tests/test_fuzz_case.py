"""Property-based fuzzing of the case loader (hypothesis).

Property: ``parse_case`` / ``load_case`` either return a :class:`Case` or raise :class:`CaseError`;
never another exception (no KeyError, TypeError, OverflowError, a pint parser error, a hang).
Inputs: random TOML-shaped documents built from the case-file vocabulary, random mutations of the
valid example cases (the demo lever and the corpus base), and random text and byte edits of case
files read from disk. The number of inputs tried is recorded as the test property
``fuzz_examples`` and summed at the end of the run (see conftest.py); the default run keeps to a
few seconds, the ``slow`` variants try many more.
"""
from __future__ import annotations

import copy
import datetime as dt
import math
import os
import shutil
import sys
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from elastofe.case import load_case, parse_case
from elastofe.case.schema import Case
from elastofe.errors import CaseError

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover
    import tomli as tomllib

ROOT = Path(__file__).resolve().parent.parent
CORPUS = ROOT / "tests" / "corpus"
EXAMPLES = {
    "lever": (ROOT / "elastofe" / "models" / "lever" / "lever.toml"),
    "base": (CORPUS / "base.toml"),
}
DOCS = {k: tomllib.loads(p.read_text(encoding="utf-8")) for k, p in EXAMPLES.items()}

#: Every key the case format knows, and some near misses, so random documents reach deep checks.
VOCAB = ["title", "units", "geometry", "file", "material", "E", "nu", "density", "yield_strength",
         "mesh", "order", "size", "refine", "region", "regions", "plane", "point", "normal", "tol",
         "cylinder", "radius", "axis", "at", "box", "min", "max", "surfaces", "group", "support",
         "fix", "value", "load", "force", "pressure", "gravity", "name", "line", "start", "end",
         "samples", "solver", "backend", "maxiter", "root", "pin", "tip", "materail", "sise", "fixed",
         "reference", "label", "tolerance", "scalar", "quantity", "points", "field", "arrays", "snap",
         "max_von_mises", "max_displacement", "reaction_y", "von_mises", "displacement", "5%"]
QUANTITY_TEXT = ["200 GPa", "200 N", "4 mm", "-1 mm", "0 MPa", "7850 kg/m^3", "1e400 MPa", "nan", "inf",
                 "9**9**9", "2^2^2^2", "1 MPa**99999", "1/0", "()", "", " ", "1 +", "mm-N", "xyz", "auto",
                 "1 degC", "12e-6 1/K", "3 in", "450 lbf", "lever.step", "part.stl", "cube.step", "m³", "1 m³"]

# TOML can hold: strings, 64-bit integers, floats (inf and nan too), booleans, date-times, arrays, tables.
scalars = st.one_of(
    st.integers(min_value=-(2**63), max_value=2**63 - 1),
    st.floats(allow_nan=True, allow_infinity=True),
    st.booleans(),
    st.sampled_from(QUANTITY_TEXT),
    st.text(max_size=12),
    st.sampled_from(VOCAB),
    st.datetimes(min_value=dt.datetime(1900, 1, 1), max_value=dt.datetime(2100, 1, 1)),
    st.dates(min_value=dt.date(1900, 1, 1), max_value=dt.date(2100, 1, 1)),
)
keys = st.one_of(st.sampled_from(VOCAB), st.text(min_size=1, max_size=8))
values = st.recursive(scalars, lambda inner: st.one_of(
    st.lists(inner, max_size=5), st.dictionaries(keys, inner, max_size=5)), max_leaves=10)
documents = st.dictionaries(keys, values, max_size=6)

COUNT = {"n": 0}


def _check(doc, base=CORPUS) -> None:
    COUNT["n"] += 1
    try:
        out = parse_case(doc, base=base)
    except CaseError as err:
        assert str(err)  # a message naming the key is always there
        return
    assert isinstance(out, Case)


def _paths(obj, prefix=()):
    """Every path into a nested dict/list document, containers included."""
    yield prefix
    if isinstance(obj, dict):
        for k, v in obj.items():
            yield from _paths(v, prefix + (k,))
    elif isinstance(obj, list):
        for i, v in enumerate(obj):
            yield from _paths(v, prefix + (i,))


def _get(doc, path):
    for p in path:
        doc = doc[p]
    return doc


@st.composite
def mutated(draw):
    """A valid example case with one to four random edits: delete, replace, add a key, retype."""
    name = draw(st.sampled_from(sorted(DOCS)))
    doc = copy.deepcopy(DOCS[name])
    for _ in range(draw(st.integers(1, 4))):
        paths = [p for p in _paths(doc) if p]
        if not paths:
            break
        path = draw(st.sampled_from(paths))
        parent = _get(doc, path[:-1])
        last = path[-1]
        op = draw(st.sampled_from(["delete", "replace", "add", "wrap", "scale", "retype"]))
        if op == "delete":
            del parent[last]
        elif op == "replace":
            parent[last] = draw(values)
        elif op == "add" and isinstance(parent, dict):
            parent[draw(keys)] = draw(values)
        elif op == "wrap":
            parent[last] = [parent[last]]
        elif op == "scale" and isinstance(parent[last], (int, float)) and not isinstance(parent[last], bool):
            parent[last] = parent[last] * draw(st.sampled_from([-1, 0, 1e-300, 1e300, 2**62, 0.5]))
        elif op == "retype":
            v = parent[last]
            parent[last] = str(v) if not isinstance(v, str) else (float(len(v)) if v else None)
            if parent[last] is None:
                del parent[last]
    return doc, EXAMPLES[name].parent  # relative paths (reference files) resolve as in the example


def _budget(n):
    return settings(max_examples=n, deadline=None, database=None, derandomize=False,
                    suppress_health_check=[HealthCheck.too_slow, HealthCheck.filter_too_much,
                                           HealthCheck.data_too_large])


def _record(record_property, start):
    tried = COUNT["n"] - start
    record_property("fuzz_examples", tried)
    print(f"fuzz: {tried} inputs tried, every one answered with a Case or CaseError")
    return tried


@pytest.fixture(scope="module")
def case_dir(tmp_path_factory):
    """A folder with the base case and its geometry, so text fuzzing of files can succeed too."""
    d = tmp_path_factory.mktemp("fuzz")
    shutil.copy(CORPUS / "cube.step", d / "cube.step")
    shutil.copy(CORPUS / "base.toml", d / "base.toml")
    return d


def test_examples_are_valid():
    """The mutation seeds are valid: mutations, not the seeds, produce the errors."""
    for name, doc in DOCS.items():
        assert isinstance(parse_case(doc, base=EXAMPLES[name].parent), Case)


def _random_documents(n):
    @_budget(n)
    @given(documents)
    def run(doc):
        _check(doc)
    return run


def _mutations(n):
    @_budget(n)
    @given(mutated())
    def run(doc_base):
        _check(*doc_base)
    return run


def _text_edits(n, folder):
    base = (folder / "base.toml").read_text(encoding="utf-8")

    @_budget(n)
    @given(st.data())
    def run(data):
        kind = data.draw(st.sampled_from(["edit", "text", "bytes"]))
        if kind == "edit":  # a few characters of a valid file deleted, inserted or replaced
            text = base
            for _ in range(data.draw(st.integers(1, 3))):
                i = data.draw(st.integers(0, len(text)))
                j = min(len(text), i + data.draw(st.integers(0, 6)))
                text = text[:i] + data.draw(st.text(max_size=4, alphabet=st.characters(codec="utf-8"))) + text[j:]
            raw = text.encode("utf-8", "replace")
        elif kind == "text":
            raw = data.draw(st.text(max_size=200)).encode("utf-8", "replace")
        else:
            raw = data.draw(st.binary(max_size=200))
        p = folder / "fuzzed.toml"
        p.write_bytes(raw)
        COUNT["n"] += 1
        try:
            out = load_case(p)
        except CaseError:
            return
        assert isinstance(out, Case)
    return run


def test_fuzz_random_documents(record_property):
    start = COUNT["n"]
    _random_documents(120)()
    assert _record(record_property, start) >= 100


def test_fuzz_mutated_examples(record_property):
    start = COUNT["n"]
    _mutations(300)()
    assert _record(record_property, start) >= 100


def test_fuzz_case_file_text(record_property, case_dir):
    start = COUNT["n"]
    _text_edits(200, case_dir)()
    assert _record(record_property, start) >= 100


@pytest.mark.slow
def test_fuzz_many(record_property, case_dir):
    """The same properties with many more inputs (CI runs it; two to three minutes on 2 shared cores)."""
    start = COUNT["n"]
    _random_documents(1500)()
    _mutations(2500)()
    _text_edits(1000, case_dir)()
    assert _record(record_property, start) >= 4000


def test_huge_integer_in_code_built_document():
    """parse_case takes documents built in code too: Python integers beyond TOML's 64 bits."""
    doc = copy.deepcopy(DOCS["base"])
    doc["material"]["E"] = 10 ** 400
    with pytest.raises(CaseError, match="too large"):
        parse_case(doc, base=CORPUS)
    assert math.isfinite(parse_case(DOCS["base"], base=CORPUS).material.E)


# ----------------------------------------------------------------------------- abuse classes
#: Numbers at and beyond the edges of floating point, and integers beyond 64 bits.
EDGE_NUMBERS = [1e308, -1e308, 1.7976931348623157e308, 1e-320, 5e-324, -5e-324, 0.0, -0.0, 1e-300, 1e300,
                float("inf"), float("-inf"), float("nan"), 2**63, -(2**63), 10**400, -(10**400), 2**1024]
#: Text a terminal would act on, and other characters names should never carry raw.
CONTROL_TEXT = ["\x1b[2J", "\x1b]0;owned\x07", "\u202eevil", "\r", "\n", "\x00", "\x7f", "\x9b31m", "\t"]


def _message_ok(err: CaseError) -> None:
    """Each message is bounded in length and never carries a control character raw (several
    mistakes of one case file come one message per line)."""
    for e in getattr(err, "errors", None) or [err]:
        msg = str(e)
        assert len(msg) <= MAX_MESSAGE, len(msg)
        assert not any(c in msg for c in "\x00\x1b\x07\r\n\x7f\x9b\u202e"), repr(msg[:200])


MAX_MESSAGE = 2000


def _check_bounded(doc, base=CORPUS) -> None:
    COUNT["n"] += 1
    try:
        out = parse_case(doc, base=base)
    except CaseError as err:
        _message_ok(err)
        return
    assert isinstance(out, Case)


@st.composite
def edge_mutated(draw):
    """A valid example with numbers replaced by edge values, names by long or control-laden text,
    and containers wrapped many levels deep."""
    name = draw(st.sampled_from(sorted(DOCS)))
    doc = copy.deepcopy(DOCS[name])
    paths = [p for p in _paths(doc) if p]  # of the example: edits below may make the tree huge
    for _ in range(draw(st.integers(1, 3))):
        path = draw(st.sampled_from(paths))
        try:
            parent, last = _get(doc, path[:-1]), path[-1]
            v = parent[last]
        except (KeyError, IndexError, TypeError):  # an earlier edit replaced a container on the way
            continue
        op = draw(st.sampled_from(["number", "text", "deep", "long-list"]))
        if op == "number" and isinstance(v, (int, float)) and not isinstance(v, bool):
            parent[last] = draw(st.sampled_from(EDGE_NUMBERS))
        elif op == "text" and isinstance(v, str):
            parent[last] = draw(st.sampled_from(["x" * 300, "é" * 200, ""])) + draw(st.sampled_from(CONTROL_TEXT))
        elif op == "deep":
            for _ in range(draw(st.integers(30, 3000))):
                v = [v]
            parent[last] = v
        elif op == "long-list":
            parent[last] = list(range(draw(st.integers(100, 200000))))
    return doc, EXAMPLES[name].parent


def _edge_mutations(n):
    @_budget(n)
    @given(edge_mutated())
    def run(doc_base):
        _check_bounded(*doc_base)
    return run


def _abusive_texts(n, folder):
    base = (folder / "base.toml").read_text(encoding="utf-8")

    @_budget(n)
    @given(st.data())
    def run(data):
        kind = data.draw(st.sampled_from(["nest", "digits", "bom", "control", "long-key"]))
        if kind == "nest":
            k = data.draw(st.integers(1, 6000))
            o, c = data.draw(st.sampled_from([("[", "]"), ("{ a = ", " }")]))
            text = base + "\nextra = " + o * k + "1" + c * k + "\n"
        elif kind == "digits":
            text = base.replace("E = 200000.0", "E = " + "9" * data.draw(st.integers(1, 6000)))
        elif kind == "bom":
            text = "\ufeff" * data.draw(st.integers(1, 2)) + base
        elif kind == "control":
            text = base.replace("corpus base: unit cube", data.draw(st.sampled_from(CONTROL_TEXT)).encode(
                "unicode_escape").decode("ascii").replace("\\x", "\\u00"))
        else:
            text = base + "\n" + "k" * data.draw(st.integers(100, 100000)) + " = 1\n"
        p = folder / "abused.toml"
        p.write_text(text, encoding="utf-8")
        COUNT["n"] += 1
        try:
            out = load_case(p)
        except CaseError as err:
            _message_ok(err)
            return
        assert isinstance(out, Case)
    return run


def _error_values(n):
    """CaseError itself with any value: deep, huge, long or control-laden; bounded messages."""
    values_ = st.recursive(st.one_of(scalars, st.sampled_from(EDGE_NUMBERS), st.sampled_from(CONTROL_TEXT),
                                     st.text(min_size=200, max_size=2000)),
                           lambda inner: st.one_of(st.lists(inner, max_size=40),
                                                   st.dictionaries(keys, inner, max_size=8)),
                           max_leaves=60)

    @_budget(n)
    @given(values_, st.text(max_size=400), st.text(max_size=3000))
    def run(value, key, expected):
        COUNT["n"] += 1
        _message_ok(CaseError(key, value, expected))
    return run


def special_files(folder: Path) -> list[Path]:
    """Case-file paths that are not regular files of a readable size."""
    out = []
    fifo = folder / "pipe.toml"
    if not fifo.exists():
        os.mkfifo(fifo)
    out.append(fifo)
    for name, target in (("zero.toml", "/dev/zero"), ("null.toml", "/dev/null"), ("loop.toml", "loop.toml"),
                         ("dangling.toml", "nowhere.toml"), ("dir-link.toml", ".")):
        p = folder / name
        if not os.path.lexists(p):
            os.symlink(target, p)
        out.append(p)
    sparse = folder / "sparse.toml"
    with open(sparse, "wb") as fh:
        fh.truncate(50 * 10**6)
    out += [sparse, folder, folder / ("n" * 300 + ".toml"), folder / ("d" * 200) / ("e" * 200) / "case.toml"]
    return out


def test_fuzz_edge_values_names_and_depth(record_property):
    start = COUNT["n"]
    _edge_mutations(150)()
    _error_values(150)()
    assert _record(record_property, start) >= 250


def test_fuzz_abusive_case_files(record_property, case_dir):
    start = COUNT["n"]
    _abusive_texts(60, case_dir)()
    for p in special_files(case_dir):  # never opened as a stream: refused on its kind or size
        COUNT["n"] += 1
        with pytest.raises(CaseError) as e:
            load_case(p)
        _message_ok(e.value)
    assert _record(record_property, start) >= 60


@pytest.mark.slow
def test_fuzz_abuse_many(record_property, case_dir):
    start = COUNT["n"]
    _edge_mutations(1500)()
    _error_values(1500)()
    _abusive_texts(600, case_dir)()
    assert _record(record_property, start) >= 3000
