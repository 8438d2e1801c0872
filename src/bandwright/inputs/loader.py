"""requirement.toml → Requirement, validated as a whole before anything runs."""

from __future__ import annotations

import math
from dataclasses import replace
from pathlib import Path
from typing import Any

from bandwright.errors import SpecError
from bandwright.inputs.reader import TableReader, read_toml
from bandwright.inputs.requirement import (
    AmplifierChoice, Converter, DesignChoice, Environment, InputSignal, NoiseBudget, Passband,
    Requirement, StopbandPoint, Supply, TimeLimits, Tolerance, Tone, Tuning,
)
from bandwright.parts.eseries import SERIES_NAMES
from bandwright.parts.notation import format_hz, format_si
from bandwright.vocabulary import FAMILIES

__all__ = ["load_spec", "spec_from_dict", "SERIES_NAMES", "AMPLIFIER_KEYS", "read_passband",
           "read_stop", "FREQ_RANGE_HZ", "MIN_FRACTIONAL_BANDWIDTH", "MAX_VOLTS",
           "AMPLIFIER_RANGES",
           "read_amplifier", "read_common_tables", "read_tolerance", "TOLERANCE_KEYS",
           "DISTRIBUTIONS", "TEMPERATURE_RANGE_C", "MIN_VPK", "MAX_TONES", "MAX_SAMPLES",
           "CONVERTER_KEYS", "read_converter",
           "SUPPLY_KEYS", "INPUT_LEVEL_KEYS", "read_supply", "read_dc_level",
           "AMPLIFIER_DC_KEYS", "read_amplifier_dc", "TIME_KEYS", "read_time",
           "read_tuning", "TUNING_KEYS"]

#: The op-amp's DC errors (signed) and input common-mode range, read by ``read_amplifier_dc``.
AMPLIFIER_DC_KEYS = ("offset_v", "bias_current_a", "input_cm_to_rail_v")
AMPLIFIER_KEYS = ("gbw_hz", "dc_gain_db", "slew_v_per_us", "swing_to_rail_v", "noise_v_per_rthz",
                  "noise_a_per_rthz", "noise_corner_hz", "min_load_ohms",
                  "current_noise_corner_hz") + AMPLIFIER_DC_KEYS
TOP_TABLES = ("passband", "stopband", "design", "input", "supply", "amplifier", "environment",
              "noise", "tolerance", "converter", "time", "tuning")
CONVERTER_KEYS = ("sample_rate_hz", "bits", "full_scale_vpp", "enob", "input_ohms",
                  "input_farads", "max_alias_dbfs", "headroom_db")
TUNING_KEYS = ("enabled",)
TOLERANCE_KEYS = ("resistor_pct", "capacitor_pct", "distribution", "gbw_spread_pct", "samples",
                  "seed", "min_yield")
DISTRIBUTIONS = ("uniform", "gaussian")
SUPPLY_KEYS = ("rails_v", "reference_v")
INPUT_LEVEL_KEYS = ("dc_v",)
TIME_KEYS = ("burst_s", "max_rise_s", "max_delay_spread_s", "max_ringing_s",
             "max_overshoot_pct", "max_settling_s")
# A day: a longer burst or settling limit is a typing error for any active filter.
_MAX_TIME_S = 86400.0
_MAX_TOLERANCE_PCT = 50.0
# Monte Carlo time grows linearly with samples × stages; 100,000 samples of a two-stage
# chain take about half a minute here, with a progress bar (docs/user-guide.md).
MAX_SAMPLES = 100_000
_MAX_SAMPLES = MAX_SAMPLES
# Every tone is carried through each analysis and drawn on the level plot: 100 keep a plan
# with --out within seconds, and are more tones than any front end meets.
MAX_TONES = 100
# From liquid helium (about 4 K) to 300 °C: the range where "resistor noise 4kTR" means
# something for a circuit; absolute zero has no thermal noise to compute.
TEMPERATURE_RANGE_C = (-269.0, 300.0)
# A nanovolt: below it the levels are under every resistor's own noise (and a denormal
# amplitude would make every headroom ratio overflow).
MIN_VPK = 1e-9
HALF_POWER_DB = 10 * math.log10(2)
# Plausibility ranges: a value beyond them is a typing error, not a design (an active RC
# filter outside 1 mHz … 10 GHz, or a band narrower than a millionth of its centre, is no
# circuit anyone builds; the maths would only overflow). docs/requirement.md lists them.
FREQ_RANGE_HZ = (1e-3, 1e10)
MIN_FRACTIONAL_BANDWIDTH = 1e-6
MAX_VOLTS = 1e3
_MAX_OHMS = 1e12
# (low, high) of each op-amp figure; the single-pole model needs A0 well above 1.
AMPLIFIER_RANGES = {"gbw_hz": (1.0, 1e11), "dc_gain_db": (20.0, 200.0),
                    "slew_v_per_us": (1e-6, 1e6), "swing_to_rail_v": (0.0, 100.0),
                    "noise_v_per_rthz": (0.0, 1e-3), "noise_a_per_rthz": (0.0, 1e-6),
                    "noise_corner_hz": (0.0, 1e9), "min_load_ohms": (1e-3, 1e12),
                    "current_noise_corner_hz": (0.0, 1e9),
                    "offset_v": (-0.1, 0.1), "bias_current_a": (-1e-5, 1e-5),
                    "input_cm_to_rail_v": (-1.0, 100.0)}
_F_LO, _F_HI = FREQ_RANGE_HZ


def _freq(t: TableReader, name: str, default: float | None = None, *,
          required: bool = False) -> float | None:
    """A frequency inside FREQ_RANGE_HZ."""
    v = t.number(name, default, required=required, positive=True)
    if v is not None and not _F_LO <= v <= _F_HI:
        raise t.error(name, f"outside {format_hz(_F_LO)} … {format_hz(_F_HI)}, the range this "
                            f"tool plans for")
    return v


def load_spec(path: str | Path) -> Requirement:
    """Read and validate a requirement file.

    Raises
    ------
    SpecError
        With file, dotted key, value and what was expected, for the first problem found.
    """
    return spec_from_dict(read_toml(path), path=str(path))


def spec_from_dict(doc: dict[str, Any], *, path: str = "<requirement>") -> Requirement:
    """Validate a parsed requirement document (see docs/design.md for the keys)."""
    top = TableReader(path, "", doc, TOP_TABLES)
    if not top.has("passband"):
        raise SpecError(path, "passband", "missing table [passband]")
    passband = read_passband(TableReader(path, "passband", doc["passband"],
                                          ("center_hz", "bandwidth_hz", "low_hz", "high_hz",
                                           "max_loss_db", "gain_db", "gain_tolerance_db")))
    stopband = tuple(read_stop(path, i, t, passband) for i, t in enumerate(top.tables("stopband")))
    design = _read_design(TableReader(path, "design", doc.get("design", {}),
                                      ("family", "order", "resistor_series", "capacitor_series")))
    if not stopband and design.order is None:
        raise SpecError(path, "stopband", "no [[stopband]] point and no design.order: give at "
                        "least one stopband point, or the order")
    common = read_common_tables(path, doc)
    noise = common["noise"]
    tolerance = read_tolerance(TableReader(path, "tolerance", doc.get("tolerance", {}),
                                           TOLERANCE_KEYS))
    converter = read_converter(path, doc.get("converter"), passband=passband,
                               supply=common["supply"])
    time_limits = read_time(TableReader(path, "time", doc.get("time", {}), TIME_KEYS), passband)
    tuning = read_tuning(TableReader(path, "tuning", doc.get("tuning", {}), TUNING_KEYS))
    return Requirement(path=path, passband=passband, stopband=stopband, design=design,
                       input=common["input"], supply=common["supply"],
                       amplifier=common["amplifier"], environment=common["environment"],
                       noise=noise, tolerance=tolerance, converter=converter, time=time_limits,
                       tuning=tuning)


def read_common_tables(path: str, doc: dict[str, Any]) -> dict[str, Any]:
    """The tables a requirement and an audit file share: input, supply, amplifier,
    environment, noise."""
    inp = TableReader(path, "input", doc.get("input", {}),
                      ("max_vpk", "source_ohms", "tone", "dc_step_v") + INPUT_LEVEL_KEYS)
    tones = []
    if len(inp.tables("tone")) > MAX_TONES:
        raise SpecError(path, "input.tone", f"{len(inp.tables('tone'))} tones; at most "
                        f"{MAX_TONES} (the strongest few decide the headroom)")
    for i, t in enumerate(inp.tables("tone")):
        tr = TableReader(path, f"input.tone[{i}]", t, ("freq_hz", "vpk"))
        tones.append(Tone(freq_hz=_freq(tr, "freq_hz", required=True),
                          vpk=tr.number("vpk", required=True, nonnegative=True,
                                        high=MAX_VOLTS)))
    # A zero input leaves nothing to scale the chain for (every margin would be infinite).
    input_signal = InputSignal(max_vpk=inp.number("max_vpk", 1.0, positive=True, low=MIN_VPK,
                                                  high=MAX_VOLTS),
                               source_ohms=inp.number("source_ohms", 0.0, nonnegative=True,
                                                      high=_MAX_OHMS),
                               tones=tuple(tones),
                               dc_step_v=inp.number("dc_step_v", None, positive=True,
                                                    high=MAX_VOLTS))
    supply = read_supply(TableReader(path, "supply", doc.get("supply", {}), SUPPLY_KEYS))
    input_signal = replace(input_signal, dc_v=read_dc_level(inp, supply))
    env = TableReader(path, "environment", doc.get("environment", {}), ("temperature_c",))
    noi = TableReader(path, "noise", doc.get("noise", {}), ("band_hz", "max_output_vrms"))
    band = noi.pair("band_hz", positive=True, low=_F_LO, high=_F_HI)
    if band is not None and not band[0] < band[1]:
        raise noi.error("band_hz", "expected [low, high] with low < high")
    return {
        "input": input_signal,
        "supply": supply,
        "amplifier": read_amplifier(path, "amplifier", doc.get("amplifier", {})),
        "environment": Environment(
            temperature_c=env.number("temperature_c", 25.0, low=TEMPERATURE_RANGE_C[0],
                                     high=TEMPERATURE_RANGE_C[1])),
        "noise": NoiseBudget(band_hz=band,
                             max_output_vrms=noi.number("max_output_vrms", None, positive=True,
                                                        high=MAX_VOLTS)),
    }


def read_supply(sup: TableReader) -> Supply:
    """`[supply]`: `rails_v` and, for a single supply, `reference_v`.

    A lower rail at or above 0 V is a single supply, its reference mid-supply unless
    `reference_v` says otherwise; split rails (lower below 0, upper above) keep the
    reference at ground. Whether the reference leaves the op-amp its swing is checked once
    the op-amp is known (``amplifier.resolve_amplifier``).
    """
    rails = sup.pair("rails_v", low=-MAX_VOLTS, high=MAX_VOLTS) or (-5.0, 5.0)
    if rails[0] == rails[1]:
        raise sup.error("rails_v", "rails equal: expected [lower, upper] with lower < upper")
    if not rails[0] < rails[1]:
        raise sup.error("rails_v", "rails reversed: expected [lower, upper] with lower < upper")
    single = rails[0] >= 0
    if not single and not rails[1] > 0:
        raise sup.error("rails_v", "both rails at or below 0 V: expected split rails "
                        "[negative, positive] or a single supply [0, positive]")
    if not single:
        ref = sup.number("reference_v", 0.0)
        if ref != 0:
            raise sup.error("reference_v", "split rails keep the signal reference at ground "
                            "(0 V); reference_v applies to a single supply, rails_v = [0, V+]")
        return Supply(rails_v=rails, reference_v=0.0)
    ref = sup.number("reference_v", (rails[0] + rails[1]) / 2)
    if not rails[0] < ref < rails[1]:
        raise sup.error("reference_v", f"must lie between the rails {rails[0]:g} V and "
                        f"{rails[1]:g} V")
    return Supply(rails_v=rails, reference_v=ref)


def read_dc_level(inp: TableReader, supply: Supply) -> float:
    """`[input] dc_v`: the source's DC level (default 0 V), inside the rails."""
    dc_v = inp.number("dc_v", 0.0, low=-MAX_VOLTS, high=MAX_VOLTS)
    lo, hi = supply.rails_v
    if not lo <= dc_v <= hi:
        raise inp.error("dc_v", f"beyond the rails [{lo:g}, {hi:g}] V")
    return dc_v


def read_amplifier(path: str, prefix: str, table: Any) -> AmplifierChoice:
    """`[amplifier]` (or a stage's own): archetype name plus explicit overrides."""
    amp = TableReader(path, prefix, table, ("archetype",) + AMPLIFIER_KEYS)
    overrides = read_amplifier_dc(amp)
    for key in AMPLIFIER_KEYS:
        if key in AMPLIFIER_DC_KEYS:
            continue
        if amp.has(key):
            value = amp.number(key, nonnegative=True)
            if key in ("gbw_hz", "slew_v_per_us", "dc_gain_db") and not value > 0:
                raise amp.error(key, "must be > 0")
            lo, hi = AMPLIFIER_RANGES[key]
            if not lo <= value <= hi:
                raise amp.error(key, f"outside {lo:g} … {hi:g}, the range of an op-amp model")
            overrides.append((key, value))
    return AmplifierChoice(archetype=amp.string("archetype"), overrides=tuple(overrides))


def read_amplifier_dc(amp: TableReader) -> list[tuple[str, float]]:
    """The op-amp's DC errors, `offset_v` (V) and `bias_current_a` (A into each input),
    signed, and `input_cm_to_rail_v` (V; negative: beyond the rail), within
    AMPLIFIER_RANGES."""
    out = []
    for key in AMPLIFIER_DC_KEYS:
        if amp.has(key):
            lo, hi = AMPLIFIER_RANGES[key]
            out.append((key, amp.number(key, low=lo, high=hi)))
    return out


def read_passband(pb: TableReader) -> Passband:
    by_centre = pb.has("center_hz") or pb.has("bandwidth_hz")
    by_edges = pb.has("low_hz") or pb.has("high_hz")
    if by_centre and by_edges:
        raise SpecError(pb.path, "passband", "give either center_hz + bandwidth_hz or "
                        "low_hz + high_hz, not both")
    if by_edges:
        low = _freq(pb, "low_hz", required=True)
        high = _freq(pb, "high_hz", required=True)
        if not low < high:
            raise pb.error("high_hz", f"must be above passband.low_hz = {low:g}")
    elif by_centre:
        f0 = _freq(pb, "center_hz", required=True)
        bw = pb.number("bandwidth_hz", required=True, positive=True, high=_F_HI)
        # Geometric centre: low * high = f0^2 and high - low = bw.
        low = (math.sqrt(bw * bw + 4 * f0 * f0) - bw) / 2
        high = low + bw
    else:
        raise SpecError(pb.path, "passband", "missing band: give center_hz + bandwidth_hz, or "
                        "low_hz + high_hz")
    # The 1e-9 allows for rounding: a band given as exactly 1e-6 of its centre is accepted.
    if (high - low) / math.sqrt(low * high) < MIN_FRACTIONAL_BANDWIDTH * (1 - 1e-9):
        name = "high_hz" if by_edges else "bandwidth_hz"
        raise pb.error(name, f"the band is narrower than {MIN_FRACTIONAL_BANDWIDTH:g} of its "
                       f"centre (Q above {1 / MIN_FRACTIONAL_BANDWIDTH:g}): no active filter "
                       f"holds that")
    if not (_F_LO <= low and high <= _F_HI):
        raise pb.error("bandwidth_hz", f"the band [{low:g}, {high:g}] Hz leaves "
                       f"{format_hz(_F_LO)} … "
                       f"{format_hz(_F_HI)}, the range this tool plans for")
    max_loss = pb.number("max_loss_db", HALF_POWER_DB, positive=True, high=40.0)
    gain_db = pb.number("gain_db", 0.0, low=-60.0, high=120.0)
    gain_tol = pb.number("gain_tolerance_db", 0.5, positive=True, high=20.0)
    return Passband(low_hz=low, high_hz=high, max_loss_db=max_loss, gain_db=gain_db,
                    gain_tolerance_db=gain_tol)


def read_stop(path: str, i: int, table: Any, passband: Passband) -> StopbandPoint:
    st = TableReader(path, f"stopband[{i}]", table, ("freq_hz", "min_loss_db"))
    f = _freq(st, "freq_hz", required=True)
    a = st.number("min_loss_db", required=True, positive=True, high=300.0)
    if passband.low_hz <= f <= passband.high_hz:
        raise st.error("freq_hz", f"lies inside the passband [{passband.low_hz:g}, "
                       f"{passband.high_hz:g}] Hz")
    if not a > passband.max_loss_db:
        raise st.error("min_loss_db", f"must exceed passband.max_loss_db = "
                       f"{passband.max_loss_db:g} dB")
    return StopbandPoint(freq_hz=f, min_loss_db=a)


def _percent(t: TableReader, name: str, default: float | None, *, zero_ok: bool
             ) -> float | None:
    """A ± percentage below 50 (a part off by half its value is not a tolerance)."""
    v = t.number(name, default)
    if v is None or (zero_ok and v == 0):
        return v
    if not 0 < v < _MAX_TOLERANCE_PCT:
        low = ">= 0" if zero_ok else "> 0"
        raise t.error(name, f"must be {low} and < {_MAX_TOLERANCE_PCT:g} (percent)")
    return v


def read_tolerance(t: TableReader) -> Tolerance:
    """`[tolerance]`: part and GBW spreads, distribution, samples, seed, min_yield.

    Part tolerances left out stay None: the planner then uses the tolerance customary for
    the design's series (``parts.tolerance``).
    """
    base = Tolerance()
    dist = t.table.get("distribution")
    if isinstance(dist, str) and dist.lower() in ("normal", "gauss"):
        # difflib would offer "uniform" for "normal": name the distribution meant.
        raise t.error("distribution", "must be one of uniform, gaussian; did you mean "
                      "'gaussian' (the normal distribution)?")
    min_yield = t.number("min_yield", base.min_yield)
    if not 0 < min_yield <= 1:
        raise t.error("min_yield", "must be > 0 and <= 1 (a share, e.g. 0.95)")
    return Tolerance(
        resistor_pct=_percent(t, "resistor_pct", None, zero_ok=False),
        capacitor_pct=_percent(t, "capacitor_pct", None, zero_ok=False),
        distribution=t.string("distribution", base.distribution, choices=DISTRIBUTIONS),
        gbw_spread_pct=_percent(t, "gbw_spread_pct", base.gbw_spread_pct, zero_ok=True),
        samples=t.integer("samples", base.samples, low=10, high=_MAX_SAMPLES),
        seed=t.integer("seed", base.seed, low=0, high=2**32 - 1),
        min_yield=min_yield,
    )


def read_time(t: TableReader, passband: Passband) -> TimeLimits:
    """`[time]`: burst length and limits on the time-domain figures, each > 0 when given.

    A burst shorter than one period of the passband's low edge holds no whole cycle of
    every tone it is read at, so it has no envelope to speak of.
    """
    values = {k: t.number(k, None, positive=True, high=_MAX_TIME_S if k.endswith("_s")
                          else 1e6) for k in TIME_KEYS}
    burst = values["burst_s"]
    if burst is not None and burst < 1.0 / passband.low_hz:
        raise t.error("burst_s", f"shorter than one period of the passband's low edge "
                      f"({format_si(1.0 / passband.low_hz, 's', significant=4)})")
    return TimeLimits(**values)
def read_tuning(t: TableReader) -> Tuning:
    """`[tuning]`: `enabled` (true, false; left out: trim only when the yield needs it)."""
    if not t.has("enabled"):
        return Tuning()
    v = t.table["enabled"]
    if not isinstance(v, bool):
        raise t.error("enabled", "must be true or false (a TOML boolean)")
    return Tuning(enabled=v)


def _read_design(d: TableReader) -> DesignChoice:
    return DesignChoice(
        family=d.string("family", None, choices=FAMILIES),
        order=d.integer("order", None, low=1, high=20),
        resistor_series=d.string("resistor_series", "E96", choices=SERIES_NAMES),
        capacitor_series=d.string("capacitor_series", "E12", choices=SERIES_NAMES),
    )


def _signal_swing_v(supply: Supply) -> float:
    """The largest peak the rails allow around the signal reference (mid-supply, or the
    supply's `reference_v` where it has one)."""
    lo, hi = supply.rails_v
    ref = getattr(supply, "reference_v", None)
    if ref is None:
        ref = 0.0 if lo < 0 < hi else (lo + hi) / 2
    return min(hi - ref, ref - lo)


def read_converter(path: str, table: Any, *, passband: Passband | None,
                   supply: Supply) -> Converter | None:
    """`[converter]`: the ADC the chain drives (None when the table is absent).

    The sample rate must be at least twice the upper passband edge (else the band itself
    folds: Nyquist's criterion); the full scale must fit inside the rails.
    """
    if table is None:
        return None
    t = TableReader(path, "converter", table, CONVERTER_KEYS)
    fs = _freq(t, "sample_rate_hz", required=True)
    if passband is not None and fs < 2 * passband.high_hz:
        raise t.error("sample_rate_hz", f"below twice the upper passband edge "
                      f"({format_hz(2 * passband.high_hz)}): the band itself would fold")
    if not t.has("bits"):
        raise SpecError(path, "converter.bits", "missing (a whole number of bits, 4 to 32)")
    bits = t.integer("bits", low=4, high=32)
    fs_vpp = t.number("full_scale_vpp", required=True, positive=True, high=2 * MAX_VOLTS)
    swing = _signal_swing_v(supply)
    if fs_vpp / 2 > swing:
        raise t.error("full_scale_vpp", f"{fs_vpp / 2:g} Vpk is beyond the rails "
                      f"{supply.rails_v[0]:g}/{supply.rails_v[1]:+g} V (at most {2 * swing:g} Vpp)")
    enob = t.number("enob", None, positive=True)
    if enob is not None and enob > bits:
        raise t.error("enob", f"more effective bits than converter.bits = {bits}")
    if enob is not None and enob < 1:
        raise t.error("enob", "must be >= 1")
    return Converter(
        sample_rate_hz=fs, bits=bits, full_scale_vpp=fs_vpp, enob=enob,
        input_ohms=t.number("input_ohms", None, positive=True, high=_MAX_OHMS),
        input_farads=t.number("input_farads", 0.0, nonnegative=True, high=1e-3),
        max_alias_dbfs=t.number("max_alias_dbfs", None, low=-300.0, high=0.0),
        headroom_db=t.number("headroom_db", 1.0, nonnegative=True, high=40.0))
