"""Limits of what a model file may hold, and the integer checks that both document parsers
(YAML in :mod:`eigengate.model.yaml_core`, JSON and TOML in :mod:`eigengate.model.formats`)
share: below both, so neither imports the other."""

from __future__ import annotations

__all__ = ["MAX_NESTING", "MAX_VALUES", "MAX_INT_DIGITS", "FLOAT_MAX", "int_problem",
           "int_value"]

#: Deepest nesting of lists and mappings accepted; parsers recurse, so this bounds the stack.
MAX_NESTING = 64
#: Most values a YAML document may expand to through aliases (stops "billion laughs" files).
MAX_VALUES = 10_000_000

#: Integers longer than this (in digits) are checked against the largest float (about 1.8e308):
#: the ints of a model file become floats. Python refuses strings of more than 4300 digits.
MAX_INT_DIGITS = 308


def int_problem(value: int | None, digits: int) -> str | None:
    """Why an integer cannot become a float (None: it can); ``value`` None when too long to
    convert at all."""
    if value is None or abs(value) > FLOAT_MAX:
        return (f"is an integer with {digits} digits, too large for a floating-point number "
                "(the largest is about 1.8e308)")
    return None


FLOAT_MAX = 1.7976931348623157e308


def int_value(value: str) -> int | None:
    """A core-schema int's value; None when it has more digits than any float could hold."""
    body = value.lstrip("+-")
    if len(body) > MAX_INT_DIGITS + 2:
        return None
    if body.startswith(("0o", "0x")):
        return int(body[2:], 8 if body[1] == "o" else 16)
    return int(value)
