"""Transfers to every net of the chain, node levels, slew and load (docs/design.md, "Headroom /
slew")."""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from bandwright.chain.graph import (CHAIN_OUTPUT, CONVERTER_NET, Chain, converter_elements,
                                    flatten, net_transfers)
from bandwright.circuits.nodal import ac_solve, drawn_impedance
from bandwright.inputs.requirement import InputSignal, Supply

__all__ = ["net_transfers", "NodeLevel", "node_levels", "swing_limit_vpk", "output_loads"]


def swing_limit_vpk(supply: Supply, swing_to_rail_v: float) -> float:
    """V_lim = min(V+, |V-|) - swing_to_rail (docs/methods.md, "Headroom / slew")."""
    return min(supply.rails_v[1], -supply.rails_v[0]) - swing_to_rail_v


@dataclass(frozen=True, slots=True)
class NodeLevel:
    """Worst-case level at one op-amp output net.

    Attributes
    ----------
    net : str
    stage : int
    peak_vpk : float
        In-band signal at its worst passband frequency plus every tone, amplitudes added.
    limit_vpk : float
        Swing limit of the op-amp driving the net.
    signal_vpk : float
        The in-band part of `peak_vpk`.
    slew_needed_v_per_us : float
        2π Σ f·V of the same worst case.
    slew_v_per_us : float
        The op-amp's slew rate.
    load_ohms : float
        Smallest load magnitude the output drives over the passband and the tones.
    min_load_ohms : float
        The op-amp's minimum load.
    """

    net: str
    stage: int
    peak_vpk: float
    limit_vpk: float
    signal_vpk: float
    slew_needed_v_per_us: float
    slew_v_per_us: float
    load_ohms: float
    min_load_ohms: float

    @property
    def margin_db(self) -> float:
        """Headroom: 20 log10(limit / peak); negative when the net clips."""
        if self.peak_vpk <= 0:
            return math.inf
        return 20 * math.log10(max(self.limit_vpk, 1e-30) / self.peak_vpk)


def node_levels(chain: Chain, *, passband_hz: np.ndarray, signal: InputSignal,
                supply: Supply) -> tuple[NodeLevel, ...]:
    """Worst-case peak, slew and load at every op-amp output.

    Notes
    -----
    Peak = V_in,max · max over the passband |T| + Σ_tones V_t |T(f_t)|; slew needed
    2π (f* V_in,max |T(f*)| + Σ f_t V_t |T(f_t)|) with f* the passband frequency where
    f |T| is largest; amplitudes add, the worst case of every phase (docs/methods.md,
    "Headroom / slew"; Franco 2015, §6.5 [mem]).
    """
    pb = np.asarray(passband_hz, dtype=float)
    tf = np.array([t.freq_hz for t in signal.tones], dtype=float)
    tv = np.array([t.vpk for t in signal.tones], dtype=float)
    freqs = np.concatenate([pb, tf])
    transfers = net_transfers(chain, freqs)
    loads = output_loads(chain, freqs)
    out = []
    for net in chain.output_nets:
        st = chain.stage_of(net)
        mag = np.abs(transfers[net])
        sig = signal.max_vpk * float(mag[: pb.size].max())
        tones = float(np.sum(tv * mag[pb.size:]))
        slew = 2 * math.pi * (signal.max_vpk * float(np.max(pb * mag[: pb.size]))
                              + float(np.sum(tf * tv * mag[pb.size:]))) / 1e6
        out.append(NodeLevel(
            net=net, stage=st.position, peak_vpk=sig + tones,
            limit_vpk=swing_limit_vpk(supply, st.model.swing_to_rail_v), signal_vpk=sig,
            slew_needed_v_per_us=slew, slew_v_per_us=st.model.slew_v_per_us,
            load_ohms=loads[net], min_load_ohms=st.model.min_load_ohms))
    if chain.converter is not None:
        # The converter's input is the output wire: the same worst case, against its own
        # full scale (its slew and load belong to the op-amp at "out", checked there).
        last = next(n for n in out if n.net == CHAIN_OUTPUT)
        out.append(NodeLevel(
            net=CONVERTER_NET, stage=last.stage, peak_vpk=last.peak_vpk,
            limit_vpk=chain.converter.full_scale_vpk, signal_vpk=last.signal_vpk,
            slew_needed_v_per_us=last.slew_needed_v_per_us, slew_v_per_us=last.slew_v_per_us,
            load_ohms=math.inf, min_load_ohms=0.0))
    return tuple(out)


def output_loads(chain: Chain, freq_hz: np.ndarray) -> dict[str, float]:
    """Smallest |V/I| each op-amp output sees over `freq_hz`: its feedback network and the
    next stage's input (the converter's input load at the output), from a solve of the whole
    chain as one element list."""
    flat = flatten(chain) + converter_elements(chain)
    sol = ac_solve(flat, np.asarray(freq_hz, dtype=float), source_ohms=chain.source_ohms)
    out = {}
    for net in chain.output_nets:
        z = drawn_impedance(flat, sol, net)
        z = z[np.isfinite(z)]
        out[net] = float(z.min()) if z.size else math.inf
    return out

