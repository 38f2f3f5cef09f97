"""Every literal check value and tolerance in a test says where it comes from.

A float written into a check (an ``assert``, ``pytest.approx``, ``math.isclose``, numpy's
``allclose`` / ``assert_allclose`` ...), a float in a table whose name says it holds expected
values, and a float in a ``parametrize`` whose argument names say "expected", must have a comment
or docstring nearby that names its source in one of the words below. A tolerance passed by name
(``rel=``, ``abs=``, ``rtol=``, ``atol=``, ``rel_tol=``, ``abs_tol=``) must say why it has its size
instead (the words of TOLERANCE). Integers are not looked at: most are counts, so a whole-number
check value gets its source by hand.

"Nearby" is the statement itself, the few lines just above it inside the same test function
(decorators included), and the docstring of the test function that holds it. A comment elsewhere in
the file does not count, so a single note at the top of a file cannot cover all its numbers.
"""
from __future__ import annotations

import ast
import io
import re
import tokenize
from dataclasses import dataclass
from pathlib import Path

import pytest

TESTS = Path(__file__).resolve().parent

# Words that name a source. "check value" needs a colon and something after it, so a bare
# "check value" with no source does not pass.
SOURCE = re.compile(
    r"check value:\s*\S|source:\s*\S|from memory|mpmath|scipy|numpy|derivation|derived|closed form"
    r"|common practice|regression guard|by hand|hand computation|METHOD\.md|NIST|published"
    r"|worked example|exact arithmetic|identity|written out|property:|definition",
    re.IGNORECASE,
)
# Words that say why a tolerance has its size.
TOLERANCE = re.compile(
    r"tolerance|digit|rounding|round-off|ulp|double|precision|standard error|\bse\b"
    r"|monte carlo|quoted|printed|decimal|truncat|step|bisection|iteration|converge|float"
    r"|common practice|machine|epsilon|exact",
    re.IGNORECASE,
)
CHECK_CALLS = {"approx", "isclose", "allclose", "assert_allclose", "assert_almost_equal",
               "assert_array_almost_equal", "assert_array_equal", "assert_equal"}
TOLERANCE_NAMES = {"rel", "abs", "rtol", "atol", "rel_tol", "abs_tol"}
EXPECTED_NAME = re.compile(r"expect|reference|check_value|published|tabled", re.IGNORECASE)
LINES_ABOVE = 8  # how far above a statement its note may sit (inside the same function)
TRIVIAL = {0.0, 1.0, -1.0}  # 0 and 1 are facts of probability, not figures that need a source


@dataclass(frozen=True)
class Unsourced:
    path: str
    line: int
    kind: str  # "value" or "tolerance"

    def __str__(self):
        what = "a tolerance that does not say why it has its size" if self.kind == "tolerance" else "a check value with no source"
        return f"{self.path}:{self.line}: {what}"


def _float_literals(node):
    """Float literals of ``node`` that are compared, not handed to the code under test.

    An argument of an ordinary call (``TAIL_PROB(1e5, 2.0, 1.0)``), a subscript and a lambda body
    are inputs, so the walk does not enter them; a check call (``approx`` ...) inside an assert is
    looked at on its own, where its compared values and its tolerances are told apart.
    """
    if isinstance(node, ast.Constant):
        if type(node.value) is float and node.value not in TRIVIAL:
            yield node
        return
    if isinstance(node, ast.Call):
        return  # an input, or a check call, which is looked at on its own (its tolerances apart)
    if isinstance(node, (ast.Subscript, ast.Lambda)):
        return
    for child in ast.iter_child_nodes(node):
        yield from _float_literals(child)


def _call_name(call):
    return call.func.attr if isinstance(call.func, ast.Attribute) else getattr(call.func, "id", "")


def _notes(source):
    """line number -> comment text on that line."""
    notes = {}
    for token in tokenize.generate_tokens(io.StringIO(source).readline):
        if token.type == tokenize.COMMENT:
            notes[token.start[0]] = notes.get(token.start[0], "") + token.string
    return notes


def _functions(tree):
    for node in ast.walk(tree):
        if isinstance(node, (ast.FunctionDef, ast.AsyncFunctionDef)):
            start = min([node.lineno] + [d.lineno for d in node.decorator_list])
            yield start, node.end_lineno, ast.get_docstring(node) or ""


def _checked(tree):
    """(statement holding the literal, literal, kind) for every literal the rule covers."""
    for node in ast.walk(tree):
        if isinstance(node, ast.Assert):
            for literal in _float_literals(node.test):
                yield node, literal, "value"
        elif isinstance(node, ast.Call) and _call_name(node) in CHECK_CALLS:
            for argument in node.args:
                for literal in _float_literals(argument):
                    yield node, literal, "value"
            for keyword in node.keywords:
                kind = "tolerance" if keyword.arg in TOLERANCE_NAMES else "value"
                for literal in _float_literals(keyword.value):
                    yield node, literal, kind
            if _call_name(node) in ("allclose", "isclose"):  # numpy's: the tolerance may come third or fourth
                for argument in node.args[2:]:
                    for literal in _float_literals(argument):
                        yield node, literal, "tolerance"
        elif isinstance(node, (ast.Assign, ast.AnnAssign)):
            targets = node.targets if isinstance(node, ast.Assign) else [node.target]
            names = [t.id for t in targets if isinstance(t, ast.Name)]
            if any(EXPECTED_NAME.search(name) for name in names) and node.value is not None:
                for literal in _float_literals(node.value):
                    yield literal, literal, "value"
        if isinstance(node, (ast.FunctionDef, ast.AsyncFunctionDef)):
            for decorator in node.decorator_list:
                if isinstance(decorator, ast.Call) and _call_name(decorator) == "parametrize" and decorator.args:
                    names = decorator.args[0]
                    if isinstance(names, ast.Constant) and isinstance(names.value, str):
                        argnames = [name.strip() for name in names.value.split(",")]
                        wanted = [i for i, name in enumerate(argnames) if EXPECTED_NAME.search(name)]
                        for literal in _parameter_literals(decorator.args[1:2], wanted, len(argnames)):
                            yield literal, literal, "value"


def _parameter_literals(values, wanted, width):
    """Float literals at the positions ``wanted`` of each parameter set (the expected values, not the inputs)."""
    if not wanted:
        return
    for table in values:
        if not isinstance(table, (ast.List, ast.Tuple)):
            yield from _float_literals(table)  # a table built elsewhere: every float in it
            continue
        for row in table.elts:
            if width > 1 and isinstance(row, (ast.Tuple, ast.List)) and len(row.elts) == width:
                for i in wanted:
                    yield from _float_literals(row.elts[i])
            else:
                yield from _float_literals(row)


def unsourced(source, path="<test>"):
    """Every literal in ``source`` (a test module's text) whose source is not written beside it."""
    tree = ast.parse(source)
    notes = _notes(source)
    functions = list(_functions(tree))
    found = set()
    for holder, literal, kind in _checked(tree):
        line = literal.lineno
        top = holder.lineno
        start, docstring = max(1, top - LINES_ABOVE), ""
        enclosing = [f for f in functions if f[0] <= top <= f[1]]
        if enclosing:
            fstart, _, docstring = max(enclosing, key=lambda f: f[0])
            start = max(start, fstart)
        end = max(getattr(holder, "end_lineno", line) or line, line)
        text = " ".join(notes.get(n, "") for n in range(start, end + 1)) + " " + docstring
        if not (TOLERANCE if kind == "tolerance" else SOURCE).search(text):
            found.add(Unsourced(path, line, kind))
    return sorted(found, key=lambda u: (u.path, u.line, u.kind))


def test_every_test_file_names_the_source_of_its_numbers():
    problems = []
    for path in sorted(TESTS.glob("test_*.py")):
        problems += unsourced(path.read_text(encoding="utf-8"), path.name)
    hint = ("\nWrite the source within a few lines above each (# check value: ..., # from memory, # derivation: ...,"
            " # property: ..., # regression guard: ...), and for a tolerance why it has its size (# tolerance ...).")
    assert not problems, "\n".join(map(str, problems)) + hint


# The rule's own checks: the cases it must refuse and the cases it must let through.

BARE = '''
def test_x():
    assert f(2.0) == pytest.approx(0.1353352832, rel=1e-9)
'''
SOURCED = '''
def test_x():
    # check value: e^-2 from mpmath at 30 digits; tolerance: 10 printed digits
    assert f(2.0) == pytest.approx(0.1353352832, rel=1e-9)
'''
EMPTY_CLAIM = '''
def test_x():
    # check value
    assert f(2.0) == pytest.approx(0.1353352832)
'''
SOURCE_IN_ANOTHER_TEST = '''
def test_y():
    # check value: mpmath at 30 digits
    pass


def test_x():
    assert f(2.0) == pytest.approx(0.1353352832)
'''
TOLERANCE_WITHOUT_REASON = '''
def test_x():
    # check value: mpmath.gammainc
    assert f(2.0) == pytest.approx(g(2.0), rel=1e-3)
'''
DOCSTRING_GUARD = '''
def test_x():
    """Regression guard: the package's own output when this test was written."""
    assert f(2.0) == 0.25
'''
EXPECTED_TABLE = '''
EXPECTED = {2.0: 0.1353352832}


def test_x():
    # check value: see EXPECTED
    for t, p in EXPECTED.items():
        assert f(t) == pytest.approx(p)
'''
EXPECTED_PARAMETERS = '''
@pytest.mark.parametrize("t,expected", [(2.0, 0.1353352832)])
def test_x(t, expected):
    assert f(t) == pytest.approx(expected)
'''
INPUT_PARAMETERS = '''
@pytest.mark.parametrize("cell,expected", [(-5.0, "row 3 holds -5")])
def test_x(cell, expected):
    assert f(cell) == expected
'''
FAR_ABOVE = '''
def test_x():
    # check value: mpmath at 30 digits
''' + "    a = 1\n" * (LINES_ABOVE + 1) + '''    assert f(2.0) == 0.1353352832
'''
TRIVIAL_ONLY = '''
def test_x():
    assert p(0.0) == 1.0 and p(-1.0) == 0.0
'''
INTEGERS_ONLY = '''
def test_x():
    assert len(rows) == 3
'''
INPUTS_ONLY = '''
def test_x():
    assert STOP_DECISION(rows, 500.0, 1.5, 0.95) == "STOP" and table[0.05] == 4
'''
COMPARED_BESIDE_AN_INPUT = '''
def test_x():
    assert TAIL_PROB(2.0, 1.0, 1.0) < 0.1353352833
'''


@pytest.mark.parametrize("source,expected_kinds", [
    (BARE, ["value", "tolerance"]),
    (EMPTY_CLAIM, ["value"]),
    (SOURCE_IN_ANOTHER_TEST, ["value"]),
    (TOLERANCE_WITHOUT_REASON, ["tolerance"]),
    (EXPECTED_TABLE, ["value"]),
    (EXPECTED_PARAMETERS, ["value"]),
    (FAR_ABOVE, ["value"]),
    (COMPARED_BESIDE_AN_INPUT, ["value"]),
], ids=["bare", "empty-claim", "other-test", "tolerance", "table", "parameters", "far-above", "beside-input"])
def test_the_rule_refuses_numbers_without_a_source(source, expected_kinds):
    # property: each snippet holds exactly these unsourced literals (kinds listed per line)
    assert sorted(u.kind for u in unsourced(source)) == sorted(expected_kinds)


@pytest.mark.parametrize("source", [SOURCED, DOCSTRING_GUARD, TRIVIAL_ONLY, INTEGERS_ONLY, INPUTS_ONLY, INPUT_PARAMETERS],
                         ids=["sourced", "guard-docstring", "zero-and-one", "integers", "inputs", "input-parameters"])
def test_the_rule_lets_sourced_numbers_through(source):
    assert unsourced(source) == []


def test_the_rule_names_the_line():
    # property: the literal 0.1353352832 sits on line 3 of BARE (line 1 is empty)
    assert {u.line for u in unsourced(BARE, "t.py")} == {3}
    assert str(unsourced(BARE, "t.py")[0]).startswith("t.py:3:")
