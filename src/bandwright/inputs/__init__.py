"""The requirement: dataclasses, the TOML loader and its validation."""

from bandwright.inputs.loader import load_spec, spec_from_dict
from bandwright.inputs.requirement import (
    AmplifierChoice, DesignChoice, Environment, InputSignal, NoiseBudget, Passband,
    Requirement, StopbandPoint, Supply, Tone,
)

__all__ = ["load_spec", "spec_from_dict", "Requirement", "Passband", "StopbandPoint",
           "DesignChoice", "InputSignal", "Tone", "Supply", "AmplifierChoice", "Environment",
           "NoiseBudget"]
