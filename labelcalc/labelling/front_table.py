"""Front-of-pack verdicts and zero-row reviews of the labelling engine, for every product at once.

Part of :class:`labelcalc.labelling.engine.LabelEngine` (a mixin: it reads the engine's tables).
"""

from __future__ import annotations

from functools import cached_property

import numpy as np

from labelcalc.labelling.rounding import q_scalar, to_decimal
from labelcalc.labelling.tables_base import EngineTables


class FrontOfPackTables(EngineTables):
    """Front-of-pack verdicts and zero-row reviews (mixed into the engine)."""

    @cached_property
    def front_of_pack(self) -> list[dict]:
        """Per scheme: exempt mask and, per nutrient, the verdict arrays."""
        out = []
        n = self.n
        cat = [f.header.category for f in self.products]
        for fop in self.pack.front_of_pack:
            exempt = np.array([c is not None and c in fop.exempt_kinds for c in cat], dtype=bool)
            entry: dict = {"fop": fop, "exempt": exempt, "nutrients": {}}
            if fop.kind == "colour_bands":
                keys = list(dict.fromkeys([*(fop.nutrients or {}), *(fop.liquid_nutrients or {})]))
                for k in keys:
                    use_liquid = self.liquid & (fop.liquid_nutrients is not None)
                    band_of = [
                        ((fop.liquid_nutrients if use_liquid[i] else fop.nutrients) or {}).get(k) for i in range(n)
                    ]
                    applies = np.array([b is not None for b in band_of], dtype=bool)
                    v = np.where(use_liquid, self.val[k] * self.density, self.val[k])
                    no_density = use_liquid & np.isnan(self.density)
                    code = np.full(n, -1)  # -1 cannot tell, 0 low, 1 medium, 2 high
                    portion = np.full(n, np.nan)
                    portion_red = np.zeros(n, dtype=bool)
                    for i in np.nonzero(applies & ~np.isnan(v))[0]:
                        b = band_of[i]
                        assert b is not None  # applies
                        dq = q_scalar(float(v[i]))
                        code[i] = 0 if dq <= q_scalar(b.low_up_to) else 2 if dq > q_scalar(b.high_above) else 1
                        s = self.serving[i]
                        if (
                            not np.isnan(s)
                            and portion_rule_applies(fop, float(s), bool(use_liquid[i]), float(self.density[i]))
                            and b.portion_high_above is not None
                        ):
                            portion[i] = v[i] * s / 100
                            if q_scalar(float(portion[i])) > q_scalar(b.portion_high_above):
                                portion_red[i] = True
                                code[i] = 2
                    entry["nutrients"][k] = {
                        "applies": applies,
                        "value": v,
                        "no_density": no_density,
                        "code": code,
                        "portion": portion,
                        "portion_red": portion_red,
                        "bands": band_of,
                    }
            else:
                basis_g = np.fmax(self.ref_g, self.serving)  # NaN only where both are missing
                # the audience of each product: index into fop.audiences, -1 for the scheme's own values
                aud = np.array(
                    [
                        next((j for j, a in enumerate(fop.audiences) if getattr(f.header, a.header_flag)), -1)
                        for f in self.products
                    ]
                )
                threshold = np.array(
                    [
                        np.nan if (t := fop_threshold(fop, None if np.isnan(r) else float(r), c, int(a))) is None else t
                        for r, c, a in zip(self.ref_g, cat, aud)
                    ]
                )
                entry["basis_g"], entry["threshold"], entry["audience"] = basis_g, threshold, aud
                for k, ref_key in (fop.high_in or {}).items():
                    keys = [ref_key, *(a.high_in[k] for a in fop.audiences)]
                    ref = np.array([self.pack.reference_values[keys[int(a) + 1]].amount for a in aud], dtype=float)
                    pct = self.val[k] * basis_g / 100 / ref * 100
                    high = np.array(
                        [
                            bool(not np.isnan(p) and not np.isnan(t) and to_decimal(float(p)) >= to_decimal(float(t)))
                            for p, t in zip(pct, threshold)
                        ],
                        dtype=bool,
                    )
                    entry["nutrients"][k] = {"percent": pct, "high": high, "unknown": np.isnan(self.val[k])}
            out.append(entry)
        return out

    # ---------------------------------------------------------------- reviews
    @cached_property
    def zero_rows(self) -> dict[str, np.ndarray]:
        """Rows declared 0 per serving whose unrounded amount is not trivial (several servings may be eaten)."""
        out: dict[str, np.ndarray] = {}
        if "per_serving" not in self.bases:
            return out
        with np.errstate(divide="ignore", invalid="ignore"):
            nserv = self.container / self.serving
        for row in self.pack.rows:
            if self.pack.nutrients[row.nutrient].unit != "g":
                continue
            ra = self.rounded[row.nutrient]["per_serving"]
            v = self.column_values(row.nutrient, "per_serving")
            rule = self.pack.rounding[row.rounding]
            flag = np.zeros(self.n, dtype=bool)
            cand = self.shown[row.nutrient] & self.has_col["per_serving"] & (ra.number == 0) & (np.nan_to_num(v) > 0)
            for i in np.nonzero(cand)[0]:
                band = rule.bands[int(ra.band[i])]
                bound = band.below if band.below is not None else band.up_to
                if bound is None:
                    continue
                ns = nserv[i]
                flag[i] = bool(v[i] >= 0.8 * bound or (not np.isnan(ns) and ns >= 2 and v[i] * ns >= bound))
            out[row.nutrient] = flag
        return out


def portion_rule_applies(fop, serving_g: float, drink: bool, density: float) -> bool:
    """Whether a colour scheme's per-portion limits apply: foods above ``portion_rule_above_g``, drinks
    (judged per 100 ml) above ``liquid_portion_rule_above_ml`` of portion volume (needs the density)."""
    if drink:
        limit = fop.liquid_portion_rule_above_ml
        return bool(limit and not np.isnan(density) and q_scalar(serving_g / density) > q_scalar(limit))
    return bool(fop.portion_rule_above_g and q_scalar(serving_g) > q_scalar(fop.portion_rule_above_g))


def fop_threshold(fop, ref_g: float | None, category: str | None, audience: int = -1) -> float | None:
    """The %DV threshold of a 'high in' scheme for a product: small reference amounts, main dishes, or general;
    ``audience`` indexes the scheme's audiences (-1: the scheme's own thresholds)."""
    for t in (fop.thresholds or []) if audience < 0 else fop.audiences[audience].thresholds:
        if "reference_amount_up_to" in t and ref_g is not None and ref_g <= t["reference_amount_up_to"]:
            return t["percent"]
        if (
            t.get("main_dish")
            and category in t.get("categories", [])
            and (ref_g or 0) >= t.get("reference_amount_at_least", 0)
        ):
            return t["percent"]
        if set(t) == {"percent"}:
            return t["percent"]
    return None
