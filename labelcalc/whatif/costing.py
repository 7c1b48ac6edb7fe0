"""Ingredient cost of a formula per batch, per kg of finished product and per serving.

Prices come from the library entries (``price: {per_kg, currency}``) or a
separate price file (YAML ``prices: {ingredient_id: {per_kg, currency}}``),
which overrides them.  Costs follow the grams of each ingredient *used* per
finished product, so water lost in processing makes a kilogram of product
dearer; oil counts at the amount taken up.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

from pydantic import BaseModel, ConfigDict, ValidationError

from labelcalc.errors import InputError, Problem
from labelcalc.formulation.composition import Composition
from labelcalc.intake.ingredient import Price
from labelcalc.yamlsafe import load_yaml, pydantic_problems


class PriceFile(BaseModel):
    model_config = ConfigDict(extra="forbid")
    prices: dict[str, Price]


def load_prices(path: str | Path) -> dict[str, Price]:
    loaded = load_yaml(path)
    try:
        return PriceFile.model_validate(loaded.data).prices
    except ValidationError as exc:
        raise InputError(pydantic_problems(exc, loaded)) from None


@dataclass
class Cost:
    currency: str | None
    per_kg: float | None
    per_serving: float | None
    per_batch: float | None
    missing_prices: list[str]
    by_ingredient_per_kg: dict[str, float]


def cost_of(comp: Composition, prices: dict[str, Price] | None = None) -> Cost:
    """Cost per kg of finished product (and per serving, per batch); unknown when a price is missing."""
    prices = prices or {}
    used = {i.id: i for i in comp.formula.ingredients_used()}
    per_kg: dict[str, float] = {}
    missing, currencies = [], set()
    for ing_id, g100 in comp.leaf_amounts().items():
        if g100 <= 0:
            continue
        price = prices.get(ing_id) or used[ing_id].price
        if price is None:
            missing.append(ing_id)
            continue
        currencies.add(price.currency)
        per_kg[ing_id] = g100 * 10 / 1000 * price.per_kg  # g per kg of product x price per g
    if len(currencies) > 1:
        raise InputError(
            Problem(
                f"prices are in several currencies ({', '.join(sorted(currencies))})",
                fix="give every price in one currency",
            )
        )
    cur = next(iter(currencies), None)
    total = None if missing else sum(per_kg.values())
    s = comp.formula.serving_grams()
    return Cost(
        cur,
        total,
        None if total is None or s is None else total * s / 1000,
        None if total is None else total * comp.finished_grams / 1000,
        sorted(missing),
        per_kg,
    )
