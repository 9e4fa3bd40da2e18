"""How long the command line takes to answer `agree --help` and `agree score --help`
(run: `.venv/bin/python bench/bench_help.py`; also a row of `bench/run.py`).

Target: under 0.3 s each, in a fresh process (interpreter start, imports and the help's
rendering included), so the command line answers at once. Each command runs `--repeat` times;
the median is reported beside a bare interpreter start (`python -c pass`) for scale.

Options: --repeat N (default 9), --out FILE (JSON).
"""

from __future__ import annotations

import argparse
import json
import os
import platform
import statistics
import subprocess
import sys
import time
from pathlib import Path

TARGET_S = 0.3
COMMANDS = {
    "agree --help": ["--help"],
    "agree score --help": ["score", "--help"],
}


def _wall(argv: list[str]) -> float:
    start = time.perf_counter()
    subprocess.run(argv, check=True, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
                   env={**os.environ, "COLUMNS": "100"})
    return time.perf_counter() - start


def bench_help(repeat: int = 9) -> dict:
    """Median wall time of each help in a fresh process, and of a bare interpreter start."""
    agree_bin = str(Path(sys.executable).with_name("agree"))
    _wall([agree_bin, "--help"])            # one warm-up: bytecode compiled, files in the page cache
    rows = []
    for name, args in COMMANDS.items():
        times = [_wall([agree_bin, *args]) for _ in range(repeat)]
        rows.append({"command": name, "median_s": statistics.median(times), "min_s": min(times),
                     "target_s": TARGET_S, "meets_target": statistics.median(times) < TARGET_S})
    bare = statistics.median(_wall([sys.executable, "-c", "pass"]) for _ in range(repeat))
    return {"repeat": repeat, "python_start_s": bare, "commands": rows}


def report(result: dict) -> None:
    for row in result["commands"]:
        print(f"  {row['command']:20s} {row['median_s']:.3f}s (min {row['min_s']:.3f}s)  "
              f"target < {row['target_s']}s: {'yes' if row['meets_target'] else 'NO'}")
    print(f"  (a bare interpreter start: {result['python_start_s']:.3f}s)")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=9)
    parser.add_argument("--out", type=Path)
    args = parser.parse_args()
    result = {"machine": {"python": platform.python_version(), "cpus": os.cpu_count(),
                          "platform": platform.platform()}, **bench_help(args.repeat)}
    print(f"help in a fresh process, median of {args.repeat} runs:")
    report(result)
    if args.out:
        args.out.write_text(json.dumps(result, indent=2))
        print(f"written {args.out}")


if __name__ == "__main__":
    main()
