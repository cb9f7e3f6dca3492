"""Cold start of the CLI against `python -c "import yaml"`, as a ratio (median of repeated runs).

Run:  python bench/cold_start.py [--runs 15]
Both commands run in fresh processes in the same session; the compiled-knowledge cache is warmed
first (one run), as it is on a user's machine after the first use; byte-code caching is left on.
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


def _time(cmd: list[str], runs: int) -> float:
    samples = []
    for _ in range(runs):
        t = time.perf_counter()
        subprocess.run(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, check=False, env=ENV)
        samples.append(time.perf_counter() - t)
    return statistics.median(samples)


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
    base = _time([sys.executable, "-c", "import yaml"], args.runs)
    print(f"python -c 'import yaml': {base * 1000:.0f} ms (median of {args.runs})")
    for name, cmd in commands.items():
        t = _time(cmd, args.runs)
        print(f"tubulo {name}: {t * 1000:.0f} ms  ratio {t / base:.2f}  (target <= 3)")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
