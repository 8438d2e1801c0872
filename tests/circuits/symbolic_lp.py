"""Symbolic modified nodal analysis of an element list (test helper, self-contained).

Builds the MNA equations of a ``bandwright.circuits.elements`` element list with sympy and
solves them exactly, so that the transfer function of a topology is *derived* from the very
element list the package analyses, not typed in by hand.

Model (standard MNA, e.g. Vlach & Singhal, *Computer Methods for Circuit Analysis and
Design*, 2nd ed., 1994, ch. 2 [mem]):

- unknowns: the voltage of every net except ground "0", the current of the input source and
  the output current of every op-amp;
- a resistor R conducts (va - vb)/R, a capacitor (va - vb)·sC;
- the stage input net is driven by a unit voltage source (0 when a noise source is driven);
- an ideal op-amp (nullor) adds the constraint v+ - v- = 0; a finite-gain op-amp the
  constraint v_out = A·(v+ - v-); either way its output current is free.

An op-amp input voltage-noise source is a unit voltage in series with the non-inverting
input: v+ is replaced by v+ + e_n. The transfer from it to the output is the noise gain.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence

import sympy as sp

__all__ = ["S", "element_symbols", "transfer", "noise_gain", "biquad_figures",
           "as_rational_values", "dominant_pair_shift"]

S = sp.Symbol("s")
GROUND = "0"


def element_symbols(elements: Sequence) -> dict[str, sp.Symbol]:
    """A positive symbol per passive element, named after it ("R1" -> R1)."""
    return {e.name: sp.Symbol(e.name, positive=True) for e in elements if e.kind in ("R", "C")}


def as_rational_values(elements: Sequence) -> dict[str, sp.Rational]:
    """The elements' numeric values as exact rationals (for exact numeric checks)."""
    return {e.name: sp.Rational(e.value) for e in elements if e.kind in ("R", "C")}


def _solve(elements: Sequence, values: Mapping[str, sp.Expr], *, in_net: str,
           opamp_gain: sp.Expr | None, source_v: sp.Expr,
           noise_in: str | None) -> dict[str, sp.Expr]:
    nets: list[str] = []
    for e in elements:
        for n in e.nets:
            if n != GROUND and n not in nets:
                nets.append(n)
    if in_net not in nets:
        nets.append(in_net)
    opamps = [e for e in elements if e.kind == "opamp"]
    idx = {n: i for i, n in enumerate(nets)}
    n_nodes = len(nets)
    size = n_nodes + 1 + len(opamps)
    a = sp.zeros(size, size)
    b = sp.zeros(size, 1)

    def stamp_admittance(na: str, nb: str, y: sp.Expr) -> None:
        for p, q, sign in ((na, na, 1), (nb, nb, 1), (na, nb, -1), (nb, na, -1)):
            if p != GROUND and q != GROUND:
                a[idx[p], idx[q]] += sign * y

    for e in elements:
        if e.kind == "R":
            stamp_admittance(e.nets[0], e.nets[1], 1 / values[e.name])
        elif e.kind == "C":
            stamp_admittance(e.nets[0], e.nets[1], S * values[e.name])

    # Input source: current variable k = n_nodes leaves the source into the net.
    k = n_nodes
    a[idx[in_net], k] += -1
    a[k, idx[in_net]] = 1
    b[k] = source_v

    for j, op in enumerate(opamps):
        row = n_nodes + 1 + j
        plus, minus, out = op.nets
        a[idx[out], row] += -1  # output current injected into the output net
        e_n = 1 if op.name == noise_in else 0
        if opamp_gain is None:
            if plus != GROUND:
                a[row, idx[plus]] += 1
            if minus != GROUND:
                a[row, idx[minus]] += -1
            b[row] = -e_n
        else:
            a[row, idx[out]] += 1
            if plus != GROUND:
                a[row, idx[plus]] += -opamp_gain
            if minus != GROUND:
                a[row, idx[minus]] += opamp_gain
            b[row] = opamp_gain * e_n
    x = a.LUsolve(b)
    return {n: x[idx[n]] for n in nets}


def transfer(elements: Sequence, *, out_net: str = "out", in_net: str = "in",
             values: Mapping[str, sp.Expr] | None = None,
             opamp_gain: sp.Expr | None = None) -> sp.Expr:
    """V(out_net)/V(in_net) as a rational function of ``S``.

    Parameters
    ----------
    elements : sequence of Element
    out_net, in_net : str
    values : mapping, optional
        Element name -> sympy value; default: a symbol per element.
    opamp_gain : sympy expression, optional
        Open-loop gain A of every op-amp (e.g. wt/s); default: ideal (nullor).
    """
    vals = dict(element_symbols(elements)) if values is None else dict(values)
    v = _solve(elements, vals, in_net=in_net, opamp_gain=opamp_gain, source_v=1,
               noise_in=None)
    return sp.factor(sp.cancel(sp.together(v[out_net])))


def noise_gain(elements: Sequence, opamp_name: str, *, out_net: str | None = None,
               values: Mapping[str, sp.Expr] | None = None) -> sp.Expr:
    """Transfer from a voltage source in series with op-amp `opamp_name`'s + input to its output.

    The stage input is grounded (source at 0 V). With an ideal op-amp this is the noise gain
    1/beta of the loop around that op-amp.
    """
    vals = dict(element_symbols(elements)) if values is None else dict(values)
    op = next(e for e in elements if e.name == opamp_name)
    net = op.nets[2] if out_net is None else out_net
    v = _solve(elements, vals, in_net="in", opamp_gain=None, source_v=0, noise_in=opamp_name)
    return sp.factor(sp.cancel(sp.together(v[net])))


def biquad_figures(h: sp.Expr, kind: str) -> tuple[sp.Expr, sp.Expr, sp.Expr]:
    """(w0**2, w0/Q, gain) of a second-order H(s) = N(s)/(a2 s^2 + a1 s + a0).

    gain is H(0) for a lowpass and H(s -> oo) for a highpass.
    """
    num, den = sp.fraction(sp.cancel(sp.together(h)))
    pden = sp.Poly(sp.expand(den), S)
    if pden.degree() != 2:
        raise ValueError(f"denominator is of degree {pden.degree()}, not 2")
    a2, a1, a0 = pden.all_coeffs()
    w0_sq = sp.simplify(a0 / a2)
    bw = sp.simplify(a1 / a2)
    if kind == "lowpass":
        gain = sp.simplify(num.subs(S, 0) / a0)
    elif kind == "highpass":
        gain = sp.simplify(sp.limit(h, S, sp.oo))
    else:
        raise ValueError(kind)
    return w0_sq, bw, gain


def dominant_pair_shift(h: sp.Expr, f0_hz: float, q: float) -> tuple[float, float]:
    """Relative shifts (f0'/f0 - 1, Q'/Q - 1) of the section's pole pair in H(s).

    The denominator's roots are found to 40 digits; the pair is the two roots nearest f0
    in log |p| (the others, e.g. op-amp poles, lie far above). For a real pair,
    w0 = sqrt(p1 p2) and Q = w0 / |p1 + p2|; for a complex pair the same formulas give
    |p| and |p| / (2 |Re p|).
    """
    _, den = sp.fraction(sp.cancel(sp.together(h)))
    roots = sp.Poly(sp.expand(den), S).nroots(n=40)
    w_target = 2 * sp.pi * sp.Float(f0_hz, 40)
    p1, p2 = sorted(roots, key=lambda p: abs(sp.log(abs(p) / w_target)))[:2]
    w0 = sp.sqrt(sp.re(p1 * p2))
    q_new = w0 / abs(sp.re(p1 + p2))
    return float(w0 / w_target - 1), float(q_new / q - 1)
