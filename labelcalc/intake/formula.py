"""Formula files: products and sub-formulas, validated and resolved.

A formula file is YAML with a header (``product:`` for a finished product,
``subformula:`` for a component such as a seasoning or an oil blend), a
``batch:`` list and an optional ``processing:`` list.  See DEVELOPERS.md for
the full format and ``labelcalc schema`` for its JSON Schema.
"""

from __future__ import annotations

import copy
import difflib
import hashlib
import json
import os
from dataclasses import dataclass, field
from pathlib import Path
from typing import Literal

from pydantic import BaseModel, ConfigDict, Field, ValidationError, field_validator, model_validator

from labelcalc.errors import InputError, Problem, ProblemList, display_path
from labelcalc.intake.catalogue import FormulaIndex
from labelcalc.intake.ingredient import Ingredient
from labelcalc.intake.library import Library
from labelcalc.intake.quantities import Number, Quantity, parse_quantity
from labelcalc.yamlsafe import LoadedYaml, load_yaml, pydantic_problems

Range = tuple[float, float]


class Strict(BaseModel):
    model_config = ConfigDict(extra="forbid")


class Serving(Strict):
    size: str = Field(description="serving size with unit, e.g. '28 g' [g] (or '250 ml' with density)")
    household: str | None = Field(None, description="household measure, e.g. 'about 15 crisps'")
    household_names: dict[str, str] | None = Field(
        None, description="the household measure in other languages, by language code (fr: '14 croustilles')"
    )

    @field_validator("size")
    @classmethod
    def _size(cls, v: str) -> str:
        parse_quantity(v, allowed=("mass", "volume"))
        return v


class Header(Strict):
    id: str = Field(description="stable id, used for file names and the label register")
    name: str
    version: str | int | None = None
    label_name: str | None = Field(None, description="name in a parent's ingredient list (sub-formulas)")
    label_names: dict[str, str] | None = Field(
        None, description="that name in other languages, by language code (sub-formulas; fr: ...)"
    )
    category: str | None = Field(None, description="product category key of the markets' reference amounts")
    form: Literal["solid", "liquid"] = "solid"
    density_g_per_ml: Number | None = Field(None, gt=0, description="[g/ml], needed for per 100 ml figures of liquids")
    serving: Serving | None = None
    servings_per_container: Number | None = Field(None, gt=0)
    net_quantity: str | None = Field(None, description="net quantity with unit, e.g. '150 g'")
    reference_formula: str | None = Field(
        None, description="id or path of the formula a comparative claim compares with"
    )
    claims: list[str] = Field(
        default_factory=list, description="claims the label is meant to make (checked by 'assess')"
    )
    packed_in_protective_atmosphere: bool = Field(
        False, description="packaging gases extend the food's durability (a statement in some markets)"
    )
    solely_for_young_children: bool = Field(
        False,
        description="the food is intended solely for children aged one year or older but less than four "
        "(markets with other values for such foods use them, e.g. Canada's front-of-package thresholds)",
    )
    energy_methods: dict[str, str] | None = Field(
        None,
        description="market -> energy factor set id, where the market allows a choice (e.g. {us: us_101_9_method_b})",
    )
    notes: str | None = None

    @field_validator("id")
    @classmethod
    def _id(cls, v: str) -> str:
        v = str(v)
        if not v.strip() or any(ch.isspace() for ch in v):
            raise ValueError("id must be a non-empty word without spaces")
        return v

    @field_validator("net_quantity")
    @classmethod
    def _net(cls, v: str | None) -> str | None:
        if v is not None:
            parse_quantity(v, allowed=("mass", "volume"))
        return v


class BatchLine(Strict):
    ingredient: str | None = Field(None, description="id of a library ingredient")
    subformula: str | None = Field(None, description="id of a sub-formula")
    amount: str = Field(description="'400 g', '0.4 kg' or '12 %' (of the whole batch)")
    label_name: str | None = Field(None, description="overrides the ingredient's label name")

    @field_validator("amount", mode="before")
    @classmethod
    def _amount(cls, v):
        parse_quantity(v)  # raises a message that says what to write
        return str(v)

    @model_validator(mode="after")
    def _one_ref(self):
        if (self.ingredient is None) == (self.subformula is None):
            raise ValueError("each batch line names exactly one of 'ingredient' or 'subformula'")
        return self

    @property
    def ref(self) -> str:
        return self.ingredient or self.subformula  # type: ignore[return-value]


def _range(v):
    if isinstance(v, (list, tuple)):
        if len(v) != 2 or not all(isinstance(x, (int, float)) and not isinstance(x, bool) for x in v):
            raise ValueError("a range is two numbers: [low, high]")
        lo, hi = float(v[0]), float(v[1])
        if lo > hi:
            raise ValueError(f"range [{lo}, {hi}] has low above high")
        return (lo, hi)
    if isinstance(v, bool) or not isinstance(v, (int, float)):
        raise ValueError("give a number or a range [low, high]")
    return (float(v), float(v))


class MoistureLoss(Strict):
    percent_of_batch: Number | list[Number] | None = Field(
        None, description="water lost as % of the mass entering the step [%]"
    )
    final_water: Number | list[Number] | None = Field(None, description="water content after the step [g/100 g]")

    @model_validator(mode="after")
    def _one(self):
        given = [x for x in (self.percent_of_batch, self.final_water) if x is not None]
        if len(given) != 1:
            raise ValueError("moisture_loss takes exactly one of 'percent_of_batch' or 'final_water'")
        lo, hi = _range(given[0])
        if self.percent_of_batch is not None and not (lo >= 0 and hi < 100):
            raise ValueError("percent_of_batch must be at least 0 and below 100")
        if self.final_water is not None and not (lo >= 0 and hi < 100):
            raise ValueError("final_water must be at least 0 and below 100 g/100 g")
        return self


class OilUptake(Strict):
    oil: str | None = Field(None, description="id of the frying oil: an ingredient or an oil-blend sub-formula")
    per_100g: Number | list[Number] | None = Field(
        None, description="oil taken up per 100 g of product after the step [g/100 g]; [low, high] for a range"
    )
    final_fat: Number | list[Number] | None = Field(None, description="total lipid content after the step [g/100 g]")

    @model_validator(mode="after")
    def _one(self):
        if not self.oil:
            raise ValueError("oil_uptake needs 'oil': the ingredient or oil blend taken up")
        given = [x for x in (self.per_100g, self.final_fat) if x is not None]
        if len(given) != 1:
            raise ValueError("oil_uptake takes exactly one of 'per_100g' or 'final_fat'")
        lo, hi = _range(given[0])
        if not (lo >= 0 and hi < 100):
            raise ValueError("oil uptake must be at least 0 and below 100 g/100 g")
        return self


class Step(Strict):
    step: str = Field(description="a name for the step, e.g. 'frying' or 'baking'")
    moisture_loss: MoistureLoss | None = None
    oil_uptake: OilUptake | None = None
    yield_factor: Number | None = Field(
        None, alias="yield", ge=0.001, le=1, description="finished mass / mass entering the step [-]; the loss is water"
    )
    finished_weight: str | None = Field(
        None, description="measured mass after the step, e.g. '830 g'; the loss is water"
    )

    model_config = ConfigDict(extra="forbid", populate_by_name=True)

    @model_validator(mode="after")
    def _kinds(self):
        water_specs = [x for x in (self.moisture_loss, self.yield_factor, self.finished_weight) if x is not None]
        if len(water_specs) > 1:
            raise ValueError("a step takes one of moisture_loss, yield or finished_weight")
        if not water_specs and self.oil_uptake is None:
            raise ValueError("a step needs moisture_loss, oil_uptake, yield or finished_weight")
        if self.finished_weight is not None:
            parse_quantity(self.finished_weight, allowed=("mass",))
        return self


MAX_BATCH_LINES = 5_000  # far above any real formula; bounds the work a mistaken file can cause


class FormulaFile(Strict):
    product: Header | None = None
    subformula: Header | None = None
    batch: list[BatchLine] = Field(min_length=1, max_length=MAX_BATCH_LINES)
    processing: list[Step] = Field(default_factory=list)

    @model_validator(mode="after")
    def _header(self):
        if (self.product is None) == (self.subformula is None):
            raise ValueError("a formula file starts with exactly one of 'product:' or 'subformula:'")
        return self

    @property
    def header(self) -> Header:
        return self.product or self.subformula  # type: ignore[return-value]


# ---------------------------------------------------------------- resolved tree


@dataclass
class Line:
    """A batch line resolved to its ingredient or sub-formula."""

    ref: str
    grams: float  # in a batch scaled to its written total
    quantity: Quantity
    ingredient: Ingredient | None = None
    formula: Formula | None = None
    label_name: str | None = None
    line: int | None = None


@dataclass
class ProcessStep:
    name: str
    line: int | None
    loss_percent: Range | None = None
    final_water: Range | None = None
    oil_ref: str | None = None
    oil_ingredient: Ingredient | None = None
    oil_formula: Formula | None = None
    oil_per_100g: Range | None = None
    oil_final_fat: Range | None = None
    yield_factor: float | None = None
    finished_weight_g: float | None = None

    @property
    def is_ranged(self) -> bool:
        return any(
            r is not None and r[0] != r[1]
            for r in (self.loss_percent, self.final_water, self.oil_per_100g, self.oil_final_fat)
        )


@dataclass
class Formula:
    """A validated formula with every reference resolved."""

    header: Header
    kind: Literal["product", "subformula"]
    lines: list[Line]
    steps: list[ProcessStep]
    file: str
    content_hash: str
    batch_grams: float
    raw: dict = field(repr=False, default_factory=dict)

    @property
    def id(self) -> str:
        return self.header.id

    @property
    def is_fried(self) -> bool:
        return any(s.oil_ref for s in self.steps) or any(l.formula and l.formula.is_fried for l in self.lines)

    @property
    def has_range(self) -> bool:
        return any(s.is_ranged for s in self.steps) or any(sub.has_range for sub in self.sub_formulas())

    def sub_formulas(self) -> list[Formula]:
        """Sub-formulas used directly: in batch lines and as frying oils."""
        return [l.formula for l in self.lines if l.formula] + [s.oil_formula for s in self.steps if s.oil_formula]

    def ingredients_used(self) -> list[Ingredient]:
        """Every library ingredient that reaches the product, through sub-formulas and frying oils."""
        cached = self.__dict__.get("_ingredients_used")
        if cached is not None:
            return cached
        seen: dict[str, Ingredient] = {}
        for ln in self.lines:
            if ln.ingredient is not None:
                seen.setdefault(ln.ingredient.id, ln.ingredient)
        for st in self.steps:
            if st.oil_ingredient is not None:
                seen.setdefault(st.oil_ingredient.id, st.oil_ingredient)
        for sub in self.sub_formulas():
            for ing in sub.ingredients_used():
                seen.setdefault(ing.id, ing)
        self.__dict__["_ingredients_used"] = list(seen.values())
        return self.__dict__["_ingredients_used"]

    def serving_grams(self) -> float | None:
        if not self.header.serving:
            return None
        return self._grams(parse_quantity(self.header.serving.size, allowed=("mass", "volume")))

    def net_grams(self) -> float | None:
        if not self.header.net_quantity:
            return None
        return self._grams(parse_quantity(self.header.net_quantity, allowed=("mass", "volume")))

    def _grams(self, q: Quantity) -> float:
        if q.kind == "volume":
            if not self.header.density_g_per_ml:
                raise InputError(
                    Problem(
                        "a volume needs 'density_g_per_ml' in the header",
                        file=self.file,
                        field="product.density_g_per_ml",
                    )
                )
            return q.value * self.header.density_g_per_ml
        return q.value

    def walk(self):
        """Yield (path, line) over every batch line, depth first, sub-formulas included."""
        for ln in self.lines:
            yield (self.id,), ln
            if ln.formula:
                for path, sub in ln.formula.walk():
                    yield (self.id,) + path, sub


def map_tree(f: Formula, tag: str, *, on_line=None, on_step=None) -> Formula:
    """A copy of a formula tree with edits: ``on_line(line)`` and ``on_step(formula, index, step)``
    may change the copies (the originals are untouched).  Content hashes are re-derived with
    ``tag`` so an edited tree never passes for the original."""
    memo: dict[int, Formula] = {}

    def walk(g: Formula) -> Formula:
        if id(g) in memo:
            return memo[id(g)]
        h = copy.copy(g)
        h.__dict__.pop("_ingredients_used", None)
        h.lines = []
        for ln in g.lines:
            ln2 = copy.copy(ln)
            if ln.formula is not None:
                ln2.formula = walk(ln.formula)
            if on_line:
                on_line(ln2)
            h.lines.append(ln2)
        h.steps = []
        for j, st in enumerate(g.steps):
            st2 = copy.copy(st)
            if st.oil_formula is not None:
                st2.oil_formula = walk(st.oil_formula)
            if on_step:
                on_step(g, j, st2)
            h.steps.append(st2)
        h.content_hash = hashlib.sha256(f"{g.content_hash}|{tag}".encode()).hexdigest()[:16]
        memo[id(g)] = h
        return h

    return walk(f)


# --------------------------------------------------------------------- loading


def _hash(obj) -> str:
    return hashlib.sha256(json.dumps(obj, sort_keys=True, default=str).encode()).hexdigest()[:16]


def load_formula(
    path: str | Path,
    library: Library,
    *,
    search: list[Path] | None = None,
    _stack: tuple[str, ...] = (),
    _cache: dict | None = None,
    _index: FormulaIndex | None = None,
    fast: bool = False,
    parsed=None,
) -> Formula:
    """Load, validate and resolve a formula file and its sub-formulas.

    Sub-formulas are looked up by id in the formula's own folder tree (and in
    ``search`` folders).  Every problem in the file is collected and reported
    together; nothing is returned from a half-valid formula.  ``parsed``: the file's data as parsed already
    (a range run parses each product file once, to classify it); with ``fast`` only.
    """
    p = Path(path)
    cache = {} if _cache is None else _cache
    key = os.path.abspath(p)
    if key in cache:
        return cache[key]
    index = _index or FormulaIndex([p.parent.resolve(), *[Path(s).resolve() for s in (search or [])]])
    if fast:  # parse once without line tracking; on any problem parse again to report lines
        kept = index.take_parsed(p) if parsed is None else parsed
        try:
            loaded = load_yaml(p, with_lines=False) if kept is None else LoadedYaml(kept, {}, display_path(p) or str(p))
            formula = _build(loaded, library, index, _stack, cache)
        except InputError:
            formula = _build(load_yaml(p), library, index, _stack, cache)
    else:
        formula = _build(load_yaml(p), library, index, _stack, cache)
    cache[key] = formula
    return formula


def build_formula(data: dict, file: str, lines: dict, library: Library, index: FormulaIndex, cache: dict) -> Formula:
    """Validate and resolve a formula given as data (e.g. rows of a spreadsheet)."""
    return _build(LoadedYaml(data, lines, file), library, index, (), cache)


def _build(loaded: LoadedYaml, library: Library, index: FormulaIndex, stack: tuple[str, ...], cache: dict) -> Formula:
    data = loaded.data
    if not isinstance(data, dict):
        raise InputError(
            Problem(
                "not a formula file: expected 'product:' or 'subformula:', 'batch:' and 'processing:'",
                file=loaded.file,
                line=1,
            )
        )
    batch_raw = data.get("batch")
    if isinstance(batch_raw, list) and len(batch_raw) > MAX_BATCH_LINES:
        raise InputError(
            Problem(
                f"{len(batch_raw):,} batch lines; at most {MAX_BATCH_LINES:,} are read",
                file=loaded.file,
                line=loaded.line_of(("batch",)),
                field="batch",
                fix="check that this is a formula (sub-formulas group lines)",
            )
        )
    try:
        model = FormulaFile.model_validate(data)
    except ValidationError as exc:
        raise InputError(pydantic_problems(exc, loaded)) from None
    head = model.header
    kind = "product" if model.product else "subformula"
    problems = ProblemList()
    if head.id in stack:
        cycle = " -> ".join(stack[stack.index(head.id) :] + (head.id,))
        raise InputError(
            Problem(
                f"sub-formulas form a cycle: {cycle}",
                file=loaded.file,
                line=loaded.line_of((kind, "id")),
                fix="a sub-formula may not use itself, directly or through others",
            )
        )
    here = stack + (head.id,)

    def resolve(ref: str, path: tuple, *, want: str | None = None):
        in_lib = ref in library
        if want == "ingredient" and in_lib:  # the common case first: nothing to report, no line looked up
            return library.get(ref), None
        in_sub = ref in index.paths  # after the common case: a range's product paths may wait on disk
        line = loaded.line_of(path)
        fld = ".".join(str(x) if not isinstance(x, int) else f"[{x}]" for x in path).replace(".[", "[")
        if ref in index.duplicates and want != "ingredient":
            dup = index.duplicate_problem(ref, loaded.file, line=line, field=fld)
            problems.problems.append(dup)
            return None, None
        if want == "ingredient" or (want is None and in_lib and not in_sub):
            if in_lib:
                return library.get(ref), None
            near = difflib.get_close_matches(ref, library.ids, n=3)
            problems.add(
                f"unknown ingredient '{ref}'",
                file=loaded.file,
                line=line,
                field=fld,
                fix=(f"did you mean {', '.join(near)}?" if near else "add it to the ingredient library"),
            )
            return None, None
        if want is None and in_lib and in_sub:
            problems.add(
                f"'{ref}' is both an ingredient and a sub-formula",
                file=loaded.file,
                line=line,
                field=fld,
                fix="rename one of them",
            )
            return None, None
        if in_sub:
            if ref in here:
                cycle = " -> ".join(here[here.index(ref) :] + (ref,))
                raise InputError(
                    Problem(
                        f"sub-formulas form a cycle: {cycle}",
                        file=loaded.file,
                        line=line,
                        field=fld,
                        fix="a sub-formula may not use itself, directly or through others",
                    )
                )
            sub = load_formula(index.paths[ref], library, _stack=here, _cache=cache, _index=index)
            return None, sub
        subs = [k for k, kind in index.kinds.items() if kind == "subformula"]
        near = difflib.get_close_matches(ref, subs + library.ids, n=3)
        problems.add(
            f"unknown sub-formula '{ref}'" if want == "subformula" else f"unknown ingredient or sub-formula '{ref}'",
            file=loaded.file,
            line=line,
            field=fld,
            fix=(
                f"did you mean {', '.join(near)}?"
                if near
                else "check the id (sub-formulas are looked up in the formula's folder)"
            ),
        )
        return None, None

    # batch lines: absolute masses and percentages of the whole batch
    quantities = [parse_quantity(b.amount) for b in model.batch]
    abs_total = sum(q.value for q in quantities if q.kind == "mass")
    pct_total = sum(q.value for q in quantities if q.kind == "percent")
    batch_line = loaded.line_of(("batch",))
    if pct_total > 100 + 1e-9:
        problems.add(
            f"batch percentages add up to {pct_total:g} %, more than 100 %",
            file=loaded.file,
            line=batch_line,
            field="batch",
            fix="percentages are shares of the whole batch",
        )
    elif abs_total == 0 and abs(pct_total - 100) > 0.01:
        problems.add(
            f"batch percentages add up to {pct_total:g} %; with no line in g or kg they must total 100 %",
            file=loaded.file,
            line=batch_line,
            field="batch",
        )
    elif abs_total > 0 and pct_total >= 100:
        problems.add(
            "percentages reach 100 % but lines in g or kg are also given",
            file=loaded.file,
            line=batch_line,
            field="batch",
        )
    # with the problems above the total is never used (they are raised below); keep it finite meanwhile
    total = 100.0 if abs_total == 0 else abs_total / (1 - pct_total / 100) if pct_total < 100 else abs_total
    lines: list[Line] = []
    for i, (b, q) in enumerate(zip(model.batch, quantities)):
        grams = q.value if q.kind == "mass" else total * q.value / 100
        ing, sub = resolve(
            b.ref,
            ("batch", i, "ingredient" if b.ingredient else "subformula"),
            want="ingredient" if b.ingredient else "subformula",
        )
        lines.append(Line(b.ref, grams, q, ing, sub, b.label_name, loaded.line_of(("batch", i))))

    steps: list[ProcessStep] = []
    for i, s in enumerate(model.processing):
        st = ProcessStep(s.step, loaded.line_of(("processing", i)))
        if s.moisture_loss:
            if s.moisture_loss.percent_of_batch is not None:
                st.loss_percent = _range(s.moisture_loss.percent_of_batch)
            else:
                st.final_water = _range(s.moisture_loss.final_water)
        if s.yield_factor is not None:
            st.yield_factor = s.yield_factor
        if s.finished_weight is not None:
            st.finished_weight_g = parse_quantity(s.finished_weight, allowed=("mass",)).value
        if s.oil_uptake:
            st.oil_ref = s.oil_uptake.oil
            st.oil_ingredient, st.oil_formula = resolve(s.oil_uptake.oil, ("processing", i, "oil_uptake", "oil"))
            if s.oil_uptake.per_100g is not None:
                st.oil_per_100g = _range(s.oil_uptake.per_100g)
            else:
                st.oil_final_fat = _range(s.oil_uptake.final_fat)
        steps.append(st)
    problems.raise_if_any()
    formula = Formula(
        header=head,
        kind=kind,
        lines=lines,
        steps=steps,
        file=loaded.file,
        content_hash=_hash(
            {
                "formula": data,
                "subs": [l.formula.content_hash for l in lines if l.formula],
                "oils": [s.oil_formula.content_hash for s in steps if s.oil_formula],
            }
        ),
        batch_grams=total,
        raw=data,
    )
    _check_serving(formula, loaded, kind)
    return formula


MAX_PACKAGE_G = 1e6  # one tonne: beyond any consumer package; keeps per-package figures in exact arithmetic


def _check_serving(f: Formula, loaded: LoadedYaml, kind: str) -> None:
    """A serving larger than the package (when both are known in grams), or a package beyond a tonne, is refused."""
    serving, net = f.serving_grams(), f.net_grams()
    spc = f.header.servings_per_container
    package = net if net is not None else (serving * spc if serving is not None and spc is not None else None)
    for value, what, fld in ((serving, "serving", "serving.size"), (package, "package", "net_quantity")):
        if value is not None and value > MAX_PACKAGE_G:
            raise InputError(
                Problem(
                    f"a {what} of {value:,.0f} g is more than {MAX_PACKAGE_G:,.0f} g (a tonne)",
                    file=loaded.file,
                    line=loaded.line_of((kind, *fld.split("."))) or loaded.line_of((kind, "servings_per_container")),
                    field=f"{kind}.{fld}" if what == "serving" or net is not None else f"{kind}.servings_per_container",
                    fix="check the amount, its unit and servings_per_container",
                )
            )
    if serving is not None and net is not None and serving > net * (1 + 1e-9):
        raise InputError(
            Problem(
                f"serving ({serving:g} g) is larger than the net quantity ({net:g} g)",
                file=loaded.file,
                line=loaded.line_of((kind, "serving", "size")),
                field=f"{kind}.serving.size",
                fix="check both amounts and their units",
            )
        )
