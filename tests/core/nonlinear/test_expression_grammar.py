"""Grammar and canonical text: precedence, associativity, accepted spellings.

Oracle for the precedence checks: the usual mathematical convention (common practice):
powers bind tighter than unary minus and are right-associative (-x^2 = -(x^2),
2^3^2 = 2^9), a negative exponent belongs to the power (x^-1 = 1/x), and * / and + -
are left-associative (a/b/c = (a/b)/c). Values are compared with numpy float64
arithmetic written out by hand in that reading.
"""

from __future__ import annotations

import dataclasses
import pickle
import re

import numpy as np
import pytest

from service.core.nonlinear.expression import compile_model
from service.core.nonlinear.expression.nodes import (
    RESERVED_NAMES,
    Binary,
    Negate,
    Number,
    Parameter,
    Variable,
)

X = np.array([-3.0, -0.5, 2.0, 4.0])


@pytest.mark.parametrize(("text", "names", "theta", "by_hand"), [
    ("-x^2*b1", ["b1"], [1.0], lambda x, b1: -(x ** 2) * b1),
    ("-x**2*b1", ["b1"], [1.0], lambda x, b1: -(x ** 2) * b1),
    ("2^3^2*b1 + x", ["b1"], [1.0], lambda x, b1: 512.0 * b1 + x),
    ("b1*x^2", ["b1"], [1.5], lambda x, b1: b1 * x * x),
    ("x^-1*b1", ["b1"], [3.0], lambda x, b1: b1 / x),
    ("x^-b1", ["b1"], [2.0], lambda x, b1: 1.0 / (x * x)),
    ("b1/b2/x", ["b1", "b2"], [12.0, 2.0], lambda x, b1, b2: (b1 / b2) / x),
    ("b1 - x - 1", ["b1"], [5.0], lambda x, b1: (b1 - x) - 1.0),
    ("-b1^2 + x", ["b1"], [3.0], lambda x, b1: -9.0 + x),
    ("(-b1)^2 + x", ["b1"], [3.0], lambda x, b1: 9.0 + x),
    ("b1*abs(x)^0.5^2", ["b1"], [1.0], lambda x, b1: b1 * np.abs(x) ** 0.25),
])
def test_precedence_and_associativity(text, names, theta, by_hand):
    model = compile_model(text, names)
    np.testing.assert_allclose(model.values(X, theta), by_hand(X, *theta), rtol=1e-15)


def test_precedence_trees():
    # the parse trees themselves, for the four cases the grammar must get right
    b1 = Parameter("b1", 0)
    assert compile_model("-x^2 + b1", ["b1"]).tree.left == Negate(
        Binary("^", Variable(), Number(2.0)))
    assert compile_model("2^3^2*b1", ["b1"]).tree.left == Binary(
        "^", Number(2.0), Binary("^", Number(3.0), Number(2.0)))
    assert compile_model("x^-1*b1", ["b1"]).tree.left == Binary(
        "^", Variable(), Negate(Number(1.0)))
    assert compile_model("b1/x/2", ["b1"]).tree == Binary(
        "/", Binary("/", b1, Variable()), Number(2.0))


@pytest.mark.parametrize(("text", "canonical"), [
    ("d+(a-d)/(1+(x/c)^b)", "d + (a - d)/(1 + (x/c)^b)"),
    ("x**-1*a", "x^(-1)*a"),
    ("--a*x", "-(-a)*x"),
    ("+a*x", "a*x"),
    ("a*(x*x)", "a*(x*x)"),
    ("(a*x)*x", "a*x*x"),
    ("a-(x-1)", "a - (x - 1)"),
    ("a-(x+1)", "a - (x + 1)"),
    ("(a-x)+1", "a - x + 1"),
    ("a - -x", "a - (-x)"),
    ("a*-x", "a*(-x)"),
    ("(-a)^2*x", "(-a)^2*x"),
    ("(a^2)^x", "(a^2)^x"),
    ("a^(2^x)", "a^2^x"),
    ("-(a^2)*x", "-a^2*x"),
    ("(-a)*x", "-a*x"),
    ("-(a*x)", "-(a*x)"),
    ("exp( - a * x )", "exp(-a*x)"),
    ("a\n + x", "a + x"),
    ("a\t*\tpi*x", "a*pi*x"),
    ("1.0*a + 2.50*x + 1e-3 + 1E5 + 0.1 + .5", "1*a + 2.5*x + 0.001 + 100000 + 0.1 + 0.5"),
    ("a*1e16 + a*12345678901234567890 + 1_000*x", "a*1e+16 + a*1.2345678901234567e+19 + 1000*x"),
    ("a*((((x))))", "a*x"),
    ("log10(abs(a*x)) + arctan(tan(sin(cos(sqrt(x)))))",
     "log10(abs(a*x)) + arctan(tan(sin(cos(sqrt(x)))))"),
])
def test_canonical_text(text, canonical):
    names = sorted(set(re.findall(r"(?<![\w.])[A-Za-z_]\w*", text)) - RESERVED_NAMES)
    model = compile_model(text, names)
    assert model.text == canonical
    again = compile_model(canonical, names)
    assert again.text == canonical and again.tree == model.tree


def test_caret_and_double_star_are_the_same_power():
    assert compile_model("a*x^2", ["a"]) == compile_model("a*x**2", ["a"])


def test_model_is_frozen_and_compares_by_content():
    model = compile_model("b1 * exp(-b2*x)", ["b1", "b2"])
    with pytest.raises(dataclasses.FrozenInstanceError):
        model.text = "b1"
    assert model == compile_model("b1*exp(-b2*x)", ("b1", "b2"))
    assert model != compile_model("b1*exp(-b2*x)", ("b2", "b1"))  # other column order
    assert hash(model.tree) == hash(compile_model("(b1)*exp((-b2)*x)", ["b1", "b2"]).tree)


def test_model_pickles_as_its_text():
    # multiprocessing and Dask move models between processes; the copy must be the same model
    model = compile_model("b1*exp(-b2*x)", ["b1", "b2"])
    copy = pickle.loads(pickle.dumps(model))
    assert copy == model
    x = np.array([0.5, 2.0])
    assert copy.jacobian(x, [2.0, 0.3]).tobytes() == model.jacobian(x, [2.0, 0.3]).tobytes()
