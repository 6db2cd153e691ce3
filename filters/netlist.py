"""Netlists and their transfer functions, derived once by nodal analysis.

A netlist is a handful of two-terminal elements (R, L, C) and op-amps between named
nodes. The input is an ideal voltage source at node ``in`` against ground ``0``; the output
is the voltage at node ``out``. :func:`derive` writes the nodal equations with sympy,
solves them by Cramer's rule and returns the numerator and denominator of H(s) as
coefficient expressions in the element values. Those are compiled with ``lambdify`` into
numpy functions that evaluate every sample at once. The derivation is cached per netlist,
so a topology costs its symbolic work once per process.

Op-amps are ideal (virtual short between the inputs) unless the netlist names a
gain-bandwidth role for them; then the single-pole model A(s) = 2*pi*GBW / s is used,
with GBW in Hz taken from that role's value.
"""
from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache
from typing import Callable, Literal

import numpy as np
import sympy as sp

ElementKind = Literal["R", "L", "C"]
GROUND = "0"
INPUT = "in"
OUTPUT = "out"


@dataclass(frozen=True)
class Element:
    """A resistor (ohm), inductor (H) or capacitor (F) called ``role`` between nodes a and b."""

    kind: ElementKind
    role: str
    a: str
    b: str


@dataclass(frozen=True)
class OpAmp:
    """An op-amp driving node ``out`` from inputs ``plus`` and ``minus``.

    ``gbw_role`` names the role that holds its gain-bandwidth product in Hz; ``None`` means
    an ideal op-amp.
    """

    role: str
    plus: str
    minus: str
    out: str
    gbw_role: str | None = None


@dataclass(frozen=True)
class Netlist:
    """Elements and op-amps; the input source drives node ``in``, the output is node ``out``."""

    elements: tuple[Element, ...]
    opamps: tuple[OpAmp, ...] = ()

    @property
    def roles(self) -> tuple[str, ...]:
        """Every value-carrying role in a fixed order: elements, then op-amp bandwidths."""
        out = [e.role for e in self.elements]
        out += [o.gbw_role for o in self.opamps if o.gbw_role]
        return tuple(out)


@dataclass(frozen=True)
class TransferFunction:
    """H(s) = N(s)/D(s) as compiled coefficient functions, ascending powers of s.

    ``numerator`` and ``denominator`` each map a dict ``{role: values}`` (arrays shaped
    (samples,), SI units) to an array shaped (samples, degree + 1).
    """

    roles: tuple[str, ...]
    numerator: Callable[[dict[str, np.ndarray]], np.ndarray]
    denominator: Callable[[dict[str, np.ndarray]], np.ndarray]
    num_degree: int
    den_degree: int
    num_expr: tuple[sp.Expr, ...]
    den_expr: tuple[sp.Expr, ...]


S = sp.Symbol("s")


def _nodes(net: Netlist) -> list[str]:
    seen: list[str] = []
    for e in net.elements:
        for n in (e.a, e.b):
            if n not in seen:
                seen.append(n)
    for o in net.opamps:
        for n in (o.plus, o.minus, o.out):
            if n not in seen:
                seen.append(n)
    if INPUT not in seen or OUTPUT not in seen:
        raise ValueError("a netlist needs nodes 'in' and 'out'")
    return [n for n in seen if n not in (GROUND, INPUT)]


@lru_cache(maxsize=None)
def derive(net: Netlist) -> TransferFunction:
    """Derive H(s) = V(out)/V(in) of ``net`` symbolically and compile it for numpy."""
    roles = net.roles
    sym = {r: sp.Symbol(r, positive=True) for r in roles}
    unknown = _nodes(net)
    index = {n: i for i, n in enumerate(unknown)}
    size = len(unknown)
    a = sp.zeros(size, size)
    b = sp.zeros(size, 1)
    driven = {o.out for o in net.opamps}

    def admittance(e: Element) -> sp.Expr:
        v = sym[e.role]
        return {"R": 1 / v, "C": S * v, "L": 1 / (S * v)}[e.kind]

    # KCL at every unknown node that no op-amp drives (an op-amp output's current is free).
    for e in net.elements:
        y = admittance(e)
        for here, there in ((e.a, e.b), (e.b, e.a)):
            if here not in index or here in driven:
                continue
            row = index[here]
            a[row, row] += y
            if there in index:
                a[row, index[there]] -= y
            elif there == INPUT:
                b[row] += y  # the source node is known: V(in) = 1
    # One constraint per op-amp replaces the KCL row of its output node.
    for o in net.opamps:
        row = index[o.out]

        def put(node: str, coeff: sp.Expr) -> None:
            if node in index:
                a[row, index[node]] += coeff
            elif node == INPUT:
                b[row] -= coeff

        if o.gbw_role is None:  # ideal: V+ - V- = 0
            put(o.plus, sp.Integer(1))
            put(o.minus, sp.Integer(-1))
        else:  # single pole: s*Vout = wt*(V+ - V-)
            wt = 2 * sp.pi * sym[o.gbw_role]
            put(o.out, S)
            put(o.plus, -wt)
            put(o.minus, wt)
    det = a.det(method="berkowitz")
    a_out = a.copy()
    a_out[:, index[OUTPUT]] = b
    h = sp.cancel(sp.together(a_out.det(method="berkowitz") / det))
    num, den = sp.fraction(h)
    num_p = sp.Poly(sp.expand(num), S)
    den_p = sp.Poly(sp.expand(den), S)
    num_c = tuple(reversed(num_p.all_coeffs()))
    den_c = tuple(reversed(den_p.all_coeffs()))
    args = [sym[r] for r in roles]
    return TransferFunction(
        roles=roles,
        numerator=_compile(num_c, args),
        denominator=_compile(den_c, args),
        num_degree=len(num_c) - 1,
        den_degree=len(den_c) - 1,
        num_expr=num_c,
        den_expr=den_c,
    )


def _compile(coeffs: tuple[sp.Expr, ...], args: list[sp.Symbol]):
    funcs = [sp.lambdify(args, c, "numpy") for c in coeffs]
    names = [str(a) for a in args]

    def evaluate(values: dict[str, np.ndarray]) -> np.ndarray:
        vals = [np.asarray(values[n], dtype=float) for n in names]
        shape = np.broadcast(*vals).shape if vals else ()
        cols = [np.broadcast_to(np.asarray(f(*vals), dtype=float), shape) for f in funcs]
        return np.stack(cols, axis=-1)

    return evaluate
