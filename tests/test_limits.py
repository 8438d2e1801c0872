"""Every documented limit: a value at the limit is accepted (and, where a plan once broke
there, planned and written without an exception), a value just beyond it is refused with
the key named.

The limits are those docs/user-guide.md ("Plausible ranges", "Sizes") states and
``inputs/loader.py`` / ``inputs/chain_file.py`` enforce. "Just beyond" is one part in 10^6
past the limit (or the next whole number), well outside float rounding.
"""

from __future__ import annotations

import copy
import json

import pytest

from bandwright.errors import SpecError
from bandwright.inputs import spec_from_dict
from bandwright.inputs.chain_file import MAX_STAGES, load_chain
from bandwright.inputs.loader import (AMPLIFIER_RANGES, FREQ_RANGE_HZ, MAX_SAMPLES, MAX_TONES,
                                      MAX_VOLTS, MIN_VPK, TEMPERATURE_RANGE_C)
from bandwright.inputs.reader import MAX_INPUT_BYTES, read_toml
from bandwright.planner import plan
from bandwright.report.files import _files
from bandwright.report.json_out import dumps, plan_to_dict

from trust_support import non_finite_paths

F_LO, F_HI = FREQ_RANGE_HZ
T_LO, T_HI = TEMPERATURE_RANGE_C
BASE = {
    "passband": {"center_hz": 1000.0, "bandwidth_hz": 200.0},
    "stopband": [{"freq_hz": 500.0, "min_loss_db": 20.0}],
    "design": {"family": "butterworth"},
    "input": {"max_vpk": 0.1},
    "tolerance": {"samples": 10},
}


def _doc(**patch) -> dict:
    """BASE with dotted keys set ("input.max_vpk"); a value of None removes the key."""
    doc = copy.deepcopy(BASE)
    for dotted, value in patch.items():
        *tables, key = dotted.split("__")
        t = doc
        for name in tables:
            t = t.setdefault(name, {})
        if value is None:
            t.pop(key, None)
        else:
            t[key] = value
    return doc


def _up(x: float) -> float:
    return x * (1 + 1e-6) if x > 0 else x + 1e-6 if x == 0 else x * (1 - 1e-6)


def _down(x: float) -> float:
    return x * (1 - 1e-6) if x > 0 else x - 1e-6 if x == 0 else x * (1 + 1e-6)


def _edges(lo_hz: float, hi_hz: float) -> dict:
    """A passband given by its edges, with the stopband point left out (order given)."""
    return {"passband__center_hz": None, "passband__bandwidth_hz": None,
            "passband__low_hz": lo_hz, "passband__high_hz": hi_hz, "stopband": [],
            "design__order": 1}


def _tones(n: int, vpk: float = 0.01, freq_hz: float = 5000.0) -> list[dict]:
    return [{"freq_hz": freq_hz + i, "vpk": vpk} for i in range(n)]


# (name, patch accepted at the limit, patch refused just beyond, the key the refusal names)
CASES = [
    ("low_hz low", _edges(F_LO, 2 * F_LO), _edges(_down(F_LO), 2 * F_LO), "passband.low_hz"),
    ("high_hz high", _edges(F_HI / 2, F_HI), _edges(F_HI / 2, _up(F_HI)), "passband.high_hz"),
    ("max_loss_db high", {"passband__max_loss_db": 40.0, "stopband": [
        {"freq_hz": 500.0, "min_loss_db": 50.0}]},
     {"passband__max_loss_db": _up(40.0)}, "passband.max_loss_db"),
    ("gain_db low", {"passband__gain_db": -60.0}, {"passband__gain_db": _down(-60.0)},
     "passband.gain_db"),
    ("gain_db high", {"passband__gain_db": 120.0}, {"passband__gain_db": _up(120.0)},
     "passband.gain_db"),
    ("gain_tolerance_db high", {"passband__gain_tolerance_db": 20.0},
     {"passband__gain_tolerance_db": _up(20.0)}, "passband.gain_tolerance_db"),
    ("min_loss_db high", {"stopband": [{"freq_hz": 500.0, "min_loss_db": 300.0}]},
     {"stopband": [{"freq_hz": 500.0, "min_loss_db": _up(300.0)}]},
     "stopband[0].min_loss_db"),
    ("stop freq low", {"stopband": [{"freq_hz": F_LO, "min_loss_db": 20.0}]},
     {"stopband": [{"freq_hz": _down(F_LO), "min_loss_db": 20.0}]}, "stopband[0].freq_hz"),
    ("order low", {"design__order": 1}, {"design__order": 0}, "design.order"),
    ("order high", {"design__order": 20}, {"design__order": 21}, "design.order"),
    ("max_vpk low", {"input__max_vpk": MIN_VPK}, {"input__max_vpk": _down(MIN_VPK)},
     "input.max_vpk"),
    ("max_vpk high", {"input__max_vpk": MAX_VOLTS}, {"input__max_vpk": _up(MAX_VOLTS)},
     "input.max_vpk"),
    ("source_ohms low", {"input__source_ohms": 0.0}, {"input__source_ohms": -1e-9},
     "input.source_ohms"),
    ("source_ohms high", {"input__source_ohms": 1e12}, {"input__source_ohms": _up(1e12)},
     "input.source_ohms"),
    ("tone vpk low", {"input__tone": _tones(1, 0.0)}, {"input__tone": _tones(1, -1e-9)},
     "input.tone[0].vpk"),
    ("tone vpk high", {"input__tone": _tones(1, MAX_VOLTS)},
     {"input__tone": _tones(1, _up(MAX_VOLTS))}, "input.tone[0].vpk"),
    ("tone freq low", {"input__tone": _tones(1, freq_hz=F_LO)},
     {"input__tone": _tones(1, freq_hz=_down(F_LO))}, "input.tone[0].freq_hz"),
    ("tone freq high", {"input__tone": _tones(1, freq_hz=F_HI)},
     {"input__tone": _tones(1, freq_hz=_up(F_HI))}, "input.tone[0].freq_hz"),
    ("tone count", {"input__tone": _tones(MAX_TONES)}, {"input__tone": _tones(MAX_TONES + 1)},
     "input.tone"),
    ("rails low", {"supply__rails_v": [-MAX_VOLTS, 5.0]},
     {"supply__rails_v": [_down(-MAX_VOLTS), 5.0]}, "supply.rails_v[0]"),
    ("rails high", {"supply__rails_v": [-5.0, MAX_VOLTS]},
     {"supply__rails_v": [-5.0, _up(MAX_VOLTS)]}, "supply.rails_v[1]"),
    ("temperature low", {"environment__temperature_c": T_LO},
     {"environment__temperature_c": _down(T_LO)}, "environment.temperature_c"),
    ("temperature high", {"environment__temperature_c": T_HI},
     {"environment__temperature_c": _up(T_HI)}, "environment.temperature_c"),
    ("noise band low", {"noise__band_hz": [F_LO, 2000.0]},
     {"noise__band_hz": [_down(F_LO), 2000.0]}, "noise.band_hz[0]"),
    ("noise band high", {"noise__band_hz": [500.0, F_HI]},
     {"noise__band_hz": [500.0, _up(F_HI)]}, "noise.band_hz[1]"),
    ("noise budget high", {"noise__max_output_vrms": MAX_VOLTS},
     {"noise__max_output_vrms": _up(MAX_VOLTS)}, "noise.max_output_vrms"),
    ("resistor_pct high (open)", {"tolerance__resistor_pct": 49.999},
     {"tolerance__resistor_pct": 50.0}, "tolerance.resistor_pct"),
    ("gbw_spread_pct low", {"tolerance__gbw_spread_pct": 0.0},
     {"tolerance__gbw_spread_pct": -1e-6}, "tolerance.gbw_spread_pct"),
    ("samples low", {"tolerance__samples": 10}, {"tolerance__samples": 9}, "tolerance.samples"),
    ("samples high", {"tolerance__samples": MAX_SAMPLES},
     {"tolerance__samples": MAX_SAMPLES + 1}, "tolerance.samples"),
    ("seed low", {"tolerance__seed": 0}, {"tolerance__seed": -1}, "tolerance.seed"),
    ("seed high", {"tolerance__seed": 2**32 - 1}, {"tolerance__seed": 2**32},
     "tolerance.seed"),
    ("min_yield high", {"tolerance__min_yield": 1.0}, {"tolerance__min_yield": _up(1.0)},
     "tolerance.min_yield"),
] + [
    (f"{key} {end}", {f"amplifier__{key}": value},
     {f"amplifier__{key}": (_down if end == "low" else _up)(value)}, f"amplifier.{key}")
    for key, (lo, hi) in AMPLIFIER_RANGES.items() for end, value in (("low", lo), ("high", hi))
    # A GBW, slew rate or DC gain of 0 is refused as "must be > 0" (covered just below).
    if not (value == 0 and key in ("gbw_hz", "slew_v_per_us", "dc_gain_db"))
]


@pytest.mark.parametrize("name,at,beyond,key", CASES, ids=[c[0] for c in CASES])
def test_limit_is_accepted_and_just_beyond_is_refused(name, at, beyond, key):
    spec_from_dict(_doc(**at), path="limit.toml")
    with pytest.raises(SpecError) as err:
        spec_from_dict(_doc(**{**at, **beyond}), path="limit.toml")
    assert err.value.key == key, err.value


def test_narrowest_band_is_accepted_and_a_narrower_one_refused():
    """A band a millionth of its centre wide: at the limit (1 ppm, and a rounding step
    wider), and 1 % narrower."""
    for bw in (1.000001e-3, 1e-3):
        spec_from_dict(_doc(passband__bandwidth_hz=bw, stopband=[], design__order=1))
    with pytest.raises(SpecError, match="narrower"):
        spec_from_dict(_doc(passband__bandwidth_hz=0.99e-3, stopband=[], design__order=1))


def test_stage_count_limit(tmp_path):
    stage = ('[[stage]]\ntopology = "mfb_bandpass"\n'
             'parts = { R1a = "23.7k", R2 = "374k", C1 = "6.8n", C2 = "5.6n" }\n')
    for n, ok in ((MAX_STAGES, True), (MAX_STAGES + 1, False)):
        p = tmp_path / f"c{n}.toml"
        p.write_text("[input]\nmax_vpk = 0.001\n" + stage * n)
        if ok:
            assert len(load_chain(p)[2]) == n
        else:
            with pytest.raises(SpecError, match=f"at most {MAX_STAGES}") as err:
                load_chain(p)
            assert err.value.key == "stage"


@pytest.mark.parametrize("part,value,ok", [("R2", "1m", True), ("R2", "0.999999m", False),
                                           ("R2", "1T", True), ("R2", "1.000001T", False),
                                           ("C1", "1f", True), ("C1", "0.999999f", False),
                                           ("C1", "1", True), ("C1", "1.000001", False)])
def test_part_value_limits(part, value, ok, tmp_path):
    """Resistors 1 mΩ … 1 TΩ, capacitors 1 fF … 1 F (docs/user-guide.md)."""
    parts = {"R1a": "23.7k", "R2": "374k", "C1": "6.8n", "C2": "5.6n", part: value}
    text = "[[stage]]\ntopology = \"mfb_bandpass\"\nparts = { " + ", ".join(
        f'{k} = "{v}"' for k, v in parts.items()) + " }\n"
    p = tmp_path / "c.toml"
    p.write_text(text)
    if ok:
        load_chain(p)
    else:
        with pytest.raises(SpecError) as err:
            load_chain(p)
        assert err.value.key == f"stage[0].parts.{part}"


def test_input_file_size_limit(tmp_path):
    """MAX_INPUT_BYTES exactly is read; one byte more is refused before parsing."""
    text = "[passband]\ncenter_hz = 1000\n"
    pad = "#" * (MAX_INPUT_BYTES - len(text) - 1) + "\n"
    p = tmp_path / "s.toml"
    p.write_text(text + pad)
    assert p.stat().st_size == MAX_INPUT_BYTES
    assert read_toml(p) == {"passband": {"center_hz": 1000}}
    p.write_text(text + "#" + pad)
    with pytest.raises(SpecError, match="at most 1,048,576 bytes"):
        read_toml(p)


# Limits where a plan once raised (ZeroDivisionError, TypeError, ValueError while writing the
# deck): now planned, and its files (JSON, deck, chain file, BOM) written, all finite.
PLANNED = {
    "temperature low": {"environment__temperature_c": T_LO},
    "temperature high": {"environment__temperature_c": T_HI},
    "dc_gain_db low": {"amplifier__dc_gain_db": 20.0},
    "source_ohms high": {"input__source_ohms": 1e12},
    "max_vpk low": {"input__max_vpk": MIN_VPK},
    "max_vpk high": {"input__max_vpk": MAX_VOLTS},
    "gbw_hz low": {"amplifier__gbw_hz": 1.0},
}


@pytest.mark.parametrize("name", list(PLANNED), ids=list(PLANNED))
def test_plan_at_a_limit_runs_and_writes(name):
    req = spec_from_dict(_doc(**PLANNED[name]), path="limit.toml")
    p = plan(req)
    d = plan_to_dict(p)
    text = dumps(d)
    assert list(non_finite_paths(json.loads(text))) == []
    if p.chosen.chain is not None:
        files = _files(p.chosen.chain, req, text, "plan.json", "limit", planned=True)
        deck = files["chain.cir"].decode()
        temp = next(ln for ln in deck.splitlines() if ln.startswith(".temp "))
        assert float(temp.split()[1]) == req.environment.temperature_c
    if name in ("dc_gain_db low", "source_ohms high", "gbw_hz low"):
        return  # a chain that cannot work: failing checks, not an exception
    assert p.chosen.chain is not None
