"""One way to turn sympy expressions into numpy functions, used everywhere.

Derivatives of kinked functions (min, max, abs) bring in ``Heaviside`` and ``DiracDelta``;
numpy has no ``DiracDelta``, so it is mapped to zero (its value away from the kink, which
is where a numeric solver or check evaluates) and ``Heaviside`` to ``numpy.heaviside``
with the value one half at zero.

:class:`BufferedFunction` is the same translation for hot loops: the expressions become a
sequence of ufunc calls writing into buffers the caller owns (subexpressions without a
direct ufunc still go through :func:`numpy_function`).
"""
from __future__ import annotations

from typing import Callable, Sequence

import numpy as np
import sympy as sp


def _heaviside(x, h0=0.5):
    return np.heaviside(x, h0)


def _dirac_delta(x, *order):
    return np.zeros_like(np.asarray(x, dtype=float))


NUMPY_MODULES = [{"Heaviside": _heaviside, "DiracDelta": _dirac_delta}, "numpy"]


#: exact numbers above this many bits become floats before translation: Python cannot
#: mix a larger integer with a float (OverflowError), a float gives inf or 0 honestly
_BIG_BITS = 960


def _float_big_numbers(expr):
    """``expr`` with exact numbers too large for a float replaced by sympy Floats."""
    if isinstance(expr, (list, tuple)):
        return type(expr)(_float_big_numbers(e) for e in expr)
    if not isinstance(expr, sp.Basic):
        return expr
    big = {r: sp.Float(r, 17) for r in expr.atoms(sp.Rational)
           if max(abs(r.p).bit_length(), r.q.bit_length()) > _BIG_BITS}
    return expr.xreplace(big) if big else expr


def _no_ite(expr):
    """If-then-else conditions (from a piecewise level put into a piecewise condition)
    written as (c & a) | (~c & b): sympy's numpy printer would otherwise run
    ``simplify_logic`` on each, which takes seconds on relational conditions."""
    if not isinstance(expr, sp.Basic) or not expr.has(sp.ITE):
        return expr
    return expr.replace(lambda e: isinstance(e, sp.ITE),
                        lambda e: sp.Or(sp.And(e.args[0], e.args[1]),
                                        sp.And(sp.Not(e.args[0]), e.args[2])))


def numpy_function(args: Sequence, expr, *, cse: bool = False) -> Callable:
    """``sympy.lambdify`` with the package's numpy modules (exact numbers too large for a
    float evaluate as floats, giving inf or 0 rather than an OverflowError)."""
    if isinstance(expr, (list, tuple)):
        expr = type(expr)(_no_ite(e) for e in expr)
    else:
        expr = _no_ite(expr)
    return sp.lambdify(args, _float_big_numbers(expr), modules=NUMPY_MODULES, cse=cse)


__all__ = ["numpy_function", "NUMPY_MODULES"]


# -- buffered evaluation ------------------------------------------------------------------
# A batched solver evaluates the same expressions many times on arrays of the same length.
# Fresh numpy temporaries for every operation cost more than the arithmetic (the memory is
# returned to the system and faulted in again on each call), so the expressions are also
# compiled into a straight sequence of ufunc calls writing into buffers the caller owns.

_UNARY = {sp.exp: "exp", sp.log: "log", sp.sin: "sin", sp.cos: "cos", sp.tan: "tan",
          sp.sinh: "sinh", sp.cosh: "cosh", sp.tanh: "tanh", sp.asin: "arcsin",
          sp.acos: "arccos", sp.atan: "arctan", sp.Abs: "absolute"}


def _real_into(dest, value):
    """Write a value from a lambdified fallback into ``dest`` (complex results with a
    visible imaginary part become NaN, as elsewhere in the package)."""
    a = np.asarray(value)
    if np.iscomplexobj(a):
        re = np.real(a).astype(float)
        re[np.abs(np.imag(a)) > 1e-12 * (1 + np.abs(re))] = np.nan
        a = re
    np.copyto(dest, np.broadcast_to(a, dest.shape), casting="unsafe")


def _number(e):
    """A real float for a numeric sympy leaf, else None."""
    if not (e.is_Number or e.is_NumberSymbol):
        return None
    try:
        z = complex(e)
    except (TypeError, ValueError):
        return None
    return z.real if z.imag == 0 else None


class _Gen:
    def __init__(self, names: dict, fallback_args):
        self.names = names            # sympy leaf -> source name
        self.lines: list[str] = []
        self.free: list[str] = []
        self.ntmp = 0
        self.fallback_args = fallback_args
        self.fallbacks: list[Callable] = []

    # buffers
    def alloc(self) -> str:
        if self.free:
            return self.free.pop()
        self.ntmp += 1
        return f"t{self.ntmp - 1}"

    def release(self, name):
        if name is not None:
            self.free.append(name)

    def emit_line(self, s):
        self.lines.append(s)

    # operands
    def leaf(self, e):
        if e in self.names:
            return self.names[e]
        v = _number(e)
        if v is None:
            return None
        if v != v:
            return "_nan"
        if v in (float("inf"), float("-inf")):
            return "_inf" if v > 0 else "(-_inf)"
        return repr(v)

    def operand(self, e):
        """(source, temp) — temp is a buffer to release after use, or None."""
        s = self.leaf(e)
        if s is not None:
            return s, None
        t = self.alloc()
        self.emit(e, t)
        return t, t

    # emission
    def emit(self, e, dest):
        s = self.leaf(e)
        if s is not None:
            self.emit_line(f"_copyto({dest}, {s})")
        elif e.is_Add:
            self._nary(e, dest, additive=True)
        elif e.is_Mul:
            self._nary(e, dest, additive=False)
        elif e.is_Pow:
            self._pow(e, dest)
        elif e.func in _UNARY and len(e.args) == 1:
            a, ta = self.operand(e.args[0])
            self.emit_line(f"_np.{_UNARY[e.func]}({a}, out={dest})")
            self.release(ta)
        else:
            self._fallback(e, dest)

    def _fallback(self, e, dest):
        # common subexpressions inside the subtree are passed in from their buffers
        inner = sorted(e.free_symbols - set(self.fallback_args), key=str)
        self.fallbacks.append(sp.lambdify(list(self.fallback_args) + inner, e,
                                          modules=NUMPY_MODULES))
        extra = "".join(f", {self.names[s]}" for s in inner)
        self.emit_line(f"_real_into({dest}, _fb[{len(self.fallbacks) - 1}](*_args{extra}))")

    def _nary(self, e, dest, additive: bool):
        # items: (inverse?, node) — inverse means subtract (Add) or divide (Mul)
        items = []
        if additive:
            for t in e.args:
                c, rest = t.as_coeff_Mul()
                if c.is_Number and c < 0 and rest != 1:
                    items.append((True, -t))
                else:
                    items.append((False, t))
            op, inv = "_np.add", "_np.subtract"
        else:
            for f in e.args:
                if f.is_Pow and _number(f.exp) is not None and _number(f.exp) < 0:
                    items.append((True, sp.Pow(f.base, -f.exp)))
                else:
                    items.append((False, f))
            op, inv = "_np.multiply", "_np.divide"
        # compound items first so the first one is computed in place
        items.sort(key=lambda it: (self.leaf(it[1]) is not None, it[0]))
        first_inv, first = items[0]
        rest = items[1:]
        if self.leaf(first) is None:
            self.emit(first, dest)
            if first_inv:
                plain = [it for it in rest if not it[0] and self.leaf(it[1]) is not None]
                if plain:                 # a − dest or a / dest in one call
                    rest.remove(plain[0])
                    self.emit_line(f"{inv}({self.leaf(plain[0][1])}, {dest}, out={dest})")
                else:
                    self.emit_line(f"_np.negative({dest}, out={dest})" if additive
                                   else f"_np.divide(1.0, {dest}, out={dest})")
        else:
            # all items are leaves: combine the first two directly
            a = self.leaf(first)
            if rest:
                b_inv, b = rest.pop(0)
                bs = self.leaf(b)
                if first_inv and not b_inv:
                    self.emit_line(f"{inv}({bs}, {a}, out={dest})")
                elif first_inv and b_inv:
                    if additive:
                        self.emit_line(f"_np.add({a}, {bs}, out={dest})")
                        self.emit_line(f"_np.negative({dest}, out={dest})")
                    else:
                        self.emit_line(f"_np.multiply({a}, {bs}, out={dest})")
                        self.emit_line(f"_np.divide(1.0, {dest}, out={dest})")
                else:
                    self.emit_line(f"{inv if b_inv else op}({a}, {bs}, out={dest})")
            else:
                self.emit_line(f"_copyto({dest}, {a})")
                if first_inv:
                    self.emit_line(f"_np.negative({dest}, out={dest})" if additive
                                   else f"_np.divide(1.0, {dest}, out={dest})")
        for is_inv, node in rest:
            s, t = self.operand(node)
            self.emit_line(f"{inv if is_inv else op}({dest}, {s}, out={dest})")
            self.release(t)

    def _pow(self, e, dest):
        base, ex = e.base, e.exp
        v = _number(ex)
        if v is None:
            b, tb = self.operand(base)
            x, tx = self.operand(ex)
            self.emit_line(f"_np.power({b}, {x}, out={dest})")
            self.release(tb)
            self.release(tx)
            return
        b, tb = self.operand(base)
        k2 = 2 * v
        if k2 == int(k2) and abs(v) <= 16:
            k, half = int(abs(v)), (int(abs(k2)) % 2 == 1)
            if half:
                self.emit_line(f"_np.sqrt({b}, out={dest})")
                if k == 1:
                    self.emit_line(f"_np.multiply({dest}, {b}, out={dest})")
                elif k:
                    t = self.alloc()
                    self._ipow(b, k, t)
                    self.emit_line(f"_np.multiply({dest}, {t}, out={dest})")
                    self.release(t)
            elif k == 1 and v < 0:
                self.emit_line(f"_np.divide(1.0, {b}, out={dest})")
                self.release(tb)
                return
            elif k == 0:
                self.emit_line(f"_copyto({dest}, 1.0)")
            else:
                self._ipow(b, k, dest)
            if v < 0:
                self.emit_line(f"_np.divide(1.0, {dest}, out={dest})")
        else:
            self.emit_line(f"_np.power({b}, {v!r}, out={dest})")
        self.release(tb)

    def _ipow(self, b, k, dest):
        """dest = b**k for an integer k >= 1 by repeated squaring (left to right)."""
        if k == 1:
            self.emit_line(f"_copyto({dest}, {b})")
            return
        for i, bit in enumerate(bin(k)[3:]):  # the bits after the leading one
            if i == 0:
                self.emit_line(f"_np.multiply({b}, {b}, out={dest})")
            else:
                self.emit_line(f"_np.multiply({dest}, {dest}, out={dest})")
            if bit == "1":
                self.emit_line(f"_np.multiply({dest}, {b}, out={dest})")


class BufferedFunction:
    """Expressions compiled into numpy ufunc calls that write into caller-owned buffers.

    ``fn(ins, outs, tmp)``: ``ins`` holds one array (or number) per argument, ``outs``
    one writable array per expression, ``tmp`` at least :attr:`ntmp` writable arrays of
    the same length.  Common subexpressions are shared and buffers reused once their last
    use has passed; powers with integer or half-integer exponents become products and
    square roots; anything without a direct ufunc (kinks, piecewise definitions, ...)
    is evaluated by :func:`numpy_function` for that subexpression alone.  Call it under
    ``numpy.errstate`` as needed: it does not set one.
    """

    def __init__(self, args: Sequence, exprs: Sequence):
        args = list(args)
        exprs = [sp.sympify(e) for e in exprs]
        names = {a: f"a{i}" for i, a in enumerate(args)}
        gen = _Gen(names, args)
        reps, reduced = sp.cse(exprs, symbols=sp.numbered_symbols("c", cls=sp.Dummy))
        # only numeric subexpressions get a buffer: conditions go back where they are used
        kept, sub = [], {}
        for sym, r in reps:
            r = r.xreplace(sub)
            if isinstance(r, sp.logic.boolalg.Boolean) or not r.is_Atom and r.is_Relational:
                sub[sym] = r
            else:
                kept.append((sym, r))
        reps, reduced = kept, [r.xreplace(sub) for r in reduced]
        # last use of each common subexpression (index into reps + outputs)
        last = {}
        for k, node in enumerate([r for _, r in reps] + list(reduced)):
            for s in node.free_symbols:
                last[s] = k
        order = [(sym, r) for sym, r in reps]
        for k, (sym, r) in enumerate(order):
            buf = gen.alloc()
            gen.emit(r, buf)
            names[sym] = buf
            for s in r.free_symbols:
                if s in last and last[s] == k and s not in args:
                    gen.release(names[s])
            if sym not in last:          # unused (should not happen)
                gen.release(buf)
        for j, r in enumerate(reduced):
            gen.emit(r, f"o{j}")
            k = len(order) + j
            for s in r.free_symbols:
                if s in last and last[s] == k and s not in args:
                    gen.release(names[s])
        head = ["def _kernel(_args, _outs, _tmp):"]
        if args:
            head.append(f"    {', '.join(names[a] for a in args)}, = _args")
        head.append(f"    {', '.join(f'o{j}' for j in range(len(reduced)))}, = _outs")
        if gen.ntmp:
            head.append(f"    {', '.join(f't{i}' for i in range(gen.ntmp))}, = "
                        f"_tmp[:{gen.ntmp}]")
        self.source = "\n".join(head + ["    " + ln for ln in gen.lines] + ["    return None"])
        self.ntmp = gen.ntmp
        self.nout = len(reduced)
        scope = {"_np": np, "_copyto": np.copyto, "_real_into": _real_into,
                 "_fb": gen.fallbacks, "_nan": float("nan"), "_inf": float("inf")}
        exec(compile(self.source, "<duality buffered function>", "exec"), scope)
        self._fn = scope["_kernel"]

    def __call__(self, ins, outs, tmp) -> None:
        self._fn(ins, outs, tmp)


__all__ += ["BufferedFunction"]
