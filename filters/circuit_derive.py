"""H(s) of a circuit stage (or of loaded stages solved together), derived fast and in time.

The library's topologies are derived by :func:`filters.netlist.derive` (sympy matrices,
Berkowitz determinants): fine for their four or five nodes, but a circuit of ten nodes and
three op-amps takes about 40 s that way. Here the same nodal equations
(:func:`filters.netlist.nodal_system`) are written over integer polynomials in s and the
element variables (conductance 1/R for a resistor, C for a capacitor, 1/L for an
inductor, 2 pi GBW for a single-pole op-amp; a row holding an inductor is multiplied by
s), and each determinant is expanded by cofactors along the sparsest rows, each minor
computed once (a minor is known by the columns its rows have used). The common factor of
numerator and denominator is divided out (sympy's polynomial gcd), and the variables are
turned back into the parts' values: a conductance G to the power k becomes R^(m - k),
with m the highest power of G in N and D (both are multiplied by R^m). A ten-node,
three-op-amp circuit takes milliseconds after sympy's polynomial module is imported.

The result is the same :class:`filters.netlist.TransferFunction` data as the library's,
kept in the same derivation cache (its description carries ``"method": "cofactor"``, so
it never meets a library entry of the same netlist), and held against the numerical
nodal solution before use.

The expansion checks the clock before every product: past :data:`DERIVE_SECONDS` it stops
with an :class:`filters.errors.InputError` that says so (never a hang); so does a
determinant or minor of more than :data:`MAX_TERMS` terms (which bounds each product's
size, hence the time between two checks, and the memory).
"""
from __future__ import annotations

import math
import time
from functools import lru_cache
from typing import Any

from .errors import InputError
from .netlist import Coefficient, Netlist, TransferFunction, cached_derivation, nodal_system

__all__ = ["DERIVE_SECONDS", "MAX_TERMS", "METHOD", "description", "derive_circuit_uncached", "derive_circuit"]

DERIVE_SECONDS = 20.0  # the derivation of one circuit stops after this long (seconds)
MAX_TERMS = 10_000     # terms of one determinant (or minor) at most: beyond, evaluating it would crawl
METHOD = "cofactor"


class _Matrix:
    """The least of a matrix nodal_system needs: ``m[i, j]`` read and ``+=``."""

    def __init__(self, rows: int, cols: int, zero: Any) -> None:
        self.cells = [[zero] * cols for _ in range(rows)]

    def __getitem__(self, ij: tuple[int, int]) -> Any:
        return self.cells[ij[0]][ij[1]]

    def __setitem__(self, ij: tuple[int, int], v: Any) -> None:
        self.cells[ij[0]][ij[1]] = v


def _sparse_det(rows: list[dict[int, Any]], zero: Any, deadline: float) -> Any:
    """Determinant of the square matrix given as one ``{column: entry}`` per row.

    Cofactor expansion along the rows in order of fewest entries; a minor is identified by
    the set of columns used so far (a bit mask), so each is computed once.
    """
    n = len(rows)
    order = sorted(range(n), key=lambda r: len(rows[r]))
    sign, p = 1, order[:]
    for i in range(n):  # the sign of the row permutation
        while p[i] != i:
            j = p[i]
            p[i], p[j] = p[j], p[i]
            sign = -sign
    memo: dict[int, Any] = {}

    def minor(k: int, used: int) -> Any:
        if k == n:
            return None  # the empty minor: 1
        hit = memo.get(used)
        if hit is not None:
            return hit
        total = zero
        for j, a in rows[order[k]].items():
            if used >> j & 1:
                continue
            if time.monotonic() > deadline:  # checked before every product (a large one takes long)
                raise TimeoutError
            sub = minor(k + 1, used | 1 << j)
            if sub is not None and not sub:
                continue
            term = a if sub is None else a * sub
            # the column's position among those still unused gives the cofactor's sign
            if (j - bin(used & ((1 << j) - 1)).count("1")) % 2:
                total = total - term
            else:
                total = total + term
        if len(total) > MAX_TERMS:
            raise OverflowError
        memo[used] = total
        return total

    det = minor(0, 0)
    return det if sign > 0 else -det


def description(net: Netlist) -> dict[str, Any]:
    """The derivation cache's description of ``net`` derived here.

    Parameters
    ----------
    net : Netlist
        The circuit's netlist.

    Returns
    -------
    dict[str, Any]
        JSON-ready description (the cache key).
    """
    return {**net.description(), "method": METHOD}


def derive_circuit_uncached(net: Netlist, seconds: float = DERIVE_SECONDS) -> TransferFunction:
    """H(s) = V(out)/V(in) of ``net`` (see the module notes). Raises :class:`InputError`
    (no path) when the output does not depend on the input, when the equations are
    singular for every value, or when the derivation takes over ``seconds``.

    Parameters
    ----------
    net : Netlist
        The circuit's netlist.
    seconds : float
        Longest time the derivation may take, s.

    Returns
    -------
    TransferFunction
        Numerator and denominator terms, ascending powers of s, and the roles.
    """
    from sympy.polys.domains import ZZ
    from sympy.polys.rings import ring

    deadline = time.monotonic() + seconds
    roles = net.roles
    kind = {e.role: e.kind for e in net.elements}
    poly_ring, *gens = ring(["s"] + [f"v{i}" for i in range(len(roles))], ZZ)
    field = poly_ring.to_field()
    s = field(gens[0])
    var = {r: field(g) for r, g in zip(roles, gens[1:])}
    # nodal_system takes 1/value for a resistor and 1/(s value) for an inductor: hand it the
    # reciprocal of the variable, so the admittance is the variable itself (over s for L)
    inverse = {r: (1 / var[r] if kind.get(r) in ("R", "L") else var[r]) for r in roles}
    a, b, out = nodal_system(net, inverse.__getitem__, s, 1, lambda m, c: _Matrix(m, c, field.zero))
    size = len(a.cells)
    rows, rhs = [], []
    for i in range(size):  # clear each row's denominators (a power of s, from inductors)
        a.cells[i] = [field(x) for x in a.cells[i]]
        b.cells[i][0] = field(b.cells[i][0])
        den = poly_ring.one
        for x in a.cells[i] + [b.cells[i][0]]:
            den = den.lcm(x.denom)
        rows.append({j: x.numer * den.exquo(x.denom) for j, x in enumerate(a.cells[i]) if x})
        rhs.append(b.cells[i][0].numer * den.exquo(b.cells[i][0].denom))
    try:
        d = _sparse_det(rows, poly_ring.zero, deadline)
        with_b = [{**{j: x for j, x in r.items() if j != out}, **({out: v} if v else {})}
                  for r, v in zip(rows, rhs)]
        num = _sparse_det(with_b, poly_ring.zero, deadline)
    except TimeoutError:
        raise InputError(f"deriving this circuit's transfer function took longer than {seconds:g} s "
                         "(the limit) and was stopped; a smaller circuit or fewer nodes derive "
                         "faster") from None
    except OverflowError:
        raise InputError(f"this circuit's transfer function has more than {MAX_TERMS:,} terms in the "
                         "part values (the limit), too many to evaluate quickly; split it into "
                         "buffered stages or join fewer nodes") from None
    if not d:
        raise InputError("the circuit's equations are singular for any part values (a node "
                         "whose voltage nothing determines)")
    if not num:
        raise InputError("the output does not depend on the input: no signal path from in to out")
    _g, num, d = num.cofactors(d)
    return _transfer_function(num, d, roles, kind)


def _transfer_function(num: Any, den: Any, roles: tuple[str, ...], kind: dict[str, str]) -> TransferFunction:
    """N and D (polynomials in s and the variables) as coefficient data in the roles."""
    top = [0] * len(roles)  # the highest power of each variable in N and D
    for poly in (num, den):
        for mono in poly.monoms():
            top = [max(t, e) for t, e in zip(top, mono[1:])]
    flips = [kind.get(r) in ("R", "L") for r in roles]  # these variables are reciprocals

    def coefficients(poly: Any) -> tuple[Coefficient, ...]:
        by_power: dict[int, list] = {}
        for mono, c in sorted(poly.terms()):
            number = float(c)
            factors = []
            for r, e, t, flip in zip(roles, mono[1:], top, flips):
                p = t - e if flip else e
                if not flip and kind.get(r) is None:  # an op-amp's 2 pi GBW
                    number *= (2 * math.pi) ** e
                if p:
                    factors.append((r, p))
            by_power.setdefault(mono[0], []).append((number, tuple(factors)))
        degree = max(by_power)
        return tuple(tuple(by_power.get(k, ())) for k in range(degree + 1))

    return TransferFunction(roles, coefficients(num), coefficients(den))


@lru_cache(maxsize=256)
def derive_circuit(net: Netlist) -> TransferFunction:
    """:func:`derive_circuit_uncached` through the derivation cache (the user's cache folder,
    checked against the numerical nodal solution), and kept for this process."""
    return cached_derivation(net, description(net), derive_circuit_uncached)
