"""How long `agree plan` takes (run: `.venv/bin/python bench/bench_plan.py`).

The plan scores every simulated study exactly as `agree score` would (B = 2,000 draws of the
Bayesian bootstrap with a least-favourable pseudo-unit per study) and grows the simulation
(R = 500 studies per size at first, up to 4,000 near the answer) until its answer is stable to
± 5%, so it is no longer instant. Target: the cases below in under about a minute each on one
core (a plan is made once per study; progress shows on stderr). Each case runs the library call
`agree.analysis.planning.plan_sample` in this process; `--cli` also times the whole command in a
fresh process (interpreter start and imports included).

Options: --repeat N (median of N runs), --quick (R = B = 200, tolerance ± 20%), --cli, --out FILE (JSON).
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

from agree.analysis.planning import plan_sample

CASES = {
    "default: 2 coders, 4 equal categories, expected .90, min .80": dict(
        coders=2, categories=4, expected=0.90, minimum=0.80),
    "high agreement: 2 coders, 2 equal categories, expected .95, min .80": dict(
        coders=2, categories=2, expected=0.95, minimum=0.80),
    "close to the minimum: expected .85, min .80 (about 500 units)": dict(
        coders=2, categories=4, expected=0.85, minimum=0.80),
    "3 coders, skewed shares (rarest .05), 10% missing": dict(
        coders=3, shares=[0.5, 0.3, 0.15, 0.05], expected=0.90, minimum=0.80, missing=0.10),
    "ordinal, 2 coders, 5 categories": dict(
        coders=2, categories=5, expected=0.90, minimum=0.80, level="ordinal"),
    "4 coders, 6 categories": dict(coders=4, categories=6, expected=0.90, minimum=0.80),
}


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=3)
    parser.add_argument("--quick", action="store_true")
    parser.add_argument("--cli", action="store_true")
    parser.add_argument("--out", type=Path)
    args = parser.parse_args()
    size = dict(replicates=200, n_resamples=200, tolerance=0.2) if args.quick else {}
    report = {"machine": {"python": platform.python_version(), "cpus": os.cpu_count(),
                          "platform": platform.platform()}, "cases": []}
    for name, kwargs in CASES.items():
        times = []
        for _ in range(args.repeat):
            start = time.perf_counter()
            plan = plan_sample(seed=1, **kwargs, **size)
            times.append(time.perf_counter() - start)
        row = {"case": name, "median_s": statistics.median(times), "min_s": min(times),
               "units_needed": plan.units_needed, "units_range": plan.units_range,
               "studies_near_answer": plan.replicates, "sizes_simulated": len(plan.curve)}
        report["cases"].append(row)
        print(f"{row['median_s']:6.2f} s (min {row['min_s']:.2f})  N = {plan.units_needed} {plan.units_range}  "
              f"[{len(plan.curve)} sizes, {plan.replicates} studies near N]  {name}", flush=True)
    if args.cli:
        agree_bin = Path(sys.executable).with_name("agree")
        cmd = [str(agree_bin), "plan", "--coders", "2", "--categories", "4", "--expected", "0.9",
               "--format", "json"]
        start = time.perf_counter()
        subprocess.run(cmd, check=True, capture_output=True)
        report["cli_default_s"] = time.perf_counter() - start
        print(f"{report['cli_default_s']:6.2f} s  CLI: {' '.join(cmd[1:])}")
    if args.out:
        args.out.write_text(json.dumps(report, indent=2) + "\n")


if __name__ == "__main__":
    main()
