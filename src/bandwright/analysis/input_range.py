"""Input common-mode levels of every op-amp on a single supply.

An op-amp's inputs work only inside a common-mode range, ``input_cm_to_rail_v`` from each
rail (negative: beyond the rail, a rail-to-rail input). On split rails with grounded
non-inverting inputs that range is rarely in play; on a single supply a non-inverting input
that carries the signal around the reference, or sits at the source's DC level, can leave it.
The level at each + input is its DC bias point (``analysis.bias``) plus the worst-case peak
there, in-band signal and tones added as for the node levels.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from bandwright.chain.graph import CHAIN_INPUT, Chain, net_transfers
from bandwright.circuits.nodal import ac_solve
from bandwright.inputs.requirement import Requirement

__all__ = ["InputLevel", "input_levels"]


@dataclass(frozen=True, slots=True)
class InputLevel:
    """The worst-case level at one op-amp's non-inverting input.

    Attributes
    ----------
    stage : int or str
        Stage position, or "reference" for the reference follower.
    opamp : str
        Flat name of the op-amp ("U1_s2").
    net : str
        Its + input net.
    dc_v, peak_vpk : float
        Bias point and worst-case peak there, V.
    low_v, high_v : float
        The op-amp's common-mode range on these rails, V.
    cm_to_rail_v : float
        The class figure the range comes from, V.
    """

    stage: int | str
    opamp: str
    net: str
    dc_v: float
    peak_vpk: float
    low_v: float
    high_v: float
    cm_to_rail_v: float

    @property
    def fits(self) -> bool:
        """True when bias ± peak stays inside the common-mode range."""
        return self.dc_v - self.peak_vpk >= self.low_v and self.dc_v + self.peak_vpk <= self.high_v


def input_levels(chain: Chain, requirement: Requirement, bias, *, passband_hz: np.ndarray
                 ) -> tuple[InputLevel, ...]:
    """Worst-case common-mode level at every op-amp + input (single supply only).

    Notes
    -----
    Peak = V_in,max · max_passband |T| + Σ_tones V_t |T(f_t)| with T the transfer from the
    source to the + input (the node-level method of docs/methods.md, "Headroom / slew"); the
    range is [V- + cm, V+ - cm] (an op-amp's input common-mode range, Franco 2015, §5.3
    [mem]).
    """
    sup = requirement.supply
    if not sup.single or bias is None:
        return ()
    sig = requirement.input
    pb = np.asarray(passband_hz, dtype=float)
    tf = np.array([t.freq_hz for t in sig.tones], dtype=float)
    tv = np.array([t.vpk for t in sig.tones], dtype=float)
    freqs = np.concatenate([pb, tf])
    upstream = net_transfers(chain, freqs)
    out: list[InputLevel] = []
    lo_rail, hi_rail = sup.rails_v
    for st in chain.stages:
        inp = chain.input_of(st)
        h_in = np.ones(freqs.shape, dtype=complex) if inp == CHAIN_INPUT else upstream[inp]
        rs = chain.source_ohms if inp == CHAIN_INPUT else 0.0
        sol = ac_solve(st.elements, freqs, source_ohms=rs)
        for e in st.elements:
            if e.kind != "opamp":
                continue
            name = f"{e.name}_s{st.position}"
            net, dc_v = bias.plus_dc[name]
            mag = np.abs(h_in * sol.at(e.nets[0]))
            peak = sig.max_vpk * float(mag[: pb.size].max()) + float(np.sum(tv * mag[pb.size:]))
            cm = e.model.input_cm_to_rail_v
            out.append(InputLevel(stage=st.position, opamp=name, net=net, dc_v=dc_v,
                                  peak_vpk=peak, low_v=lo_rail + cm, high_v=hi_rail - cm,
                                  cm_to_rail_v=cm))
    for name, (net, dc_v) in bias.plus_dc.items():
        if name.endswith("_ref"):
            m = next(e.model for e in bias.reference.elements if e.name == name)
            cm = m.input_cm_to_rail_v
            out.append(InputLevel(stage="reference", opamp=name, net=net, dc_v=dc_v,
                                  peak_vpk=0.0, low_v=lo_rail + cm, high_v=hi_rail - cm,
                                  cm_to_rail_v=cm))
    return tuple(out)
