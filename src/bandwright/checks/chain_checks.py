"""Checks of a built chain: headroom, slew, drive, gbw, noise, parts (docs/design.md check ids)."""

from __future__ import annotations

import math

from bandwright.analysis import Analyses
from bandwright.analysis.bias import describe
from bandwright.analysis.noise import source_words
from bandwright.chain.graph import CONVERTER_NET, Chain
from bandwright.checks.base import Check
from bandwright.circuits import topology
from bandwright.parts.notation import (format_fixed, format_hz, format_hz_range, format_si,
                                       format_sig, format_slew)
from bandwright.parts.windows import PartWindows, violations
from bandwright.sections.section import Section
from bandwright.inputs.requirement import Requirement

__all__ = ["headroom_checks", "slew_checks", "drive_checks", "gbw_checks", "noise_checks",
           "parts_checks", "WARN_MARGIN_DB"]

# Less than this much headroom is a warning: op-amp swing figures are typical, not minimum.
WARN_MARGIN_DB = 1.0
# A source DC level that moves a net by more than this share of its room is worth a word.
_SOURCE_SHIFT_SHARE = 0.1


def headroom_checks(an: Analyses) -> list[Check]:
    """One check per op-amp output net: worst-case peak against the swing limit."""
    out = []
    for n in an.nodes:
        m = n.margin_db
        conv = n.net == CONVERTER_NET
        # At the converter the margin asked for is its own headroom_db.
        warn_db = an.converter.headroom_db if conv and an.converter is not None \
            else WARN_MARGIN_DB
        status = "fail" if m < 0 else ("warn" if m < warn_db else "pass")
        what = ("overranges the converter" if conv else "clips") if m < 0 else "peaks"
        tail = f" of the converter's ±{format_si(n.limit_vpk, 'V', significant=4)} full " \
               f"scale (aim: {format_sig(warn_db)} dB " \
               f"below it)" if conv else ""
        b = an.bias.nets.get(n.net) if an.bias is not None else None
        around = f"; {describe(b)}" if b is not None else ""
        if b is not None:
            shift = b.source_v - an.bias.reference.reference_v
            if abs(shift) > _SOURCE_SHIFT_SHARE * max(n.limit_vpk, 0.0) + 1e-3:
                # DC blocks are not placed automatically: say where the level comes from.
                around += (f"; the source's DC level (input.dc_v) moves it "
                           f"{format_si(shift, 'V', sign=True)} "
                           f"from the reference through DC-coupled stages: block DC (a "
                           f"series capacitor with a resistor to the reference) ahead of the "
                           f"first stage with DC gain, or bias the source at the reference")
        swing = "" if conv else (
            f"; {format_si(n.upper_margin_v, 'V', sign=True)} to the upper swing limit "
            f"{format_si(n.swing_high_v, 'V')}, {format_si(n.lower_margin_v, 'V', sign=True)} "
            f"to the lower {format_si(n.swing_low_v, 'V')}")
        out.append(Check(
            id="headroom", status=status, value=n.peak_vpk, limit=n.limit_vpk, unit="Vpk",
            stage=n.stage, net=n.net,
            message=f"{what} at {format_si(n.peak_vpk, 'Vpk')} (in-band "
                    f"{format_si(n.signal_vpk, 'Vpk')} + tones "
                    f"{format_si(n.peak_vpk - n.signal_vpk, 'Vpk')}){around}{swing}; margin "
                    f"{format_fixed(m, 1, sign=True)} dB{tail}"))
    return out


def slew_checks(an: Analyses) -> list[Check]:
    """Slew rate the worst-case output needs, 2π Σ f·V, against the op-amp's."""
    out = []
    for n in an.nodes:
        if n.net == CONVERTER_NET:
            continue  # the op-amp at "out" drives it: checked there
        need, have = n.slew_needed_v_per_us, n.slew_v_per_us
        ratio = have / need if need > 0 else math.inf
        status = "fail" if ratio < 1 else ("warn" if ratio < 2 else "pass")
        out.append(Check(
            id="slew", status=status, value=need, limit=have, unit="V/us", stage=n.stage,
            net=n.net,
            message=f"needs {format_slew(need)} of the op-amp's {format_slew(have)}"
                    + (" — the output will distort on large signals" if ratio < 1 else "")))
    return out


def drive_checks(an: Analyses) -> list[Check]:
    """The smallest load each op-amp output drives against its minimum load."""
    out = []
    for n in an.nodes:
        if n.net == CONVERTER_NET:
            continue  # its load is the op-amp's at "out"; its settling: checks.alias
        ok = n.load_ohms >= n.min_load_ohms
        load = format_si(n.load_ohms, "Ω") if math.isfinite(n.load_ohms) else "no load"
        out.append(Check(
            id="drive", status="pass" if ok else "fail",
            value=n.load_ohms if math.isfinite(n.load_ohms) else None,
            limit=n.min_load_ohms, unit="ohm", stage=n.stage, net=n.net,
            message=f"least load {load} (feedback network and next "
                    f"input{', converter input' if n.net == 'out' and an.converter else ''}), "
                    f"op-amp minimum {format_si(n.min_load_ohms, 'Ω')}"))
    return out


def stage_gbw_needed_hz(stage) -> float:
    """The GBW a built stage's topology needs at the f0, Q and gain it was built for, Hz.

    Raises
    ------
    ValueError
        When the built pole pair is not a stable one (Q <= 0 or not finite).
    """
    b = stage.built
    sec = Section(kind=stage.kind, f0_hz=b.f0_hz, q=b.q, gain=abs(b.gain)) \
        if stage.kind != "gain" else Section(kind="gain", f0_hz=0.0, q=0.0, gain=abs(b.gain))
    return topology(stage.topology).limits(sec, stage.model).gbw_needed_hz


def gbw_checks(chain: Chain, stability=()) -> list[Check]:
    """Per stage: the GBW its topology needs at the f0, Q and gain it was built for, against
    the op-amp's. The built figures are used, so a plan and the audit of its parts agree.
    A stage whose poles `stability` (``analysis.stability.StagePoles`` per stage) puts in
    the right half-plane is said to be unstable: no GBW figure describes it."""
    from bandwright.checks.stability import unstable_message
    out = []
    unstable = {sp.position: sp for sp in stability if not sp.stable}
    for st in chain.stages:
        b = st.built
        have = st.model.gbw_hz
        if st.position in unstable:
            out.append(Check(
                id="gbw", status="fail", value=None, limit=have, unit="Hz", stage=st.position,
                message=f"{st.topology} is unstable with these parts and this op-amp: "
                        f"{unstable_message(unstable[st.position])}"))
            continue
        if st.kind != "gain" and not (math.isfinite(b.q) and b.q > 0
                                      and math.isfinite(b.f0_hz) and b.f0_hz > 0):
            # Audited parts can make a stage that oscillates with this op-amp: a figure of
            # its own, not a crash in the topology's limits (they need Q > 0).
            out.append(Check(
                id="gbw", status="fail", value=None, limit=have, unit="Hz", stage=st.position,
                message=f"{st.topology} is not stable with this op-amp: its built pole pair "
                        f"(f0 {format_hz(b.f0_hz)}, Q {format_sig(b.q)}) lies on or right of the "
                        f"imaginary axis"))
            continue
        need = stage_gbw_needed_hz(st)
        ok = have >= need
        # A follower's need is nil: a "0 Hz" figure would read as a misprint.
        needs = ("needs negligible GBW here" if need == 0 else
                 f"needs {format_hz(need)} GBW here" if math.isfinite(need) else
                 f"cannot reach Q {format_sig(b.q, 3)} at gain {format_sig(abs(b.gain), 3)} "
                 f"with any GBW")
        out.append(Check(
            id="gbw", status="pass" if ok else "fail", value=need, limit=have, unit="Hz",
            stage=st.position,
            message=f"{st.topology} {needs}, the op-amp has {format_hz(have)}"))
    return out


def noise_checks(an: Analyses, requirement: Requirement) -> list[Check]:
    """Integrated output noise against `noise.max_output_vrms` (when given)."""
    limit = requirement.noise.max_output_vrms
    got = an.noise.integrated_vrms
    lo, hi = an.noise.band_hz
    top = "; ".join(f"{source_words(n)} {format_si(v, 'V rms')}"
                   for n, v in an.noise.contributions_vrms[:3])
    msg = (f"{format_si(got, 'V rms', significant=4)} at the output over "
           f"{format_hz_range(lo, hi)}; largest: {top}")
    if limit is None:
        return [Check(id="noise", status="pass", value=got, limit=None, unit="Vrms",
                      message=msg + " (no budget given)")]
    ok = got <= limit
    return [Check(id="noise", status="pass" if ok else "fail", value=got, limit=limit,
                  unit="Vrms", message=msg + f"; budget {format_si(limit, 'V rms', significant=4)}")]


def parts_checks(chain: Chain, windows: PartWindows = PartWindows()) -> list[Check]:
    """Per stage: part values outside the preferred windows (a warning)."""
    out = []
    for st in chain.stages:
        v = violations(dict(st.components), windows)
        out.append(Check(
            id="parts", status="warn" if v else "pass", value=float(len(v)), limit=0.0,
            unit="parts", stage=st.position,
            message="; ".join(v) if v else "every part inside the preferred windows"))
    return out
