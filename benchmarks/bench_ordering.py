"""Section-ordering search time from 2 to 12 sections, and how it grows.

    python benchmarks/bench_ordering.py [--repeat 3] [--max 12]

For n sections (a Butterworth bandpass of order n: n sections, f0 10 kHz, 2 kHz wide, one
out-of-band tone) it times ``chain.ordering.make_problem`` (the subset tables) and
``best_order`` (exhaustive over the n! orders up to EXHAUSTIVE_MAX sections, dynamic
programming over the 2^n subsets beyond), prints each and the growth factor from n - 1 to n
against n (permutations) and 2 (subsets). The section noise densities are flat (equal for
every section): the search does the same work whatever their values. Prints figures; asserts
nothing.
"""

from __future__ import annotations

import argparse
import time

import numpy as np

from bandwright.analysis.grid import passband_grid
from bandwright.candidates import make_candidates
from bandwright.chain.ordering import EXHAUSTIVE_MAX, best_order, best_order_dp, make_problem
from bandwright.inputs.loader import spec_from_dict

GOAL_S = 2.0


def _best(fn, repeat: int) -> tuple[float, object]:
    best, out = None, None
    for _ in range(repeat):
        t0 = time.perf_counter()
        out = fn()
        dt = time.perf_counter() - t0
        best = dt if best is None else min(best, dt)
    return best, out


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--max", type=int, default=12)
    args = ap.parse_args()
    print(f"{'n':>3s} {'method':>11s} {'tables s':>9s} {'search s':>9s} {'total s':>8s} "
          f"{'growth':>7s} {'DP s':>8s}")
    prev = None
    for n in range(2, args.max + 1):
        req = spec_from_dict({"passband": {"center_hz": 10e3, "bandwidth_hz": 2e3,
                                           "max_loss_db": 1.0},
                              "design": {"order": n, "family": "butterworth"},
                              "input": {"max_vpk": 1.0,
                                        "tone": [{"freq_hz": 50.0, "vpk": 1.0}]}})
        cand = next(c for c in make_candidates(req) if c.path == "bandpass")
        secs = cand.sections
        nf = np.geomspace(req.passband.low_hz, req.passband.high_hz, 401)
        psd = np.full((len(secs), nf.size), 1e-16)
        t_make, problem = _best(lambda: make_problem(
            secs, psd, nf, total_gain=1.0, passband_hz=passband_grid(req), max_vpk=1.0,
            tones=[(50.0, 1.0)]), args.repeat)
        t_search, _ = _best(lambda: best_order(problem), args.repeat)
        # The exact method beyond the exhaustive range, timed at every size for comparison.
        t_dp, _ = _best(lambda: best_order_dp(problem), args.repeat)
        total = t_make + t_search
        growth = f"{total / prev:6.2f}x" if prev else "      -"
        method = "exhaustive" if len(secs) <= EXHAUSTIVE_MAX else "DP"
        print(f"{len(secs):3d} {method:>11s} {t_make:9.4f} {t_search:9.4f} {total:8.4f} "
              f"{growth:>7s} {t_dp:8.4f}")
        prev = total
    print(f"growth: exhaustive ~ n x per added section (n! orders), dynamic programming ~ 2x "
          f"(2^n subsets, n each); goal: under {GOAL_S} s at 12 sections")


if __name__ == "__main__":
    main()
