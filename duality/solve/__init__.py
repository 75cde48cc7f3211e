"""Stage 2, solve: from a model to its duals, each a result that knows its provenance.

The solver chain in ``derive`` tries the catalogue of closed forms (``forms`` for production
and utility functions, ``dual_forms`` for the flexible dual-side forms, each with its published
source), then the symbolic route under a budget (``budget``), then the batched numeric route
(``numeric``, ``batch``).  ``derive_dual`` derives the other duals of a model given on the dual
side; ``result`` holds :class:`Derived`; ``calculus`` symbolic-or-numeric functions with
derivatives.  Imports only :mod:`duality.model`.
"""
