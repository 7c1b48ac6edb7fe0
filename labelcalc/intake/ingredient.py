"""Ingredient entries of a library: the validated model of one ingredient (composition per 100 g, a
source for every value, stated zeros, allergens, kinds, energy factors of its own) and the physical checks
every entry passes.  Readers of library files (:mod:`library`, :mod:`library_csv`) build these."""

from __future__ import annotations

import difflib
import math
from functools import cached_property

import numpy as np
from pydantic import BaseModel, ConfigDict, Field, field_validator

from labelcalc import components as C
from labelcalc.errors import Problem
from labelcalc.intake.quantities import Number

SUM_TOLERANCE_G = 0.5  # published tables are rounded; common practice
_PER_GRAM = {"g": 1.0, "mg": 1e3, "ug": 1e6}


class AtwaterFactors(BaseModel):
    """Ingredient-specific energy factors [kcal/g] (21 CFR 101.9(c)(1)(i)(A))."""

    model_config = ConfigDict(extra="forbid")
    protein: Number = Field(gt=0, le=9.5, description="[kcal/g]")
    fat: Number = Field(gt=0, le=9.5, description="[kcal/g]")
    carbohydrate: Number = Field(gt=0, le=4.5, description="[kcal/g], applied to total carbohydrate")
    source: str = Field(min_length=3)


class LipidEnergy(BaseModel):
    """Energy factor of a partially absorbed lipid [kJ/g and kcal/g]."""

    model_config = ConfigDict(extra="forbid")
    kj_per_g: Number = Field(ge=0, le=38)
    kcal_per_g: Number = Field(ge=0, le=9.1)
    kind: str | None = Field(None, description="e.g. 'salatrim' where a market gives that kind its own factor")
    source: str = Field(min_length=3)


class Price(BaseModel):
    model_config = ConfigDict(extra="forbid")
    per_kg: Number = Field(gt=0)
    currency: str = Field(min_length=3, max_length=3)


class ZeroAssumption(BaseModel):
    """Components taken as zero, with the reason (cited or marked common practice)."""

    model_config = ConfigDict(extra="forbid")
    components: list[str] = Field(min_length=1)
    reason: str = Field(min_length=3)


def _zero_assumptions(v: object) -> object:
    """Accept ``{key: reason}`` as well as ``[{components, reason}]``."""
    if isinstance(v, dict):
        return [{"components": [k], "reason": r} for k, r in v.items()]
    return v


class Ingredient(BaseModel):
    """One library entry.  ``values`` holds known values only (unknown = absent)."""

    model_config = ConfigDict(extra="forbid")
    id: str
    label_name: str
    label_names: dict[str, str] = Field(
        default_factory=dict, description="the name in other languages, by language code (fr: Pommes de terre)"
    )
    source: str = Field(min_length=3)
    per_100g: dict[str, Number | None] = Field(default_factory=dict)
    sources: dict[str, str] = Field(default_factory=dict)
    basis: dict[str, str] = Field(
        default_factory=dict, description="analytical basis of a value where its source states it"
    )
    nitrogen_factor: Number | None = Field(
        None, gt=0, le=7, description="nitrogen-to-protein factor the source used for protein"
    )
    assumed_zero: list[ZeroAssumption] = Field(default_factory=list)
    allergens: list[str] | None = None
    sub_ingredients: list[str] | None = None
    kinds: list[str] = Field(default_factory=list)
    functional_class: str | None = Field(
        None, description="for an additive: its function in the food (e.g. sweetener, acid), as markets name it"
    )
    substance: str | None = None
    atwater: AtwaterFactors | None = None
    lipid_energy: LipidEnergy | None = None
    price: Price | None = None
    file: str | None = None
    line: int | None = None

    @field_validator("assumed_zero", mode="before")
    @classmethod
    def _assumed(cls, v: object) -> object:
        return _zero_assumptions(v)

    @field_validator("id")
    @classmethod
    def _id(cls, v: str) -> str:
        if not v or any(ch.isspace() for ch in v):
            raise ValueError("ingredient id must be a non-empty word without spaces")
        return v

    @cached_property
    def values(self) -> dict[str, float]:
        """Known leaf values per 100 g after expanding convenience totals.

        Where the entry gives protein and its ``nitrogen_factor`` but no nitrogen, nitrogen is protein / factor
        (so a market that fixes protein as nitrogen x 6.25 can recompute it); zero protein has zero nitrogen."""
        vals = _expand(self.per_100g, self.zeros)[0]
        if self.per_100g.get("nitrogen") is None:
            protein = vals.get("protein")
            if protein == 0:
                vals["nitrogen"] = 0.0
            elif protein is not None and self.nitrogen_factor:
                vals["nitrogen"] = protein / self.nitrogen_factor
            else:  # protein present (or unknown) and no factor: nitrogen is unknown, never an assumed zero
                vals.pop("nitrogen", None)
        return vals

    @cached_property
    def zeros(self) -> dict[str, str]:
        """Components assumed zero (not given a value), each with its reason."""
        out: dict[str, str] = {}
        given = {k for k, v in self.per_100g.items() if v is not None}
        covered = {leaf for k in given for leaf in C.GROUPS.get(k, ()) if k in C.CONVENIENCE_TOTALS}
        if "fibre" in given:
            covered.add("fibre_unsplit")
        for a in self.assumed_zero:
            for key in a.components:
                for leaf in C.GROUPS.get(key, (key,)):
                    if leaf in C.BY_KEY and leaf not in given and leaf not in covered and leaf not in out:
                        out[leaf] = a.reason
        return out

    def source_of(self, key: str) -> str:
        """Where the value of ``key`` comes from (an assumed zero names its reason)."""
        if key in self.zeros:
            return f"assumed zero: {self.zeros[key]}"
        return self.sources.get(key, self.source)

    def provenance(self) -> dict[str, tuple[float, str, str | None]]:
        """Every known value (assumed zeros included) with its source and stated basis; total fibre is
        shown as given rather than as the leaves the loader holds it in."""
        out = {}
        for k, v in self.values.items():
            if k in C.DERIVED["fibre"] and self.per_100g.get(k) is None and self.per_100g.get("fibre") is not None:
                continue
            out[k] = (v, self.source_of(k), self.basis_of(k))
        fibre = self.per_100g.get("fibre")
        if fibre is not None:
            out["fibre"] = (float(fibre), self.source_of("fibre"), self.basis_of("fibre"))
        return out

    def basis_of(self, key: str) -> str | None:
        """The analytical basis of a value where its source states one."""
        return self.basis.get(key)

    def vector(self) -> np.ndarray:
        """Composition as a float vector over :data:`components.KEYS`; NaN = unknown."""
        v = np.full(len(C.KEYS), np.nan)
        for k, x in self.values.items():
            v[C.INDEX[k]] = x
        return v


def _other_part(vals: dict[str, float], problems: list[str], total_key: str, total: float, given: str, other: str):
    """A total with one of its two parts given: the other part is the rest (a part above the total, beyond the
    rounding of published tables, is a problem)."""
    rest = total - vals[given]
    if rest < -SUM_TOLERANCE_G:
        problems.append(f"{given} exceeds {total_key}")
    vals[other] = max(rest, 0.0)


def _expand(raw: dict[str, float | None], zeros: dict[str, str]) -> tuple[dict[str, float], list[str]]:
    """Resolve convenience totals into leaves and apply the stated zeros.  Returns (values, problems)."""
    problems: list[str] = []
    vals = {k: float(v) for k, v in raw.items() if v is not None and k in C.BY_KEY}
    for k in zeros:
        vals.setdefault(k, 0.0)
    carb = raw.get("available_carbohydrate")
    if carb is not None:
        have = [k for k in ("sugars", "starch") if raw.get(k) is not None]
        if len(have) == 2:
            if abs(vals["sugars"] + vals["starch"] - carb) > SUM_TOLERANCE_G:
                problems.append("available_carbohydrate differs from sugars + starch; give only the parts")
        elif len(have) == 1:
            _other_part(
                vals, problems, "available_carbohydrate", carb, have[0], "starch" if have[0] == "sugars" else "sugars"
            )
        else:
            problems.append("available_carbohydrate needs sugars (or starch) beside it so the split is known")
    fib = raw.get("fibre")
    if fib is not None:
        have = [k for k in ("fibre_soluble", "fibre_insoluble") if raw.get(k) is not None]
        if len(have) == 1:
            other = "fibre_insoluble" if have[0] == "fibre_soluble" else "fibre_soluble"
            _other_part(vals, problems, "fibre", fib, have[0], other)
        elif not have:  # total fibre only: held unsplit; each market uses what its rule needs
            vals["fibre_unsplit"] = float(fib)
            vals["fibre_soluble"] = vals["fibre_insoluble"] = 0.0

    if "fibre_soluble" in vals and "fibre_insoluble" in vals:
        vals.setdefault("fibre_unsplit", 0.0)  # the split is known: nothing is held unsplit
    salt = raw.get("salt")
    if salt is not None:
        if raw.get("sodium") is not None:
            problems.append("give salt or sodium, not both")
        else:
            vals["sodium"] = salt / C.SALT_PER_SODIUM * 1000.0
    return vals, problems


def check_ingredient(ing: Ingredient, where: dict) -> list[Problem]:
    """Physical checks on one entry: names, signs, parts within wholes, sum <= 100 g."""
    out: list[Problem] = []
    allowed = set(C.KEYS) | set(C.CONVENIENCE_TOTALS)
    for k, v in ing.per_100g.items():
        if k not in allowed:
            near = difflib.get_close_matches(k, sorted(allowed), n=3)
            hint = f"did you mean {', '.join(near)}?" if near else "see the component list in DEVELOPERS.md"
            out.append(Problem(f"unknown component '{k}'", field=f"{ing.id}.per_100g.{k}", fix=hint, **where))
        elif v is not None and (not math.isfinite(v) or v < 0):
            out.append(
                Problem(
                    f"value {v} must be a number >= 0 (or null for unknown)", field=f"{ing.id}.per_100g.{k}", **where
                )
            )
    for k in ing.sources:
        if k not in allowed:
            out.append(Problem(f"source given for unknown component '{k}'", field=f"{ing.id}.sources.{k}", **where))
    for k in ing.basis:
        if k not in allowed:
            out.append(Problem(f"basis given for unknown component '{k}'", field=f"{ing.id}.basis.{k}", **where))
    for i, a in enumerate(ing.assumed_zero):
        for k in a.components:
            if k not in C.BY_KEY and k not in C.GROUPS:
                near = difflib.get_close_matches(k, sorted(set(C.KEYS) | set(C.GROUPS)), n=3)
                out.append(
                    Problem(
                        f"assumed_zero names unknown component '{k}'",
                        field=f"{ing.id}.assumed_zero[{i}]",
                        fix=f"did you mean {', '.join(near)}?" if near else "see the component list in DEVELOPERS.md",
                        **where,
                    )
                )
            elif k in C.BY_KEY and ing.per_100g.get(k) is not None:
                out.append(
                    Problem(
                        f"'{k}' has a value and is also assumed zero",
                        field=f"{ing.id}.assumed_zero[{i}]",
                        fix="remove it from assumed_zero or remove its value",
                        **where,
                    )
                )
    if out:
        return out
    vals, msgs = _expand(ing.per_100g, ing.zeros)
    out += [Problem(m, field=f"{ing.id}.per_100g", **where) for m in msgs]
    for k, v in vals.items():  # no component can weigh more than the 100 g it is part of
        grams = v / _PER_GRAM.get(C.BY_KEY[k].unit, 1.0)
        if grams > 100 + SUM_TOLERANCE_G:
            out.append(
                Problem(
                    f"{k} {v:g} {C.BY_KEY[k].unit} per 100 g weighs more than 100 g",
                    field=f"{ing.id}.per_100g.{k}",
                    fix=f"check the value and its unit ({k} is given in {C.BY_KEY[k].unit} per 100 g)",
                    **where,
                )
            )
    total = sum(vals.get(k, 0.0) for k in C.TOTAL_KEYS)
    if total > 100 + SUM_TOLERANCE_G:
        out.append(
            Problem(
                f"components sum to {total:.2f} g per 100 g (more than 100 g)",
                field=f"{ing.id}.per_100g",
                fix="check the values and their units (g vs mg)",
                **where,
            )
        )
    fa = sum(vals.get(k, 0.0) for k in ("saturated_fa", "trans_fa", "monounsaturated_fa", "polyunsaturated_fa"))
    if "fat" in vals and fa > vals["fat"] + SUM_TOLERANCE_G:
        out.append(
            Problem(f"fatty acids ({fa:.2f} g) exceed fat ({vals['fat']:.2f} g)", field=f"{ing.id}.per_100g", **where)
        )
    for comp in C.COMPONENTS:
        if comp.part_of and comp.key in vals and comp.part_of in vals:
            scale = C.GRAMS_PER_UNIT[C.BY_KEY[comp.part_of].unit] / C.GRAMS_PER_UNIT[comp.unit]
            if vals[comp.key] > vals[comp.part_of] * scale + SUM_TOLERANCE_G * scale:
                out.append(
                    Problem(f"{comp.key} exceeds {comp.part_of}", field=f"{ing.id}.per_100g.{comp.key}", **where)
                )
    if vals.get("partial_lipid", 0) > 0 and ing.lipid_energy is None:
        out.append(
            Problem(
                "partial_lipid needs lipid_energy (its own kJ/g and kcal/g with a source)",
                field=f"{ing.id}.lipid_energy",
                **where,
            )
        )
    return out
