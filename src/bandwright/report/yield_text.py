"""The sentences and the table of the Monte Carlo result and of the section ordering, written
once: the terminal report and the HTML report both read them (and neither imports the other).
Every figure comes from the result; nothing is computed here."""

from __future__ import annotations

import math
from typing import Any

from bandwright.parts.notation import format_fixed, format_pct, format_si, format_sig

__all__ = ["summary_sentence", "failing_sentence", "DRIVER_HEAD", "DRIVER_NOTE",
           "driver_rows", "advice_sentence", "ordering_sentence", "ordering_built_text"]

# The columns of the "which parts decide it" table.
DRIVER_HEAD = ("stage", "part", "explains alone", "fail rate at its worst", "worst when")
DRIVER_NOTE = ("explains alone: share of the board-to-board variation of the worst miss "
               "(dB beyond the requirement) that this part's tolerance explains by itself; "
               "fail rate at its worst: failing boards among the tenth of boards where this "
               "part sits furthest off in its worst direction.")
_SIDE = {"high": "part high", "low": "part low", "middle": "part near nominal"}


def summary_sentence(y: Any) -> str:
    """What share of the boards pass, with the spreads that were drawn."""
    sp = y.spreads
    lo, hi = y.interval
    three_sigma = " (3σ)" if sp.distribution == "gaussian" else ""
    return (f"{format_pct(y.yield_fraction)} of {y.samples} boards meet the mask and headroom "
            f"(95 % interval {format_fixed(100 * lo, 1)}–{format_pct(hi)}, Wilson; target "
            f"{format_pct(y.min_yield, decimals=0)}). Resistors ±{format_sig(sp.resistor_pct)} % "
            f"({sp.resistor_source}), capacitors ±{format_sig(sp.capacitor_pct)} % "
            f"({sp.capacitor_source}), op-amp GBW ±{format_sig(sp.gbw_spread_pct)} %, "
            f"{sp.distribution}{three_sigma}, seed {y.seed}.")


def failing_sentence(y: Any) -> str | None:
    """The failing boards by reason and the nominal board's margin (None when none fail)."""
    fails = ", ".join(f"{k} {v}" for k, v in y.fail_counts.items() if v)
    if not fails:
        return None
    margin = y.nominal_margin_db
    keeps = (f"; the nominal board keeps {format_fixed(margin, 2)} dB to the requirement"
             if math.isfinite(margin) else "")
    return f"Failing boards by reason: {fails}{keeps}."


def driver_rows(y: Any) -> list[tuple[str, ...]]:
    """One row per part that decides the yield, as `DRIVER_HEAD` names the columns."""
    return [(str(d.stage), d.part, format_pct(d.index, decimals=0),
             format_pct(d.worst_fail_rate, decimals=0), _SIDE.get(d.worst_side, d.worst_side))
            for d in y.drivers]


def advice_sentence(y: Any) -> str | None:
    """What tighter parts would give, or why they cannot help (None without advice)."""
    if not y.nominal_passes:
        return "The chain fails with nominal parts: tighter parts cannot fix that."
    if y.offer is None:
        return None
    text = y.offer.message
    return f"Tighter parts: {text}." if y.offer.reaches else f"{text[:1].upper()}{text[1:]}."


def ordering_sentence(o: Any) -> str:
    """The chosen section order against the order the sections came in and increasing Q."""
    return (f"Section order ({o.method}): {format_fixed(o.gain_over_generated_db, 1, sign=True)} "
            f"dB of dynamic range over the prototype's section order, "
            f"{format_fixed(o.gain_over_increasing_q_db, 1, sign=True)} dB over increasing Q "
            "(planning model, equal-maxima gains).")


def ordering_built_text(o: Any) -> str:
    """The ordering's figures for the chain as built, beside the planning model's."""
    return (f"As built: {format_si(o.built_noise_vrms, 'V rms')} of output noise from the "
            f"stages' own transfers and noise (planning model: "
            f"{format_si(o.noise_vrms, 'V rms')}); "
            f"{format_fixed(o.built_gain_over_generated_db, 1, sign=True)} dB of dynamic range "
            f"over the same built stages in the prototype's section order, "
            f"{format_fixed(o.built_gain_over_increasing_q_db, 1, sign=True)} dB over "
            f"increasing Q; {o.placement}.")
