"""Plain-text reports for the terminal: composition and declarations."""

from __future__ import annotations

import os

from labelcalc import components as C
from labelcalc.formulation.composition import Composition
from labelcalc.formulation.energy import EnergyResult, energy_by_line
from labelcalc.labelling.model import BASIS_LABEL, Declaration

DRAFT = "DRAFT — figures for review; verify against current local regulation and a qualified regulatory professional."


def table(headers: list[str], rows: list[list[str]], align: str | None = None) -> str:
    """A simple aligned text table; ``align`` gives 'l' or 'r' per column."""
    align = align or "l" + "r" * (len(headers) - 1)
    widths = [max(len(str(x)) for x in col) for col in zip(headers, *rows)] if rows else [len(h) for h in headers]

    def fmt(cells):
        out = []
        for c, w, a in zip(cells, widths, align):
            out.append(str(c).ljust(w) if a == "l" else str(c).rjust(w))
        return "  ".join(out).rstrip()

    line = "  ".join("-" * w for w in widths)
    return "\n".join([fmt(headers), line, *[fmt(r) for r in rows]])


def num(v: float | None, places: int = 2) -> str:
    return "unknown" if v is None else f"{v:.{places}f}"


def scenario_title(c: Composition) -> str:
    if c.scenario == "nominal":
        return ""
    return f" — {c.scenario} end of the stated ranges"


def compose_text(comps: list[Composition], energies: dict[str, list[EnergyResult]]) -> str:
    f = comps[0].formula
    out = [f"{f.header.name} ({f.id}, version {f.header.version or '-'}, formula hash {f.content_hash})", DRAFT, ""]
    for i, c in enumerate(comps):
        s = f.serving_grams()
        out.append(f"Composition{scenario_title(c)}")
        steps = "; ".join(
            f"{st.name}: water lost {st.water_lost_g:.1f} g, oil taken up {st.oil_taken_up_g:.1f} g" for st in c.steps
        )
        out.append(
            f"batch {c.batch_grams:.1f} g -> finished {c.finished_grams:.1f} g" + (f" ({steps})" if steps else "")
        )
        rows = []
        for comp in C.COMPONENTS:
            v = c.value(comp.key)
            if v is None or v != 0:
                rows.append(
                    [
                        ("  " if comp.part_of else "") + comp.key,
                        comp.unit,
                        num(v, 3),
                        num(None if v is None or s is None else v * s / 100, 3),
                    ]
                )
        out.append(
            table(["component", "unit", "per 100 g", f"per serving ({s:g} g)" if s else "per serving"], rows, "llrr")
        )
        out.append("")
        erows = []
        for er in energies_for(energies, f.id, i):
            ks, kcs = er.per_serving(s)
            erows.append(
                [
                    er.factor_set.id + (" (available)" if er.factor_set.id == "available" else " (declared basis)"),
                    num(er.kj, 0),
                    num(er.kcal, 0),
                    num(ks, 0),
                    num(kcs, 0),
                ]
            )
        out.append(table(["energy factor set", "kJ/100 g", "kcal/100 g", "kJ/serving", "kcal/serving"], erows))
        avail = energies_for(energies, f.id, i)[0]
        out.append("")
        out.append(
            "Available energy by component (kcal per 100 g): "
            + ", ".join(f"{k} {num(v, 1)}" for k, v in avail.by_component_kcal.items() if v is None or abs(v) > 1e-9)
        )
        lines = energy_by_line(c, avail.factor_set)
        out.append(
            "Available energy by line (kcal per 100 g): "
            + ", ".join(f"{lab} {num(kc, 1)}" for lab, _, kc in lines if kc is None or abs(kc) > 1e-9)
        )
        unknown = c.unknown_components
        if unknown:
            out.append(
                "Unknown (never read as zero): "
                + ", ".join(f"{k} (from {', '.join(c.unknown_inputs(k)) or 'an input'})" for k in unknown)
            )
        by_text: dict[str, list[str]] = {}
        for er in energies_for(energies, f.id, i):
            for rv in er.reviews:
                by_text.setdefault(rv.strip(), []).append(er.factor_set.id)
        for rv, sets in by_text.items():
            out.append(f"Review [{', '.join(sets)}]: {rv}")
        out.append("")
    out += provenance_lines(comps[0])
    if f.is_fried:
        out.append(
            "Note: fried product — oil uptake and moisture loss are estimates; laboratory analysis of fat and "
            "moisture is the usual confirmation."
        )
    return "\n".join(out).rstrip() + "\n"


def _common_head(texts: list[str]) -> str:
    """The shared start of the source texts, cut back to a ', ' boundary."""
    texts = [t for t in texts if not t.startswith(("derived", "assumed", "given in"))]
    if len(texts) < 2:
        return ""
    head = os.path.commonprefix(texts)
    cut = head.rfind(", ")
    return head[: cut + 2] if cut > 0 else ""


def provenance_lines(c: Composition) -> list[str]:
    """Each ingredient value used with its source and basis, then every assumed zero."""
    out = ["Ingredient values (per 100 g of the ingredient) and their sources"]
    for ing in c.formula.ingredients_used():
        prov = {k: v for k, v in ing.provenance().items() if k not in ing.zeros}
        head = _common_head([src for _, src, _ in prov.values()])
        shown = head.rstrip(", ")
        out.append(f"  {ing.id} — {ing.source}" + (f" [{shown}]" if shown and not ing.source.startswith(shown) else ""))
        parts = []
        for k, (v, src, basis) in prov.items():
            text = f"{k} {v:g} {C.unit_of(k)}"
            rest = src[len(head) :] if head else src
            if rest != ing.source:
                text += f" ({rest})"
            if basis:
                text += f" [basis: {basis}]"
            parts.append(text)
        out.append("    " + ("; ".join(parts) or "no values"))
    zeros = c.assumptions
    out.append("")
    if zeros:
        out.append("Assumed zeros (stated in the library with a reason; not measured):")
        grouped: dict[tuple[str, str], list[str]] = {}
        for ing_id, comps, reason in zeros:
            grouped.setdefault((", ".join(comps), reason), []).append(ing_id)
        out += [f"  {', '.join(ids)}: {comps} — {reason}" for (comps, reason), ids in grouped.items()]
    else:
        out.append("Assumed zeros: none (every figure comes from a stated value, or is shown as unknown).")
    out.append("")
    return out


def energies_for(energies, fid, i):
    return energies[fid][i]


def declare_text(decls: list[Declaration]) -> str:
    out = []
    for d in decls:
        f = d.composition.formula
        p = d.pack
        title = f"{p.panel.title} — {p.pack.name} ({d.market}) — {f.header.name}{scenario_title(d.composition)}"
        out += [title, "=" * len(title), p.pack.draft_notice]
        if d.serving_g:
            out.append(
                f"Serving size: {d.serving_g:g} g"
                + (f" ({f.header.serving.household})" if f.header.serving and f.header.serving.household else "")
                + (f"; servings per container: {d.servings_text}" if d.servings_text else "")
            )
        if d.reference_amount:
            out.append(
                f"Reference amount ({d.reference_amount[0]}): {d.reference_amount[1]:g} g [{d.reference_amount[2]}]"
            )
        headers = ["row"] + [BASIS_LABEL[b] for b in d.columns]
        pct_label = p.panel.percent_label or "%"
        has_pct = any(r.percent for r in d.shown_rows)
        if has_pct:
            headers += [f"{pct_label} ({BASIS_LABEL[b]})" for b in d.columns if b == (p.panel.percent_basis or b)]
        rows = []
        for r in d.shown_rows:
            if r.amount_in_label or r.percent_only:
                cells = ["  " * r.indent + r.label_for(d.columns[0])] + ["" for b in d.columns]
            else:
                cells = ["  " * r.indent + r.label] + [r.text(b) for b in d.columns]
            if has_pct:
                cells += [r.percent.get(b) or "" for b in d.columns if b == (p.panel.percent_basis or b)]
            rows.append(cells)
        out.append(table(headers, rows))
        for fn in p.panel.footnotes:
            if fn.when == "always" or has_pct:
                out.append(f"  {fn.text}")
        if has_pct:
            out.append(
                f"Percentages computed from the {p.panel.percent_from} amounts"
                + (f" ({p.panel.percent_from_citation.strip()})" if p.panel.percent_from_citation else "")
            )
        out.append(
            f"Energy per 100 g: declared {num(d.declared_energy.kj, 0)} kJ / {num(d.declared_energy.kcal, 0)} kcal "
            f"({d.declared_energy.factor_set.id}); available {num(d.available_energy.kj, 0)} kJ / "
            f"{num(d.available_energy.kcal, 0)} kcal"
        )
        for n in d.notes:
            out.append(f"Note: {n}")
        for rv in d.reviews:
            out.append(f"Review: {rv.strip()}")
        out.append("")
    return "\n".join(out)


def assess_text(items) -> str:
    """Claims, statements, allergens, ingredient list and front-of-pack verdicts."""
    out = []
    for a in items:
        d = a.declaration
        f = d.composition.formula
        title = f"Assessment — {d.pack.pack.name} ({a.market}) — {f.header.name}{scenario_title(d.composition)}"
        out += [title, "=" * len(title), d.pack.pack.draft_notice, ""]
        if a.claims:
            out.append("Claims (tested on unrounded figures; for review — not part of the panel):")
            for c in a.claims:
                mark = {"eligible": "ELIGIBLE", "not eligible": "not eligible", "cannot tell": "CANNOT TELL"}[c.verdict]
                out.append(
                    f"  [{mark}] {c.label} ({c.claim})" + (" — intended" if c.intended else "") + f" — {c.citation}"
                )
                for x in c.failed:
                    out.append(f"      failed: {x}")
                for x in c.missing:
                    out.append(f"      missing: {x}")
                for x in c.notes:
                    out.append(f"      note: {x}")
                for x in c.texts:
                    out.append(f"      required text: {x}")
        if a.statements:
            out.append("Statements (required, conditional or for review):")
            for s in a.statements:
                out.append(f"  [{s.status.upper()}] {s.text}")
                out.append(f"      because: {s.trigger} — {s.citation} ({s.confidence})")
                for x in s.figures:
                    out.append(f"      figure: {x}")
                if s.caution:
                    out.append(f"      caution: {s.caution}")
        al = a.allergens
        out.append("Allergens: " + (al.get("statement") or "none declared from the ingredient data"))
        for x in al.get("review", []):
            out.append(f"  REVIEW: {x}")
        out.append(f"  {al.get('caution')}")
        if a.ingredient_list:
            out.append(a.ingredient_list["text"])
            for q in a.ingredient_list["quid"]:
                out.append(f"  QUID: {q['ingredient']}: {q['text']}")
            for x in a.ingredient_list["notes"]:
                out.append(f"  note: {x}")
        for fop in a.front_of_pack:
            if fop.get("exempt"):
                out.append(f"Front of pack — {fop['name']}: exempt")
                continue
            parts = []
            for n, v in fop["verdicts"].items():
                if "colour" in v:
                    parts.append(f"{n} {v['colour']}")
                else:
                    hi = v.get("high_in")
                    parts.append(
                        f"{n} {'HIGH IN' if hi is True else 'cannot tell' if hi == 'cannot tell' else 'not high'}"
                        + (
                            f" ({v['percent_dv']:.1f} % DV vs {v['threshold_percent']:g} %)"
                            if "percent_dv" in v
                            else ""
                        )
                    )
            aud = f" [values for: {fop['audience']['name']}]" if fop.get("audience") else ""
            out.append(f"Front of pack — {fop['name']}{aud}: " + ", ".join(parts))
        for x in a.reviews:
            out.append(f"REVIEW: {x}")
        out.append("")
    return "\n".join(out)
