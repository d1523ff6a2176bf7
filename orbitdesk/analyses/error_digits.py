"""An estimate written with the digits its standard error supports: the one rule every presenter uses.

The rule (the usual one for a measured value): the error to two significant digits, the value rounded to
the same decimal place. 0.89148 with an error of 0.031 reads 0.891 ± 0.031; with 0.0996, 0.89 ± 0.10 (the
error's rounding carries into the next digit); 12345.6 with 123 reads 12350 ± 120. Errors below 1e-6 and
values or errors from 1e6 up are written in the scientific form, the value's significant digits chosen by the
same rule (1.2345678e-7 with 3.2e-9: 1.235e-07 ± 3.2e-09). Texts are plain ASCII ("-" and "e"); each presenter turns them
into its own typography.
"""

from __future__ import annotations

import math

SCIENTIFIC_BELOW = 1e-6  # an error this small (or a value / an error beyond 1 / SCIENTIFIC_BELOW) is written as 1.2e-07
MAX_DIGITS = 15  # never more significant digits than a double holds


def value_with_error(value: float, error: float | None) -> tuple[str, str] | None:
    """(value text, error text) by the rule above, or None when the value is not finite or the error is
    missing, not finite or not positive (the caller then writes the value its usual way)."""
    value = float(value)
    if error is None or not math.isfinite(value):
        return None
    error = float(error)
    if not (math.isfinite(error) and error > 0):
        return None
    place = _exponent(float(f"{error:.1e}"))  # the error's leading digit's decimal place, after its rounding
    if error < SCIENTIFIC_BELOW or max(abs(value), error) >= 1.0 / SCIENTIFIC_BELOW:
        precision = min(max(_exponent(value) - place + 1, 1), MAX_DIGITS - 1)  # digits after the value's first
        return _no_negative_zero(f"{value:.{precision}e}"), f"{error:.1e}"
    decimals = 1 - place  # the error's second significant digit
    if decimals >= 0:
        return _no_negative_zero(f"{value:.{decimals}f}"), f"{error:.{decimals}f}"
    return _no_negative_zero(f"{round(value, decimals):.0f}"), f"{round(error, decimals):.0f}"


def _exponent(x: float) -> int:
    """The decimal exponent of |x| (its leading digit's place: 0.031 -> -2, 123 -> 2; 0 -> 0)."""
    return int(math.floor(math.log10(abs(x)))) if x != 0 else 0


def _no_negative_zero(text: str) -> str:
    """'-0.000' (a small negative value rounded away) reads '0.000'."""
    if text.startswith("-") and not any(c in "123456789" for c in text.split("e")[0]):
        return text[1:]
    return text


__all__ = ["value_with_error"]
