"""A streamed range run keeps little per file in the main process: one pass over the folder with paths as text
(:meth:`FormulaIndex.scan`), the inventory of files (files.csv) in a part file, and still every file accounted
for exactly as a run that holds everything in memory accounts for it."""

from __future__ import annotations

import os
import shutil
import textwrap
from concurrent.futures import ProcessPoolExecutor
from pathlib import Path

import pytest
from test_range import BROKEN, GOOD, make_range

from labelcalc.intake.catalogue import FormulaIndex, classify, yaml_file_names, yaml_files
from labelcalc.ranges import rangerun
from labelcalc.ranges.rangerun import Inventory
from labelcalc.workers import ONE_THREAD, mp_context

ROOT = Path(__file__).resolve().parent.parent
PRODUCT = "product: {{id: {id}, name: X, category: snacks, serving: {{size: 30 g}}}}\nbatch: [{{ingredient: flour, amount: 100 g}}]\n"
SUB = "subformula: {{id: {id}, name: S}}\nbatch: [{{ingredient: flour, amount: 100 g}}]\n"


def _tree(root: Path) -> Path:
    """Names whose text order differs from their path order ('a-c.yaml' sorts before 'a/b.yaml' as text,
    after it as a path), case, hidden files and folders, a name that is only an extension, a linked folder
    and a linked file."""
    for rel, text in {
        "a/b.yaml": PRODUCT.format(id="p_ab"),
        "a-c.yaml": PRODUCT.format(id="p_ac"),
        "B.YML": SUB.format(id="s_b"),
        "b.yaml": PRODUCT.format(id="p_b"),
        ".hidden/h.yaml": PRODUCT.format(id="p_h"),
        ".yaml": "not: a formula\n",
        "deep/er/x.Yaml": PRODUCT.format(id="p_x"),
        "twin/one.yaml": PRODUCT.format(id="twin"),
        "twin/two.yaml": SUB.format(id="twin"),
        "notes.txt": "not read\n",
    }.items():
        (root / rel).parent.mkdir(parents=True, exist_ok=True)
        (root / rel).write_text(text, encoding="utf-8")
    (root / "linked").symlink_to(root / "deep", target_is_directory=True)  # not entered
    (root / "z_link.yaml").symlink_to(root / "b.yaml")  # the same file as b.yaml: read once
    return root


def test_file_names_come_as_yaml_files_lists_them(tmp_path):
    src = _tree(tmp_path / "src")
    names = [n for n, _ in yaml_file_names(src)]
    assert names == [str(p) for p in yaml_files(src)]
    assert [n for n, link in yaml_file_names(src) if link] == [str(src / "z_link.yaml")]


def test_scan_gives_the_look_up_of_a_full_index(tmp_path):
    src = _tree(tmp_path / "src")
    full = FormulaIndex([src])
    seen: list = []
    scanned = FormulaIndex.scan(src, lambda names: (classify(Path(n)) for n in names), seen.append)
    assert [(e.path, e.kind, e.id) for e in seen] == [(str(e.path), e.kind, e.id) for e in full.entries]
    assert all(isinstance(e.path, str) for e in seen)
    look = full.lookup_only()
    assert scanned.paths == look.paths and all(isinstance(p, str) for p in scanned.paths.values())
    assert scanned.kinds == look.kinds
    assert {k: [str(p) for p in v] for k, v in scanned.duplicates.items()} == {
        k: [str(p) for p in v] for k, v in full.duplicates.items()
    }
    assert scanned.duplicate_kinds == full.duplicate_kinds == {"twin": ["product", "subformula"]}
    assert not scanned.entries and not scanned.products


def test_inventory_part_file_round_trip(tmp_path, monkeypatch):
    monkeypatch.setattr(Inventory, "BATCH", 3)  # several batches in the part file, and some still waiting
    streamed, held = Inventory(tmp_path / "files.pickle"), Inventory()
    entries = [(f"f{i}.yaml", "product", f"p{i}") for i in range(8)]
    entries += [
        ("s.yaml", "subformula", "s"),
        ("e.yaml", "error", ""),
        ("n.txt", "not read", ""),
        ("l.yaml", "ingredient library", ""),
    ]
    for inv in (streamed, held):
        for e in entries:
            inv.add(*e)
        inv.close()
    assert (tmp_path / "files.pickle").stat().st_size > 0 and not streamed._rows  # the parent holds none
    result = rangerun.RangeResult(labelled=["p1", "p4"])
    result.errors = [{"product_id": "s", "file": "s.yaml"}]
    streamed.settle(result)
    held.settle(result)
    rows = list(streamed)
    assert rows == list(held) and streamed == held and len(streamed) == len(entries)
    assert [(r["file"], r["kind"], r["id"]) for r in rows] == entries  # source order kept
    outcomes = {r["file"]: r["outcome"] for r in rows}
    assert outcomes["f1.yaml"] == outcomes["f4.yaml"] == "labelled"
    assert outcomes["f0.yaml"] == "failed (see errors.csv)"
    assert outcomes["s.yaml"] == outcomes["e.yaml"] == "error (see errors.csv)"
    assert outcomes["n.txt"] == "not read: not a YAML file"
    assert outcomes["l.yaml"] == "not a product: ingredient library"
    assert streamed.tally() == {
        "labelled": 2,
        "failed (see errors.csv)": 6,
        "error (see errors.csv)": 2,
        "not read: not a YAML file": 1,
        "not a product: ingredient library": 1,
    }
    assert list(streamed) == rows  # read back as often as asked


@pytest.mark.parametrize("jobs", [1, 2])
def test_a_streamed_run_accounts_for_every_file(tmp_path, jobs):
    """Duplicates, a broken file, a sub-formula, a non-YAML file: the streamed inventory lists each file once,
    in source order, with the outcome a run that holds everything gives it."""
    src = tmp_path / "src"
    shutil.copytree(ROOT / "demo_products", src, ignore=shutil.ignore_patterns("*.csv", "*.xlsx"))
    make_range(src / "more", {**GOOD, **BROKEN, "good_a_copy": GOOD["good_a"]})
    shutil.rmtree(src / "more" / "ingredients")
    (src / "more" / "readme.txt").write_text("not a formula\n", encoding="utf-8")
    (src / "more" / "twin_sub.yaml").write_text(textwrap.dedent(SUB.format(id="good_b")), encoding="utf-8")
    lib = src / "ingredients"
    whole = rangerun.run_range(src, lib, ["eu"], with_labels=False)
    (tmp_path / "parts").mkdir()
    streamed = rangerun.run_range(src, lib, ["eu"], jobs=jobs, with_labels=False, part_dir=tmp_path / "parts")
    assert streamed.files.path is not None and streamed.files.path.exists()
    assert list(streamed.files) == list(whole.files)
    assert (streamed.errors, streamed.products_ok, streamed.products_failed) == (
        whole.errors,
        whole.products_ok,
        whole.products_failed,
    )
    on_disk = sorted(
        os.path.relpath(os.path.join(d, f), src) for d, _, fs in os.walk(src) for f in fs if not f.startswith(".")
    )
    listed = sorted(os.path.relpath(r["file"], src) if os.path.isabs(r["file"]) else r["file"] for r in streamed.files)
    assert len(listed) == len(on_disk) == len(streamed.files)
    outcome = {Path(r["file"]).name: r["outcome"] for r in streamed.files}
    assert outcome["good_a.yaml"] == outcome["good_a_copy.yaml"] == "failed (see errors.csv)"  # one id, two files
    assert outcome["good_b.yaml"] == "failed (see errors.csv)" and outcome["twin_sub.yaml"] == "error (see errors.csv)"
    assert outcome["bad_yaml.yaml"] == "error (see errors.csv)"
    assert outcome["readme.txt"] == "not read: not a YAML file"
    assert streamed.files.tally() == whole.files.tally()


def _thread_settings() -> dict[str, str | None]:
    return {k: os.environ.get(k) for k in ONE_THREAD}


def test_workers_use_one_matrix_library_thread_and_leave_the_callers_setting(monkeypatch):
    for k in ONE_THREAD:
        monkeypatch.delenv(k, raising=False)
    with ProcessPoolExecutor(max_workers=1, mp_context=mp_context()) as ex:
        assert ex.submit(_thread_settings).result() == dict.fromkeys(ONE_THREAD, "1")
    assert _thread_settings() == dict.fromkeys(ONE_THREAD)  # this process's setting is not changed


def test_product_paths_wait_on_disk_and_travel_to_workers(tmp_path):
    import pickle

    src = _tree(tmp_path / "src")
    full = FormulaIndex([src])
    apart = full.products_apart(tmp_path / "products.sqlite")
    paths = apart.paths
    assert "p_b" not in paths.subformulas and paths.subformulas == {"s_b": str(src / "B.YML")}  # type: ignore[union-attr]
    again = pickle.loads(pickle.dumps(apart))  # as a worker gets it: the file's name, no connection
    for look in (apart, again):
        assert "p_b" in look.paths and look.paths["p_b"] == str(src / "b.yaml")
        assert look.paths.get("s_b") == str(src / "B.YML")
        assert "twin" not in look.paths and "nothing" not in look.paths and look.paths.get("nothing") is None
        with pytest.raises(KeyError):
            look.paths["nothing"]
        assert look.kinds == {"s_b": "subformula"} and look.duplicates == full.duplicates


def test_a_product_used_as_a_part_is_found_by_the_workers(tmp_path):
    """A formula may use another product as a part (``subformula: <product id>``): its path comes from the
    run's product file, and the run labels it as a run without workers does."""
    src = tmp_path / "src"
    shutil.copytree(ROOT / "demo_products", src, ignore=shutil.ignore_patterns("*.csv", "*.xlsx"))
    (src / "uses_a_product.yaml").write_text(
        "product: {id: uses_a_product, name: Uses a product, category: snacks, serving: {size: 30 g}}\n"
        "batch: [{subformula: hl_oat_bar, amount: 50 g}, {ingredient: sea_salt, amount: 1 g}]\n",
        encoding="utf-8",
    )
    lib = src / "ingredients"
    whole = rangerun.run_range(src, lib, ["eu"], with_labels=False)
    (tmp_path / "parts").mkdir()
    streamed = rangerun.run_range(src, lib, ["eu"], jobs=2, with_labels=False, part_dir=tmp_path / "parts")
    assert "uses_a_product" in whole.labelled and "uses_a_product" in streamed.labelled
    assert (tmp_path / "parts" / "products.sqlite").exists()
    from labelcalc.ranges import parts

    assert list(parts.read_rows(streamed.parts)) == whole.rows and streamed.errors == whole.errors
