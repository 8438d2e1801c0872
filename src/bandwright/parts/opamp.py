"""The op-amp model: single pole, swing, slew and noise.

Placeholder kept minimal here; the catalogue of archetypes lives in parts/catalogue.py.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

__all__ = ["OpAmp"]


@dataclass(frozen=True, slots=True)
class OpAmp:
    """A generic op-amp model.

    Attributes
    ----------
    name : str
        Archetype name, or "custom".
    gbw_hz : float
        Gain-bandwidth product (unity-gain frequency of the single-pole model), Hz.
    dc_gain_db : float
        Open-loop DC gain A0, dB.
    slew_v_per_us : float
        Slew rate, V/µs.
    swing_to_rail_v : float
        How close the output can swing to each rail, V.
    noise_v_per_rthz : float
        White input voltage noise density, V/√Hz.
    noise_a_per_rthz : float
        White input current noise density (each input), A/√Hz.
    noise_corner_hz : float
        1/f corner of the voltage noise, Hz (0: white only); also of the current noise
        unless `current_noise_corner_hz` is set.
    min_load_ohms : float
        Smallest load the output may drive with full swing, ohms.
    current_noise_corner_hz : float
        1/f corner of the current noise, Hz; None at construction means the same as
        `noise_corner_hz`. A bipolar input's current-noise corner often lies far above its
        voltage-noise corner (common practice).
    """

    name: str
    gbw_hz: float
    dc_gain_db: float
    slew_v_per_us: float
    swing_to_rail_v: float
    noise_v_per_rthz: float
    noise_a_per_rthz: float
    noise_corner_hz: float
    min_load_ohms: float = 2000.0
    current_noise_corner_hz: float | None = None   # a float once constructed

    def __post_init__(self) -> None:
        if self.current_noise_corner_hz is None:
            # Frozen: the one place the default is resolved.
            object.__setattr__(self, "current_noise_corner_hz", self.noise_corner_hz)

    @property
    def a0(self) -> float:
        """Open-loop DC gain, V/V."""
        return 10.0 ** (self.dc_gain_db / 20.0)

    @property
    def pole_hz(self) -> float:
        """Open-loop pole frequency GBW/A0, Hz."""
        return self.gbw_hz / self.a0

    def open_loop_gain(self, s: np.ndarray) -> np.ndarray:
        """A(s) = A0 / (1 + s A0 / wt), wt = 2 pi GBW.

        Notes
        -----
        The single-pole (dominant-pole) model; Franco, *Design with Operational
        Amplifiers and Analog Integrated Circuits*, 4th ed., 2015, §6.1 [mem].
        """
        wt_rad_s = 2 * math.pi * self.gbw_hz
        return self.a0 / (1 + np.asarray(s) * self.a0 / wt_rad_s)

    def voltage_noise_psd(self, freq_hz: np.ndarray) -> np.ndarray:
        """e_n^2(f) = e_w^2 (1 + fc/f), V^2/Hz (Motchenbacher & Connelly 1993, ch. 4 [mem])."""
        f = np.asarray(freq_hz, dtype=float)
        return self.noise_v_per_rthz**2 * (1 + self.noise_corner_hz / f)

    def current_noise_psd(self, freq_hz: np.ndarray) -> np.ndarray:
        """i_n^2(f) = i_w^2 (1 + fci/f), A^2/Hz, fci the current-noise corner
        (`current_noise_corner_hz`; Motchenbacher & Connelly 1993, ch. 4 [mem])."""
        f = np.asarray(freq_hz, dtype=float)
        return self.noise_a_per_rthz**2 * (1 + self.current_noise_corner_hz / f)
