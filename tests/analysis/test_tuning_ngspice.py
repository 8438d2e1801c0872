"""ngspice as the bench for the tuning plan of scenarios/tone_detector.toml.

Boards are drawn at the stated tolerances (``sampling.sample_values``: parts and every
op-amp's GBW), written as one ngspice-39 deck with the trimmers of the plan's chain.cir
(each trimmed part a fixed resistor drawn at the resistor tolerance plus a trimmer), and
the written procedure is followed on the deck: each trimmer is bisected in ngspice until
its reading -- the peak of net_out/net_in, then the -3 dB width -- is reached. The tuned
boards are then read against the mask by hand (design.md "Meanings": every loss relative
to gain_db) from ngspice's response, and their pass rate must fall inside the interval
the tool's tuned Monte Carlo predicts. A second test holds each trim's range to ngspice at
both ends of travel for the worst-case parts.

Readings (common practice for a second-order bandpass): its magnitude peaks at the pole
frequency, and its half-power (-3 dB) width is f0/Q.
"""

from __future__ import annotations

import functools
import math
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest

from bandwright.analysis.montecarlo.run import wilson_interval
from bandwright.analysis.montecarlo.sampling import (resolve_spreads, sample_columns,
                                                     sample_values)
from bandwright.analysis.sensitivity import stage_sensitivity
from bandwright.chain.graph import build_chain, flatten
from bandwright.circuits.elements import Element
from bandwright.report.spice import spice_deck
from bandwright.report.tuning import trimmed_elements

from conftest import planned_scenario  # noqa: E402
from ngspice_runner import ngspice_available  # noqa: E402
from spice_tools import run_ngspice_ac_lin  # noqa: E402

pytestmark = pytest.mark.skipif(not ngspice_available(), reason="ngspice not installed")

SCENARIO = Path(__file__).resolve().parents[2] / "scenarios" / "tone_detector.toml"
BOARDS = 20
SEED = 11
BISECTIONS = 13          # travel / 8192: finer than the trimmer's own resolution
SWEEP = (9600.0, 10400.0, 1601)   # 0.5 Hz steps over every stage's tuning range


@functools.lru_cache(maxsize=None)
def tuned_plan():
    # The session's shared plan of the scenario (tests/conftest.py): load_spec(SCENARIO).
    p = planned_scenario(SCENARIO.stem)
    req = p.requirement
    assert p.chosen.tuning is not None
    return req, p.chosen.chain, p.chosen.tuning


def _board_chain(chain, cols, row):
    """The chain with one board's drawn values (parts and each op-amp's GBW)."""
    stages = []
    for st in chain.stages:
        vals = {c.part: v for c, v in zip(cols, row) if c.stage == st.position}
        els = []
        for e in st.elements:
            if e.kind == "opamp":
                els.append(replace(e, model=replace(e.model, gbw_hz=vals[f"{e.name} GBW"])))
            else:
                els.append(replace(e, value=vals[e.name]))
        stages.append(replace(st, elements=tuple(els)))
    return build_chain(stages, source_ohms=chain.source_ohms)


def _bench_deck(chain, tuning, rows, cols, settings):
    """One deck holding every board, each behind its own source resistance from the
    common net "in"; each trimmer set to `settings[b][name]`."""
    steps = tuning.plan.steps
    nominal = {(c.stage, c.part): c.nominal for c in cols}
    els = []
    for b, row in enumerate(rows):
        flat = trimmed_elements(flatten(_board_chain(chain, cols, row)), tuning.plan)
        fixed = {f"{s.trims}_s{s.stage}": s for s in steps}
        trimmers = {f"{s.part}_s{s.stage}" for s in steps}
        drawn = {(c.stage, c.part): v for c, v in zip(cols, row)}
        for e in flat:
            value = e.value
            if e.name in fixed:   # the fixed resistor carries the drawn tolerance
                s = fixed[e.name]
                value = s.fixed_ohms * drawn[(s.stage, s.trims)] / nominal[(s.stage, s.trims)]
            elif e.name in trimmers:
                value = max(settings[b][e.name], 1e-6)
            nets = tuple(n if n == "0" else f"{n}_b{b}" for n in e.nets)
            els.append(Element(name=f"{e.name}_b{b}", kind=e.kind, nets=nets, value=value,
                               model=e.model))
        els.append(Element(name=f"RS_b{b}", kind="R", nets=("in", f"in_b{b}"),
                           value=max(chain.source_ohms, 1e-3)))
    els.append(Element(name="RLOAD", kind="R", nets=("in", "out"), value=1e12))
    return spice_deck(tuple(els), source_ohms=0.0, temperature_c=25.0, title="tuning bench")


def _readings(freq, h):
    """Peak frequency (parabola through the three highest points of |H|^2) and -3 dB
    width (half-power crossings, linear interpolation) of each row of `h`."""
    p = np.abs(h) ** 2
    out = []
    for row in p:
        i = int(np.clip(np.argmax(row), 1, row.size - 2))
        y0, y1, y2 = row[i - 1:i + 2]
        df = freq[1] - freq[0]
        f_pk = freq[i] + 0.5 * df * (y0 - y2) / (y0 - 2 * y1 + y2)
        half = row.max() / 2
        lo = np.nonzero(row[:i] < half)[0]
        hi = np.nonzero(row[i:] < half)[0]
        if lo.size == 0 or hi.size == 0:
            out.append((f_pk, math.nan))
            continue
        a, c = lo[-1], i + hi[0]
        f_lo = np.interp(half, [row[a], row[a + 1]], [freq[a], freq[a + 1]])
        f_hi = np.interp(half, [row[c], row[c - 1]], [freq[c], freq[c - 1]])
        out.append((f_pk, f_hi - f_lo))
    return np.array(out)


def _measure(deck, tuning, n_boards, tmp_path, tag):
    nets = sorted({f"{n}_b{b}" for s in tuning.plan.steps for n in (s.net_in, s.net_out)
                   for b in range(n_boards) if n != "src"} | {"in"})
    (tmp_path / tag).mkdir()
    sw = run_ngspice_ac_lin(deck, *SWEEP[:2], SWEEP[2], nets, tmp_path / tag)
    read = {}
    for s in tuning.plan.steps:
        src = [sw["in"] if s.net_in == "src" else sw[f"{s.net_in}_b{b}"]
               for b in range(n_boards)]
        h = np.array([sw[f"{s.net_out}_b{b}"] / src[b] for b in range(n_boards)])
        r = _readings(sw["frequency"], h)
        read[(s.stage, s.adjusts)] = r[:, 0] if s.adjusts == "f0" else r[:, 0] / r[:, 1]
    return read


def _bisect(chain, tuning, rows, cols, tmp_path):
    """Follow the procedure on the deck: f0 trimmers first, then Q, each bisected over its
    travel (the stages are read between their own nets, so they are set side by side)."""
    steps = tuning.plan.steps
    lo = [{f"{s.part}_s{s.stage}": 0.0 for s in steps} for _ in range(BOARDS)]
    hi = [{f"{s.part}_s{s.stage}": s.trimmer_ohms for s in steps} for _ in range(BOARDS)]
    settings = [{k: (lo[b][k] + hi[b][k]) / 2 for k in lo[b]} for b in range(BOARDS)]
    for figure in ("f0", "q", "gain"):
        mine = [s for s in steps if s.adjusts == figure]
        if not mine:
            continue
        for it in range(BISECTIONS):
            deck = _bench_deck(chain, tuning, rows, cols, settings)
            read = _measure(deck, tuning, BOARDS, tmp_path, f"{figure}{it}")
            for s in mine:
                name = f"{s.part}_s{s.stage}"
                for b in range(BOARDS):
                    # Too high a reading with S < 0 asks for more resistance.
                    if (read[(s.stage, figure)][b] - s.target) * s.sensitivity < 0:
                        lo[b][name] = settings[b][name]
                    else:
                        hi[b][name] = settings[b][name]
                    settings[b][name] = (lo[b][name] + hi[b][name]) / 2
    return settings


def _mask_pass(chain, tuning, rows, cols, settings, req, tmp_path):
    """Each tuned board against the mask, read by hand from ngspice's response."""
    deck = _bench_deck(chain, tuning, rows, cols, settings)
    pb = req.passband
    outs = [f"out_b{b}" for b in range(BOARDS)]
    (tmp_path / "pb").mkdir()
    (tmp_path / "sb").mkdir()
    band = run_ngspice_ac_lin(deck, pb.low_hz, pb.high_hz, 401, outs + ["in"], tmp_path / "pb")
    ok = np.ones(BOARDS, dtype=bool)
    for b in range(BOARDS):
        g = 20 * np.log10(np.abs(band[f"out_b{b}"] / band["in"]))
        ok[b] &= (pb.gain_db - g.min() <= pb.max_loss_db) and \
            abs(g.max() - pb.gain_db) <= pb.gain_tolerance_db
    for k, sp in enumerate(req.stopband):
        d = tmp_path / "sb" / str(k)
        d.mkdir()
        pt = run_ngspice_ac_lin(deck, sp.freq_hz, sp.freq_hz, 1, outs + ["in"], d)
        for b in range(BOARDS):
            g = 20 * np.log10(np.abs(pt[f"out_b{b}"][0] / pt["in"][0]))
            ok[b] &= pb.gain_db - g >= sp.min_loss_db
    return ok


@pytest.mark.slow
def test_procedure_followed_in_ngspice_tunes_boards_at_the_predicted_rate(tmp_path):
    """20 boards drawn at the scenario's tolerances, tuned in ngspice by bisecting each
    trimmer to its written reading: the share that meets the mask falls inside the 95 %
    Wilson interval of the tool's tuned yield (and well above the untrimmed yield)."""
    req, chain, tuning = tuned_plan()
    cols = sample_columns(chain)
    rows = sample_values(chain, resolve_spreads(req), samples=BOARDS, seed=SEED)
    settings = _bisect(chain, tuning, rows, cols, tmp_path)
    # Every reading reached inside the travel: the tool predicts no board out of range.
    for s in tuning.plan.steps:
        name = f"{s.part}_s{s.stage}"
        got = np.array([st[name] for st in settings])
        assert np.all((got > 1e-3 * s.trimmer_ohms) & (got < (1 - 1e-3) * s.trimmer_ohms)), name
    ok = _mask_pass(chain, tuning, rows, cols, settings, req, tmp_path)
    rate = ok.mean()
    lo, hi = tuning.tuned.interval
    bench_lo, bench_hi = wilson_interval(int(ok.sum()), BOARDS)
    # The two intervals overlap: the bench's rate is what the tool predicts.
    assert bench_hi >= lo and bench_lo <= hi, (rate, tuning.tuned.interval)
    assert rate > tuning.yield_untrimmed + 0.5


@pytest.mark.slow
def test_each_trim_covers_its_target_for_worst_case_parts_in_ngspice(tmp_path):
    """For every step, boards with every part (and GBW) at the corner of its tolerance that
    moves the step's figure most up, and down: in ngspice, the reading with the trimmer at
    one end of its travel and at the other lies either side of the target."""
    req, chain, tuning = tuned_plan()
    sp = resolve_spreads(req)
    cols = sample_columns(chain)
    nominal = np.array([c.nominal for c in cols])
    tol = np.array([{"R": sp.resistor_pct, "C": sp.capacitor_pct,
                     "GBW": sp.gbw_spread_pct}[c.kind] / 100 for c in cols])
    sens = {st.position: stage_sensitivity(st) for st in chain.stages}
    steps = tuning.plan.steps
    corners = []
    for s in steps:
        ss = sens[s.stage]
        row = {"f0": ss.f0, "q": ss.q, "gain": ss.gain}[s.adjusts]
        for sign in (+1, -1):
            u = np.zeros(len(cols))
            for i, c in enumerate(cols):
                if c.stage != s.stage:
                    continue
                name = "GBW" if c.kind == "GBW" else c.part
                val = row[ss.parts.index(name)]
                if c.part in {t.trims for t in steps if t.stage == s.stage}:
                    continue   # trimmed parts: fixed resistors at nominal
                u[i] = sign * np.sign(val) if math.isfinite(val) else 0.0
            corners.append(nominal * (1 + u * tol))
    per_corner = [s for s in steps for _ in (1, 2)]
    ends = {}
    for end in (0.0, 1.0):
        settings = [{f"{t.part}_s{t.stage}": t.design_ohms - t.fixed_ohms for t in steps}
                    for _ in corners]
        for b, s in enumerate(per_corner):
            settings[b][f"{s.part}_s{s.stage}"] = end * s.trimmer_ohms
        deck = _bench_deck(chain, tuning, np.array(corners), cols, settings)
        ends[end] = _measure(deck, tuning, len(corners), tmp_path, f"end{end}")
    for b, s in enumerate(per_corner):
        a, z = ends[0.0][(s.stage, s.adjusts)][b], ends[1.0][(s.stage, s.adjusts)][b]
        assert min(a, z) < s.target < max(a, z), (s.part, s.stage, a, z, s.target)
