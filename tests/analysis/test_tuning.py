"""The tuning plan and the tuned Monte Carlo, on small chains (no planner, no ngspice).

Outside references: the Tow-Thomas design equations (Tow, Proc. IEEE 56, 1968 [mem];
references.md "Topology facts": w0^2 = 1/(R2 R4 C1 C2), w0/Q = 1/(RQ C1), H(f0) = -RQ/Rin),
the equal-capacitor multiple-feedback equations (references.md: R1a || R1b = R2/(4Q^2),
R1a = R2/(2|H0|)), the 1-2-5 trimmer values (common practice), and the nodal solver's
response (``circuits.nodal.ac_solve``, an independent path from the polynomial figures the
solve uses) for the tuned boards.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from bandwright.analysis.montecarlo.sampling import Spreads
from bandwright.analysis.montecarlo.tuned import tune_boards, tuned_monte_carlo, tuning_for
from bandwright.analysis.montecarlo.run import monte_carlo
from bandwright.analysis.tuning import (TRIMMER_RESOLUTION, plan_from_trims, plan_tuning,
                                        trimmer_values)
from bandwright.chain.graph import build_chain
from bandwright.circuits import mfb_bandpass, tow_thomas
from bandwright.circuits.nodal import ac_solve, passive_names
from bandwright.inputs.requirement import Tuning

from mc_support import requirement_around, stage_of

SPREADS = Spreads(resistor_pct=1.0, capacitor_pct=5.0, gbw_spread_pct=20.0,
                  distribution="uniform")


@pytest.mark.parametrize("need, value", [(80.0, 100.0), (100.0, 100.0), (101.0, 200.0),
                                         (350.0, 500.0), (501.0, 1000.0), (1.5e4, 2e4),
                                         (0.3, 0.5)])
def test_trimmer_values_follow_the_1_2_5_decades(need, value):
    """Trimmers come in 100, 200, 500, 1k, ... (common practice): the smallest at or above."""
    assert trimmer_values(need) == value


def _tow_thomas_chain():
    return build_chain([stage_of(tow_thomas, 1, 10e3, 40.0, 4.0)], source_ohms=0.0)


def test_tow_thomas_tunes_f0_then_q_then_gain_with_independent_parts():
    """Tow-Thomas: f0 by a part of the loop (w0^2 = 1/(R2 R4 C1 C2), with the inverter
    R5/R6), then Q by RQ alone (w0/Q = 1/(RQ C1)), then the gain by Rin alone
    (H(f0) = -RQ/Rin) -- each later part leaving the earlier figures untouched."""
    chain = _tow_thomas_chain()
    plan = plan_tuning(chain, SPREADS, resistor_series="E96")
    got = [(s.adjusts, s.trims) for s in plan.steps]
    assert [a for a, _ in got] == ["f0", "q", "gain"]
    assert got[0][1] in {"R2", "R4", "R5", "R6"}
    assert got[1][1] == "RQ"
    assert got[2][1] == "Rin"
    # f0 goes as R^-1/2 for the loop parts; Rin moves the gain as 1/R. With finite GBW
    # (e = f0/GBW = 2e-3) the built Q is Q/(1 - 4 Q e) (Thomas, IEEE Trans. CT-18, 1971
    # [mem]; references.md), so RQ moves it by d ln Q_a / d ln Q = 1/(1 - 4 Q e) = 1.47.
    assert plan.steps[0].sensitivity == pytest.approx(-0.5, abs=0.02)
    assert plan.steps[1].sensitivity == pytest.approx(1 / (1 - 4 * 40.0 * 10e3 / 5e6),
                                                      rel=0.01)
    assert plan.steps[2].sensitivity == pytest.approx(-1.0, abs=0.02)


def test_multiple_feedback_tunes_f0_by_the_divider_and_gain_by_the_input_resistor():
    """Equal-C multiple-feedback (Q 8, gain 4): the divider R1b sets f0 (and Q) but not the
    gain R2/(2 R1a); R1a sets the gain and, being 31 times R1b here (R1b = R2/(4Q^2 - 2H0)),
    moves f0 by only R1b/(R1a + R1b)/2 = 1.6 % as much. No resistor sets Q without moving
    f0 back (Q and f0 both follow R2 and R1a || R1b), so Q is named untrimmable."""
    chain = build_chain([stage_of(mfb_bandpass, 1, 10e3, 8.0, 4.0)], source_ohms=0.0)
    plan = plan_tuning(chain, SPREADS, resistor_series="E96")
    assert [(s.adjusts, s.trims) for s in plan.steps] == [("f0", "R1b"), ("gain", "R1a")]
    assert any(": q" in u for u in plan.untrimmable)


def test_trim_range_covers_the_worst_case_spread_and_no_trimmer_exceeds_its_fixed_part():
    """Each trim spans at least 1.5 x the worst-case spread (sum |S| t) either side of the
    designed value, and the trimmer is at most its fixed part."""
    chain = _tow_thomas_chain()
    plan = plan_tuning(chain, SPREADS, resistor_series="E96")
    for s in plan.steps:
        lo, hi = s.span_rel
        assert lo < 0 < hi
        assert s.trimmer_ohms <= s.fixed_ohms
        assert s.fixed_ohms <= s.design_ohms <= s.fixed_ohms + s.trimmer_ohms
        # The f0 spread: C1, C2 at 5 % and S = -1/2 each, R at 1 % -> at least 5 % of f0,
        # i.e. 10 % of a part with S = -1/2.
        if s.adjusts == "f0":
            assert min(-lo, hi) >= 0.10


def test_tuned_boards_reach_their_readings_in_the_nodal_solver():
    """After tune_boards, every board's stage peaks at the target f0 (the nodal solver's
    |H| on a fine grid, an independent path from the pole figures the solve uses) to
    within the trimmer's resolution."""
    chain = _tow_thomas_chain()
    plan = plan_tuning(chain, SPREADS, resistor_series="E96")
    st = chain.stages[0]
    names = passive_names(st.elements)
    rng = np.random.default_rng(3)
    nominal = np.array([e.value for e in st.elements if e.kind in ("R", "C")])
    fac = 1 + rng.uniform(-1, 1, (6, nominal.size)) * np.where(
        [n.startswith("R") for n in names], 0.01, 0.05)
    values = [nominal * fac]
    ff = {(1, s.trims): fac[:, names.index(s.trims)] for s in plan.steps}
    tuned, settings, short = tune_boards(chain, plan, values, [None], ff)
    assert not any(m.any() for m in short)
    f0 = plan.steps[0].target
    freq = np.linspace(0.97 * f0, 1.03 * f0, 6001)
    for row in tuned[0]:
        els = tuple(e if e.kind not in ("R", "C") else
                    type(e)(name=e.name, kind=e.kind, nets=e.nets,
                            value=float(row[names.index(e.name)]), model=e.model)
                    for e in st.elements)
        h = np.abs(ac_solve(els, freq).at("out"))
        f_peak = freq[np.argmax(h)]
        # One resolution step of the f0 trimmer moves f0 by |S| * step / R.
        s0 = plan.steps[0]
        tol = abs(s0.sensitivity) * TRIMMER_RESOLUTION * s0.trimmer_ohms / s0.fixed_ohms
        assert abs(f_peak / f0 - 1) <= tol + (freq[1] - freq[0]) / f0
        # Gain at the peak: the Rin step's reading.
        assert h.max() == pytest.approx(plan.steps[2].target, rel=2e-3)


def test_tuned_yield_beats_the_untrimmed_one_on_the_same_boards():
    """A Q 40 Tow-Thomas section with 5 % capacitors misses a narrow mask almost always;
    tuned, nearly every board passes (the plan's trims cover the spread)."""
    chain = _tow_thomas_chain()
    req = requirement_around(chain, half_width_dec=0.004, loss_margin_db=0.5,
                             gain_tolerance_db=0.5,
                             tolerance={"resistor_pct": 1.0, "capacitor_pct": 5.0,
                                        "samples": 300})
    untrimmed = monte_carlo(chain, req, with_sensitivities=False)
    assert untrimmed.yield_fraction < 0.2
    t = tuning_for(chain, req, untrimmed)
    assert t is not None and t.yield_untrimmed == untrimmed.yield_fraction
    assert t.tuned.yield_fraction > 0.95
    assert t.tuned.beyond_range == 0


def test_tuning_disabled_and_given_trims():
    """[tuning] enabled = false forbids a plan; trims named in a chain file are ordered f0,
    Q, gain by their sensitivities whatever order they were written in."""
    from dataclasses import replace
    chain = _tow_thomas_chain()
    req = requirement_around(chain, half_width_dec=0.004,
                             tolerance={"capacitor_pct": 5.0, "samples": 50})
    untrimmed = monte_carlo(chain, req, with_sensitivities=False)
    off = replace(req, tuning=Tuning(enabled=False))
    assert tuning_for(chain, off, untrimmed) is None
    v = dict(chain.stages[0].components)
    given = plan_from_trims(chain, {1: {"Rin": (0.9 * v["Rin"], 0.2 * v["Rin"]),
                                        "RQ": (0.9 * v["RQ"], 0.2 * v["RQ"]),
                                        "R2": (0.85 * v["R2"], 0.3 * v["R2"])}})
    assert [(s.adjusts, s.trims) for s in given.steps] == [("f0", "R2"), ("q", "RQ"),
                                                          ("gain", "Rin")]
    res = tuned_monte_carlo(chain, req, given)
    assert math.isclose(res.yield_fraction, res.passed.mean())
