"""A bracketed scalar root finder, so the closed-form paths need not import scipy.optimize.

Importing ``scipy.optimize`` takes 0.3-0.4 s (it loads, among others, ``scipy.spatial`` and
the linear-programming code), a tenth of a closed-form ``assurance plan``, which needs only
a one-dimensional root now and then. :func:`brent_root` is Brent's method (inverse quadratic
interpolation and secant steps, falling back to bisection), with the stopping rule of
``scipy.optimize.brentq``.

References
----------
Brent, R. P. (1973). Algorithms for Minimization without Derivatives, chapter 4.
Prentice-Hall.
"""

from __future__ import annotations

import math
from collections.abc import Callable

__all__ = ["brent_root"]


def brent_root(f: Callable[[float], float], a: float, b: float, *, xtol: float = 2e-12,
               rtol: float = 4 * 2.220446049250313e-16, maxiter: int = 200) -> float:
    """A root of ``f`` in ``[a, b]``, where ``f(a)`` and ``f(b)`` differ in sign.

    Stops when the bracket around the root is narrower than ``xtol + rtol |x|`` (as
    ``scipy.optimize.brentq``), or at an exact zero.

    Parameters
    ----------
    f
        A continuous function of one float, returning a float.
    a, b
        The ends of the bracket (either order).
    xtol, rtol
        Absolute and relative tolerance on the root.
    maxiter
        Most evaluations of ``f`` after the two ends.

    Returns
    -------
    float

    Raises
    ------
    ValueError
        When ``f(a)`` and ``f(b)`` have the same sign (no bracket), or are not finite.
    RuntimeError
        When ``maxiter`` evaluations do not reach the tolerance.

    Examples
    --------
    >>> round(brent_root(lambda x: x * x - 2.0, 0.0, 2.0), 12)
    1.414213562373
    """
    a, b = float(a), float(b)
    fa, fb = float(f(a)), float(f(b))
    if not (math.isfinite(fa) and math.isfinite(fb)):
        raise ValueError(f"brent_root: f is not finite at an end: f({a!r}) = {fa!r}, "
                         f"f({b!r}) = {fb!r}.")
    if fa == 0.0:
        return a
    if fb == 0.0:
        return b
    if (fa > 0.0) == (fb > 0.0):
        raise ValueError(f"brent_root: f({a!r}) = {fa!r} and f({b!r}) = {fb!r} have the same "
                         "sign; no root is bracketed.")
    c, fc = a, fa          # c: the other end of the bracket [b, c]
    d = e = b - a          # the last step and the one before it
    for _ in range(maxiter):
        if (fb > 0.0) == (fc > 0.0):  # the root left [b, c]: the bracket is [a, b] again
            c, fc = a, fa
            d = e = b - a
        if abs(fc) < abs(fb):  # b is the best guess so far
            a, b, c = b, c, b
            fa, fb, fc = fb, fc, fb
        tol = 0.5 * (xtol + rtol * abs(b))
        half = 0.5 * (c - b)
        if abs(half) <= tol or fb == 0.0:
            return b
        if abs(e) >= tol and abs(fa) > abs(fb):  # try interpolation
            s = fb / fa
            if a == c:  # secant
                p, q = 2.0 * half * s, 1.0 - s
            else:       # inverse quadratic
                q, r = fa / fc, fb / fc
                p = s * (2.0 * half * q * (q - r) - (b - a) * (r - 1.0))
                q = (q - 1.0) * (r - 1.0) * (s - 1.0)
            if p > 0.0:
                q = -q
            p = abs(p)
            if 2.0 * p < min(3.0 * half * q - abs(tol * q), abs(e * q)):
                e, d = d, p / q   # accept the interpolation
            else:
                d = e = half      # bisect
        else:
            d = e = half
        a, fa = b, fb
        b += d if abs(d) > tol else math.copysign(tol, half)
        fb = float(f(b))
        if not math.isfinite(fb):
            raise ValueError(f"brent_root: f is not finite at {b!r} inside the bracket.")
    raise RuntimeError(f"brent_root: no root to the tolerance within {maxiter} steps.")
