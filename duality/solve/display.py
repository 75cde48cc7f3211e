"""How a derived formula reads, as text or LaTeX: numeric constants as decimals, an
exponential in log form, a long sum over several lines.

Symbolic solving leaves constants such as ``2*2**(3/4)*3**(5/8)/15`` (nested roots of
the parameter values) and flexible forms such as the translog as ``exp(…)`` of a long
sum.  A reader wants ``1.29613*w1**(3/8)…`` and ``ln c = a0 + a1*log(w1) + …``; these
functions give that, for the command line (:meth:`Derived.summary`) and the app alike.
Only the display changes: the expressions used for evaluation stay exact.
"""
from __future__ import annotations

import sympy as sp


def decimals(expr, digits: int = 6):
    """``expr`` with every numeric part that is not a plain fraction (a root, a power of
    a number, a logarithm of one) replaced by its decimal value to ``digits`` figures;
    symbols, parameters and fractional exponents stay as they are."""
    expr = sp.sympify(expr)
    return expr.replace(lambda e: e.is_number and not e.is_Atom and not e.is_Rational,
                        lambda e: sp.Float(e.evalf(digits + 9), digits))


def log_form(head: str, expr, ln: str = "ln ") -> tuple[str, sp.Expr]:
    """``(ln head, body)`` when ``expr`` is ``exp(body)``, else ``(head, expr)``."""
    if isinstance(expr, sp.Expr) and expr.func is sp.exp:
        return ln + head, expr.args[0]
    return head, expr


def terms(expr, printer) -> list[str]:
    """The terms of a sum as printed pieces: the first bare, later ones led by + or −
    (a single expression is one piece)."""
    if not expr.is_Add:
        return [printer(expr)]
    out = []
    for k, term in enumerate(expr.as_ordered_terms()):
        neg = term.could_extract_minus_sign()
        out.append(("- " if neg else "+ " if k else "") + printer(-term if neg else term))
    return out


def lines(pieces: list[str], width: int) -> list[str]:
    """Pieces gathered into lines of at most ``width`` characters (a longer piece gets
    a line of its own)."""
    out, cur = [], ""
    for piece in pieces:
        if cur and len(cur) + 1 + len(piece) > width:
            out.append(cur)
            cur = piece
        else:
            cur = f"{cur} {piece}".strip()
    out.append(cur)
    return out


def text_equation(head: str, expr, width: int = 88, indent: str = "    ") -> str:
    """``head = expr`` as text: decimals, log form, and a long sum broken after whole
    terms onto indented lines."""
    head, body = log_form(head, decimals(expr))
    full = f"{head} = {sp.sstr(body)}"
    if len(full) <= width or not body.is_Add:
        return full
    rows = lines(terms(body, sp.sstr), width - len(indent))
    return f"{head} = {rows[0]}" + "".join(f"\n{indent}{r}" for r in rows[1:])


__all__ = ["decimals", "log_form", "terms", "lines", "text_equation"]
