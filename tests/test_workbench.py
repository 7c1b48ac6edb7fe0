"""The workbench server through Starlette's test client: pages, edits, validation, trace, slider, save, export,
and the safety rules (loopback, no file outside the opened folder).  The demo products are invented demo data;
these tests check the workbench against the engine's own records, never against outside values."""

from __future__ import annotations

import re
import shutil
from pathlib import Path

import pytest
from reportlab.lib.units import mm
from starlette.testclient import TestClient
from typer.testing import CliRunner

from labelcalc.cli import app as cli_app
from labelcalc.formulation.composition import compose
from labelcalc.labelling.assess import assess_against
from labelcalc.labelling.rulepack import get_packs, load_packs
from labelcalc.outputs.panelpdf import PanelDrawing, _fonts
from labelcalc.workbench.editing import comment_count
from labelcalc.workbench.panelhtml import panel_view
from labelcalc.workbench.server import create_app, is_loopback
from labelcalc.workbench.views import State, compute, trace
from labelcalc.workbench.workspace import Workspace
from tests.conftest import DEMO

KETTLE = "hl_kettle_sea_salt.yaml"


@pytest.fixture()
def folder(tmp_path: Path) -> Path:
    dest = tmp_path / "range"
    shutil.copytree(DEMO, dest)
    return dest


@pytest.fixture()
def client(folder: Path) -> TestClient:
    return TestClient(create_app(Workspace.open(folder, markets=["us", "eu"])))


def _state(folder: Path, **kw) -> dict:
    return {"path": KETTLE, "yaml": (folder / KETTLE).read_text(encoding="utf-8"), "markets": ["us", "eu"], **kw}


def _calories(html: str) -> str:
    """The US panel's first Calories figure in a results fragment."""
    us = html[html.index('data-market="us"') :]
    m = re.search(r'data-nutrient="energy_kcal" data-basis="[a-z_0-9]+">([^<]+)<', us)
    assert m, "no Calories figure in the US panel"
    return m.group(1)


def test_index_lists_the_products_of_the_folder(client, folder):
    r = client.get("/")
    assert r.status_code == 200
    for p in sorted(folder.glob("*.yaml")):
        assert p.name in r.text
    assert "hl_kettle_base_fried.yaml" not in r.text  # a sub-formula is not a product


def test_product_page_shows_panels_assessment_and_yaml(client, folder):
    r = client.get("/product", params={"path": KETTLE})
    assert r.status_code == 200
    for pack in get_packs(["us", "eu"]):
        assert pack.panel.title in r.text
    assert 'class="fig"' in r.text
    assert "Ingredients:" in r.text and "Claims" in r.text and "Allergens" in r.text
    assert "# DEMO DATA" in r.text  # the YAML beside the form, comments and all
    assert 'name="batch[0].amount"' in r.text


@pytest.mark.parametrize("market", sorted(load_packs()))
def test_html_panel_reads_the_declarations_shown_rows(market, demo_lib):
    from labelcalc.intake.formula import load_formula

    f = load_formula(DEMO / KETTLE, demo_lib)
    pack = get_packs([market])[0]
    d = assess_against(compose(f, demo_lib)[0], pack, None).declaration
    view = panel_view(d)
    assert [r.nutrient for r in view.rows] == [r.nutrient for r in d.shown_rows]
    # the width the PDF draws: at least the pack's width_mm, grown to fit the rows (no wider than max_width_mm)
    _fonts()
    drawn = PanelDrawing(d)._widths()[2] / mm
    assert view.title == pack.panel.title and view.width_mm == pytest.approx(drawn, abs=0.01)
    assert pack.panel.layout.width_mm <= view.width_mm <= pack.panel.layout.max_width_mm + 0.01
    figures = {c.text for r in view.rows for c in r.cells + ([r.after_label] if r.after_label else []) if c.text}
    printed = {r.text(b).replace(" ", "") for r in d.shown_rows for b in d.columns if not r.amount_in_label}
    assert {t.replace(" ", "") for t in figures if not t.endswith("%")} <= printed | {
        r.percent.get(b) or "" for r in d.shown_rows for b in d.columns
    }


def test_form_edit_writes_the_yaml_and_keeps_comments(client, folder):
    body = _state(
        folder,
        source="form",
        fields={"product.serving.size": "30 g", "batch[0].amount": "96 %", "batch[1].amount": "4 %"},
    )
    j = client.post("/api/update", json=body).json()
    assert j["problems"] == []
    assert "serving: {size: 30 g" in j["yaml"] and "amount: 4 %" in j["yaml"]
    assert comment_count(j["yaml"]) == comment_count(body["yaml"])
    assert not j["notice"]


def test_form_can_add_and_remove_batch_lines(client, folder):
    body = _state(folder, source="form", fields={}, add={"ref": "ingredient", "id": "sea_salt", "amount": "1 %"})
    text = client.post("/api/update", json=body).json()["yaml"]
    assert "{ingredient: sea_salt, amount: 1 %}" in text
    body = {**_state(folder), "yaml": text, "source": "form", "fields": {}, "remove": ["2"]}
    assert "sea_salt, amount" not in client.post("/api/update", json=body).json()["yaml"]


def test_validation_message_names_the_field_and_matches_the_cli(client, folder, monkeypatch):
    body = _state(folder, source="form", fields={"batch[0].amount": "ninety"})
    j = client.post("/api/update", json=body).json()
    [p] = [p for p in j["problems"] if p["field"] == "batch[0].amount"]
    assert 'role="alert"' in j["form_html"] and "ninety" in j["form_html"]
    # the same text saved as a file gives the same message on the command line
    (folder / KETTLE).write_text(j["yaml"], encoding="utf-8")
    monkeypatch.chdir(folder)
    res = CliRunner().invoke(cli_app, ["declare", KETTLE, "--market", "us"])
    assert res.exit_code == 2
    assert p["text"] in res.output


def test_yaml_syntax_error_is_the_cli_message(client, folder):
    body = _state(folder, source="yaml")
    body["yaml"] = body["yaml"].replace("batch:", "batch: [", 1)
    j = client.post("/api/update", json=body).json()
    assert j["problems"] and "YAML syntax error" in j["problems"][0]["text"]
    assert "cannot be worked out" in j["results_html"]


def test_trace_contributions_add_up_to_the_unrounded_value(folder):
    ws = Workspace.open(folder, markets=["us", "eu"])
    comp = compute(ws, State.from_json(_state(folder), ws.markets))
    for market, nutrient in [("us", "total_fat"), ("us", "energy_kcal"), ("eu", "energy_kj"), ("eu", "salt")]:
        t = trace(comp, market, 0, nutrient, comp.assessments[(market, 0)].declaration.columns[0])
        total = sum(float(ln["value"].split()[0].replace(",", "")) for ln in t["lines"])
        assert total == pytest.approx(float(t["total_per_100g"].replace(",", "")), abs=1e-3)
        assert t["sources"] and t["lines"][0]["path"] and t["rounding"]


def test_trace_endpoint_renders_the_figures_trace(client, folder):
    r = client.post(
        "/api/trace", json=_state(folder, market="us", nutrient="energy_kcal", basis="per_serving", scenario_index=0)
    )
    assert r.status_code == 200
    assert "Contributions per 100 g" in r.text and "hl_kettle_base_fried" in r.text and "21 CFR" in r.text


def test_slider_changes_the_panel_and_draws_the_sweep(client, folder):
    base = _state(folder, source="yaml", replace="sunflower_oil", **{"with": "spe_frying_fat"})
    at0 = client.post("/api/update", json={**base, "level": 0}).json()
    at100 = client.post("/api/update", json={**base, "level": 100}).json()
    assert at0["problems"] == [] and at100["problems"] == []
    assert _calories(at0["results_html"]) != _calories(at100["results_html"])
    assert "<polyline" in at100["chart_html"] and "us declared" in at100["chart_html"]
    assert (folder / KETTLE).read_text(encoding="utf-8") == base["yaml"]  # the slider never touches the file


def test_save_is_atomic_and_keeps_comments(client, folder):
    body = _state(folder, source="form", fields={"product.servings_per_container": "6"})
    text = client.post("/api/update", json=body).json()["yaml"]
    r = client.post("/api/save", json={**_state(folder), "yaml": text})
    assert r.status_code == 200 and "saved" in r.json()["message"]
    saved = (folder / KETTLE).read_text(encoding="utf-8")
    assert saved == text and "servings_per_container: 6" in saved and saved.startswith("# DEMO DATA")
    assert not list(folder.glob(".*.tmp-*"))


def test_export_writes_pdfs_inside_the_folder_and_refuses_unsaved_text(client, folder):
    r = client.post("/api/export", json={**_state(folder), "yaml": _state(folder)["yaml"] + "\n# changed\n"})
    assert r.status_code == 400 and "unsaved changes" in r.json()["error"]
    r = client.post("/api/export", json=_state(folder))
    assert r.status_code == 200, r.text
    out = folder / "labelcalc-out" / "workbench"
    assert {p.name for p in out.iterdir()} >= {
        "hl_kettle_sea_salt.us.pdf",
        "hl_kettle_sea_salt.eu.pdf",
        "hl_kettle_sea_salt.us.calculation.csv",
    }
    assert (out / "hl_kettle_sea_salt.us.pdf").read_bytes().startswith(b"%PDF")


@pytest.mark.parametrize(
    "path", ["../outside.yaml", "/etc/passwd", "..%2Foutside.yaml", "subformulas/../../outside.yaml", "link.yaml"]
)
def test_no_file_outside_the_opened_folder(client, folder, path):
    (folder.parent / "outside.yaml").write_text("product: {id: secret}\n", encoding="utf-8")
    (folder / "link.yaml").symlink_to(folder.parent / "outside.yaml")
    r = client.get("/product", params={"path": path.replace("%2F", "/")})
    assert r.status_code in (400, 403) and "secret" not in r.text
    r = client.post("/api/save", json={**_state(folder), "path": path.replace("%2F", "/"), "yaml": "x: 1\n"})
    assert r.status_code in (400, 403)
    assert (folder.parent / "outside.yaml").read_text(encoding="utf-8") == "product: {id: secret}\n"


def test_library_is_not_looked_up_above_the_opened_folder(tmp_path):
    (tmp_path / "ingredients").mkdir()
    inner = tmp_path / "inner"
    inner.mkdir()
    (inner / "p.yaml").write_text("product: {id: p, name: P}\nbatch: []\n", encoding="utf-8")
    c = TestClient(create_app(Workspace.open(inner)))
    j = c.post("/api/update", json={"path": "p.yaml", "yaml": "product: {id: p, name: P}\nbatch: []\n"}).json()
    assert "no ingredient library found" in j["problems"][0]["text"]


def test_requests_must_be_json_and_from_a_local_host(client, folder):
    assert client.post("/api/save", data={"path": KETTLE, "yaml": "x"}).status_code == 400
    r = client.get("/", headers={"host": "attacker.example"})
    assert r.status_code == 400


def test_loopback_detection_and_serve_refuses_unknown_market(folder):
    assert is_loopback("127.0.0.1") and is_loopback("::1") and is_loopback("localhost")
    assert not is_loopback("0.0.0.0") and not is_loopback("192.168.1.5")
    res = CliRunner().invoke(cli_app, ["serve", str(folder), "--market", "zz"])
    assert res.exit_code == 2 and "zz" in res.output


def test_a_single_opened_file_is_the_only_product(folder):
    c = TestClient(create_app(Workspace.open(folder / KETTLE)))
    r = c.get("/")
    assert KETTLE in r.text and "hl_oat_bar.yaml" not in r.text
    assert c.get("/product", params={"path": KETTLE}).status_code == 200


def test_text_from_the_formula_is_escaped_never_run(client, folder):
    body = _state(folder, source="form", fields={"product.serving.household": "<script>alert(1)</script>"})
    j = client.post("/api/update", json=body).json()
    assert "<script>alert(1)</script>" not in j["results_html"] + j["form_html"]
    assert "&lt;script&gt;" in j["form_html"]


def test_python_tags_in_yaml_are_refused_like_the_cli(client, folder):
    body = _state(folder, source="yaml")
    body["yaml"] = body["yaml"].replace('version: "1"', "version: !!python/object/apply:os.system ['true']")
    j = client.post("/api/update", json=body).json()
    assert j["problems"] and "YAML syntax error" in j["problems"][0]["text"]


def test_claims_show_the_condition_that_fails(client, folder):
    html = client.get("/product", params={"path": KETTLE}).text
    assert "fails: energy_kcal per reference amount" in html


def test_scenarios_of_a_ranged_input_are_offered_and_switch_the_panels(client, folder):
    low = client.post("/api/update", json=_state(folder, source="yaml", scenario=0)).json()["results_html"]
    high = client.post("/api/update", json=_state(folder, source="yaml", scenario=1)).json()["results_html"]
    assert 'value="1"' in low and "(low)" in low and "(high)" in high


def test_the_end_to_print_is_named_beside_each_end(client, folder):
    """Where an input is a range the workbench says, as the PDF draft does, which end's panel is printed (the
    higher declared energy) and that the other end is not for printing."""
    low = client.post("/api/update", json=_state(folder, source="yaml", scenario=0)).json()["results_html"]
    high = client.post("/api/update", json=_state(folder, source="yaml", scenario=1)).json()["results_html"]
    assert "NOT FOR PRINTING: this is the low end" in low and "PRINT THIS PANEL: the high end" not in low
    assert "PRINT THIS PANEL: the high end" in high and "NOT FOR PRINTING" not in high


def test_serve_warns_when_not_bound_to_loopback(folder, monkeypatch):
    calls = []
    monkeypatch.setattr("labelcalc.workbench.server.serve", lambda ws, host, port: calls.append((host, port)))
    res = CliRunner().invoke(cli_app, ["serve", str(folder)])
    assert res.exit_code == 0 and "WARNING" not in res.output and calls[-1] == ("127.0.0.1", 8765)
    res = CliRunner().invoke(cli_app, ["serve", str(folder), "--host", "0.0.0.0", "--port", "9000"])
    assert res.exit_code == 0 and "WARNING: listening on 0.0.0.0" in res.output and calls[-1] == ("0.0.0.0", 9000)


def test_an_edit_that_cannot_keep_a_comment_says_so_plainly(client, folder):
    # ruamel.yaml keeps comments except inside a flow mapping split over lines: the workbench must say so
    text = _state(folder)["yaml"].replace(
        'serving: {size: 28 g, household: "about 14 crisps"}',
        'serving: {size: 28 g,  # weighed on the line\n    household: "about 14 crisps"}',
    )
    body = {**_state(folder), "yaml": text, "source": "form", "fields": {"product.serving.size": "30 g"}}
    j = client.post("/api/update", json=body).json()
    assert "size: 30 g" in j["yaml"]
    assert "1 comment(s) could not be kept" in j["notice"]
    (folder / KETTLE).write_text(text, encoding="utf-8")
    r = client.post("/api/save", json={**_state(folder), "yaml": j["yaml"]})
    assert "1 comment(s) of the file on disk are not in the saved text" in r.json()["message"]


@pytest.mark.parametrize(
    "raw",
    [
        b"{not json",
        b"[1, 2]",
        b'{"path": "hl_kettle_sea_salt.yaml", "yaml": "x: 1", "scenario": "high", "level": "NaN"}',
    ],
)
def test_malformed_requests_get_a_clear_answer(client, raw):
    r = client.post("/api/update", content=raw, headers={"content-type": "application/json"})
    assert r.status_code in (200, 400)
    j = r.json()
    assert j.get("error") or j.get("problems")


def test_a_file_that_is_not_utf8_is_a_clear_message(client, folder):
    (folder / "latin.yaml").write_bytes(b"product: {id: caf\xe9}\n")
    r = client.get("/product", params={"path": "latin.yaml"})
    assert r.status_code == 400 and "not UTF-8" in r.text


def test_export_refuses_an_output_folder_linked_outside(client, folder, tmp_path):
    (tmp_path / "elsewhere").mkdir()
    (folder / "labelcalc-out").symlink_to(tmp_path / "elsewhere")
    r = client.post("/api/export", json=_state(folder))
    assert r.status_code == 403 and not list((tmp_path / "elsewhere").iterdir())


@pytest.mark.parametrize("product", sorted(p.name for p in DEMO.glob("*.yaml")))
def test_every_demo_product_shows_a_panel_for_every_market(folder, product):
    codes = sorted(load_packs())
    c = TestClient(create_app(Workspace.open(folder, markets=codes)))
    r = c.get("/product", params={"path": product})
    assert r.status_code == 200
    for code in codes:
        assert '<figure class="panel' in r.text and f'data-market="{code}"' in r.text
        assert re.search(rf'class="fig" data-market="{code}"', r.text), f"no figure in the {code} panel"
    assert "Pre-flight checks" in r.text


@pytest.mark.parametrize(
    "base, ok",
    [
        ("http://127.0.0.1:8765", True),
        ("http://localhost:8765", True),
        ("http://[::1]:8765", True),
        ("http://127.0.0.1.attacker.example:8765", False),
        ("http://[fe80::1]:8765", False),
    ],
)
def test_host_header_must_be_loopback(folder, base, ok):
    c = TestClient(create_app(Workspace.open(folder), host="::1"), base_url=base)
    assert (c.get("/").status_code == 200) is ok
