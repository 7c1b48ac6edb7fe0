"""What the labelling engine's tables hold: the attributes its parts (claims, statements, front of pack)
read.  :class:`labelcalc.labelling.engine.LabelEngine` fills them; the parts are written against this
declaration so each can live in its own module."""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

import numpy as np

from labelcalc.labelling.rounding import RoundedArray
from labelcalc.labelling.rulepack import RulePack

if TYPE_CHECKING:
    from labelcalc.formulation.composition import Composition
    from labelcalc.formulation.energy import EnergyResult
    from labelcalc.intake.formula import Formula


class EngineTables:
    """Attributes of the engine's tables (one entry per labelled product unless said otherwise)."""

    pack: RulePack
    rules_root: str | None
    n: int  # number of products labelled
    comps: list[Composition]
    _references: list[Composition | None]
    V: np.ndarray  # (products x columns) composition per 100 g, NaN where unknown
    U: np.ndarray  # unknown mask of V
    U_parts: np.ndarray  # unknown mask where a part of a whole (soluble fibre) cannot be told
    val: dict[str, np.ndarray]  # nutrient -> per 100 g, NaN where unknown
    serving: np.ndarray  # [g], NaN where none
    container: np.ndarray  # [g], NaN where none
    ref_g: np.ndarray  # reference amount [g], NaN where none
    small: np.ndarray  # the reference amount is small (30 g or less, or as the pack says)
    forms: np.ndarray  # "solid" / "liquid"
    liquid: np.ndarray
    density: np.ndarray  # [g/ml], NaN where not given
    energy_kcal_key: str | None
    bases: list[str]  # every column the pack may print
    has_col: dict[str, np.ndarray]  # column -> the product prints it
    rounded: dict[str, dict[str, RoundedArray]]  # nutrient -> column -> rounded figures
    shown: dict[str, np.ndarray]  # nutrient -> the row is printed

    @property
    def products(self) -> list[Formula]:
        raise NotImplementedError

    @property
    def kinds(self) -> list[set[str]]:
        raise NotImplementedError

    @property
    def products_by_kind(self) -> dict[str, list[int]]:
        raise NotImplementedError

    @property
    def products_by_substance(self) -> dict[str, list[int]]:
        raise NotImplementedError

    def column_values(self, key: str, basis: str) -> np.ndarray:
        raise NotImplementedError

    def ingredients_of_kinds(self, kinds: list[str]) -> dict[int, list[str]]:
        raise NotImplementedError

    def declared_energy(self, i: int) -> EnergyResult:
        raise NotImplementedError

    def new_engine(self, comps: list[Composition]) -> Any:
        """An engine of the same pack and rules over other compositions (the reference formulas)."""
        raise NotImplementedError
