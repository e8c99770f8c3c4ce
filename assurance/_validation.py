"""One small set of checks used at every public boundary.

Each check returns the cleaned value or raises :class:`~assurance.errors.AssuranceInputError`
with one message shape: ``The 'sigma' parameter of ContinuousEndpoint must be > 0. Got -1.``
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Sequence
from numbers import Integral, Real

import numpy as np

from .errors import AssuranceInputError

#: Largest total sample size any function accepts (keeps integer arithmetic exact).
MAX_TOTAL = 10**15
#: Most Monte Carlo draws any function accepts (memory grows with draws times sizes).
MAX_DRAWS = 2_000_000


def _fail(name: str, owner: str, allowed: str, value: object) -> AssuranceInputError:
    return AssuranceInputError(
        f"The '{name}' parameter of {owner} must be {allowed}. Got {value!r} instead."
    )


def check_real(
    value: object,
    name: str,
    owner: str,
    *,
    low: float | None = None,
    high: float | None = None,
    low_open: bool = False,
    high_open: bool = False,
) -> float:
    """Return ``value`` as a finite float inside the stated interval, or raise."""
    allowed = _interval_text(low, high, low_open, high_open)
    if isinstance(value, bool) or not isinstance(value, Real | np.floating | np.integer):
        raise _fail(name, owner, f"a finite number{allowed}", value)
    x = float(value)
    if not math.isfinite(x):
        raise _fail(name, owner, f"a finite number{allowed}", value)
    too_low = low is not None and (x <= low if low_open else x < low)
    too_high = high is not None and (x >= high if high_open else x > high)
    if too_low or too_high:
        raise _fail(name, owner, f"a number{allowed}", value)
    return x


def check_int(
    value: object, name: str, owner: str, *, low: int | None = None, high: int | None = None
) -> int:
    """Return ``value`` as an int inside ``[low, high]``, or raise."""
    allowed = _interval_text(low, high, False, False)
    if isinstance(value, bool):
        raise _fail(name, owner, f"a whole number{allowed}", value)
    if isinstance(value, Real | np.floating) and not isinstance(value, Integral | np.integer):
        if not math.isfinite(float(value)) or float(value) != int(value):
            raise _fail(name, owner, f"a whole number{allowed}", value)
    elif not isinstance(value, Integral | np.integer):
        raise _fail(name, owner, f"a whole number{allowed}", value)
    x = int(value)
    if (low is not None and x < low) or (high is not None and x > high):
        raise _fail(name, owner, f"a whole number{allowed}", value)
    return x


def check_choice(value: object, name: str, owner: str, choices: Sequence[str]) -> str:
    """Return ``value`` if it is one of ``choices``, or raise naming the choices."""
    if not isinstance(value, str) or value not in choices:
        listed = ", ".join(repr(c) for c in choices)
        raise _fail(name, owner, f"one of {listed}", value)
    return value


def check_real_array(
    values: object,
    name: str,
    owner: str,
    *,
    low: float | None = None,
    high: float | None = None,
    low_open: bool = False,
    high_open: bool = False,
    min_size: int = 1,
) -> np.ndarray:
    """Return a 1-D float array whose every entry passes :func:`check_real`."""
    if isinstance(values, str) or not isinstance(values, Iterable | np.ndarray):
        values = [values]
    arr = np.atleast_1d(np.asarray(list(values) if not isinstance(values, np.ndarray) else values))
    if arr.ndim != 1 or arr.size < min_size:
        raise _fail(name, owner, f"a list of at least {min_size} number(s)", values)
    has_bool = not isinstance(values, np.ndarray) and any(isinstance(v, bool) for v in values)
    if arr.dtype.kind in "iuf" and not has_bool:  # fast path: details only on failure
        x = arr.astype(float)
        ok = np.isfinite(x)
        if low is not None:
            ok &= (x > low) if low_open else (x >= low)
        if high is not None:
            ok &= (x < high) if high_open else (x <= high)
        if ok.all():
            return x
    for item in (arr.tolist() if isinstance(values, np.ndarray) else list(values)):
        check_real(item, name, owner, low=low, high=high, low_open=low_open, high_open=high_open)
    return arr.astype(float)


def _interval_text(
    low: float | None, high: float | None, low_open: bool, high_open: bool
) -> str:
    if low is None and high is None:
        return ""
    if high is None:
        return f" {'>' if low_open else '>='} {low:g}"
    if low is None:
        return f" {'<' if high_open else '<='} {high:g}"
    left = "(" if low_open else "["
    right = ")" if high_open else "]"
    return f" in {left}{low:g}, {high:g}{right}"


#: Longest unit name ("metres", "mmHg"), in characters.
MAX_UNIT = 40


def check_text(value: object, name: str, owner: str, *, max_length: int,
               allow_none: bool = False) -> str | None:
    """A short line of plain text: a non-empty string without control characters.

    Examples
    --------
    >>> check_text("metres", "unit", "ContinuousEndpoint", max_length=40)
    'metres'
    """
    if value is None and allow_none:
        return None
    if not isinstance(value, str) or not value.strip():
        raise AssuranceInputError(
            f"The {name!r} parameter of {owner} must be a non-empty string. "
            f"Got {value!r:.80} instead.")
    if len(value) > max_length:
        raise AssuranceInputError(
            f"The {name!r} parameter of {owner} must be at most {max_length} characters. "
            f"Got {len(value):,} characters, starting {value[:40]!r}, instead.")
    for i, ch in enumerate(value):  # C0 and C1 controls, DEL, lone surrogates
        if (ch < " " and ch != "\t") or "\x7f" <= ch <= "\x9f" or "\ud800" <= ch <= "\udfff":
            raise AssuranceInputError(
                f"The {name!r} parameter of {owner} must be plain text without control "
                f"characters; character {i + 1} is {ascii(ch)}. Got {value!r:.80} instead.")
    return value
