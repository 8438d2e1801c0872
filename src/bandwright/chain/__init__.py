"""The chain: stages joined as a graph of nets; ordering and gain distribution."""

from bandwright.chain.graph import CHAIN_INPUT, CHAIN_OUTPUT, Chain, build_chain, flatten
from bandwright.chain.stage import Stage, stage_output_nets

__all__ = ["Chain", "Stage", "build_chain", "flatten", "stage_output_nets", "CHAIN_INPUT",
           "CHAIN_OUTPUT"]
