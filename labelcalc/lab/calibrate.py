"""Process calibration: the processing parameters that reproduce a lab's moisture and fat.

For a fried product the unknowns are the frying step's water content after
the step and its oil uptake; the targets are the finished product's analysed
moisture and fat (total lipid, as a gravimetric method measures it).  The two
equations are solved by Newton's method on the full composition engine, so
sub-formulas, later steps and seasonings after frying are all accounted for.
"""

from __future__ import annotations

import copy
from dataclasses import dataclass, field
from pathlib import Path

import yaml

from labelcalc.errors import InputError, LabelError, Problem
from labelcalc.formulation.composition import compose
from labelcalc.intake.formula import Formula, ProcessStep, map_tree
from labelcalc.intake.library import Library
from labelcalc.lab.certificates import LabFile


@dataclass
class Calibration:
    step: str
    in_formula: str
    final_water: float | None
    oil_per_100g: float | None
    water_range: tuple[float, float] | None
    oil_range: tuple[float, float] | None
    reproduced: dict[str, float]
    notes: list[str] = field(default_factory=list)
    files: list[Path] = field(default_factory=list)


def _find_step(f: Formula) -> tuple[Formula, int] | None:
    """The first frying step (oil uptake) in the formula tree, else the first water step."""

    def walk(g: Formula, want_oil: bool):
        for j, st in enumerate(g.steps):
            if (st.oil_ref is not None) == want_oil and (
                want_oil or st.loss_percent or st.final_water or st.yield_factor or st.finished_weight_g
            ):
                return g, j
        for sub in g.sub_formulas():
            hit = walk(sub, want_oil)
            if hit:
                return hit
        return None

    return walk(f, True) or walk(f, False)


def _with_params(f: Formula, target: Formula, j: int, water: float, oil: float | None) -> Formula:
    """The tree with step j of ``target`` set to a final water content and an oil uptake per 100 g."""

    def on_step(g: Formula, k: int, st: ProcessStep) -> None:
        if g is target and k == j:
            st.loss_percent = st.yield_factor = st.finished_weight_g = None
            st.final_water = (water, water)
            if oil is not None:
                st.oil_final_fat = None
                st.oil_per_100g = (oil, oil)

    return map_tree(f, f"calibrate~{water:.9f}~{oil}", on_step=on_step)


def _measure(f: Formula, lib: Library) -> tuple[float, float]:
    c = compose(f, lib)[0]
    return c.value("water"), c.value("total_lipid")


def solve(f: Formula, lib: Library, water_t: float, fat_t: float | None, start: tuple[float, float | None]):
    target, j = _find_step(f)
    w, u = start
    for _ in range(40):
        g = _with_params(f, target, j, w, u)
        mw, mf = _measure(g, lib)
        rw = mw - water_t
        rf = 0.0 if fat_t is None or u is None else mf - fat_t
        if abs(rw) < 1e-9 and abs(rf) < 1e-9:
            return w, u, (mw, mf)
        h = 1e-4
        dww = (_measure(_with_params(f, target, j, w + h, u), lib)[0] - mw) / h
        if u is None or fat_t is None:
            w -= rw / dww
            continue
        gu = _measure(_with_params(f, target, j, w, u + h), lib)
        dwu, dfu = (gu[0] - mw) / h, (gu[1] - mf) / h
        dfw = (_measure(_with_params(f, target, j, w + h, u), lib)[1] - mf) / h
        det = dww * dfu - dwu * dfw
        if abs(det) < 1e-12:
            raise InputError(Problem("the lab figures cannot be separated into a water and an oil effect"))
        dw = (rw * dfu - rf * dwu) / det
        du = (dww * rf - dfw * rw) / det
        w, u = w - dw, u - du
        if not (0 <= w < 100) or (u is not None and not (0 <= u < 100)):
            raise InputError(
                Problem(
                    f"no physically possible setting reproduces the lab figures (water after the step would be {w:.1f} g/100 g, "
                    f"oil uptake {u if u is None else round(u, 1)} g/100 g)"
                )
            )
    raise InputError(Problem("calibration did not converge; check the lab figures"))


def calibrate(f: Formula, lib: Library, lab: LabFile, *, force: bool = False) -> Calibration:
    if lab.certificate.product_id != f.id and not force:
        raise InputError(
            Problem(
                f"the certificate is for product '{lab.certificate.product_id}', not '{f.id}'",
                field="certificate.product_id",
                fix="check the files, or pass --force",
            )
        )
    found = _find_step(f)
    if found is None:
        raise InputError(Problem(f"{f.id} has no processing step to calibrate", file=f.file, field="processing"))
    target, j = found
    st = target.steps[j]
    moist, fat = lab.result("moisture"), lab.result("fat")
    if moist is None:
        raise InputError(
            Problem("the certificate has no moisture result; calibration needs moisture (and fat for a fried product)")
        )
    notes = []
    fried = st.oil_ref is not None
    if fried and fat is None:
        raise InputError(Problem("the certificate has no fat result; a fried product needs moisture and fat"))
    oil_comp = None
    if fried:
        # upper bound: the product cannot hold more lipid than the oil itself
        oil_c = compose(_with_params(f, target, j, moist.value, 0.0), lib)[0]
        oil_ing = st.oil_ingredient
        oil_lipid = None
        if oil_ing is not None:
            oil_lipid = sum(oil_ing.values.get(k, 0.0) for k in ("fat", "nonabsorbed_lipid", "partial_lipid"))
        elif st.oil_formula is not None:
            oil_comp = compose(st.oil_formula, lib)[0]
            oil_lipid = oil_comp.value("total_lipid")
        if oil_lipid is not None and fat.value >= oil_lipid:
            raise InputError(
                Problem(
                    f"the analysed fat ({fat.value:g} g/100 g) is not possible: the frying oil itself holds {oil_lipid:.1f} g "
                    "lipid per 100 g, and the product can hold less than the oil"
                )
            )
        if fat.value < (oil_c.value("total_lipid") or 0) - 1e-9:
            raise InputError(
                Problem(
                    f"the analysed fat ({fat.value:g} g/100 g) is below what the other ingredients bring without any oil "
                    f"({oil_c.value('total_lipid'):.2f} g/100 g): no oil uptake can reproduce it"
                )
            )
    start_w = (st.final_water[0] + st.final_water[1]) / 2 if st.final_water else 3.0
    start_u = ((st.oil_per_100g[0] + st.oil_per_100g[1]) / 2 if st.oil_per_100g else 30.0) if fried else None
    try:
        w, u, rep = solve(f, lib, moist.value, fat.value if fried else None, (start_w, start_u))
    except InputError:
        raise
    except LabelError as exc:
        raise InputError(Problem(f"no physically possible setting reproduces the lab figures: {exc}")) from None
    wr = ur = None
    um, uf = moist.absolute_uncertainty(), fat.absolute_uncertainty() if fat else None
    if um is not None or uf is not None:
        ws, us = [], []
        for dm in (-1, 1) if um else (0,):
            for df in (-1, 1) if uf else (0,):
                try:
                    a, b, _ = solve(
                        f, lib, moist.value + dm * (um or 0), (fat.value + df * (uf or 0)) if fried else None, (w, u)
                    )
                    ws.append(a)
                    if b is not None:
                        us.append(b)
                except LabelError:
                    notes.append("a corner of the uncertainty range has no physical solution")
        wr = (min(ws), max(ws)) if ws else None
        ur = (min(us), max(us)) if us else None
    else:
        notes.append("the certificate gives no measurement uncertainty: no range is reported")
    return Calibration(st.name, target.id, w, u, wr, ur, {"water": rep[0], "total_lipid": rep[1]}, notes)


def write_calibrated(f: Formula, cal: Calibration, out: Path) -> list[Path]:
    """Write a self-contained copy of the formula tree with the calibrated step (originals untouched)."""
    out.mkdir(parents=True, exist_ok=True)
    written: list[Path] = []
    seen: set[int] = set()

    def dump(g: Formula, is_product: bool) -> None:
        if id(g) in seen:
            return
        seen.add(id(g))
        data = copy.deepcopy(g.raw)
        head = data["product" if is_product else "subformula"]
        if g.id == cal.in_formula:
            proc = data.get("processing", [])
            for st in proc:
                if st.get("step") == cal.step:
                    st.pop("yield", None)
                    st.pop("finished_weight", None)
                    st["moisture_loss"] = {"final_water": round(cal.final_water, 3)}
                    if cal.oil_per_100g is not None:
                        st["oil_uptake"] = {"oil": st["oil_uptake"]["oil"], "per_100g": round(cal.oil_per_100g, 3)}
                    break
        # the calibrated sub-formula gets a new id, so it can never be mistaken for (or shadow) the original
        # in a folder that holds both; the lines that use it follow
        new_sub = f"{cal.in_formula}_calibrated"
        if not is_product and g.id == cal.in_formula:
            head["id"] = new_sub
            head["version"] = f"{head.get('version', '1')}-calibrated"
        for line in data.get("batch", []) or []:
            if isinstance(line, dict) and line.get("subformula") == cal.in_formula:
                line["subformula"] = new_sub
        if is_product:
            head["id"] = f"{g.id}_calibrated"
            head["version"] = f"{head.get('version', '1')}-calibrated"
            head.pop("reference_formula", None)
        name = f"{head['id']}.yaml"
        path = out / name
        if path.exists() and path.resolve() == Path(g.file).resolve():
            raise InputError(Problem("refusing to overwrite the original formula", file=g.file))
        text = (
            "# Written by labelcalc calibrate from a laboratory certificate; the original file is unchanged.\n"
            + yaml.safe_dump(data, sort_keys=False, allow_unicode=True)
        )
        path.write_text(text, encoding="utf-8")
        written.append(path)
        for sub in g.sub_formulas():
            dump(sub, False)

    dump(f, True)
    return written
