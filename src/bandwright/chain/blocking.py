"""Where the chain needs a DC block, and its parts (``circuits.dc_block``).

A stage with DC gain turns the DC arriving at its input (the source's DC level away from the
reference, an earlier stage's output offset) into a shift of its own output's bias. Walking
the chain from its input, a stage whose input DC times its DC gain would move one of its
outputs by more than ``BLOCK_SHARE`` of that output's room to the rails gets a block at its
input: a series capacitor, and for an input that would then have no DC return (a
non-inverting input) a resistor to the reference behind it. Single supplies only: on split
rails the chain stays as planned and the bias check reports what offsets do.
"""

from __future__ import annotations

import math

import numpy as np

from bandwright.analysis.bias import bias_points, chain_reference
from bandwright.analysis.levels import swing_limit_vpk
from bandwright.chain.graph import CHAIN_INPUT, Chain, build_chain
from bandwright.chain.stage import Stage, stage_output_nets, with_block
from bandwright.circuits.dc_block import DcBlock, blocked
from bandwright.circuits.elements import GROUND, resistor
from bandwright.circuits.nodal import dc_solve, floating_nets, input_impedance_min
from bandwright.parts.eseries import bracket
from bandwright.parts.notation import format_hz, format_si, format_sig

__all__ = ["BLOCK_SHARE", "CORNER_RATIO", "BIAS_DROP_SHARE", "MAX_SHUNT_OHMS",
           "place_dc_blocks", "stage_dc_gains", "block_corner_hz", "corner_grid",
           "needs_return"]

#: A stage is blocked when the DC at its input, times its DC gain, would move an output's
#: bias by more than this share of the output's room to the rails (the swing around the
#: reference): 10 % of the room is what the signal may lose to a bias shift before it shows
#: in the headroom margin (about 0.9 dB).
BLOCK_SHARE = 0.10
#: The block's corner sits this far below the band's low edge: a first-order highpass there
#: loses 0.011 dB at the edge (20 log10 sqrt(1 + 1/20²)) and turns the phase by 2.9°.
CORNER_RATIO = 20.0
#: The shunt resistor's largest drop from the op-amp's input bias current, as a share of
#: the room to the rails.
BIAS_DROP_SHARE = 0.01
#: The largest shunt resistor: beyond it a film resistor's leakage and the board's surface
#: leakage rival the bias current (common practice).
MAX_SHUNT_OHMS = 1e6
_GRID_POINTS = 64


def stage_dc_gains(stage: Stage) -> dict[str, float]:
    """DC gain from the stage's input to each of its op-amp outputs (local nets), V/V, from
    its element list at s = 0 (``circuits.nodal.dc_solve``, the input's share only)."""
    sol = dc_solve(stage.elements, input_dc_v=1.0)
    return {n: sol.at(n, "input") for n in stage_output_nets(stage)}


def corner_grid(low_hz: float, high_hz: float) -> np.ndarray:
    """Frequencies the impedance behind a block is read over: its corner to the band's top."""
    return np.geomspace(low_hz / CORNER_RATIO, high_hz, _GRID_POINTS)


def needs_return(elements) -> bool:
    """Whether a series capacitor at the input leaves an op-amp input with no DC path."""
    trial = blocked(tuple(elements), DcBlock(c_farads=1.0, r_ohms=None))
    lost = set(floating_nets(trial, held=["in"]))
    return any(n in lost for e in trial if e.kind == "opamp" for n in e.nets[:2])


def _driven_ohms(elements, r_ohms: float | None, grid_hz: np.ndarray) -> float:
    """Least impedance the block's capacitor drives: the stage's input with the shunt."""
    els = tuple(elements) + ((resistor("RB", "in", GROUND, r_ohms),) if r_ohms else ())
    return input_impedance_min(els, grid_hz)


def block_corner_hz(elements, c_farads: float, r_ohms: float | None,
                    grid_hz: np.ndarray) -> float:
    """f = 1 / (2π R C) of the block (the first-order RC highpass, e.g. Horowitz & Hill
    2015, §1.7.1 [mem]), R the least impedance it drives over `grid_hz`."""
    z = _driven_ohms(elements, r_ohms, grid_hz)
    return 1.0 / (2 * math.pi * z * c_farads)


def _volts(v: float) -> str:
    return format_si(v, "V", sign=True)


def _block_for(stage: Stage, req, *, dc_in_v: float, ref_v: float, room_v: float,
               what: str) -> DcBlock | None:
    gains = stage_dc_gains(stage)
    offset = dc_in_v - ref_v
    shifts = {n: abs(g * offset) for n, g in gains.items()}
    net = max(shifts, key=shifts.get)
    if not shifts[net] > BLOCK_SHARE * room_v:
        return None
    r_ohms = None
    if needs_return(stage.elements):
        ib = float(getattr(stage.model, "bias_current_a", 0.0) or 0.0)
        r_max = min(MAX_SHUNT_OHMS, BIAS_DROP_SHARE * room_v / ib) if ib > 0 else \
            MAX_SHUNT_OHMS
        r_ohms = float(bracket(r_max, req.design.resistor_series)[0])
    grid = corner_grid(req.passband.low_hz, req.passband.high_hz)
    z = _driven_ohms(stage.elements, r_ohms, grid)
    target = req.passband.low_hz / CORNER_RATIO
    c = float(bracket(1.0 / (2 * math.pi * target * z), req.design.capacitor_series)[1])
    corner = 1.0 / (2 * math.pi * z * c)
    reason = (f"{what} sits {_volts(offset)} from the reference; DC gain "
              f"{format_sig(gains[net], 3)} would move the stage's {net} by "
              f"{_volts(shifts[net] * math.copysign(1, gains[net] * offset))}, "
              f"{100 * shifts[net] / room_v:.0f} % of its {format_si(room_v, 'V')} room to the "
              f"rails (blocked above {format_sig(100 * BLOCK_SHARE)} %); corner "
              f"{format_hz(corner, significant=3)}, at or below 1/{format_sig(CORNER_RATIO)} of "
              f"the band's low edge")
    return DcBlock(c_farads=c, r_ohms=r_ohms, net="in", corner_hz=corner, reason=reason)


def place_dc_blocks(chain: Chain, req) -> Chain:
    """`chain` with a DC block at every stage input that needs one (module docstring).

    Stages are walked from the input; after each block the chain's bias points are solved
    again, so a later stage sees the DC its blocked predecessor now passes on.
    """
    if req.passband is None or not (req.supply.single or req.input.dc_v != 0.0):
        # Split rails with a source at 0 V DC keep their chains as they were: the bias
        # check reports the op-amp offsets there (``checks.bias_checks``).
        return chain
    stages = list(chain.stages)
    bias = None
    for k, st in enumerate(stages):
        if st.dc_block is not None:
            continue
        current = build_chain(stages, source_ohms=chain.source_ohms)
        reference = chain_reference(current, req)
        if bias is None:
            bias = bias_points(current, req, reference)
        ref_v = bias.reference_dc_v if req.supply.single else 0.0
        inp = current.input_of(current.stages[k])
        if inp == CHAIN_INPUT:
            dc_in, what = req.input.dc_v, "the source's DC level"
        else:
            dc_in, what = bias.nets[inp].dc_v, f"{inp} (the DC an earlier stage passes on)"
        room = swing_limit_vpk(req.supply, st.model.swing_to_rail_v)
        block = _block_for(st, req, dc_in_v=dc_in, ref_v=ref_v, room_v=room, what=what)
        if block is None:
            continue
        stages[k] = with_block(st, block)
        bias = None
    if all(a is b for a, b in zip(stages, chain.stages)):
        return chain
    return build_chain(stages, source_ohms=chain.source_ohms)
