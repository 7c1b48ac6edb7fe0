"""Write a synthetic product range of N formulas over the demo ingredient library.

Sizes vary (3-14 batch lines), about a third use a sub-formula (the demo seasonings or a generated
pre-mix), a third are fried (with an oil uptake range for some), others baked or dried.
The formulas are synthetic benchmark data, not products.

    python3 benchmarks/generate.py 10000 range10k
"""

from __future__ import annotations

import random
import shutil
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
DEMO = ROOT / "demo_products"

SOLIDS = [
    "potato_raw",
    "wheat_flour",
    "whole_wheat_flour",
    "corn_grits",
    "rice_flour",
    "oat_flakes",
    "sugar",
    "glucose_syrup",
    "dextrose",
    "maltodextrin",
    "sea_salt",
    "baking_soda",
    "sesame_seeds",
    "cheese_powder",
    "whey_powder",
    "onion_powder",
    "garlic_powder",
    "paprika",
    "yeast_extract",
    "inulin",
    "pectin",
    "citric_acid",
]
FATS = ["sunflower_oil", "rapeseed_oil", "structured_lipid_fat", "salatrim_fat"]
SUBS = ["hl_sea_salt_seasoning", "hl_cheese_onion_seasoning"]
CATS = ["snacks", "crackers_snack", "cookies", "bars_grain"]


def one(i: int, rng: random.Random) -> str:
    n = rng.randint(3, 14)
    lines = []
    base = rng.choice(["potato_raw", "wheat_flour", "corn_grits", "rice_flour", "oat_flakes"])
    lines.append((base, "ingredient", rng.randint(400, 900)))
    for name in rng.sample(SOLIDS, n - 2):
        if name != base:
            lines.append((name, "ingredient", rng.randint(2, 120)))
    lines.append(("water", "ingredient", rng.randint(50, 300)))
    if rng.random() < 0.35:
        lines.append((rng.choice(SUBS + [f"bench_premix_{i % 50}"]), "subformula", rng.randint(10, 40)))
    if rng.random() < 0.4:
        lines.append((rng.choice(FATS), "ingredient", rng.randint(20, 120)))
    kind = rng.random()
    if kind < 0.33:
        oil = rng.choice(["sunflower_oil", "rapeseed_oil", "hl_frying_blend_75"])
        up = f"[{rng.randint(22, 28)}, {rng.randint(30, 36)}]" if rng.random() < 0.5 else str(rng.randint(20, 35))
        proc = (
            f"processing:\n  - step: frying\n    moisture_loss: {{final_water: {rng.uniform(1.5, 4):.2f}}}\n"
            f"    oil_uptake: {{oil: {oil}, per_100g: {up}}}\n"
        )
    elif kind < 0.66:
        proc = f"processing:\n  - step: baking\n    moisture_loss: {{final_water: {rng.uniform(2, 8):.2f}}}\n"
    else:
        proc = f"processing:\n  - step: drying\n    yield: {rng.uniform(0.85, 0.97):.3f}\n"
    batch = "\n".join(f"  - {{{kind_}: {name}, amount: {g} g}}" for name, kind_, g in lines)
    serving = rng.choice([25, 28, 30, 40])
    return (
        f"product:\n  id: bench_{i:06d}\n  name: Benchmark product {i}\n  category: {rng.choice(CATS)}\n"
        f"  serving: {{size: {serving} g}}\n  net_quantity: {serving * rng.randint(3, 8)} g\n"
        f"batch:\n{batch}\n{proc}"
    )


def premix(j: int, rng: random.Random) -> str:
    names = rng.sample(["onion_powder", "garlic_powder", "paprika", "yeast_extract", "maltodextrin", "sea_salt"], 4)
    shares = [40, 30, 20, 10]
    batch = "\n".join(f"  - {{ingredient: {n}, amount: {s} %}}" for n, s in zip(names, shares))
    return f"subformula:\n  id: bench_premix_{j}\n  name: Benchmark premix {j}\nbatch:\n{batch}\n"


def generate(n: int, out: Path, seed: int = 7) -> Path:
    rng = random.Random(seed)
    if out.exists():
        shutil.rmtree(out)
    (out / "products").mkdir(parents=True)
    shutil.copytree(DEMO / "ingredients", out / "ingredients")
    shutil.copytree(DEMO / "subformulas", out / "subformulas")
    for j in range(50):
        (out / "subformulas" / f"bench_premix_{j}.yaml").write_text(premix(j, rng), encoding="utf-8")
    for i in range(n):
        (out / "products" / f"bench_{i:06d}.yaml").write_text(one(i, rng), encoding="utf-8")
    return out


if __name__ == "__main__":
    generate(int(sys.argv[1]), Path(sys.argv[2]))
