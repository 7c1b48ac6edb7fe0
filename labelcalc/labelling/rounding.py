"""Decimal rounding by ordered bands, as market rules state them.

Values arrive as floats from the composition tables.  At this boundary they
are converted to :class:`~decimal.Decimal` after rounding to 9 decimal places
(which removes binary noise such as 0.30000000000000004 but keeps every
digit a label can show), so a value of 4.5 g is compared as exactly 4.5.
"""

from __future__ import annotations

from decimal import ROUND_HALF_EVEN, ROUND_HALF_UP, Decimal
from typing import Literal

from pydantic import BaseModel, ConfigDict, Field, model_validator

TIE_MODES = {"half_up": ROUND_HALF_UP, "half_even": ROUND_HALF_EVEN}
_NOISE = Decimal("1e-9")
_ZERO = Decimal(0)


def to_decimal(x: float | int | str | Decimal) -> Decimal:
    """Float to Decimal without binary noise.

    >>> to_decimal(0.1 + 0.2)
    Decimal('0.3')
    >>> to_decimal(4.5)
    Decimal('4.5')
    """
    if isinstance(x, float):
        if x == 0:
            return _ZERO
        # formatting to 9 decimals rounds the exact binary value: the noise goes, every label digit stays
        return Decimal(f"{x:.9f}").normalize()
    d = x if isinstance(x, Decimal) else Decimal(str(x))
    return d.quantize(_NOISE, rounding=ROUND_HALF_EVEN).normalize() if d != 0 else _ZERO


def round_to_step(value: Decimal, step: Decimal, tie: str = "half_up") -> Decimal:
    """Round to the nearest multiple of ``step``.

    >>> round_to_step(Decimal("2.25"), Decimal("0.5"))
    Decimal('2.5')
    >>> round_to_step(Decimal("45"), Decimal("10"))
    Decimal('50')
    """
    q = (value / step).quantize(Decimal(1), rounding=TIE_MODES[tie])
    return q * step


def round_significant(value: Decimal, figures: int, tie: str = "half_up") -> Decimal:
    """Round to a number of significant figures.

    >>> round_significant(Decimal("1234.5"), 3)
    Decimal('1.23E+3')
    """
    if value == 0:
        return Decimal(0)
    exp = value.adjusted() - figures + 1
    return value.quantize(Decimal(1).scaleb(exp), rounding=TIE_MODES[tie])


class Condition(BaseModel):
    """A test on another unrounded figure of the same column (for 'only if' bands)."""

    model_config = ConfigDict(extra="forbid")
    nutrient: str
    below: float | None = None
    up_to: float | None = None
    at_least: float | None = None


class Band(BaseModel):
    """One band of a rounding rule.  The first band whose range holds (and whose
    ``only_if`` conditions hold) decides the declared value."""

    model_config = ConfigDict(extra="forbid")
    below: float | None = Field(None, description="band holds when value < below")
    up_to: float | None = Field(None, description="band holds when value <= up_to")
    step: float | None = Field(None, gt=0, description="round to the nearest multiple of step")
    significant_figures: int | None = Field(None, ge=1, le=6)
    declare: str | None = Field(None, description="fixed text to print, e.g. '0' or 'less than 1'")
    value: float | None = Field(None, description="number the fixed text stands for, used for percentages")
    min_step: float | None = Field(None, gt=0, description="with significant_figures: never finer than this")
    only_if: list[Condition] = Field(default_factory=list)
    note: str | None = None

    @model_validator(mode="after")
    def _one_action(self):
        actions = [x is not None for x in (self.step, self.significant_figures, self.declare)]
        if sum(actions) != 1:
            raise ValueError("a band takes exactly one of step, significant_figures or declare")
        if self.below is not None and self.up_to is not None:
            raise ValueError("a band takes below or up_to, not both")
        return self

    def model_post_init(self, _ctx) -> None:
        self._below = None if self.below is None else to_decimal(self.below)
        self._up_to = None if self.up_to is None else to_decimal(self.up_to)
        self._step = None if self.step is None else to_decimal(self.step)

    def holds(self, v: Decimal) -> bool:
        if self._below is not None:
            return v < self._below
        if self._up_to is not None:
            return v <= self._up_to
        return True


class RoundingRule(BaseModel):
    model_config = ConfigDict(extra="forbid")
    citation: str = Field(min_length=3)
    confidence: str
    tie: Literal["half_up", "half_even"] = "half_up"
    bands: list[Band] = Field(min_length=1)
    keep_trailing_zeros: bool = Field(False, description="print 2.0 rather than 2 for a 0.1 step")

    @model_validator(mode="after")
    def _order(self):
        last = None
        for b in self.bands:
            bound = b.below if b.below is not None else b.up_to
            if bound is None:
                continue
            if last is not None and bound < last:
                raise ValueError("band bounds must not decrease")
            last = bound
        if (self.bands[-1].below is not None or self.bands[-1].up_to is not None) and not any(
            b.below is None and b.up_to is None for b in self.bands
        ):
            raise ValueError("the last band must be open (no below/up_to) so every value is covered")
        return self


class Rounded(BaseModel):
    """A rounded figure: the number (None for a pure text form) and the printed text."""

    number: Decimal | None
    text: str
    band: int
    less_than: bool = False


def apply_rounding(value: float | Decimal, rule: RoundingRule, others: dict[str, Decimal] | None = None) -> Rounded:
    """Round ``value`` by ``rule``'s bands and return number and text (no unit).

    >>> from labelcalc.labelling.rounding import RoundingRule
    >>> r = RoundingRule(citation="example", confidence="derived", bands=[{"below": 0.5, "declare": "0", "value": 0},
    ...     {"below": 5, "step": 0.5}, {"step": 1}])
    >>> apply_rounding(4.75, r).text, apply_rounding(0.49, r).text, apply_rounding(5.5, r).text
    ('5', '0', '6')
    """
    v = to_decimal(value)
    others = {} if others is None else others
    for i, b in enumerate(rule.bands):
        if not b.holds(v) or not all(_cond(c, others) for c in b.only_if):
            continue
        if b.declare is not None:
            num = to_decimal(b.value) if b.value is not None else None
            return Rounded(number=num, text=b.declare, band=i, less_than=num is None or num != 0)
        if b.step is not None:
            step = b._step
            r = round_to_step(v, step, rule.tie)
            return Rounded(number=r, text=format_number(r, step if rule.keep_trailing_zeros else None), band=i)
        r = round_significant(v, b.significant_figures, rule.tie)  # type: ignore[arg-type]
        if b.min_step:
            r = round_to_step(r, to_decimal(b.min_step), rule.tie)
        return Rounded(number=r, text=format_number(r), band=i)
    raise ValueError("no rounding band holds")  # guarded by the open last band


def _cond(c: Condition, others: dict[str, Decimal]) -> bool:
    if c.nutrient not in others:
        return False
    v = others[c.nutrient]
    if v is None:
        return False
    if c.below is not None and not v < to_decimal(c.below):
        return False
    if c.up_to is not None and not v <= to_decimal(c.up_to):
        return False
    return not (c.at_least is not None and not v >= to_decimal(c.at_least))


def format_number(d: Decimal, step: Decimal | None = None) -> str:
    """Plain decimal text: no exponent, no trailing zeros unless a step asks for them.

    >>> format_number(Decimal("1.23E+3")), format_number(Decimal("2.50")), format_number(Decimal("2"), Decimal("0.1"))
    ('1230', '2.5', '2.0')
    """
    if step is not None:
        places = max(0, -step.normalize().as_tuple().exponent)
        return f"{d:.{places}f}"
    s = f"{d.normalize():f}"
    if "." in s:
        s = s.rstrip("0").rstrip(".")
    return "0" if s in ("-0", "") else s
