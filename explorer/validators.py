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
    "CellFileError",
    "Problem",
    "check_positive",
    "check_nonnegative",
    "check_fraction",
    "check_range",
    "check_choice",
    "check_integer",
    "check_finite",
]


class InputError(ValueError):
    """Bad user input: the message names the input, the value and what was expected."""


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
        where = f"{self.file}: " if self.file else ""
        if self.value is _MISSING:
            return f"{where}`{self.field}`: missing; expected {self.expected}"
        return f"{where}`{self.field}`: expected {self.expected}, got {self.value!r}"


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
        head = f"cell file {file!s} has " if file else "cell definition has "
        n = len(self.problems)
        lines = [f"{head}{n} problem{'s' if n != 1 else ''}:"]
        lines += [f"  - {p}" for p in self.problems]
        super().__init__("\n".join(lines))

    def fields(self) -> list[str]:
        """The field paths of all problems, in order."""
        return [p.field for p in self.problems]


def _as_float(name: str, value) -> float:
    if isinstance(value, bool) or value is None:
        raise InputError(f"`{name}`: expected a number, got {value!r}")
    if isinstance(value, np.ndarray) and value.ndim == 0:
        value = value.item()
    try:
        out = float(value)
    except (TypeError, ValueError):
        raise InputError(f"`{name}`: expected a number, got {value!r}") from None
    return out


def check_finite(name: str, value, unit: str = "") -> float:
    """Return ``value`` as a finite float or raise :class:`InputError`."""
    v = _as_float(name, value)
    if not math.isfinite(v):
        raise InputError(f"`{name}`: expected a finite number{_u(unit)}, got {value!r}")
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
        raise InputError(f"`{name}`: expected a value > 0{_u(unit)}, got {value!r}")
    return v


def check_nonnegative(name: str, value, unit: str = "") -> float:
    """Return ``value`` as a float if it is finite and >= 0."""
    v = check_finite(name, value, unit)
    if v < 0:
        raise InputError(f"`{name}`: expected a value >= 0{_u(unit)}, got {value!r}")
    return v


def check_fraction(name: str, value, *, open_low: bool = False, open_high: bool = False) -> float:
    """Return ``value`` as a float in [0, 1] (ends excluded when ``open_low``/``open_high``)."""
    v = check_finite(name, value)
    lo_ok = v > 0 if open_low else v >= 0
    hi_ok = v < 1 if open_high else v <= 1
    if not (lo_ok and hi_ok):
        interval = f"{'(' if open_low else '['}0, 1{')' if open_high else ']'}"
        raise InputError(f"`{name}`: expected a fraction in {interval}, got {value!r}")
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
        raise InputError(f"`{name}`: expected {want}{_u(unit)}, got {value!r}")
    return v


def check_integer(name: str, value, low: int | None = None, high: int | None = None) -> int:
    """Return ``value`` as an int if it is a whole number within the optional bounds."""
    if isinstance(value, bool):
        raise InputError(f"`{name}`: expected a whole number, got {value!r}")
    try:
        f = float(value)
    except (TypeError, ValueError):
        raise InputError(f"`{name}`: expected a whole number, got {value!r}") from None
    if not math.isfinite(f) or f != int(f):
        raise InputError(f"`{name}`: expected a whole number, got {value!r}")
    i = int(f)
    if (low is not None and i < low) or (high is not None and i > high):
        lo = "" if low is None else f"{low} <= "
        hi = "" if high is None else f" <= {high}"
        raise InputError(f"`{name}`: expected a whole number {lo}value{hi}, got {value!r}")
    return i


def check_choice(name: str, value, choices: Iterable[str]) -> str:
    """Return ``value`` if it is one of ``choices``; otherwise list the valid ones.

    Examples
    --------
    >>> check_choice("edge", "top", ("bottom", "top", "left", "right"))
    'top'
    """
    choices = tuple(choices)
    if value not in choices:
        import difflib

        close = difflib.get_close_matches(str(value), [str(c) for c in choices], n=1)
        hint = f" (did you mean {close[0]!r}?)" if close else ""
        valid = ", ".join(repr(c) for c in choices)
        raise InputError(f"`{name}`: expected one of {valid}, got {value!r}{hint}")
    return value
