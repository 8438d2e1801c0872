"""Properties (hypothesis) of the loaders and the planner.

* The requirement loader and the audit loader raise nothing but SpecError, whatever nested
  TOML-like document they get (random structures over the real key names, and valid
  documents with one value or key replaced).
* Audits of random part values of every topology end in a result or a SpecError.
* A plan whose `mask` checks pass really meets the mask: the built chain, flattened into one
  element list and solved with ``circuits.nodal.ac_solve`` (source resistance included,
  ``trust_support.recompute_mask``), meets it at the mask points — and, between them, on a
  grid 20 times denser to within 0.01 dB.

The examples are derandomised so that CI runs the same ones every time;
``BANDWRIGHT_SLOW_TESTS=1`` runs ten times as many, drawn afresh.
"""

from __future__ import annotations

import math
import os
from unittest import mock

import pytest
import numpy as np
from hypothesis import HealthCheck, given, settings, strategies as st

from bandwright import audit as audit_module
from bandwright.inputs import chain_file as chain_file_module
from bandwright.circuits import TOPOLOGY_NAMES, topology
from bandwright.errors import SpecError
from bandwright.planner import plan
from bandwright.report.json_out import dumps, plan_to_dict
from bandwright.inputs import spec_from_dict
from bandwright.inputs.loader import (AMPLIFIER_KEYS, AMPLIFIER_RANGES, FREQ_RANGE_HZ,
                                      MAX_SAMPLES, MAX_VOLTS, MIN_VPK, TEMPERATURE_RANGE_C,
                                      TOLERANCE_KEYS)

from trust_support import missing_figures, non_finite_paths, recompute_mask

SLOW = os.environ.get("BANDWRIGHT_SLOW_TESTS") == "1"
SCALE = 10 if SLOW else 1


def _settings(n: int, **kw) -> settings:
    return settings(max_examples=n * SCALE, deadline=None, derandomize=not SLOW,
                    suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large],
                    **kw)


KEYS = ["passband", "stopband", "design", "input", "supply", "amplifier", "environment",
        "noise", "tolerance", "stage", "center_hz", "bandwidth_hz", "low_hz", "high_hz",
        "max_loss_db", "gain_db", "gain_tolerance_db", "freq_hz", "min_loss_db", "family",
        "order", "resistor_series", "capacitor_series", "max_vpk", "source_ohms", "tone",
        "vpk", "rails_v", "archetype", "temperature_c", "band_hz", "max_output_vrms",
        "topology", "parts", *AMPLIFIER_KEYS, *TOLERANCE_KEYS]

# Every documented range end, and a step beyond each (docs/user-guide.md, inputs/loader.py).
_ENDS = sorted({v for lo_hi in AMPLIFIER_RANGES.values() for v in lo_hi}
               | {*FREQ_RANGE_HZ, MAX_VOLTS, -MAX_VOLTS, MIN_VPK, *TEMPERATURE_RANGE_C, 1e12,
                  0.0, 10, 20, 40, 50, 100, 300, MAX_SAMPLES, 2**32 - 1})
LIMIT_VALUES = sorted({v for e in _ENDS for v in (e, e * (1 + 1e-6), e * (1 - 1e-6), e - 1,
                                                  e + 1)} | {5e-324, -273.15})

scalars = st.one_of(
    st.none(), st.booleans(), st.integers(min_value=-10**30, max_value=10**30),
    st.sampled_from(LIMIT_VALUES),
    st.floats(allow_nan=True, allow_infinity=True),
    st.text(max_size=12),
    st.sampled_from(["10kHz", "1k", "4k7", "-5k", "0", "1e30", "butterworth", "chebyshev",
                     "E96", "general", "fast", "mfb_bandpass", "nan", "", "uniform"]),
)
keys = st.one_of(st.sampled_from(KEYS), st.text(min_size=1, max_size=8))
documents = st.recursive(
    scalars,
    lambda children: st.one_of(st.lists(children, max_size=4),
                               st.dictionaries(keys, children, max_size=6)),
    max_leaves=30,
)
top_documents = st.dictionaries(keys, documents, max_size=8)

VALID = {
    "passband": {"center_hz": 1000.0, "bandwidth_hz": 100.0, "max_loss_db": 1.0,
                 "gain_db": 20.0},
    "stopband": [{"freq_hz": 700.0, "min_loss_db": 30.0}],
    "design": {"family": "chebyshev", "order": 3, "resistor_series": "E96"},
    "input": {"max_vpk": 0.1, "source_ohms": 50.0, "tone": [{"freq_hz": 50.0, "vpk": 1.0}]},
    "supply": {"rails_v": [-5.0, 5.0]},
    "amplifier": {"archetype": "general", "gbw_hz": 3e6},
    "environment": {"temperature_c": 25.0},
    "noise": {"band_hz": [900.0, 1100.0], "max_output_vrms": 1e-3},
    "tolerance": {"samples": 100, "seed": 3, "min_yield": 0.9},
}


def _paths(doc, prefix=()):
    """Every (path, value) in a nested document, tables and arrays included."""
    yield prefix, doc
    if isinstance(doc, dict):
        for k, v in doc.items():
            yield from _paths(v, prefix + (k,))
    elif isinstance(doc, list):
        for i, v in enumerate(doc):
            yield from _paths(v, prefix + (i,))


def _replace(doc, path, value):
    if not path:
        return value
    head, rest = path[0], path[1:]
    if isinstance(doc, dict):
        return {**doc, head: _replace(doc[head], rest, value)}
    out = list(doc)
    out[head] = _replace(doc[head], rest, value)
    return out


@st.composite
def mutated(draw, base=VALID):
    """A valid document with one value replaced, or one key renamed, or one key removed."""
    paths = [p for p, _ in _paths(base) if p]
    path = draw(st.sampled_from(paths))
    how = draw(st.sampled_from(["value", "rename", "drop"]))
    if how == "value" or isinstance(path[-1], int):
        return _replace(base, path, draw(documents))
    parent = path[:-1]
    table = dict(next(v for p, v in _paths(base) if p == parent))
    value = table.pop(path[-1])
    if how == "rename":
        table[draw(keys)] = value
    return _replace(base, parent, table)


def _load_only_spec_errors(doc) -> None:
    try:
        spec_from_dict(doc, path="prop.toml")
    except SpecError as exc:
        assert exc.path == "prop.toml" and str(exc)


def test_valid_base_document_loads():
    spec_from_dict(VALID)


@_settings(300)
@given(top_documents)
@pytest.mark.slow
def test_loader_raises_only_spec_error_on_random_documents(doc):
    _load_only_spec_errors(doc)


@_settings(300)
@given(mutated())
def test_loader_raises_only_spec_error_on_mutated_documents(doc):
    _load_only_spec_errors(doc)


CHAIN = {
    "input": {"max_vpk": 0.1},
    "stage": [{"topology": "sallen_key_highpass",
               "parts": {"C1": "10n", "C2": "10n", "R1": "11.3k", "R2": "45.3k"}},
              {"topology": "mfb_lowpass",
               "parts": {"R1": "10k", "R2": "10k", "R3": "4k99", "C1": "10n", "C2": "1n"}}],
}


def _load_chain_only_spec_errors(doc) -> None:
    with mock.patch.object(chain_file_module, "read_toml", lambda path: doc):
        try:
            chain_file_module.load_chain("prop-chain.toml")
        except SpecError as exc:
            assert exc.path == "prop-chain.toml"


@_settings(150)
@given(st.one_of(top_documents, mutated(CHAIN)))
def test_chain_loader_raises_only_spec_error(doc):
    _load_chain_only_spec_errors(doc)


def _part_values(name: str):
    """Plausible-range part values, log-uniform, as numbers or engineering text."""
    lo, hi = (1.0, 1e8) if name.startswith("R") else (1e-13, 1e-3)
    return st.floats(min_value=math.log10(lo), max_value=math.log10(hi)).map(lambda x: 10 ** x)


@st.composite
def random_stage(draw):
    name = draw(st.sampled_from(TOPOLOGY_NAMES))
    topo = topology(name)
    optional = set(topo.OPTIONAL_PARTS)
    parts = {}
    for p in topo.PARTS:
        if p in optional and draw(st.booleans()):
            continue
        parts[p] = draw(_part_values(p))
    return {"topology": name, "parts": parts}


@_settings(40)
@given(st.lists(random_stage(), min_size=1, max_size=3))
def test_audit_of_random_parts_ends_in_a_result_or_a_spec_error(stages):
    """Any parts inside the plausible ranges, in any topology: the audit either runs (every
    figure finite or reported as null by design) or says these parts make no working
    circuit — never another exception."""
    doc = {"input": {"max_vpk": 0.1}, "stage": stages}
    with mock.patch.object(chain_file_module, "read_toml", lambda path: doc):
        try:
            a = audit_module.audit("prop-audit.toml")
        except SpecError as exc:
            assert exc.key.startswith("stage[") or exc.key.startswith("supply"), exc
            return
    from bandwright.report.json_out import audit_to_dict
    d = audit_to_dict(a)
    dumps(d)
    assert list(non_finite_paths(d)) == []


@st.composite
def requirements(draw):
    """Valid requirements a chain can plausibly meet: 10 Hz … 100 kHz, fractional bandwidth
    0.03 … 3, at most six sections, an op-amp class fast enough for the centre."""
    f0 = 10 ** draw(st.floats(1.0, 5.0))
    fbw = 10 ** draw(st.floats(math.log10(0.03), math.log10(3.0)))
    family = draw(st.sampled_from(["butterworth", "chebyshev"]))
    loss = draw(st.sampled_from([0.25, 0.5, 1.0, 3.0103]))
    doc = {"passband": {"center_hz": f0, "bandwidth_hz": f0 * fbw, "max_loss_db": loss,
                        "gain_db": draw(st.floats(-6.0, 30.0))},
           "design": {"family": family},
           "input": {"max_vpk": draw(st.sampled_from([0.01, 0.1, 0.5])),
                     "source_ohms": draw(st.sampled_from([0.0, 50.0, 1000.0]))},
           "amplifier": {"archetype": "general" if f0 < 2e3 else
                         ("wideband" if f0 < 3e4 else "fast")},
           "tolerance": {"samples": 10}}
    if draw(st.booleans()):
        doc["design"]["order"] = draw(st.integers(1, 3 if fbw < 0.2 else 6))
    else:
        # A stopband point between 1.3 and 3 band-widths beyond an edge, needing 10–40 dB.
        pb_low = (math.sqrt((f0 * fbw) ** 2 + 4 * f0 * f0) - f0 * fbw) / 2
        upper = draw(st.booleans())
        k = draw(st.floats(1.3, 3.0))
        f = pb_low + f0 * fbw * (1 + k) if upper else pb_low / (1 + k * fbw)
        doc["stopband"] = [{"freq_hz": f, "min_loss_db": draw(st.floats(10.0, 40.0))}]
    return doc


@pytest.mark.slow
@_settings(10)
@given(requirements())
def test_plan_whose_mask_passes_meets_it_when_recomputed(doc):
    req = spec_from_dict(doc, path="prop-plan")
    p = plan(req)
    d = plan_to_dict(p)
    dumps(d)
    assert list(non_finite_paths(d)) == [] and missing_figures(d) == []
    if not p.chosen.buildable:
        assert any(c.status == "fail" for c in p.checks)
        return
    masks = [c for c in p.checks if c.id == "mask"]
    again = recompute_mask(p.chosen.chain, req)
    assert abs(again.worst_loss_db - (req.passband.gain_db - masks[0].value)) < 1e-6
    assert np.allclose(again.stop_loss_db, [c.value for c in masks[2:]], atol=1e-6)
    if all(c.status == "pass" for c in masks):
        assert again.meets(req)
        pb = req.passband
        dense = recompute_mask(p.chosen.chain, req,
                               passband_hz=np.geomspace(pb.low_hz, pb.high_hz, 2001))
        assert dense.worst_loss_db <= pb.max_loss_db + 0.01
        assert abs(dense.peak_error_db) <= pb.gain_tolerance_db + 0.01


def _in_range(lo: float, hi: float, *, log: bool = False):
    """Values of a documented range, its two ends drawn often."""
    inner = (st.floats(math.log10(lo), math.log10(hi)).map(lambda x: 10 ** x) if log
             else st.floats(lo, hi))
    return st.one_of(st.sampled_from([lo, hi]), inner)


@st.composite
def requirements_at_limits(draw):
    """A plannable band (1 kHz, order 1 or 2) with the input, supply, op-amp and environment
    figures drawn from their whole documented ranges, ends included."""
    doc = {"passband": {"center_hz": 1000.0, "bandwidth_hz": 200.0},
           "design": {"family": "butterworth", "order": draw(st.integers(1, 2))},
           "input": {"max_vpk": draw(_in_range(MIN_VPK, MAX_VOLTS, log=True)),
                     "source_ohms": draw(st.one_of(st.just(0.0), _in_range(1.0, 1e12, log=True)))},
           "supply": {"rails_v": [-draw(_in_range(1.0, MAX_VOLTS, log=True)),
                                  draw(_in_range(1.0, MAX_VOLTS, log=True))]},
           "environment": {"temperature_c": draw(_in_range(*TEMPERATURE_RANGE_C))},
           "tolerance": {"samples": 10}}
    amp = {}
    for key in draw(st.lists(st.sampled_from(sorted(AMPLIFIER_RANGES)), max_size=3,
                             unique=True)):
        lo, hi = AMPLIFIER_RANGES[key]
        amp[key] = draw(st.one_of(st.sampled_from([lo, hi]), st.floats(lo, hi)))
    if amp:
        doc["amplifier"] = amp
    tones = draw(st.lists(st.tuples(_in_range(*FREQ_RANGE_HZ, log=True),
                                    _in_range(0.0, MAX_VOLTS)), max_size=2))
    if tones:
        doc["input"]["tone"] = [{"freq_hz": f, "vpk": v} for f, v in tones
                                if not 900 <= f <= 1100]
    return doc


@_settings(15)
@given(requirements_at_limits())
def test_plan_at_documented_limits_ends_in_a_result_or_a_spec_error(doc):
    """Anywhere inside the documented ranges, ends included, a plan runs to a result with
    finite figures (failing checks allowed) or refuses in one SpecError naming a key —
    never another exception (the issue's ZeroDivisionError, TypeError, ValueError)."""
    try:
        req = spec_from_dict(doc, path="limits.toml")
        p = plan(req)
    except SpecError as exc:
        assert exc.path == "limits.toml" and exc.key, exc
        return
    d = plan_to_dict(p)
    dumps(d)
    assert list(non_finite_paths(d)) == []
