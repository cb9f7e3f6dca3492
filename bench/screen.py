"""Speed of `tubulo screen` on a synthetic extract, and its per-case cost against `rank_case`.

Run:  python bench/screen.py [--cases 100000] [--formats csv,parquet] [--rank-sample 300]

The extract is invented (random values around ordinary laboratory ranges, a share of them
abnormal, a few impossible ones); it checks speed only, never a clinical result.  Reported:
cases per second end-to-end (read, validate, score, write) for the wide and long layouts, and
the ratio of the per-case cost of `rank_case` in-process (the single-case path, knowledge
loaded) to the per-case cost of `screen`.  Targets: >= 20 000 cases/s, ratio >= 50.
"""

from __future__ import annotations

import argparse
import os
import statistics
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]

# analyte key, unit, centre, spread (lognormal sigma), share drawn far from the centre
_ANALYTES = [
    ("serum.sodium", "mmol/L", 139, 0.03, 0.10), ("serum.potassium", "mmol/L", 4.1, 0.12, 0.20),
    ("serum.chloride", "mmol/L", 102, 0.04, 0.10), ("serum.bicarbonate", "mmol/L", 25, 0.12, 0.15),
    ("serum.urea", "mmol/L", 5.0, 0.35, 0.10), ("serum.creatinine", "umol/L", 80, 0.30, 0.10),
    ("serum.glucose", "mmol/L", 5.2, 0.15, 0.05), ("serum.calcium", "mmol/L", 2.35, 0.06, 0.10),
    ("serum.magnesium", "mmol/L", 0.82, 0.15, 0.15), ("serum.phosphate", "mmol/L", 1.1, 0.20, 0.10),
    ("serum.albumin", "g/L", 42, 0.10, 0.05), ("serum.uric_acid", "mmol/L", 0.30, 0.25, 0.05),
    ("urine.sodium", "mmol/L", 80, 0.6, 0.0), ("urine.potassium", "mmol/L", 40, 0.6, 0.0),
    ("urine.chloride", "mmol/L", 90, 0.6, 0.0), ("urine.creatinine", "mmol/L", 8, 0.5, 0.0),
    ("urine.calcium", "mmol/L", 2.5, 0.7, 0.0), ("urine.magnesium", "mmol/L", 3.0, 0.6, 0.0),
    ("urine.phosphate", "mmol/L", 20, 0.6, 0.0), ("urine.osmolality", "mOsm/kg", 500, 0.4, 0.0),
]


def generate(n: int, seed: int = 7):
    """A wide pandas DataFrame of n invented cases (and the long form of the same cases)."""
    import numpy as np
    import pandas as pd

    from tubulo.units import analyte_specs

    rng = np.random.default_rng(seed)
    specs = analyte_specs()
    age = np.where(rng.random(n) < 0.12, np.round(rng.uniform(0.1, 18, n), 2), rng.integers(18, 95, n)).astype(float)
    sex = rng.choice(np.array(["female", "male", "unknown"]), n, p=[0.49, 0.49, 0.02])
    wide = {"case": [f"x{i:07d}" for i in range(n)], "age": age, "sex": sex}
    for key, unit, centre, sigma, far in _ANALYTES:
        v = centre * np.exp(rng.normal(0, sigma, n))
        wild = rng.random(n) < far
        v = np.where(wild, centre * np.exp(rng.normal(0, 3 * sigma, n)), v)
        lo, hi = specs[key].plausible
        v = np.round(np.clip(v, lo + 0.01 * (hi - lo), hi - 0.01 * (hi - lo)), 2 if centre < 10 else 1)
        v[rng.random(n) < 0.15] = np.nan  # not measured
        wide[f"{key} [{unit}]"] = v
    bad = rng.random(n) < 0.001  # impossible values: the run must report them and go on
    wide["serum.potassium [mmol/L]"] = np.where(bad, 41.0, wide["serum.potassium [mmol/L]"])
    sys_bp = rng.normal(125, 18, n).round()
    dia = (sys_bp * rng.uniform(0.55, 0.7, n)).round()
    bp = np.array([f"{int(s)}/{int(d)}" for s, d in zip(sys_bp, dia)], dtype=object)
    bp[rng.random(n) < 0.3] = None
    wide["vitals.blood_pressure [mmHg]"] = bp
    vol = rng.choice(np.array(["low", "normal", "high", None], dtype=object), n, p=[0.1, 0.3, 0.05, 0.55])
    wide["vitals.volume"] = vol
    wide["urine.sample"] = np.array(["spot"] * n, dtype=object)
    frame = pd.DataFrame(wide)
    return frame


def to_long(frame):
    import pandas as pd

    value_cols = [c for c in frame.columns if c not in ("case", "age", "sex")]
    long = frame.melt(id_vars=["case"], value_vars=value_cols, var_name="column", value_name="value")
    long = long[long["value"].notna()]
    parts = long["column"].str.extract(r"^(?P<section>[a-z_]+)\.(?P<analyte>[a-z0-9_]+)(?: \[(?P<unit>.*)\])?$")
    long = pd.concat([long[["case"]], parts, long[["value"]].astype(str)], axis=1)
    patient = frame[["case", "age", "sex"]].melt(id_vars=["case"], var_name="analyte", value_name="value")
    patient["section"], patient["unit"] = "patient", None
    patient["value"] = patient["value"].astype(str)
    long = pd.concat([patient[["case", "section", "analyte", "value", "unit"]],
                      long[["case", "section", "analyte", "value", "unit"]]])
    long["order"] = long["case"].str[1:].astype(int)
    return long.sort_values(["order"], kind="stable").drop(columns="order").reset_index(drop=True)


def _single_cost(frame, sample: int) -> float:
    """Seconds per case of rank_case in-process (tables loaded, cases parsed beforehand)."""
    import math

    from tubulo.case import parse_case
    from tubulo.rank import load_tables, rank_case

    tables = load_tables()
    cases = []
    for row in frame.head(sample * 2).to_dict("records"):
        data = {"case": row["case"], "patient": {"age": float(row["age"]), "sex": row["sex"]}}
        for col, v in row.items():
            if col in ("case", "age", "sex") or v is None or (isinstance(v, float) and math.isnan(v)):
                continue
            key, _, unit = col.partition(" [")
            section, name = key.split(".", 1)
            data.setdefault(section, {})[name] = f"{v} {unit.rstrip(']')}" if unit else v
        try:
            cases.append(parse_case(data))
        except Exception:
            continue
        if len(cases) == sample:
            break
    rank_case(cases[0], tables)
    t = time.perf_counter()
    for c in cases:
        rank_case(c, tables)
    return (time.perf_counter() - t) / len(cases)


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--cases", type=int, default=100_000)
    ap.add_argument("--formats", default="csv,parquet")
    ap.add_argument("--chunk-size", type=int, default=20_000)
    ap.add_argument("--rank-sample", type=int, default=300)
    ap.add_argument("--runs", type=int, default=3, help="timed runs per file (median)")
    args = ap.parse_args()
    sys.path.insert(0, str(ROOT))
    from tubulo.screen.knowledge import screen_knowledge
    from tubulo.screen.stream import screen_file

    screen_knowledge()  # compile once, as a run does before its first chunk (included below anyway)
    t = time.perf_counter()
    frame = generate(args.cases)
    long = to_long(frame)
    print(f"generated {args.cases:,} invented cases ({len(long):,} long rows) in {time.perf_counter() - t:.1f} s")
    rates = {}
    with tempfile.TemporaryDirectory() as tmp:
        for fmt in args.formats.split(","):
            for layout, df in (("wide", frame), ("long", long)):
                src = os.path.join(tmp, f"extract-{layout}.{fmt}")
                if fmt == "csv":
                    df.to_csv(src, index=False)
                else:
                    df.to_parquet(src, index=False)
                size = os.path.getsize(src) / 1e6
                times = []
                for r in range(args.runs):
                    dst = os.path.join(tmp, f"result-{layout}-{r}.{fmt}")
                    s = screen_file(src, dst, layout=layout, chunk_size=args.chunk_size)
                    times.append(s.seconds)
                sec = statistics.median(times)
                rates[(fmt, layout)] = args.cases / sec
                print(f"{fmt:>7} {layout:<4} {size:7.1f} MB  {sec:6.2f} s  {args.cases / sec:>9,.0f} cases/s  "
                      f"(matrix {s.matrix:,}, single {s.single:,}, errors {s.errors:,}, critical {s.critical:,}, "
                      f"chunks {s.chunks})")
    per_single = _single_cost(frame, args.rank_sample)
    print(f"rank_case in-process: {per_single * 1000:.2f} ms per case (median case of {args.rank_sample})")
    for (fmt, layout), rate in rates.items():
        print(f"  {fmt} {layout}: screen {1e6 / rate:.1f} us per case; rank_case / screen = {per_single * rate:,.0f}x"
              f"  (target >= 50x); {rate:,.0f} cases/s (target >= 20,000)")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
