"""The parts of a label record: declaration, rows, claim verdicts, statement flags, assessment.

Plain data, filled by :mod:`labelcalc.labelling.record` from the engine's tables and read by every
output.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

from labelcalc.formulation.composition import Composition
from labelcalc.formulation.energy import EnergyResult
from labelcalc.labelling.engine import display_unit
from labelcalc.labelling.rounding import Rounded, fill_amount
from labelcalc.labelling.rulepack import RulePack

ELIGIBLE, NOT_ELIGIBLE, CANNOT_TELL = "eligible", "not eligible", "cannot tell"
BASIS_LABEL = {"per_100g": "per 100 g", "per_serving": "per serving", "per_container": "per container"}


@dataclass
class DeclaredRow:
    nutrient: str
    label: str
    unit: str
    requirement: str
    shown: bool
    why: str
    indent: int
    bold: bool
    show_unit: bool
    unrounded: dict[str, float | None]
    declared: dict[str, Rounded | None]
    percent: dict[str, str | None]
    percent_unrounded: dict[str, float | None]
    source: list[str]
    unknown_inputs: list[str] = field(default_factory=list)
    value_per_100g: float | None = None
    percent_only: bool = False
    unit_label: str | None = None

    def text(self, basis: str) -> str:
        """The figure as printed, with its unit."""
        r = self.declared.get(basis)
        if r is None:
            return "unknown"
        unit = self.unit_label or display_unit(self.unit)
        return f"{r.text} {unit}" if self.show_unit else r.text

    @property
    def amount_in_label(self) -> bool:
        """The label carries the amount itself, e.g. 'Includes {amount} Added Sugars'."""
        return "{amount}" in self.label

    def label_for(self, basis: str) -> str:
        if not self.amount_in_label:
            return self.label
        return fill_amount(self.label, self.text(basis))


@dataclass
class Declaration:
    market: str
    pack: RulePack
    composition: Composition
    columns: list[str]
    serving_g: float | None
    container_g: float | None
    servings_text: str | None
    single_serving: bool
    dual_column: bool
    reference_amount: tuple[str, float, str] | None  # (category, grams, citation)
    rows: list[DeclaredRow]
    declared_energy: EnergyResult
    available_energy: EnergyResult
    notes: list[str]
    reviews: list[str]
    values: dict = field(default_factory=dict, repr=False)  # nutrient -> (unrounded per 100 g, unknown inputs)
    # the labelling.record.LabelRecord this declaration belongs to (typed loosely: the record is built
    # from these parts, so naming its class here would tie the two modules in a loop)
    record: Any = field(default=None, repr=False, compare=False)

    @property
    def shown_rows(self) -> list[DeclaredRow]:
        return [r for r in self.rows if r.shown]

    def row(self, nutrient: str) -> DeclaredRow:
        for r in self.rows:
            if r.nutrient == nutrient:
                return r
        raise KeyError(nutrient)


@dataclass
class Figure:
    quantity: str
    basis: str
    value: float | None
    unit: str
    missing: str | None = None


@dataclass
class ClaimVerdict:
    claim: str
    label: str
    verdict: str
    failed: list[str]
    missing: list[str]
    figures: list[Figure]
    texts: list[str]
    citation: str
    confidence: str
    notes: list[str] = field(default_factory=list)
    intended: bool = False


@dataclass
class StatementFlag:
    statement: str
    text: str
    trigger: str
    figures: list[str]
    citation: str
    confidence: str
    caution: str | None
    placement: str | None
    status: str = "required"  # or "review", or "if a claim is made"


@dataclass
class Assessment:
    market: str
    declaration: Declaration
    claims: list[ClaimVerdict]
    statements: list[StatementFlag]
    allergens: dict
    ingredient_list: dict | None
    front_of_pack: list[dict]
    reviews: list[str]
