"""Market rule packs: the data that turns one composition into a market's panel.

A pack is one YAML file in ``rules/markets/`` (see DEVELOPERS.md, "Adding a
market").  The engine (``declare.py``) knows no market by name: everything a
market does differently is in its pack, each value with its citation and a
confidence mark.
"""

from __future__ import annotations

import difflib
from functools import lru_cache
from pathlib import Path
from typing import Literal

from pydantic import BaseModel, ConfigDict, Field, PrivateAttr, ValidationError, model_validator

from labelcalc import components as C
from labelcalc.errors import InputError, Problem, ProblemList, RuleError, UnknownNameError
from labelcalc.formulation.energy import Confidence, load_factor_set, rules_dir
from labelcalc.intake.quantities import Number
from labelcalc.labelling.packmarket import market_of
from labelcalc.labelling.rounding import RoundingRule
from labelcalc.labelling.rulepack_assess import Allergens, Claim, Compliance, FrontOfPack, IngredientListRule, Statement
from labelcalc.yamlsafe import load_yaml, pydantic_problems

Basis = Literal["per_100g", "per_serving", "per_container"]


class Strict(BaseModel):
    model_config = ConfigDict(extra="forbid")


class Instrument(Strict):
    id: str
    title: str
    date: str = Field(description="date of the version read (YYYY-MM-DD or YYYY)")
    url: str | None = None


class PackHeader(Strict):
    market: str = Field(pattern=r"^[a-z][a-z0-9_]*$")
    name: str
    version: str
    language: str = "en"
    reviewed: str = Field(description="date the pack was last checked against the instruments")
    instruments: list[Instrument] = Field(min_length=1)
    draft_notice: str = "DRAFT — verify against current local regulation before use"
    notes: str | None = None


class Cited(Strict):
    citation: str = Field(min_length=3)
    confidence: Confidence


class ReferenceAmount(Cited):
    amount_g: Number = Field(gt=0, description="[g] reference amount customarily consumed")
    label: str | None = None
    small: bool | None = Field(None, description="true when the market treats it as a small reference amount")


class DualColumn(Cited):
    from_percent: Number = Field(gt=0, description="container at or above this % of the reference amount ...")
    to_percent: Number = Field(gt=0, description="... and at or below this % gets a second, per-container column")


class StatedServingCheck(Cited):
    """How a formula's stated serving is checked against the market's reference amount rules (the label
    record's checks): below ``single_serving_below_percent`` of the reference amount the serving must be the
    net quantity; at or above it the serving follows ``multi_serving`` (words of the rule, shown for review)."""

    single_serving: str = Field(description="why a package below the limit is one serving (words, with citation)")
    single_serving_same_unit: str | None = Field(
        None,
        description="set when a one-serving package states its serving in the net quantity's kind of unit (mass: g, "
        "volume: mL); the words, with citation",
    )
    whole_package_above_limit: str | None = Field(
        None, description="when a package at or above the limit may still be one serving (review words)"
    )
    multi_serving: str = Field(description="what a multiple-serving package's serving must follow (review words)")


class Servings(Strict):
    required: bool = Field(description="the market's panel needs a serving size")
    reference_amounts: dict[str, ReferenceAmount] = Field(default_factory=dict)
    reference_amount_required: bool = False
    single_serving_below_percent: Number | None = Field(
        None, description="container below this % of the reference amount is one serving"
    )
    single_serving: Cited | None = None
    stated_serving_check: StatedServingCheck | None = Field(
        None, description="check the formula's stated serving against the reference amount rules"
    )
    dual_column: DualColumn | None = None
    servings_rounding: str | None = Field(None, description="rounding rule key for servings per container")
    about_prefix: str | None = Field(None, description="word printed before a rounded number of servings, e.g. 'about'")


class NutrientDef(Cited):
    """How a declared nutrient is built from labelcalc components."""

    unit: Literal["g", "mg", "ug", "kJ", "kcal"]
    sum: dict[str, Number] | None = Field(None, description="component (or derived total) -> factor into this unit")
    energy: Literal["kJ", "kcal"] | None = Field(None, description="this row is the declared energy in that unit")

    @model_validator(mode="after")
    def _what(self):
        if (self.sum is None) == (self.energy is None):
            raise ValueError("a nutrient is built from 'sum' (components) or is 'energy'")
        if self.sum:
            for k in self.sum:
                if k not in C.BY_KEY and k not in C.DERIVED:
                    near = difflib.get_close_matches(k, list(C.BY_KEY) + list(C.DERIVED), n=2)
                    raise ValueError(
                        f"unknown component '{k}'" + (f" (did you mean {', '.join(near)}?)" if near else "")
                    )
        return self


class ReferenceValue(Cited):
    amount: Number = Field(gt=0)
    unit: Literal["g", "mg", "ug", "kJ", "kcal"]


class Trigger(Strict):
    """When a row must be shown.  Every criterion set in one trigger must hold
    (AND); a row's triggers are alternatives (OR)."""

    claim: str | None = Field(None, description="shown when the formula lists a claim whose name starts with this")
    present: bool | None = Field(None, description="shown when the declared value is not zero")
    added: str | None = Field(
        None, description="shown when an ingredient of this kind is added (e.g. 'polyol', 'fortificant')"
    )
    at_least_percent_reference: Number | None = Field(
        None, description="shown when per 100 g it reaches this % of its reference value"
    )
    at_least_per_100g: Number | None = Field(None, description="shown when per 100 g it reaches this amount")
    reference_basis: Literal["per_100g", "per_100ml", "per_container_if_single"] = Field(
        "per_100g",
        description="basis of at_least_percent_reference: per 100 g, per 100 ml (needs the density), or per "
        "package when the package is a single portion",
    )
    form: Literal["any", "solid", "liquid"] = Field("any", description="the trigger holds only for this form")
    claim_about: str | None = Field(
        None, description="shown when the formula lists a claim whose name contains this (e.g. 'vitamin_c')"
    )
    added_source: str | None = Field(
        None,
        description="shown when an ingredient of this kind (e.g. 'fortificant') brings this row's nutrient",
    )


class Row(Strict):
    nutrient: str
    label: str
    requirement: Literal["mandatory", "voluntary", "conditional"]
    when: list[Trigger] = Field(default_factory=list, description="conditional rows: any trigger shows the row")
    show: Literal["always", "when_present", "never"] = Field(
        "when_present", description="voluntary rows: default display"
    )
    rounding: str
    percent: str | None = Field(None, description="reference value key for the percentage column")
    percent_rounding: str | None = None
    percent_from: Literal["declared", "unrounded"] | None = None
    percent_of_declared_sum: list[str] = Field(
        default_factory=list,
        description="with percent_from declared: the percentage is taken from the sum of these rows' declared "
        "amounts (e.g. Canada's saturated + trans from the declared saturated and trans amounts)",
    )
    indent: int = Field(0, ge=0, le=3)
    bold: bool = False
    italic_words: list[str] = Field(
        default_factory=list, description="words of the label printed in italics (e.g. 'Trans')"
    )
    show_unit: bool = True
    percent_only: bool = Field(
        False, description="the row prints only its percentage (e.g. Canada's 'Saturated + Trans')"
    )
    citation: str = Field(min_length=3)
    label_second: str | None = Field(
        None, description="the label in the market's second official language, printed after ' / ' (Canada)"
    )
    confidence: Confidence


class Footnote(Cited):
    text: str
    text_second: str | None = Field(None, description="the footnote in the second official language (next line)")
    when: Literal["always", "percent_shown"] = "always"


class NotComputed(Cited):
    """A method the law allows that cannot be computed from a formula, and why."""

    why: str = Field(min_length=10)


class ServingLinesType(Cited):
    """Type of the servings and serving size lines where the law sets it (sizes in pt).

    Left out of a pack, the lines keep the drawing's own proportions: the servings line at the body size, the
    serving size line 1.15 x the body (bold) for ``label_and_amount`` or 1.1 x (regular) for ``per_line``.
    """

    servings_pt: Number | None = Field(
        None, gt=5, le=24, description="the servings line ('N servings per container'); null: the body size"
    )
    serving_pt: Number | None = Field(None, gt=5, le=24, description="the serving size line; null: the style's size")
    serving_min_pt: Number | None = Field(
        None,
        gt=5,
        le=24,
        description="smallest size the serving size line may be set at when it does not fit the panel's widest "
        "width; below it the size moves to a line of its own, right-aligned. null: the drawing's own floor (5 pt)",
    )
    serving_bold: bool | None = Field(
        None, description="serving size line in bold; null: bold for label_and_amount, regular for per_line"
    )

    @model_validator(mode="after")
    def _min_below_size(self):
        if self.serving_min_pt is not None and self.serving_pt is not None and self.serving_min_pt > self.serving_pt:
            raise ValueError(f"serving_min_pt ({self.serving_min_pt}) is larger than serving_pt ({self.serving_pt})")
        return self


class NutrientLinesType(Cited):
    """Spacing and emphasis of the nutrient lines (the rows under the large energy row) where the law sets them.

    Left out of a pack, the rows keep the drawing's own spacing and every percentage is bold.
    """

    leading_pt: Number | None = Field(
        None,
        ge=0,
        le=12,
        description="least space (pt) between a nutrient line and the line above or below it: the bodies of the "
        "two lines (the type size, split above and below the baseline in the font's proportions) at least this "
        "far apart, the rule between them centred in the clear space; null: the drawing's own spacing",
    )
    percent_bold_for: list[str] | None = Field(
        None,
        description="nutrient keys whose percentage is printed bold; every other percentage in regular type. "
        "null: every percentage bold",
    )


class TitleRuleType(Cited):
    """The rule under the title where the law places it between the title and the first line under it.

    Left out of a pack, the rule keeps the drawing's own place (close under the title).
    """

    leading_pt: Number = Field(
        ge=0,
        le=12,
        description="least space (pt) between the body of the title and the body of the line under it (each the "
        "type size, split above and below the baseline in the font's proportions); the rule is centred in the "
        "clear space between them",
    )
    weight_pt: Number = Field(0.6, gt=0, le=4, description="weight of the rule")


class ColumnRulesType(Cited):
    """Vertical lines between the columns of a panel with two or more columns of figures, where the law asks for them.

    Left out of a pack, a panel with several columns has no vertical lines.
    """

    weight_pt: Number = Field(0.5, gt=0, le=4, description="weight of each vertical line")
    left_of_first: bool = Field(
        True, description="also a line between the nutrient names and the first column of figures"
    )


class PanelLayout(Strict):
    """How the panel is drawn, where the law prescribes a form (sizes in mm and pt).

    The renderer (``labelcalc.outputs.panelpdf``) reads only these fields: a new market's form is
    data here, never a branch on the market code.
    """

    style: Literal["boxed", "table"] = Field("table", description="boxed: framed facts box; table: ruled table")
    width_mm: Number = Field(80, gt=30, le=200, description="narrowest width; the panel grows to fit its rows")
    max_width_mm: Number = Field(120, gt=30, le=250, description="widest the panel may grow before labels wrap")
    title_size_pt: Number = Field(11, gt=5, le=40)
    title_second: str | None = Field(None, description="the title in the second official language, stacked below")
    body_size_pt: Number = Field(7.5, gt=5, le=14)
    energy_large: bool = Field(False, description="print the first energy row large (as in a facts box)")
    energy_size_factor: Number = Field(1.9, ge=1, le=3, description="size of the large energy row, x body size")
    energy_amount: Literal["right", "after_label"] = Field(
        "right", description="large energy row: figure right-aligned, or right after the label"
    )
    energy_rule_partial: bool = Field(
        False, description="the heavy rule under the large energy row ends after its figure"
    )
    heavy_rule_after: list[str] = Field(
        default_factory=list, description="nutrient keys after which a heavy rule is drawn"
    )
    heavy_rule_pt: Number = Field(2.5, gt=0, le=12, description="weight of a heavy rule")
    no_rule_after: list[str] = Field(
        default_factory=list, description="nutrient keys after which no rule is drawn (rows grouped together)"
    )
    rule_before_footnotes_pt: Number | None = Field(None, description="weight of the rule above the footnotes")
    serving_lines_on_top: bool = Field(False, description="servings per container and serving size above the rows")
    serving_style: Literal["label_and_amount", "per_line"] = Field(
        "label_and_amount",
        description="label_and_amount: 'Serving size' left, the size right, bold; per_line: 'Per 28 g' "
        "(and its second-language line)",
    )
    serving_household: bool = Field(True, description="print the formula's household measure with the size")
    second_language: str | None = Field(
        None,
        description="language code of the second serving line; the household measure is printed only when the "
        "formula gives it in that language too (serving.household_names)",
    )
    serving_rule_pt: Number | None = Field(None, description="rule under the serving lines (default 4 boxed, 1 table)")
    serving_type: ServingLinesType | None = Field(
        None, description="type sizes (and bold) of the servings and serving size lines where the law sets them"
    )
    serving_note: str | None = Field(
        None, description="a review note printed under the panel about the serving declaration"
    )
    nutrient_lines: NutrientLinesType | None = Field(
        None, description="spacing of the nutrient lines and which percentages are bold, where the law sets them"
    )
    title_rule: TitleRuleType | None = Field(
        None, description="place of the rule under the title, where the law centres it between the lines of text"
    )
    column_rules: ColumnRulesType | None = Field(
        None,
        description="vertical lines separating the columns of figures of a panel with two or more columns, where "
        "the law asks for them",
    )
    column_headers: dict[str, str] = Field(default_factory=dict, description="basis -> header text")
    header_note: str | None = Field(None, description="a line under the title, e.g. 'Amount per serving'")
    percent_header: Literal["columns", "below_energy", "energy_line"] = Field(
        "columns",
        description="where the percentage heading goes: in the column headings; on its own line under the rule "
        "below the large energy row; or right-aligned on the energy row",
    )
    percent_label_second: str | None = Field(None, description="percentage heading in the second language")
    percent_label_short: str | None = Field(None, description="percentage heading over each column of a dual panel")
    percent_spaced: bool = Field(False, description="print '5 %' rather than '5%'")
    amount_after_label: bool = Field(
        False, description="print the amount right after the row label (one-column facts boxes)"
    )
    compact_units: bool = Field(False, description="print '8g' rather than '8 g' after the label")
    servings_text: str | None = Field(
        "{n} servings per container", description="wording of the servings line ({n}); null: no servings line"
    )
    servings_text_one: str | None = Field(None, description="wording of the servings line when there is one serving")
    serving_text: str = Field("Serving size", description="label of the serving size line")
    serving_text_second: str | None = Field(None, description="the serving label in the second language")
    citation: str | None = None


class Panel(Strict):
    title: str
    energy_factor_set: str
    bases: list[Basis] = Field(min_length=1, description="columns the market prints, in order")
    rounding_basis: Literal["per_100g", "per_serving", "each"] = Field(
        "each", description="which column's value is rounded (each = every column on its own)"
    )
    percent_label: str | None = None
    percent_basis: Basis | None = None
    percent_from: Literal["declared", "unrounded"] = "declared"
    percent_from_citation: str | None = None
    column_labels: dict[str, str] = Field(default_factory=dict)
    unit_labels: dict[str, str] = Field(default_factory=dict, description="how units are printed, e.g. {ug: mcg}")
    audience_reviews: dict[Literal["solely_for_young_children"], str] = Field(
        default_factory=dict,
        description="formula header flag -> review printed with the panel (values the panel does not apply)",
    )
    energy_factor_sets_allowed: list[str] = Field(
        default_factory=list,
        description="other factor sets the law allows; a formula may pick one (product.energy_methods)",
    )
    energy_methods_not_computed: dict[str, NotComputed] = Field(
        default_factory=dict,
        description="methods the law allows that labelcalc cannot compute from a formula (id -> why, with citation)",
    )
    footnotes: list[Footnote] = Field(default_factory=list)
    liquid_unit_basis: str = "per 100 ml"
    layout: PanelLayout = Field(default_factory=PanelLayout)
    citation: str = Field(min_length=3)
    confidence: Confidence


class RulePack(Strict):
    pack: PackHeader
    panel: Panel
    servings: Servings
    nutrients: dict[str, NutrientDef]
    reference_values: dict[str, ReferenceValue] = Field(default_factory=dict)
    rounding: dict[str, RoundingRule]
    rows: list[Row] = Field(min_length=1)
    claims: list[Claim] = Field(default_factory=list)
    statements: list[Statement] = Field(default_factory=list)
    allergens: Allergens | None = None
    ingredient_list: IngredientListRule | None = None
    front_of_pack: list[FrontOfPack] = Field(default_factory=list)
    compliance: Compliance | None = None

    @model_validator(mode="after")
    def _refs(self):
        errs = []
        for i, r in enumerate(self.rows):
            if r.nutrient not in self.nutrients:
                errs.append(f"rows[{i}] nutrient '{r.nutrient}' is not defined under 'nutrients'")
            if r.rounding not in self.rounding:
                errs.append(f"rows[{i}] rounding '{r.rounding}' is not defined under 'rounding'")
            if r.percent and r.percent not in self.reference_values:
                errs.append(f"rows[{i}] percent '{r.percent}' is not defined under 'reference_values'")
            if r.percent and not (r.percent_rounding or "percent" in self.rounding):
                errs.append(f"rows[{i}] has a percentage but no percent_rounding")
            if r.percent_rounding and r.percent_rounding not in self.rounding:
                errs.append(f"rows[{i}] percent_rounding '{r.percent_rounding}' is not defined under 'rounding'")
            earlier = {x.nutrient for x in self.rows[:i]}
            for k in r.percent_of_declared_sum:
                if k not in earlier:
                    errs.append(f"rows[{i}] percent_of_declared_sum '{k}' must be a row listed before this one")
            if r.requirement == "conditional" and not r.when:
                errs.append(f"rows[{i}] is conditional but has no 'when' triggers")
        for i, cl in enumerate(self.claims):
            for cond in cl.conditions + [c for g in cl.alternatives for c in g]:
                if cond.quantity not in self.nutrients:
                    errs.append(f"claims[{i}] ({cl.id}) uses '{cond.quantity}', which is not defined under 'nutrients'")
        ids = [c.id for c in self.claims]
        if len(ids) != len(set(ids)):
            errs.append("claim ids must be unique")
        for i, st in enumerate(self.statements):
            for t in (x for top in st.triggers for x in top.flat()):
                for cond in t.conditions:
                    if cond.quantity not in self.nutrients:
                        errs.append(
                            f"statements[{i}] ({st.id}) uses '{cond.quantity}', which is not defined under 'nutrients'"
                        )
        for rule in self.compliance.rules if self.compliance else []:
            for k in rule.nutrients:
                if k not in self.nutrients:
                    errs.append(f"compliance rule {rule.id} uses '{k}', which is not defined under 'nutrients'")
        for fop in self.front_of_pack:
            for k in list(fop.nutrients or {}) + list(fop.high_in or {}):
                if k not in self.nutrients:
                    errs.append(f"front_of_pack {fop.id} uses '{k}', which is not defined under 'nutrients'")
            for k in (fop.high_in or {}).values():
                if k not in self.reference_values:
                    errs.append(f"front_of_pack {fop.id} uses reference value '{k}', which is not defined")
            if fop.audiences and fop.kind != "high_in_symbol":
                errs.append(f"front_of_pack {fop.id}: audiences are for high_in_symbol schemes")
            for aud in fop.audiences:
                if set(aud.high_in) != set(fop.high_in or {}):
                    errs.append(
                        f"front_of_pack {fop.id} audience {aud.header_flag}: high_in must name the same nutrients"
                    )
                for k in aud.high_in.values():
                    if k not in self.reference_values:
                        errs.append(f"front_of_pack {fop.id} uses reference value '{k}', which is not defined")
        lines = self.panel.layout.nutrient_lines
        row_keys = {r.nutrient for r in self.rows}
        for k in (lines.percent_bold_for or []) if lines else []:
            if k not in row_keys:
                errs.append(f"panel.layout.nutrient_lines.percent_bold_for '{k}' is not a row's nutrient")
        s = self.servings
        if s.servings_rounding and s.servings_rounding not in self.rounding:
            errs.append(f"servings.servings_rounding '{s.servings_rounding}' is not defined under 'rounding'")
        if errs:
            raise ValueError("; ".join(errs))
        return self

    _folder: str | None = PrivateAttr(None)  # the pack folder it was loaded from (for its sibling packs)
    _energy_root: str | None = PrivateAttr(None)  # rules folder whose energy/ holds its factor sets

    @property
    def energy_root(self) -> str | None:
        """The rules folder (holding ``energy/``) the pack's factor sets come from; None: the built-in rules."""
        return self._energy_root

    @property
    def market(self) -> str:
        return self.pack.market

    def categories(self) -> set[str]:
        """Product categories this pack knows: reference amounts and front-of-pack kinds."""
        out = set(self.servings.reference_amounts or {})
        for fop in self.front_of_pack:
            out |= set(fop.exempt_kinds)
            for t in [*(fop.thresholds or []), *(t for a in fop.audiences for t in a.thresholds)]:
                out |= {str(c) for c in t.get("categories", [])}
        return out


def packs_dir(folder: str | Path | None = None) -> Path:
    return Path(folder) if folder else rules_dir() / "markets"


def load_pack_file(path: str | Path, rules_root: str | Path | None = None) -> RulePack:
    """Load and validate one pack file; problems name the file, line and key."""
    loaded = load_yaml(path)
    if not isinstance(loaded.data, dict):
        raise RuleError(
            Problem(
                "not a rule pack: expected a mapping with pack, panel, servings, nutrients, rounding, rows",
                file=loaded.file,
                line=1,
            )
        )
    try:
        pack = RulePack.model_validate(loaded.data)
    except ValidationError as exc:
        raise RuleError(pydantic_problems(exc, loaded)) from None
    root = Path(rules_root) if rules_root else Path(path).resolve().parent.parent
    pack._energy_root = str(root.resolve()) if (root / "energy").is_dir() else None
    try:
        for ident in (pack.panel.energy_factor_set, *pack.panel.energy_factor_sets_allowed, "available"):
            load_factor_set(ident, pack.energy_root)
    except (RuleError, UnknownNameError) as exc:
        raise RuleError(
            Problem(
                f"energy_factor_set: {exc}",
                file=loaded.file,
                line=loaded.line_of(("panel", "energy_factor_set")),
                field="panel.energy_factor_set",
            )
        ) from None
    return pack


@lru_cache(maxsize=16)
def _load_all(folder: str) -> tuple[dict[str, RulePack], tuple]:
    base = Path(folder)
    if not base.is_dir():
        raise RuleError(Problem("rule pack folder not found", file=str(base), fix="check --rules"))
    problems = ProblemList()
    packs: dict[str, RulePack] = {}
    files = sorted(base.glob("*.yaml"))
    root = base.parent if (base.parent / "energy").is_dir() else None
    for f in files:
        try:
            p = load_pack_file(f, root)
        except RuleError as exc:
            problems.problems += exc.problems
            continue
        if p.market in packs:
            problems.add(f"market '{p.market}' is defined twice", file=str(f))
        p._folder = folder
        packs[p.market] = p
    return packs, tuple(problems.problems)


def load_packs(folder: str | Path | None = None) -> dict[str, RulePack]:
    """All packs in a folder, keyed by market code; any broken pack is an error."""
    packs, problems = _load_all(str(packs_dir(folder).resolve()))
    if problems:
        raise RuleError(list(problems))
    return packs


@lru_cache(maxsize=16)
def _load_some(folder: str, codes: tuple[str, ...]) -> dict[str, RulePack] | None:
    """The packs of ``codes`` alone, when each is given by exactly one file of the folder whose market can be
    read from its first lines of YAML events and which loads cleanly; else None (the whole folder is loaded,
    with its problems reported as before).  A command for one market no longer builds every pack."""
    base = Path(folder)
    if not base.is_dir():
        return None
    markets = {f: market_of(f) for f in sorted(base.glob("*.yaml"))}
    if any(m is None for m in markets.values()):
        return None
    root = base.parent if (base.parent / "energy").is_dir() else None
    out: dict[str, RulePack] = {}
    for code in codes:
        files = [f for f, m in markets.items() if m == code]
        if len(files) != 1:
            return None
        try:
            p = load_pack_file(files[0], root)
        except RuleError:
            return None
        if p.market != code:
            return None
        p._folder = folder
        out[code] = p
    return out


def get_packs(codes: list[str], folder: str | Path | None = None) -> list[RulePack]:
    """Packs for market codes such as ['us', 'eu']; an unknown code is a clear error.
    A broken pack of another market does not stop the requested ones."""
    wanted = [c.strip().lower() for c in codes]
    some = _load_some(str(packs_dir(folder).resolve()), tuple(dict.fromkeys(wanted)))
    if some is not None:
        return [some[c] for c in wanted]
    packs, problems = _load_all(str(packs_dir(folder).resolve()))
    out = []
    for code in codes:
        code = code.strip().lower()
        if code not in packs and problems:
            raise RuleError(
                [Problem(f"market '{code}' could not be loaded; the rule pack folder has problems")] + list(problems)
            )
        if code not in packs:
            near = difflib.get_close_matches(code, list(packs), n=2)
            raise UnknownNameError(
                Problem(
                    f"unknown market '{code}'",
                    fix=(f"did you mean {', '.join(near)}? " if near else "")
                    + f"known markets: {', '.join(sorted(packs))}",
                )
            )
        out.append(packs[code])
    return out


def check_formula_against_packs(f, packs: list[RulePack]) -> None:
    """What a formula says about markets must name things the rule packs know: each key of
    ``energy_methods`` a market with a pack, ``category`` a category some pack knows."""
    siblings: dict[str, RulePack] = {p.market: p for p in packs}
    cat = f.header.category
    known_here = set().union(*(p.categories() for p in packs)) if packs else set()
    if any(m not in siblings for m in f.header.energy_methods or {}) or (cat is not None and cat not in known_here):
        for folder in {p._folder for p in packs if p._folder}:  # the other packs, only when they can matter
            siblings.update(_load_all(folder)[0])
    problems = ProblemList()
    kind = f.kind
    for m in (f.header.energy_methods or {}) if siblings else ():
        if m not in siblings:
            near = difflib.get_close_matches(m, list(siblings), n=1)
            problems.add(
                f"energy_methods names market '{m}', which has no rule pack",
                file=f.file,
                field=f"{kind}.energy_methods.{m}",
                fix=(f"did you mean '{near[0]}'? " if near else "") + f"markets: {', '.join(sorted(siblings))}",
            )
    cat = f.header.category
    known = set().union(*(p.categories() for p in siblings.values())) if siblings else set()
    if cat is not None and known and cat not in known:
        near = difflib.get_close_matches(cat, sorted(known), n=3)
        problems.add(
            f"category '{cat}' is not known to any market's rule pack",
            file=f.file,
            field=f"{kind}.category",
            fix=(
                f"did you mean {', '.join(near)}?" if near else "see 'labelcalc rules show MARKET' for the categories"
            ),
        )
    if problems.problems:
        _add_lines(problems.problems, f.file)
    problems.raise_if_any(InputError)


def _add_lines(problems: list[Problem], file: str) -> None:
    """Lines of fields in a formula file (read again only when there is a problem to report)."""
    if not file.lower().endswith((".yaml", ".yml")) or not Path(file).is_file():
        return
    try:
        loaded = load_yaml(file)
    except (InputError, OSError):
        return
    for p in problems:
        if p.field and p.line is None:
            p.line = loaded.line_of(tuple(p.field.split(".")))


#: how sure a pack is of a value, from least to most; `labelcalc rules unverified` lists the first (or, with
#: ``--all``, every level below "confirmed")
UNCHECKED = ("from memory — verify",)
NOT_CONFIRMED = ("from memory — verify", "secondary", "common practice")


def _entry_name(entry: dict) -> str | None:
    """What a list entry is called: its id, its nutrient or the components a factor is for."""
    if entry.get("id") or entry.get("nutrient"):
        return str(entry.get("id") or entry.get("nutrient"))
    comps = entry.get("components")
    return "+".join(map(str, comps)) if isinstance(comps, list) and comps else None


def unverified_entries(pack: RulePack, levels: tuple[str, ...] = UNCHECKED) -> list[tuple[str, str, str]]:
    """(where, confidence, citation) of every entry of a pack and of its energy factor sets whose confidence
    is one of ``levels``: the values a regulatory professional should check against the text first."""
    from labelcalc.formulation.energy import load_factor_set

    out: list[tuple[str, str, str]] = []

    def walk(node, where: str) -> None:
        if isinstance(node, dict):
            if node.get("confidence") in levels:
                out.append((where, str(node["confidence"]), str(node.get("citation") or "")))
            for k, v in node.items():
                walk(v, f"{where}.{k}" if where else str(k))
        elif isinstance(node, list):
            for i, v in enumerate(node):
                name = _entry_name(v) if isinstance(v, dict) else None
                walk(v, f"{where}[{name or i}]")

    walk(pack.model_dump(), "")
    sets = dict.fromkeys([pack.panel.energy_factor_set, *pack.panel.energy_factor_sets_allowed])
    for ident in sets:
        walk(load_factor_set(ident, pack.energy_root).model_dump(), f"energy factor set {ident}")
    return out
