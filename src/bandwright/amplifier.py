"""The op-amp a requirement or an audit stage asks for, as a model; errors name the key."""

from __future__ import annotations

import difflib
from typing import Sequence

from bandwright.analysis.levels import swing_limit_vpk
from bandwright.errors import SpecError
from bandwright.parts.catalogue import ARCHETYPES, make_opamp
from bandwright.parts.notation import format_hz, format_si
from bandwright.parts.opamp import OpAmp
from bandwright.inputs.requirement import AmplifierChoice, Supply, Tone

__all__ = ["resolve_amplifier", "check_tones"]


def resolve_amplifier(choice: AmplifierChoice, *, path: str, key: str = "amplifier",
                      supply: Supply | None = None, tones: Sequence[Tone] = ()) -> OpAmp:
    """`[amplifier]` → OpAmp; an unknown archetype, rails inside the op-amp's own swing
    loss, or a tone above the op-amp's GBW are SpecErrors naming `path` and the key."""
    try:
        model = make_opamp(archetype=choice.archetype, overrides=dict(choice.overrides))
    except KeyError:
        close = difflib.get_close_matches(str(choice.archetype), list(ARCHETYPES), n=1)
        hint = f"did you mean '{close[0]}'? known: " if close else "known: "
        raise SpecError(path, f"{key}.archetype", "unknown op-amp archetype; " + hint
                        + ", ".join(ARCHETYPES), value=choice.archetype) from None
    except ValueError as exc:
        raise SpecError(path, key, str(exc)) from None
    # A reference off-centre by choice is its own error; rails too close for any reference
    # fall through to the rails' message below.
    if (supply is not None and supply.single
            and swing_limit_vpk(supply, model.swing_to_rail_v) <= 0
            and (supply.rails_v[1] - supply.rails_v[0]) / 2 > model.swing_to_rail_v):
        lo, hi = supply.rails_v
        raise SpecError(path, "supply.reference_v",
                        f"the reference {format_si(supply.reference_v, 'V', significant=4)} is "
                        f"within the op-amp's swing loss "
                        f"({format_si(model.swing_to_rail_v, 'V', significant=4)}) of a rail "
                        f"[{lo:g}, {hi:g}] V: no output swing around it", value=supply.reference_v)
    if supply is not None and swing_limit_vpk(supply, model.swing_to_rail_v) <= 0:
        raise SpecError(path, "supply.rails_v",
                        f"rails leave no output swing: the op-amp needs "
                        f"{format_si(model.swing_to_rail_v, 'V', significant=4)} from each rail", value=list(supply.rails_v))
    check_tones(model, tones, path=path, key=key)
    return model


def check_tones(model: OpAmp, tones: Sequence[Tone], *, path: str, key: str) -> None:
    """Above its GBW an op-amp has no loop gain left (single-pole model, A(f) < 1): no active
    section acts on such a tone, and sizing the networks for it asks loads no op-amp drives.
    That is a front end's job (a passive lowpass ahead of the chain), so it is said here,
    about the tone, rather than as a section no circuit can build."""
    for i, tone in enumerate(tones):
        if tone.vpk > 0 and tone.freq_hz > model.gbw_hz:
            raise SpecError(path, f"input.tone[{i}].freq_hz",
                            f"a {format_si(tone.vpk, 'Vpk', significant=4)} tone above the "
                            f"op-amp's GBW "
                            f"({format_hz(model.gbw_hz, significant=3)}, {key}), where no active "
                            "section acts on "
                            "it: give the level left after a passive lowpass ahead of the "
                            "chain, or an op-amp with a higher GBW", value=tone.freq_hz)
