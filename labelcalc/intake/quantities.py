"""Amounts with units as written in formula files: "400 g", "0.4 kg", "12 %"."""

from __future__ import annotations

import difflib
import math
import re
from dataclasses import dataclass
from functools import lru_cache
from typing import Annotated

from pydantic import AllowInfNan, BeforeValidator

_UNITS = {
    "g": ("mass", 1.0),
    "kg": ("mass", 1000.0),
    "mg": ("mass", 0.001),
    "%": ("percent", 1.0),
    "ml": ("volume", 1.0),
    "l": ("volume", 1000.0),
}
MIN_AMOUNT = 1e-12  # a picogram (or 1e-12 %): below it an amount is no real amount and the arithmetic underflows
MAX_BATCH_G = 1e9  # one tonne is 1e6 g; a batch beyond a thousand tonnes is a typing error, not a formula


def _refuse_bool(v: object) -> object:
    if isinstance(v, bool):
        raise ValueError("give a number here, not yes/no or true/false")
    return v


Number = Annotated[float, BeforeValidator(_refuse_bool), AllowInfNan(False)]
"""A float field of an input file: booleans (``yes``, ``true``) and non-finite values refused."""

_RE = re.compile(r"^\s*([0-9]*\.?[0-9]+(?:[eE][-+]?[0-9]+)?)\s*([A-Za-z%]+)\s*$")


@dataclass(frozen=True)
class Quantity:
    value: float  # in g, ml, or percent
    kind: str  # "mass", "percent", "volume"
    text: str


def parse_quantity(text: object, *, allowed: tuple[str, ...] = ("mass", "percent")) -> Quantity:
    if isinstance(text, str):
        return _parse_text(text, allowed)
    return _parse(text, allowed)


@lru_cache(maxsize=65536)
def _parse_text(text: str, allowed: tuple[str, ...]) -> Quantity:
    return _parse(text, allowed)


def _parse(text: object, allowed: tuple[str, ...]) -> Quantity:
    """Parse "400 g" style text.  Raises ValueError with a message that says what to write.

    >>> parse_quantity("0.4 kg").value
    400.0
    >>> parse_quantity("12 %").kind
    'percent'
    """
    if isinstance(text, bool) or text is None:
        raise ValueError("give an amount with its unit, e.g. '400 g', '0.4 kg' or '12 %'")
    if isinstance(text, (int, float)):
        raise ValueError(f"amount {text} has no unit: write e.g. '{text} g', '{text} kg' or '{text} %'")
    m = _RE.match(str(text))
    if not m:
        raise ValueError(f"cannot read amount '{text}': write a number and a unit, e.g. '400 g', '0.4 kg' or '12 %'")
    number, unit = float(m.group(1)), m.group(2)
    key = unit.lower() if unit.lower() in _UNITS else unit
    if key not in _UNITS:
        near = difflib.get_close_matches(unit.lower(), list(_UNITS), n=2)
        hint = f" — did you mean '{near[0]}'?" if near else ""
        raise ValueError(f"unknown unit '{unit}' in '{text}'{hint} (use g, kg or %)")
    kind, scale = _UNITS[key]
    if kind not in allowed:
        raise ValueError(f"'{text}': a {kind} is not allowed here (use {' or '.join(allowed)})")
    if not math.isfinite(number) or number * scale > MAX_BATCH_G:
        raise ValueError(f"amount '{text}' is too large (at most {MAX_BATCH_G:,.0f} g, a thousand tonnes)")
    if number <= 0:
        raise ValueError(f"amount '{text}' must be greater than zero")
    if number * scale < MIN_AMOUNT:
        raise ValueError(f"amount '{text}' is too small (at least {MIN_AMOUNT:g} g, ml or %)")
    if kind == "percent" and number > 100:
        raise ValueError(f"amount '{text}' is more than 100 %")
    return Quantity(number * scale, kind, str(text))
