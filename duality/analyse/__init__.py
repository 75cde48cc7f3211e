"""Stage 3, analyse: what the duals imply.

Demand systems (``demand``: Shephard, Hotelling, Roy), elasticities (``elasticity``), identity
and property checks as records (``checks``), theory restrictions on parameters
(``restrictions``, ``theory``), regularity at every row of a data set (``regularity``) and
recovery of the primal behind a dual (``recovery``).  Imports :mod:`duality.model` and
:mod:`duality.solve` only.
"""
