"""Cold start of the CLI against `python -c "import yaml"`, as a ratio (median of repeated runs).

Run:  python bench/cold_start.py [--runs 15]
Every command runs in a fresh process; the compiled-knowledge cache is warmed first (one run), as it is
on a user's machine after the first use; byte-code caching is left on.  The commands are interleaved
round by round and each round gives its own ratio, so a machine whose speed drifts (a shared virtual
host) moves both sides of a ratio together; the median ratio and its quartiles are printed.
"""

from __future__ import annotations

import argparse
import os
import shutil
import statistics
import subprocess
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "cases" / "demo-salt-wasting.yaml"


# byte-code caching as on a user's machine (pip compiles an installed package); some shells disable it
ENV = {k: v for k, v in os.environ.items() if k != "PYTHONDONTWRITEBYTECODE"}


def _once(cmd: list[str]) -> float:
    t = time.perf_counter()
    subprocess.run(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, check=False, env=ENV)
    return time.perf_counter() - t


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__)
    ap.add_argument("--runs", type=int, default=15)
    args = ap.parse_args()
    tubulo = shutil.which("tubulo") or str(Path(sys.executable).with_name("tubulo"))
    commands = {"check": [tubulo, "check", str(DEMO)]}
    if subprocess.run([tubulo, "rank", "--help"], capture_output=True).returncode == 0:
        commands["rank --json"] = [tubulo, "rank", str(DEMO), "--json"]
    for cmd in commands.values():
        subprocess.run(cmd, capture_output=True, env=ENV)  # warm the knowledge and byte-code caches
    baseline = [sys.executable, "-c", "import yaml"]
    base: list[float] = []
    times: dict[str, list[float]] = {name: [] for name in commands}
    ratios: dict[str, list[float]] = {name: [] for name in commands}
    for _ in range(args.runs):
        b = _once(baseline)
        base.append(b)
        for name, cmd in commands.items():
            t = _once(cmd)
            times[name].append(t)
            ratios[name].append(t / b)
    print(f"python -c 'import yaml': {statistics.median(base) * 1000:.0f} ms (median of {args.runs})")
    for name in commands:
        med = statistics.median(ratios[name])
        q1, _, q3 = statistics.quantiles(ratios[name], n=4) if args.runs >= 4 else (med, med, med)
        print(f"tubulo {name}: {statistics.median(times[name]) * 1000:.0f} ms  ratio {med:.2f} "
              f"(quartiles {q1:.2f}-{q3:.2f})  (target <= 3)")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
