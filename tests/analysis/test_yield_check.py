"""The `yield` check record and its place in the planner (chosen design only)."""

from __future__ import annotations

from bandwright.advice.tolerance import plan_yield
from bandwright.analysis.montecarlo import monte_carlo
from bandwright.checks.yield_check import yield_checks
from bandwright.planner import Design, with_yield

from mc_support import mfb_chain, requirement_around


def test_pass_when_the_yield_reaches_the_target():
    chain = mfb_chain([(10e3, 2.0, 2.0)])
    req = requirement_around(chain, loss_margin_db=1.0, stop_margin_db=3.0,
                             tolerance={"resistor_pct": 0.1, "capacitor_pct": 1,
                                        "samples": 200, "min_yield": 0.9})
    (check,) = yield_checks(plan_yield(chain, req))
    assert check.id == "yield" and check.status == "pass"
    assert check.limit == 0.9 and check.value >= 0.9 and check.unit == "share"
    assert "of 200 boards" in check.message and "95 % interval" in check.message


def test_fail_names_reasons_drivers_and_the_offer():
    chain = mfb_chain([(10e3, 4.0, 2.0)])
    req = requirement_around(chain, loss_margin_db=0.5,
                             tolerance={"resistor_pct": 1, "capacitor_pct": 10,
                                        "gbw_spread_pct": 0, "samples": 400,
                                        "min_yield": 0.9})
    result = plan_yield(chain, req)
    (check,) = yield_checks(result)
    assert check.status == "fail" and check.value < 0.9
    assert "failing: passband" in check.message
    assert "decided most by C" in check.message
    assert "tighter parts: " in check.message and result.offer.message in check.message


def test_nominal_failure_is_said_plainly():
    chain = mfb_chain([(10e3, 4.0, 2.0)])
    req = requirement_around(chain, loss_margin_db=-0.2, tolerance={"samples": 50})
    (check,) = yield_checks(monte_carlo(chain, req))
    assert check.status == "fail" and "nominal parts already" in check.message


def test_with_yield_adds_the_check_and_the_result():
    chain = mfb_chain([(10e3, 2.0, 2.0)])
    req = requirement_around(chain, tolerance={"samples": 100})
    d = Design(candidate=None, ordering=None, assignments=(), chain=chain, analyses=None,
               checks=())
    seen = []
    got = with_yield(d, req, progress=lambda *a: seen.append(a))
    assert got.yield_result is not None and got.yield_result.samples == 100
    assert [c.id for c in got.checks] == ["yield"]
    assert seen[-1] == ("yield", 100, 100)
    unbuilt = Design(candidate=None, ordering=None, assignments=(), chain=None, analyses=None,
                     checks=())
    assert with_yield(unbuilt, req) is unbuilt


def test_json_and_terminal_render_the_result():
    """Renderers only: the JSON object is strict JSON (no NaN) and carries the figures;
    the terminal paragraph names the yield and the deciding parts."""
    import io
    import json

    from rich.console import Console

    from bandwright.report.json_out import dumps, sensitivities_dict, yield_dict
    from bandwright.report.terminal import _yield

    chain = mfb_chain([(10e3, 4.0, 2.0), (11e3, 3.0, 1.0)])
    req = requirement_around(chain, loss_margin_db=0.5,
                             tolerance={"capacitor_pct": 5, "samples": 300, "min_yield": 0.9})
    y = plan_yield(chain, req)
    doc = json.loads(dumps({"yield": yield_dict(y),
                            "sensitivities": sensitivities_dict(y.sensitivities)}))
    yj = doc["yield"]
    assert yj["yield"] == y.yield_fraction and yj["samples"] == 300 and yj["seed"] == 1
    assert yj["interval"] == list(y.interval) and yj["confidence"] == 0.95
    assert len(yj["envelope"]["gain_db"]) == 3
    assert len(yj["envelope"]["gain_db"][1]) == len(yj["envelope"]["freq_hz"])
    assert yj["top_parts"][0]["part"] == y.drivers[0].part
    assert [s["stage"] for s in doc["sensitivities"]] == [1, 2]
    out = io.StringIO()
    _yield(y, Console(file=out, width=100))
    text = out.getvalue()
    assert "Yield" in text and f"{100 * y.yield_fraction:.1f} %" in text
    assert y.drivers[0].part in text
