"""One check for option values that must be finite numbers, naming the option in the error."""

from __future__ import annotations

import math

from ..errors import OptionError

__all__ = ["finite_number"]


def finite_number(name: str, value, *, fix: str) -> float:
    """``value`` as a finite float, or an :class:`OptionError` naming ``name`` with ``fix``.

    Parameters
    ----------
    name : str
        The option or key as the user wrote it.
    value : object
    fix : str
        What to write instead.
    """
    try:
        number = float(value)
    except (TypeError, ValueError):
        raise OptionError(f"{name} must be a number, found {value!r}", fix=fix) from None
    if not math.isfinite(number):
        raise OptionError(f"{name} must be finite, found {value!r}", fix=fix)
    return number
