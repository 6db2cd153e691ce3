"""Netlists and their transfer functions, derived once by nodal analysis.

A netlist is a handful of two-terminal elements (R, L, C) and op-amps between named
nodes. The input is an ideal voltage source at node ``in`` against ground ``0``; the output
is the voltage at node ``out``. :func:`symbolic_coefficients` writes the nodal equations
with sympy and solves them by Cramer's rule: the numerator and denominator of H(s) as
polynomials in s whose coefficients are polynomials in the element values.

:func:`derive` keeps each coefficient as plain data, a sum of terms
``number * value_1 ** power_1 * value_2 ** power_2 ...`` (:data:`Coefficient`), and
evaluates it with numpy over every sample at once, in the order ``sympy.lambdify`` would
(so the numbers are the ones a compiled expression gives, bit for bit). Derivations are
kept per process and in the user's cache folder (:mod:`filters.derivation_cache`), so
sympy is imported only when a netlist is seen for the first time on a machine.

Op-amps are ideal (virtual short between the inputs) unless the netlist names a
gain-bandwidth role for them; then the single-pole model A(s) = 2*pi*GBW / s is used,
with GBW in Hz taken from that role's value.
"""
from __future__ import annotations

import ast
import math
from dataclasses import dataclass
from functools import lru_cache
from typing import Any, Callable, Literal

import numpy as np

from . import derivation_cache

__all__ = [
    "ElementKind",
    "GROUND",
    "INPUT",
    "OUTPUT",
    "Term",
    "Coefficient",
    "Element",
    "OpAmp",
    "Netlist",
    "evaluate_coefficient",
    "TransferFunction",
    "nodal_system",
    "symbolic_coefficients",
    "coefficient_from_code",
    "derive_uncached",
    "agrees_with_nodal_solution",
    "cached_derivation",
    "derive",
]

ElementKind = Literal["R", "L", "C"]
GROUND = "0"
INPUT = "in"
OUTPUT = "out"

# One term: (number, ((role, power), ...)), the factors in the order they are multiplied.
Term = tuple[float, tuple[tuple[str, int], ...]]
# One coefficient of s^k: its terms, summed left to right; () is zero.
Coefficient = tuple[Term, ...]


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

    def description(self) -> dict[str, Any]:
        """The netlist as plain JSON data, in its own order (the derivation cache's key)."""
        return {"elements": [[e.kind, e.role, e.a, e.b] for e in self.elements],
                "opamps": [[o.role, o.plus, o.minus, o.out, o.gbw_role] for o in self.opamps]}


def evaluate_coefficient(terms: Coefficient, values: dict[str, np.ndarray]) -> float | np.ndarray:
    """One coefficient for role values ``values`` (arrays shaped (samples,), SI units).

    Terms are summed left to right and each term's factors multiplied left to right after
    its number, as the code ``sympy.lambdify`` prints for the same expression does: the
    same floating-point operations in the same order, hence the same numbers.

    Parameters
    ----------
    terms : Coefficient
        The coefficient's terms ``[number, [[role, power], ...]]``.
    values : dict of str to np.ndarray
        Role -> (S,) values in SI units.

    Returns
    -------
    float or np.ndarray
        (S,) coefficient values (a float when every term is constant).
    """
    total: float | np.ndarray = 0.0
    for k, (number, factors) in enumerate(terms):
        term: float | np.ndarray = number
        for role, power in factors:
            v = values[role]
            term = term * (v if power == 1 else v ** power)
        total = term if k == 0 else total + term
    return total


@dataclass(frozen=True)
class TransferFunction:
    """H(s) = N(s)/D(s) as coefficient data, ascending powers of s.

    ``num_terms`` and ``den_terms`` hold one :data:`Coefficient` per power of s (the last
    one is not zero). :meth:`numerator` and :meth:`denominator` map a dict
    ``{role: values}`` (arrays shaped (samples,), SI units) to an array shaped
    (samples, degree + 1).
    """

    roles: tuple[str, ...]
    num_terms: tuple[Coefficient, ...]
    den_terms: tuple[Coefficient, ...]

    @property
    def num_degree(self) -> int:
        return len(self.num_terms) - 1

    @property
    def den_degree(self) -> int:
        return len(self.den_terms) - 1

    @property
    def num_powers(self) -> tuple[int, ...]:
        """The powers of s whose numerator coefficient is not zero."""
        return tuple(k for k, c in enumerate(self.num_terms) if c)

    def numerator(self, values: dict[str, np.ndarray]) -> np.ndarray:
        return self._evaluate(self.num_terms, values)

    def denominator(self, values: dict[str, np.ndarray]) -> np.ndarray:
        return self._evaluate(self.den_terms, values)

    def _evaluate(self, coeffs: tuple[Coefficient, ...], values: dict[str, np.ndarray]) -> np.ndarray:
        vals = {r: np.asarray(values[r], dtype=float) for r in self.roles}
        shape = np.broadcast(*vals.values()).shape if vals else ()
        cols = [np.broadcast_to(np.asarray(evaluate_coefficient(c, vals), dtype=float), shape)
                for c in coeffs]
        return np.stack(cols, axis=-1)


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


def nodal_system(net: Netlist, value: Callable[[str], Any], s: Any, two_pi: Any,
                 zeros: Callable[[int, int], Any]) -> tuple[Any, Any, int]:
    """The nodal equations A x = b of ``net`` for V(in) = 1, and the unknown index of ``out``.

    Works on symbols (sympy: ``zeros=sympy.zeros``) and on numbers (numpy: complex
    arrays) alike: ``value(role)`` is a role's value, ``s`` the complex frequency.

    Parameters
    ----------
    net : Netlist
        The netlist.
    value : callable
        ``value(role)`` -> the role's value (a symbol or an array).
    s : Any
        The complex frequency (a symbol or complex numbers, rad/s).
    two_pi : Any
        2 pi as a symbol or a number.
    zeros : callable
        ``zeros(rows, cols)`` -> a zero matrix of the kind used.

    Returns
    -------
    tuple[Any, Any, int]
        The matrix A, the right-hand side b and the index of V(out) in x.
    """
    unknown = _nodes(net)
    index = {n: i for i, n in enumerate(unknown)}
    size = len(unknown)
    a = zeros(size, size)
    b = zeros(size, 1)
    driven = {o.out for o in net.opamps}

    def admittance(e: Element) -> Any:
        v = value(e.role)
        return {"R": 1 / v, "C": s * v, "L": 1 / (s * v)}[e.kind]

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
                b[row, 0] += y  # the source node is known: V(in) = 1
    # One constraint per op-amp replaces the KCL row of its output node.
    for o in net.opamps:
        row = index[o.out]

        def put(node: str, coeff: Any) -> None:
            if node in index:
                a[row, index[node]] += coeff
            elif node == INPUT:
                b[row, 0] -= coeff

        if o.gbw_role is None:  # ideal: V+ - V- = 0
            put(o.plus, 1)
            put(o.minus, -1)
        else:  # single pole: s*Vout = wt*(V+ - V-)
            wt = two_pi * value(o.gbw_role)
            put(o.out, s)
            put(o.plus, -wt)
            put(o.minus, wt)
    return a, b, index[OUTPUT]


def symbolic_coefficients(net: Netlist) -> tuple[tuple[Any, ...], tuple[Any, ...]]:
    """N(s) and D(s) of ``net`` as sympy expressions in its roles, ascending powers of s.

    The roles are positive sympy symbols of the same names. Imports sympy.

    Parameters
    ----------
    net : Netlist
        The netlist.

    Returns
    -------
    tuple[tuple[Any, ...], tuple[Any, ...]]
        Numerator and denominator coefficients (sympy expressions), ascending powers of s.
    """
    import sympy as sp

    s = sp.Symbol("s")
    sym = {r: sp.Symbol(r, positive=True) for r in net.roles}
    a, b, out = nodal_system(net, sym.__getitem__, s, 2 * sp.pi, sp.zeros)
    det = a.det(method="berkowitz")
    a_out = a.copy()
    a_out[:, out] = b
    h = sp.cancel(sp.together(a_out.det(method="berkowitz") / det))
    num, den = sp.fraction(h)
    num_c = tuple(reversed(sp.Poly(sp.expand(num), s).all_coeffs()))
    den_c = tuple(reversed(sp.Poly(sp.expand(den), s).all_coeffs()))
    return num_c, den_c


def _constant(node: ast.expr) -> float | int:
    """The value of a constant subexpression (numbers and pi), with Python's own operators."""
    if isinstance(node, ast.Constant) and type(node.value) in (int, float):
        return node.value
    if isinstance(node, ast.Name) and node.id == "pi":
        return math.pi
    if isinstance(node, ast.UnaryOp) and isinstance(node.op, ast.USub):
        return -_constant(node.operand)
    if isinstance(node, ast.BinOp) and isinstance(node.op, (ast.Mult, ast.Pow, ast.Div)):
        left, right = _constant(node.left), _constant(node.right)
        return {ast.Mult: left * right, ast.Pow: left ** right, ast.Div: left / right}[type(node.op)]
    raise ValueError(f"not a constant: {ast.dump(node)}")


def _term(node: ast.expr, sign: int, roles: tuple[str, ...]) -> Term | None:
    """A product printed as ``const*X*Y**2*...`` as a :data:`Term` (``None`` for zero)."""
    chain: list[ast.expr] = []
    while isinstance(node, ast.BinOp) and isinstance(node.op, ast.Mult):
        chain.append(node.right)
        node = node.left
    chain.append(node)
    chain.reverse()  # evaluation order: ((f0 * f1) * f2) ...
    number: float | int = 1
    k = 0
    while k < len(chain):  # leading constants, folded the way Python evaluates them
        try:
            c = _constant(chain[k])
        except ValueError:
            break
        number = c if k == 0 else number * c
        k += 1
    if k == 0 and isinstance(chain[0], ast.UnaryOp) and isinstance(chain[0].op, ast.USub):
        number, chain[0] = -1, chain[0].operand  # -X*Y: (-X)*Y is (-1.0*X)*Y bit for bit
    factors = []
    for f in chain[k:]:
        if isinstance(f, ast.Name) and f.id in roles:
            factors.append((f.id, 1))
        elif isinstance(f, ast.BinOp) and isinstance(f.op, ast.Pow) and isinstance(f.left, ast.Name) \
                and f.left.id in roles and isinstance(f.right, ast.Constant) \
                and type(f.right.value) is int and f.right.value >= 1:
            factors.append((f.left.id, f.right.value))
        else:
            raise ValueError(f"not a product of roles after a number: {ast.dump(f)}")
    if number == 0:
        return None
    return float(sign * number), tuple(factors)


def coefficient_from_code(code: str, roles: tuple[str, ...]) -> Coefficient:
    """The :data:`Coefficient` for one expression as ``sympy.lambdify`` prints it.

    ``code`` is only parsed (``ast``), never run; a sum of products of roles after a
    number is accepted, anything else raises ``ValueError``.

    Parameters
    ----------
    code : str
        The printed expression.
    roles : tuple of str
        The role names the expression may use.

    Returns
    -------
    Coefficient
        Terms ``[number, [[role, power], ...]]``.
    """
    node = ast.parse(code.strip(), mode="eval").body
    parts: list[tuple[int, ast.expr]] = []
    while isinstance(node, ast.BinOp) and isinstance(node.op, (ast.Add, ast.Sub)):
        parts.append((1 if isinstance(node.op, ast.Add) else -1, node.right))
        node = node.left
    parts.append((1, node))
    parts.reverse()
    terms = [_term(n, sign, roles) for sign, n in parts]
    return tuple(t for t in terms if t is not None)


def _lambdify_code(expr: Any, roles: tuple[str, ...]) -> str:
    """The expression of the function ``sympy.lambdify(roles, expr, "numpy")`` would run."""
    import inspect

    import sympy as sp

    f = sp.lambdify([sp.Symbol(r, positive=True) for r in roles], expr, "numpy")
    body = ast.parse(inspect.getsource(f)).body[0]
    ret = body.body[-1]  # type: ignore[attr-defined]
    if not isinstance(ret, ast.Return) or ret.value is None:
        raise ValueError("lambdify printed no return expression")
    return ast.unparse(ret.value)


def derive_uncached(net: Netlist) -> TransferFunction:
    """Derive H(s) = V(out)/V(in) of ``net`` with sympy, without the cache.

    Parameters
    ----------
    net : Netlist
        The netlist.

    Returns
    -------
    TransferFunction
        Numerator and denominator terms, ascending powers of s, and the roles.
    """
    num_c, den_c = symbolic_coefficients(net)
    roles = net.roles
    return TransferFunction(
        roles=roles,
        num_terms=tuple(coefficient_from_code(_lambdify_code(c, roles), roles) for c in num_c),
        den_terms=tuple(coefficient_from_code(_lambdify_code(c, roles), roles) for c in den_c),
    )


def agrees_with_nodal_solution(net: Netlist, tf: TransferFunction, rtol: float = 1e-9) -> bool:
    """Whether ``tf`` gives the H of ``net``'s nodal equations solved numerically (numpy)
    at two points (role values near 1, complex s near 1): a check of stored coefficients
    that needs no sympy.

    Parameters
    ----------
    net : Netlist
        The netlist.
    tf : TransferFunction
        The coefficients to check.
    rtol : float
        Relative tolerance.

    Returns
    -------
    bool
        True when both points agree within ``rtol``.
    """
    rng = np.random.default_rng(20240611)
    for _ in range(2):
        vals = {r: np.array([rng.uniform(0.5, 2.0)]) for r in net.roles}
        s = complex(rng.uniform(0.2, 1.0), rng.uniform(0.5, 2.0))
        a, b, out = nodal_system(net, lambda r: float(vals[r][0]), s, 2 * math.pi,
                                 lambda m, n: np.zeros((m, n), dtype=complex))
        try:
            want = np.linalg.solve(a, b)[out, 0]
        except np.linalg.LinAlgError:
            return False
        powers = s ** np.arange(max(tf.num_degree, tf.den_degree) + 1)
        got = (tf.numerator(vals)[0] @ powers[:tf.num_degree + 1]) \
            / (tf.denominator(vals)[0] @ powers[:tf.den_degree + 1])
        if not abs(got - want) <= rtol * abs(want) + 1e-300:
            return False
    return True


def cached_derivation(net: Netlist, description: dict[str, Any],
                      derive_fresh: Callable[[Netlist], TransferFunction]) -> TransferFunction:
    """H(s) of ``net`` from the derivation cache entry of ``description`` when a valid one
    agrees with the numerical nodal solution, else ``derive_fresh(net)``, stored for the
    next run.

    Parameters
    ----------
    net : Netlist
        The netlist.
    description : dict
        The netlist's description (the cache key).
    derive_fresh : callable
        ``derive_fresh(net)`` -> TransferFunction, used when the cache has no valid entry.

    Returns
    -------
    TransferFunction
        H(s) of ``net``.
    """
    stored = derivation_cache.load(description, net.roles)
    if stored is not None:
        tf = TransferFunction(net.roles, *stored)
        if agrees_with_nodal_solution(net, tf):
            return tf
    tf = derive_fresh(net)
    derivation_cache.store(description, net.roles, tf.num_terms, tf.den_terms)
    return tf


@lru_cache(maxsize=None)
def derive(net: Netlist) -> TransferFunction:
    """H(s) = V(out)/V(in) of ``net``: from the user's derivation cache when a valid entry
    is there (no sympy), else derived with sympy and stored for the next run."""
    return cached_derivation(net, net.description(), derive_uncached)
