"""The bracketed root finder (assurance._roots.brent_root) against scipy.optimize.brentq,
the reference implementation of the same method (Brent 1973), on smooth, flat, steep,
kinked and step-like functions: both must return a point within the stated tolerance of a
true root, and where the root is unique the two agree to that tolerance."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import optimize, special

from assurance._roots import brent_root

CASES = [
    # f, a, b, the root where it is known in closed form
    (lambda x: x * x - 2.0, 0.0, 2.0, math.sqrt(2.0)),
    (lambda x: math.cos(x) - x, 0.0, 1.0, None),
    (lambda x: math.exp(x) - 1e6, 0.0, 20.0, math.log(1e6)),
    (lambda x: (x - 0.3) ** 3, -1.0, 2.0, 0.3),            # flat at the root
    (lambda x: math.atan(1e6 * (x - 0.7)), 0.0, 1.0, 0.7),   # very steep
    (lambda x: abs(x - 0.2) - 0.1, 0.15, 1.0, 0.3),           # kinked
    (lambda x: special.ndtr(x) - 0.975, -10.0, 10.0, 1.959963984540054),
    (lambda x: x - 1e-9, -1.0, 1.0, 1e-9),
    (lambda x: 1e-300 * (x - 5.0), 0.0, 10.0, 5.0),          # tiny values
]


@pytest.mark.parametrize("f, a, b, root", CASES)
def test_agrees_with_scipy_brentq(f, a, b, root):
    xtol, rtol = 1e-13, 1e-14
    ours = brent_root(f, a, b, xtol=xtol, rtol=rtol)
    ref = optimize.brentq(f, a, b, xtol=xtol, rtol=rtol, maxiter=200)
    tol = 2 * (xtol + rtol * abs(ref))  # each is within its bracket of half that width
    assert ours == pytest.approx(ref, abs=tol)
    if root is not None:
        assert ours == pytest.approx(root, abs=tol + 1e-15 * abs(root))
    # reversed ends give the same kind of answer
    assert brent_root(f, b, a, xtol=xtol, rtol=rtol) == pytest.approx(ref, abs=tol)


def test_step_function_returns_the_jump():
    # no root, but a sign change: like brentq, the bracket closes on the jump
    f = lambda x: -1.0 if x < 0.4 else 1.0  # noqa: E731
    assert brent_root(f, 0.0, 1.0, xtol=1e-12) == pytest.approx(0.4, abs=1e-12)


def test_exact_zero_at_an_end_and_errors():
    assert brent_root(lambda x: x - 1.0, 1.0, 3.0) == 1.0
    assert brent_root(lambda x: x - 3.0, 1.0, 3.0) == 3.0
    with pytest.raises(ValueError, match="same sign"):
        brent_root(lambda x: x * x + 1.0, -1.0, 1.0)
    with pytest.raises(ValueError, match="not finite"):
        brent_root(lambda x: math.nan, -1.0, 1.0)
    with pytest.raises(RuntimeError, match="within 5 steps"):
        brent_root(lambda x: (x - 0.3) ** 3, -1.0, 2.0, xtol=1e-15, maxiter=5)


@settings(max_examples=200, deadline=None)
@given(r=st.floats(-50, 50), k=st.floats(0.01, 100), p=st.integers(1, 5),
       lo=st.floats(0.01, 30), hi=st.floats(0.01, 30))
def test_odd_powers_are_solved_to_the_tolerance(r, k, p, lo, hi):
    # f(x) = k (x - r)^(2p - 1): one root r inside [r - lo, r + hi], flat when p > 1
    def f(x):
        return k * (x - r) ** (2 * p - 1)

    xtol = 1e-10
    got = brent_root(f, r - lo, r + hi, xtol=xtol, rtol=1e-14)
    assert abs(got - r) <= xtol + 1e-14 * abs(r) + 4 * np.spacing(max(abs(r), 1.0))
