"""The restriction record and parameter-value lookup."""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Iterable, Mapping

import sympy as sp

from ...errors import DualityError


def _is_linear(expr, params) -> bool:
    params = set(params)
    for s in expr.free_symbols & params:
        d = sp.diff(expr, s)
        if d.free_symbols & params:
            return False
    return True


KINDS = ("homogeneity", "adding-up", "symmetry")


# --------------------------------------------------------------------------------------
# The restriction record
# --------------------------------------------------------------------------------------
@dataclass(frozen=True)
class Restriction:
    """One restriction on the parameters.

    Attributes
    ----------
    kind : str
        ``"homogeneity"``, ``"adding-up"`` or ``"symmetry"``.
    equation : sympy.Eq
        The restriction, linear in the parameters for the usual forms.
    reason : str
        Why theory requires it, in plain words.
    parameters : tuple of Symbol
        All parameters of the derivation (used to validate names given to
        :func:`check_values`).
    """

    kind: str
    equation: sp.Eq
    reason: str
    parameters: tuple = field(default=(), compare=False)

    @property
    def expr(self) -> sp.Expr:
        """lhs - rhs (zero when the restriction holds)."""
        return self.equation.lhs - self.equation.rhs

    @property
    def symbols(self) -> tuple:
        """The parameters appearing in the equation, sorted by name."""
        return tuple(sorted(self.expr.free_symbols, key=lambda s: s.name))

    @property
    def linear(self) -> bool:
        return _is_linear(self.expr, self.expr.free_symbols)

    def residual(self, values: Mapping) -> float:
        """lhs - rhs at ``values`` (a mapping of parameter names or symbols to numbers)."""
        subs = _value_map(values, self.symbols)
        missing = [s.name for s in self.symbols if s not in subs]
        if missing:
            raise DualityError(
                f"no value given for parameter {', '.join(missing)} of the {self.kind} "
                f"restriction {sp.sstr(self.equation)}")
        val = self.expr.xreplace(subs)
        try:
            return float(val)
        except TypeError as exc:  # pragma: no cover - complex or symbolic leftovers
            raise DualityError(
                f"the {self.kind} restriction {sp.sstr(self.equation)} does not evaluate "
                f"to a real number at the given values ({val})") from exc

    def latex(self) -> str:
        return sp.latex(self.equation)

    def __str__(self) -> str:
        return f"[{self.kind}] {sp.sstr(self.equation)}: {self.reason}"


def _value_map(values: Mapping, symbols: Iterable[sp.Symbol]) -> dict:
    by_name = {s.name: s for s in symbols}
    out = {}
    for k, v in values.items():
        if isinstance(k, sp.Symbol):
            sym = by_name.get(k.name)
        elif isinstance(k, str):
            sym = by_name.get(k)
        else:
            raise DualityError(f"parameter key {k!r} is neither a name nor a sympy Symbol")
        if sym is None:
            continue
        try:
            out[sym] = sp.Float(float(v)) if not isinstance(v, (int, sp.Integer, sp.Rational)) \
                else sp.nsimplify(v)
        except (TypeError, ValueError) as exc:
            raise DualityError(f"value of parameter {sym.name} is not a number: {v!r}") from exc
    return out
