"""LaTeX targets: equation snippets and a standalone document of the whole derivation.

``latex``: one ``equation`` environment per function, ``c(w_{1}, w_{2}, y) = ...`` in the
parameters' symbols, each with a ``\\label{eq:<name>:<function>}``; parameter values (when
``values=True``) follow as a comment line.  ``latex-document``: an ``article`` with the
model, each dual with its route, method and source, its demands, validity conditions,
notes and a parameter table.  Printed by sympy's :class:`~sympy.printing.latex.LatexPrinter`
(subclassed only to write floats with round-trip digits).
"""
from __future__ import annotations

import sympy as sp
from sympy.printing.latex import LatexPrinter

from ...model.roles import FUNCTIONS
from ...texts import CAUTION
from ._collect import CASES_ALLOWED, BASE_ALLOWED, Collection, Item, check_supported, fmt_float
from .code import _version


class _Latex(LatexPrinter):
    def _print_Float(self, expr):
        if expr._prec <= 53:
            return fmt_float(float(expr))
        return super()._print_Float(expr)


def _tex(expr) -> str:
    return _Latex().doprint(expr)


def _lhs(it: Item) -> str:
    d = it.derived
    head = _tex(sp.Symbol(it.head)) if it.quantity else FUNCTIONS[d.kind].latex
    return f"{head}({', '.join(_tex(a) for a in it.args)})"


_TEXT_MAP = {"\\": r"\textbackslash{}", "&": r"\&", "%": r"\%", "$": r"\$", "#": r"\#",
             "_": r"\_", "{": r"\{", "}": r"\}", "~": r"\textasciitilde{}",
             "^": r"\textasciicircum{}", "–": "--", "—": "---", "−": "-", "·": r"$\cdot$",
             "∂": r"$\partial$", "Σ": r"$\Sigma$", "π": r"$\pi$", "≤": r"$\leq$",
             "≥": r"$\geq$", "→": r"$\to$", "×": r"$\times$", "’": "'", "‘": "`",
             "“": "``", "”": "''", "±": r"$\pm$", "∞": r"$\infty$", "λ": r"$\lambda$"}


def escape(text: str) -> str:
    """Plain text for a LaTeX paragraph (special characters and common symbols)."""
    return "".join(_TEXT_MAP.get(c, c) for c in str(text))


def _equation(it: Item, name: str) -> list[str]:
    check_supported(it.expr, "latex", BASE_ALLOWED + CASES_ALLOWED, it.name)
    return [r"\begin{equation}", f"  \\label{{eq:{name}:{it.name}}}",
            f"  {_lhs(it)} = {_tex(it.expr)}", r"\end{equation}"]


def export_latex(col: Collection, *, name: str, values: bool = True) -> str:
    out = [f"% {name}: LaTeX exported by duality {_version()}. {CAUTION}"]
    for it in col.items:
        out.append(f"% {it.name}: {it.derived.label}; route {it.derived.route}"
                   + (f"; source: {it.derived.source}" if it.derived.source else ""))
        out += _equation(it, name)
        if values and it.valued:
            out.append("% values: " + ", ".join(f"{s} = {fmt_float(it.values[s])}"
                                                 for s in it.valued))
    return "\n".join(out) + "\n"


def export_latex_document(col: Collection, *, name: str, values: bool = True) -> str:
    out = [r"\documentclass{article}", r"\usepackage[utf8]{inputenc}",
           r"\usepackage{amsmath}", r"\usepackage{booktabs}", "",
           f"\\title{{{escape(name)}: derivation}}",
           f"\\author{{exported by duality {escape(_version())}}}", r"\date{}", "",
           r"\begin{document}", r"\maketitle", "", escape(CAUTION), ""]
    m = col.model
    if m is not None:
        out += [r"\section{Model}"]
        what = m.given.label
        lhs = _tex(m.level) if m.is_primal else "F"
        out += [f"The model is a {escape(m.role)} given by its {escape(what)}"
                + (f" ({escape(m.name)})" if m.name else "") + ":",
                r"\begin{equation*}", f"  {lhs} = {_tex(m.expr)}", r"\end{equation*}",
                "with quantities $" + ", ".join(_tex(q) for q in m.quantities)
                + "$ and prices $" + ", ".join(_tex(p) for p in m.prices) + "$"
                + (f", output price ${_tex(m.output_price)}$" if m.output_price is not None
                   else "")
                + (f", income ${_tex(m.income)}$" if m.income is not None else "") + ".", ""]
    duals = [it for it in col.items if not it.quantity]
    parts = [(d, [it for it in col.items if it.quantity and _parent(it, d)]) for d in duals]
    orphans = [it for it in col.items if it.quantity
               and not any(it in group for _, group in parts)]
    for head, group in parts:
        out += _section(head, group, name)
    if orphans:
        out += [r"\section{Other functions}", ""]
        for it in orphans:
            out += _function_block(it, name)
    if col.omitted:
        out += [r"\section{Not exported}", r"\begin{itemize}"]
        out += [f"  \\item {escape(o)}" for o in col.omitted]
        out += [r"\end{itemize}", ""]
    params = col.params
    if params:
        out += [r"\section{Parameters}", r"\begin{tabular}{lr}", r"\toprule",
                r"Parameter & Value \\", r"\midrule"]
        for p, v in params.items():
            out.append(f"${_tex(p)}$ & " + (f"${fmt_float(v)}$" if v is not None
                                             else "free") + r" \\")
        out += [r"\bottomrule", r"\end{tabular}", ""]
    out.append(r"\end{document}")
    return "\n".join(out) + "\n"


def _parent(it: Item, dual: Item) -> bool:
    d, p = it.derived, dual.derived
    return d.args == p.args and d.route == p.route and d.source == p.source and (
        (p.kind == "cost" and d.kind in ("conditional_demand", "share"))
        or (p.kind == "profit" and d.kind in ("supply", "factor_demand"))
        or (p.kind == "expenditure" and d.kind in ("hicksian_demand", "share"))
        or (p.kind == "indirect_utility" and d.kind in ("marshallian_demand", "share")))


def _function_block(it: Item, name: str) -> list[str]:
    d = it.derived
    out = [f"\\paragraph{{{escape(d.label[0].upper() + d.label[1:])} "
           f"{escape(it.quantity)}}}" if it.quantity else ""]
    out += _equation(it, name)
    out.append(f"Obtained by: {escape(d.method)}.")
    out.append("")
    return out


def _section(it: Item, group: list, name: str) -> list[str]:
    d = it.derived
    out = [f"\\section{{{escape(d.label[0].upper() + d.label[1:])}}}"]
    out += _equation(it, name)
    out.append(f"Route: \\emph{{{escape(d.route)}}} ({escape(d.method)}).")
    out.append(("Source: " + escape(d.source) + ".") if d.source
               else "Source: derived here, not from a catalogue.")
    out.append("")
    if d.conditions:
        out.append(r"Valid where")
        out.append(r"\begin{itemize}")
        out += [f"  \\item ${_tex(c)}$" for c in d.conditions]
        out.append(r"\end{itemize}")
    if d.notes:
        out.append(r"Notes:")
        out.append(r"\begin{itemize}")
        out += [f"  \\item {escape(n)}" for n in d.notes]
        out.append(r"\end{itemize}")
    if group:
        out.append(f"\\subsection{{Demands of the {escape(d.label)}}}")
        for g in group:
            out += _function_block(g, name)
    return out


__all__ = ["export_latex", "export_latex_document", "escape"]
