"""What `--out` (plots, schematics, report.html and the other files) adds to a plan.

    python benchmarks/bench_out.py [SCENARIO ...] [--repeat 1]

For each scenario: the wall time of ``python -m bandwright plan SPEC --json`` and of
``python -m bandwright plan SPEC --out DIR`` (a fresh temporary folder each run), best of
``--repeat`` runs, and their difference against the goal of issue 14 (at most 1.5 s).
Prints figures; asserts nothing.
"""

from __future__ import annotations

import argparse
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
SCENARIOS = ROOT / "scenarios"
GOAL_S = 1.5


def _wall(args: list[str]) -> float:
    t0 = time.perf_counter()
    subprocess.run([sys.executable, "-m", "bandwright", *args], cwd=ROOT,
                   capture_output=True, check=False)
    return time.perf_counter() - t0


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("scenarios", nargs="*", type=Path)
    ap.add_argument("--repeat", type=int, default=1)
    a = ap.parse_args()
    specs = a.scenarios or sorted(SCENARIOS.glob("*.toml"))
    print(f"{'scenario':32s} {'--json s':>9s} {'--out s':>9s} {'added s':>9s} "
          f"{'added/goal':>10s}  goal: added <= {GOAL_S} s")
    met = 0
    for spec in specs:
        t_json = min(_wall(["plan", str(spec), "--json"]) for _ in range(a.repeat))
        t_out = []
        for _ in range(a.repeat):
            with tempfile.TemporaryDirectory() as tmp:
                t_out.append(_wall(["plan", str(spec), "--out", str(Path(tmp) / "o")]))
        added = min(t_out) - t_json
        met += added <= GOAL_S
        print(f"{spec.stem:32s} {t_json:9.2f} {min(t_out):9.2f} {added:9.2f} "
              f"{added / GOAL_S:10.2f}  {'met' if added <= GOAL_S else 'not met'}")
    print(f"goal: --out adds at most {GOAL_S} s: met for {met} of {len(specs)} scenarios")


if __name__ == "__main__":
    main()
