"""Laboratory certificates: analysed values per 100 g of the finished product.

YAML layout::

    certificate:
      product_id: hl_kettle_sea_salt
      lab: name of the laboratory
      reference: certificate number
      sample_date: "2026-11-20"
      samples: composite of 12 consumer units
    results:
      - {analyte: fat, value: 33.1, unit: g, method: acid hydrolysis, uncertainty: 1.2}

CSV layout: one row per result with columns ``product_id, lab, reference,
sample_date, samples, analyte, value, unit, method, uncertainty,
uncertainty_percent`` (certificate columns on the first row).

Analytes are named in labelcalc's own words and map to components, so one
certificate serves every market: ``moisture`` (water), ``fat`` (total lipid
as a gravimetric method measures it, non-absorbed and partially absorbed
lipids included), ``saturated_fat``, ``trans_fat``, ``protein``, ``sugars``,
``starch``, ``fibre``, ``polyols``, ``sodium`` (mg), ``salt`` (g, as
sodium x 2.5), ``cholesterol`` (mg), ``ash``, ``calcium``, ``iron``,
``potassium`` (mg), ``vitamin_d`` (ug), ``energy_kcal``, ``energy_kj``.
"""

from __future__ import annotations

import csv
from pathlib import Path

from pydantic import BaseModel, ConfigDict, Field, ValidationError, field_validator, model_validator

from labelcalc.errors import InputError, Problem, display_path
from labelcalc.yamlsafe import load_yaml, pydantic_problems

#: analyte -> (components it measures, unit, factor from the components' native unit)
ANALYTES: dict[str, tuple[tuple[str, ...], str, float]] = {
    "moisture": (("water",), "g", 1.0),
    "fat": (("fat", "nonabsorbed_lipid", "partial_lipid"), "g", 1.0),
    "saturated_fat": (("saturated_fa",), "g", 1.0),
    "trans_fat": (("trans_fa",), "g", 1.0),
    "protein": (("protein",), "g", 1.0),
    "sugars": (("sugars",), "g", 1.0),
    "starch": (("starch",), "g", 1.0),
    "fibre": (("fibre_soluble", "fibre_insoluble", "fibre_unsplit"), "g", 1.0),
    "polyols": (
        ("sorbitol", "mannitol", "xylitol", "maltitol", "isomalt", "lactitol", "erythritol", "glycerol"),
        "g",
        1.0,
    ),
    "sodium": (("sodium",), "mg", 1.0),
    "salt": (("sodium",), "g", 0.0025),
    "cholesterol": (("cholesterol",), "mg", 1.0),
    "ash": (("ash",), "g", 1.0),
    "calcium": (("calcium",), "mg", 1.0),
    "iron": (("iron",), "mg", 1.0),
    "potassium": (("potassium",), "mg", 1.0),
    "vitamin_d": (("vitamin_d",), "ug", 1.0),
    "energy_kcal": ((), "kcal", 1.0),
    "energy_kj": ((), "kJ", 1.0),
}


class Certificate(BaseModel):
    model_config = ConfigDict(extra="forbid")
    product_id: str
    lab: str | None = None
    reference: str | None = None
    sample_date: str | None = None
    samples: str | None = None


class Result(BaseModel):
    model_config = ConfigDict(extra="forbid")
    analyte: str
    value: float = Field(ge=0)
    unit: str
    method: str | None = None
    uncertainty: float | None = Field(None, ge=0, description="expanded measurement uncertainty, same unit")
    uncertainty_percent: float | None = Field(None, ge=0, le=100)

    @field_validator("analyte")
    @classmethod
    def _known(cls, v: str) -> str:
        if v not in ANALYTES:
            import difflib

            near = difflib.get_close_matches(v, list(ANALYTES), n=2)
            raise ValueError(
                f"unknown analyte '{v}'"
                + (f" (did you mean {', '.join(near)}?)" if near else f"; known: {', '.join(ANALYTES)}")
            )
        return v

    @model_validator(mode="after")
    def _unit(self):
        want = ANALYTES[self.analyte][1]
        if self.unit != want:
            raise ValueError(
                f"{self.analyte} is reported in {self.unit}; labelcalc expects {want} per 100 g — convert it"
            )
        return self

    def absolute_uncertainty(self) -> float | None:
        if self.uncertainty is not None:
            return self.uncertainty
        if self.uncertainty_percent is not None:
            return self.value * self.uncertainty_percent / 100
        return None


class LabFile(BaseModel):
    model_config = ConfigDict(extra="forbid")
    certificate: Certificate
    results: list[Result] = Field(min_length=1)

    def result(self, analyte: str) -> Result | None:
        return next((r for r in self.results if r.analyte == analyte), None)


def load_lab(path: str | Path) -> LabFile:
    p = Path(path)
    shown = display_path(p) or str(p)
    if p.suffix.lower() == ".csv":
        return _load_csv(p, shown)
    loaded = load_yaml(p)
    try:
        return LabFile.model_validate(loaded.data)
    except ValidationError as exc:
        probs = pydantic_problems(exc, loaded)
        for pr in probs:
            pr.message = pr.message.replace("Value error, ", "")
        raise InputError(probs) from None


def _load_csv(p: Path, shown: str) -> LabFile:
    try:
        with p.open(newline="", encoding="utf-8-sig") as fh:
            rows = list(csv.DictReader(fh))
    except OSError as exc:
        raise InputError(Problem(f"cannot read: {exc.strerror}", file=shown)) from None
    if not rows:
        raise InputError(Problem("no results in the certificate", file=shown))
    head = {
        k: next((r[k] for r in rows if r.get(k)), None)
        for k in ("product_id", "lab", "reference", "sample_date", "samples")
    }
    results = []
    problems = []
    for i, r in enumerate(rows, start=2):
        try:
            results.append(
                Result(
                    analyte=(r.get("analyte") or "").strip(),
                    value=float(r.get("value") or "nan"),
                    unit=(r.get("unit") or "").strip(),
                    method=r.get("method") or None,
                    uncertainty=float(r["uncertainty"]) if r.get("uncertainty") else None,
                    uncertainty_percent=float(r["uncertainty_percent"]) if r.get("uncertainty_percent") else None,
                )
            )
        except (ValidationError, ValueError) as exc:
            msg = exc.errors()[0]["msg"] if isinstance(exc, ValidationError) else str(exc)
            problems.append(Problem(msg.replace("Value error, ", ""), file=shown, line=i))
    if problems:
        raise InputError(problems)
    if not head["product_id"]:
        raise InputError(Problem("missing product_id", file=shown, line=2, field="product_id"))
    return LabFile(certificate=Certificate(**{k: v for k, v in head.items() if v}), results=results)
