"""The component vocabulary: what an ingredient's composition is made of.

Every composition in labelcalc (an ingredient's, a sub-formula's, a finished
product's) is a vector over these components, per 100 g.  Markets never appear
here: a market's "carbohydrate" or "fat" is *built from* these components by
its rule pack (``rules/markets/*.yaml``).

Mass components (unit ``g``) that are not part of another component add up,
with water, to the whole: their sum may not exceed 100 g per 100 g.
"""

from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True)
class Component:
    key: str
    unit: str  # "g", "mg" or "ug" per 100 g
    description: str
    part_of: str | None = None  # parent component this one is a part of
    group: str = "other"

    @property
    def counts_toward_total(self) -> bool:
        """True for mass components that are not a part of another one."""
        return self.unit == "g" and self.part_of is None


#: Minerals beyond sodium, potassium, calcium and iron (plain names shared with the market packs).
MINERALS = (
    ("magnesium", "mg"),
    ("phosphorus", "mg"),
    ("zinc", "mg"),
    ("iodine", "ug"),
    ("selenium", "ug"),
    ("copper", "mg"),
    ("manganese", "mg"),
    ("chromium", "ug"),
    ("molybdenum", "ug"),
    ("chloride", "mg"),
    ("fluoride", "mg"),
)
#: Vitamins beyond A, D, E and K, with the basis each value is held in.
VITAMINS = (
    ("vitamin_c", "mg", "vitamin C (ascorbic + dehydroascorbic acid) [mg]"),
    ("thiamin", "mg", "thiamin (vitamin B1) [mg]"),
    ("riboflavin", "mg", "riboflavin (vitamin B2) [mg]"),
    ("niacin", "mg", "niacin as niacin equivalents [mg NE] (preformed niacin + tryptophan / 60)"),
    ("vitamin_b6", "mg", "vitamin B6 [mg]"),
    ("folate", "ug", "folate as dietary folate equivalents [ug DFE] (food folate + 1.7 x folic acid)"),
    ("vitamin_b12", "ug", "vitamin B12 [ug]"),
    ("biotin", "ug", "biotin [ug]"),
    ("pantothenic_acid", "mg", "pantothenic acid [mg]"),
)

POLYOLS = ("sorbitol", "mannitol", "xylitol", "maltitol", "isomalt", "lactitol", "erythritol", "glycerol")

_C = Component
COMPONENTS: tuple[Component, ...] = (
    _C("water", "g", "water (moisture)", group="proximate"),
    _C("protein", "g", "protein (nitrogen x factor)", group="proximate"),
    _C(
        "nitrogen",
        "g",
        "total nitrogen of the protein (lets a market that fixes N x 6.25 recompute protein)",
        part_of="protein",
        group="proximate",
    ),
    _C(
        "fat",
        "g",
        "absorbed fat as triacylglycerol (excludes non-absorbed and partially absorbed lipids)",
        group="lipid",
    ),
    _C("saturated_fa", "g", "saturated fatty acids of the absorbed fat", part_of="fat", group="lipid"),
    _C("trans_fa", "g", "trans fatty acids of the absorbed fat", part_of="fat", group="lipid"),
    _C("monounsaturated_fa", "g", "cis-monounsaturated fatty acids of the absorbed fat", part_of="fat", group="lipid"),
    _C(
        "polyunsaturated_fa",
        "g",
        "cis,cis-polyunsaturated fatty acids of the absorbed fat",
        part_of="fat",
        group="lipid",
    ),
    _C("cholesterol", "mg", "cholesterol", group="lipid"),
    _C(
        "nonabsorbed_lipid",
        "g",
        "lipid the body does not absorb (e.g. sucrose fatty-acid polyesters); energy 0, not part of fat",
        group="lipid",
    ),
    _C(
        "partial_lipid",
        "g",
        "lipid absorbed only in part (e.g. structured short/long-chain triacylglycerols); energy from its own factor",
        group="lipid",
    ),
    _C("sugars", "g", "sugars: mono- and disaccharides (excludes polyols)", group="carbohydrate"),
    _C("added_sugars", "g", "added sugars (part of sugars)", part_of="sugars", group="carbohydrate"),
    _C("starch", "g", "starch and other available (digestible) carbohydrate", group="carbohydrate"),
    *(_C(p, "g", f"{p} (polyol)", group="polyol") for p in POLYOLS),
    _C("fibre_soluble", "g", "soluble dietary fibre (non-digestible carbohydrate)", group="fibre"),
    _C("fibre_insoluble", "g", "insoluble dietary fibre (non-digestible carbohydrate)", group="fibre"),
    _C(
        "fibre_unsplit",
        "g",
        "dietary fibre whose soluble / insoluble split is not known (tables mostly give total fibre only)",
        group="fibre",
    ),
    _C("organic_acids", "g", "organic acids (citric, malic, lactic, acetic ...)", group="other"),
    _C("ethanol", "g", "ethanol (alcohol)", group="other"),
    _C("ash", "g", "ash (minerals incl. sodium)", group="proximate"),
    _C("sodium", "mg", "sodium (part of ash)", part_of="ash", group="mineral"),
    _C("potassium", "mg", "potassium (part of ash)", part_of="ash", group="mineral"),
    _C("calcium", "mg", "calcium (part of ash)", part_of="ash", group="mineral"),
    _C("iron", "mg", "iron (part of ash)", part_of="ash", group="mineral"),
    *(_C(k, u, f"{k} [{u}] (part of ash)", part_of="ash", group="mineral") for k, u in MINERALS),
    _C("vitamin_a", "ug", "vitamin A as retinol activity equivalents [ug RAE]", group="vitamin"),
    _C("vitamin_d", "ug", "vitamin D [ug]", group="vitamin"),
    _C("vitamin_e", "mg", "vitamin E as alpha-tocopherol [mg]", group="vitamin"),
    _C("vitamin_k", "ug", "vitamin K [ug]", group="vitamin"),
    *(_C(k, u, d, group="vitamin") for k, u, d in VITAMINS),
    _C("choline", "mg", "choline, total [mg]", group="other"),
    _C("caffeine", "mg", "caffeine [mg]", group="other"),
    _C("glycyrrhizinic_acid", "mg", "glycyrrhizinic acid and its ammonium salt (from liquorice) [mg]", group="other"),
    _C("sulphites", "mg", "sulphites expressed as SO2 [mg]", group="other"),
)

BY_KEY: dict[str, Component] = {c.key: c for c in COMPONENTS}
KEYS: tuple[str, ...] = tuple(c.key for c in COMPONENTS)
INDEX: dict[str, int] = {k: i for i, k in enumerate(KEYS)}
TOTAL_KEYS: tuple[str, ...] = tuple(c.key for c in COMPONENTS if c.counts_toward_total)

#: Components an ingredient may give as a convenience total; the loader turns
#: them into the leaf components above.
CONVENIENCE_TOTALS = {
    "available_carbohydrate": ("sugars", "starch"),
    "fibre": ("fibre_soluble", "fibre_insoluble"),
    "salt": ("sodium",),
}

#: Derived totals reported alongside the leaves (they are sums, never stored).
DERIVED = {
    "total_lipid": ("fat", "nonabsorbed_lipid", "partial_lipid"),
    "available_carbohydrate": ("sugars", "starch"),
    "polyols": POLYOLS,
    "fibre": ("fibre_soluble", "fibre_insoluble", "fibre_unsplit"),
}

#: A part that is unknown wherever some of its whole is held unsplit: soluble and
#: insoluble fibre cannot be told while any fibre of the product has no split.
UNSPLIT_OF: dict[str, str] = {"fibre_soluble": "fibre_unsplit", "fibre_insoluble": "fibre_unsplit"}

#: Component groups an ingredient may name in ``assumed_zero`` besides single components.
GROUPS: dict[str, tuple[str, ...]] = {}

#: Sodium to salt, as the EU defines salt (sodium x 2.5); the factor is
#: close to the molar-mass ratio NaCl/Na = 2.542 (checked in tests).
SALT_PER_SODIUM = 2.5


GROUPS.update(DERIVED)
GROUPS.update(CONVENIENCE_TOTALS)
GROUPS["fibre"] = DERIVED["fibre"]
for _plural, _group in (
    ("proximates", "proximate"),
    ("lipids", "lipid"),
    ("carbohydrates", "carbohydrate"),
    ("minerals", "mineral"),
    ("vitamins", "vitamin"),
    ("others", "other"),
):
    GROUPS[_plural] = tuple(c.key for c in COMPONENTS if c.group == _group)


#: Per-unit scale to grams.
GRAMS_PER_UNIT = {"g": 1.0, "mg": 1e-3, "ug": 1e-6}


def unit_of(key: str) -> str:
    if key in BY_KEY:
        return BY_KEY[key].unit
    if key in DERIVED:
        return BY_KEY[DERIVED[key][0]].unit
    raise KeyError(key)
