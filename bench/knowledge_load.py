"""Time a warm `load_tables()` against a bare `import yaml`, each in a fresh interpreter.

Usage: python bench/knowledge_load.py [--runs N] [--dir KNOWLEDGE_FOLDER]
Prints the median wall time of both (runs interleaved) and their ratio (target: at most 1.5).  The cache goes to a
temporary TUBULO_CACHE_DIR, warmed by one untimed run first.
"""

from __future__ import annotations

import argparse
import os
import statistics
import subprocess
import sys
import tempfile
import time

TARGET = 1.5  # project target for the ratio


def _time(code: str, env: dict) -> float:
    t0 = time.perf_counter()
    subprocess.run([sys.executable, "-c", code], env=env, check=True)
    return time.perf_counter() - t0


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--runs", type=int, default=21)
    ap.add_argument("--dir", default=None, help="knowledge folder (default: the installed one)")
    args = ap.parse_args(argv)
    arg = "" if args.dir is None else repr(args.dir)
    load = f"from tubulo.kb.tables import load_tables; load_tables({arg})"
    with tempfile.TemporaryDirectory() as cache:
        env = {**os.environ, "TUBULO_CACHE_DIR": cache}
        subprocess.run([sys.executable, "-c", load], env=env, check=True)  # warm the cache
        base_t, warm_t = [], []
        for _ in range(args.runs):  # interleaved, so a change in machine load hits both alike
            base_t.append(_time("import yaml", env))
            warm_t.append(_time(load, env))
        base, warm = statistics.median(base_t), statistics.median(warm_t)
    ratio = warm / base
    print(f"import yaml         median {1000 * base:7.1f} ms over {args.runs} runs")
    print(f"load_tables (warm)  median {1000 * warm:7.1f} ms over {args.runs} runs")
    print(f"ratio {ratio:.2f} (target <= {TARGET})")
    return 0 if ratio <= TARGET else 1


if __name__ == "__main__":
    raise SystemExit(main())
