"""The whole `plan` of the bundled scenarios (all candidates, ordering, part search and the
2,000-sample yield), against the start-up cost of Python with numpy, scipy.signal and
matplotlib.

    python benchmarks/bench_plan.py [SCENARIO ...] [--repeat 1]

For each scenario: the in-process ``planner.plan`` time (modules already imported), the
part of it spent on the Monte Carlo yield (from the planner's progress reports), and the
wall time of the command ``python -m bandwright plan SPEC --json`` as a user runs it. The
reference is the best of three runs of ``python -c "import numpy, scipy.signal,
matplotlib"``. Prints figures and ratios; asserts nothing.
"""

from __future__ import annotations

import argparse
import subprocess
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
SCENARIOS = ROOT / "scenarios"
GOAL_S = 1.5


def _wall(cmd: list[str]) -> float:
    t0 = time.perf_counter()
    subprocess.run(cmd, cwd=ROOT, capture_output=True, check=False)
    return time.perf_counter() - t0


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("scenarios", nargs="*", help="scenario names (default: every bundled one)")
    ap.add_argument("--repeat", type=int, default=1, help="in-process runs per scenario")
    args = ap.parse_args()

    startup = min(_wall([sys.executable, "-c", "import numpy, scipy.signal, matplotlib"])
                  for _ in range(3))
    print(f"start-up reference: python -c 'import numpy, scipy.signal, matplotlib' "
          f"{startup:.3f} s (best of 3)")
    t0 = time.perf_counter()
    from bandwright.planner import plan
    from bandwright.inputs import load_spec
    print(f"importing bandwright.planner in this process: {time.perf_counter() - t0:.3f} s")

    names = args.scenarios or sorted(p.stem for p in SCENARIOS.glob("*.toml"))
    print(f"{'scenario':22s} {'plan s':>7s} {'yield s':>8s} {'CLI s':>7s} {'plan/start-up':>13s} "
          f"{'CLI/start-up':>12s}  yield, chosen design")
    for name in names:
        spec = SCENARIOS / f"{name}.toml"
        req = load_spec(spec)
        best, y_time, result = None, None, None
        for _ in range(max(1, args.repeat)):
            marks: dict[str, float] = {}

            def progress(stage: str, done: int, total: int) -> None:
                marks[stage] = time.perf_counter()

            t0 = time.perf_counter()
            result = plan(req, progress=progress)
            dt = time.perf_counter() - t0
            if best is None or dt < best:
                best = dt
                y_time = (marks["yield"] - marks.get("candidates", t0)) if "yield" in marks \
                    else 0.0
        cli = _wall([sys.executable, "-m", "bandwright", "plan", str(spec), "--json"])
        y = result.chosen.yield_result
        ytxt = (f"{100 * y.yield_fraction:.1f} % of {y.samples}" if y is not None
                else "no chain")
        d = result.chosen
        print(f"{name:22s} {best:7.2f} {y_time:8.2f} {cli:7.2f} {best / startup:13.1f} "
              f"{cli / startup:12.1f}  {ytxt}; {d.candidate.family} {d.candidate.path}, "
              f"{len(d.chain.stages) if d.chain else 0} stages")
    print(f"goal: the whole plan within {GOAL_S} s")


if __name__ == "__main__":
    main()
