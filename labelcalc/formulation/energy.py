"""Energy from composition with factor sets kept as data in ``rules/energy/``.

Two figures are never confused:

* **available energy** — what the body gets: non-absorbed lipid at 0,
  partially absorbed lipids at their own factor (factor set ``available``);
* **declared energy** — what a market's law says to print, computed with
  that market's own factor set.

kJ come from kJ factors and kcal from kcal factors.  Only where a factor set
states a conversion (e.g. kcal = kJ / 4.18) is one unit derived from the
other, and the set must then give factors in the other unit only.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache
from pathlib import Path
from typing import Literal

import numpy as np
from pydantic import BaseModel, ConfigDict, Field, ValidationError, model_validator

from labelcalc import components as C
from labelcalc.errors import Problem, RuleError, UnknownNameError
from labelcalc.formulation.composition import ATWATER_REPLACED, COL, COLUMNS, Composition
from labelcalc.yamlsafe import load_yaml, pydantic_problems

Confidence = Literal["confirmed", "secondary", "from memory — verify", "derived", "common practice"]

#: Energy-bearing mass components; every factor set must cover each exactly once.
ENERGY_GROUPS: dict[str, tuple[str, ...]] = {
    "protein": ("protein",),
    "fat": ("fat",),
    "nonabsorbed_lipid": ("nonabsorbed_lipid",),
    "partial_lipid": ("partial_lipid", "partial_lipid_own", "partial_lipid_salatrim", "partial_lipid_other"),
    "sugars": ("sugars",),
    "starch": ("starch",),
    **{p: (p,) for p in C.POLYOLS},
    "fibre_soluble": ("fibre_soluble",),
    "fibre_insoluble": ("fibre_insoluble",),
    "fibre_unsplit": ("fibre_unsplit",),
    "organic_acids": ("organic_acids",),
    "ethanol": ("ethanol",),
}
_VIRTUAL = {"partial_lipid_own", "specific_atwater"}


class Factor(BaseModel):
    model_config = ConfigDict(extra="forbid")
    components: list[str] = Field(min_length=1)
    kj: float | None = Field(None, ge=0, description="[kJ/g]")
    kcal: float | None = Field(None, ge=0, description="[kcal/g]")
    citation: str = Field(min_length=3)
    confidence: Confidence
    review: str | None = Field(None, description="why a regulatory professional should look at this factor")

    @model_validator(mode="after")
    def _check(self):
        for c in self.components:
            if c not in COL and c not in _VIRTUAL:
                raise ValueError(f"unknown component '{c}'")
        if "partial_lipid_own" in self.components:
            if self.kj is not None or self.kcal is not None:
                raise ValueError("partial_lipid_own uses each ingredient's own lipid_energy; give no kj/kcal")
        elif self.kj is None and self.kcal is None:
            raise ValueError("a factor needs kj, kcal or both")
        return self


class FactorSetHeader(BaseModel):
    model_config = ConfigDict(extra="forbid")
    id: str
    title: str
    instrument: str
    section: str
    date: str = Field(description="date of the instrument's version the factors come from")
    confidence: Confidence
    kcal_from_kj: float | None = Field(None, gt=0, description="kcal = kJ / this, where the law says so")
    kj_from_kcal: float | None = Field(None, gt=0, description="kJ = kcal x this, where the law says so")
    ingredient_specific: bool = Field(False, description="use each ingredient's own Atwater factors (US method A)")
    protein_from_nitrogen: float | None = Field(
        None, gt=0, description="the law defines protein as total nitrogen x this factor: energy uses that protein"
    )
    protein_from_nitrogen_citation: str | None = None
    notes: str | None = None


class FactorSet(BaseModel):
    model_config = ConfigDict(extra="forbid")
    factor_set: FactorSetHeader
    factors: list[Factor]

    @model_validator(mode="after")
    def _coverage(self):
        seen: dict[str, int] = {}
        for f in self.factors:
            for c in f.components:
                for g, members in ENERGY_GROUPS.items():
                    if c in members:
                        seen[g] = seen.get(g, 0) + 1
                if c not in _VIRTUAL and not any(c in m for m in ENERGY_GROUPS.values()):
                    raise ValueError(f"'{c}' carries no energy in labelcalc's vocabulary; do not give it a factor")
        used = {c for f in self.factors for c in f.components}
        pl = [c for c in ENERGY_GROUPS["partial_lipid"] if c in used]
        if sorted(pl) == ["partial_lipid_other", "partial_lipid_salatrim"]:
            seen["partial_lipid"] = 1
        elif len(pl) > 1:
            raise ValueError(
                "cover partially absorbed lipid once: partial_lipid, partial_lipid_own, "
                "or partial_lipid_salatrim with partial_lipid_other"
            )
        elif len(pl) == 1 and pl[0] in ("partial_lipid_salatrim", "partial_lipid_other"):
            raise ValueError("partial_lipid_salatrim and partial_lipid_other go together")
        missing = [g for g in ENERGY_GROUPS if g not in seen]
        twice = [g for g, n in seen.items() if n > 1]
        if missing:
            raise ValueError(f"no factor for: {', '.join(missing)} (give 0 explicitly where the law gives none)")
        if twice:
            raise ValueError(f"more than one factor for: {', '.join(twice)}")
        h = self.factor_set
        for f in self.factors:
            if "partial_lipid_own" in f.components:
                continue
            if h.kcal_from_kj and f.kcal is not None:
                raise ValueError("this set derives kcal from kJ: give kj factors only")
            if h.kj_from_kcal and f.kj is not None:
                raise ValueError("this set derives kJ from kcal: give kcal factors only")
            if not h.kcal_from_kj and f.kcal is None:
                raise ValueError(f"factor for {f.components} needs kcal (or a kcal_from_kj conversion)")
        return self

    @property
    def id(self) -> str:
        return self.factor_set.id

    def vectors(self) -> tuple[np.ndarray, np.ndarray, bool]:
        """(kJ/g, kcal/g) over COLUMNS and whether own partial-lipid factors are used."""
        kj = np.zeros(len(COLUMNS))
        kcal = np.zeros(len(COLUMNS))
        own = False
        for f in self.factors:
            for c in f.components:
                if c == "partial_lipid_own":
                    own = True
                    continue
                if f.kj is not None:
                    kj[COL[c]] = f.kj
                if f.kcal is not None:
                    kcal[COL[c]] = f.kcal
        return kj, kcal, own

    def factor_for(self, component: str) -> Factor | None:
        for f in self.factors:
            if component in f.components or (component == "partial_lipid" and "partial_lipid_own" in f.components):
                return f
        return None


def rules_dir() -> Path:
    """The rules folder: ``LABELCALC_RULES`` when set, else the packs shipped inside the package
    (read through importlib.resources, so a wheel, pipx or a plain install finds them)."""
    import os
    from importlib.resources import files

    env = os.environ.get("LABELCALC_RULES")
    if env:
        return Path(env)
    packaged = Path(str(files("labelcalc") / "rules"))
    if packaged.is_dir():
        return packaged
    raise RuleError("the rule packs are missing from this installation: reinstall labelcalc, or set LABELCALC_RULES")


@lru_cache(maxsize=64)
def load_factor_set(ident: str, folder: str | None = None) -> FactorSet:
    """Load ``<folder>/energy/<ident>.yaml`` and validate it. A set the folder does not hold comes from the
    built-in rules, so a ``--rules`` folder may override just the sets it edits."""
    base = Path(folder) if folder else rules_dir()
    path = base / "energy" / f"{ident}.yaml"
    if folder and not path.exists() and (rules_dir() / "energy" / f"{ident}.yaml").exists():
        base = rules_dir()
        path = base / "energy" / f"{ident}.yaml"
    if not path.exists():
        known = sorted(p.stem for p in (base / "energy").glob("*.yaml"))
        raise UnknownNameError(Problem(f"unknown energy factor set '{ident}'", fix=f"known: {', '.join(known)}"))
    loaded = load_yaml(path)
    try:
        return FactorSet.model_validate(loaded.data)
    except ValidationError as exc:
        raise RuleError(pydantic_problems(exc, loaded)) from None


# --------------------------------------------------------------- computation


@dataclass
class EnergyResult:
    """Energy of a composition under one factor set, per 100 g."""

    factor_set: FactorSet
    kj: float | None
    kcal: float | None
    by_component_kj: dict[str, float | None]
    by_component_kcal: dict[str, float | None]
    unknown_because: list[str]
    reviews: list[str]

    def per_serving(self, serving_g: float | None) -> tuple[float | None, float | None]:
        if serving_g is None:
            return None, None
        f = serving_g / 100.0
        return (None if self.kj is None else self.kj * f, None if self.kcal is None else self.kcal * f)


def energy_vectors(fs: FactorSet) -> tuple[np.ndarray, np.ndarray]:
    """kJ and kcal factors over :data:`COLUMNS` (own lipid factors and the law's conversions applied)."""
    kj, kcal, own = fs.vectors()
    h = fs.factor_set
    if own:
        kj[COL["partial_lipid_kj"]] = 1.0
        kcal[COL["partial_lipid_kcal"]] = 1.0
    if h.kcal_from_kj:
        kcal = kj / h.kcal_from_kj
    if h.kj_from_kcal:
        kj = kcal * h.kj_from_kcal
    return kj, kcal


_PREPARED: dict[int, tuple] = {}


def _prepare(fs: FactorSet):
    """Group matrices of a factor set: (groups x columns) kJ and kcal factors and masks."""
    key = id(fs)
    if key in _PREPARED and _PREPARED[key][0] is fs:
        return _PREPARED[key][1]
    kj_v, kcal_v = energy_vectors(fs)
    groups = list(ENERGY_GROUPS)
    gkj = np.zeros((len(groups), len(COLUMNS)))
    gkcal = np.zeros_like(gkj)
    for i, group in enumerate(groups):
        cols = [COL[m] for m in ENERGY_GROUPS[group] if m in COL]
        if group == "partial_lipid":
            cols = [
                COL[k]
                for k in (
                    "partial_lipid",
                    "partial_lipid_kj",
                    "partial_lipid_kcal",
                    "partial_lipid_salatrim",
                    "partial_lipid_other",
                )
            ]
        gkj[i, cols] = kj_v[cols]
        gkcal[i, cols] = kcal_v[cols]
    relevant = (gkj != 0) | (gkcal != 0)
    reviews = []
    for f in fs.factors:
        if f.review:
            cols = (
                [COL["partial_lipid"]]
                if "partial_lipid_own" in f.components
                else [COL[c] for c in f.components if c in COL]
            )
            reviews.append((cols, f.review))
    prepared = (groups, gkj, gkcal, relevant, reviews)
    _PREPARED[key] = (fs, prepared)
    return prepared


@dataclass
class EnergyTable:
    """Energy of many compositions under one factor set, per 100 g (rows = compositions).

    ``kj``/``kcal`` are NaN where unknown; ``group_kj``/``group_kcal`` hold each energy group's share
    (rows x groups) and ``group_unknown`` which groups depend on an unknown value.
    """

    factor_set: FactorSet
    groups: list[str]
    kj: np.ndarray
    kcal: np.ndarray
    group_kj: np.ndarray
    group_kcal: np.ndarray
    group_unknown: np.ndarray
    specific_kcal: np.ndarray | None  # ingredient-specific Atwater energy (US method A), else None
    specific_unknown: np.ndarray | None
    review_hits: list[tuple[str, np.ndarray]]  # (review text, rows it applies to)

    def reviews(self, i: int) -> list[str]:
        return [text for text, hit in self.review_hits if hit[i]]

    def result(self, i: int) -> EnergyResult:
        """The energy of row ``i`` as an :class:`EnergyResult`."""
        gu = self.group_unknown[i]
        by_kj = {g: (None if u else float(x)) for g, x, u in zip(self.groups, self.group_kj[i], gu)}
        by_kcal = {g: (None if u else float(x)) for g, x, u in zip(self.groups, self.group_kcal[i], gu)}
        unknown_because = [g for g, u in zip(self.groups, gu) if u]
        if self.specific_kcal is not None and self.specific_unknown is not None:
            if self.specific_unknown[i]:
                by_kcal["specific_atwater"] = by_kj["specific_atwater"] = None
                unknown_because.append("specific Atwater factors")
            else:
                sk = float(self.specific_kcal[i])
                by_kcal["specific_atwater"] = sk
                k = self.factor_set.factor_set.kj_from_kcal
                by_kj["specific_atwater"] = sk * k if k else None
        kj = None if unknown_because or any(v is None for v in by_kj.values()) else float(sum(by_kj.values()))
        kcal = None if unknown_because else float(sum(v for v in by_kcal.values() if v is not None))
        # texts deduplicated in factor order, as a reader expects one line per distinct note
        reviews = list(dict.fromkeys(self.reviews(i)))
        return EnergyResult(self.factor_set, kj, kcal, by_kj, by_kcal, unknown_because, reviews)


def energy_inputs(values: np.ndarray, unknown: np.ndarray, fs: FactorSet) -> tuple[np.ndarray, np.ndarray]:
    """The composition as the factor set's law reads it (rows x :data:`COLUMNS`): where the law defines
    protein as total nitrogen x a factor (EU Annex I point 10: N x 6.25), protein is recomputed from
    nitrogen (unknown where nitrogen is).  Other factor sets take the composition as it is."""
    k = fs.factor_set.protein_from_nitrogen
    if not k:
        return values, unknown
    values, unknown = values.copy(), unknown.copy()
    p, n = COL["protein"], COL["nitrogen"]
    values[:, p] = values[:, n] * k
    unknown[:, p] = unknown[:, n]
    return values, unknown


def energy_table(values: np.ndarray, unknown: np.ndarray, fs: FactorSet) -> EnergyTable:
    """Energy of every row of ``values`` (rows x :data:`COLUMNS`, per 100 g; NaN where ``unknown``).

    With ``ingredient_specific`` (21 CFR 101.9(c)(1)(i)(A)) the protein, fat and carbohydrate terms come
    from each ingredient's own Atwater factors where the library gives them, general factors elsewhere.
    This is the one energy computation: :func:`energy_of` is its single-composition form.
    """
    groups, gkj, gkcal, relevant, review_cols = _prepare(fs)
    vals, unk = energy_inputs(np.atleast_2d(values), np.atleast_2d(unknown), fs)
    vals = np.nan_to_num(vals)
    specific = fs.factor_set.ingredient_specific
    if specific:  # general factors apply only to what specific factors do not cover
        vals = vals.copy()
        for k in ATWATER_REPLACED:
            vals[:, COL[k]] -= vals[:, COL[f"atwater_covered_{k}"]]
    g_kj, g_kcal = vals @ gkj.T, vals @ gkcal.T
    g_unknown = (unk[:, None, :] & relevant[None, :, :]).any(axis=2)
    any_unknown = g_unknown.any(axis=1)
    kj = np.where(any_unknown, np.nan, g_kj.sum(axis=1))
    kcal = np.where(any_unknown, np.nan, g_kcal.sum(axis=1))
    spec = spec_unk = None
    if specific:
        c = COL["specific_atwater_kcal"]
        spec, spec_unk = vals[:, c], unk[:, c]
        kcal = np.where(spec_unk, np.nan, kcal + spec)
        k = fs.factor_set.kj_from_kcal
        kj = np.where(spec_unk, np.nan, kj + spec * k) if k else np.full(len(vals), np.nan)
    hits = [(text, vals[:, cols].sum(axis=1) > 0) for cols, text in review_cols]
    return EnergyTable(fs, list(groups), kj, kcal, g_kj, g_kcal, g_unknown, spec, spec_unk, hits)


def energy_of(comp: Composition, fs: FactorSet) -> EnergyResult:
    """Energy per 100 g of ``comp`` with factor set ``fs`` (cached on the composition)."""
    cache = comp.__dict__.setdefault("_energy_cache", {})
    if fs.id in cache and cache[fs.id].factor_set is fs:
        return cache[fs.id]
    res = energy_table(comp.per_100g[None, :], comp.unknown[None, :], fs).result(0)
    cache[fs.id] = res
    return res


def energy_by_line(comp: Composition, fs: FactorSet) -> list[tuple[str, float | None, float | None]]:
    """Energy contributed by each batch line and processing step [kJ, kcal per 100 g] (the contributions
    through :func:`energy_table`)."""
    labels, rows = comp.contributions
    t = energy_table(rows, np.isnan(rows), fs)
    return [(lab, _f(kj), _f(kcal)) for lab, kj, kcal in zip(labels, t.kj, t.kcal)]


def _f(x: float) -> float | None:
    return None if np.isnan(x) else float(x)
