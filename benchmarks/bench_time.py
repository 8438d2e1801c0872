"""Time-domain figures of a six-section chain: what they add to a plan.

Prints the time of ``analysis.timedomain.time_figures`` on the six-section chain of
``_chains.six_section_chain`` (median of repeats), the whole ``analysis.analyse`` (them included) on the
same chain for scale, and the share of a whole ``plan`` of the matching requirement that
the time figures take (they run once per candidate). Goal: at most 0.2 s added to a plan.
Nothing is asserted; timings depend on what else the machine is doing.
"""

from __future__ import annotations

import statistics
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))

from _chains import six_section_chain  # noqa: E402

from bandwright.analysis import analyse  # noqa: E402
from bandwright.analysis import timedomain  # noqa: E402
from bandwright.planner import plan  # noqa: E402


def _median(fn, repeats: int = 7) -> float:
    times = []
    for _ in range(repeats):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return statistics.median(times)


def main() -> None:
    chain, req = six_section_chain()
    calls = []
    real = timedomain.time_figures

    def counting(*a, **k):
        t0 = time.perf_counter()
        out = real(*a, **k)
        calls.append(time.perf_counter() - t0)
        return out

    t_an = _median(lambda: analyse(chain, req))
    calls.clear()
    import bandwright.analysis as an_mod
    an_mod.time_figures = counting
    try:
        _median(lambda: analyse(chain, req), repeats=7)
        t_time = statistics.median(calls)
        calls.clear()
        t0 = time.perf_counter()
        p = plan(req)
        t_plan = time.perf_counter() - t0
        in_plan = sum(calls)
    finally:
        an_mod.time_figures = real
    nets = len(chain.output_nets)
    poles = sum(1 for st in chain.stages for e in st.elements if e.kind in ("C", "opamp"))
    print(f"six-section chain: {len(chain.stages)} stages, {nets} op-amp output nets, "
          f"about {poles} poles")
    print(f"time_figures, one chain (median of 7): {t_time * 1e3:.1f} ms "
          f"(the whole analyse, these included: {t_an * 1e3:.0f} ms)")
    print(f"plan of the same requirement: {t_plan:.2f} s, {len(p.designs)} candidates; "
          f"time figures {in_plan:.3f} s of it ({in_plan / t_plan:.1%}); goal: at most 0.2 s")


if __name__ == "__main__":
    main()
