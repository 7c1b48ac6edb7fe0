"""Rule-pack sections for claims, statements, allergens, ingredient lists and
front-of-pack schemes (the data ``assess.py`` applies).

They are optional sections of the same market pack as the panel rules.
"""

from __future__ import annotations

from functools import cached_property
from typing import Literal

from pydantic import BaseModel, ConfigDict, Field, model_validator

from labelcalc.formulation.energy import Confidence
from labelcalc.intake.quantities import Number

ClaimBasis = Literal[
    "per_reference_amount",
    "per_serving",
    "per_50g_if_small",
    "per_100g",
    "per_100kcal",
    "percent_energy",
    "per_100g_or_100ml",
]


class Strict(BaseModel):
    model_config = ConfigDict(extra="forbid")


class Condition(Strict):
    """A comparison of one unrounded figure with a limit.

    ``quantity`` is a nutrient key of the pack.  With ``versus_reference`` the
    compared figure is the change against the formula's reference formula:
    ``reduction_percent`` = (ref - this) / ref x 100, ``increase_percent``,
    ``reduction_absolute`` = ref - this (in the nutrient's unit).
    """

    quantity: str
    basis: ClaimBasis
    op: Literal["<", "<=", ">", ">="]
    value: Number
    kcal_per_g: Number | None = Field(
        None, description="for percent_energy: the energy factor of the quantity [kcal/g]"
    )
    versus_reference: Literal["reduction_percent", "increase_percent", "reduction_absolute"] | None = None
    note: str | None = None

    @model_validator(mode="after")
    def _energy(self):
        if self.basis == "percent_energy" and self.kcal_per_g is None:
            raise ValueError("a percent_energy condition needs kcal_per_g")
        return self


class ClaimText(Strict):
    text: str
    citation: str
    confidence: Confidence
    unless_eligible: list[str] = Field(
        default_factory=list, description="not needed when one of these claims is eligible (e.g. low_calorie)"
    )


class Claim(Strict):
    id: str = Field(pattern=r"^[a-z][a-z0-9_]*$")
    label: str
    kind: Literal["absolute", "comparative"] = "absolute"
    applies_to: Literal["any", "solid", "liquid"] = "any"
    conditions: list[Condition] = Field(default_factory=list, description="all must hold")
    alternatives: list[list[Condition]] = Field(
        default_factory=list, description="at least one group must hold in full"
    )
    no_ingredient_kinds: list[str] = Field(
        default_factory=list,
        description="an added ingredient of these kinds needs review (e.g. allowed with a footnote)",
    )
    fails_with_ingredient_kinds: list[str] = Field(
        default_factory=list,
        description="an added ingredient of these kinds makes the claim not eligible (e.g. no added sugars)",
    )
    reference_must_not_qualify: str | None = Field(
        None, description="id of a claim the reference food may not itself meet"
    )
    texts: list[ClaimText] = Field(default_factory=list, description="text the label must carry with the claim")
    citation: str = Field(min_length=3)
    confidence: Confidence

    @model_validator(mode="after")
    def _some(self):
        if not self.conditions and not self.alternatives and not self.fails_with_ingredient_kinds:
            raise ValueError("a claim needs conditions, alternatives or fails_with_ingredient_kinds")
        uses_ref = any(c.versus_reference for c in self.conditions + [x for g in self.alternatives for x in g])
        if uses_ref and self.kind != "comparative":
            raise ValueError("conditions against the reference formula need kind: comparative")
        return self


class StatementTrigger(Strict):
    """One way a statement becomes required (a statement's triggers are alternatives).

    ``all_of`` makes a trigger that holds only when every sub-trigger holds (e.g. an added
    sugar AND a sweetener); it cannot be mixed with the other criteria of the same trigger.
    """

    all_of: list[StatementTrigger] | None = Field(
        None, min_length=2, description="holds when every one of these sub-triggers holds"
    )
    substance: str | None = Field(None, description="an ingredient with this substance is used (e.g. aspartame)")
    kind: str | None = Field(None, description="an ingredient of this kind is used (e.g. sweetener)")
    components: list[str] | None = Field(None, description="sum of these components (or derived totals) ...")
    from_kinds: list[str] | None = Field(
        None, description="... counting only what ingredients of these kinds bring (e.g. added polyols)"
    )
    basis: Literal["per_100g", "per_100ml", "per_serving"] = Field(
        "per_100g", description="per_100ml needs the formula's density"
    )
    form: Literal["any", "solid", "liquid"] = Field("any", description="the trigger holds only for this form")
    header_flag: Literal["packed_in_protective_atmosphere"] | None = Field(
        None, description="the formula's header sets this flag"
    )
    at_least: Number | None = None
    above: Number | None = None
    present: bool | None = Field(None, description="true: any amount above zero")
    with_claim: bool | None = Field(None, description="only when a claim is made (or eligible)")
    conditions: list[Condition] = Field(default_factory=list, description="with with_claim: any of these conditions")

    @model_validator(mode="after")
    def _one_kind(self):
        if self.all_of is not None and (
            self.substance or self.kind or self.components or self.with_claim or self.conditions or self.header_flag
        ):
            raise ValueError("a trigger with all_of holds only sub-triggers; put every criterion inside all_of")
        return self

    def flat(self) -> list[StatementTrigger]:
        """This trigger and every sub-trigger, depth first."""
        return [self] + [x for t in self.all_of or [] for x in t.flat()]


class Compensation(Strict):
    """Amounts a market requires to be added per gram of a component (e.g. vitamins per g of a non-absorbed lipid)."""

    per_gram_of: str
    required: dict[str, Number] = Field(description="component -> amount per gram, in the component's own unit")
    from_kinds: list[str] = Field(
        default_factory=lambda: ["fortificant"], description="ingredient kinds that count as added"
    )
    notes: str | None = None


class Statement(Strict):
    id: str = Field(pattern=r"^[a-z][a-z0-9_]*$")
    text: str
    status: Literal["required", "review"] = Field(
        "required", description="review: an advisory note for a regulatory professional, not a label text"
    )
    triggers: list[StatementTrigger] = Field(min_length=1)
    caution: str | None = None
    placement: str | None = None
    compensation: Compensation | None = None
    daily_intake_g: Number | None = Field(
        None, description="intake per day that triggers the statement (for a servings-to-reach figure)"
    )
    citation: str = Field(min_length=3)
    confidence: Confidence


class AllergenEntry(Strict):
    name: str = Field(description="the name the market prescribes in the statement")
    from_keys: list[str] = Field(description="library allergen keys that map to this entry")
    threshold_mg_per_kg: Number | None = Field(None, description="declared only from this level (sulphites)")
    threshold_inclusive: bool = Field(True, description="true: declared at the threshold; false: only above it")
    component: str | None = Field(None, description="component holding the amount for a threshold (e.g. sulphites)")
    name_species: bool = Field(False, description="the specific kind must be named (e.g. the tree nut)")
    name_second: str | None = Field(None, description="the name in the market's second official language")

    @cached_property
    def key_set(self) -> frozenset[str]:
        """``from_keys`` as a set, made once (the allergen report runs for every label)."""
        return frozenset(self.from_keys)


class Allergens(Strict):
    entries: dict[str, AllergenEntry]
    summary_prefix: str = "Contains:"
    summary_prefix_second: str | None = Field(None, description="the summary's opening in the second language")
    summary: Literal["required", "optional", "when_not_in_list"] = "optional"
    emphasis: Literal["bold", "parentheses", "bold_and_summary"] = "bold"
    citation: str = Field(min_length=3)
    confidence: Confidence

    @cached_property
    def _hit_memo(self) -> dict[tuple[str, ...], tuple[str, ...]]:
        return {}

    def entries_hit(self, keys: list[str]) -> tuple[str, ...]:
        """The entries (in pack order) an ingredient with these library allergen keys falls under; worked out
        once per distinct set of keys (the allergen report runs for every label)."""
        memo = self._hit_memo
        k = tuple(keys)
        got = memo.get(k)
        if got is None:
            have = set(keys)
            got = memo[k] = tuple(key for key, e in self.entries.items() if not e.key_set.isdisjoint(have))
        return got


class QuidRule(Strict):
    for_ingredients_named_in: Literal["product_name"] = "product_name"
    basis: Literal["at_time_of_use_per_finished"] = "at_time_of_use_per_finished"
    over_100_text: str = Field(
        "made with {grams:g} g of {name} per 100 g of product",
        description="wording when moisture loss makes the share exceed 100 %",
    )
    citation: str = Field(min_length=3)
    confidence: Confidence


class ClassName(Strict):
    """How a market names one functional class of additives: for one additive, and for several."""

    one: str
    many: str


class IngredientListRule(Strict):
    heading: str = "Ingredients:"
    heading_second: str | None = Field(
        None, description="heading of the ingredient list in the second official language (a list is drafted for it)"
    )
    second_language: str | None = Field(
        None, description="language code of the second list's names (library and sub-formula 'label_names')"
    )
    functional_classes: dict[str, ClassName] = Field(
        default_factory=dict,
        description="library functional_class -> the class name the market prints before (or after) the additive",
    )
    functional_class_style: Literal["class_colon", "class_parentheses", "name_then_class"] = Field(
        "class_colon",
        description="class_colon: 'Sweeteners: aspartame, acesulfame K'; class_parentheses: 'Sweeteners "
        "(aspartame, acesulfame K)'; name_then_class: 'sodium benzoate (preservative)'",
    )
    functional_classes_citation: str | None = None
    kind_groups: dict[str, ClassName] = Field(
        default_factory=dict,
        description="ingredient kind -> a heading under which all such ingredients are listed together, in "
        "parentheses and lower case, placed by their total weight (e.g. Canada's 'Sugars (...)')",
    )
    kind_groups_citation: str | None = None
    order: Literal["weight_at_use"] = "weight_at_use"
    water: Literal["as_used", "finished_product"] = Field(
        "as_used", description="finished_product: added water by its weight in the finished product"
    )
    water_omit_up_to_percent: Number | None = Field(
        None, description="added water at or below this % of the finished product need not be listed"
    )
    compound: Literal["components_in_parentheses"] = "components_in_parentheses"
    quid: QuidRule | None = None
    citation: str = Field(min_length=3)
    confidence: Confidence


class FopBand(Strict):
    low_up_to: Number = Field(description="per 100 g: low at or below this")
    high_above: Number = Field(description="per 100 g: high above this")
    portion_high_above: Number | None = Field(None, description="per portion: high above this")
    unit: str


class FopAudience(Strict):
    """Other reference values and thresholds of a 'high in' scheme for foods a formula header flag names
    (e.g. foods intended solely for young children)."""

    header_flag: Literal["solely_for_young_children"]
    name: str = Field(description="who the food is for, in words")
    high_in: dict[str, str] = Field(description="nutrient -> reference value key for this audience")
    thresholds: list[dict] = Field(min_length=1, description="as the scheme's thresholds")
    citation: str = Field(min_length=3)
    confidence: Confidence


class FrontOfPack(Strict):
    id: str
    name: str
    kind: Literal["colour_bands", "high_in_symbol"]
    nutrients: dict[str, FopBand] | None = None
    liquid_nutrients: dict[str, FopBand] | None = None
    portion_rule_above_g: Number | None = Field(
        None, description="foods: per-portion limits apply above this portion [g]"
    )
    liquid_portion_rule_above_ml: Number | None = Field(
        None, description="drinks (liquid_nutrients): per-portion limits apply above this portion [ml]"
    )
    high_in: dict[str, str] | None = Field(None, description="nutrient -> reference value key (high_in_symbol)")
    thresholds: list[dict] | None = Field(
        None, description="[{reference_amount_up_to: 30, percent: 10}, {main_dish: true, percent: 30}, {percent: 15}]"
    )
    exempt_kinds: list[str] = Field(default_factory=list)
    audiences: list[FopAudience] = Field(
        default_factory=list, description="high_in_symbol: other values for foods a header flag names"
    )
    citation: str = Field(min_length=3)
    confidence: Confidence


class ToleranceBand(Strict):
    """Allowed deviation of an analysed value from the declared one, for declared amounts in a range."""

    below: Number | None = Field(None, description="band holds when the declared value (per 100 g) is below this")
    minus: Number | None = Field(None, ge=0, description="allowed shortfall, absolute, in the nutrient's unit")
    plus: Number | None = Field(None, ge=0, description="allowed excess, absolute")
    minus_percent: Number | None = Field(None, ge=0)
    plus_percent: Number | None = Field(None, ge=0)


class ComplianceRule(Strict):
    """How an analysed value is judged against a declared one (a market's compliance rule)."""

    id: str
    nutrients: list[str] = Field(min_length=1, description="pack nutrient keys the rule covers")
    applies_to: Literal["any", "added", "naturally_occurring"] = Field(
        "any", description="added: the nutrient is added (fortificant ingredients); naturally_occurring: it is not"
    )
    only_if_all_of: dict[str, str] | None = Field(
        None,
        description="{part: whole}: the rule applies only when the part component is the whole of the other "
        "(e.g. {added_sugars: sugars}: every sugar in the food is added)",
    )
    basis: Literal["per_100g", "per_serving"] = "per_100g"
    compare_with: Literal["declared", "unrounded"] = "declared"
    min_percent_of_declared: Number | None = None
    max_percent_of_declared: Number | None = None
    bands: list[ToleranceBand] = Field(default_factory=list)
    uncertainty: Literal["included", "widens"] = Field(
        "included",
        description="included: the limits already allow for measurement uncertainty; widens: the lab's expanded uncertainty is added",
    )
    citation: str = Field(min_length=3)
    confidence: Confidence
    note: str | None = None


class Compliance(Strict):
    rules: list[ComplianceRule]
    default_uncertainty_note: str | None = None
    citation: str = Field(min_length=3)
    confidence: Confidence
