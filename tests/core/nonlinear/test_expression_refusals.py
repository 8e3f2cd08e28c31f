"""Hostile or malformed expressions are refused with ExpressionError, a column and a fix.

Oracle: the grammar and limits stated in service/core/nonlinear/expression (module
docstrings of scan.py and parser.py); expected columns are counted by hand in the
literal texts below (1-based). Every input here is refused before anything is run; the
parser is fed at most MAX_LENGTH characters with brackets nested at most MAX_NESTING deep.
"""

from __future__ import annotations

import pickle
import re
import warnings

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from service.core.errors import SpecError
from service.core.nonlinear.expression import (
    MAX_LENGTH,
    ExpressionError,
    compile_model,
)

NAMES = ("b1", "b2")

HOSTILE = [
    # (text, expected column or None when any column will do, words the message must hold);
    # each uses both declared names unless the test is about names
    ("__import__('os')", 12, "quoted text"),
    ("__import__(os)", 1, "unknown function"),
    ("x.real", 1, "attribute"),
    ("(lambda: 1)()", 1, "only the functions"),
    ("[b for b in x]", 1, "comprehension"),
    ("open('f')", 6, "quoted text"),
    ("open(f)*b1*b2", 1, "unknown function"),
    ("b1 if x else b2", 1, "if ... else"),
    ("x < b1", 3, "comparison"),
    ("b1 and x", 1, "'and'/'or'"),
    ("x[0]", 1, "indexing"),
    ("f'{x}'", 2, "quoted text"),
    ("'a'", 1, "quoted text"),
    ("1j*b1", 2, "complex"),
    ("True*b1", 1, "literal true"),
    ("b1**1e9*b2", 5, "exponent"),
    ("b1*9**9**9**9*b2", 10, "exponent"),  # 9^(9^(9^9)): exponent 9^9 starts at column 10
    ("9**9**9**9*b1*b2", 7, "exponent"),
    ("10**400 * b1*b2", 1, "not a finite number"),
    ("10^300^2*b1*b2", 4, "exponent"),
    ("1e400*b1*b2", 1, "larger than"),
    ("1" * 400 + "*b1*b2", 1, "larger than"),
    ("(" * 10000 + "b1" + ")" * 10000, MAX_LENGTH + 1, "characters long"),
    ("-" * 10000 + "b1", MAX_LENGTH + 1, "characters long"),
    ("b1+" * 3000 + "x", MAX_LENGTH + 1, "characters long"),
    ("(" * 65 + "b1" + ")" * 65, 65, "nested more than 64"),
    ("-" * 65 + "b1", 65, "signs in a row"),
    ("x+" * 400 + "b1", None, "nested more than 64 levels"),
    ("+".join(["(" + "+".join(["x"] * 30) + ")"] * 10) + "*b1*b2", None,
     "more than 500"),  # ~600 nodes, depth ~40
    ("b1\u00b7x", 3, "not plain ascii"),
    ("b1*x\u00b2", 5, "not plain ascii"),
    ("b1*\u0445", 4, "not plain ascii"),  # Cyrillic small letter ha
    ("", 1, "empty"),
    ("   \t ", 1, "empty"),
    ("gamma(x)*b1", 1, "unknown function 'gamma'"),
    ("b1*y", 4, "unknown name 'y' (declared parameters: b1, b2)"),
    ("b1*x + b3*b2", 8, "unknown name 'b3'"),
    ("b1*x", 1, "never uses the declared parameter(s) 'b2'"),
    ("exp(x=1)*b1*b2", 5, "keyword"),
    ("log(x, 2)*b1*b2", 8, "exactly one argument"),
    ("log()*b1*b2", 1, "exactly one argument"),
    ("log(*x)*b1*b2", 5, "unpacking"),
    ("x = 1", 3, "syntax error"),
    ("b1; b2", 3, "syntax error"),
    ("b1*x +", 7, "syntax error"),
    ("(b1*x", 1, "syntax error"),
    ("b1\x00*b2", 3, "control character"),
    ("b1 % x*b2", 4, "operator '%'"),
    ("b1 // (x)*b2", 4, "operator '//'"),
    ("b1 @ x*b2", 4, "operator '@'"),
    ("~b1*b2*x", 1, "operator '~'"),
    ("not b1", 1, "operator 'not'"),
    ("b1(x)*b2", 1, "'b1' is not a function"),
    ("exp*b1*b2", 1, "is not called"),
    ("(y := 1)*b1*b2", 2, "':='"),
    ("b1, b2", 1, "comma"),
    ("b'x'*b1*b2", 2, "quoted text"),
    ("2x*b1*b2", 2, "runs straight into a name"),
    ("1else*b1*b2", 2, "runs straight into a name"),
    ("0x1F*b1*b2", 2, "runs straight into a name"),
    ("None*b1*b2", 1, "literal none"),
    ("b1*log(0)*b2", 4, "not a finite number"),
    ("b1*(1/0)*b2", 5, "not a finite number"),
    ("b1*(10^300)^2*b2", 4, "not a finite number"),
    ("b1*sqrt(-1)*b2", 4, "not a finite number"),
    ("b1 # comment\n*b2*x", 4, "comments"),
]


@pytest.mark.parametrize(("text", "column", "words"), HOSTILE,
                         ids=[repr(t[:24]) for t, _, _ in HOSTILE])
def test_hostile_input_is_refused_with_its_column(text, column, words):
    with pytest.raises(ExpressionError) as info:
        compile_model(text, NAMES)
    error = info.value
    assert isinstance(error, SpecError) and error.code == "invalid_expression"
    assert error.field == "model.expression"
    assert error.fix
    assert re.search(r"columns? \d+", error.message)
    assert words.lower() in error.message.lower(), error.message
    if column is not None:
        assert error.column == column, error.message
        assert f"column {column}" in error.message or f"columns 1-{len(text)}" in error.message


@pytest.mark.parametrize(("text", "names"), [
    ("x^2", []),        # depends on no parameter
    ("2*x + 1", ()),
    ("pi", []),
])
def test_expression_without_parameters_is_refused(text, names):
    with pytest.raises(ExpressionError, match="depends on no parameter"):
        compile_model(text, names)


@pytest.mark.parametrize(("names", "field"), [
    (["x"], "model.parameters[0]"),
    (["b1", "pi"], "model.parameters[1]"),
    (["exp"], "model.parameters[0]"),
    (["b1", "b1"], "model.parameters[1]"),
    (["1b"], "model.parameters[0]"),
    (["b-1"], "model.parameters[0]"),
    (["lambda"], "model.parameters[0]"),
    (["\u03b2"], "model.parameters[0]"),
    ([3], "model.parameters[0]"),
    ("b1", "model.parameters"),
    (None, "model.parameters"),
])
def test_bad_parameter_lists_are_refused(names, field):
    with pytest.raises(ExpressionError) as info:
        compile_model("b1*x", names)
    assert info.value.field == field and info.value.fix


@pytest.mark.parametrize("text", [None, 12, b"b1*x", ["b1"]])
def test_non_text_is_refused(text):
    with pytest.raises(ExpressionError, match="must be text"):
        compile_model(text, ["b1"])


def test_error_survives_pickling():
    # multiprocessing and Dask move errors between processes (service/core/errors.py)
    with pytest.raises(ExpressionError) as info:
        compile_model("b1*x²", ["b1"])
    copy = pickle.loads(pickle.dumps(info.value))
    assert (copy.message, copy.field, copy.fix, copy.code, copy.column) == (
        info.value.message, info.value.field, info.value.fix, info.value.code, 5)


def test_limits_are_inclusive():
    # exactly at the limits is accepted: 2000 characters, 64 brackets, exponent 1000
    padded = "b1*x" + " " * (MAX_LENGTH - 4)
    assert compile_model(padded, ["b1"]).text == "b1*x"
    assert compile_model("(" * 64 + "b1*x" + ")" * 64, ["b1"]).text == "b1*x"
    assert compile_model("x^1000*b1", ["b1"]).text == "x^1000*b1"
    assert compile_model("1e300*b1", ["b1"]).text == "1e+300*b1"


_TOKENS = ["x", "b1", "b2", "pi", "exp", "log", "sqrt", "abs", "gamma", "(", ")", "[", "]",
           "+", "-", "*", "/", "^", "**", "%", ",", ".", "=", ":", "'", '"', "\\", "\\d", "1",
           "0", "2.5", "1e309", "1e-3", "j", "e", "x1", "lambda", "if", "else", "<", "__", " ",
           "\n", "#", "\u00b2"]


@settings(max_examples=300, derandomize=True, deadline=None)
@given(st.lists(st.sampled_from(_TOKENS), max_size=40))
def test_random_token_soup_compiles_or_is_refused_cleanly(tokens):
    # oracle: the contract of compile_model: a model or an ExpressionError, nothing else
    # and Python's parser must not even warn (escape sequences, "invalid decimal literal")
    text = "".join(tokens)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            model = compile_model(text, ["b1"])
        except ExpressionError as error:
            assert error.fix and re.search(r"columns? \d+", error.message)
            model = None
    assert not caught, [str(w.message) for w in caught]
    if model is not None:
        assert compile_model(model.text, ["b1"]).text == model.text
