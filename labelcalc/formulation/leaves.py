"""A finished product traced to its leaf ingredients and processing effects.

Every gram of the finished product comes from a library ingredient (through any depth of
sub-formulas) or is changed by a processing step: water lost, oil taken up (and which oil,
itself traced through a frying blend).  :func:`leaf_lines` lists these as lines, each with its
contribution to every component per 100 g of finished product; the lines add up to the
composition (unknown cells stay NaN).  The label record reads them to explain each figure.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from labelcalc.formulation.composition import COL, COLUMNS, Composition, ingredient_row
from labelcalc.intake.formula import Formula
from labelcalc.intake.ingredient import Ingredient

INGREDIENT, WATER_LOST, OIL_TAKEN_UP = "ingredient", "water lost", "oil taken up"


@dataclass
class LeafLine:
    """One leaf of the product: an ingredient as used, oil taken up, or water lost."""

    kind: str  # INGREDIENT, WATER_LOST or OIL_TAKEN_UP
    path: tuple[str, ...]  # the sub-formulas (and processing step) it comes through, outermost first
    ingredient: Ingredient | None
    grams: float  # [g per 100 g of finished product], as used (negative for water lost)
    contribution: np.ndarray  # over COLUMNS [per 100 g of finished product]; NaN = unknown

    @property
    def name(self) -> str:
        if self.ingredient is None:
            return "water"
        return self.ingredient.id

    def where(self) -> str:
        """The route to this line, e.g. 'hl_kettle_base_fried_lite > frying'."""
        return " > ".join(self.path)


def leaf_lines(comp: Composition) -> list[LeafLine]:
    """The leaf lines of ``comp`` (see the module docstring)."""
    cache = comp.__dict__.get("_leaf_lines")
    if cache is not None:
        return cache
    out: list[LeafLine] = []
    rows: dict[str, np.ndarray] = {}

    def row(ing: Ingredient) -> np.ndarray:
        if ing.id not in rows:
            rows[ing.id] = ingredient_row(ing)
        return rows[ing.id]

    def walk(f: Formula, factor: float, path: tuple[str, ...], kind: str) -> None:
        for ln in f.lines:
            g = ln.grams * factor
            if ln.ingredient is not None:
                out.append(LeafLine(kind, path, ln.ingredient, g, g * row(ln.ingredient) / 100.0))
            elif ln.formula is not None:
                sub = ln.formula
                walk(sub, g / comp.finished_grams_of(sub), (*path, sub.id), kind)
        for st, res in zip(f.steps, comp.steps_of(f)):
            here = (*path, st.name) if f is not comp.formula else (st.name,)
            if res.water_lost_g:
                v = np.zeros(len(COLUMNS))
                v[COL["water"]] = -res.water_lost_g * factor
                out.append(LeafLine(WATER_LOST, here, None, -res.water_lost_g * factor, v))
            if res.oil_taken_up_g > 0:
                g = res.oil_taken_up_g * factor
                if st.oil_ingredient is not None:
                    out.append(LeafLine(OIL_TAKEN_UP, here, st.oil_ingredient, g, g * row(st.oil_ingredient) / 100.0))
                elif st.oil_formula is not None:
                    blend = st.oil_formula
                    walk(blend, g / comp.finished_grams_of(blend), (*here, blend.id), OIL_TAKEN_UP)

    walk(comp.formula, 100.0 / comp.finished_grams, (), INGREDIENT)
    comp.__dict__["_leaf_lines"] = out
    return out
