"""Linear nodal analysis of an element list: AC response and noise, batched.

The element list (``circuits.elements``) is stamped once into modified-nodal-analysis
(MNA) matrices ``G + s C`` as arrays; the frequency axis and the optional sample axis
(part values for Monte Carlo) are broadcast over them and every system is solved in one
stacked ``np.linalg.solve`` call.

Conventions
-----------
* Ground is net ``"0"``; it has no unknown.
* The drive is a unit (1 V) AC source, ahead of ``source_ohms``. A positive
  ``source_ohms`` is stamped as its Norton equivalent (1/Rs into the input net, Rs from the
  input net to ground), so the input net is the far side of the source resistance and no
  source net exists. With ``source_ohms == 0`` an ideal voltage source holds the input net
  (one extra unknown: its current).
* Op-amp (single-pole model, ``parts.opamp.OpAmp``): an output voltage source whose
  equation row is ``V_out (1/A0 + s/wt) - (V+ - V-) = 0``, i.e. ``V_out = A(s) (V+ - V-)``
  with ``A(s) = A0 / (1 + s A0/wt)`` divided through by ``A0`` so that A0 -> inf and
  wt -> inf stay finite and well conditioned. ``gbw_hz == math.inf`` means an ideal
  op-amp (nullor): the row is ``V+ - V- = 0`` whatever ``dc_gain_db`` says.

References
----------
.. [1] C.-W. Ho, A. E. Ruehli, P. A. Brennan, "The modified nodal approach to network
   analysis", IEEE Trans. Circuits Syst. CAS-22(6), 1975, pp. 504-509 [mem].
.. [2] J. Vlach, K. Singhal, *Computer Methods for Circuit Analysis and Design*, 2nd ed.,
   Van Nostrand Reinhold, 1994, ch. 3 (MNA stamps) and ch. 11 (adjoint network,
   noise) [mem].
.. [3] J. B. Johnson, "Thermal agitation of electricity in conductors"; H. Nyquist,
   "Thermal agitation of electric charge in conductors", Phys. Rev. 32, 1928 -- 4kTR.
.. [4] C. D. Motchenbacher, J. A. Connelly, *Low-Noise Electronic System Design*, Wiley,
   1993, ch. 4 -- op-amp e_n / i_n model with 1/f corner [mem].
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass
from typing import Sequence

import numpy as np

from bandwright.circuits.elements import GROUND, SUPPLY_NET, Element

__all__ = [
    "BOLTZMANN_J_PER_K",
    "KELVIN_OFFSET",
    "MnaSystem",
    "NodalSolution",
    "NoiseResult",
    "passive_names",
    "mna_system",
    "ac_solve",
    "transfer",
    "noise",
    "drawn_impedance",
    "input_impedance_min",
    "input_impedance_max",
    "DcSolution",
    "dc_solve",
    "floating_nets",
]

BOLTZMANN_J_PER_K = 1.380649e-23  # exact since the 2019 SI redefinition
KELVIN_OFFSET = 273.15  # 0 °C in kelvin (SI): temperatures are given in °C


def passive_names(elements: Sequence[Element]) -> tuple[str, ...]:
    """Names of every R and C, in element order: the column order of ``values``.

    Parameters
    ----------
    elements : sequence of Element
        The element list.

    Returns
    -------
    tuple of str
        Reference designators of the passive parts (the keys of
        ``elements.passive_values``, in the same order).
    """
    return tuple(e.name for e in elements if e.kind in ("R", "C"))


@dataclass(frozen=True, slots=True)
class MnaSystem:
    """Stamped MNA matrices of an element list: ``(G + s C) x = rhs``.

    Attributes
    ----------
    nets : tuple of str
        Non-ground nets; unknown ``i`` is the voltage of ``nets[i]`` for ``i < len(nets)``.
        Further unknowns are branch currents (ideal source, op-amp outputs).
    g : ndarray of float, shape (M, M) or (S, M, M)
        Conductance part, siemens (op-amp rows: dimensionless).
    c : ndarray of float, shape (M, M) or (S, M, M)
        Capacitance part, farads (op-amp rows: 1/wt in seconds).
    rhs : ndarray of float, shape (M,)
        Excitation of the unit AC source (open-circuit 1 V).
    opamp_rows : dict of str to int
        Row (unknown index) of each op-amp's equation, by op-amp name.
    """

    nets: tuple[str, ...]
    g: np.ndarray
    c: np.ndarray
    rhs: np.ndarray
    opamp_rows: dict[str, int]

    @property
    def size(self) -> int:
        """Number of unknowns M."""
        return self.rhs.shape[0]

    def index(self, net: str) -> int:
        """Unknown index of a net.

        Parameters
        ----------
        net : str
            Net name.

        Returns
        -------
        int
            Its unknown index; -1 for ground.

        Raises
        ------
        KeyError
            If the net is not in the element list.
        """
        if net in (GROUND, SUPPLY_NET):
            return -1
        try:
            return self.nets.index(net)
        except ValueError:
            raise KeyError(f"net {net!r} is not in the element list (nets: {self.nets})") from None


def _net_order(elements: Sequence[Element], input_net: str) -> tuple[str, ...]:
    # The supply rail is an ideal DC source: for small signals it is ground.
    nets: list[str] = [input_net] if input_net != GROUND else []
    for e in elements:
        for n in e.nets:
            if n not in (GROUND, SUPPLY_NET) and n not in nets:
                nets.append(n)
    return tuple(nets)


def _check_values(elements: Sequence[Element], values: np.ndarray | None) -> np.ndarray:
    """Passive values as an array (P,) or (S, P), validated."""
    names = passive_names(elements)
    if values is None:
        v = np.array([e.value for e in elements if e.kind in ("R", "C")], dtype=float)
    else:
        v = np.asarray(values, dtype=float)
        if v.ndim != 2 or v.shape[1] != len(names):
            raise ValueError(
                f"values must have shape (S, {len(names)}) in the order {names}; got {v.shape}")
    # min > 0 rules out zeros, negatives, -inf and NaN (a NaN minimum compares False); a
    # finite maximum rules out +inf: two reductions for the four tests.
    if v.size and not (v.min() > 0 and math.isfinite(v.max())):
        raise ValueError(f"every R and C value must be finite and > 0 (parts {names})")
    return v


@dataclass(frozen=True, slots=True)
class _Stamps:
    """What one wiring stamps whatever its part values: the passive parts' incidence
    tensor, the fixed (source and op-amp) entries, the excitation and the unknowns."""

    nets: tuple[str, ...]
    idx: dict[str, int]
    incidence: np.ndarray          # (P, M, M)
    is_r: np.ndarray               # (P,)
    g_fix: np.ndarray              # (M, M)
    c_fix: np.ndarray              # (M, M)
    rhs: np.ndarray                # (M,)
    opamp_rows: dict[str, int]


@functools.lru_cache(maxsize=512)
def _stamps(wiring: tuple, input_net: str, source_ohms: float) -> _Stamps:
    """``_Stamps`` of a wiring: (name, kind, nets, model) per element. A search evaluates the
    same few wirings thousands of times with other values; their stamps are made once."""
    elements = [Element(name=n, kind=k, nets=nets, model=m) for n, k, nets, m in wiring]
    nets = _net_order(elements, input_net)
    n_nets = len(nets)
    ideal_source = source_ohms == 0.0
    opamps = [e for e in elements if e.kind == "opamp"]
    size = n_nets + int(ideal_source) + len(opamps)
    gnd = size  # ground gets a scratch slot that is sliced off, so stamps need no branches
    idx = {n: i for i, n in enumerate(nets)}
    idx[GROUND] = gnd
    idx[SUPPLY_NET] = gnd

    passives = [e for e in elements if e.kind in ("R", "C")]
    n_p = len(passives)
    a = np.array([idx[e.nets[0]] for e in passives], dtype=int)
    b = np.array([idx[e.nets[1]] for e in passives], dtype=int)
    p = np.arange(n_p)
    incidence = np.zeros((n_p, size + 1, size + 1))
    np.add.at(incidence, (p, a, a), 1.0)
    np.add.at(incidence, (p, b, b), 1.0)
    np.add.at(incidence, (p, a, b), -1.0)
    np.add.at(incidence, (p, b, a), -1.0)
    incidence = np.ascontiguousarray(incidence[:, :size, :size])
    is_r = np.array([e.kind == "R" for e in passives], dtype=bool)

    g_fix = np.zeros((size + 1, size + 1))
    c_fix = np.zeros((size + 1, size + 1))
    rhs = np.zeros(size + 1)
    k_in = idx[input_net]
    if ideal_source:
        row = n_nets
        g_fix[row, k_in] = 1.0
        g_fix[k_in, row] = 1.0
        rhs[row] = 1.0
    else:
        # Norton equivalent of (1 V in series with Rs).
        g_fix[k_in, k_in] += 1.0 / source_ohms
        rhs[k_in] = 1.0 / source_ohms
    opamp_rows: dict[str, int] = {}
    for k, e in enumerate(opamps):
        row = n_nets + int(ideal_source) + k
        opamp_rows[e.name] = row
        plus, minus, out = (idx[n] for n in e.nets)
        model = e.model
        ideal = math.isinf(model.gbw_hz)
        # Divided through by A0: V_out (1/A0 + s/wt) - (V+ - V-) = 0.
        g_fix[row, out] = 0.0 if ideal else 1.0 / model.a0
        c_fix[row, out] = 0.0 if ideal else 1.0 / (2 * math.pi * model.gbw_hz)
        g_fix[row, plus] += -1.0
        g_fix[row, minus] += 1.0
        g_fix[out, row] += 1.0  # the output current enters KCL at the output net
    out = _Stamps(nets=nets, idx=idx, incidence=incidence, is_r=is_r,
                  g_fix=np.ascontiguousarray(g_fix[:size, :size]),
                  c_fix=np.ascontiguousarray(c_fix[:size, :size]),
                  rhs=np.ascontiguousarray(rhs[:size]), opamp_rows=opamp_rows)
    for arr in (out.incidence, out.is_r, out.g_fix, out.c_fix, out.rhs):
        arr.flags.writeable = False          # shared by every call with this wiring
    return out


def mna_system(elements: Sequence[Element], *, input_net: str = "in", source_ohms: float = 0.0,
               values: np.ndarray | None = None,
               gbw_scale: np.ndarray | None = None) -> MnaSystem:
    """Stamp an element list into MNA matrices, vectorised over part-value samples.

    Parameters
    ----------
    elements : sequence of Element
        R, C and op-amp elements between named nets ("0" is ground).
    input_net : str
        Net driven by the unit AC source.
    source_ohms : float
        Source resistance, ohms (0: ideal source straight onto `input_net`).
    values : ndarray of float, shape (S, P), optional
        Part values overriding those of the elements, columns in ``passive_names`` order.
    gbw_scale : ndarray of float, shape (S,) or (S, A), optional
        Per-sample factor on the GBW of every op-amp (S,), or of each of the A op-amps in
        element order (S, A) -- a production spread of GBW for Monte Carlo. Op-amps with
        infinite GBW (ideal) are left ideal. The sample count must match `values`.

    Returns
    -------
    MnaSystem
        ``g`` and ``c`` have shape (M, M) without `values` and `gbw_scale`, (S, M, M) with
        either.

    Raises
    ------
    ValueError
        On an unknown element kind, a non-positive part value, an op-amp without a model or
        driving ground, a negative source resistance, a `values` array of the wrong shape, or
        a `gbw_scale` of the wrong shape or not finite and > 0.

    Notes
    -----
    Standard MNA stamps ([1]_, [2]_ ch. 3): a conductance y between nets a and b adds
    ``y`` at (a, a) and (b, b) and ``-y`` at (a, b) and (b, a). The stamps of all passive
    parts are kept as one (P, M, M) incidence tensor so that a batch of part values is a
    single ``einsum``. Op-amp rows are described in the module docstring.
    """
    if not source_ohms >= 0 or not math.isfinite(source_ohms):
        raise ValueError(f"source_ohms must be finite and >= 0; got {source_ohms}")
    if input_net == GROUND:
        raise ValueError("input_net cannot be ground")
    for e in elements:
        if e.kind not in ("R", "C", "opamp"):
            raise ValueError(f"{e.name}: unknown element kind {e.kind!r}")
        if e.kind == "opamp":
            if e.model is None:
                raise ValueError(f"{e.name}: op-amp without a model")
            if e.nets[2] == GROUND:
                raise ValueError(f"{e.name}: op-amp output tied to ground")
    v = _check_values(elements, values)
    st = _stamps(tuple((e.name, e.kind, e.nets, e.model) for e in elements), input_net,
                 float(source_ohms))
    conductance = np.where(st.is_r, 1.0 / v, 0.0)
    capacitance = np.where(st.is_r, 0.0, v)
    g = np.einsum("...p,pij->...ij", conductance, st.incidence)
    c = np.einsum("...p,pij->...ij", capacitance, st.incidence)
    g = g + st.g_fix
    c = c + st.c_fix
    opamps = [e for e in elements if e.kind == "opamp"]
    opamp_rows, idx = dict(st.opamp_rows), st.idx
    if gbw_scale is not None:
        c = _scale_gbw(c, opamps, opamp_rows, idx, gbw_scale, n_samples=v.shape[0]
                       if v.ndim == 2 else None)
        g = np.broadcast_to(g, c.shape).copy()
    return MnaSystem(nets=st.nets, g=g, c=c, rhs=st.rhs.copy(), opamp_rows=opamp_rows)


def _scale_gbw(c: np.ndarray, opamps: list[Element], opamp_rows: dict[str, int],
               idx: dict[str, int], gbw_scale: np.ndarray, *, n_samples: int | None
               ) -> np.ndarray:
    """`c` with each finite op-amp's 1/wt entry divided by its per-sample GBW factor.

    The entry 1/wt sits alone at (op-amp row, output net): dividing it by k is the same
    op-amp with GBW k times larger, A0 unchanged.
    """
    k = np.asarray(gbw_scale, dtype=float)
    n_a = len(opamps)
    if k.ndim == 1:
        k = np.repeat(k[:, None], n_a, axis=1)
    if k.ndim != 2 or k.shape[1] != n_a or (n_samples is not None and k.shape[0] != n_samples):
        want = f"({n_samples if n_samples is not None else 'S'},) or (S, {n_a})"
        raise ValueError(f"gbw_scale must have shape {want}; got {np.shape(gbw_scale)}")
    if np.any(~np.isfinite(k)) or np.any(k <= 0):
        raise ValueError("every gbw_scale must be finite and > 0")
    size = c.shape[-1]
    # One (A, M, M) tensor of the 1/wt stamps so that the batch is a single einsum.
    stamps = np.zeros((n_a, size, size))
    for a, e in enumerate(opamps):
        if math.isfinite(e.model.gbw_hz):
            stamps[a, opamp_rows[e.name], idx[e.nets[2]]] = 1.0 / (2 * math.pi * e.model.gbw_hz)
    return c + np.einsum("sa,aij->sij", 1.0 / k - 1.0, stamps)


def _admittance(system: MnaSystem, freq_hz: np.ndarray) -> np.ndarray:
    """Y = G + j 2 pi f C broadcast to (F, M, M) or (S, F, M, M)."""
    s = 2j * np.pi * freq_hz
    g = system.g[..., None, :, :]
    c = system.c[..., None, :, :]
    return g + s[:, None, None] * c


def _freq_array(freq_hz: np.ndarray) -> np.ndarray:
    f = np.asarray(freq_hz, dtype=float)
    if f.ndim != 1:
        raise ValueError(f"freq_hz must be one-dimensional; got shape {f.shape}")
    if np.any(~np.isfinite(f)) or np.any(f < 0):
        raise ValueError("freq_hz must be finite and >= 0")
    return f


@dataclass(frozen=True, slots=True)
class NodalSolution:
    """Node voltages of an AC solve for a unit (1 V open-circuit) source.

    Attributes
    ----------
    nets : tuple of str
        Non-ground nets, in the order of the last axis of `voltages`.
    freq_hz : ndarray of float, shape (F,)
        Frequencies, Hz.
    voltages : ndarray of complex, shape (F, N) or (S, F, N)
        Complex node voltages, V per V of source.
    """

    nets: tuple[str, ...]
    freq_hz: np.ndarray
    voltages: np.ndarray

    def at(self, net: str) -> np.ndarray:
        """Voltage of one net.

        Parameters
        ----------
        net : str
            Net name.

        Returns
        -------
        ndarray of complex, shape (F,) or (S, F)
            Its voltage per volt of source; zeros for ground.

        Raises
        ------
        KeyError
            If `net` is not in the circuit.
        """
        if net in (GROUND, SUPPLY_NET):
            return np.zeros(self.voltages.shape[:-1], dtype=complex)
        if net not in self.nets:
            raise KeyError(f"net {net!r} is not in the element list (nets: {self.nets})")
        return self.voltages[..., self.nets.index(net)]


def ac_solve(elements: Sequence[Element], freq_hz: np.ndarray, *, input_net: str = "in",
             source_ohms: float = 0.0, values: np.ndarray | None = None) -> NodalSolution:
    """AC node voltages for a unit source, batched over frequency and part-value samples.

    Parameters
    ----------
    elements : sequence of Element
        The element list.
    freq_hz : ndarray of float, shape (F,)
        Frequencies, Hz (>= 0; 0 is DC and needs a DC path to every net).
    input_net : str
        Net driven by the source.
    source_ohms : float
        Source resistance, ohms, between the 1 V source and `input_net` (0: ideal).
    values : ndarray of float, shape (S, P), optional
        Part values in ``passive_names(elements)`` order, one row per sample.

    Returns
    -------
    NodalSolution
        Voltages of shape (F, N), or (S, F, N) with `values`.

    Raises
    ------
    ValueError
        On bad arguments (see ``mna_system``).
    numpy.linalg.LinAlgError
        If a system is exactly singular (e.g. a net with no DC path at f = 0).

    Notes
    -----
    Modified nodal analysis [1]_; the op-amp row is the single-pole model of
    ``parts.opamp.OpAmp`` (Franco 2015, §6.1 [mem]) scaled by 1/A0.

    Examples
    --------
    >>> from bandwright.circuits.elements import resistor, capacitor
    >>> els = (resistor("R1", "in", "out", 1e3), capacitor("C1", "out", "0", 1e-6))
    >>> sol = ac_solve(els, np.array([159.15494309189535]))
    >>> round(float(abs(sol.at("out")[0])), 6)
    0.707107
    """
    f = _freq_array(freq_hz)
    system = mna_system(elements, input_net=input_net, source_ohms=source_ohms, values=values)
    y = _admittance(system, f)
    rhs = np.broadcast_to(system.rhs[:, None], y.shape[:-2] + (system.size, 1))
    x = np.linalg.solve(y, rhs)[..., 0]
    return NodalSolution(nets=system.nets, freq_hz=f, voltages=x[..., : len(system.nets)])


def transfer(elements: Sequence[Element], freq_hz: np.ndarray, *, out_net: str = "out",
             input_net: str = "in", source_ohms: float = 0.0,
             values: np.ndarray | None = None) -> np.ndarray:
    """Complex transfer from the source's open-circuit voltage to `out_net`.

    Parameters
    ----------
    elements : sequence of Element
        The element list.
    freq_hz : ndarray of float, shape (F,)
        Frequencies, Hz.
    out_net : str
        Net whose voltage is returned.
    input_net : str
        Net driven by the source.
    source_ohms : float
        Source resistance, ohms.
    values : ndarray of float, shape (S, P), optional
        Part-value samples (see ``ac_solve``).

    Returns
    -------
    ndarray of complex, shape (F,) or (S, F)
        V(out_net) per volt of source.

    Notes
    -----
    ``ac_solve(...).at(out_net)``; see ``ac_solve`` for the method.
    """
    sol = ac_solve(elements, freq_hz, input_net=input_net, source_ohms=source_ohms, values=values)
    return sol.at(out_net)


@dataclass(frozen=True, slots=True)
class NoiseResult:
    """Output noise of a circuit and the share of every source.

    Attributes
    ----------
    freq_hz : ndarray of float, shape (F,)
        Frequencies, Hz.
    total_psd : ndarray of float, shape (F,) or (S, F)
        Output noise power spectral density, V^2/Hz.
    contributions : dict of str to ndarray
        Output PSD of each source, V^2/Hz, keyed "R2", "Rsource", "U1 voltage",
        "U1 current+", "U1 current-". They add up to `total_psd` (uncorrelated sources).
    """

    freq_hz: np.ndarray
    total_psd: np.ndarray
    contributions: dict[str, np.ndarray]

    def density(self) -> np.ndarray:
        """Output noise density sqrt(total_psd), V/sqrt(Hz)."""
        return np.sqrt(self.total_psd)

    def integrated_vrms(self, band_hz: tuple[float, float]) -> np.ndarray | float:
        """RMS output noise over a band, V.

        Parameters
        ----------
        band_hz : (float, float)
            Lower and upper band edges, Hz.

        Returns
        -------
        float or ndarray of float, shape (S,)
            sqrt of the integral of `total_psd` over the band.

        Raises
        ------
        ValueError
            If fewer than two grid points lie inside the band.

        Notes
        -----
        Trapezoid rule in linear frequency over the grid points f with
        lo <= f <= hi; nothing is interpolated at the edges, so the band is exact only when
        its edges are grid points. On a log-spaced grid the trapezoid in linear frequency
        is still consistent (the panels simply have unequal widths); use enough points per
        decade where the PSD bends.
        """
        lo, hi = float(band_hz[0]), float(band_hz[1])
        inside = (self.freq_hz >= lo) & (self.freq_hz <= hi)
        if np.count_nonzero(inside) < 2:
            raise ValueError(f"fewer than two frequency points inside band {band_hz} Hz")
        power = np.trapezoid(self.total_psd[..., inside], self.freq_hz[inside], axis=-1)
        out = np.sqrt(power)
        return float(out) if out.ndim == 0 else out


def noise(elements: Sequence[Element], freq_hz: np.ndarray, *, out_net: str = "out",
          input_net: str = "in", source_ohms: float = 0.0, temperature_c: float = 25.0,
          values: np.ndarray | None = None) -> NoiseResult:
    """Output noise at `out_net` with per-source contributions, by the adjoint method.

    Parameters
    ----------
    elements : sequence of Element
        The element list.
    freq_hz : ndarray of float, shape (F,)
        Frequencies, Hz (> 0: the 1/f terms diverge at DC).
    out_net : str
        Net whose noise is computed.
    input_net : str
        Net driven by the signal source, which is zeroed (shorted behind its resistance).
    source_ohms : float
        Source resistance, ohms; it is a noise source named "Rsource" (zero when
        `source_ohms` is 0, the input net then being held by the ideal source).
    temperature_c : float
        Temperature of every resistor, degrees Celsius.
    values : ndarray of float, shape (S, P), optional
        Part-value samples (see ``ac_solve``); results then have a leading S axis.

    Returns
    -------
    NoiseResult

    Raises
    ------
    ValueError
        On bad arguments, or a frequency <= 0.

    Notes
    -----
    Sources, all uncorrelated:

    * each resistor: a current 4kT/R (A^2/Hz) across it (Johnson/Nyquist [3]_),
      k = 1.380649e-23 J/K, T = temperature_c + 273.15 K;
    * each op-amp: e_n^2(f) = e_w^2 (1 + fc/f) in series with the non-inverting input,
      and i_n^2(f) = i_w^2 (1 + fc/f) into each input separately [4]_.

    One solve of the transposed system ``Y^T z = e_out`` per frequency gives
    ``z[k] = dV_out / dI_k``, the transimpedance from a current injected into unknown k
    to the output (adjoint network, [2]_ ch. 11): v_out = e_out^T Y^-1 J = z^T J. A
    current source between nets a and b then sees ``z[a] - z[b]``; the op-amp voltage
    noise enters the op-amp row, whose right-hand side it is, and sees ``z[row]``. Output
    PSD = sum |G_i|^2 S_i.
    """
    f = _freq_array(freq_hz)
    if np.any(f <= 0):
        raise ValueError("noise needs frequencies > 0 (the 1/f terms diverge at DC)")
    system = mna_system(elements, input_net=input_net, source_ohms=source_ohms, values=values)
    k_out = system.index(out_net)
    if k_out < 0:
        raise ValueError("out_net cannot be ground")
    y = _admittance(system, f)
    e_out = np.zeros(system.size)
    e_out[k_out] = 1.0
    rhs = np.broadcast_to(e_out[:, None], y.shape[:-2] + (system.size, 1))
    z = np.linalg.solve(np.swapaxes(y, -1, -2), rhs)[..., 0]  # (..., F, M)
    z_gnd = np.concatenate([z, np.zeros(z.shape[:-1] + (1,), dtype=z.dtype)], axis=-1)

    def gain_sq(k: int) -> np.ndarray:
        return np.abs(z_gnd[..., k]) ** 2  # k = -1 hits the appended ground zero

    four_kt = 4 * BOLTZMANN_J_PER_K * (temperature_c + KELVIN_OFFSET)
    v = _check_values(elements, values)
    contributions: dict[str, np.ndarray] = {}
    passives = [e for e in elements if e.kind in ("R", "C")]
    for p, e in enumerate(passives):
        if e.kind != "R":
            continue
        a, b = system.index(e.nets[0]), system.index(e.nets[1])
        r_ohms = v[..., p, None]
        contributions[e.name] = np.abs(z_gnd[..., a] - z_gnd[..., b]) ** 2 * four_kt / r_ohms
    k_in = system.index(input_net)
    if source_ohms > 0:
        contributions["Rsource"] = gain_sq(k_in) * four_kt / source_ohms
    else:
        contributions["Rsource"] = np.zeros(z.shape[:-1])
    for e in elements:
        if e.kind != "opamp":
            continue
        plus, minus = system.index(e.nets[0]), system.index(e.nets[1])
        row = system.opamp_rows[e.name]
        contributions[f"{e.name} voltage"] = gain_sq(row) * e.model.voltage_noise_psd(f)
        contributions[f"{e.name} current+"] = gain_sq(plus) * e.model.current_noise_psd(f)
        contributions[f"{e.name} current-"] = gain_sq(minus) * e.model.current_noise_psd(f)
    total = np.sum(np.stack(list(contributions.values())), axis=0)
    return NoiseResult(freq_hz=f, total_psd=total, contributions=contributions)


def drawn_impedance(elements, sol, net: str) -> np.ndarray:
    """|V/I| at `net`: its voltage over the current it sends into every R and C attached to it
    (op-amp inputs draw none), per frequency of the solution `sol` of `elements`."""
    index = {n: i for i, n in enumerate(sol.nets)}
    v = sol.voltages
    zero = np.zeros(v.shape[:-1], dtype=complex)

    def volt(n: str) -> np.ndarray:
        return zero if n == "0" else v[..., index[n]]

    current = zero.copy()
    for e in elements:
        if e.kind == "opamp" or net not in e.nets:
            continue
        other = e.nets[1] if e.nets[0] == net else e.nets[0]
        if other == net:
            continue
        y = 1 / e.value if e.kind == "R" else 2j * np.pi * sol.freq_hz * e.value
        current = current + (volt(net) - volt(other)) * y
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.abs(volt(net)) / np.abs(current)


def _input_impedance(elements, freq_hz: np.ndarray,
                     sol: NodalSolution | None = None) -> np.ndarray:
    if sol is None:
        sol = ac_solve(elements, np.asarray(freq_hz, dtype=float))
    z = drawn_impedance(elements, sol, "in")
    return z[np.isfinite(z)]


def input_impedance_min(elements, freq_hz: np.ndarray,
                        sol: NodalSolution | None = None) -> float:
    """Smallest |Z_in| of a stage over `freq_hz`, driven by an ideal source at net "in";
    `sol`: that ``ac_solve`` of the stage at `freq_hz` when already made."""
    z = _input_impedance(elements, freq_hz, sol)
    return float(z.min()) if z.size else math.inf


def input_impedance_max(elements, freq_hz: np.ndarray) -> float:
    """Largest |Z_in| of a stage over `freq_hz` (inf when it draws no current)."""
    z = _input_impedance(elements, freq_hz)
    return float(z.max()) if z.size else math.inf


@dataclass(frozen=True, slots=True)
class DcSolution:
    """Operating point of an element list, split by source (superposition).

    Attributes
    ----------
    nets : tuple of str
        Non-ground nets, in the order of the last axis of every array.
    shares : dict of str to ndarray of float, shape (N,)
        Node voltages caused by each DC source alone, V: "input" (the source's DC level),
        "<net> fixed" (a net held at a fixed voltage), "<op-amp> offset", "<op-amp> bias+",
        "<op-amp> bias-" (input bias currents into the + and - pins).
    floating : tuple of str
        Nets with no DC path (through resistors, op-amp outputs or sources) to a held net;
        they were tied to ground through ``FLOAT_SHUNT_OHMS`` to keep the system solvable,
        so their voltages mean little.
    """

    nets: tuple[str, ...]
    shares: dict[str, np.ndarray]
    floating: tuple[str, ...]

    @property
    def voltages(self) -> np.ndarray:
        """Total node voltages, V (the sum of every share)."""
        return np.sum(np.stack(list(self.shares.values())), axis=0) if self.shares else \
            np.zeros(len(self.nets))

    def at(self, net: str, share: str | None = None) -> float:
        """Voltage of `net` (0 for ground), total or of one share, V."""
        if net == GROUND:
            return 0.0
        v = self.voltages if share is None else self.shares[share]
        return float(v[self.nets.index(net)])


#: Shunt that holds a net with no DC path (SPICE's ``rshunt`` idea): large enough to leave
#: every other net alone, small enough for a well-posed solve.
FLOAT_SHUNT_OHMS = 1e15


def floating_nets(elements: Sequence[Element], *, held: Sequence[str]) -> tuple[str, ...]:
    """Nets with no DC path to a held net.

    Parameters
    ----------
    elements : sequence of Element
        The element list.
    held : sequence of str
        Nets whose DC voltage is set from outside (ground, sources, fixed nets).

    Returns
    -------
    tuple of str
        Nets that reach no held net and no op-amp output through resistors, in element
        order. An op-amp input among them has no DC return path: its bias current has
        nowhere to go and its operating point is undefined.

    Notes
    -----
    At DC a capacitor is an open circuit and an op-amp output a voltage source; a net is
    defined when a chain of resistors joins it to a source (Vlach & Singhal 1994, ch. 3:
    a node with no conductive path makes G singular [mem]).
    """
    import networkx as nx

    g = nx.Graph()
    anchored = {GROUND, SUPPLY_NET, *held}
    for e in elements:
        g.add_nodes_from(e.nets)
        if e.kind == "R":
            g.add_edge(*e.nets)
        elif e.kind == "opamp":
            anchored.add(e.nets[2])
    reach: set[str] = set()
    for n in anchored:
        if n in g:
            reach |= nx.node_connected_component(g, n)
    out: list[str] = []
    for e in elements:
        for n in e.nets:
            if n not in reach and n not in anchored and n not in out:
                out.append(n)
    return tuple(out)


def dc_solve(elements: Sequence[Element], *, input_net: str = "in", source_ohms: float = 0.0,
             input_dc_v: float = 0.0, fixed_v: dict[str, float] | None = None) -> DcSolution:
    """DC operating point with the op-amps' offset voltages and input bias currents.

    Parameters
    ----------
    elements : sequence of Element
        The element list (capacitors are open at DC).
    input_net : str
        Net driven by the signal source through `source_ohms`.
    source_ohms : float
        Source resistance, ohms (0: the source holds `input_net`).
    input_dc_v : float
        The source's open-circuit DC level, V.
    fixed_v : dict of str to float, optional
        Nets held at a fixed voltage by ideal sources (a rail, an ideal reference), V.

    Returns
    -------
    DcSolution
        Every source's share of every node voltage, and the nets without a DC path.

    Notes
    -----
    The MNA system of ``mna_system`` at s = 0 ([1]_, [2]_ ch. 3), solved once for all
    right-hand sides. An op-amp with offset V_os and input bias current I_b into each pin
    (the usual DC error model: Franco 2015, §5.1-5.2 [mem]) has the row
    ``V_out/A0 - (V+ - V-) = V_os`` and sinks I_b at each input net. Each source is a
    column of its own, so the shares add up to the operating point (superposition; the
    model is linear).
    """
    fixed = dict(fixed_v or {})
    held = [input_net, *fixed]
    floating = floating_nets(elements, held=held)
    nets: list[str] = [input_net]
    for e in elements:
        for n in e.nets:
            if n != GROUND and n not in nets:
                nets.append(n)
    for n in fixed:
        if n not in nets:
            nets.append(n)
    n_nets = len(nets)
    ideal_source = source_ohms == 0.0
    opamps = [e for e in elements if e.kind == "opamp"]
    fixed_names = list(fixed)
    size = n_nets + int(ideal_source) + len(fixed_names) + len(opamps)
    idx = {n: i for i, n in enumerate(nets)}
    idx[GROUND] = size  # scratch slot, sliced off
    g = np.zeros((size + 1, size + 1))
    for e in elements:
        if e.kind == "R":
            a, b = idx[e.nets[0]], idx[e.nets[1]]
            y = 1.0 / e.value
            g[a, a] += y
            g[b, b] += y
            g[a, b] -= y
            g[b, a] -= y
    for n in floating:
        g[idx[n], idx[n]] += 1.0 / FLOAT_SHUNT_OHMS
    columns: list[tuple[str, dict[int, float]]] = []
    k_in = idx[input_net]
    row = n_nets
    if ideal_source:
        g[row, k_in] = g[k_in, row] = 1.0
        columns.append(("input", {row: input_dc_v}))
        row += 1
    else:
        g[k_in, k_in] += 1.0 / source_ohms
        columns.append(("input", {k_in: input_dc_v / source_ohms}))
    for n in fixed_names:
        g[row, idx[n]] = g[idx[n], row] = 1.0
        columns.append((f"{n} fixed", {row: fixed[n]}))
        row += 1
    for e in opamps:
        plus, minus, out = (idx[n] for n in e.nets)
        model = e.model
        g[row, out] = 0.0 if math.isinf(model.gbw_hz) else 1.0 / model.a0
        g[row, plus] -= 1.0
        g[row, minus] += 1.0
        g[out, row] += 1.0
        vos = getattr(model, "offset_v", 0.0)
        ib = getattr(model, "bias_current_a", 0.0)
        columns.append((f"{e.name} offset", {row: vos}))
        columns.append((f"{e.name} bias+", {plus: -ib}))
        columns.append((f"{e.name} bias-", {minus: -ib}))
        row += 1
    rhs = np.zeros((size + 1, len(columns)))
    for j, (_, entries) in enumerate(columns):
        for i, v in entries.items():
            rhs[i, j] += v
    x = np.linalg.solve(g[:size, :size], rhs[:size])
    shares = {name: x[:n_nets, j].copy() for j, (name, _) in enumerate(columns)}
    return DcSolution(nets=tuple(nets), shares=shares, floating=floating)
