"""Reading quantities with units at the edges of the package (pint behind one door).

Inside the package everything is SI floats. Text from files and users such as
``"85 um"``, ``"3.2 g/cm^3"`` or ``"25 degC"`` passes through :func:`parse` once.

Examples
--------
>>> parse("85 um", "m")
8.5e-05
>>> parse("25 degC", "K")
298.15
"""

from __future__ import annotations

import re
from functools import lru_cache

from explorer.validators import InputError, short_repr

__all__ = ["UnitError", "registry", "parse", "to_si"]

# a leading number, then the unit text ("25 degC", "-3e-5 V/K", "1.5")
_NUMBER = re.compile(r"^\s*([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*(.*?)\s*$")


class UnitError(InputError):
    """A quantity string could not be read or has the wrong dimension."""

    def __init__(self, expected: str, got: str, kind: str):
        super().__init__(f"expected {expected}, got {short_repr(got)}")
        self.expected = expected  # what would have been accepted
        self.kind = kind  # "syntax" | "unit" | "dimension"


@lru_cache(maxsize=1)
def registry():
    """The package-wide pint UnitRegistry (created on first use)."""
    import pint

    return pint.UnitRegistry()


@lru_cache(maxsize=256)
def _unit(text: str):
    return registry().Unit(text)


# Longest unit text handed to pint ("W/(m*K)", "mol/m^3/s"...); beyond it the text is refused.
_UNIT_TEXT_MAX = 60


def parse(text: str, unit: str) -> float:
    """Read ``text`` ("<number> <unit>") and return its magnitude in ``unit``.

    Parameters
    ----------
    text : str
        A number followed by a unit understood by pint, e.g. ``"8 um"``.
    unit : str
        The unit to return the magnitude in (also fixes the expected dimension).

    Raises
    ------
    UnitError
        ``kind="syntax"`` when no leading number is found, ``"unit"`` when pint
        does not know the unit, ``"dimension"`` when the dimension differs.
    """
    if not isinstance(text, str):
        raise UnitError(f"a string with a unit such as '1 {unit}'", text, "syntax")
    m = _NUMBER.match(text)
    if not m:
        raise UnitError(f"'<number> <unit>' such as '1 {unit}'", text, "syntax")
    number, unit_text = float(m.group(1)), m.group(2) or "dimensionless"
    if len(unit_text) > _UNIT_TEXT_MAX:  # pint's parser slows steeply on long text
        raise UnitError(f"a unit of at most {_UNIT_TEXT_MAX} characters such as '{unit}'",
                        text, "unit")
    try:
        given = _unit(unit_text)
    except Exception:  # pint raises many types (even AssertionError) on bad unit text
        raise UnitError(f"a known unit convertible to {unit} (could not read "
                        f"{short_repr(unit_text)})",
                        text, "unit") from None
    target = _unit(unit)
    if given.dimensionality != target.dimensionality:
        raise UnitError(
            f"a quantity convertible to {unit} ({target.dimensionality}, "
            f"not {given.dimensionality})",
            text,
            "dimension",
        )
    q = registry().Quantity(number, given)
    # round away conversion noise (85 um -> 8.5e-05, not 8.499999999999999e-05)
    return float(f"{q.to(target).magnitude:.12g}")


def to_si(text: str, unit: str) -> float:
    """Alias of :func:`parse` for readability where ``unit`` is the SI unit."""
    return parse(text, unit)
