"""The requirement as frozen values, units in names (keys of docs/design.md)."""

from __future__ import annotations

import math
from dataclasses import dataclass, field

__all__ = [
    "Passband", "StopbandPoint", "DesignChoice", "Tone", "InputSignal", "Supply",
    "AmplifierChoice", "Environment", "NoiseBudget", "Tolerance", "Tuning", "Converter",
    "Requirement", "TimeLimits",
]


@dataclass(frozen=True, slots=True)
class Passband:
    """The band to pass. `center_hz` is the geometric centre of `low_hz` and `high_hz`."""

    low_hz: float
    high_hz: float
    max_loss_db: float
    gain_db: float
    gain_tolerance_db: float = 0.5

    @property
    def center_hz(self) -> float:
        return math.sqrt(self.low_hz * self.high_hz)

    @property
    def bandwidth_hz(self) -> float:
        return self.high_hz - self.low_hz

    @property
    def gain(self) -> float:
        """Reference gain (passband maximum), V/V."""
        return 10.0 ** (self.gain_db / 20.0)


@dataclass(frozen=True, slots=True)
class StopbandPoint:
    """A mask point. `added` says why the planner added it (empty: the requirement's own)."""

    freq_hz: float
    min_loss_db: float
    added: str = ""


@dataclass(frozen=True, slots=True)
class DesignChoice:
    """`[design]`: family and order (None: the planner chooses), part series."""

    family: str | None = None
    order: int | None = None
    resistor_series: str = "E96"
    capacitor_series: str = "E12"


@dataclass(frozen=True, slots=True)
class Tone:
    """An out-of-band tone at the source (open-circuit amplitude)."""

    freq_hz: float
    vpk: float


@dataclass(frozen=True, slots=True)
class InputSignal:
    """`[input]`: largest in-band amplitude, source resistance, tones (open-circuit, ahead
    of the source resistance)."""

    max_vpk: float = 1.0
    source_ohms: float = 0.0
    tones: tuple[Tone, ...] = ()
    #: `[input] dc_v`: the source's DC level (open-circuit voltage at DC), V.
    dc_v: float = 0.0
    dc_step_v: float | None = None


@dataclass(frozen=True, slots=True)
class Supply:
    """`[supply]`: the rails and the signal reference the chain is built around.

    Split rails (lower rail below 0, upper above) have their reference at ground, 0 V. A
    single supply (lower rail at or above 0) has it at `reference_v`, mid-supply unless
    given.
    """

    rails_v: tuple[float, float] = (-5.0, 5.0)
    reference_v: float = 0.0

    @property
    def single(self) -> bool:
        """True for a single supply: the lower rail at or above 0 V."""
        return self.rails_v[0] >= 0.0


@dataclass(frozen=True, slots=True)
class AmplifierChoice:
    """`[amplifier]`: an archetype name and explicit parameter overrides."""

    archetype: str | None = None
    overrides: tuple[tuple[str, float], ...] = ()


@dataclass(frozen=True, slots=True)
class Environment:
    temperature_c: float = 25.0


@dataclass(frozen=True, slots=True)
class NoiseBudget:
    band_hz: tuple[float, float] | None = None
    max_output_vrms: float | None = None


@dataclass(frozen=True, slots=True)
class Tolerance:
    """`[tolerance]`: production spreads for the Monte Carlo yield.

    Attributes
    ----------
    resistor_pct, capacitor_pct : float or None
        Part tolerance, ± percent; None: the tolerance customary for
        `design.resistor_series` / `design.capacitor_series` (``parts.tolerance``).
    distribution : {"uniform", "gaussian"}
        Uniform over ± tolerance, or Gaussian with the tolerance at 3 sigma.
    gbw_spread_pct : float
        Spread of every op-amp's GBW, ± percent, same distribution (0: none).
    samples : int
        Monte Carlo samples.
    seed : int
        Seed of the random generator: the same seed repeats a run exactly.
    min_yield : float
        Share of built chains that must meet the requirement (0 to 1).
    """

    resistor_pct: float | None = None
    capacitor_pct: float | None = None
    distribution: str = "uniform"
    gbw_spread_pct: float = 20.0
    samples: int = 2000
    seed: int = 1
    min_yield: float = 0.95


@dataclass(frozen=True, slots=True)
class Tuning:
    """`[tuning]`: whether the chain gets trimmers.

    Attributes
    ----------
    enabled : bool or None
        True: always plan trims; False: never; None (left out): only when the untrimmed
        yield misses `tolerance.min_yield`.
    """

    enabled: bool | None = None


@dataclass(frozen=True, slots=True)
class Converter:
    """`[converter]`: the ADC at the end of the chain.

    Attributes
    ----------
    sample_rate_hz : float
    bits : int
    full_scale_vpp : float
        Peak-to-peak full scale at the converter input, V.
    enob : float or None
        Effective bits (None: `bits`).
    input_ohms : float or None
        Resistive part of the converter's input load (None: none).
    input_farads : float
        Capacitive part of the input load, in parallel with `input_ohms`.
    max_alias_dbfs : float or None
        The most any fold may reach, dBFS (None: a sine of 1 LSB amplitude, `lsb_dbfs`).
    headroom_db : float
        Margin below full scale the gain distribution aims the peak at.
    """

    sample_rate_hz: float
    bits: int
    full_scale_vpp: float
    enob: float | None = None
    input_ohms: float | None = None
    input_farads: float = 0.0
    max_alias_dbfs: float | None = None
    headroom_db: float = 1.0

    @property
    def full_scale_vpk(self) -> float:
        return self.full_scale_vpp / 2

    @property
    def nyquist_hz(self) -> float:
        return self.sample_rate_hz / 2

    @property
    def effective_bits(self) -> float:
        return float(self.bits if self.enob is None else self.enob)

    @property
    def lsb_v(self) -> float:
        """One code step, full_scale_vpp / 2^bits, V."""
        return self.full_scale_vpp / 2.0 ** self.bits

    @property
    def lsb_dbfs(self) -> float:
        """A sine of 1 LSB amplitude against the full-scale sine: 20 log10(2^(1-bits))."""
        return 20 * math.log10(self.lsb_v / self.full_scale_vpk)

    @property
    def alias_limit_dbfs(self) -> float:
        return self.lsb_dbfs if self.max_alias_dbfs is None else self.max_alias_dbfs

    @property
    def aim_vpk(self) -> float:
        """Full scale less `headroom_db`: where the gain distribution puts the peak, Vpk."""
        return self.full_scale_vpk * 10.0 ** (-self.headroom_db / 20)


@dataclass(frozen=True, slots=True)
class TimeLimits:
    """`[time]`: optional limits on the chain's time-domain figures (None: not held).

    Attributes
    ----------
    burst_s : float or None
        Length of the test burst; None: derived from the band.
    max_rise_s : float or None
        Largest 10-90 % envelope rise time of a burst at the centre or an edge.
    max_delay_spread_s : float or None
        Largest group-delay spread (max - min) across the passband.
    max_ringing_s : float or None
        Largest time for a burst's envelope to fall below 1 % after it ends.
    max_overshoot_pct : float or None
        Largest envelope overshoot of a burst, percent.
    max_settling_s : float or None
        Largest step-response settling time (to 1 %).
    """

    burst_s: float | None = None
    max_rise_s: float | None = None
    max_delay_spread_s: float | None = None
    max_ringing_s: float | None = None
    max_overshoot_pct: float | None = None
    max_settling_s: float | None = None

    @property
    def any(self) -> bool:
        """True when at least one limit is given."""
        return any(v is not None for v in (self.max_rise_s, self.max_delay_spread_s,
                                           self.max_ringing_s, self.max_overshoot_pct,
                                           self.max_settling_s))


@dataclass(frozen=True, slots=True)
class Requirement:
    """A whole bandpass requirement, as read from `path`."""

    path: str
    passband: Passband
    stopband: tuple[StopbandPoint, ...] = ()
    design: DesignChoice = field(default_factory=DesignChoice)
    input: InputSignal = field(default_factory=InputSignal)
    supply: Supply = field(default_factory=Supply)
    amplifier: AmplifierChoice = field(default_factory=AmplifierChoice)
    environment: Environment = field(default_factory=Environment)
    noise: NoiseBudget = field(default_factory=NoiseBudget)
    tolerance: Tolerance = field(default_factory=Tolerance)
    converter: Converter | None = None
    time: TimeLimits = field(default_factory=TimeLimits)
    tuning: Tuning = field(default_factory=Tuning)
