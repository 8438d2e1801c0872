"""Topology assignment by reasons, and the built (rounded, finite-GBW) result."""

from __future__ import annotations


import pytest

from bandwright.circuits.assign import assign
from bandwright.circuits.realize import figure_error, realize
from bandwright.circuits import mfb_bandpass
from bandwright.parts.catalogue import archetype
from bandwright.parts.eseries import is_member
from bandwright.sections.section import Section


def _opamps(a):
    return sum(1 for e in a.realization.elements if e.kind == "opamp")


@pytest.mark.parametrize("name", ["general", "wideband"])
def test_assignment_moves_to_more_opamps_as_q_rises(name):
    """Common practice: single-op-amp sections serve low Q; as Q rises the assignment moves
    to multi-op-amp topologies (the GBW a single-op-amp bandpass needs grows with Q²)."""
    model = archetype(name)
    counts = [_opamps(assign(Section("bandpass", 1000.0, q, 2.0), model))
              for q in (1.0, 5.0, 40.0)]
    assert counts[0] == 1
    assert counts == sorted(counts)
    assert counts[-1] >= 2


def test_assignment_moves_to_more_opamps_as_gbw_falls():
    """Same section, slower op-amp: at some point one op-amp is no longer enough (the
    multiple-feedback section needs 10 Q² f0 = 3.9 MHz here, circuits.rules)."""
    sec = Section("bandpass", 2000.0, 14.0, 4.0)
    counts = [_opamps(assign(sec, archetype(n))) for n in ("fast", "low-noise", "general")]
    assert counts == sorted(counts)
    assert counts[0] == 1 and counts[-1] >= 2


def test_sallen_key_bandpass_rejected_at_high_q():
    """Common practice: a positive-feedback section can oscillate at high Q — rejected, and
    the reason is kept."""
    a = assign(Section("bandpass", 1000.0, 25.0, 2.0), archetype("fast"))
    reasons = dict(a.rejected)
    assert "sallen_key_bandpass" in reasons
    assert a.realization.topology != "sallen_key_bandpass"


def test_every_rejection_has_a_reason():
    a = assign(Section("bandpass", 40_000.0, 16.0, 4.6), archetype("wideband"))
    assert a.realization is not None
    names = {n for n, _ in a.rejected} | {a.realization.topology}
    assert {"mfb_bandpass", "sallen_key_bandpass"} <= names
    assert all(r for _, r in a.rejected)
    assert "MHz" in dict(a.rejected)["mfb_bandpass"]  # the GBW figure that decides


@pytest.mark.parametrize("q,gbw", [(2.0, 3e6), (8.0, 50e6), (15.0, 200e6)])
def test_built_mfb_lands_near_target_with_series_parts(q, gbw):
    """Predistortion + series search: built f0 within 0.5 %, Q within 5 % (E96/E12), every
    part a member of its series (IEC 60063)."""
    from dataclasses import replace
    model = replace(archetype("fast"), gbw_hz=gbw)
    sec = Section("bandpass", 10_000.0, q, 3.0)
    r = realize(mfb_bandpass, sec, model, r_series="E96", c_series="E12")
    df, dq, dg = r.errors()
    assert abs(df) < 0.005 and abs(dq) < 0.05 and abs(dg) < 0.05
    for name, v in r.components:
        assert is_member(v, "E12" if name.startswith("C") else "E96"), (name, v)
    # The exact-valued predistorted design lands on the target with this op-amp.
    assert r.ideal.f0_hz == pytest.approx(sec.f0_hz, rel=1e-5)
    assert r.ideal.q == pytest.approx(sec.q, rel=1e-5)
    assert figure_error(r.built, sec) < 1e-3


def test_optional_natural_gain_members_as_the_protocol_documents():
    """``circuits.base.Topology``, "Optional members": a topology has at most one of
    ``natural_gain`` (callable of Q) and ``NATURAL_GAIN`` (a number); the bandpass ceilings
    are the published ones (MFB 2Q², Sallen-Key 3Q - 1, state-variable 2Q - 1: the
    modules' own docstrings name the sources), checked here at Q = 5."""
    from bandwright.circuits import TOPOLOGY_NAMES, topology
    from bandwright.circuits.assign import _natural_gain

    for name in TOPOLOGY_NAMES:
        topo = topology(name)
        has_fn, has_const = hasattr(topo, "natural_gain"), hasattr(topo, "NATURAL_GAIN")
        assert not (has_fn and has_const), name
        if has_fn:
            assert callable(topo.natural_gain), name
        if has_const:
            assert isinstance(topo.NATURAL_GAIN, float), name
    expected = {"mfb_bandpass": 50.0, "sallen_key_bandpass": 14.0, "state_variable": 9.0,
                "dual_amp_bandpass": 2.0, "tow_thomas": float("inf")}
    for name, ceiling in expected.items():
        assert _natural_gain(topology(name), 5.0) == pytest.approx(ceiling), name
