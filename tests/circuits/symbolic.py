"""Symbolic nodal analysis of an element list, for the topology tests.

An independent reference for the topology modules: it reads the same element list the
numeric solver reads, but writes Kirchhoff's current law at every net by hand with sympy
and solves it exactly, so a test can compare a module's design equations with the
transfer function its own wiring implies.

The op-amp is a nullor by default (ideal: V+ = V-, any output current). Given an
open-loop gain expression ``gain`` (e.g. ``wt / s``), it is a voltage-controlled source
``Vout = A (V+ - V-)`` instead. Each op-amp output net drops its KCL row, because the
op-amp sources whatever current that net needs (modified nodal analysis with the
output-current unknowns eliminated; Vlach & Singhal, *Computer Methods for Circuit
Analysis and Design*, 2nd ed., 1994, ch. 2 [mem]).
"""

from __future__ import annotations

from typing import Mapping

import sympy as sp

from bandwright.circuits.elements import GROUND, Element

__all__ = ["S", "part_symbols", "node_voltages", "transfer", "noise_gain", "bandpass_figures",
           "sensitivity", "EPS", "gbw_shift"]

S = sp.Symbol("s")


def part_symbols(elements: tuple[Element, ...]) -> dict[str, sp.Symbol]:
    """One positive symbol per R and C, named after the element."""
    return {e.name: sp.Symbol(e.name, positive=True) for e in elements if e.kind in ("R", "C")}


def node_voltages(elements: tuple[Element, ...], *, values: Mapping[str, sp.Expr] | None = None,
                  gain: sp.Expr | None = None, source_net: str | None = "in",
                  noise_opamp: str | None = None) -> dict[str, sp.Expr]:
    """Solve the circuit for every net voltage.

    Parameters
    ----------
    elements : tuple of Element
    values : mapping, optional
        Name -> sympy value for the passives; unnamed passives keep their numeric value.
        Default: every passive becomes the symbol of its name.
    gain : sympy expression, optional
        Open-loop gain of every op-amp; None for the nullor.
    source_net : str or None
        Net driven by a 1 V source; None grounds nothing and drives nothing.
    noise_opamp : str, optional
        Name of an op-amp with a 1 V source in series with its non-inverting input (the
        input net `source_net`, if any, is then held at 0 V).
    """
    if values is None:
        values = part_symbols(elements)
    nets = sorted({n for e in elements for n in e.nets} - {GROUND})
    fixed: dict[str, sp.Expr] = {}
    if source_net is not None and source_net in nets:
        fixed[source_net] = sp.Integer(0) if noise_opamp else sp.Integer(1)
    unknown = [n for n in nets if n not in fixed]
    v = {n: sp.Symbol(f"V_{n}") for n in unknown}
    v.update(fixed)
    v[GROUND] = sp.Integer(0)

    kcl: dict[str, sp.Expr] = {n: sp.Integer(0) for n in unknown}
    for e in elements:
        if e.kind == "opamp":
            continue
        x = values.get(e.name, sp.nsimplify(e.value))
        y = 1 / x if e.kind == "R" else S * x
        a, b = e.nets
        current = y * (v[a] - v[b])  # leaving a, entering b
        if a in kcl:
            kcl[a] -= current
        if b in kcl:
            kcl[b] += current
    equations = []
    driven = set()
    for e in elements:
        if e.kind != "opamp":
            continue
        plus, minus, out = e.nets
        driven.add(out)
        vin = v[plus] - v[minus] + (1 if e.name == noise_opamp else 0)
        # Vout = A (V+ - V-) written as Vout / A = V+ - V-, polynomial for A = wt/s.
        equations.append(vin if gain is None else sp.cancel(1 / gain) * v[out] - vin)
    equations += [kcl[n] for n in unknown if n not in driven]
    solution = sp.solve(equations, [v[n] for n in unknown], dict=True, rational=True)
    if len(solution) != 1:
        raise ValueError("the circuit has no unique solution")
    result = {n: sp.factor(sp.cancel(solution[0][v[n]])) for n in unknown}
    result.update({n: val for n, val in fixed.items()})
    return result


def transfer(elements: tuple[Element, ...], out_net: str = "out", **kwargs) -> sp.Expr:
    """V(out_net) / V(in) as a cancelled rational function of s."""
    return node_voltages(elements, **kwargs)[out_net]


def noise_gain(elements: tuple[Element, ...], opamp_name: str, out_net: str = "out",
               **kwargs) -> sp.Expr:
    """V(out_net) per volt in series with op-amp `opamp_name`'s non-inverting input, the
    stage input grounded."""
    return node_voltages(elements, noise_opamp=opamp_name, **kwargs)[out_net]


def bandpass_figures(h: sp.Expr) -> tuple[sp.Expr, sp.Expr, sp.Expr]:
    """(w0, Q, gain at w0) of H = b1 s / (a2 s^2 + a1 s + a0).

    Raises ValueError if `h` is not of that form.
    """
    num, den = sp.fraction(sp.cancel(h))
    num_p, den_p = sp.Poly(num, S), sp.Poly(den, S)
    if den_p.degree() != 2 or num_p.degree() != 1 or num_p.coeff_monomial(1) != 0:
        raise ValueError(f"not a second-order bandpass: {h}")
    a2, a1, a0 = (den_p.coeff_monomial(S**k) for k in (2, 1, 0))
    b1 = num_p.coeff_monomial(S)
    w0 = sp.sqrt(a0 / a2)
    return sp.simplify(w0), sp.simplify(w0 * a2 / a1), sp.simplify(b1 / a1)


def sensitivity(y: sp.Expr, x: sp.Symbol) -> sp.Expr:
    """Classical sensitivity S_x^y = (x / y) dy/dx (Schaumann & Van Valkenburg 2001, ch. 3)."""
    return sp.simplify(x / y * sp.diff(y, x))


EPS = sp.Symbol("epsilon", positive=True)


def gbw_shift(elements: tuple[Element, ...], values: Mapping[str, sp.Expr], q: sp.Expr,
              out_net: str = "out") -> tuple[sp.Expr, sp.Expr]:
    """First-order relative shifts (k_f, k_q) of f0 and Q per unit e = f0/GBW.

    `values` must design the section for w0 = 1 rad/s and pole Q `q` (symbolic or
    numeric). Every op-amp gets A(s) = 1/(eps s), eps = 1/wt, so that e = eps.

    Notes
    -----
    Perturbation of a simple root: the characteristic polynomial D(s, eps) has the root
    p0 (p0^2 + p0/q + 1 = 0) at eps = 0, and p = p0 + eps p1 with
    p1 = -D_eps(p0) / D_s(p0). Both are reduced modulo p0^2 + p0/q + 1, so that they are
    linear in p0 with real coefficients and Re(.) is rational in x = Re p0 = -1/(2q),
    with |p0| = 1 and (Im p0)^2 = 1 - x^2. Then df0/f0 = Re(p1/p0) eps and
    d(-Re p)/(-Re p) = Re(p1)/x eps, dQ/Q being their difference.
    """
    h = transfer(elements, out_net, values=values, gain=1 / (EPS * S))
    den = sp.expand(sp.fraction(sp.cancel(h))[1])
    quad = sp.Poly(S**2 + S / q + 1, S)
    d0 = sp.Poly(den.subs(EPS, 0), S)
    d1 = sp.Poly(sp.diff(den, EPS).subs(EPS, 0), S)
    if d0.rem(quad).as_expr().simplify() != 0:
        raise ValueError("values do not design w0 = 1 and Q = q")

    def linear(p: sp.Poly) -> tuple[sp.Expr, sp.Expr]:
        r = p.rem(quad)
        return r.coeff_monomial(1), r.coeff_monomial(S)

    n0, n1 = linear(d1)
    d0_, d1_ = linear(d0.diff(S))
    n0, n1 = -n0, -n1  # p1 = (n0 + n1 p0) / (d0_ + d1_ p0)
    x = -1 / (2 * q)
    y2 = 1 - x**2
    mag2 = d0_**2 + 2 * d0_ * d1_ * x + d1_**2
    re_n_conj_d = n0 * d0_ + (n0 * d1_ + n1 * d0_) * x + n1 * d1_
    im_coef = n1 * d0_ - n0 * d1_  # Im(N conj D) = im_coef * Im p0
    re_p1 = re_n_conj_d / mag2
    k_f = (re_n_conj_d * x + im_coef * y2) / mag2
    k_q = k_f - re_p1 / x
    return sp.simplify(k_f), sp.simplify(k_q)
