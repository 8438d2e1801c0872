"""Diagnosis of a six-stage chain from a 400-point measured sweep: the fit's wall time.

    python benchmarks/bench_diagnosis.py [--repeat 5] [--points 400]

The chain is ``tests/reference/diagnosis/six_stage_mixed.toml`` (Tow-Thomas, four
multiple-feedback, one Sallen-Key bandpass; 42 fitted parts and op-amp GBWs). The sweep is
that chain with one capacitor 8 % high, from ngspice when it is installed (the chain's own
deck, edited) or else from the tool's nodal solver, with ±0.05 dB of seeded reading noise.
Times ``diagnosis.diagnose`` (both fits, the suspects, the fixes and the mask verdict), and
the whole ``bandwright audit --measured --json`` in process for context. Goal: under 2 s.
Prints figures and ratios; asserts nothing.
"""

from __future__ import annotations

import argparse
import contextlib
import io
import shutil
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT / "tests"))

from bandwright import cli  # noqa: E402
from bandwright.audit import audit  # noqa: E402
from bandwright.chain.graph import CHAIN_OUTPUT, build_chain, net_transfers  # noqa: E402
from bandwright.chain.stage import with_parts  # noqa: E402
from bandwright.diagnosis import diagnose  # noqa: E402
from bandwright.inputs.sweep_file import load_sweep  # noqa: E402

CHAIN = ROOT / "tests" / "reference" / "diagnosis" / "six_stage_mixed.toml"
GOAL_S = 2.0


def _sweep(a, points: int, tmp: Path) -> tuple[Path, str]:
    import diagnosis_bench as bench
    pb = a.requirement.passband
    lo, hi = pb.low_hz / 3, pb.high_hz * 3
    if shutil.which("ngspice"):
        f, h = bench.bench_sweep(bench.scale_part(bench.chain_deck(a), 3, "C1", 1.08),
                                 lo, hi, points, tmp)
        source = "ngspice"
    else:
        st = a.chain.stages[2]
        parts = dict(st.components)
        parts["C1"] *= 1.08
        stages = list(a.chain.stages)
        stages[2] = with_parts(st, parts)
        f = np.geomspace(lo, hi, points)
        h = net_transfers(build_chain(stages, source_ohms=a.chain.source_ohms), f)[CHAIN_OUTPUT]
        source = "nodal solver"
    return bench.write_sweep(tmp / "sweep.csv", f, h, noise_db=0.05, seed=1), source


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--repeat", type=int, default=5)
    ap.add_argument("--points", type=int, default=400)
    args = ap.parse_args()
    a = audit(CHAIN)
    with tempfile.TemporaryDirectory() as tmp:
        path, source = _sweep(a, args.points, Path(tmp))
        sweep = load_sweep(path)
        times = []
        for _ in range(args.repeat):
            t = time.perf_counter()
            d = diagnose(a, sweep)
            times.append(time.perf_counter() - t)
        t = time.perf_counter()
        with contextlib.redirect_stdout(io.StringIO()):
            code = cli.main(["audit", str(CHAIN), "--measured", str(path), "--json"])
        whole = time.perf_counter() - t
    n_vars = sum(len(st.components) + sum(e.kind == "opamp" for e in st.elements)
                 for st in a.chain.stages)
    best, median = min(times), float(np.median(times))
    lead = d.suspects[0] if d.suspects else None
    print(f"chain: {len(a.chain.stages)} stages, {n_vars} fitted parts and GBWs; sweep: "
          f"{sweep.freq_hz.size} points from the {source}, stage 3 C1 +8 %")
    print(f"diagnose: best {best:.3f} s, median {median:.3f} s of {args.repeat} "
          f"(goal {GOAL_S:g} s: {median / GOAL_S:.2f} of it)")
    print(f"whole `audit --measured --json` in process: {whole:.3f} s (exit {code}); the "
          f"diagnosis is {median / whole:.0%} of it")
    if lead is not None:
        print(f"found: stage {lead.stage} {lead.part} {lead.change_pct:+.2f} % (confidence "
              f"{lead.confidence:.2f}); residual {d.residual_db:.4f} dB rms, noise "
              f"{d.noise_db:.4f} dB")
    else:
        print(f"found: {d.message}")


if __name__ == "__main__":
    main()
