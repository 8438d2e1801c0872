"""The SPICE deck writer: a chain's element list as an ngspice-39 batch deck (``chain.cir``).

The deck is the same element list the nodal solver analyses (docs/design.md, "one element list
per stage is the truth"), written so that ngspice's ``.ac`` and ``.noise`` reproduce the
nodal solver's response and noise, op-amp noise included.

Deck layout (docs/design.md, "Interfaces")
------------------------------------
* ``VIN src 0 DC <dc_v> AC 1`` -- the unit source at the source's DC level; ``RSRC src in`` -- the source resistance.
  ngspice cannot hold a 0 ohm resistor, so ``source_ohms == 0`` is written as
  ``TINY_SOURCE_OHMS`` (1 mohm). Its thermal noise, 4kT x 1 mohm (4 pV/sqrt(Hz)), enters
  exactly where the signal does; against the 4kTR of any input resistor R >= 100 ohm it is
  below 1e-5 in power (4e-5 dB), and it moves the transfer by about 1 mohm / R_in. A 0 V
  source would be exact but would break the fixed ``RSRC src in`` line of the interface.
* Chain input on net ``in``, output on ``out``; nets and part names as in the element list
  (R and C names already start with their SPICE letter; an op-amp ``U1_s2`` becomes the
  instance ``XU1_s2``). Resistors keep their ordinary thermal noise.
* One ``.subckt`` per distinct ``OpAmp`` model, pins ``(plus minus out)``; ``.temp`` from
  the requirement; no analysis statement (the user, or a test, appends one); ``.end`` last.

The op-amp subcircuit
---------------------
**Gain.** The single-pole model A(s) = A0 / (1 + s A0/wt), wt = 2 pi GBW (Franco 2015,
§6.1 [mem]; ``parts.opamp.OpAmp``), built from controlled sources so that it has no noise
of its own::

    G_A  0 x pi minus 1        1 S x (V(pi) - V(minus)) into node x
    G_R  x 0 x 0 1/A0          a conductance 1/A0, made of a VCCS: noiseless, unlike R
    C_P  x 0 1/wt              so V(x) = (V+ - V-) A0 / (1 + s A0/wt)
    E_O  out 0 x 0 1           ideal output buffer

The inputs only drive controlling ports, so the input impedance is infinite, as in the
nodal solver; the output is ideal. An ideal op-amp (``gbw_hz`` infinite, which the nodal
solver treats as a nullor) or an infinite A0 cannot be written as such; it is written with
the finite stand-in ``IDEAL_GAIN`` = 1e12 in place of the missing A0 or pole, whose effect
(relative 1e-12 times the noise gain) is far below what ngspice prints.

**Noise.** The model (Motchenbacher & Connelly 1993, ch. 4 [mem]) has a voltage noise
e_n^2(f) = e_w^2 (1 + fc/f) in series with the + input and an independent current noise
i_n^2(f) = i_w^2 (1 + fci/f) into each input, fci the current noise's own corner (the
voltage corner unless the model sets it apart; the current-noise diodes then get a diode
model of their own). ngspice's ``.noise`` only evaluates device
noise, so each of these three generators is made of diodes:

* A diode fed by an ideal DC current I carries shot noise 2qI (A^2/Hz, Schottky 1918) and
  flicker noise KF I^AF / f (ngspice-39 User's Manual, diode model parameters KF and AF
  [mem]; the same form is evaluated in ngspice's ``dio/dionoise.c``). With AF = 1 and
  KF = 2 q fc the sum is 2qI (1 + fc/f): exactly the model's shape, corner included.
* The noise current flows through the diode's own small-signal resistance
  r_d = n Vt / I (n = 1, Vt = kT/q at the deck's ``.temp``; the current source is an open
  circuit for small signals), giving a noise voltage 2qI r_d^2 (1 + fc/f).
* The diodes come in identical pairs with identical bias and the generator senses the
  difference of their voltages: the DC (about 0.66 V each) cancels exactly, so no DC
  reaches a signal net, and the two uncorrelated noises add to
  S_pair = 4 q Vt^2 / I x (1 + fc/f) (V^2/Hz).
* The voltage noise is a VCVS ``E_N pi plus a b g`` with g = e_w / sqrt(4 q Vt^2 / I),
  so V(pi) = V(plus) + e_n; the gain stage reads ``pi``. Each current noise is a VCCS
  ``G plus 0 a b gm`` (or ``minus``) with gm = i_w / sqrt(4 q Vt^2 / I). Controlled sources
  have no admittance at their output-controlling pins here (a VCCS draws no current that
  depends on the pin's voltage, a VCVS's controlling port is open), so the generators
  neither load the signal path nor add DC to it.
* Every diode network has its DC path through the diode itself: no high-value resistors to
  ground are needed, so there is no extra thermal noise to measure or compensate.

Vt enters the gains, so the generators are calibrated for the ``.temp`` the deck carries
(the model's e_w and i_w do not change with temperature): editing ``.temp`` by hand would
scale the op-amp noise powers by (T/T_deck)^2. Write a new deck for another temperature.
q and k are the exact SI 2019 values; ngspice-39's built-in constants differ from them in
the seventh digit, far below the test tolerances. The diode's gmin (1e-12 S) and IS
(1e-14 A) change r_d by under 1e-9 relative at I = 1 mA.

References
----------
.. [1] ngspice-39 User's Manual: diode model (noise parameters KF, AF), the ``.noise``
   analysis, subcircuits, controlled sources E and G, ``.temp`` [mem].
.. [2] C. D. Motchenbacher, J. A. Connelly, *Low-Noise Electronic System Design*, Wiley,
   1993, ch. 4 -- op-amp e_n / i_n model with a 1/f corner [mem].
.. [3] W. Schottky, "Über spontane Stromschwankungen in verschiedenen
   Elektrizitätsleitern", Ann. Phys. 57, 1918 -- shot noise 2qI [mem].
.. [4] S. Franco, *Design with Operational Amplifiers and Analog Integrated Circuits*,
   4th ed., McGraw-Hill, 2015, §6.1 -- the single-pole op-amp [mem].
"""

from __future__ import annotations

import hashlib
import math
import re
from typing import Sequence

from bandwright import __version__
from bandwright.circuits.elements import GROUND, SUPPLY_NET, Element
from bandwright.circuits.nodal import BOLTZMANN_J_PER_K, KELVIN_OFFSET
from bandwright.parts.notation import format_spice
from bandwright.parts.opamp import OpAmp

__all__ = [
    "CHARGE_C",
    "BOLTZMANN_J_PER_K",
    "NOISE_BIAS_A",
    "TINY_SOURCE_OHMS",
    "IDEAL_GAIN",
    "SOURCE_NET",
    "subckt_name",
    "noise_sense_gain",
    "opamp_subckt",
    "spice_deck",
]

CHARGE_C = 1.602176634e-19  # elementary charge, exact since the 2019 SI redefinition
NOISE_BIAS_A = 1e-3  # DC current of every noise diode
TINY_SOURCE_OHMS = 1e-3  # RSRC when the source is ideal (SPICE has no 0 ohm resistor)
IDEAL_GAIN = 1e12  # stands in for an infinite A0 or GBW, which SPICE cannot write
SOURCE_NET = "src"

_DIGITS = 12  # significant digits of every number in the deck: the analysed values
_BAD_NET_CHARS = re.compile(r"[\s=(),;{}'\"*]")
_SPICE_LETTER = {"R": "R", "C": "C", "opamp": "X"}


def _num(value: float) -> str:
    return format_spice(value, significant=_DIGITS)


def _show(value: float) -> str:
    """A number for a comment line, where infinity may appear."""
    return _num(value) if math.isfinite(value) else str(value)


def subckt_name(model: OpAmp) -> str:
    """The subcircuit name of an op-amp model: sanitised name plus a short hash.

    Parameters
    ----------
    model : OpAmp
        The op-amp model.

    Returns
    -------
    str
        ``oa_<name>_<8 hex digits>``: lower case, letters, digits and ``_`` only. The hash
        covers every field of the model, so two models that share a name but differ in
        any number get different subcircuits.
    """
    stem = re.sub(r"[^a-z0-9]+", "_", model.name.lower()).strip("_")[:20] or "model"
    digest = hashlib.sha256(repr(model).encode()).hexdigest()[:8]
    return f"oa_{stem}_{digest}"


def noise_sense_gain(white_density: float, *, temperature_c: float,
                     bias_a: float = NOISE_BIAS_A) -> float:
    """Gain that scales a diode pair's noise voltage to a white density.

    Parameters
    ----------
    white_density : float
        Wanted white density: V/sqrt(Hz) (the gain is then a VCVS gain, V/V) or
        A/sqrt(Hz) (a VCCS transconductance, A/V).
    temperature_c : float
        Temperature of the deck (``.temp``), degrees Celsius.
    bias_a : float, optional
        DC current through each diode, A.

    Returns
    -------
    float
        white_density / sqrt(4 q Vt^2 / I).

    Notes
    -----
    Each diode carries shot noise 2qI (Schottky 1918 [mem]) across its small-signal
    resistance n Vt / I with n = 1 and Vt = kT/q; the difference of two identical,
    uncorrelated diodes has the white voltage PSD 4 q Vt^2 / I (module docstring).
    """
    vt_v = BOLTZMANN_J_PER_K * (temperature_c + KELVIN_OFFSET) / CHARGE_C
    pair_psd_v2_per_hz = 4 * CHARGE_C * vt_v**2 / bias_a
    return white_density / math.sqrt(pair_psd_v2_per_hz)


def _diode_pair(tag: str, model_name: str) -> list[str]:
    """Two identical current-biased diodes on nets <tag>a and <tag>b (a floating pair)."""
    lines = []
    for side in ("a", "b"):
        net = f"{tag}{side}"
        lines.append(f"I_{net} 0 {net} DC {_num(NOISE_BIAS_A)}")
        lines.append(f"D_{net} {net} 0 {model_name}")
    return lines


def opamp_subckt(model: OpAmp, *, temperature_c: float) -> str:
    """The ``.subckt`` of one op-amp model: single-pole gain and its noise generators.

    Parameters
    ----------
    model : OpAmp
        The op-amp model.
    temperature_c : float
        The deck's temperature, degrees Celsius: the noise generators are calibrated for it.

    Returns
    -------
    str
        Lines from a comment naming the model through ``.ends``, newline-terminated. Pins
        ``plus minus out``.

    Notes
    -----
    See the module docstring: gain A0/(1 + s A0/wt) (Franco 2015, §6.1 [mem]) from
    noiseless controlled sources; e_n in series with the + input and i_n into each input,
    each with PSD white x (1 + corner/f), each noise with its own corner
    (Motchenbacher & Connelly 1993, ch. 4 [mem]), made
    of current-biased diode pairs (shot plus flicker noise, KF = 2 q fc, AF = 1).
    """
    name = subckt_name(model)
    diode = f"d_{name}"
    e_w = model.noise_v_per_rthz
    i_w = model.noise_a_per_rthz
    fc_hz = model.noise_corner_hz
    fci_hz = model.current_noise_corner_hz
    # The current-noise diodes get a model of their own when their corner differs.
    diode_i = diode if fci_hz == fc_hz else f"di_{name}"
    lines = [
        f"* op-amp model {model.name!r}: GBW {_show(model.gbw_hz)} Hz, A0 "
        f"{_show(model.dc_gain_db)} dB, e_w {_show(e_w)} V/rtHz, i_w {_show(i_w)} A/rtHz, "
        f"1/f corner {_show(fc_hz)} Hz"
        + ("" if fci_hz == fc_hz else f" (current noise {_show(fci_hz)} Hz)"),
        f".subckt {name} plus minus out",
    ]
    if e_w > 0:
        g = noise_sense_gain(e_w, temperature_c=temperature_c)
        lines.append("* voltage noise in series with the + input: pi = plus + e_n")
        lines += _diode_pair("ne", diode)
        lines.append(f"E_N pi plus nea neb {_num(g)}")
        plus_inner = "pi"
    else:
        plus_inner = "plus"
    if i_w > 0:
        gm = noise_sense_gain(i_w, temperature_c=temperature_c)
        lines.append("* current noise into each input, independent")
        lines += _diode_pair("np", diode_i)
        lines.append(f"G_NP plus 0 npa npb {_num(gm)}")
        lines += _diode_pair("nm", diode_i)
        lines.append(f"G_NM minus 0 nma nmb {_num(gm)}")
    vos = getattr(model, "offset_v", 0.0)
    ib = getattr(model, "bias_current_a", 0.0)
    if vos:
        lines.append("* input offset in series with the + input (DC only)")
        lines.append(f"V_OS po {plus_inner} DC {_num(vos)}")
        plus_inner = "po"
    if ib:
        lines.append("* input bias current into each pin (DC only)")
        lines.append(f"I_BP plus 0 DC {_num(ib)}")
        lines.append(f"I_BM minus 0 DC {_num(ib)}")
    inv_a0 = 1.0 / model.a0 if math.isfinite(model.a0) else 1.0 / IDEAL_GAIN
    if math.isfinite(model.gbw_hz):
        lines += [
            "* single pole: V(x) = (V(pi) - V(minus)) A0 / (1 + s A0 / (2 pi GBW))",
            f"G_A 0 x {plus_inner} minus 1",
            f"G_R x 0 x 0 {_num(inv_a0)}",
            f"C_P x 0 {_num(1.0 / (2 * math.pi * model.gbw_hz))}",
            "E_O out 0 x 0 1",
        ]
    else:
        lines += [
            f"* ideal op-amp: gain {_num(IDEAL_GAIN)} stands in for the nullor",
            f"E_O out 0 {plus_inner} minus {_num(IDEAL_GAIN)}",
        ]
    for model_name, corner_hz, used in ((diode, fc_hz, e_w > 0 or (i_w > 0 and diode_i == diode)),
                                        (diode_i, fci_hz, i_w > 0 and diode_i != diode)):
        if used:
            flicker = f" KF={_num(2 * CHARGE_C * corner_hz)} AF=1" if corner_hz > 0 else ""
            lines.append(f".model {model_name} D(IS=1e-14 N=1{flicker})")
    lines.append(f".ends {name}")
    return "\n".join(lines) + "\n"


def _check_net(net: object, owner: str) -> str:
    if not isinstance(net, str) or not net or _BAD_NET_CHARS.search(net):
        raise ValueError(f"{owner}: net {net!r} cannot be written to SPICE (empty, or "
                         "contains white space or one of = ( ) , ; {{ }} ' \" *)")
    if net.lower() == SOURCE_NET:
        raise ValueError(f"{owner}: net {net!r} is reserved for the source (VIN, RSRC)")
    return net


def _spice_name(e: Element) -> str:
    letter = _SPICE_LETTER[e.kind]
    if e.kind == "opamp" or not e.name[:1].upper() == letter:
        return letter + e.name
    return e.name


def _element_line(e: Element, spice_name: str) -> str:
    if e.kind in ("R", "C"):
        return f"{spice_name} {e.nets[0]} {e.nets[1]} {_num(e.value)}"
    return f"{spice_name} {' '.join(e.nets)} {subckt_name(e.model)}"


def _validate(elements: Sequence[Element]) -> list[str]:
    """Check the element list; return the SPICE name of each element."""
    if not elements:
        raise ValueError("the element list is empty")
    names: list[str] = []
    seen: dict[str, str] = {}
    nets: set[str] = set()
    for e in elements:
        if e.kind not in _SPICE_LETTER:
            raise ValueError(f"{e.name}: unknown element kind {e.kind!r}")
        if not e.name or _BAD_NET_CHARS.search(e.name):
            raise ValueError(f"element name {e.name!r} cannot be written to SPICE")
        want = 3 if e.kind == "opamp" else 2
        if len(e.nets) != want:
            raise ValueError(f"{e.name}: a {e.kind} needs {want} nets, got {e.nets}")
        if e.kind == "opamp":
            if e.model is None:
                raise ValueError(f"{e.name}: op-amp without a model")
            if e.nets[2] == GROUND:
                raise ValueError(f"{e.name}: op-amp output tied to ground")
        elif not (math.isfinite(e.value) and e.value > 0):
            raise ValueError(f"{e.name}: value {e.value!r} must be finite and > 0")
        nets.update(_check_net(n, e.name) for n in e.nets)
        name = _spice_name(e)
        # SPICE ignores case, so "R1" and "r1" are the same part.
        if name.lower() in seen:
            raise ValueError(f"{e.name}: SPICE name {name} clashes with {seen[name.lower()]}")
        seen[name.lower()] = e.name
        names.append(name)
    for needed in ("in", "out"):
        if needed not in nets:
            raise ValueError(f"the element list has no net {needed!r} (chain "
                             f"{'input' if needed == 'in' else 'output'})")
    return names


def spice_deck(elements: Sequence[Element], *, source_ohms: float, temperature_c: float,
               title: str, dc_v: float = 0.0, supply_v: float | None = None) -> str:
    """Write a whole chain as an ngspice-39 batch deck (the ``chain.cir`` of docs/design.md).

    Parameters
    ----------
    elements : sequence of Element
        Flat element list of the chain: ground "0", input net "in", output net "out",
        unique names (R and C names start with R and C; op-amp ``U1_s2`` is written
        ``XU1_s2``).
    source_ohms : float
        Source resistance, ohms, between the 1 V source (net ``src``) and ``in``; 0 is
        written as ``TINY_SOURCE_OHMS``.
    temperature_c : float
        Temperature of every part, degrees Celsius (``.temp``).
    title : str
        First line of the deck (line breaks are replaced by spaces).
    dc_v : float, optional
        The source's DC level (``VIN src 0 DC <dc_v> AC 1``), V.
    supply_v : float or None, optional
        A single supply's upper rail, V: written as ``VCC vcc 0 DC <supply_v>`` so that the
        reference network in `elements` (from net ``vcc``) sets the operating point.

    Returns
    -------
    str
        The deck, ending in ``.end`` and a newline. It holds no analysis statement and no
        control block.

    Raises
    ------
    ValueError
        On an empty list, an unknown kind, a bad or reserved net name (``src``), a
        non-positive part value, an op-amp without a model, a SPICE name clash, a missing
        ``in`` or ``out`` net, a negative or non-finite source resistance, or a
        temperature at or below absolute zero.

    Notes
    -----
    Resistors keep their thermal noise 4kT/R (Johnson; Nyquist, Phys. Rev. 32, 1928).
    Each op-amp is an instance of its model's ``opamp_subckt``; how that subcircuit
    reproduces the single-pole gain (Franco 2015, §6.1 [mem]) and the e_n / i_n noise
    with its 1/f corner (Motchenbacher & Connelly 1993, ch. 4 [mem]) is explained in the
    module docstring.

    Examples
    --------
    >>> from bandwright.circuits.elements import capacitor, resistor
    >>> deck = spice_deck((resistor("R1", "in", "out", 1e3), capacitor("C1", "out", "0", 1e-9)),
    ...                   source_ohms=50.0, temperature_c=25.0, title="RC")
    >>> [line for line in deck.splitlines() if not line.startswith("*")]
    ['RC', 'VIN src 0 DC 0 AC 1', 'RSRC src in 50', 'R1 in out 1k', 'C1 out 0 1n', '.temp 25', '.end']
    """
    if not (math.isfinite(source_ohms) and source_ohms >= 0):
        raise ValueError(f"source_ohms must be finite and >= 0; got {source_ohms!r}")
    if not (math.isfinite(temperature_c) and temperature_c > -KELVIN_OFFSET):
        raise ValueError(f"temperature_c must be finite and above -273.15; got {temperature_c!r}")
    names = _validate(elements)
    models: dict[str, OpAmp] = {}
    for e in elements:
        if e.kind == "opamp":
            models.setdefault(subckt_name(e.model), e.model)

    first_line = " ".join(str(title).split()) or "bandwright chain"
    rsrc_ohms = source_ohms if source_ohms > 0 else TINY_SOURCE_OHMS
    lines = [
        first_line,
        f"* bandwright {__version__}: the chain as built, for ngspice-39 (batch mode).",
        "* Nets: src = the 1 V AC source (VIN) ahead of the source resistance RSRC;",
        "*       in = chain input (behind RSRC); out = chain output; 0 = ground;",
        "*       other nets are internal to a stage (suffix _s<position>).",
        "* Op-amps are instances X<name> of the single-pole noise models below; resistors",
        "* carry thermal noise. No analysis is included: append one, e.g. ac and noise",
        "* with v(out) as output and vin as the input source.",
        "*",
        "* source",
        f"VIN {SOURCE_NET} 0 DC {_num(dc_v)} AC 1",
    ]
    if supply_v is not None:
        lines += ["* single supply: the upper rail feeds the reference network",
                  f"VCC {SUPPLY_NET} 0 DC {_num(supply_v)}"]
    if source_ohms == 0:
        lines.append(f"* ideal source: {_num(TINY_SOURCE_OHMS)} ohm stands in for 0 ohm")
    lines.append(f"RSRC {SOURCE_NET} in {_num(rsrc_ohms)}")
    if models:
        lines += ["*", "* op-amp models (noise generators calibrated for the .temp below)"]
        for model in models.values():
            lines += opamp_subckt(model, temperature_c=temperature_c).splitlines()
    lines += ["*", "* chain"]
    lines += [_element_line(e, n) for e, n in zip(elements, names)]
    lines += ["*", f".temp {temperature_c:.{_DIGITS}g}", ".end"]
    return "\n".join(lines) + "\n"
