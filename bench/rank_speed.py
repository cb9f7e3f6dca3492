"""Time `rank_case` in-process, knowledge loaded and cases parsed beforehand (the ranking work alone).

Usage: python bench/rank_speed.py [--repeats N]
Ranks every bundled demo case and every development vignette N times each; prints the median per case,
the median over cases, the slowest case, and the ratio to the target (median at most 5 ms).  Nothing here
asserts: a loaded machine only changes the figures.  The target is absolute, and a shared host's speed
drifts, so the time of `python -c "import yaml"` measured just before is printed beside it for scale.
"""

from __future__ import annotations

import argparse
import statistics
import subprocess
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
TARGET_MS = 5.0  # project target: one case ranked in-process under 5 ms


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeats", type=int, default=15, help="timed rankings per case (default 15)")
    args = ap.parse_args(argv)
    host = []
    for _ in range(7):
        t0 = time.perf_counter()
        subprocess.run([sys.executable, "-c", "import yaml"], check=True)
        host.append((time.perf_counter() - t0) * 1000)
    sys.path.insert(0, str(ROOT))
    import yaml

    from tubulo.case import load_case, parse_case
    from tubulo.rank import load_tables, rank_case

    demos = sorted((ROOT / "cases").glob("*.y*ml")) + sorted((ROOT / "cases").glob("*.json"))
    vignettes = sorted((ROOT / "tests" / "vignettes").glob("v-*.yaml"))
    cases = [load_case(p) for p in demos]
    cases += [parse_case(yaml.safe_load(p.read_text(encoding="utf-8"))["case"], str(p)) for p in vignettes]
    tables = load_tables()
    for case in cases:  # warm: the per-tables memos fill on first use
        rank_case(case, tables)
    per_case = []
    for case in cases:
        samples = []
        for _ in range(args.repeats):
            t0 = time.perf_counter()
            rank_case(case, tables)
            samples.append(time.perf_counter() - t0)
        per_case.append((statistics.median(samples) * 1000, case.id))
    med = statistics.median(ms for ms, _ in per_case)
    slow_ms, slow_id = max(per_case)
    print(f"{len(cases)} cases ({len(demos)} demo, {len(vignettes)} vignettes), {args.repeats} rankings each")
    print(f"rank_case in-process: median {med:.2f} ms per case, slowest {slow_ms:.2f} ms ({slow_id})")
    print(f"ratio to target {med / TARGET_MS:.2f}  (target: median <= {TARGET_MS:g} ms)")
    print(f"host speed for scale: python -c 'import yaml' took {statistics.median(host):.0f} ms (median of 7)")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
