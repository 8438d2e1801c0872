"""Transfer polynomials as explicit sums of monomials in the element values.

``figures.transfer_polynomials`` evaluates ``det(G + s C)`` numerically at points on a
circle for every candidate value set. Here the same determinants are expanded once per
wiring (element kinds and nets, not values) into monomials of the element values with
integer coefficients; a whole batch of candidate values is then one product and one
matrix multiply.

Method
------
Every MNA entry that holds a value is affine in it, and every value sits in a rank-one
stamp: a conductance or capacitance y between nets a and b adds ``y u u^T`` with
``u = e_a - e_b``; a source conductance 1/Rs sits in one row (matrix and excitation); an
op-amp's 1/A0 and 1/wt sit in one entry each ([1]_). A determinant is affine in a rank-one
term (matrix determinant lemma, [2]_), so ``det`` is multilinear in the variables
x = (1/R_i, s C_j, 1/Rs, 1/A0_k, s/wt_k)::

    det = sum over subsets T of the variables of  c_T * prod_{v in T} x_v

with c_T an integer (every stamp entry is 0 or +-1). The c_T are recovered exactly from the
2^n determinants of the integer matrices at x in {0, 1}^n by the Moebius transform over the
subset lattice ([3]_), rounded to integers. The power of s of a monomial is the number of
its capacitive variables. The numerator (Cramer's rule: output column replaced by the
excitation) is expanded the same way.

References
----------
.. [1] C.-W. Ho, A. E. Ruehli, P. A. Brennan, "The modified nodal approach to network
   analysis", IEEE Trans. Circuits Syst. CAS-22(6), 1975 [mem].
.. [2] D. A. Harville, *Matrix Algebra From a Statistician's Perspective*, Springer, 1997,
   §18.1 -- det(A + u v^T) = det(A) (1 + v^T A^-1 u): affine in a rank-one term [mem].
.. [3] G.-C. Rota, "On the foundations of combinatorial theory I. Theory of Moebius
   functions", Z. Wahrscheinlichkeitstheorie 2, 1964 -- inversion over the subset lattice.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import lru_cache
from typing import Sequence

import numpy as np

from bandwright.circuits import expansion_cache
from bandwright.circuits.elements import GROUND, SUPPLY_NET, Element

__all__ = ["Expansion", "expansion", "structure_key", "expanded_polynomials", "expandable",
           "expanded_split", "expanded_polynomials_many"]

# Variables past this count would make 2^n determinants at derivation: no topology has so many.
_MAX_VARIABLES = 20


@dataclass(frozen=True)
class Expansion:
    """Monomial table of one wiring's numerator and denominator.

    Attributes
    ----------
    n_vars : int
        Number of variables (see ``variable_values``).
    den_masks, num_masks : ndarray of bool, shape (m, n_vars)
        Which variables each monomial multiplies.
    den_coefs, num_coefs : ndarray of int, shape (m,)
        Integer coefficient of each monomial.
    den_powers, num_powers : ndarray of int, shape (m,)
        Power of s of each monomial.
    degree : int
        Number of capacitive variables: the highest possible power of s.
    """

    n_vars: int
    den_masks: np.ndarray
    den_coefs: np.ndarray
    den_powers: np.ndarray
    num_masks: np.ndarray
    num_coefs: np.ndarray
    num_powers: np.ndarray
    degree: int


def structure_key(elements: Sequence[Element], *, out_net: str, input_net: str,
                  source_ohms: float) -> tuple:
    """What the expansion depends on: kinds, nets, ideal op-amps, source type, nets read."""
    return (tuple((e.kind, e.nets, e.kind == "opamp" and math.isfinite(e.model.gbw_hz))
                  for e in elements), out_net, input_net, source_ohms > 0)


def _stamps(key: tuple) -> tuple[np.ndarray, np.ndarray, list[bool], np.ndarray, np.ndarray, int]:
    """Constant matrix F, variable stamps U (n, M, M), which variables are capacitive, the
    excitation's constant part and its per-variable part, and the output index."""
    elems, out_net, input_net, norton = key
    nets: list[str] = [input_net]
    for _, en, _ in elems:
        for n in en:
            if n not in (GROUND, SUPPLY_NET) and n not in nets:
                nets.append(n)
    n_nets = len(nets)
    n_op = sum(1 for k, _, _ in elems if k == "opamp")
    size = n_nets + int(not norton) + n_op
    idx = {n: i for i, n in enumerate(nets)}
    idx[GROUND] = idx[SUPPLY_NET] = size   # scratch slot, sliced off
    f = np.zeros((size + 1, size + 1))
    stamps: list[np.ndarray] = []
    capacitive: list[bool] = []
    rhs_const = np.zeros(size + 1)
    rhs_var: list[np.ndarray] = []

    def new_var(cap: bool) -> tuple[np.ndarray, np.ndarray]:
        u, r = np.zeros((size + 1, size + 1)), np.zeros(size + 1)
        stamps.append(u)
        rhs_var.append(r)
        capacitive.append(cap)
        return u, r

    for kind, en, _ in elems:               # passives first: ``passive_names`` order
        if kind in ("R", "C"):
            u, _ = new_var(kind == "C")
            a, b = idx[en[0]], idx[en[1]]
            u[a, a] += 1
            u[b, b] += 1
            u[a, b] -= 1
            u[b, a] -= 1
    k_in = idx[input_net]
    if norton:
        u, r = new_var(False)
        u[k_in, k_in] = 1
        r[k_in] = 1
    else:
        f[n_nets, k_in] = f[k_in, n_nets] = 1
        rhs_const[n_nets] = 1
    row = n_nets + int(not norton)
    for kind, en, finite in elems:
        if kind != "opamp":
            continue
        plus, minus, out = (idx[n] for n in en)
        if finite:
            u, _ = new_var(False)           # 1/A0
            u[row, out] = 1
            u, _ = new_var(True)            # s/wt
            u[row, out] = 1
        f[row, plus] -= 1
        f[row, minus] += 1
        f[out, row] += 1
        row += 1
    sl = slice(0, size)
    k_out = idx[out_net]
    if k_out >= size:
        raise ValueError("out_net cannot be ground")
    return (f[sl, sl], np.array([u[sl, sl] for u in stamps]).reshape(-1, size, size),
            capacitive, rhs_const[sl], np.array(rhs_var).reshape(-1, size + 1)[:, sl], k_out)


def _moebius(f_const: np.ndarray, stamps: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Integer coefficients of the multilinear det(F + sum x_v U_v): (subset bitmask, coef),
    read from the disk cache (``expansion_cache``) when this wiring was derived before."""
    key = expansion_cache.key_of(f_const, stamps)
    hit = expansion_cache.load(key, stamps.shape[0])
    if hit is not None:
        return hit
    masks, coefs = _moebius_derive(f_const, stamps)
    expansion_cache.store(key, masks, coefs)
    return masks, coefs


def _moebius_derive(f_const: np.ndarray, stamps: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """``_moebius`` from its 2^n determinants (the subset lattice, [3]_)."""
    n = stamps.shape[0]
    bits = (np.arange(2 ** n)[:, None] >> np.arange(n)) & 1          # (2^n, n)
    mats = f_const + np.einsum("kv,vij->kij", bits.astype(float), stamps)
    vals = np.linalg.det(mats) if mats.shape[-1] else np.ones(2 ** n)
    vals = np.rint(vals)
    for v in range(n):                      # inverse zeta transform, one variable at a time
        has = bits[:, v] == 1
        vals[has] -= vals[np.flatnonzero(has) ^ (1 << v)]
    keep = np.flatnonzero(vals)
    return bits[keep].astype(bool), vals[keep].astype(np.int64)


@lru_cache(maxsize=256)
def _den_for_key(key: tuple) -> tuple[np.ndarray, np.ndarray]:
    """det(Y)'s expansion: it does not depend on the net read, so the nets of one stage
    share it (`key` has the input net in the out_net slot)."""
    f, u, _, _, _, _ = _stamps(key)
    return _moebius(f, u)


@lru_cache(maxsize=256)
def _expansion_for_key(key: tuple) -> Expansion:
    f, u, capacitive, rhs_const, rhs_var, k_out = _stamps(key)
    n = u.shape[0]
    if n > _MAX_VARIABLES:
        raise ValueError(f"{n} variables are too many to expand")
    cap = np.array(capacitive, dtype=bool)
    elems, _, input_net, norton = key
    den_masks, den_coefs = _den_for_key((elems, input_net, input_net, norton))
    f_num, u_num = f.copy(), u.copy()
    f_num[:, k_out] = rhs_const
    u_num[:, :, k_out] = rhs_var
    num_masks, num_coefs = _moebius(f_num, u_num)
    return Expansion(n_vars=n, den_masks=den_masks, den_coefs=den_coefs,
                     den_powers=den_masks[:, cap].sum(axis=1) if n else np.zeros(0, int),
                     num_masks=num_masks, num_coefs=num_coefs,
                     num_powers=num_masks[:, cap].sum(axis=1) if n else np.zeros(0, int),
                     degree=int(cap.sum()))


def expansion(elements: Sequence[Element], *, out_net: str = "out", input_net: str = "in",
              source_ohms: float = 0.0) -> Expansion:
    """The (cached) monomial expansion of an element list's wiring."""
    return _expansion_for_key(structure_key(elements, out_net=out_net, input_net=input_net,
                                            source_ohms=source_ohms))


def variable_values(elements: Sequence[Element], *, values: np.ndarray | None,
                    source_ohms: float, gbw_scale: np.ndarray | None = None) -> np.ndarray:
    """Per-sample variables (S, n) without the factor s: 1/R or C per passive (in
    ``passive_names`` order), 1/Rs (Norton source), then 1/A0 and 1/wt per finite op-amp."""
    passives = [e for e in elements if e.kind in ("R", "C")]
    if values is None:
        v = np.array([[e.value for e in passives]], dtype=float)
    else:
        v = np.asarray(values, dtype=float)
        # (S, P) as given; a bare (P,) row is one sample. P may be 0 (a buffer stage).
        v = v.reshape(v.shape[0] if v.ndim == 2 else -1, len(passives))
    is_r = np.array([e.kind == "R" for e in passives], dtype=bool)
    cols = [np.where(is_r, 1.0 / v, v)]
    s_count = v.shape[0]
    if source_ohms > 0:
        cols.append(np.full((s_count, 1), 1.0 / source_ohms))
    opamps = [e for e in elements if e.kind == "opamp"]
    if gbw_scale is not None:
        k = np.asarray(gbw_scale, dtype=float)
        k = np.repeat(k[:, None], len(opamps), axis=1) if k.ndim == 1 else k
    for j, e in enumerate(opamps):
        if not math.isfinite(e.model.gbw_hz):
            continue
        wt = 2 * math.pi * e.model.gbw_hz
        scale = k[:, j] if gbw_scale is not None else np.ones(s_count)
        cols.append(np.full((s_count, 1), 1.0 / e.model.a0))
        cols.append((1.0 / (wt * scale))[:, None])
    return np.concatenate(cols, axis=1)


def variable_count(elements: Sequence[Element], *, source_ohms: float) -> int:
    """Number of expansion variables of an element list (``variable_values`` columns)."""
    return (sum(1 for e in elements if e.kind in ("R", "C")) + int(source_ohms > 0)
            + 2 * sum(1 for e in elements
                      if e.kind == "opamp" and math.isfinite(e.model.gbw_hz)))


def expandable(elements: Sequence[Element], *, source_ohms: float) -> bool:
    """Whether the wiring is small enough to expand (else callers take the det path)."""
    return variable_count(elements, source_ohms=source_ohms) <= _MAX_VARIABLES


def _monomials(masks: np.ndarray, x: np.ndarray) -> np.ndarray:
    """prod over each monomial's variables, (S, m), in variable order."""
    return np.prod(np.where(masks[None, :, :], x[:, None, :], 1.0), axis=-1)


def _monomials_fast(masks: np.ndarray, x: np.ndarray) -> np.ndarray:
    """``_monomials`` as one matrix multiply: each monomial is its product at a reference
    point x_ref (the batch's geometric mean, one product per monomial) times
    exp(sum of log(x / x_ref)) over its variables. The logs are small (a tolerance spread),
    so the result is within a few ulp of the direct product."""
    if x.shape[0] < 8 or not (np.all(x > 0) and np.all(np.isfinite(x))):
        return _monomials(masks, x)
    log_x = np.log(x)
    log_ref = np.mean(log_x, axis=0)
    ref = np.exp(log_ref)
    nominal = np.prod(np.where(masks, ref[None, :], 1.0), axis=-1)          # (m,)
    return nominal * np.exp((log_x - log_ref) @ masks.T.astype(float))


@lru_cache(maxsize=1024)
def _product_plan(codes: tuple[int, ...], k: int
                  ) -> tuple[int, tuple[tuple[int, np.ndarray, np.ndarray], ...], np.ndarray]:
    """How to form the products of the monomials `codes` (bit j: variable j) one factor at
    a time: every code and each of its prefixes (the code without its highest bits) gets
    a column of a table, column 0 holding 1.0. Returns the table's width; per variable j,
    (j, the columns whose highest variable is j, the columns of their prefixes); and each
    code's column. (A folded grid asks for the same few plans over and over: kept.)"""
    need: set[int] = set()
    for c in codes:
        while c and c not in need:
            need.add(c)
            c &= ~(1 << (c.bit_length() - 1))
    order = sorted(need)
    column = {c: i + 1 for i, c in enumerate(order)}
    column[0] = 0
    steps = []
    for j in range(k):
        here = [c for c in order if c.bit_length() - 1 == j]
        if here:
            steps.append((j, _frozen([column[c] for c in here]),
                          _frozen([column[c & ~(1 << j)] for c in here])))
    return len(order) + 1, tuple(steps), _frozen([column[c] for c in codes])


def _frozen(ints: list[int]) -> np.ndarray:
    a = np.array(ints, dtype=np.intp)
    a.flags.writeable = False            # held by the plan cache, shared by its callers
    return a


def _subset_products(codes: np.ndarray, x: np.ndarray) -> np.ndarray:
    """``_monomials`` for monomials given as bit codes over the k columns of `x` (bit j:
    column j), (S, u): each product is formed in variable order, one factor at a time,
    from its prefix's (``_product_plan``), as the masked product forms it (a factor 1.0
    is exact), so the values are the same, for a fraction of the multiplications."""
    width, steps, final = _product_plan(tuple(codes.tolist()), x.shape[1])
    table = np.empty((x.shape[0], width))
    table[:, 0] = 1.0
    for j, dest, src in steps:
        table[:, dest] = table[:, src] * x[:, j:j + 1]
    return table[:, final]


def _weights(coefs: np.ndarray, powers: np.ndarray, degree: int) -> np.ndarray:
    weights = np.zeros((coefs.shape[0], degree + 1))
    weights[np.arange(coefs.shape[0]), powers] = coefs
    return weights


def _folded(masks: np.ndarray, coefs: np.ndarray, powers: np.ndarray, degree: int,
            x: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray] | None:
    """The expansion with every variable that takes one value in the whole batch folded
    in: (subsets (u,) of the k varying variables as bit codes (bit j: the j-th varying
    column), their coefficients (u, degree + 1), the varying columns (k,)); None when
    folding would not shrink it to half its monomials.

    A series grid moves a few parts and holds the rest (and the op-amps) fixed: the
    multilinear sum regrouped by the varying variables each monomial holds has at most
    2^k terms (16 for four moving parts) instead of hundreds.
    """
    vary = np.any(x != x[:1], axis=0)
    k = int(vary.sum())
    if k >= 16:
        return None
    codes = masks[:, vary] @ (1 << np.arange(k))
    subsets, inverse = np.unique(codes, return_inverse=True)
    if 2 * subsets.size > masks.shape[0]:
        return None
    fixed = np.prod(np.where(masks & ~vary, x[0], 1.0), axis=-1)       # (m,)
    folded = np.zeros((subsets.size, degree + 1))
    np.add.at(folded, (inverse.ravel(), powers), coefs * fixed)
    return subsets, folded, np.flatnonzero(vary)


def _evaluate(masks: np.ndarray, coefs: np.ndarray, powers: np.ndarray, degree: int,
              x: np.ndarray, fast: bool = False) -> np.ndarray:
    """Coefficients in ascending powers of s, (S, degree + 1). `fast`: folded over the
    batch's fixed variables (``_folded``) where that pays, else monomials by one matrix
    multiply of logs (``_monomials_fast``); equal to rounding."""
    if fast and x.shape[0] >= 8:
        fold = _folded(masks, coefs, powers, degree, x)
        if fold is not None:
            subsets, folded, cols = fold
            return _subset_products(subsets, x[:, cols]) @ folded
    mono = (_monomials_fast if fast else _monomials)(masks, x)
    return mono @ _weights(coefs, powers, degree)


def expanded_polynomials(elements: Sequence[Element], *, out_net: str = "out",
                         input_net: str = "in", source_ohms: float = 0.0,
                         values: np.ndarray | None = None,
                         gbw_scale: np.ndarray | None = None, fast: bool = False
                         ) -> tuple[np.ndarray, np.ndarray]:
    """Numerator and denominator of the transfer to `out_net`, ascending powers of s.

    Same transfer as ``figures.transfer_polynomials`` (open-circuit source voltage to
    `out_net`), unnormalised: num = det(Y_out), den = det(Y) as the expansions give them.
    Shapes (S, d + 1), S = 1 without `values`. `fast`: monomials by one matrix multiply of
    logs about the batch's mean (``_monomials_fast``), equal to rounding.
    """
    nums, den = expanded_polynomials_many(elements, out_nets=(out_net,), input_net=input_net,
                                          source_ohms=source_ohms, values=values,
                                          gbw_scale=gbw_scale, fast=fast)
    return nums[0], den


def expanded_polynomials_many(elements: Sequence[Element], *, out_nets: Sequence[str],
                              input_net: str = "in", source_ohms: float = 0.0,
                              values: np.ndarray | None = None,
                              gbw_scale: np.ndarray | None = None, fast: bool = False
                              ) -> tuple[list[np.ndarray], np.ndarray]:
    """``expanded_polynomials`` to several nets: the numerators (S, d + 1) per net and the
    one denominator, evaluated once."""
    x = variable_values(elements, values=values, source_ohms=source_ohms, gbw_scale=gbw_scale)
    nums, den = [], None
    for net in out_nets:
        exp = expansion(elements, out_net=net, input_net=input_net, source_ohms=source_ohms)
        if den is None:
            den = _evaluate(exp.den_masks, exp.den_coefs, exp.den_powers, exp.degree, x, fast)
        nums.append(_evaluate(exp.num_masks, exp.num_coefs, exp.num_powers, exp.degree, x,
                              fast))
    return nums, den


def _split(masks: np.ndarray, coefs: np.ndarray, powers: np.ndarray, degree: int,
           x: np.ndarray, var: int) -> tuple[np.ndarray, np.ndarray]:
    """(a, b) with poly = a + x_var b: the monomials without and with variable `var`, the
    latter without its factor x_var (the expansion is multilinear)."""
    has = masks[:, var]
    rest = masks.copy()
    rest[:, var] = False
    mono = _monomials_fast(rest, x)
    w = _weights(coefs, powers, degree)
    return mono[:, ~has] @ w[~has], mono[:, has] @ w[has]


def expanded_split(elements: Sequence[Element], *, var: int, out_net: str = "out",
                   input_net: str = "in", source_ohms: float = 0.0,
                   values: np.ndarray | None = None, gbw_scale: np.ndarray | None = None
                   ) -> tuple[tuple[np.ndarray, np.ndarray], tuple[np.ndarray, np.ndarray]]:
    """``expanded_polynomials`` as affine functions of one variable: ((num_a, num_b),
    (den_a, den_b)) with num = num_a + x num_b, x the variable `var` of ``variable_values``
    (1/R for a resistor, C for a capacitor). Evaluated once, the polynomials for any value
    of that part are two multiply-adds: what a trim's root search needs ([2]_)."""
    exp = expansion(elements, out_net=out_net, input_net=input_net, source_ohms=source_ohms)
    x = variable_values(elements, values=values, source_ohms=source_ohms, gbw_scale=gbw_scale)
    den = _split(exp.den_masks, exp.den_coefs, exp.den_powers, exp.degree, x, var)
    num = _split(exp.num_masks, exp.num_coefs, exp.num_powers, exp.degree, x, var)
    return num, den
