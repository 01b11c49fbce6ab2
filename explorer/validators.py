"""Shared input validation: one error family, small checks that return the cleaned value.

Every user-facing error in the package derives from :class:`InputError`
(a :class:`ValueError`), names the input in backticks, shows the bad value and
says what was expected. :class:`CellFileError` collects *all* problems of one
cell file so the user can fix them in one pass.

Examples
--------
>>> check_positive("flow_L_min", 2.5)
2.5
>>> check_choice("layout", "averaged", ("single", "averaged", "distributed"))
'averaged'
"""

from __future__ import annotations

import math
from collections.abc import Iterable
from dataclasses import dataclass

import numpy as np

__all__ = [
    "InputError",
    "OutputError",
    "CellFileError",
    "Problem",
    "check_positive",
    "check_nonnegative",
    "check_fraction",
    "check_range",
    "check_choice",
    "check_integer",
    "check_finite",
    "clip",
    "short_repr",
]

#: Characters of a value (or a field name) an error message shows before cutting it short.
VALUE_CHARS = 80
#: Characters of one error message the command line prints at most.
MESSAGE_CHARS = 2000


class InputError(ValueError):
    """Bad user input: the message names the input, the value and what was expected."""


class OutputError(InputError):
    """A file or folder the tool cannot write: the message names the path and the reason."""


def clip(text: str, limit: int = VALUE_CHARS) -> str:
    """``text`` cut to its first ``limit`` characters, saying how long it was.

    Every value echoed in an error goes through here (via :func:`short_repr`) so a
    50 MB string in an input file makes a one-line message, not a 50 MB one.

    Examples
    --------
    >>> clip("abc")
    'abc'
    >>> clip("x" * 1000, 5)
    'xxxxx... (1000 characters)'
    """
    text = str(text)
    if len(text) <= limit:
        return text
    return f"{text[:limit]}... ({len(text)} characters)"


def short_repr(value, limit: int = VALUE_CHARS) -> str:
    """``repr(value)`` for an error message, cut to about ``limit`` characters.

    Strings and bytes are cut before ``repr`` (no copy of a huge value); the
    count is of the value's own characters (or items, for bytes).

    Examples
    --------
    >>> short_repr(2.5)
    '2.5'
    >>> short_repr("a" * 100, 3)
    "'aaa'... (100 characters)"
    """
    if isinstance(value, str | bytes) and len(value) > limit:
        return f"{value[:limit]!r}... ({len(value)} characters)"
    return clip(repr(value), limit)


@dataclass(frozen=True)
class Problem:
    """One thing wrong with an input file.

    Attributes
    ----------
    file : str
        Path of the file ('' when the input did not come from a file).
    field : str
        Dotted field path, e.g. ``"positive.porosity"``.
    value : object
        The offending value as given (``None`` when the field is missing).
    expected : str
        What would have been accepted.
    """

    file: str
    field: str
    value: object
    expected: str

    def __str__(self) -> str:
        where = f"{clip(self.file, 2 * VALUE_CHARS)}: " if self.file else ""
        field = clip(self.field)
        expected = clip(self.expected, MESSAGE_CHARS // 2)
        if self.value is _MISSING:
            return f"{where}`{field}`: missing; expected {expected}"
        return f"{where}`{field}`: expected {expected}, got {short_repr(self.value)}"


class _Missing:
    def __repr__(self) -> str:
        return "<missing>"


_MISSING = _Missing()
#: Sentinel for :attr:`Problem.value` when a required field is absent.
MISSING = _MISSING


class CellFileError(InputError):
    """Everything wrong with one cell file, listed one problem per line.

    Parameters
    ----------
    problems : iterable of Problem
        At least one problem.
    file : str, optional
        The file the problems belong to (used in the heading).
    """

    def __init__(self, problems: Iterable[Problem], file: str = ""):
        self.problems = list(problems)
        self.file = file
        head = f"cell file {clip(file, 2 * VALUE_CHARS)} has " if file else "cell definition has "
        n = len(self.problems)
        lines = [f"{head}{n} problem{'s' if n != 1 else ''}:"]
        lines += [f"  - {p}" for p in self.problems]
        super().__init__("\n".join(lines))

    def fields(self) -> list[str]:
        """The field paths of all problems, in order."""
        return [p.field for p in self.problems]


def _as_float(name: str, value) -> float:
    if isinstance(value, bool) or value is None:
        raise InputError(f"`{name}`: expected a number, got {short_repr(value)}")
    if isinstance(value, np.ndarray) and value.ndim == 0:
        value = value.item()
    try:
        out = float(value)
    except (TypeError, ValueError):
        raise InputError(f"`{name}`: expected a number, got {short_repr(value)}") from None
    except OverflowError:  # an int beyond the float range
        raise InputError(f"`{name}`: expected a finite number, got {short_repr(value)}") from None
    return out


def check_finite(name: str, value, unit: str = "") -> float:
    """Return ``value`` as a finite float or raise :class:`InputError`."""
    v = _as_float(name, value)
    if not math.isfinite(v):
        raise InputError(f"`{name}`: expected a finite number{_u(unit)}, "
                         f"got {short_repr(value)}")
    return v


def _u(unit: str) -> str:
    return f" (in {unit})" if unit else ""


def check_positive(name: str, value, unit: str = "") -> float:
    """Return ``value`` as a float if it is finite and > 0.

    Examples
    --------
    >>> check_positive("thickness_m", 8e-6, "m")
    8e-06
    """
    v = check_finite(name, value, unit)
    if not v > 0:
        raise InputError(f"`{name}`: expected a value > 0{_u(unit)}, got {short_repr(value)}")
    return v


def check_nonnegative(name: str, value, unit: str = "") -> float:
    """Return ``value`` as a float if it is finite and >= 0."""
    v = check_finite(name, value, unit)
    if v < 0:
        raise InputError(f"`{name}`: expected a value >= 0{_u(unit)}, got {short_repr(value)}")
    return v


def check_fraction(name: str, value, *, open_low: bool = False, open_high: bool = False) -> float:
    """Return ``value`` as a float in [0, 1] (ends excluded when ``open_low``/``open_high``)."""
    v = check_finite(name, value)
    lo_ok = v > 0 if open_low else v >= 0
    hi_ok = v < 1 if open_high else v <= 1
    if not (lo_ok and hi_ok):
        interval = f"{'(' if open_low else '['}0, 1{')' if open_high else ']'}"
        raise InputError(f"`{name}`: expected a fraction in {interval}, "
                         f"got {short_repr(value)}")
    return v


def check_range(name: str, value, low=None, high=None, unit: str = "",
                *, inclusive: bool = True) -> float:
    """Return ``value`` as a float if ``low <= value <= high`` (either bound may be None).

    With ``inclusive=False`` the bounds themselves are rejected.
    """
    v = check_finite(name, value, unit)
    bad = (
        (low is not None and (v < low if inclusive else v <= low))
        or (high is not None and (v > high if inclusive else v >= high))
    )
    if bad:
        op_lo, op_hi = ("<=", "<=") if inclusive else ("<", "<")
        if low is not None and high is not None:
            want = f"{low:g} {op_lo} value {op_hi} {high:g}"
        elif low is not None:
            want = f"a value {'>=' if inclusive else '>'} {low:g}"
        else:
            want = f"a value {'<=' if inclusive else '<'} {high:g}"
        raise InputError(f"`{name}`: expected {want}{_u(unit)}, got {short_repr(value)}")
    return v


def check_integer(name: str, value, low: int | None = None, high: int | None = None) -> int:
    """Return ``value`` as an int if it is a whole number within the optional bounds."""
    if isinstance(value, bool):
        raise InputError(f"`{name}`: expected a whole number, got {short_repr(value)}")
    if isinstance(value, int | np.integer):  # exact, also beyond the float range
        i = int(value)
    else:
        try:
            f = float(value)
        except (TypeError, ValueError):
            raise InputError(f"`{name}`: expected a whole number, "
                             f"got {short_repr(value)}") from None
        if not math.isfinite(f) or f != int(f):
            raise InputError(f"`{name}`: expected a whole number, got {short_repr(value)}")
        i = int(f)
    if (low is not None and i < low) or (high is not None and i > high):
        lo = "" if low is None else f"{low} <= "
        hi = "" if high is None else f" <= {high}"
        raise InputError(f"`{name}`: expected a whole number {lo}value{hi}, "
                         f"got {short_repr(value)}")
    return i


def check_choice(name: str, value, choices: Iterable[str]) -> str:
    """Return ``value`` if it is one of ``choices``; otherwise list the valid ones.

    Examples
    --------
    >>> check_choice("edge", "top", ("bottom", "top", "left", "right"))
    'top'
    """
    choices = tuple(choices)
    if not _is_one_of(value, choices):
        import difflib

        # a near miss only for a short string: difflib is slow on a long one
        close = (difflib.get_close_matches(value, [str(c) for c in choices], n=1)
                 if isinstance(value, str) and len(value) <= VALUE_CHARS else [])
        hint = f" (did you mean {close[0]!r}?)" if close else ""
        valid = ", ".join(repr(c) for c in choices)
        raise InputError(f"`{name}`: expected one of {valid}, got {short_repr(value)}{hint}")
    return value


def _is_one_of(value, choices: tuple) -> bool:
    """``value in choices`` without asking an array (or any odd object) for a truth value."""
    if isinstance(value, str):
        return value in choices
    for c in choices:
        if isinstance(c, str) or type(c) is not type(value):
            continue
        try:
            if bool(c == value):
                return True
        except (TypeError, ValueError):  # e.g. arrays, whose == is elementwise
            continue
    return False
