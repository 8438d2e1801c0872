"""The `mask` check: passband loss, passband gain and every stopband point."""

from __future__ import annotations

from bandwright.analysis.mask import mask_margins
from bandwright.analysis.response import MaskReading
from bandwright.checks.base import Check
from bandwright.inputs.requirement import Requirement
from bandwright.parts.notation import format_fixed, format_hz, format_sig

__all__ = ["mask_checks"]


def mask_checks(reading: MaskReading, requirement: Requirement) -> list[Check]:
    """One check for the passband floor (the lowest in-band gain against `gain_db -
    max_loss_db`), one for the passband ceiling, one per stopband point.

    All losses are relative to `passband.gain_db` (docs/design.md, "Meanings"); the verdicts are
    those of ``analysis.mask.mask_margins``, the reader the Monte Carlo uses too.
    """
    pb = requirement.passband
    m = mask_margins(reading.passband_gain_db[None, :], reading.stop_gain_db[None, :],
                     requirement)
    out: list[Check] = []
    i = int(m.worst_loss_index[0])
    # The floor is read as a gain, not a loss: a chain above the asked gain would otherwise
    # print a negative "loss".
    lowest = float(pb.gain_db - m.loss_db[0]) + 0.0
    floor = pb.gain_db - pb.max_loss_db
    ok = bool(m.loss_ok[0])
    out.append(Check(
        id="mask", status="pass" if ok else "fail", value=lowest, limit=floor, unit="dB",
        message=(f"lowest in-band gain {format_fixed(lowest, 3)} dB (at "
                 f"{format_hz(reading.passband_freq_hz[i], significant=6)}), "
                 f"{format_fixed(abs(lowest - floor), 3)} dB {'above' if ok else 'below'} "
                 f"its floor "
                 f"{format_sig(floor)} dB (the asked {format_sig(pb.gain_db)} dB less the "
                 f"allowed {format_sig(pb.max_loss_db)} dB of loss)")))
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
