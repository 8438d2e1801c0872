"""Monte Carlo of a six-section chain: bandwright's batched evaluation against ngspice
running the same boards on the same deck, side by side in one run.

    python benchmarks/bench_montecarlo.py [--samples 2000] [--spice-samples 200] [--repeat 5]

Both sides evaluate the same 2,000 boards (``analysis.montecarlo.sample_values``: every R, C
and op-amp GBW drawn from one seed) at the same frequencies: a 512-point log sweep
(envelope), the 101-point passband grid and the stopband and tone points (mask, headroom),
with finite-GBW single-pole op-amps. ngspice gets the chain's own deck
(``report.spice.spice_deck``) with a ``.control`` loop that ``alter``s every part and every
op-amp's pole capacitor per board, runs the three sweeps and writes every op-amp output.
ngspice runs on the first ``--spice-samples`` boards and its time is scaled linearly to all
boards (said in the output); its verdicts are compared board by board with bandwright's.
Prints figures and ratios; asserts nothing.
"""

from __future__ import annotations

import argparse
import math
import resource
import shutil
import sys
import tempfile
import time
import tracemalloc
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))

from _chains import grid_for_ngspice, six_section_chain  # noqa: E402
from _spice_batch import run_control_batch  # noqa: E402

from bandwright.analysis.grid import passband_grid  # noqa: E402
from bandwright.analysis.levels import swing_limit_vpk  # noqa: E402
from bandwright.analysis.montecarlo import (monte_carlo, sample_columns,  # noqa: E402
                                            sample_values)
from bandwright.chain.graph import flatten  # noqa: E402
from bandwright.report.spice import spice_deck  # noqa: E402


def _alters(chain, row) -> list[str]:
    out = []
    for c, x in zip(sample_columns(chain), row):
        if c.kind == "GBW":
            inst = f"xu{c.part.split()[0][1:]}_s{c.stage}".lower()
            out.append(f"alter c.{inst}.c_p = {1 / (2 * math.pi * x):.12g}")
        else:
            out.append(f"alter {c.part}_s{c.stage} = {x:.12g}")
    return out


def _read_blocks(path: Path, rows: int) -> np.ndarray:
    """An appended wrdata file: header lines dropped, (boards, rows, columns)."""
    lines = [ln.split() for ln in path.read_text().splitlines() if ln.strip()]
    data = np.array([[float(v) for v in ln] for ln in lines if not ln[0][0].isalpha()])
    return data.reshape(-1, rows, data.shape[1])


def run_ngspice(chain, req, values, grid_hz, ppd, workdir: Path) -> tuple[float, dict]:
    """The Monte Carlo in ngspice: returns (wall seconds of ngspice, parsed responses)."""
    pb = req.passband
    ppd_pb = math.floor((passband_grid(req).size - 0.5) / math.log10(pb.high_hz / pb.low_hz))
    singles = [p.freq_hz for p in req.stopband] + [t.freq_hz for t in req.input.tones]
    nets = chain.output_nets
    probes = " ".join(f"v({n})" for n in nets)
    cmds = ["set wr_singlescale", "set wr_vecnames", "set appendwrite"]
    for row in values:
        cmds += _alters(chain, row)
        cmds += [f"ac dec {ppd} {float(grid_hz[0])!r} {float(grid_hz[-1])!r}",
                 "wrdata env.txt v(out)",
                 f"ac dec {ppd_pb} {pb.low_hz!r} {pb.high_hz!r}", f"wrdata pb.txt {probes}"]
        for f in singles:
            cmds += [f"ac lin 1 {f!r} {f!r}", f"wrdata single.txt {probes}"]
        cmds.append("destroy all")
    deck = spice_deck(flatten(chain), source_ohms=chain.source_ohms,
                      temperature_c=req.environment.temperature_c, title="monte carlo")
    wall, _ = run_control_batch(deck, cmds, workdir, "mc.cir")
    env = _read_blocks(workdir / "env.txt", grid_hz.size)
    pbd = _read_blocks(workdir / "pb.txt", passband_grid(req).size)
    sgl = _read_blocks(workdir / "single.txt", 1)
    return wall, {"env": env, "pb": pbd, "single": sgl.reshape(len(values), len(singles), -1),
                  "nets": nets}


def ngspice_verdicts(chain, req, resp) -> np.ndarray:
    """Mask and headroom read from ngspice's responses, as checks.mask and node levels do."""
    pb = req.passband
    nets = resp["nets"]

    def mag(block, k):  # columns: freq, then (re, im) per net
        return np.hypot(block[..., 1 + 2 * k], block[..., 2 + 2 * k])

    out_k = nets.index("out")
    g_pb = 20 * np.log10(mag(resp["pb"], out_k))
    ok = (pb.gain_db - g_pb.min(axis=1) <= pb.max_loss_db + 1e-9) & \
         (np.abs(g_pb.max(axis=1) - pb.gain_db) <= pb.gain_tolerance_db + 1e-9)
    n_stop = len(req.stopband)
    for j, p in enumerate(req.stopband):
        ok &= pb.gain_db - 20 * np.log10(mag(resp["single"][:, j], out_k)) >= p.min_loss_db - 1e-9
    tv = np.array([t.vpk for t in req.input.tones])
    for k, n in enumerate(nets):
        peak = req.input.max_vpk * mag(resp["pb"], k).max(axis=1) + \
            mag(resp["single"][:, n_stop:], k) @ tv
        ok &= peak <= swing_limit_vpk(req.supply, chain.stage_of(n).model.swing_to_rail_v)
    return ok


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--samples", type=int, default=2000)
    ap.add_argument("--spice-samples", type=int, default=200,
                    help="boards ngspice runs (its time is scaled to --samples)")
    ap.add_argument("--repeat", type=int, default=5)
    args = ap.parse_args()

    chain, req = six_section_chain()
    grid, ppd = grid_for_ngspice(req.passband.center_hz)
    print(f"chain: {len(chain.stages)} stages ({', '.join(s.topology for s in chain.stages)}), "
          f"op-amp '{chain.stages[0].model.name}' GBW {chain.stages[0].model.gbw_hz / 1e6:g} MHz, "
          f"{len(sample_columns(chain))} randomised quantities per board")
    kw = dict(samples=args.samples, seed=1, envelope_hz=grid, with_sensitivities=False)
    monte_carlo(chain, req, **kw)  # warm-up: imports, first allocations
    times = []
    for _ in range(args.repeat):
        t0 = time.perf_counter()
        res = monte_carlo(chain, req, **kw)
        times.append(time.perf_counter() - t0)
    tracemalloc.start()
    monte_carlo(chain, req, **kw)
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    n_freq = np.unique(np.concatenate([grid, passband_grid(req),
                                       [p.freq_hz for p in req.stopband],
                                       [t.freq_hz for t in req.input.tones]])).size
    best, median = min(times), float(np.median(times))
    print(f"bandwright: {args.samples} boards x {n_freq} frequencies ({grid.size} envelope + "
          f"passband grid + mask/tone points) x {len(chain.stages)} stages: best {best:.3f} s, "
          f"median {median:.3f} s of {args.repeat} (goal for 2,000 boards: 0.5 s)")
    print(f"  peak traced memory {peak / 1e6:.1f} MB (numpy arrays; goal for 2,000 boards: "
          f"< 300 MB), process max "
          f"RSS {resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1e3:.0f} MB")
    print(f"  yield {100 * res.yield_fraction:.1f} % (95 % interval {100 * res.interval[0]:.1f}"
          f"–{100 * res.interval[1]:.1f} %), failing {res.fail_counts}")

    if shutil.which("ngspice") is None:
        print("ngspice: not installed, no ratio")
        return
    n_sp = min(args.spice_samples, args.samples)
    values = sample_values(chain, res.spreads, samples=args.samples, seed=1)[:n_sp]
    with tempfile.TemporaryDirectory() as tmp:
        wall, resp = run_ngspice(chain, req, values, grid, ppd, Path(tmp))
    per_board = wall / n_sp
    scaled = per_board * args.samples
    print(f"ngspice: {n_sp} boards in {wall:.2f} s ({1e3 * per_board:.1f} ms a board, "
          f"{grid.size}+{passband_grid(req).size}+"
          f"{len(req.stopband) + len(req.input.tones)} points each); scaled linearly to "
          f"{args.samples} boards: {scaled:.1f} s")
    print(f"ratio ngspice / bandwright: {scaled / best:.0f}x on the best run, "
          f"{scaled / median:.0f}x on the median (goal >= 50x)")
    agree = ngspice_verdicts(chain, req, resp) == res.passed[:n_sp]
    print(f"verdicts: ngspice and bandwright agree on {int(agree.sum())} of {n_sp} boards")
    env_sp = 20 * np.log10(np.hypot(resp["env"][..., 1], resp["env"][..., 2]))
    print(f"  ngspice frequencies match the envelope grid to "
          f"{np.max(np.abs(resp['env'][0, :, 0] / grid - 1)):.1e} (relative); its median "
          f"gain over these boards vs bandwright's median envelope: max |diff| "
          f"{np.max(np.abs(np.median(env_sp, axis=0) - res.envelope_db[1])):.2f} dB "
          f"({n_sp} vs {args.samples} boards)")


if __name__ == "__main__":
    main()
