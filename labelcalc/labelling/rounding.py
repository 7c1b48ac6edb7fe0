"""Decimal rounding by ordered bands, as market rules state them.

Values arrive as floats from the composition tables.  At this boundary they
are converted to :class:`~decimal.Decimal` after rounding to 9 decimal places
(which removes binary noise such as 0.30000000000000004 but keeps every
digit a label can show), so a value of 4.5 g is compared as exactly 4.5.
"""

from __future__ import annotations

from dataclasses import dataclass
from decimal import ROUND_HALF_EVEN, ROUND_HALF_UP, Decimal
from functools import lru_cache
from typing import Literal

import numpy as np
from pydantic import BaseModel, ConfigDict, Field, model_validator

from labelcalc.intake.quantities import Number

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
    below: Number | None = None
    up_to: Number | None = None
    at_least: Number | None = None


class Band(BaseModel):
    """One band of a rounding rule.  The first band whose range holds (and whose
    ``only_if`` conditions hold) decides the declared value."""

    model_config = ConfigDict(extra="forbid")
    below: Number | None = Field(None, description="band holds when value < below")
    up_to: Number | None = Field(None, description="band holds when value <= up_to")
    step: Number | None = Field(None, gt=0, description="round to the nearest multiple of step")
    significant_figures: int | None = Field(None, ge=1, le=6)
    declare: str | None = Field(None, description="fixed text to print, e.g. '0' or 'less than 1'")
    value: Number | None = Field(None, description="number the fixed text stands for, used for percentages")
    min_step: Number | None = Field(None, gt=0, description="with significant_figures: never finer than this")
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
        if not any(b.below is None and b.up_to is None and not b.only_if for b in self.bands):
            raise ValueError(
                "some values are covered by no band: the last band must have no below/up_to and no only_if"
            )
        return self


class Rounded(BaseModel):
    """A rounded figure: the number (None for a pure text form) and the printed text."""

    number: Decimal | None
    text: str
    band: int
    less_than: bool = False


def apply_rounding(
    value: float | Decimal, rule: RoundingRule, others: dict[str, Decimal | None] | None = None
) -> Rounded:
    """Round ``value`` by ``rule``'s bands and return number and text (no unit).

    >>> from labelcalc.labelling.rounding import RoundingRule
    >>> r = RoundingRule(citation="example", confidence="derived", bands=[{"below": 0.5, "declare": "0", "value": 0},
    ...     {"below": 5, "step": 0.5}, {"step": 1}])
    >>> apply_rounding(4.75, r).text, apply_rounding(0.49, r).text, apply_rounding(5.5, r).text
    ('5', '0', '6')
    """
    q = np.array([_q_of_decimal(to_decimal(value))], dtype=np.int64)
    others = others if others is not None else {}
    oq = {}
    for k in {c.nutrient for b in rule.bands for c in b.only_if if c.nutrient in others}:
        v = others[k]
        oq[k] = (np.array([0 if v is None else _q_of_decimal(v)], dtype=np.int64), np.array([v is not None]))
    return round_values(q, rule, oq).rounded(0)


#: values are rounded as integers of 1e-9 units: exact, and the same quantisation as :func:`to_decimal`
Q = 10**9
#: "no number" in a rounded array (a fixed text such as "less than 1")
NONE = np.iinfo(np.int64).min


def _q_of_decimal(d: Decimal) -> int:
    return int(d.scaleb(9).to_integral_value(rounding=ROUND_HALF_EVEN))


def q_of(x: np.ndarray) -> np.ndarray:
    """Floats to exact 1e-9 integers, rounding the binary value as :func:`to_decimal` does (NaN -> 0;
    callers keep unknowns in a mask of their own)."""
    a = np.asarray(x, dtype=float)
    if not np.isfinite(a).all():  # nan_to_num is costly on the many small arrays of single labels
        a = np.nan_to_num(a)
    return np.round(a * Q).astype(np.int64)


@lru_cache(maxsize=8192)
def q_scalar(v: float) -> int:
    """A rule's threshold or step as a 1e-9 integer (a pack has few: each is converted once)."""
    return _q_of_decimal(to_decimal(v))


_TEXT_CACHE: dict[tuple[int, int | None], str] = {}


def text_of(qv: int, places: int | None) -> str:
    """Printed text of a 1e-9 integer, with ``places`` decimals kept (None: trailing zeros dropped)."""
    key = (qv, places)
    t = _TEXT_CACHE.get(key)
    if t is None:
        t = format_number(Decimal(int(qv)).scaleb(-9), None if places is None else Decimal(1).scaleb(-places))
        if len(_TEXT_CACHE) < 2_000_000:
            _TEXT_CACHE[key] = t
    return t


def _step_round(qv: np.ndarray, step: np.ndarray | int, tie: str) -> np.ndarray:
    n, rem = np.divmod(qv, step)
    twice = 2 * rem
    up = twice > step
    if tie == "half_up":
        up |= twice == step
    else:
        up |= (twice == step) & (n % 2 == 1)
    return (n + up) * step


@dataclass
class RoundedArray:
    """Rounded figures of many values under one rule (see :func:`round_values`)."""

    number: np.ndarray  # int64 in 1e-9 units, NONE for a text-only form
    band: np.ndarray  # index of the band applied
    texts: list[str]
    less_than: np.ndarray  # the text stands for "less than" (not for zero)

    def rounded(self, i: int) -> Rounded:
        n = int(self.number[i])
        num = None if n == NONE else Decimal(n).scaleb(-9).normalize() if n else _ZERO
        return Rounded(number=num, text=self.texts[i], band=int(self.band[i]), less_than=bool(self.less_than[i]))


def round_values(
    qv: np.ndarray, rule: RoundingRule, others: dict[str, tuple[np.ndarray, np.ndarray]] | None = None
) -> RoundedArray:
    """Round non-negative values given as 1e-9 integers by ``rule``'s ordered bands, all at once.

    ``others`` maps a nutrient to (its 1e-9 integers, known mask) for the bands' "only if" conditions.
    This is the one implementation of banded rounding; :func:`apply_rounding` is its single-value form.
    Exact: thresholds and steps are compared and applied in integer arithmetic.
    """
    n = len(qv)
    band = np.full(n, -1)
    number = np.zeros(n, dtype=np.int64)
    less = np.zeros(n, dtype=bool)
    fixed_text: dict[int, str] = {}
    places = np.full(n, -1)
    open_ = np.ones(n, dtype=bool)
    for i, b in enumerate(rule.bands):
        if not open_.any():
            break
        holds = open_.copy()
        if b.below is not None:
            holds &= qv < q_scalar(b.below)
        elif b.up_to is not None:
            holds &= qv <= q_scalar(b.up_to)
        for c in b.only_if:
            other = (others or {}).get(c.nutrient)
            if other is None:
                holds &= False
                continue
            oq, known = other
            ok = known.copy()
            if c.below is not None:
                ok &= oq < q_scalar(c.below)
            if c.up_to is not None:
                ok &= oq <= q_scalar(c.up_to)
            if c.at_least is not None:
                ok &= oq >= q_scalar(c.at_least)
            holds &= ok
        if not holds.any():
            continue
        band[holds] = i
        if b.declare is not None:
            number[holds] = NONE if b.value is None else q_scalar(b.value)
            less[holds] = b.value is None or b.value != 0
            fixed_text[i] = b.declare
        elif b.step is not None:
            number[holds] = _step_round(qv[holds], q_scalar(b.step), rule.tie)
            if rule.keep_trailing_zeros:
                places[holds] = max(0, -Decimal(str(b.step)).normalize().as_tuple().exponent)
        else:
            x = qv[holds]
            pos = x > 0
            digits = np.zeros_like(x)
            digits[pos] = np.floor(np.log10(x[pos].astype(float))).astype(np.int64) + 1
            p10 = np.power(10, np.clip(digits - 1, 0, 18)).astype(np.int64)  # float log10 at powers of ten
            digits = np.where(pos & (x < p10), digits - 1, digits)
            step = np.power(10, np.clip(digits - b.significant_figures, 0, 18)).astype(np.int64)
            r = np.where(pos, _step_round(x, step, rule.tie), 0)
            if b.min_step:
                r = _step_round(r, q_scalar(b.min_step), rule.tie)
            number[holds] = r
        open_ &= ~holds
    if open_.any():
        raise ValueError("no rounding band holds")  # guarded by the open last band
    return RoundedArray(number, band, _texts(band, number, places, fixed_text), less)


def _texts(band: np.ndarray, number: np.ndarray, places: np.ndarray, fixed_text: dict[int, str]) -> list[str]:
    """Printed texts of rounded numbers: each distinct (number, places) is formatted once (a range has
    far fewer distinct rounded figures than labels)."""
    if len(band) <= 32:  # a few labels: formatting each is cheaper than finding the distinct ones
        return [
            fixed_text[bi] if bi in fixed_text else text_of(num, None if pl < 0 else pl)
            for bi, num, pl in zip(band.tolist(), number.tolist(), places.tolist())
        ]
    out = np.empty(len(band), dtype=object)
    free = np.ones(len(band), dtype=bool)
    for i, t in fixed_text.items():
        hit = band == i
        out[hit] = t
        free &= ~hit
    for pl in np.unique(places[free]).tolist():
        sel = free & (places == pl)
        uniq, inv = np.unique(number[sel], return_inverse=True)
        ut = np.empty(len(uniq), dtype=object)
        ut[:] = [text_of(int(x), None if pl < 0 else int(pl)) for x in uniq.tolist()]
        out[sel] = ut[inv.reshape(-1)]
    return out.tolist()


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


def fill_amount(label: str, amount_text: str) -> str:
    """A row label that carries its amount ('Includes {amount} Added Sugars') with the amount filled in.

    The unit closes up to its number ('1g', as the US panel prints it) but the words of a "less than"
    form keep their spaces: 'Includes less than 1g Added Sugars'.
    """
    compact = "".join(amount_text.rsplit(" ", 1)) if " " in amount_text else amount_text
    return label.replace("{amount}", compact)


def plain_label(label: str) -> str:
    """A row label for places that print no amount beside it (tables, sheets): the template without its slot."""
    return " ".join(label.replace("{amount}", "").split())
