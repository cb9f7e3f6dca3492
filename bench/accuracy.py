"""Accuracy of the ranked differential on a folder of clinical vignettes.

Run:  python bench/accuracy.py [--dir FOLDER] [--json]

A vignette file holds a `vignette` section (`expected`: acceptable candidate ids, the first the
intended answer; `critical`; `difficulty`: typical | hard) and a `case` section in the case-file
format (docs/case-format.md); see tests/vignettes/README.md.  Default folder: tests/vignettes.

Reported:
  * top-1 and top-3 accuracy: the share of vignettes whose first (first three) ranked entries
    include an expected id, overall, by kind of the intended answer (inherited, drug, acquired)
    and by difficulty.  The open-world residual ("a cause the knowledge does not list") is a
    ranked entry like any other: when it leads, that is a miss.
  * critical: the share of vignettes marked critical that raised at least one critical caution,
    and the number of vignettes not marked critical that raised one.
  * reliability: every ranked entry's probability in every vignette, in 10 equal bins of [0, 1];
    per bin the count, the mean predicted probability and the observed share of entries that are
    an expected id.
  * Brier score (multi-class), mean over vignettes of sum_c (p_c - y_c)^2, two ways:
    `brier` merges the expected ids into one class (p = their summed probability, y = 1), the
    same leniency as the accuracy figures; `brier_intended` scores the intended answer alone
    (y = 1 for the first expected id only).  0 is perfect; a certain wrong answer scores 2.
  * misses: every vignette whose top entry is not expected, with the top three given.

A file that cannot be read, whose case is invalid or whose expected ids the knowledge does not
have is listed under `errors` and left out of the figures; the exit code is then 1.
"""

from __future__ import annotations

import argparse
import json
import sys
from dataclasses import dataclass
from pathlib import Path
from typing import Any

ROOT = Path(__file__).resolve().parents[1]
DEFAULT_DIR = ROOT / "tests" / "vignettes"
BINS = 10
KINDS = ("inherited", "drug", "acquired")
DIFFICULTIES = ("typical", "hard")


@dataclass(frozen=True)
class Outcome:
    """One vignette run through the ranking."""

    file: str
    case_id: str
    expected: tuple[str, ...]
    kind: str
    difficulty: str
    critical: bool
    critical_raised: bool
    rank: int | None  # 1-based position of the first expected id among the ranked entries
    top3: tuple[tuple[str, float], ...]
    probabilities: tuple[tuple[str, float], ...]  # every ranked entry, best first

    @property
    def top1(self) -> bool:
        return self.rank == 1

    @property
    def in_top3(self) -> bool:
        return self.rank is not None and self.rank <= 3


def _read_vignette(path: Path) -> dict:
    import yaml

    with open(path, encoding="utf-8") as fh:
        doc = yaml.safe_load(fh)
    if not isinstance(doc, dict) or not isinstance(doc.get("vignette"), dict) or not isinstance(doc.get("case"), dict):
        raise ValueError("expected a mapping with a 'vignette' section and a 'case' section")
    v = doc["vignette"]
    exp = v.get("expected")
    if not isinstance(exp, list) or not exp or not all(isinstance(e, str) for e in exp):
        raise ValueError(f"vignette.expected is {exp!r}; expected a non-empty list of candidate ids")
    if v.get("difficulty") not in DIFFICULTIES:
        raise ValueError(f"vignette.difficulty is {v.get('difficulty')!r}; expected one of {', '.join(DIFFICULTIES)}")
    if not isinstance(v.get("critical"), bool):
        raise ValueError(f"vignette.critical is {v.get('critical')!r}; expected true or false")
    return doc


def run_one(path: Path, tables: Any) -> Outcome:
    """Parse, rank and score one vignette file (ValueError or TubuloError on a bad file)."""
    from tubulo.case import parse_case
    from tubulo.rank import rank_case

    doc = _read_vignette(path)
    v = doc["vignette"]
    cands = tables["candidates"]
    unknown = [e for e in v["expected"] if e not in cands]
    if unknown:
        raise ValueError(f"vignette.expected names ids the knowledge does not have: {', '.join(unknown)}")
    case = parse_case(doc["case"], str(path))
    result = rank_case(case, tables)
    ranked = [(s.id, float(s.probability)) for s in result.scored]
    expected = tuple(v["expected"])
    rank = next((i + 1 for i, (cid, _) in enumerate(ranked) if cid in expected), None)
    return Outcome(
        file=path.name,
        case_id=case.id,
        expected=expected,
        kind=cands[expected[0]]["kind"],
        difficulty=v["difficulty"],
        critical=v["critical"],
        critical_raised=any(c.level == "critical" for c in result.cautions),
        rank=rank,
        top3=tuple(ranked[:3]),
        probabilities=tuple(ranked),
    )


def _share(hits: int, n: int) -> float | None:
    return hits / n if n else None


def _accuracy(outs: list[Outcome]) -> dict:
    n = len(outs)
    return {"n": n, "top1": _share(sum(o.top1 for o in outs), n), "top3": _share(sum(o.in_top3 for o in outs), n)}


def reliability(outs: list[Outcome], bins: int = BINS) -> list[dict]:
    """Per probability bin: count, mean predicted probability, observed share of expected ids."""
    rows = [{"low": i / bins, "high": (i + 1) / bins, "n": 0, "sum_p": 0.0, "hits": 0} for i in range(bins)]
    for o in outs:
        for cid, p in o.probabilities:
            b = rows[min(int(p * bins), bins - 1)]
            b["n"] += 1
            b["sum_p"] += p
            b["hits"] += cid in o.expected
    return [{"low": r["low"], "high": r["high"], "n": r["n"],
             "mean_predicted": r["sum_p"] / r["n"] if r["n"] else None,
             "observed": r["hits"] / r["n"] if r["n"] else None} for r in rows]


def brier(o: Outcome, merge_expected: bool) -> float:
    """Multi-class Brier score of one vignette (see the module docstring)."""
    target = set(o.expected) if merge_expected else {o.expected[0]}
    p_target = sum(p for cid, p in o.probabilities if cid in target)
    return (1.0 - p_target) ** 2 + sum(p * p for cid, p in o.probabilities if cid not in target)


def summarize(outs: list[Outcome], errors: list[dict], folder: Path) -> dict:
    crit = [o for o in outs if o.critical]
    return {
        "folder": str(folder),
        "n": len(outs),
        "accuracy": _accuracy(outs),
        "by_kind": {k: _accuracy([o for o in outs if o.kind == k]) for k in KINDS},
        "by_difficulty": {d: _accuracy([o for o in outs if o.difficulty == d]) for d in DIFFICULTIES},
        "critical": {"marked": len(crit), "raised": sum(o.critical_raised for o in crit),
                     "share": _share(sum(o.critical_raised for o in crit), len(crit)),
                     "raised_when_not_marked": sum(o.critical_raised for o in outs if not o.critical)},
        "reliability": reliability(outs),
        "brier": sum(brier(o, True) for o in outs) / len(outs) if outs else None,
        "brier_intended": sum(brier(o, False) for o in outs) / len(outs) if outs else None,
        "misses": [{"file": o.file, "kind": o.kind, "difficulty": o.difficulty, "expected": list(o.expected),
                    "rank_of_expected": o.rank, "top3": [{"id": c, "p": round(p, 4)} for c, p in o.top3]}
                   for o in outs if not o.top1],
        "errors": errors,
    }


def _pct(x: float | None) -> str:
    return "   n/a" if x is None else f"{100 * x:5.1f}%"


def print_text(s: dict, out=sys.stdout) -> None:
    w = out.write
    w(f"vignettes: {s['n']} from {s['folder']}\n\n")
    w(f"{'':22s}{'n':>4s}  {'top-1':>6s}  {'top-3':>6s}\n")
    rows = [("overall", s["accuracy"])] + [(f"kind {k}", v) for k, v in s["by_kind"].items()] + \
           [(f"difficulty {d}", v) for d, v in s["by_difficulty"].items()]
    for name, a in rows:
        w(f"{name:22s}{a['n']:4d}  {_pct(a['top1'])}  {_pct(a['top3'])}\n")
    c = s["critical"]
    w(f"\ncritical vignettes that raised a critical caution: {c['raised']}/{c['marked']} ({_pct(c['share']).strip()}); "
      f"critical cautions on vignettes not marked critical: {c['raised_when_not_marked']}\n")
    w("\nreliability (every ranked entry of every vignette)\n")
    w(f"  {'bin':13s}{'n':>7s}  {'mean p':>7s}  {'observed':>8s}\n")
    for r in s["reliability"]:
        mp = "    -  " if r["mean_predicted"] is None else f"{r['mean_predicted']:7.3f}"
        ob = "     -  " if r["observed"] is None else f"{r['observed']:8.3f}"
        w(f"  [{r['low']:.1f}, {r['high']:.1f}{']' if r['high'] >= 1 else ')'}  {r['n']:7d}  {mp}  {ob}\n")
    if s["brier"] is not None:
        w(f"\nBrier score (multi-class, expected ids merged): {s['brier']:.4f}; "
          f"against the intended answer alone: {s['brier_intended']:.4f}\n")
    w(f"\nmisses ({len(s['misses'])}): top entry not an expected id\n")
    for m in s["misses"]:
        top = ", ".join(f"{t['id']} {100 * t['p']:.1f}%" for t in m["top3"])
        rk = "not ranked" if m["rank_of_expected"] is None else f"expected first at rank {m['rank_of_expected']}"
        w(f"  {m['file']} [{m['kind']}, {m['difficulty']}] expected {m['expected'][0]}"
          f"{' (+' + str(len(m['expected']) - 1) + ')' if len(m['expected']) > 1 else ''}; {rk}; top 3: {top}\n")
    if s["errors"]:
        w(f"\nerrors ({len(s['errors'])}): files left out of the figures\n")
        for e in s["errors"]:
            w(f"  {e['file']}: {e['problem']}\n")
    w("\nDecision support, not a diagnosis: these figures describe invented vignettes, not patients.\n")


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--dir", default=str(DEFAULT_DIR), help="folder of vignette *.yaml files")
    ap.add_argument("--json", action="store_true", help="machine-readable output")
    args = ap.parse_args(argv)

    import yaml

    from tubulo.errors import TubuloError
    from tubulo.rank import load_tables

    folder = Path(args.dir)
    files = sorted(folder.glob("*.yaml")) + sorted(folder.glob("*.yml"))
    if not folder.is_dir() or not files:
        print(f"accuracy: no vignette *.yaml files in {folder}", file=sys.stderr)
        return 2
    tables = load_tables()
    outs: list[Outcome] = []
    errors: list[dict] = []
    for path in files:
        try:
            outs.append(run_one(path, tables))
        except (TubuloError, ValueError, OSError) as exc:
            errors.append({"file": path.name, "problem": " ".join(str(exc).split())})
        except yaml.YAMLError as exc:
            errors.append({"file": path.name, "problem": f"not valid YAML: {' '.join(str(exc).split())}"})
        except Exception as exc:  # an engine fault: report it with its type, keep going
            errors.append({"file": path.name, "problem": f"{type(exc).__name__}: {' '.join(str(exc).split())}"})
    s = summarize(outs, errors, folder)
    if args.json:
        json.dump(s, sys.stdout, indent=1)
        sys.stdout.write("\n")
    else:
        print_text(s)
    return 1 if errors else 0


if __name__ == "__main__":
    sys.exit(main())
