"""The whole `plan` of the bundled scenarios (all candidates, ordering, part search and the
2,000-sample yield) against two references: the start-up cost of Python with numpy and
scipy.signal, and ngspice running 2,000 AC sweeps of the plan's own chain.

    python benchmarks/bench_plan.py [SCENARIO ...] [--repeat 1] [--boards 2000]
                                    [--no-spice]

For each scenario: the in-process ``planner.plan`` time (modules already imported) with the
candidates built side by side in worker processes (``bandwright.workers``, one per core, as
a user's run gets them) and with ``BANDWRIGHT_WORKERS=1`` (all in this process: what the
plan costs one core), and the wall time of the command ``python -m bandwright plan SPEC
--json`` as a user runs it.

Both commands run with Python's bytecode cache on, as on any installed copy (a
PYTHONDONTWRITEBYTECODE in the environment is left out for them).

"cold s" is one run of the same command with an empty expansion cache
(``circuits.expansion_cache``: what a first run on a new machine pays); "CLI s" the best
of `--repeat` runs with the cache as the in-process plan left it, as a designer re-running
a plan sees it.

Goals of issue 14, each printed with its ratio and whether this run met it:

* the command within 1.0 s (on a quiet 2-core machine) and within 1.5x the start-up
  reference, the best of three runs of ``python -c "import numpy, scipy.signal"``;
* the command at least 10x faster than ngspice running 2,000 AC sweeps of the plan's own
  ``chain.cir`` (the deck ``--out`` writes, from ``report.files``) over the plan's response
  grid, with every top-level R and C of the deck (the chain's parts, its reference network
  and the converter's load; not the source resistance RSRC) altered per board. ngspice
  gets ONE batch run (``ngspice -b``) whose ``.control`` block holds, per board, the
  ``alter`` lines (values drawn here, uniform within the plan's resistor / capacitor
  tolerance, ``analysis.montecarlo.resolve_spreads``), one ``ac lin N f_lo f_hi`` and a
  ``destroy all``. ``ac lin`` with N = the response grid's point count over its span
  (f_lo, f_hi) is used because ngspice's ``ac`` takes no list of frequencies and ``ac dec``
  cannot hit an arbitrary count over a fixed span; an AC point costs one complex solve
  whatever its spacing, so the work is the same as on the grid itself. Every sweep echoes
  its point count; the completed sweeps and points are counted from ngspice's output.
  With ``--boards N`` (< 2,000) ngspice runs N boards and its time is scaled linearly to
  2,000 (said in the output).

Prints figures and ratios; asserts nothing.
"""

from __future__ import annotations

import argparse
import contextlib
import math
import os
import re
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

from _spice_batch import run_control_batch

ROOT = Path(__file__).resolve().parent.parent
SCENARIOS = ROOT / "scenarios"
REFERENCE = "import numpy, scipy.signal"
GOAL_S = 1.0            # the CLI plan, seconds, on a quiet 2-core machine
GOAL_STARTUP_RATIO = 1.5  # the CLI plan over the start-up reference
GOAL_SPICE_RATIO = 10.0   # ngspice's 2,000 sweeps over the CLI plan
SPICE_BOARDS = 2000

_PART_LINE = re.compile(r"^([RC]\S*)\s+\S+\s+\S+\s+\S+", re.IGNORECASE)
_SWEEP_DONE = re.compile(r"^sweep_points\s+(\d+)", re.MULTILINE)


def _user_env(**extra: str) -> dict[str, str]:
    """The environment a user's command runs in: Python's bytecode cache on (a sandbox may
    set PYTHONDONTWRITEBYTECODE, which would recompile every module of an editable install
    on every run: 0.1-0.2 s that no installed copy pays)."""
    env = {k: v for k, v in os.environ.items() if k != "PYTHONDONTWRITEBYTECODE"}
    env.update(extra)
    return env


def _wall(cmd: list[str], env: dict[str, str] | None = None) -> float:
    t0 = time.perf_counter()
    subprocess.run(cmd, cwd=ROOT, capture_output=True, check=False,
                   env=_user_env() if env is None else env)
    return time.perf_counter() - t0


@contextlib.contextmanager
def _workers(value: str):
    """``BANDWRIGHT_WORKERS`` set to `value` for the block (read at each plan)."""
    before = os.environ.get("BANDWRIGHT_WORKERS")
    os.environ["BANDWRIGHT_WORKERS"] = value
    try:
        yield
    finally:
        if before is None:
            del os.environ["BANDWRIGHT_WORKERS"]
        else:
            os.environ["BANDWRIGHT_WORKERS"] = before


def _met(ok: bool) -> str:
    return "met" if ok else "not met"


def plan_deck(result) -> str | None:
    """The plan's chain.cir, as ``--out`` writes it (``report.files``), or None."""
    from bandwright.report import files
    d = result.chosen
    if d.chain is None:
        return None
    tuning = getattr(d, "tuning", None)
    return files._deck(d.chain, result.requirement, "bench", None if tuning is None
                       else tuning.plan)


def _deck_parts(deck: str) -> list[tuple[str, float]]:
    """Every top-level R and C of `deck` but the source resistance: (name, value)."""
    out, inside = [], False
    for line in deck.splitlines():
        low = line.strip().lower()
        if low.startswith(".subckt"):
            inside = True
        elif low.startswith(".ends"):
            inside = False
        elif not inside and (m := _PART_LINE.match(line)) and m.group(1).upper() != "RSRC":
            out.append((m.group(1), _spice_value(line.split()[3])))
    return out


_SUFFIX = {"t": 1e12, "g": 1e9, "meg": 1e6, "k": 1e3, "m": 1e-3, "u": 1e-6, "n": 1e-9,
           "p": 1e-12, "f": 1e-15}


def _spice_value(text: str) -> float:
    """A SPICE number with its scale suffix ("4.7k", "10n", "1meg")."""
    m = re.match(r"^([-+0-9.eE]+)([a-zA-Z]*)$", text)
    if m is None:
        raise ValueError(f"not a SPICE number: {text!r}")
    suffix = m.group(2).lower()
    scale = next((v for k, v in _SUFFIX.items() if suffix.startswith(k)), 1.0)
    return float(m.group(1)) * scale


def run_spice_sweeps(deck: str, grid_hz: np.ndarray, r_pct: float, c_pct: float,
                     boards: int, workdir: Path) -> tuple[float, int, int, int]:
    """One ``ngspice -b`` run of `boards` altered AC sweeps: (wall s, parts altered,
    sweeps completed, points completed) -- the last two counted from ngspice's output."""
    parts = _deck_parts(deck)
    rng = np.random.default_rng(1)
    nominal = np.array([v for _, v in parts])
    pct = np.array([r_pct if n[0].upper() == "R" else c_pct for n, _ in parts])
    values = nominal * (1 + pct / 100 * rng.uniform(-1, 1, size=(boards, len(parts))))
    n, lo, hi = grid_hz.size, float(grid_hz[0]), float(grid_hz[-1])
    cmds = []
    for row in values:
        cmds += [f"alter {name} = {v:.9g}" for (name, _), v in zip(parts, row)]
        cmds += [f"ac lin {n} {lo!r} {hi!r}", "let sweep_n = length(frequency)",
                 "echo sweep_points $&sweep_n", "destroy all"]
    wall, stdout = run_control_batch(deck, cmds, workdir, "sweeps.cir")
    done = [int(k) for k in _SWEEP_DONE.findall(stdout)]
    return wall, len(parts), len(done), sum(done)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("scenarios", nargs="*", help="scenario names (default: every bundled one)")
    ap.add_argument("--repeat", type=int, default=1, help="in-process and CLI runs per scenario")
    ap.add_argument("--boards", type=int, default=SPICE_BOARDS,
                    help="boards ngspice sweeps (its time is scaled to 2,000)")
    ap.add_argument("--no-spice", action="store_true", help="skip the ngspice side")
    args = ap.parse_args()
    spice = not args.no_spice and shutil.which("ngspice") is not None
    boards = max(1, args.boards)

    startup = min(_wall([sys.executable, "-c", REFERENCE]) for _ in range(3))
    print(f"start-up reference: python -c '{REFERENCE}' {startup:.3f} s (best of 3)")
    t0 = time.perf_counter()
    from bandwright.analysis.grid import response_grid
    from bandwright.analysis.montecarlo import resolve_spreads
    from bandwright.inputs import load_spec
    from bandwright.planner import plan
    print(f"importing bandwright.planner in this process: {time.perf_counter() - t0:.3f} s")
    if not spice:
        print("ngspice: " + ("skipped (--no-spice)" if args.no_spice else "not installed")
              + ", no ngspice ratio")
    elif boards != SPICE_BOARDS:
        print(f"ngspice: {boards} boards run, time scaled linearly to {SPICE_BOARDS}")

    names = args.scenarios or sorted(p.stem for p in SCENARIOS.glob("*.toml"))
    print(f"{'scenario':26s} {'plan s':>6s} {'1-core':>6s} {'cold s':>6s} {'CLI s':>6s} "
          f"{'CLI/ref':>7s} "
          f"{'ngspice s':>9s} {'sweeps':>6s} {'points':>6s} {'parts':>5s} {'spice/CLI':>9s}  "
          f"goals: CLI<={GOAL_S}s, <={GOAL_STARTUP_RATIO}x ref, >={GOAL_SPICE_RATIO:g}x")
    summary = {"time": [], "startup": [], "spice": []}
    for name in names:
        spec = SCENARIOS / f"{name}.toml"
        req = load_spec(spec)
        best, one_core, result = math.inf, math.inf, None
        for _ in range(max(1, args.repeat)):
            t0 = time.perf_counter()
            result = plan(req)
            best = min(best, time.perf_counter() - t0)
            with _workers("1"):
                t0 = time.perf_counter()
                plan(req)
                one_core = min(one_core, time.perf_counter() - t0)
        command = [sys.executable, "-m", "bandwright", "plan", str(spec), "--json"]
        with tempfile.TemporaryDirectory() as empty:
            cold = _wall(command, env=_user_env(BANDWRIGHT_CACHE=empty))
        cli = min(_wall(command) for _ in range(max(1, args.repeat)))
        ok_time, ok_start = cli <= GOAL_S, cli / startup <= GOAL_STARTUP_RATIO
        summary["time"].append(ok_time)
        summary["startup"].append(ok_start)
        sp_txt = f"{'-':>9s} {'-':>6s} {'-':>6s} {'-':>5s} {'-':>9s}"
        verdict = f"{_met(ok_time)}, {_met(ok_start)}"
        deck = plan_deck(result) if spice else None
        if deck is not None:
            grid = response_grid(result.requirement)
            spreads = resolve_spreads(result.requirement)
            with tempfile.TemporaryDirectory() as tmp:
                wall, n_parts, sweeps, points = run_spice_sweeps(
                    deck, grid, spreads.resistor_pct, spreads.capacitor_pct, boards, Path(tmp))
            if sweeps != boards or points != boards * grid.size:
                print(f"  {name}: ngspice completed {sweeps} of {boards} sweeps, {points} "
                      f"points (expected {boards * grid.size})")
            scaled = wall * SPICE_BOARDS / sweeps if sweeps else float("nan")
            ratio = scaled / cli
            summary["spice"].append(ratio >= GOAL_SPICE_RATIO)
            sp_txt = (f"{scaled:9.2f} {sweeps:6d} {points // max(sweeps, 1):6d} {n_parts:5d} "
                      f"{ratio:8.1f}x")
            verdict += f", {_met(ratio >= GOAL_SPICE_RATIO)}"
        elif spice:
            verdict += ", no chain"
        print(f"{name:26s} {best:6.2f} {one_core:6.2f} {cold:6.2f} {cli:6.2f} {cli / startup:6.2f}x "
              f"{sp_txt}  {verdict}")
    for key, text in (("time", f"CLI plan within {GOAL_S} s"),
                      ("startup", f"CLI plan within {GOAL_STARTUP_RATIO}x '{REFERENCE}'"),
                      ("spice", f"CLI plan >= {GOAL_SPICE_RATIO:g}x faster than ngspice's "
                                f"{SPICE_BOARDS} sweeps")):
        got = summary[key]
        if got:
            print(f"goal: {text}: met for {sum(got)} of {len(got)} scenarios")


if __name__ == "__main__":
    main()
