"""Compiled tables: content, plain data only, and a warm load free of heavy imports."""

from __future__ import annotations

import json
import os
import subprocess
import sys

import pytest

from tubulo.kb.compile import build_tables
from tubulo.kb.tables import GRAPH_VIEW_KEYS, find_nodes, load_graph_view, load_tables

from .conftest import GOOD


@pytest.fixture(scope="module")
def tables():
    return build_tables(GOOD)


def _plain(obj, path="tables"):
    if isinstance(obj, dict):
        for k, v in obj.items():
            assert isinstance(k, str), f"{path}: key {k!r}"
            _plain(v, f"{path}.{k}")
    elif isinstance(obj, list):
        for i, v in enumerate(obj):
            _plain(v, f"{path}[{i}]")
    else:
        assert obj is None or type(obj) in (str, int, float, bool), f"{path}: {type(obj).__name__}"


def test_tables_are_plain_data(tables):
    _plain(tables)
    json.dumps(tables)  # serialisable as well


def test_candidate_rows(tables):
    g = tables["candidates"]["gitelman"]
    assert g["kind"] == "inherited" and g["genes"] == ["SLC12A3"] and "OMIM:263800" in g["xrefs"]
    assert g["manifests"]["serum_potassium"] == {"very_low": 0.2, "low": 0.75, "normal": 0.05}
    assert g["manifests"]["HP:0000934"] == {"present": 0.1, "absent": 0.9}
    assert g["manifest_sources"]["urine_calcium"].startswith("Blanchard A et al. 2017")
    loop = tables["candidates"]["loop_diuretic"]
    assert loop["kind"] == "drug" and loop["xrefs"] == ["ATC:C03CA01", "ATC:C03CA02"]
    assert loop["members"][0] == {"inn": "furosemide", "atc": "C03CA01", "synonyms": ["frusemide"]}
    assert tables["candidates"]["licorice_excess"]["exposures"] == ["licorice"]


def test_name_indices(tables):
    assert tables["drug_index"]["frusemide"] == [{"class": "loop_diuretic", "inn": "furosemide"}]
    assert tables["drug_index"]["chlorthalidone"] == [{"class": "thiazide_diuretic", "inn": "chlortalidone"}]
    assert tables["atc_index"]["C03AA03"][0]["inn"] == "hydrochlorothiazide"
    assert tables["exposure_index"]["liquorice"] == "licorice"
    assert find_nodes(tables, "SLC12A3") == ["gene:SLC12A3"]
    assert find_nodes(tables, "OMIM:263800") == ["gitelman"]
    assert find_nodes(tables, "Frusemide") == ["drug:furosemide"]


def test_paths(tables):
    p = tables["paths"]["gitelman"]["urine_calcium"]
    assert p["predicted"] == -1 and p["curated"] == -1 and not p["ambiguous"]
    assert [s["node"] for s in p["steps"]] == ["ncc", "dct_nacl_reabsorption", "urine_calcium"]
    assert p["steps"][0]["edge"] == "acts_on" and p["steps"][0]["source"].startswith("Blanchard")
    assert "polyuria" not in tables["paths"]["bartter_type1"]  # not reached: no path, none invented
    lic = tables["paths"]["licorice_excess"]["renin"]["steps"]
    assert lic[0]["node"] == "licorice" and lic[0]["edge"] == "exposed_to"


def test_adjacency_and_meta(tables):
    out = {(e["kind"], e["to"]) for e in tables["adjacency"]["ncc"]["out"]}
    assert ("expressed_in", "dct1") in out and ("encoded_by", "gene:SLC12A3") in out
    inn = {(e["kind"], e["from"]) for e in tables["adjacency"]["ncc"]["in"]}
    assert ("acts_on", "gitelman") in inn and ("acts_on", "thiazide_diuretic") in inn
    assert tables["meta"]["knowledge_version"] and tables["meta"]["caution"]
    assert tables["variables"]["renal_k_handling"]["gate"]["variable"] == "serum_potassium"
    assert tables["consistency"]["rate"] == 1.0


def test_graph_view_is_kept_apart(good_copy):
    core = load_tables(good_copy)
    view = load_graph_view(good_copy)
    assert not set(GRAPH_VIEW_KEYS) & set(core) and set(view) == set(GRAPH_VIEW_KEYS)
    assert find_nodes(core, "frusemide", view["lookup"]) == ["drug:furosemide"]
    assert "gitelman" in {e["from"] for e in view["adjacency"]["gene:SLC12A3"]["in"]}


def test_load_tables_caches_by_folder_content(good_copy):
    first = load_tables(good_copy)
    again = load_tables(good_copy)
    assert again is first
    p = good_copy / "exposures.yaml"
    p.write_text(p.read_text().replace("[liquorice, glycyrrhizin]", "[liquorice, glycyrrhizin, sweet root]"))
    changed = load_tables(good_copy)
    assert changed is not first and changed["exposure_index"]["sweet root"] == "licorice"


_PROBE = """
import sys
from tubulo.kb.tables import load_tables
t = load_tables({folder!r})
heavy = sorted(m for m in ("networkx", "pydantic", "numpy", "pint") if m in sys.modules)
print(len(t["candidates"]), ",".join(heavy) or "-")
"""


def test_warm_load_imports_no_heavy_module(tmp_path):
    env = {**os.environ, "TUBULO_CACHE_DIR": str(tmp_path / "cache")}
    code = _PROBE.format(folder=str(GOOD))
    cold = subprocess.run([sys.executable, "-c", code], env=env, capture_output=True, text=True, check=True)
    assert cold.stdout.split()[0] == "5"
    assert "pydantic" in cold.stdout.split()[1]  # the cold build really compiled
    warm = subprocess.run([sys.executable, "-c", code], env=env, capture_output=True, text=True, check=True)
    assert warm.stdout.split() == ["5", "-"], warm.stdout + warm.stderr


def test_hpo_labels_from_subset_file(good_copy):
    (good_copy / "hpo_subset.json").write_text(json.dumps({
        "hpo_release": "hp/releases/2025-01-16",
        "terms": {"HP:0000934": {"label": "Chondrocalcinosis"}, "HP:0000001": {"label": "All"}}}))
    t = build_tables(good_copy)
    assert t["hpo_labels"] == {"HP:0000934": "Chondrocalcinosis"}  # only the ids the knowledge uses
    assert t["nodes"]["HP:0000934"]["label"] == "Chondrocalcinosis"
