"""The `mask` check: passband loss, passband gain and every stopband point."""

from __future__ import annotations

from bandwright.analysis.mask import mask_margins
from bandwright.analysis.response import MaskReading
from bandwright.checks.base import Check
from bandwright.inputs.requirement import Requirement
from bandwright.parts.notation import format_fixed, format_hz, format_sig

__all__ = ["mask_checks"]


def mask_checks(reading: MaskReading, requirement: Requirement) -> list[Check]:
    """One check for the passband floor, one for the passband ceiling, one per stopband point.

    All losses are relative to `passband.gain_db` (docs/design.md, "Meanings"); the verdicts are
    those of ``analysis.mask.mask_margins``, the reader the Monte Carlo uses too.
    """
    pb = requirement.passband
    m = mask_margins(reading.passband_gain_db[None, :], reading.stop_gain_db[None, :],
                     requirement)
    out: list[Check] = []
    i = int(m.worst_loss_index[0])
    worst = float(m.loss_db[0])
    ok = bool(m.loss_ok[0])
    out.append(Check(
        id="mask", status="pass" if ok else "fail", value=worst, limit=pb.max_loss_db, unit="dB",
        message=(f"passband loss up to {worst:.3f} dB (worst at {reading.passband_freq_hz[i]:.6g} Hz), "
                 f"{'within' if ok else 'more than'} the allowed {pb.max_loss_db:.3f} dB")))
    peak = float(m.peak_db[0])
    err = float(m.gain_error_db[0]) + 0.0  # + 0.0 turns -0.0 into 0.0
    err = 0.0 if abs(err) < 5e-10 else err
    ok = bool(m.gain_ok[0])
    out.append(Check(
        id="mask", status="pass" if ok else "fail", value=err, limit=pb.gain_tolerance_db,
        unit="dB",
        message=f"passband peak {format_fixed(peak, 3)} dB is {format_fixed(err, 3, sign=True)} dB "
                f"from the asked {format_sig(pb.gain_db)} dB (allowed "
                f"±{format_sig(pb.gain_tolerance_db)} dB)"))
    for k, (f, point) in enumerate(zip(reading.stop_freq_hz, requirement.stopband)):
        loss_s = float(m.stop_loss_db[0, k])
        ok = bool(m.stop_point_ok[0, k])
        out.append(Check(
            id="mask", status="pass" if ok else "fail", value=loss_s, limit=point.min_loss_db,
            unit="dB",
            message=f"{format_fixed(loss_s, 2)} dB of loss at {format_hz(f, significant=6)}, "
                    f"needs {format_sig(point.min_loss_db)} dB"))
    return out
